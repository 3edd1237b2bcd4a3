"""Cross-spectral density matrices, coherence and imaginary coherency.

Frequencies in Hz, cross-spectral densities in V^2/Hz (one-sided), coherence and
coherency dimensionless. A CSD matrix has shape ``(..., n_channels, n_channels)`` with
``csd[..., i, j] = 2 * mean(conj(X_i) * X_j) / (sfreq * sum(w^2))`` over windowed
segments, the convention of `scipy.signal.csd` with ``x = channel i, y = channel j``.
"""
from __future__ import annotations

import numpy as np
import scipy.fft
import scipy.signal

from heschl.errors import DefinitionError, InputDataError, problem
from heschl.numeric.spectra import edge_mask, some_bins, welch_settings

__all__ = ["cross_spectra", "coherence", "imaginary_coherency", "regularise"]


def _taper(where, sfreq, segment, overlap, window, n_times):
    """The Welch settings of `welch_psd`; returns (taper, step between segments)."""
    taper, nperseg, noverlap = welch_settings(where, sfreq, segment, overlap, window, n_times)
    return taper, nperseg - noverlap


def _frequency_mask(where, freqs, fmin, fmax):
    lo = freqs[0] if fmin is None else float(fmin)
    hi = freqs[-1] if fmax is None else float(fmax)
    df = freqs[1] - freqs[0]
    return some_bins(edge_mask(freqs, df, lo, hi), freqs, df, where, f"fmin = {lo:g} Hz to fmax = {hi:g} Hz",
                     "widen the range (fmin <= fmax) or use longer segments", "fmin")


def cross_spectra(x, sfreq, segment, overlap=0.5, fmin=None, fmax=None, window="hann"):
    """Cross-spectral density matrices by Welch's method, averaged over trials.

    Each channel is cut into segments of ``nperseg`` samples (as in `welch_psd`), each
    segment detrended by its mean, multiplied by the window and Fourier transformed;
    the products ``conj(X_i) X_j`` are averaged over every segment of every trial.

    Parameters
    ----------
    x : ndarray, shape (n_trials, n_channels, n_times) or (n_channels, n_times)
        Real signals in V. Trials (or separate data segments) all contribute the same
        number of Welch segments and are weighted equally.
    sfreq : float, Hz
        Sampling rate.
    segment : float, s
        Welch segment length; ``nperseg = round(segment * sfreq)`` samples, so the bin
        spacing is ``sfreq / nperseg``.
    overlap : float, default=0.5
        Overlap of consecutive segments as a fraction of ``nperseg``, in [0, 1).
    fmin, fmax : float or None, Hz, default=None
        Keep only bins with ``fmin <= f <= fmax`` (None: no limit).
    window : str or tuple, default="hann"
        Any window `scipy.signal.get_window` accepts (periodic form).

    Returns
    -------
    freqs : ndarray, shape (n_freqs,), Hz
        ``k * sfreq / nperseg`` inside ``[fmin, fmax]``.
    csd : ndarray of complex, shape (n_freqs, n_channels, n_channels), V^2/Hz
        One-sided density scaling as `scipy.signal.csd` (DC, and Nyquist for even
        ``nperseg``, not doubled), Hermitian in the channel axes. ``csd[f, i, j]`` is
        `scipy.signal.csd` of channel ``i`` (``x``) with channel ``j`` (``y``), so
        ``angle(csd[f, i, j]) > 0`` means channel ``j`` leads channel ``i``. The
        diagonal is real and equals `welch_psd` (averaged over trials) for the same
        ``segment``, ``overlap`` and ``window``. With fewer segments in all than
        channels the matrix is singular (rank <= number of segments); see `regularise`.
    """
    where = "cross_spectra"
    x = np.asarray(x)
    if np.iscomplexobj(x) or x.ndim not in (2, 3) or x.shape[-2] < 1:
        raise InputDataError(problem(
            where, f"x has shape {x.shape} and dtype {x.dtype}",
            "pass real signals shaped (n_trials, n_channels, n_times) or "
            "(n_channels, n_times)", key="x"))
    x = np.asarray(x, dtype=float).reshape((-1,) + x.shape[-2:])
    taper, step = _taper(where, sfreq, segment, overlap, window, x.shape[-1])
    nperseg = taper.size
    freqs = scipy.fft.rfftfreq(nperseg, 1.0 / float(sfreq))
    mask = _frequency_mask(where, freqs, fmin, fmax)

    segments = np.lib.stride_tricks.sliding_window_view(x, nperseg, axis=-1)[..., ::step, :]
    segments = segments - segments.mean(axis=-1, keepdims=True)
    spectra = scipy.fft.rfft(segments * taper, axis=-1)[..., mask]  # (trial, chan, seg, f)
    spectra = spectra.transpose(3, 1, 0, 2).reshape(mask.sum(), x.shape[1], -1)

    csd = spectra.conj() @ np.swapaxes(spectra, -1, -2) / spectra.shape[-1]
    csd = 0.5 * (csd + np.swapaxes(csd, -1, -2).conj())  # exact Hermitian symmetry
    onesided = np.full(freqs.size, 2.0)
    onesided[0] = 1.0
    if nperseg % 2 == 0:
        onesided[-1] = 1.0
    scale = onesided[mask] / (float(sfreq) * np.sum(taper**2))
    return freqs[mask], csd * scale[:, None, None]


