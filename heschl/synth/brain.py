"""The synthetic brain: reference-free scalp potentials at a common internal rate.

Everything here is in volts and seconds. The result has one row per generator point
(:data:`heschl.synth.geometry.POINTS`: the 64 cap electrodes, both mastoids and four
virtual EOG electrodes); the site layer references, picks and resamples it.

Amplitudes named ``*_uv`` in the parameters are the noise-free values at the named
channel after average reference over the study's common channels, in microvolts.

The ongoing background is an aperiodic part (1/f above a 4 Hz knee, 2 µV rms per channel
in 1-30 Hz, mixed from a dozen dipoles plus a little independent sensor noise), a
posterior alpha rhythm and a fronto-central mu rhythm; together about 3.5-5 µV rms per
channel in 1-30 Hz. Most of it sits where event-related windows of 100 ms or more
average it away, so the invented group effects survive three subjects per group: the
error of one recording's mismatch mean amplitude is about 0.3 µV (sd) against a group
difference of about 0.5 µV.
"""
from __future__ import annotations

import numpy as np
import scipy.fft
import scipy.integrate
import scipy.signal
import scipy.special
from scipy.optimize import brentq

from . import geometry
from .sites import CHANNELS_64, COMMON_CHANNELS

__all__ = [
    "SFREQ",
    "GROUP_VALUES",
    "BANDS",
    "draw_subject_params",
    "background_patterns",
    "coloured_noise",
    "aperiodic_power",
    "itpc_from_kappa",
    "kappa_from_itpc",
    "erp_kernel",
    "place_kernel",
    "scalp_potentials",
    "ScalpParts",
    "expected_values",
]

#: Internal sampling rate of the generator, Hz.
SFREQ = 1000.0

UV = 1e-6

#: Group values of the invented effects (power gains are ratios to the control group).
GROUP_VALUES = {
    "control": {"mismatch_uv": -2.5, "itpc": 0.80,
                "gains": {"theta": 1.0, "beta": 1.0, "gamma": 1.0}},
    "comparison": {"mismatch_uv": -1.5, "itpc": 0.50,
                   "gains": {"theta": 1.25, "beta": 0.75, "gamma": 1.25}},
}

#: Bands whose background power differs between groups at rest, Hz, [low, high).
BANDS = {"theta": (4.0, 8.0), "beta": (14.0, 30.0), "gamma": (30.0, 45.0)}

_BACKGROUND_UV = 2.0        # aperiodic part: rms per channel in 1-30 Hz, average ref.
_SENSOR_FRACTION = 0.08     # share of background power that is independent per sensor
_N_BACKGROUND_SOURCES = 12
_NOISE_KNEE_HZ = 4.0        # aperiodic spectrum 1 / (knee + f): flat well below it
_NOISE_NORM_BAND = (1.0, 30.0)
_NOISE_TOP_HZ = 250.0       # amplifier anti-alias filter: no brain noise above
_MISMATCH_SD_S = 0.030
_TRAIN_LENGTH_S = 0.5
_ASSR_HZ = 40.0
_ASSR_RISE_S = 0.033        # build-up time constant: 95 % after 100 ms
_ASSR_DECAY_S = 0.020
_ALPHA_WIDTH_HZ = 0.8
_MU_WIDTH_HZ = 1.0
_MU_UV = 1.0                # mu rhythm rms at Cz (average reference)
_ALPHA_SWITCH_S = (0.5, 0.3)  # delay after the marker, duration of the change


def _spread(rng, value, fraction):
    """Return ``value`` times a uniform factor in [1 - fraction, 1 + fraction]."""
    return float(value * (1.0 + rng.uniform(-fraction, fraction)))


