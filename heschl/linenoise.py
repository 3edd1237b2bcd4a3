"""Mains (line) noise: how much there is, and removing it at the line frequency and harmonics.

Two layers: `line_noise_ratio` works on plain arrays (V, Hz); `remove_line_noise` works on
an mne Raw in place and returns what it did as plain data for the QC page and provenance.
"""
from __future__ import annotations

import logging

import numpy as np
import scipy.signal

from .errors import DefinitionError, InputDataError, did_you_mean, problem
from .vocabulary import LINE_NOISE_METHODS

__all__ = ["METHODS", "line_noise_ratio", "line_harmonics", "remove_line_noise", "channel_line_amplitudes"]

log = logging.getLogger(__name__)

#: Ways to remove line noise: FIR notches, mne's sinusoid fitting, or nothing.
METHODS = LINE_NOISE_METHODS

#: Welch segment lengths tried for `line_noise_ratio`, s: 4 s gives 0.25 Hz bins and is
#: used when the data hold at least two of them; otherwise 2 s (0.5 Hz bins).
_SEGMENTS = (4.0, 2.0)

#: Default inner and outer distance of the reference bands from the line frequency, Hz.
_NEIGHBOURS = (2.0, 5.0)

#: mne's default FIR notch transition band, Hz; a harmonic needs this much room below
#: Nyquist for its notch to be designed.
_TRANSITION = 1.0


def line_noise_ratio(x, sfreq, frequency, *, bandwidth=1.0, neighbours=_NEIGHBOURS):
    """Power at the line frequency relative to the neighbouring frequencies, per channel.

    Mean Welch power density in ``[frequency - bandwidth/2, frequency + bandwidth/2]``
    divided by the mean density in the bands ``neighbours[0]`` to ``neighbours[1]`` Hz
    on either side of it. About 1 for data without line noise (a smooth spectrum);
    large when a mains sinusoid stands out.

    Parameters
    ----------
    x : ndarray, shape (n_channels, n_times), V
        Continuous data.
    sfreq : float, Hz
        Sampling rate.
    frequency : float, Hz
        Line frequency (50 or 60 Hz) or one of its harmonics.
    bandwidth : float, default=1.0
        Width of the band centred on ``frequency``, Hz.
    neighbours : (float, float), default=(2.0, 5.0)
        Inner and outer distance of the reference bands from ``frequency``, Hz.

    Returns
    -------
    ratio : ndarray, shape (n_channels,)
        Dimensionless; a channel without any power in the reference bands gives inf
        (or nan when it is all zeros).

    Notes
    -----
    Welch segments (Hann, 50 % overlap, `scipy.signal.welch`) are 4 s long (0.25 Hz bins)
    when the data hold at least two of them and 2 s (0.5 Hz bins) otherwise.
    """
    where = "line_noise_ratio"
    x = np.atleast_2d(np.asarray(x, dtype=float))
    sfreq, frequency, bandwidth = float(sfreq), float(frequency), float(bandwidth)
    inner, outer = (float(v) for v in neighbours)
    if not (np.isfinite(sfreq) and sfreq > 0):
        raise DefinitionError(problem(where, f"sfreq = {sfreq} Hz is not positive", "pass the sampling rate in Hz",
                                      key="sfreq"))
    if not (bandwidth > 0 and bandwidth / 2 < inner < outer):
        raise DefinitionError(problem(where, f"bandwidth = {bandwidth:g} Hz and neighbours = ({inner:g}, {outer:g}) Hz "
                                      "do not give a band inside a ring of neighbours",
                                      "choose 0 < bandwidth/2 < neighbours[0] < neighbours[1]", key="neighbours"))
    if not (0 < frequency - outer and frequency + outer < sfreq / 2):
        raise InputDataError(problem(where, f"frequency = {frequency:g} Hz with neighbours up to {outer:g} Hz away "
                                     f"does not fit between 0 and Nyquist ({sfreq / 2:g} Hz)",
                                     "measure a frequency inside the recorded band", key="frequency"))
    _, psd, band, ring = _band_and_ring(x, sfreq, frequency, bandwidth, (inner, outer), where)
    with np.errstate(divide="ignore", invalid="ignore"):
        return psd[:, band].mean(axis=-1) / psd[:, ring].mean(axis=-1)


