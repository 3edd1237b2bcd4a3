"""Welch spectra, band power and signal-to-noise ratio against neighbouring bins.

Frequencies in Hz, power spectral densities in V^2/Hz (one-sided), powers in V^2.
"""
from __future__ import annotations

import numpy as np
import scipy.signal
import scipy.stats

from heschl.errors import DefinitionError, InputDataError, did_you_mean, problem
from heschl.vocabulary import BAND_CLOSURES as CLOSURES

__all__ = ["welch_psd", "band_power", "relative_band_power", "snr_neighbours"]

#: A bin within this fraction of the bin spacing of a band edge counts as on the edge,
#: so rounding in the frequency grid (e.g. 8.000000000000002 Hz) does not move it.
EDGE_TOLERANCE = 1e-6


def welch_psd(x, sfreq, segment, overlap=0.5, window="hann"):
    """One-sided power spectral density by Welch's averaged periodograms.

    Parameters
    ----------
    x : ndarray, shape (..., n_times)
        Signals in V with time on the last axis.
    sfreq : float, Hz
        Sampling rate.
    segment : float, s
        Segment length; rounded to the nearest whole number of samples
        ``nperseg = round(segment * sfreq)``, so the bin spacing is ``sfreq / nperseg``.
    overlap : float, default=0.5
        Overlap of consecutive segments as a fraction of ``nperseg``, in [0, 1);
        ``noverlap = round(overlap * nperseg)``.
    window : str or tuple, default="hann"
        Any window `scipy.signal.get_window` accepts (periodic form).

    Returns
    -------
    freqs : ndarray, shape (n_freqs,), Hz
        ``k * sfreq / nperseg`` for ``k = 0 .. nperseg // 2``.
    psd : ndarray, shape (..., n_freqs), V^2/Hz
        Mean of the segment periodograms, each detrended by its mean; density scaling,
        with DC (and Nyquist, for even ``nperseg``) not doubled.
    """
    where = "welch_psd"
    x = np.asarray(x)
    n_times = x.shape[-1] if x.ndim else 0
    taper, nperseg, noverlap = welch_settings(where, sfreq, segment, overlap, window, n_times)
    return scipy.signal.welch(x, fs=float(sfreq), window=taper, nperseg=nperseg, noverlap=noverlap,
                              detrend="constant", scaling="density", average="mean", axis=-1)


def welch_settings(where, sfreq, segment, overlap, window, n_times):
    """Check Welch settings and turn them into (taper, nperseg, noverlap), samples.

    Shared by :func:`welch_psd` and the cross-spectra, so both read the same segments.
    """
    sfreq, segment = float(sfreq), float(segment)
    if not (np.isfinite(sfreq) and sfreq > 0):
        raise DefinitionError(problem(where, f"sfreq = {sfreq} Hz is not positive",
                                      "pass the sampling rate in Hz", key="sfreq"))
    nperseg = int(round(segment * sfreq)) if np.isfinite(segment) else 0
    if nperseg < 2:
        raise DefinitionError(problem(
            where, f"segment = {segment} s is {nperseg} samples at {sfreq:g} Hz",
            "choose a segment of at least 2 samples", key="segment"))
    if n_times < nperseg:
        raise InputDataError(problem(
            where, f"segment = {segment:g} s ({nperseg} samples) is longer than the "
            f"data ({n_times} samples, {n_times / sfreq:g} s)",
            "use a shorter segment or longer recordings", key="segment"))
    if not 0 <= float(overlap) < 1:
        raise DefinitionError(problem(where, f"overlap = {overlap} is outside [0, 1)",
                                      "pass a fraction such as 0.5", key="overlap"))
    noverlap = min(int(round(float(overlap) * nperseg)), nperseg - 1)
    try:
        taper = scipy.signal.get_window(window, nperseg)
    except ValueError as err:
        raise DefinitionError(problem(where, f"window = {window!r} is not a known window "
                                      f"({err})", 'use e.g. "hann", "hamming" or "boxcar"',
                                      key="window")) from None
    return taper, nperseg, noverlap


