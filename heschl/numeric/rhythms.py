"""Aperiodic (power-law) background of a spectrum and the peak frequency of a rhythm.

Frequencies in Hz, power spectral densities in V^2/Hz. The aperiodic background is
modelled as ``psd(f) = 10^offset * f^(-exponent)``, a straight line in log10-log10
coordinates; rhythms are peaks above that line.
"""
from __future__ import annotations

import numpy as np

from heschl.errors import DefinitionError, InputDataError, problem
from heschl.numeric.spectra import _band_mask, _uniform_spacing

__all__ = ["aperiodic_fit", "peak_frequency", "HUBER_K", "N_REWEIGHTS"]

#: Huber's tuning constant in units of the residual scale (95 % efficiency for
#: Gaussian residuals; Huber 1964).
HUBER_K = 1.345

#: Iteratively re-weighted least-squares passes of the robust fit.
N_REWEIGHTS = 10


def _log10_positive(values):
    """log10 where positive, NaN elsewhere, without floating-point warnings."""
    values = np.asarray(values, dtype=float)
    return np.log10(values, out=np.full(values.shape, np.nan), where=values > 0)


def _line(x, y, weights):
    """Weighted least-squares (intercept, slope) of y on x, row by row."""
    total = weights.sum(axis=-1, keepdims=True)
    x_mean = (weights * x).sum(axis=-1, keepdims=True) / total
    y_mean = (weights * y).sum(axis=-1, keepdims=True) / total
    slope = ((weights * (x - x_mean) * (y - y_mean)).sum(axis=-1, keepdims=True)
             / (weights * (x - x_mean) ** 2).sum(axis=-1, keepdims=True))
    return y_mean - slope * x_mean, slope


def _huber_weights(residuals):
    """Huber weights ``min(1, k s / |r|)`` with the scale s from the median |r|."""
    scale = np.median(np.abs(residuals), axis=-1, keepdims=True) / 0.6745
    limit = HUBER_K * scale
    size = np.abs(residuals)
    return np.divide(limit, size, out=np.ones(size.shape), where=size > limit)


def _fit_bins(where, freqs, fit_range, exclude):
    lo, hi = (float(v) for v in fit_range)
    if not 0 < lo < hi:
        raise DefinitionError(problem(
            where, f"fit_range [{lo:g}, {hi:g}] Hz is not an increasing range above 0 Hz",
            "give positive edges, lower first, e.g. (2.0, 40.0)", key="fit_range"))
    keep = (freqs >= lo) & (freqs <= hi)
    for band in exclude:
        e_lo, e_hi = (float(v) for v in band)
        if not e_lo < e_hi:
            raise DefinitionError(problem(where, f"excluded band [{e_lo:g}, {e_hi:g}] Hz "
                                          "is empty", "give the lower edge first",
                                          key="exclude"))
        keep &= ~((freqs >= e_lo) & (freqs <= e_hi))
    if keep.sum() < 3:
        raise DefinitionError(problem(
            where, f"fit_range [{lo:g}, {hi:g}] Hz less the excluded bands holds "
            f"{keep.sum()} bins of the spectrum ({freqs[0]:g} to {freqs[-1]:g} Hz)",
            "widen the fit range, exclude less or use longer segments", key="fit_range"))
    return keep