def _band_and_ring(x, sfreq, frequency, bandwidth, neighbours, where):
    """Welch density of ``x`` (Hann, 50 % overlap), its bin width, and the masks of the
    band around ``frequency`` and of the ring of neighbouring bands."""
    nperseg = _segment_samples(x.shape[-1], sfreq, where)
    freqs, psd = scipy.signal.welch(x, fs=sfreq, window="hann", nperseg=nperseg, noverlap=nperseg // 2,
                                    detrend="constant", scaling="density", axis=-1)
    distance = np.abs(freqs - frequency)
    slack = 1e-9 * sfreq  # bins on an edge count as inside despite rounding of the grid
    band = distance <= bandwidth / 2 + slack
    ring = (distance >= neighbours[0] - slack) & (distance <= neighbours[1] + slack)
    return freqs[1] - freqs[0], psd, band, ring


def _segment_samples(n_times, sfreq, where):
    for segment in _SEGMENTS:
        nperseg = int(round(segment * sfreq))
        if n_times >= 2 * nperseg or segment == _SEGMENTS[-1] and n_times >= nperseg:
            return nperseg
    raise InputDataError(problem(where, f"the data last {n_times / sfreq:g} s, shorter than one "
                                 f"{_SEGMENTS[-1]:g} s spectrum segment", "measure line noise on longer data"))


def line_harmonics(frequency, sfreq, lowpass=None):
    """The line frequency and its harmonics that lie in the pass band.

    Parameters
    ----------
    frequency : float, Hz
        Line frequency.
    sfreq : float, Hz
        Sampling rate.
    lowpass : float or None, Hz, default=None
        Upper pass-band edge (``raw.info["lowpass"]``); None means Nyquist.

    Returns
    -------
    freqs : list of float, Hz
        ``k * frequency`` for k = 1, 2, ... that are at most ``lowpass`` and at least
        one transition band (1 Hz) below Nyquist, so a notch can be designed there.
    """
    nyquist = sfreq / 2.0
    edge = nyquist if lowpass is None else min(float(lowpass), nyquist)
    out = []
    k = 1
    while k * frequency <= edge + 1e-9 and k * frequency < nyquist - _TRANSITION:
        out.append(float(k * frequency))
        k += 1
    return out


def remove_line_noise(raw, frequency, *, method="notch", picks="eeg"):
    """Remove mains noise from ``raw`` in place; returns the record of what was done.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Preloaded continuous data (the task's own copy: it is modified).
    frequency : float, Hz
        The site's line frequency (50 or 60 Hz).
    method : {"notch", "fit", "none"}, default="notch"
        ``"notch"``: zero-phase FIR notches (mne's ``raw.notch_filter`` defaults: stop band
        ``f/200`` Hz wide, 1 Hz transition, firwin/Hamming) at the line frequency and every
        harmonic inside the pass band (`line_harmonics`). ``"fit"``: mne's multitaper
        sinusoid fitting and subtraction (``method="spectrum_fit"``, 10 s windows) at the
        same frequencies, which leaves the rest of the spectrum untouched. ``"none"``:
        the data are not changed.
    picks : str or list, default="eeg"
        Channels to clean and to measure, as mne accepts them (e.g. ``["eeg", "eog"]``).

    Returns
    -------
    record : dict
        ``method``; ``line_frequency_hz``; ``frequencies_hz`` (list of the frequencies
        removed, Hz, empty for "none"); ``ratio_before`` and ``ratio_after``: median over
        the picked channels that carry power (a channel of zeros has no ratio) of
        `line_noise_ratio` at the line frequency, before and after
        (None when the neighbouring bands of the line frequency do not fit below Nyquist).
    """
    where = "remove_line_noise"
    if method not in METHODS:
        raise DefinitionError(problem(where, f'method "{method}" is not known{did_you_mean(method, METHODS)}',
                                      f"use one of {', '.join(METHODS)}", key="method"))
    sfreq = float(raw.info["sfreq"])
    freqs = [] if method == "none" else line_harmonics(frequency, sfreq, raw.info["lowpass"])
    record = {"method": method, "line_frequency_hz": float(frequency), "frequencies_hz": freqs,
              "ratio_before": _median_ratio(raw, frequency, picks)}
    if freqs and method == "notch":
        raw.notch_filter(freqs, picks=picks, method="fir", phase="zero", fir_design="firwin", verbose="error")
    elif freqs and method == "fit":
        raw.notch_filter(freqs, picks=picks, method="spectrum_fit", verbose="error")
    record["ratio_after"] = _median_ratio(raw, frequency, picks) if freqs else record["ratio_before"]
    log.info("Line noise (%s at %s Hz): ratio %s -> %s", method, ", ".join(f"{f:g}" for f in freqs) or "-",
             _fmt(record["ratio_before"]), _fmt(record["ratio_after"]))
    return record


