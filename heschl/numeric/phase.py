"""Complex Morlet transform, inter-trial phase coherence and their statistics.

All functions take plain arrays. Time-frequency coefficients are complex arrays whose
trial axis is ``axis`` (0 by default); results drop that axis. Units: seconds, hertz,
volts; power in V^2.
"""
from __future__ import annotations

import numpy as np
import scipy.fft

from heschl.errors import DefinitionError, InputDataError, problem

__all__ = [
    "morlet_wavelet",
    "morlet_transform",
    "itpc",
    "evoked_power",
    "total_power",
    "induced_power",
    "pairwise_phase_consistency",
    "rayleigh",
    "itpc_critical",
]

#: Half-width of the wavelet support in envelope standard deviations. Cutting at
#: +/- 5 sd leaves exp(-12.5) ~ 4e-6 of the peak envelope (common practice).
TRUNCATE_SD = 5.0

#: Sum of the sampled Gaussian envelope after normalisation; sqrt(2) makes
#: |coef| of a sinusoid its RMS value (see `morlet_transform`).
ENVELOPE_SUM = np.sqrt(2.0)


def _positive(name, value, unit, where):
    value = float(value)
    if not np.isfinite(value) or value <= 0:
        raise DefinitionError(problem(
            where, f"{name} = {value} {unit} is not a positive number",
            f"pass {name} in {unit}, greater than 0", key=name))
    return value


def _frequency_grid(freqs, n_cycles, sfreq, where):
    freqs = np.atleast_1d(np.asarray(freqs, dtype=float))
    if freqs.ndim != 1 or freqs.size == 0:
        raise DefinitionError(problem(
            where, f"freqs has shape {freqs.shape}", "pass a 1-D list of frequencies in Hz",
            key="freqs"))
    nyquist = sfreq / 2.0
    bad = freqs[~((freqs > 0) & (freqs < nyquist))]
    if bad.size:
        raise DefinitionError(problem(
            where, f"frequencies {bad.tolist()} Hz lie outside (0, {nyquist:g}) Hz, "
            f"the open range below the Nyquist frequency at sfreq = {sfreq:g} Hz",
            "choose frequencies between 0 Hz and half the sampling rate", key="freqs"))
    cycles = np.asarray(n_cycles, dtype=float)
    if cycles.size not in (1, freqs.size) or cycles.ndim > 1 or not np.all(
            np.isfinite(cycles) & (cycles > 0)):
        raise DefinitionError(problem(
            where, f"n_cycles = {np.asarray(n_cycles).tolist()} must be positive",
            f"pass one positive number of cycles, or one per frequency ({freqs.size})",
            key="n_cycles"))
    return freqs, np.broadcast_to(cycles, freqs.shape)


def morlet_wavelet(sfreq, freq, n_cycles=7.0):
    """Return one sampled complex Morlet wavelet.

    Parameters
    ----------
    sfreq : float, Hz
        Sampling rate.
    freq : float, Hz
        Centre frequency.
    n_cycles : float, default=7.0
        Number of cycles; the Gaussian envelope has standard deviation
        ``n_cycles / (2 * pi * freq)`` seconds.

    Returns
    -------
    wavelet : ndarray of complex, shape (2 * half + 1,)
        ``g(t) * exp(2j * pi * freq * t)`` on ``t = k / sfreq`` for ``k = -half..half``,
        ``half = floor(TRUNCATE_SD * sd * sfreq)``, with the Gaussian ``g`` scaled so
        that its samples sum to ``sqrt(2)``. The centre sample is at ``t = 0``.
    """
    where = "morlet_wavelet"
    sfreq = _positive("sfreq", sfreq, "Hz", where)
    freqs, cycles = _frequency_grid(freq, n_cycles, sfreq, where)
    if freqs.size != 1:
        raise DefinitionError(problem(where, f"freq has {freqs.size} values",
                                      "pass a single frequency in Hz", key="freq"))
    sd = cycles[0] / (2.0 * np.pi * freqs[0])
    half = int(np.floor(TRUNCATE_SD * sd * sfreq))
    t = np.arange(-half, half + 1) / sfreq
    envelope = np.exp(-0.5 * (t / sd) ** 2)
    envelope *= ENVELOPE_SUM / envelope.sum()
    return envelope * np.exp(2j * np.pi * freqs[0] * t)


