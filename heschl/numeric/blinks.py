"""Blink peaks in a vertical EOG channel.

Peaks of the 1-10 Hz band-passed EOG above a threshold, at least ``gap`` apart, on the
side where the EOG's largest deflections lie: the 99.5th percentile of each side
decides, so one saturation cannot flip it (taking the wrong side finds the two side
lobes of every blink instead of the blink). Blinks reach 100-400 uV at a vertical EOG
(common practice, from memory).
"""
from __future__ import annotations

import numpy as np

__all__ = ["BLINK_THRESHOLD_V", "BLINK_GAP_S", "blink_peaks"]

#: Height of a blink peak in the 1-10 Hz vertical EOG, V.
BLINK_THRESHOLD_V = 75e-6
#: Shortest time between two blinks, s.
BLINK_GAP_S = 0.3


def blink_peaks(eog, sfreq, threshold=BLINK_THRESHOLD_V, gap=BLINK_GAP_S):
    """Blink peak times in one vertical EOG channel.

    Parameters
    ----------
    eog : ndarray, shape (n_times,), V
    sfreq : float, Hz
    threshold : float, default=75e-6, V
        Height of a peak of the band-passed EOG.
    gap : float, default=0.3, s
        Shortest time between two peaks.

    Returns
    -------
    times : ndarray, shape (n_blinks,), s from the first sample
    """
    import mne
    import scipy.signal

    band = mne.filter.filter_data(np.asarray(eog, dtype=float), sfreq, 1.0, 10.0, verbose="error")
    sign = 1.0 if np.percentile(band, 99.5) >= -np.percentile(band, 0.5) else -1.0
    peaks, _ = scipy.signal.find_peaks(sign * band, height=threshold, distance=max(1, int(gap * sfreq)))
    return peaks / sfreq
