"""Stimulus schedules of the three paradigms: when each stimulus starts.

Every onset lies on a 2 ms grid, so it falls exactly on a sample at 500 Hz and 1000 Hz;
at 512 Hz no grid would, and the nearest sample is within 1 ms of it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Schedule", "make_schedule", "DURATIONS", "GRID_S"]

#: Onset grid, s.
GRID_S = 0.002

#: Length of each paradigm by size: oddball in s, click train in trains, rest in s per
#: condition.
DURATIONS = {
    "oddball": {"test": 160, "demo": 180, "bench": 900},
    "clicktrain": {"test": 50, "demo": 80, "bench": 300},
    "rest": {"test": 40, "demo": 60, "bench": 300},
}

_TONE_SOA_S = 0.5
_TONE_JITTER_S = 0.025
_DEVIANT_PROBABILITY = 0.15
_LEADING_STANDARDS = 5
_TRAIN_SOA_S = 1.0
_TRAIN_JITTER_S = 0.1
_TRAIN_LENGTH_S = 0.5
_REST_FIRST_MARKER_S = 1.0


@dataclass(frozen=True)
class Schedule:
    """When each stimulus of one recording starts.

    Parameters
    ----------
    paradigm : str
        ``"oddball"``, ``"clicktrain"`` or ``"rest"``.
    duration : int
        Recording length, s (a whole number, so every file holds whole seconds).
    onsets : dict of str to ndarray
        True onset times per condition, s from the start of the recording.
    """

    paradigm: str
    duration: int
    onsets: dict

    def all_onsets(self):
        """Return every onset with its condition, sorted by time.

        Returns
        -------
        list of (float, str)
        """
        pairs = [(float(t), name) for name, times in self.onsets.items() for t in times]
        return sorted(pairs)


def _on_grid(times):
    """Round times (s) to the onset grid."""
    return np.round(np.asarray(times) / GRID_S) * GRID_S


def _deviant_flags(rng, n_tones):
    """Draw the deviant sequence: none of the first five, never two in a row.

    A candidate is drawn with probability q and dropped when the tone before it was also
    a candidate; q solves q (1 - q) = p, so deviants occur with probability p overall.
    """
    p = _DEVIANT_PROBABILITY
    q = (1.0 - np.sqrt(1.0 - 4.0 * p)) / 2.0
    candidate = rng.random(n_tones) < q
    candidate[:_LEADING_STANDARDS] = False
    after_candidate = np.concatenate([[False], candidate[:-1]])
    return candidate & ~after_candidate


def _oddball(rng, duration):
    """Tone onsets every 0.5 s +- 25 ms from 1 s to 1 s before the end."""
    n_max = int(duration / (_TONE_SOA_S - _TONE_JITTER_S)) + 1
    steps = _TONE_SOA_S + rng.uniform(-_TONE_JITTER_S, _TONE_JITTER_S, n_max)
    onsets = _on_grid(1.0 + np.concatenate([[0.0], np.cumsum(steps[:-1])]))
    deviant = _deviant_flags(rng, n_max)
    keep = onsets <= duration - 1.0
    onsets, deviant = onsets[keep], deviant[keep]
    return Schedule("oddball", int(duration),
                    {"standard": onsets[~deviant], "deviant": onsets[deviant]})


def _clicktrain(rng, n_trains):
    """Train onsets about 1 s apart (+- 0.1 s), starting at 2 s."""
    steps = _TRAIN_SOA_S + rng.uniform(-_TRAIN_JITTER_S, _TRAIN_JITTER_S, n_trains)
    onsets = _on_grid(2.0 + np.concatenate([[0.0], np.cumsum(steps[:-1])]))
    duration = int(np.ceil(onsets[-1] + _TRAIN_LENGTH_S + 1.5))
    return Schedule("clicktrain", duration, {"train": onsets})


def _rest(block_s):
    """Eyes-open marker at 1 s, eyes-closed marker one block later, 1 s of tail."""
    open_at = _REST_FIRST_MARKER_S
    closed_at = open_at + block_s
    duration = int(closed_at + block_s + 1)
    return Schedule("rest", duration, {"eyes-open": np.array([open_at]),
                                       "eyes-closed": np.array([closed_at])})


def make_schedule(rng, paradigm, size):
    """Draw the stimulus schedule of one recording.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of the jitter and of the deviant sequence.
    paradigm : {"oddball", "clicktrain", "rest"}
        The paradigm.
    size : {"test", "demo", "bench"}
        Recording length class, see :data:`DURATIONS`.

    Returns
    -------
    Schedule
    """
    amount = DURATIONS[paradigm][size]
    if paradigm == "oddball":
        return _oddball(rng, amount)
    if paradigm == "clicktrain":
        return _clicktrain(rng, amount)
    return _rest(amount)