def draw_subject_params(rng, group):
    """Draw one subject's generator parameters around the group values.

    Every parameter is drawn on every call in a fixed order, so a subject has the same
    parameters in all three paradigms.

    Parameters
    ----------
    rng : numpy.random.Generator
        The subject's stream.
    group : {"control", "comparison"}
        The subject's group.

    Returns
    -------
    dict
        JSON-ready parameters: amplitudes in µV, latencies in ms, frequencies in Hz.
    """
    values = GROUP_VALUES[group]
    itpc = float(np.clip(_spread(rng, values["itpc"], 0.06), 0.05, 0.95))
    eyes_open_uv = float(rng.uniform(2.5, 3.5))
    params = {
        "p1_uv": _spread(rng, 1.0, 0.1), "p1_latency_ms": 50.0,
        "n1_uv": _spread(rng, -3.0, 0.1),
        "n1_latency_ms": round(100.0 + rng.uniform(-5, 5), 1),
        "p2_uv": _spread(rng, 2.0, 0.1),
        "p2_latency_ms": round(190.0 + rng.uniform(-8, 8), 1),
        "mismatch_peak_uv_fz": _spread(rng, values["mismatch_uv"], 0.12),
        "mismatch_latency_ms": round(170.0 + rng.uniform(-6, 6), 1),
        "mismatch_sd_ms": _MISMATCH_SD_S * 1e3,
        "assr_uv_fz": _spread(rng, 1.5, 0.1),
        "assr_itpc": itpc,
        "assr_kappa": kappa_from_itpc(itpc),
        "assr_phase_rad": float(rng.uniform(0, 2 * np.pi)),
        "alpha_peak_hz": round(float(rng.uniform(9.0, 11.0)), 2),
        "alpha_width_hz": _ALPHA_WIDTH_HZ,
        "alpha_uv_oz": {"eyes-open": eyes_open_uv,
                        "eyes-closed": _spread(rng, 3.0, 0.08) * eyes_open_uv},
        "mu_peak_hz": round(float(rng.uniform(9.5, 11.5)), 2),
        "mu_width_hz": _MU_WIDTH_HZ,
        "mu_uv_cz": _spread(rng, _MU_UV, 0.15),
        "band_power_gains": {band: _spread(rng, gain, 0.04)
                             for band, gain in values["gains"].items()},
        "background_uv": _BACKGROUND_UV,
        "background_exponent": 1.0,
        "background_knee_hz": _NOISE_KNEE_HZ,
    }
    return params


def itpc_from_kappa(kappa):
    """Phase coherence of von Mises phases: I1(kappa) / I0(kappa), unitless."""
    return float(scipy.special.i1e(kappa) / scipy.special.i0e(kappa))


def kappa_from_itpc(itpc):
    """Von Mises concentration whose phases have the given coherence (0 < itpc < 1)."""
    return float(brentq(lambda k: itpc_from_kappa(k) - itpc, 1e-6, 1e3))


def aperiodic_power(freqs, exponent=1.0, knee=_NOISE_KNEE_HZ):
    """Unscaled power spectrum of the background: 1 / (knee**e + f**e).

    Parameters
    ----------
    freqs : ndarray
        Frequencies, Hz.
    exponent : float, default=1.0
        Exponent e above the knee (1 is pink).
    knee : float, default=4.0
        Knee frequency, Hz; the spectrum flattens below it.

    Returns
    -------
    ndarray, same shape as ``freqs``
    """
    return 1.0 / (knee**exponent + np.asarray(freqs, dtype=float) ** exponent)


def _noise_shape(n_times, sfreq, exponent, gains):
    """Amplitude spectrum of the background, scaled to unit power in 1-30 Hz."""
    freqs = scipy.fft.rfftfreq(n_times, 1.0 / sfreq)
    shape = np.sqrt(aperiodic_power(freqs, exponent))
    shape[0] = 0.0
    shape[freqs > _NOISE_TOP_HZ] = 0.0
    low, high = _NOISE_NORM_BAND
    band = (freqs >= low) & (freqs < high)
    shape /= np.sqrt(2.0 * np.sum(shape[band] ** 2) / n_times)
    for name, gain in (gains or {}).items():
        lo, hi = BANDS[name]
        shape[(freqs >= lo) & (freqs < hi)] *= np.sqrt(gain)
    return shape