def channel_line_amplitudes(raw, frequency, picks, bandwidth=1.0):
    """Mains amplitude of each picked channel at ``frequency``: the root of the Welch power
    in a ``bandwidth`` band around it above the mean density of its neighbouring bands
    (V rms, 0 when nothing stands out), or None when the neighbouring bands do not fit
    below Nyquist. Unlike the ratio it does not grow where a channel's background is
    small, so channels compare by the mains they pick up."""
    sfreq = float(raw.info["sfreq"])
    if not 0 < frequency - _NEIGHBOURS[1] < frequency + _NEIGHBOURS[1] < sfreq / 2:
        return None
    out = []
    for block in _blocks(raw, picks):  # a few channels at a time: Welch's segments are large
        step, psd, band, ring = _band_and_ring(raw.get_data(picks=block), sfreq, frequency, bandwidth, _NEIGHBOURS,
                                               "channel_line_amplitudes")
        excess = (psd[:, band] - psd[:, ring].mean(axis=-1, keepdims=True)).sum(axis=-1) * step
        out.append(np.sqrt(np.maximum(excess, 0.0)))
    return np.concatenate(out) if out else np.zeros(0)


#: Channels per block for the spectra of the whole recording: Welch's segments of all
#: channels at once are twice the recording in memory.
BLOCK = 8


def _blocks(raw, picks):
    """Channel indices of ``picks`` (types or names, as mne's ``picks`` accepts), in blocks."""
    types = raw.get_channel_types()
    wanted = [picks] if isinstance(picks, str) else list(picks)
    if all(isinstance(w, str) and w in set(types) | {"eeg", "eog", "mag", "grad", "meg"} for w in wanted):
        kinds = set(wanted) | ({"mag", "grad"} if "meg" in wanted else set())
        idx = [i for i, kind in enumerate(types) if kind in kinds]  # mne's order for types: the file's
    else:
        idx = [int(w) if not isinstance(w, str) else raw.ch_names.index(w) for w in wanted]  # as given
    return [idx[i:i + BLOCK] for i in range(0, len(idx), BLOCK)]


def _median_ratio(raw, frequency, picks):
    sfreq = float(raw.info["sfreq"])
    if not 0 < frequency - _NEIGHBOURS[1] < frequency + _NEIGHBOURS[1] < sfreq / 2:
        return None
    ratio = np.concatenate([line_noise_ratio(raw.get_data(picks=block), sfreq, frequency, neighbours=_NEIGHBOURS)
                            for block in _blocks(raw, picks)] or [np.zeros(0)])
    # A channel without power (a restored recording reference is all zeros before
    # re-referencing) has no ratio; the median is over the channels that have one.
    ratio = ratio[np.isfinite(ratio)]
    return float(np.median(ratio)) if ratio.size else None


def _fmt(value):
    return "n/a" if value is None else f"{value:.3g}"