def _uniform_spacing(freqs, where):
    freqs = np.asarray(freqs, dtype=float)
    if freqs.ndim != 1 or freqs.size < 2:
        raise InputDataError(problem(where, f"freqs has shape {freqs.shape}",
                                     "pass the 1-D frequency grid of the spectrum", key="freqs"))
    steps = np.diff(freqs)
    df = steps.mean()
    if not (df > 0 and np.allclose(steps, df, rtol=1e-6, atol=0)):
        raise InputDataError(problem(
            where, f"freqs are not evenly spaced and increasing (steps {steps.min():g} to "
            f"{steps.max():g} Hz)", "pass the frequency grid of a Welch spectrum", key="freqs"))
    return freqs, df


def edge_mask(freqs, df, lo, hi, closed="both"):
    """Bins between ``lo`` and ``hi`` Hz; ``closed`` says which edges belong (a bin within
    ``EDGE_TOLERANCE`` bin spacings ``df`` of an edge counts as on it)."""
    tol = EDGE_TOLERANCE * df
    above = freqs >= lo - tol if closed in ("left", "both") else freqs > lo + tol
    below = freqs <= hi + tol if closed in ("right", "both") else freqs < hi - tol
    return above & below


def some_bins(mask, freqs, df, where, what, fix, key):
    """``mask`` when it holds a bin; else a one-line error saying ``what`` holds none."""
    if not mask.any():
        raise DefinitionError(problem(
            where, f"{what} holds no bin of the spectrum ({freqs[0]:g} to {freqs[-1]:g} Hz in steps of {df:g} Hz)",
            fix, key=key))
    return mask


def _band_mask(freqs, df, band, closed, where):
    if closed not in CLOSURES:
        raise DefinitionError(problem(
            where, f'closed = "{closed}" is not one of {", ".join(CLOSURES)}'
            + did_you_mean(closed, CLOSURES), "choose which band edges to include",
            key="closed"))
    lo, hi = (float(v) for v in band)
    if not lo < hi:
        raise DefinitionError(problem(where, f"band [{lo:g}, {hi:g}] Hz is empty",
                                      "give the lower edge first", key="band"))
    return some_bins(edge_mask(freqs, df, lo, hi, closed), freqs, df, where,
                     f"band [{lo:g}, {hi:g}] Hz ({closed}-closed)", "widen the band or use longer segments", "band")


def band_power(freqs, psd, band, closed="left"):
    """Power in a frequency band, the sum of ``psd * df`` over the band's bins.

    Parameters
    ----------
    freqs : ndarray, shape (n_freqs,), Hz
        Evenly spaced frequency grid.
    psd : ndarray, shape (..., n_freqs), V^2/Hz
        One-sided power spectral density.
    band : (float, float), Hz
        Lower and upper edge.
    closed : {"left", "right", "both", "neither"}, default="left"
        Which edges belong to the band; "left" means ``lo <= f < hi``. A bin within
        ``EDGE_TOLERANCE`` bin spacings of an edge counts as on it.

    Returns
    -------
    power : ndarray, shape (...), V^2
        For a sinusoid of amplitude A whose spectral peak lies inside the band this is
        ``A^2 / 2``.
    """
    freqs, df = _uniform_spacing(freqs, "band_power")
    psd = np.asarray(psd, dtype=float)
    if psd.shape[-1:] != freqs.shape:
        raise InputDataError(problem(
            "band_power", f"psd has shape {psd.shape} but freqs has {freqs.size} values",
            "pass the spectrum with frequency on its last axis", key="psd"))
    mask = _band_mask(freqs, df, band, closed, "band_power")
    return psd[..., mask].sum(axis=-1) * df