def coloured_noise(rng, n_rows, n_times, sfreq, *, exponent=1.0, gains=None, out=None,
                   chunk=16):
    """Gaussian noise with an aperiodic (1/f-like) power spectrum, float32.

    The power spectrum is :func:`aperiodic_power`: 1/f^exponent above a 4 Hz knee,
    flat below it, and zero above 250 Hz (as behind an amplifier's anti-alias filter).

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of the noise.
    n_rows : int
        Number of independent series.
    n_times : int
        Samples per series.
    sfreq : float
        Sampling rate, Hz.
    exponent : float, default=1.0
        Spectral exponent (1 is pink noise).
    gains : dict of str to float, optional
        Power gains for bands of :data:`BANDS`, applied after scaling.
    out : ndarray, shape (n_rows, n_times), optional
        Array to write into (float32); a new one if omitted.
    chunk : int, default=16
        Series generated at a time (bounds memory for long recordings).

    Returns
    -------
    ndarray, shape (n_rows, n_times)
        Each series has unit expected power in 1-30 Hz before the gains; unitless.
    """
    shape = _noise_shape(n_times, sfreq, exponent, gains) / np.sqrt(2.0)
    shape = shape.astype(np.float32)
    used = int(np.flatnonzero(shape)[-1]) + 1  # bins above the top stay zero
    out = np.empty((n_rows, n_times), np.float32) if out is None else out
    for start in range(0, n_rows, chunk):
        rows = min(chunk, n_rows - start)
        pairs = rng.standard_normal((rows, used, 2), dtype=np.float32)
        spectrum = np.zeros((rows, shape.size), np.complex64)
        spectrum[:, :used] = pairs.view(np.complex64)[..., 0] * shape[:used]
        out[start:start + rows] = scipy.fft.irfft(spectrum, n=n_times, norm="ortho")
    return out


def _narrowband_noise(rng, n_times, sfreq, centre, width):
    """Gaussian noise in a Gaussian-shaped band (centre, sd ``width``, Hz); unit rms."""
    freqs = scipy.fft.rfftfreq(n_times, 1.0 / sfreq)
    shape = np.exp(-0.5 * ((freqs - centre) / width) ** 2)
    spectrum = (rng.standard_normal((shape.size, 2)) @ [1.0, 1.0j]) * shape
    series = scipy.fft.irfft(spectrum, n=n_times)
    return series / series.std()


def erp_kernel(components, sfreq, length):
    """Sum of Gaussian deflections, sampled from 0 s.

    Parameters
    ----------
    components : list of (float, float, float)
        ``(amplitude, latency_s, sd_s)`` per deflection; amplitude in any unit.
    sfreq : float
        Sampling rate, Hz.
    length : float
        Kernel length, s.

    Returns
    -------
    ndarray, shape (round(length * sfreq),)
    """
    times = np.arange(int(round(length * sfreq))) / sfreq
    kernel = np.zeros_like(times)
    for amplitude, latency, sd in components:
        kernel += amplitude * np.exp(-0.5 * ((times - latency) / sd) ** 2)
    return kernel


def place_kernel(onsets, kernel, n_times, sfreq, weights=None):
    """Add a copy of ``kernel`` at every onset (s), scaled by ``weights``.

    Returns
    -------
    ndarray, shape (n_times,)
    """
    impulses = np.zeros(n_times)
    samples = np.round(np.asarray(onsets) * sfreq).astype(int)
    np.add.at(impulses, samples, 1.0 if weights is None else weights)
    return scipy.signal.oaconvolve(impulses, kernel)[:n_times]


def _tone_kernel(params, sfreq):
    """P1-N1-P2 response to every tone, V at Fz (average reference)."""
    return erp_kernel([
        (params["p1_uv"] * UV, params["p1_latency_ms"] / 1e3, 0.012),
        (params["n1_uv"] * UV, params["n1_latency_ms"] / 1e3, 0.020),
        (params["p2_uv"] * UV, params["p2_latency_ms"] / 1e3, 0.035),
    ], sfreq, 0.5)


def _mismatch_kernel(params, sfreq):
    """Extra negativity of deviants, V at Fz (average reference)."""
    return erp_kernel([(params["mismatch_peak_uv_fz"] * UV,
                        params["mismatch_latency_ms"] / 1e3,
                        params["mismatch_sd_ms"] / 1e3)], sfreq, 0.5)


def _oddball(schedule, params, n_times, sfreq):
    """Auditory source time course of an oddball run, V at Fz."""
    tones = np.sort(np.concatenate([schedule.onsets["standard"],
                                    schedule.onsets["deviant"]]))
    course = place_kernel(tones, _tone_kernel(params, sfreq), n_times, sfreq)
    course += place_kernel(schedule.onsets["deviant"], _mismatch_kernel(params, sfreq),
                           n_times, sfreq)
    return course