def _check_csd(where, csd):
    csd = np.asarray(csd)
    if csd.ndim < 2 or csd.shape[-1] != csd.shape[-2] or csd.shape[-1] < 1:
        raise InputDataError(problem(
            where, f"csd has shape {csd.shape}",
            "pass matrices shaped (..., n_channels, n_channels), e.g. from cross_spectra",
            key="csd"))
    return csd


def _power_products(csd):
    power = np.real(np.diagonal(csd, axis1=-2, axis2=-1))
    return power[..., :, None] * power[..., None, :]


def coherence(csd):
    """Magnitude-squared coherence ``|S_ij|^2 / (S_ii S_jj)``.

    Parameters
    ----------
    csd : ndarray of complex, shape (..., n_channels, n_channels), V^2/Hz
        Cross-spectral density matrices, e.g. from `cross_spectra`.

    Returns
    -------
    coh : ndarray, shape (..., n_channels, n_channels), dimensionless
        In [0, 1] up to rounding; 1 on the diagonal; NaN where a channel has no power.
        Estimated from K independent segments, two independent Gaussian signals give
        a coherence biased upwards, with expectation 1/K.
    """
    csd = _check_csd("coherence", csd)
    products = _power_products(csd)
    return np.divide(np.abs(csd) ** 2, products, out=np.full(products.shape, np.nan),
                     where=products > 0)


def imaginary_coherency(csd):
    """Imaginary part of coherency, ``Im(S_ij) / sqrt(S_ii S_jj)``.

    Zero-lag coupling (a source seen by both channels at once, volume conduction)
    makes no imaginary part, so a non-zero value implies a time lag between channels.

    Parameters
    ----------
    csd : ndarray of complex, shape (..., n_channels, n_channels), V^2/Hz
        Cross-spectral density matrices, e.g. from `cross_spectra`.

    Returns
    -------
    icoh : ndarray, shape (..., n_channels, n_channels), dimensionless
        In [-1, 1]; antisymmetric, 0 on the diagonal; NaN where a channel has no power.
        With the `cross_spectra` convention it is positive when channel ``j`` leads
        channel ``i`` by less than half a cycle.
    """
    csd = _check_csd("imaginary_coherency", csd)
    products = _power_products(csd)
    return np.divide(np.imag(csd), np.sqrt(np.clip(products, 0, None)),
                     out=np.full(products.shape, np.nan), where=products > 0)


def regularise(csd, shrinkage):
    """Shrink CSD matrices towards a multiple of the identity: ``S + shrinkage * tr(S)/n * I``.

    With fewer averaged segments than channels a CSD matrix is singular and cannot be
    inverted (e.g. for beamformers or Gaussian models). Adding ``shrinkage`` times the
    mean channel power to the diagonal raises every eigenvalue by exactly that amount,
    so the result is positive definite for any ``shrinkage > 0`` on non-zero data.

    Parameters
    ----------
    csd : ndarray of complex, shape (..., n_channels, n_channels), V^2/Hz
        Cross-spectral density matrices, e.g. from `cross_spectra`.
    shrinkage : float, dimensionless
        Fraction of the mean power ``tr(S) / n_channels`` added to the diagonal; >= 0.
        Values around 0.05 to 0.1 are common when segments are few; 0 returns a copy.

    Returns
    -------
    regularised : ndarray of complex, shape (..., n_channels, n_channels), V^2/Hz
        A new array; ``csd`` is not modified.
    """
    csd = _check_csd("regularise", csd)
    shrinkage = float(shrinkage)
    if not (np.isfinite(shrinkage) and shrinkage >= 0):
        raise DefinitionError(problem(
            "regularise", f"shrinkage = {shrinkage} is not a finite number >= 0",
            "pass a fraction of the mean channel power such as 0.05", key="shrinkage"))
    n = csd.shape[-1]
    load = shrinkage * np.real(np.trace(csd, axis1=-2, axis2=-1)) / n
    return csd + load[..., None, None] * np.eye(n)
