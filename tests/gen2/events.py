"""Stimulus schedules of the three paradigms (times in s from the first sample).

Condition names follow heschl's built-in definitions (paradigms/*.toml); timings, codes
and probabilities are this generator's own.
"""
from __future__ import annotations

import numpy as np

__all__ = ["CODES", "SIZES", "oddball", "clicktrain", "rest"]

#: Stimulus-channel codes written to the files.
CODES = {"oddball": {"standard": 3, "deviant": 4}, "clicktrain": {"train": 7},
         "rest": {"eyes-open": 21, "eyes-closed": 22}}

#: Durations by size: oddball s, click trains (count), rest s per block.
SIZES = {"test": {"oddball": 120.0, "clicktrain": 70, "rest": 55.0},
         "full": {"oddball": 900.0, "clicktrain": 280, "rest": 240.0}}

ODDBALL_SOA = (0.46, 0.58)      # s, uniform
DEVIANT_P = 0.2
TRAIN_SOA = (1.1, 1.4)          # s onset to onset, uniform
REST_FIRST = 1.5                # s, eyes-open marker
REST_TAIL = 1.0                 # s after the last block


def oddball(rng, duration):
    """Tone onsets and labels: never two deviants in a row, none among the first four."""
    onsets, labels = [], []
    t = 1.0
    while t < duration - 1.0:
        deviant = len(labels) >= 4 and labels[-1] != "deviant" and rng.random() < DEVIANT_P
        onsets.append(round(t, 3))
        labels.append("deviant" if deviant else "standard")
        t += rng.uniform(*ODDBALL_SOA)
    return np.asarray(onsets), labels, duration


def clicktrain(rng, n_trains):
    """Train onsets (0.5 s of 40 Hz clicks each) and the recording's duration."""
    onsets = 1.5 + np.concatenate([[0.0], np.cumsum(rng.uniform(*TRAIN_SOA, n_trains - 1))])
    return np.round(onsets, 3), ["train"] * n_trains, float(onsets[-1] + 1.5)


def rest(block):
    """Eyes-open then eyes-closed markers; each block lasts ``block`` s."""
    onsets = np.array([REST_FIRST, REST_FIRST + block])
    return onsets, ["eyes-open", "eyes-closed"], float(REST_FIRST + 2 * block + REST_TAIL)