def _assr_kernels(params, sfreq):
    """Cosine and sine 40 Hz kernels with the build-up envelope, V at Fz."""
    times = np.arange(int(round((_TRAIN_LENGTH_S + 0.15) * sfreq))) / sfreq
    envelope = 1.0 - np.exp(-times / _ASSR_RISE_S)
    after = times > _TRAIN_LENGTH_S
    envelope[after] = ((1.0 - np.exp(-_TRAIN_LENGTH_S / _ASSR_RISE_S))
                       * np.exp(-(times[after] - _TRAIN_LENGTH_S) / _ASSR_DECAY_S))
    phase = 2 * np.pi * _ASSR_HZ * times + params["assr_phase_rad"]
    amplitude = params["assr_uv_fz"] * UV * envelope
    return amplitude * np.cos(phase), amplitude * np.sin(phase)


def _clicktrain(schedule, params, rng, n_times, sfreq):
    """Auditory source time course of a click-train run, V at Fz.

    Each train gets its own phase offset (von Mises, concentration ``assr_kappa``);
    cos(w t + a) = cos a cos w t - sin a sin w t keeps that a pair of convolutions.
    """
    onsets = schedule.onsets["train"]
    offsets = rng.vonmises(0.0, params["assr_kappa"], onsets.size)
    cos_kernel, sin_kernel = _assr_kernels(params, sfreq)
    course = place_kernel(onsets, cos_kernel, n_times, sfreq, np.cos(offsets))
    course -= place_kernel(onsets, sin_kernel, n_times, sfreq, np.sin(offsets))
    onset_response = 0.8 * _tone_kernel(params, sfreq)
    course += place_kernel(onsets, onset_response, n_times, sfreq)
    return course


def _alpha(schedule, params, rng, n_times, sfreq):
    """Posterior alpha time course, V at Oz.

    Eyes-open amplitude throughout (tasks are done with eyes open), rising to the
    eyes-closed amplitude after an eyes-closed marker.
    """
    series = _narrowband_noise(rng, n_times, sfreq, params["alpha_peak_hz"],
                               params["alpha_width_hz"])
    times = np.arange(n_times) / sfreq
    delay, ramp = _ALPHA_SWITCH_S
    closed = schedule.onsets.get("eyes-closed", [np.inf])
    closed_at = float(closed[0]) + delay
    switch = np.clip((times - closed_at) / ramp, 0.0, 1.0)
    switch = 0.5 - 0.5 * np.cos(np.pi * switch)
    amplitude = params["alpha_uv_oz"]
    envelope = amplitude["eyes-open"] + switch * (
        amplitude["eyes-closed"] - amplitude["eyes-open"])
    return series * envelope * UV


class ScalpParts:
    """Scalp potentials under construction, V.

    Parameters
    ----------
    dense : ndarray, shape (n_points, n_times)
        Parts independent at every point (sensor noise, drift), float32.

    Notes
    -----
    Spatially fixed parts (a topography times a time course) are collected and summed
    with one matrix product in :meth:`total`, which keeps long recordings fast.
    """

    def __init__(self, dense):
        self.dense = dense
        self.topographies = []
        self.courses = []

    @property
    def n_times(self):
        """Number of samples."""
        return self.dense.shape[1]

    def add(self, topography, course):
        """Add ``topography (n_points,) x course (n_times,)``, V."""
        self.topographies.append(np.asarray(topography, np.float32))
        self.courses.append(np.asarray(course, np.float32))

    def total(self):
        """Return the summed potentials, shape (n_points, n_times), float32, V."""
        if self.courses:
            self.dense += np.stack(self.topographies, axis=1) @ np.stack(self.courses)
        self.topographies, self.courses = [], []
        return self.dense


def _mu(params, rng, n_times, sfreq):
    """Fronto-central mu rhythm (alpha band, not blocked by closing the eyes), V at Cz.

    Ongoing rhythms near 10 Hz give the background its size without adding noise to
    event-related windows of 100 ms or more.
    """
    series = _narrowband_noise(rng, n_times, sfreq, params["mu_peak_hz"],
                               params["mu_width_hz"])
    return series * params["mu_uv_cz"] * UV


