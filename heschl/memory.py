"""Giving freed memory back to the system between the stages of a recording.

glibc's malloc keeps freed blocks below its mmap threshold (which grows up to 32 MiB
with the blocks it sees freed) in the process's heap, so after many per-channel
temporaries of a few MiB (filters, resampling, detectors) the resident size stays at its
high-water mark although the memory is free. ``malloc_trim(0)`` (glibc's documented
malloc_trim(3)) returns those pages; heschl calls it between stages, where a stage's
temporaries are gone. Measured on the full-size benchmark oddball: the resampling
stage's peak 958 -> under 860 MiB (benchmarks/NOTES.md). Linux with glibc only;
elsewhere a no-op.
"""
from __future__ import annotations

import ctypes
import ctypes.util
import sys

__all__ = ["give_back"]

_LIBC = []


def _libc():
    if not _LIBC:
        found = None
        if sys.platform.startswith("linux"):
            try:
                lib = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
                found = lib.malloc_trim if hasattr(lib, "malloc_trim") else None
            except OSError:
                found = None
        _LIBC.append(found)
    return _LIBC[0]


def give_back():
    """Return the heap's free pages to the system (glibc); True when it could.

    Returns
    -------
    bool
    """
    trim = _libc()
    if trim is None:
        return False
    trim(0)
    return True
