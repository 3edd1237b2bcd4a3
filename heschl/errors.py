"""Exceptions and the one sentence shape every user-facing error follows.

Every message reads ``<where>: <key path>: <what is wrong>; <how to fix it>.`` so a
person can act on a single line.
"""
from __future__ import annotations

import difflib

__all__ = [
    "HeschlError",
    "DefinitionError",
    "InputDataError",
    "OutputError",
    "ProcessingError",
    "UnusableRecording",
    "problem",
    "did_you_mean",
]


class HeschlError(Exception):
    """Base of every error heschl raises on purpose."""


class DefinitionError(HeschlError, ValueError):
    """A paradigm, feature-set or study file is invalid."""


class InputDataError(HeschlError, ValueError):
    """A recording cannot be read or does not match its definitions."""


class UnusableRecording(InputDataError):
    """A recording was read but cannot give features (too many bad channels, ...).

    ``stage`` names the step that found it; ``record`` holds what that step had decided
    so far (e.g. the bad-channel detector's statistics), so the recording's page can show
    the evidence that led to the verdict.
    """

    def __init__(self, message, stage=None, record=None):
        super().__init__(message)
        self.stage = stage
        self.record = record or {}


class OutputError(HeschlError, OSError):
    """An output file or folder cannot be written (full disk, permissions, a file in the way)."""


class ProcessingError(HeschlError, RuntimeError):
    """A processing step could not produce a valid result."""


def problem(where, what, fix, key=None):
    """Build the one-line message: ``where: key: what; fix.``

    Parameters
    ----------
    where : str or path-like
        The file (or recording) the problem is in.
    what : str
        What is wrong, with the value received and its unit.
    fix : str
        How to fix it.
    key : str or None, default=None
        The key path inside the file, e.g. ``epochs.baseline``.
    """
    parts = [str(where)]
    if key:
        parts.append(str(key))
    text = ": ".join(parts) + ": " + what.rstrip(". ")
    if fix:
        text += "; " + fix.rstrip(". ")
    return " ".join((text + ".").split())


def did_you_mean(word, choices):
    """Return ``' (did you mean "x"?)'`` for the closest choice, or ``''``."""
    close = difflib.get_close_matches(str(word), [str(c) for c in choices], n=1, cutoff=0.6)
    return f' (did you mean "{close[0]}"?)' if close else ""