def _background(params, patterns, rng, n_times, sfreq, gains):
    """Spatially correlated 1/f background plus independent sensor noise, V."""
    n_sources = patterns.shape[1]
    total = params["background_uv"] * UV
    exponent = params["background_exponent"]
    sources = coloured_noise(rng, n_sources, n_times, sfreq, exponent=exponent,
                             gains=gains)
    sources *= total * np.sqrt(1.0 - _SENSOR_FRACTION)
    sensors = coloured_noise(rng, len(geometry.POINTS), n_times, sfreq,
                             exponent=exponent, gains=gains)
    sensors *= total * np.sqrt(_SENSOR_FRACTION)
    parts = ScalpParts(sensors)
    for topography, course in zip(patterns.T, sources):
        parts.add(topography, course)
    return parts


def background_patterns(rng, n_iterations=8):
    """Draw a subject's background mixing matrix.

    Random dipole topographies are mixed and then rescaled point by point until every
    point has the same background power after average reference over the 64-channel
    cap, so subjects differ in the spatial correlation of their background but not in
    its power at any channel.

    Parameters
    ----------
    rng : numpy.random.Generator
        The subject's pattern stream.
    n_iterations : int, default=8
        Rescaling passes (the spread of power falls below 1 % after a few).

    Returns
    -------
    ndarray, shape (n_points, n_sources)
        Unitless; sum of squares over sources is 1 at every point (average reference).
    """
    mixing = geometry.random_dipole_topographies(rng, _N_BACKGROUND_SOURCES)
    n_cap = len(CHANNELS_64)
    for _ in range(n_iterations):
        referenced = mixing - mixing[:n_cap].mean(axis=0)
        mixing = mixing / np.sqrt((referenced**2).sum(axis=1))[:, None]
    return mixing


def scalp_potentials(schedule, params, patterns, rng_noise, rng_trials, sfreq=SFREQ):
    """Reference-free potentials of the brain during one recording, artefact-free.

    Parameters
    ----------
    schedule : Schedule
        Stimulus onsets and recording length.
    params : dict
        Subject parameters from :func:`draw_subject_params`.
    patterns : ndarray, shape (n_points, n_sources)
        The subject's background topographies.
    rng_noise : numpy.random.Generator
        Source of the background and alpha noise.
    rng_trials : numpy.random.Generator
        Source of trial-to-trial variation (40 Hz phase).
    sfreq : float, default=SFREQ
        Sampling rate, Hz.

    Returns
    -------
    ScalpParts
        Potentials at :data:`heschl.synth.geometry.POINTS`, V; call ``total()`` once
        every artefact is added.
    """
    n_times = int(round(schedule.duration * sfreq))
    gains = params["band_power_gains"] if schedule.paradigm == "rest" else None
    parts = _background(params, patterns, rng_noise, n_times, sfreq, gains)
    parts.add(geometry.alpha_topography(),
              _alpha(schedule, params, rng_noise, n_times, sfreq))
    parts.add(geometry.mu_topography(), _mu(params, rng_noise, n_times, sfreq))
    if schedule.paradigm == "oddball":
        course = _oddball(schedule, params, n_times, sfreq)
        parts.add(geometry.auditory_topography(), -course)
    elif schedule.paradigm == "clicktrain":
        course = _clicktrain(schedule, params, rng_trials, n_times, sfreq)
        parts.add(geometry.auditory_topography(), -course)
    return parts


def _region_factor(topography, region, common_channels):
    """Mean over ``region`` of a topography after average reference."""
    referenced = geometry.average_reference(topography, common_channels)
    return float(np.mean([referenced[geometry.POINTS.index(n)] for n in region]))


def _window_mean(kernel, sfreq, window):
    """Mean of a kernel sampled from 0 s over ``window`` (s, both ends included)."""
    times = np.arange(kernel.size) / sfreq
    inside = (times >= window[0] - 1e-9) & (times <= window[1] + 1e-9)
    return float(kernel[inside].mean())


def _aperiodic_integral(low, high, exponent, knee):
    """Integral of :func:`aperiodic_power` from ``low`` to ``high`` Hz (0.01 Hz grid)."""
    freqs = np.arange(low, high + 1e-9, 0.01)
    return float(scipy.integrate.trapezoid(aperiodic_power(freqs, exponent, knee), freqs))


