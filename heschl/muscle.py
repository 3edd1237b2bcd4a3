"""Muscle bursts: stretches of the recording with high-frequency power well above its own.

Scalp muscle activity is broadband and strongest above the EEG's own spectrum; a burst
raises the power of every channel near the muscle well above 100 Hz, where brain
activity is small (Muthukumaraswamy 2013, docs/REFERENCES.md F46). heschl follows the
recipe of mne's ``annotate_muscle_zscore`` (band-pass, envelope, z-score over time, smooth
at 4 Hz, a limit in z units) with two changes explained in `find_muscle`: it averages the
few highest channels instead of summing all of them, and rescales the course by its own
robust spread. It runs after line-noise removal and before the pass band, so the high
band is still in the data, and every epoch or segment that overlaps a marked stretch is
dropped with the reason ``muscle`` before the rejection method sees it.

The band is 110-140 Hz where the sampling rate allows (mne's default); below 300 Hz it
is the top of what is left, 0.55-0.9 x the Nyquist frequency (e.g. 68.75-112.5 Hz at
250 Hz), which is heschl's choice.
"""
from __future__ import annotations

import logging

import numpy as np
import scipy.fft
import scipy.signal

from .sensors import data_picks, types_of
from .vocabulary import MAD_TO_SD

__all__ = ["muscle_band", "muscle_courses", "find_muscle", "focal_count", "robust_z", "overlapping", "MUSCLE_TYPES"]

log = logging.getLogger(__name__)

#: Sensor types searched, in order of preference: the first one present is used.
MUSCLE_TYPES = ("eeg", "mag", "grad")

#: Shortest good stretch between two marked ones, s: shorter gaps are marked too (mne's
#: ``min_length_good``), so one burst with a quiet moment is one stretch.
MIN_GOOD_S = 0.2

#: Channels whose standard deviation is below this fraction of the median are left out.
DEAD_RATIO = 1e-3

#: Channels filtered at a time.
CHUNK = 16

#: Samples a second kept of each smoothed course (it holds nothing above 4 Hz).
COURSE_RATE = 25.0


def muscle_band(sfreq):
    """The high band searched at sampling rate ``sfreq`` (Hz): (low, high) in Hz."""
    nyquist = sfreq / 2.0
    if nyquist >= 150.0:
        return 110.0, 140.0
    return 0.55 * nyquist, 0.9 * nyquist