def relative_band_power(freqs, psd, band, total_band, closed="left"):
    """Band power as a fraction of the power in ``total_band``.

    Parameters
    ----------
    freqs : ndarray, shape (n_freqs,), Hz
        Evenly spaced frequency grid.
    psd : ndarray, shape (..., n_freqs), V^2/Hz
        One-sided power spectral density.
    band, total_band : (float, float), Hz
        The band and the reference band; ``band`` must lie inside ``total_band``.
    closed : {"left", "right", "both", "neither"}, default="left"
        Edge convention, applied to both bands (see `band_power`).

    Returns
    -------
    ratio : ndarray, shape (...), dimensionless
        In [0, 1]; NaN where the total power is 0 (a flat channel).
    """
    lo, hi = (float(v) for v in band)
    t_lo, t_hi = (float(v) for v in total_band)
    if lo < t_lo or hi > t_hi:
        raise DefinitionError(problem(
            "relative_band_power", f"band [{lo:g}, {hi:g}] Hz is not inside the total "
            f"band [{t_lo:g}, {t_hi:g}] Hz", "widen the total band", key="total_band"))
    part = band_power(freqs, psd, band, closed)
    total = band_power(freqs, psd, total_band, closed)
    return np.divide(part, total, out=np.full(np.shape(total), np.nan), where=total > 0)


def _bin_of(freqs, df, f0, where):
    index = int(np.argmin(np.abs(freqs - f0)))
    if abs(freqs[index] - f0) > 0.01 * df:
        raise DefinitionError(problem(
            where, f"f0 = {f0:g} Hz falls between bins (nearest {freqs[index]:g} Hz, "
            f"spacing {df:g} Hz)", "choose a segment length holding a whole number of "
            "cycles of f0", key="f0"))
    return index


def snr_neighbours(freqs, power, f0, n_neighbours=3, skip=1, n_averages=1):
    """Power at ``f0`` over the mean power of neighbouring bins, with its F-test p-value.

    Parameters
    ----------
    freqs : ndarray, shape (n_freqs,), Hz
        Evenly spaced frequency grid; ``f0`` must lie on a bin (within 1 % of the
        spacing).
    power : ndarray, shape (..., n_freqs), V^2/Hz or V^2
        Spectrum (density or power; the ratio is unitless).
    f0 : float, Hz
        Signal frequency.
    n_neighbours : int, default=3
        Bins used on each side, so ``K = 2 * n_neighbours`` in all.
    skip : int, default=1
        Bins next to ``f0`` left out on each side (spectral leakage of the signal).
    n_averages : int, default=1
        Number ``M`` of independent periodograms averaged into ``power``.

    Returns
    -------
    snr : ndarray, shape (...)
        ``power[f0] / mean(power[neighbours])``; NaN where the neighbours are all 0.
    p : ndarray, shape (...)
        ``scipy.stats.f(2 M, 2 M K).sf(snr)``: under Gaussian noise with independent
        bins (e.g. a rectangular-window periodogram of white noise) ``snr`` follows
        F(2M, 2MK), whose mean is ``K / (K - 1)`` for M = 1, not 1. Overlapping or
        tapered segments make neighbours correlated and the p-value approximate.
    """
    where = "snr_neighbours"
    freqs, df = _uniform_spacing(freqs, where)
    power = np.asarray(power, dtype=float)
    for name, value, low in (("n_neighbours", n_neighbours, 1), ("skip", skip, 0),
                             ("n_averages", n_averages, 1)):
        if int(value) != value or value < low:
            raise DefinitionError(problem(where, f"{name} = {value} is not a whole number "
                                          f">= {low}", f"pass an integer {name}", key=name))
    if power.shape[-1:] != freqs.shape:
        raise InputDataError(problem(
            where, f"power has shape {power.shape} but freqs has {freqs.size} values",
            "pass the spectrum with frequency on its last axis", key="power"))
    i = _bin_of(freqs, df, float(f0), where)
    offsets = np.arange(skip + 1, skip + n_neighbours + 1)
    sides = np.concatenate([i - offsets[::-1], i + offsets])
    if sides.min() < 0 or sides.max() >= freqs.size:
        raise DefinitionError(problem(
            where, f"neighbours of f0 = {f0:g} Hz reach beyond the spectrum "
            f"({freqs[0]:g} to {freqs[-1]:g} Hz)", "use fewer neighbours or a smaller skip",
            key="n_neighbours"))
    noise = power[..., sides].mean(axis=-1)
    snr = np.divide(power[..., i], noise, out=np.full(noise.shape, np.nan), where=noise > 0)
    k = sides.size
    return snr, scipy.stats.f(2 * n_averages, 2 * n_averages * k).sf(snr)