def _rest_alpha_power(params, patterns, common_channels, region):
    """Expected alpha-band (8-13 Hz) power per condition at ``region``, V**2.

    Background (sources and sensors, average reference over ``common_channels``) plus
    the alpha generator; artefacts left out.
    """
    exponent, knee = params["background_exponent"], params["background_knee_hz"]
    total = (params["background_uv"] * UV) ** 2
    fraction = (_aperiodic_integral(8.0, 13.0, exponent, knee)
                / _aperiodic_integral(*_NOISE_NORM_BAND, exponent, knee))
    mixing = geometry.average_reference(patterns, common_channels)
    rows = [geometry.POINTS.index(name) for name in region]
    sources = (1.0 - _SENSOR_FRACTION) * float((mixing[rows] ** 2).sum(axis=1).mean())
    sensors = _SENSOR_FRACTION * (1.0 - 1.0 / len(common_channels))
    background = total * fraction * (sources + sensors)
    alpha = _rhythm_power(params["alpha_peak_hz"], params["alpha_width_hz"],
                          geometry.alpha_topography(), rows, common_channels)
    mu = _rhythm_power(params["mu_peak_hz"], params["mu_width_hz"],
                       geometry.mu_topography(), rows, common_channels)
    background += mu * (params["mu_uv_cz"] * UV) ** 2
    return {condition: background + alpha * (amplitude * UV) ** 2
            for condition, amplitude in params["alpha_uv_oz"].items()}


def _rhythm_power(peak, width, topography, rows, common_channels, band=(8.0, 13.0)):
    """Share of a unit-rms rhythm's power in ``band`` at ``rows``, average reference.

    The rhythm's power spectrum is Gaussian: centre ``peak``, sd ``width / sqrt(2)``.
    """
    referenced = geometry.average_reference(topography, common_channels)
    sd = width / np.sqrt(2.0)
    inside = np.diff(scipy.special.ndtr((np.array(band) - peak) / sd))[0]
    return float((referenced[rows] ** 2).mean()) * inside


def expected_values(paradigm, params, common_channels=COMMON_CHANNELS, sfreq=SFREQ,
                    patterns=None):
    """Noise-free values of the core features, from the generator's own model.

    Parameters
    ----------
    paradigm : {"oddball", "clicktrain", "rest"}
        The paradigm.
    params : dict
        Subject parameters from :func:`draw_subject_params`.
    common_channels : sequence of str, default=COMMON_CHANNELS
        Channels of the average reference.
    sfreq : float, default=SFREQ
        Rate at which waveforms are sampled for window means, Hz.
    patterns : ndarray, shape (n_points, n_sources), optional
        The subject's background mixing; needed for the rest values that include the
        background.

    Returns
    -------
    dict
        Values in µV, ms or unitless ratios, keyed by feature name.
    """
    region = ("Fz", "FC1", "FC2", "FCz", "Cz")
    if paradigm == "oddball":
        # The source time course is negated onto a topography that is -1 at Fz.
        factor = -_region_factor(geometry.auditory_topography(), region, common_channels)
        mismatch = _mismatch_kernel(params, sfreq) * factor / UV
        tone = _tone_kernel(params, sfreq) * factor / UV
        return {
            "mismatch_mean_amplitude_uv": _window_mean(mismatch, sfreq, (0.10, 0.25)),
            "mismatch_peak_amplitude_uv": float(mismatch.min()),
            "mismatch_peak_latency_ms": params["mismatch_latency_ms"],
            "n1_standard_mean_amplitude_uv": _window_mean(tone, sfreq, (0.08, 0.12)),
            "region_factor": factor,
        }
    if paradigm == "clicktrain":
        factor = -_region_factor(geometry.auditory_topography(), region, common_channels)
        return {
            "itpc_40_noise_free": params["assr_itpc"],
            "assr_amplitude_region_uv": params["assr_uv_fz"] * abs(factor),
        }
    amplitude = params["alpha_uv_oz"]
    expected = {"alpha_ratio": (amplitude["eyes-closed"] / amplitude["eyes-open"]) ** 2,
                "band_power_gains": dict(params["band_power_gains"])}
    if patterns is not None:
        power = _rest_alpha_power(params, patterns, common_channels,
                                  ("P3", "Pz", "P4", "O1", "Oz", "O2"))
        expected["alpha_ratio_with_background"] = power["eyes-closed"] / power["eyes-open"]
    return expected