def muscle_courses(raw):
    """Each channel's smoothed high-frequency z-score course, before the pass band.

    ``raw`` is not changed. Each channel of the searched sensor type is band-passed to
    `muscle_band` (mne's FIR filter), its envelope taken (scipy's Hilbert transform),
    z-scored over time and smoothed below 4 Hz, as mne's ``annotate_muscle_zscore``
    does; the smooth course is kept at about 25 samples a second, so the bad-channel
    detector can run (after the pass band has removed the high band) before the
    courses are combined by `find_muscle`.

    Returns
    -------
    courses : dict
        ``sensor_type``, ``band_hz``, ``names`` (channels with a course), ``z`` (ndarray,
        shape (n_names, n_steps)), ``step_s`` (s between samples of ``z``).
    """
    from mne.filter import filter_data

    picks = data_picks(raw.info)
    types = types_of(raw.info, picks)
    kind = next(t for t in MUSCLE_TYPES if t in types)
    sfreq = raw.info["sfreq"]
    band = muscle_band(sfreq)
    step = max(1, int(sfreq // COURSE_RATE))
    same = [p for p, t in zip(picks, types) if t == kind]
    # A channel of zeros (a restored reference before re-referencing) or a dead lead has
    # no variance to z-score it by: leave it out.
    spread = np.array([np.std(raw.get_data(picks=[p])) for p in same])
    alive = [p for p, s in zip(same, spread) if s > DEAD_RATIO * np.median(spread)]
    courses = []
    for chunk in range(0, len(alive), CHUNK):  # a few channels at a time: no full copy
        x = raw.get_data(picks=alive[chunk:chunk + CHUNK])
        x = filter_data(x, sfreq, band[0], band[1], fir_design="firwin", pad="reflect_limited", verbose="error")
        n = scipy.fft.next_fast_len(x.shape[1])
        env = np.abs(scipy.signal.hilbert(x, N=n, axis=1)[:, :x.shape[1]])
        sd = env.std(axis=1, keepdims=True)
        z = (env - env.mean(axis=1, keepdims=True)) / np.where(sd > 0, sd, 1.0)
        courses.append(filter_data(z, sfreq, None, 4.0, verbose="error")[:, ::step])
    return {"sensor_type": kind, "band_hz": [round(band[0], 2), round(band[1], 2)],
            "names": [raw.ch_names[p] for p in alive], "z": np.concatenate(courses), "step_s": step / sfreq}


def find_muscle(courses, limit_z, exclude=()):
    """Stretches where the focal high-frequency score of ``courses`` exceeds ``limit_z``.

    mne adds all channels' z-scores; heschl averages the `focal_count` highest at each
    moment instead, because a burst raises a few electrodes over the muscle by 10-50
    units while background shared by all channels moves every channel by about one, and
    a sum over all channels cannot tell the two apart (on a 64-channel recording of
    tests/gen2 the sum reached 5.0 both inside a burst and outside any; the mean of the
    4 highest reached 50 and 6). Channels in ``exclude`` (the bad channels: a popping
    lead looks like a burst) are left out. The course is then put in units of its own
    robust spread (`robust_z`) and compared with ``limit_z``. heschl's choice, measured
    in benchmarks/muscle_recall.py.

    Returns
    -------
    record : dict
        ``band_hz``, ``limit_z``, ``sensor_type``, ``focal_count``, ``channels_used``,
        ``stretches_s`` (list of [start, stop], s from the start of the recording),
        ``marked_s`` (their total length) and ``peak_z`` (the largest score).
    """
    keep = [i for i, n in enumerate(courses["names"]) if n not in set(exclude)]
    z = courses["z"][keep]
    k = min(focal_count(len(z)), len(z))
    record = {"band_hz": courses["band_hz"], "limit_z": float(limit_z), "sensor_type": courses["sensor_type"],
              "focal_count": k, "channels_used": len(z), "stretches_s": [], "marked_s": 0.0, "peak_z": None}
    if not k or not z.shape[1]:
        return record
    top = np.partition(z, len(z) - k, axis=0)[len(z) - k:].mean(axis=0)
    scores = robust_z(top)
    stretches = _stretches(scores > limit_z, 1.0 / courses["step_s"], MIN_GOOD_S)
    record.update(stretches_s=stretches, marked_s=round(float(sum(b - a for a, b in stretches)), 3),
                  peak_z=round(float(np.max(scores)), 2))
    log.info("Muscle (%.4g-%.4g Hz, z > %g): %d stretch%s, %.1f s marked", *courses["band_hz"], limit_z,
             len(stretches), "" if len(stretches) == 1 else "es", record["marked_s"])
    return record


def focal_count(n_channels):
    """How many of the highest channels are averaged: 1 in 16, at least 2 (heschl's choice)."""
    return max(2, int(round(n_channels / 16)))


def robust_z(summed):
    """A score course in units of its own robust spread (median, 1.4826 x MAD).

    The mean of the highest channels' z-scores has neither zero median nor unit spread
    (it is a maximum-like statistic, and background shared by neighbouring channels
    widens it); rescaling by the course's own robust spread (docs/REFERENCES.md F41)
    gives the limit one meaning on every cap. heschl's choice.
    """
    finite = np.isfinite(summed)
    if not finite.any():
        return np.zeros_like(summed)
    centre = np.median(summed[finite])
    spread = MAD_TO_SD * np.median(np.abs(summed[finite] - centre))
    out = (summed - centre) / (spread if spread > 0 else 1.0)
    out[~finite] = 0.0
    return out


def _stretches(mask, sfreq, min_good_s):
    """[start, stop] in s of the runs of ``mask``, gaps shorter than ``min_good_s`` closed."""
    edges = np.flatnonzero(np.diff(np.concatenate([[0], mask.astype(np.int8), [0]])))
    runs = [[int(a), int(b)] for a, b in zip(edges[::2], edges[1::2])]
    merged = []
    for a, b in runs:
        if merged and (a - merged[-1][1]) / sfreq < min_good_s:
            merged[-1][1] = b
        else:
            merged.append([a, b])
    return [[round(a / sfreq, 3), round(b / sfreq, 3)] for a, b in merged]


def overlapping(onset_s, window, stretches):
    """The first marked stretch that the trial at ``onset_s`` with ``window`` overlaps, or None."""
    lo, hi = onset_s + window[0], onset_s + window[1]
    for a, b in stretches:
        if a < hi and b > lo:
            return a, b
    return None