def aperiodic_fit(freqs, psd, fit_range=(2.0, 40.0), exclude=((7.0, 14.0),), robust=True):
    """Exponent and offset of the power-law background, ``psd ~ 10^offset * f^-exponent``.

    A straight line is fitted to ``log10 psd`` against ``log10 f`` over the bins inside
    ``fit_range`` and outside every ``exclude`` band (edges included in both), first by
    ordinary least squares, then, if ``robust``, re-weighted ``N_REWEIGHTS`` times with
    Huber weights (``HUBER_K`` times the residual scale, the scale being the median
    absolute residual / 0.6745), so that peaks left in the range pull less on the line.

    Parameters
    ----------
    freqs : ndarray, shape (n_freqs,), Hz
        Frequency grid of the spectrum.
    psd : ndarray, shape (..., n_freqs), V^2/Hz
        Power spectral density, frequency on the last axis.
    fit_range : (float, float), Hz, default=(2.0, 40.0)
        Lower (> 0) and upper edge of the fitted bins.
    exclude : sequence of (float, float), Hz, default=((7.0, 14.0),)
        Bands left out of the fit: the alpha band by default; add other peaks (e.g. a
        steady-state response) as needed, or pass ``()`` to keep every bin.
    robust : bool, default=True
        Re-weight with Huber weights after the least-squares fit.

    Returns
    -------
    exponent : ndarray, shape (...), dimensionless
        Minus the log-log slope; 0 for white noise, 1 for 1/f ("pink") noise, 2 for
        Brownian noise.
    offset : ndarray, shape (...), log10(V^2/Hz)
        The fitted log10 density extrapolated to 1 Hz.
        Both are NaN where the psd is not positive at some fitted bin (a flat channel).
    """
    where = "aperiodic_fit"
    freqs = np.asarray(freqs, dtype=float)
    psd = np.asarray(psd, dtype=float)
    if freqs.ndim != 1 or psd.shape[-1:] != freqs.shape:
        raise InputDataError(problem(
            where, f"psd has shape {psd.shape} but freqs has shape {freqs.shape}",
            "pass a 1-D frequency grid and the spectrum with frequency on its last axis",
            key="psd"))
    keep = _fit_bins(where, freqs, fit_range, exclude)
    x = np.log10(freqs[keep])
    y = _log10_positive(psd[..., keep])
    valid = np.isfinite(y).all(axis=-1, keepdims=True)
    y = np.where(valid, y, 0.0)
    weights = np.ones(y.shape)
    intercept, slope = _line(x, y, weights)
    for _ in range(N_REWEIGHTS if robust else 0):
        weights = _huber_weights(y - intercept - slope * x)
        intercept, slope = _line(x, y, weights)
    exponent = np.where(valid, -slope, np.nan)[..., 0]
    offset = np.where(valid, intercept, np.nan)[..., 0]
    return exponent, offset


def peak_frequency(freqs, psd, band=(8.0, 13.0), *, fit_range=(2.0, 40.0), exclude=None):
    """Frequency of the largest spectral peak in a band, e.g. the individual alpha frequency.

    The aperiodic background (`aperiodic_fit`) is subtracted from ``log10 psd``; among
    the bins inside ``band`` (edges included) that are local maxima of that flattened
    spectrum (higher than the bin below, at least as high as the bin above) the highest
    is taken, and a parabola through it and its two neighbours (in log10 power, i.e.
    Gaussian interpolation) places the peak between bins.

    Parameters
    ----------
    freqs : ndarray, shape (n_freqs,), Hz
        Evenly spaced frequency grid.
    psd : ndarray, shape (..., n_freqs), V^2/Hz
        Power spectral density, frequency on the last axis.
    band : (float, float), Hz, default=(8.0, 13.0)
        Where to look for the peak (the IFCN alpha band by default).
    fit_range : (float, float), Hz, default=(2.0, 40.0)
        Passed to `aperiodic_fit`.
    exclude : sequence of (float, float) or None, Hz, default=None
        Passed to `aperiodic_fit`; None excludes ``band`` widened by 1 Hz on both
        sides, which is (7, 14) Hz for the default band.

    Returns
    -------
    peak : ndarray, shape (...), Hz
        Interpolated peak frequency; it can lie up to half a bin outside ``band``. NaN
        where the band holds no local maximum (e.g. the spectrum only falls through it)
        or the aperiodic fit is undefined (psd not positive in the fit range).
    """
    where = "peak_frequency"
    freqs, df = _uniform_spacing(freqs, where)
    psd = np.asarray(psd, dtype=float)
    if psd.shape[-1:] != freqs.shape:
        raise InputDataError(problem(
            where, f"psd has shape {psd.shape} but freqs has {freqs.size} values",
            "pass the spectrum with frequency on its last axis", key="psd"))
    in_band = _band_mask(freqs, df, band, "both", where)
    if exclude is None:
        exclude = ((float(band[0]) - 1.0, float(band[1]) + 1.0),)
    exponent, offset = aperiodic_fit(freqs, psd, fit_range, exclude)
    background = offset[..., None] - exponent[..., None] * _log10_positive(freqs)
    flat = _log10_positive(psd) - background
    centre, below, above = flat[..., 1:-1], flat[..., :-2], flat[..., 2:]
    is_peak = np.zeros(flat.shape, dtype=bool)
    is_peak[..., 1:-1] = (centre > below) & (centre >= above) & in_band[1:-1]
    found = is_peak.any(axis=-1)
    index = np.argmax(np.where(is_peak, flat, -np.inf), axis=-1)[..., None]
    index = np.clip(index, 1, freqs.size - 2)  # rows without a peak: any valid index
    a, b, c = (np.take_along_axis(flat, index + k, axis=-1)[..., 0] for k in (-1, 0, 1))
    curvature = a - 2 * b + c  # < 0 at a local maximum
    shift = np.divide(0.5 * (a - c), curvature, out=np.zeros(found.shape),
                      where=found)
    return np.where(found, freqs[index[..., 0]] + shift * df, np.nan)