def morlet_transform(x, sfreq, freqs, n_cycles=7.0):
    """Convolve the last axis of ``x`` with complex Morlet wavelets.

    Parameters
    ----------
    x : ndarray, shape (..., n_times)
        Signals in V, e.g. shape (n_trials, n_channels, n_times). Real or complex.
    sfreq : float, Hz
        Sampling rate.
    freqs : array_like of float, shape (n_freqs,), Hz
        Centre frequencies, each in (0, sfreq / 2).
    n_cycles : float or array_like, shape (n_freqs,), default=7.0
        Cycles per wavelet; the Gaussian envelope sd is ``n_cycles / (2 pi f)`` s.

    Returns
    -------
    coefs : ndarray of complex, shape (..., n_freqs, n_times), V
        ``coefs[..., j, n] = sum_k x[..., n - k] * w_j[k]`` with ``w_j`` from
        `morlet_wavelet` centred on ``k = 0`` ('same' alignment: sample ``n`` of the
        output belongs to sample ``n`` of the input). Computed by FFT with zero
        padding, so samples within ``TRUNCATE_SD`` envelope sd of either end see zeros
        beyond the data (edge effects).

    Raises
    ------
    InputDataError
        If a wavelet is longer than the signal.

    Notes
    -----
    Normalisation: the sampled Gaussian envelope of every wavelet sums to
    ``sqrt(2)``. A sinusoid ``A cos(2 pi f t + phi)`` at a wavelet's centre frequency
    then gives ``|coef| = A / sqrt(2)``, its RMS value, and ``angle(coef) = 2 pi f t +
    phi`` (the cosine phase), away from the edges. So ``|coef|^2`` is in V^2 and equals
    the mean power ``A^2 / 2`` of the sinusoid, the same number a Welch band power
    gives for it. The wavelet is not made zero-mean; its DC response is
    ``sqrt(2) * exp(-n_cycles^2 / 2)`` (2e-11 for 7 cycles).
    """
    where = "morlet_transform"
    x = np.asarray(x)
    sfreq = _positive("sfreq", sfreq, "Hz", where)
    freqs, cycles = _frequency_grid(freqs, n_cycles, sfreq, where)
    if x.ndim == 0 or x.shape[-1] == 0:
        raise InputDataError(problem(where, f"x has shape {x.shape}",
                                     "pass signals with time on the last axis", key="x"))
    wavelets = [morlet_wavelet(sfreq, f, c) for f, c in zip(freqs, cycles)]
    n_times = x.shape[-1]
    longest = max(w.size for w in wavelets)
    if longest > n_times:
        raise InputDataError(problem(
            where, f"the {freqs[np.argmax([w.size for w in wavelets])]:g} Hz wavelet spans "
            f"{longest} samples but the signal has {n_times} samples",
            "use longer epochs, fewer cycles or higher frequencies", key="x"))
    n_fft = scipy.fft.next_fast_len(n_times + longest // 2 + 1)
    kernel = np.zeros((freqs.size, n_fft), dtype=complex)
    for j, w in enumerate(wavelets):
        half = w.size // 2
        kernel[j, np.arange(-half, half + 1) % n_fft] = w  # centre on index 0
    spectrum = scipy.fft.fft(x, n=n_fft, axis=-1)[..., np.newaxis, :]
    coefs = scipy.fft.ifft(spectrum * scipy.fft.fft(kernel, axis=-1), axis=-1)
    return coefs[..., :n_times]


def _unit_phasors(coefs):
    """Return coefs / |coefs|, with exact zeros mapped to 0 (no phase)."""
    coefs = np.asarray(coefs)
    magnitude = np.abs(coefs)
    out = np.zeros(coefs.shape, dtype=complex)
    np.divide(coefs, magnitude, out=out, where=magnitude > 0)
    return out


def _trial_count(array, axis, where, minimum=1):
    array = np.asarray(array)
    try:
        n = array.shape[axis]
    except IndexError:
        raise DefinitionError(problem(
            where, f"axis {axis} does not exist in an array of shape {array.shape}",
            "pass the index of the trial axis", key="axis")) from None
    if n < minimum:
        raise InputDataError(problem(
            where, f"{n} trials along axis {axis}, at least {minimum} needed",
            "pass more trials or the right axis", key="axis"))
    return n


def itpc(coefs, axis=0):
    """Inter-trial phase coherence (phase-locking factor).

    Parameters
    ----------
    coefs : ndarray of complex, shape (..., n_trials, ...)
        Single-trial time-frequency coefficients.
    axis : int, default=0
        The trial axis.

    Returns
    -------
    itpc : ndarray of float, shape of ``coefs`` without ``axis``
        ``|mean_k coefs_k / |coefs_k||``, in [0, 1] (dimensionless).

    Notes
    -----
    A coefficient that is exactly 0 has no phase: it contributes a zero vector but still
    counts as a trial, so all-zero input gives 0, never NaN.
    """
    _trial_count(coefs, axis, "itpc")
    return np.abs(np.mean(_unit_phasors(coefs), axis=axis))


def evoked_power(coefs, axis=0):
    """Power of the phase-locked (trial-averaged) response, ``|mean_k F_k|^2``.

    Parameters
    ----------
    coefs : ndarray of complex, shape (..., n_trials, ...), V
        Single-trial coefficients from `morlet_transform`.
    axis : int, default=0
        The trial axis.

    Returns
    -------
    power : ndarray of float, shape of ``coefs`` without ``axis``, V^2
    """
    _trial_count(coefs, axis, "evoked_power")
    return np.abs(np.mean(coefs, axis=axis)) ** 2


def total_power(coefs, axis=0):
    """Mean single-trial power, ``mean_k |F_k|^2``.

    Parameters
    ----------
    coefs : ndarray of complex, shape (..., n_trials, ...), V
        Single-trial coefficients from `morlet_transform`.
    axis : int, default=0
        The trial axis.

    Returns
    -------
    power : ndarray of float, shape of ``coefs`` without ``axis``, V^2
    """
    _trial_count(coefs, axis, "total_power")
    return np.mean(np.abs(coefs) ** 2, axis=axis)


def induced_power(coefs, axis=0):
    """Non-phase-locked power, ``total_power - evoked_power``.

    Parameters
    ----------
    coefs : ndarray of complex, shape (..., n_trials, ...), V
        Single-trial coefficients from `morlet_transform`.
    axis : int, default=0
        The trial axis.

    Returns
    -------
    power : ndarray of float, shape of ``coefs`` without ``axis``, V^2
        Never negative: rounding below 0 is clipped to 0. Because the transform is
        linear this equals the mean power of the trials after subtracting the average.
    """
    _trial_count(coefs, axis, "induced_power")
    return np.maximum(total_power(coefs, axis) - evoked_power(coefs, axis), 0.0)


def _phasors_from(coefs_or_angles):
    values = np.asarray(coefs_or_angles)
    if np.iscomplexobj(values):
        return _unit_phasors(values)
    return np.exp(1j * values.astype(float))


def pairwise_phase_consistency(coefs_or_angles, axis=0):
    """Pairwise phase consistency, an ITPC without trial-count bias.

    Parameters
    ----------
    coefs_or_angles : ndarray, shape (..., n_trials, ...)
        Complex coefficients (their phase is used) or real phase angles in rad.
    axis : int, default=0
        The trial axis; at least 2 trials.

    Returns
    -------
    ppc : ndarray of float, shape of the input without ``axis``
        Mean of ``cos(theta_j - theta_k)`` over all ``N (N - 1) / 2`` trial pairs,
        computed as ``(N R^2 - 1) / (N - 1)`` with ``R`` the ITPC. Expectation 0 under
        uniform phases for every ``N``; can be slightly negative.

    Notes
    -----
    A complex coefficient that is exactly 0 has no phase: pairs that include it add 0
    to the sum but still count among the ``N (N - 1) / 2`` pairs.
    """
    n = _trial_count(coefs_or_angles, axis, "pairwise_phase_consistency", minimum=2)
    phasors = _phasors_from(coefs_or_angles)
    resultant = np.abs(np.sum(phasors, axis=axis)) ** 2
    n_valid = np.sum(np.abs(phasors) > 0, axis=axis)
    return (resultant - n_valid) / (n * (n - 1))


def _resultant_length(angles_or_r, n, axis, where):
    values = np.asarray(angles_or_r, dtype=float)
    if n is None:
        n = _trial_count(values, axis, where)
        r = np.abs(np.mean(np.exp(1j * values), axis=axis))
        return r, n
    n_arr = np.asarray(n, dtype=float)
    if not np.all((n_arr >= 1) & (n_arr == np.round(n_arr))):
        raise DefinitionError(problem(where, f"n = {n_arr.tolist()} is not a whole number >= 1",
                                      "pass the number of trials", key="n"))
    if not np.all((values >= 0) & (values <= 1 + 1e-12)):
        raise DefinitionError(problem(
            where, "R values outside [0, 1] were given with n",
            "pass mean resultant lengths (ITPC) with n, or angles without n", key="angles_or_R"))
    return np.minimum(values, 1.0), n_arr


def rayleigh(angles_or_R, n=None, axis=0):
    """Rayleigh test of non-uniform phase, with Zar's p-value approximation.

    Parameters
    ----------
    angles_or_R : ndarray of float
        Phase angles in rad with trials along ``axis`` (when ``n`` is None), or mean
        resultant lengths R = ITPC in [0, 1] of any shape (when ``n`` is given).
    n : int or ndarray of int, optional
        Number of trials behind each R. Leave None to pass angles.
    axis : int, default=0
        Trial axis of the angles; ignored when ``n`` is given.

    Returns
    -------
    z : ndarray of float
        Rayleigh's ``Z = n R^2``.
    p : ndarray of float
        ``exp(sqrt(1 + 4 n + 4 (n^2 - (n R)^2)) - (1 + 2 n))`` (Zar, Biostatistical
        Analysis), more accurate than ``exp(-Z)`` for small ``n``; in (0, 1].
    """
    r, n = _resultant_length(angles_or_R, n, axis, "rayleigh")
    rn = n * r
    z = rn * r
    p = np.exp(np.sqrt(1.0 + 4.0 * n + 4.0 * (n * n - rn * rn)) - (1.0 + 2.0 * n))
    return z, np.minimum(p, 1.0)


def itpc_critical(n, alpha=0.05):
    """ITPC above which phase locking is significant, ``sqrt(-ln(alpha) / n)``.

    Parameters
    ----------
    n : int or ndarray of int
        Number of trials (>= 1).
    alpha : float, default=0.05
        False-positive rate, in (0, 1).

    Returns
    -------
    r_crit : float or ndarray of float
        From the large-sample Rayleigh approximation ``p ~= exp(-n R^2)``.
    """
    n_arr = np.asarray(n, dtype=float)
    if not np.all(n_arr >= 1):
        raise DefinitionError(problem("itpc_critical", f"n = {n_arr.tolist()} is below 1",
                                      "pass the number of trials", key="n"))
    if not 0 < float(alpha) < 1:
        raise DefinitionError(problem("itpc_critical", f"alpha = {alpha} is outside (0, 1)",
                                      "pass a false-positive rate such as 0.05", key="alpha"))
    return np.sqrt(-np.log(float(alpha)) / n_arr)
