"""Which recording a log line belongs to.

:func:`recording_context` names the recording being processed in this thread (or task);
:class:`RecordingFilter`, installed by the CLI on its handler, puts that name in front of
every heschl log line, so a stage's message ("3 bad channels interpolated") says whose
it is without every function passing the name along. Standard library only.
"""
from __future__ import annotations

import contextlib
import contextvars
import logging

__all__ = ["recording_context", "RecordingFilter", "current_recording", "RecordingLog", "recording_log"]

_CURRENT = contextvars.ContextVar("heschl_recording", default="")


def current_recording():
    """The name of the recording being processed here, or "" outside one."""
    return _CURRENT.get()


@contextlib.contextmanager
def recording_context(name):
    """Name the recording whose log lines follow, until the block ends."""
    token = _CURRENT.set(name)
    try:
        yield
    finally:
        _CURRENT.reset(token)


class RecordingFilter(logging.Filter):
    """Adds ``record.recording``: "<participant> <paradigm>: " inside a recording, else ""."""

    def filter(self, record):
        name = _CURRENT.get()
        record.recording = f"{name}: " if name else ""
        return True


class RecordingLog(logging.Handler):
    """Collects the heschl log lines made inside one recording's context."""

    def __init__(self, name):
        super().__init__(logging.INFO)
        self.recording = name
        self.lines = []
        self.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(message)s"))

    def emit(self, record):
        if _CURRENT.get() == self.recording:
            self.lines.append(self.format(record))


@contextlib.contextmanager
def recording_log(name):
    """Collect recording ``name``'s heschl log lines (INFO and above) while the block runs,
    whatever the console shows; yields the handler (its ``lines``)."""
    logger = logging.getLogger("heschl")
    handler = RecordingLog(name)
    level = logger.level
    if logger.getEffectiveLevel() > logging.INFO:
        logger.setLevel(logging.INFO)
    logger.addHandler(handler)
    try:
        yield handler
    finally:
        logger.removeHandler(handler)
        logger.setLevel(level)
