"""Time courses: the 1/f background, the alpha rhythm and the evoked responses.

Array functions: arrays in, shapes documented; amplitudes in µV (the generator converts
to V only when it writes a file).
"""
from __future__ import annotations

import numpy as np
from scipy.special import i0e, i1e
from scipy.optimize import brentq

__all__ = ["coloured_noise", "background", "narrowband", "tone_response", "mismatch",
           "steady_state", "von_mises_kappa", "BAND"]

BAND = (1.0, 30.0)       # Hz: the band in which a unit series has unit rms
FLOOR = 0.5              # Hz: below this the 1/f^a spectrum is held flat


def coloured_noise(rng, n_series, n_times, sfreq, exponent, out=None):
    """Independent Gaussian series with power spectrum ~ 1/f^exponent (flat below FLOOR).

    Each series has unit expected rms in BAND (1-30 Hz).

    Parameters
    ----------
    rng : numpy.random.Generator
    n_series, n_times : int
    sfreq : float, Hz
    exponent : float
        ``a`` of 1/f^a in power.
    out : ndarray, shape (n_series, n_times), optional
        Filled in place (float32 saves memory for long recordings).

    Returns
    -------
    z : ndarray, shape (n_series, n_times)
    """
    freqs = np.fft.rfftfreq(n_times, 1.0 / sfreq)
    shape = np.maximum(freqs, FLOOR) ** (-exponent / 2.0)
    shape[0] = 0.0
    band = (freqs >= BAND[0]) & (freqs <= BAND[1])
    # Expected variance of irfft(shape * rfft(white)) in the band: 2/N * sum of shape^2 there.
    shape /= np.sqrt(2.0 / n_times * np.sum(shape[band] ** 2))
    out = np.empty((n_series, n_times)) if out is None else out
    for i in range(n_series):
        out[i] = np.fft.irfft(np.fft.rfft(rng.standard_normal(n_times)) * shape, n_times)
    return out


def background(rng, mixing, cov_diag, n_times, sfreq, exponent, sensor_noise):
    """Spatially mixed 1/f background plus independent sensor noise.

    ``x = sqrt(1 - s) * mixing @ z1 + sqrt(s * diag(cov)) * z2`` with ``z1``, ``z2``
    independent unit series, so the covariance is ``(1 - s) * cov + s * diag(cov)`` and the
    sensor noise is the fraction ``s`` of every channel's variance (in every band, since
    both have the same spectrum).

    Parameters
    ----------
    mixing : ndarray, shape (n_channels, n_channels)
        Symmetric square root of the spatial covariance.
    cov_diag : ndarray, shape (n_channels,)
    sensor_noise : float
        ``s``, 0 <= s < 1.

    Returns
    -------
    x : ndarray, shape (n_channels, n_times), float32, unit rms in BAND on average
    """
    n = len(mixing)
    z = coloured_noise(rng, n, n_times, sfreq, exponent, out=np.empty((n, n_times), np.float32))
    x = np.empty((n, n_times), np.float32)
    step = 200_000
    for start in range(0, n_times, step):
        x[:, start:start + step] = np.sqrt(1.0 - sensor_noise) * (mixing @ z[:, start:start + step])
    del z
    if sensor_noise > 0:
        z = coloured_noise(rng, n, n_times, sfreq, exponent, out=np.empty((n, n_times), np.float32))
        x += (np.sqrt(sensor_noise * np.asarray(cov_diag))[:, None] * z).astype(np.float32)
    return x


def narrowband(rng, n_times, sfreq, centre, width):
    """Gaussian noise with a Gaussian spectral peak (centre, SD ``width``, Hz); unit rms."""
    freqs = np.fft.rfftfreq(n_times, 1.0 / sfreq)
    shape = np.exp(-0.5 * ((freqs - centre) / width) ** 2)
    x = np.fft.irfft(np.fft.rfft(rng.standard_normal(n_times)) * shape, n_times)
    return x / x.std()


def _gauss(t, mu, sd):
    return np.exp(-0.5 * ((t - mu) / sd) ** 2)


#: The tone response at the fronto-central mean, µV: (amplitude, latency s, SD s) per wave.
TONE_WAVES = ((0.7, 0.060, 0.012), (-2.2, 0.110, 0.020), (1.5, 0.210, 0.035))


def tone_response(t, gain=1.0):
    """P1-N1-P2 at the fronto-central mean, µV; ``t`` in s from tone onset."""
    return gain * sum(a * _gauss(t, mu, sd) for a, mu, sd in TONE_WAVES)


def mismatch(t, amplitude, latency, sd=0.028):
    """The deviants' extra negativity, µV: ``amplitude`` (negative) peaking at ``latency`` s."""
    return amplitude * _gauss(t, latency, sd)


def steady_state(t, amplitude, phase, frequency=40.0, duration=0.5, rise=0.045, decay=0.025):
    """40 Hz response to a click train, µV: cosine with exponential rise and decay."""
    env = np.where(t < 0, 0.0, np.where(t < duration, 1.0 - np.exp(-np.maximum(t, 0) / rise),
                                        (1.0 - np.exp(-duration / rise)) * np.exp(-(t - duration) / decay)))
    return amplitude * env * np.cos(2 * np.pi * frequency * t + phase)


def von_mises_kappa(itpc):
    """Concentration whose von Mises law has mean resultant length ``itpc`` (I1/I0)."""
    if itpc <= 0:
        return 0.0
    return brentq(lambda k: i1e(k) / i0e(k) - itpc, 1e-9, 1e4)
