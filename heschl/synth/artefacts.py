"""Artefacts with ground truth: blinks, muscle, drift, bad channels, saturation.

Scalp-level artefacts (blinks, muscle bursts, drift, line pick-up, the movement
transients of the low-count recording) are added to the reference-free potentials,
so every site sees them through its own reference. Channel faults are applied to a
stored channel after referencing; amplifier saturation is applied to the stored
samples. All values in volts and seconds.
"""
from __future__ import annotations

import numpy as np
import scipy.interpolate
import scipy.signal

from . import geometry
from .brain import place_kernel

__all__ = [
    "BAD_KINDS",
    "RAIL_V",
    "add_blinks",
    "add_muscle",
    "add_drift",
    "add_line_noise",
    "choose_bad_channels",
    "corrupt_channel",
    "draw_saturation",
    "apply_saturation",
    "add_low_count_transients",
]

UV = 1e-6

#: Kinds of bad channel: near-zero, broadband noise about ten times the background,
#: large steps that decay.
BAD_KINDS = ("flat", "noisy", "popping")

#: Amplifier rail: stored values never exceed it in magnitude, V.
RAIL_V = 1.5e-3

#: Channels never made bad: the fronto-central region of the core features.
PROTECTED = ("Fz", "FCz", "Cz", "FC1", "FC2")

_BLINKS_PER_MIN = {"oddball": 8.0, "clicktrain": 3.0, "rest": 10.0}
_BLINK_UV = (130.0, 220.0)    # at Fp1, reference-free
_BLINK_SD_S = (0.045, 0.080)  # rise, fall
_MIN_BLINK_GAP_S = 1.0
_MUSCLE_CHANNELS = ("T7", "T8", "FT7", "FT8", "TP7", "TP8")
_MUSCLE_UV = (15.0, 30.0)     # rms at the centre electrode
_MUSCLE_BAND_HZ = (20.0, 100.0)
_DRIFT_KNOT_S = 2.0
_DRIFT_STEP_UV = 4.0          # random-walk step per knot
_NOISY_UV = 60.0              # white noise rms: ten times the 1-30 Hz background
_FLAT_UV = 0.05
_POPS_PER_S = 0.25
_POP_UV = (150.0, 400.0)
_LOW_COUNT_KEEP = 18          # deviants left untouched in the low-count recording


def _blink_kernel(sfreq):
    """Unit blink shape, peak at 0.3 s, faster rise than fall, shape (0.6 s,)."""
    times = np.arange(int(round(0.6 * sfreq))) / sfreq - 0.3
    sd = np.where(times < 0, _BLINK_SD_S[0], _BLINK_SD_S[1])
    return np.exp(-0.5 * (times / sd) ** 2)


def blink_course(blinks_s, n_times, sfreq):
    """Unit blink time course with a blink peaking at each time of ``blinks_s`` (s).

    The generator's own blink shape, for tests that rebuild the blink source from the
    truth record. Shape (n_times,); blinks reaching past either end are cut.
    """
    kernel = _blink_kernel(sfreq)
    course = np.zeros(n_times)
    for peak in blinks_s:
        start = int(round((peak - 0.3) * sfreq))
        lo, hi = max(start, 0), min(start + kernel.size, n_times)
        if hi > lo:
            course[lo:hi] += kernel[lo - start:hi - start]
    return course


def _blink_times(rng, schedule):
    """Blink peak times, s: a fixed rate, at least 1 s apart, eyes open only at rest.

    The count is the rate times the time with eyes open (rounded), so every recording
    loses about the same share of trials; the times are uniform, then thinned.
    """
    end = schedule.duration - 1.0
    if schedule.paradigm == "rest":
        end = float(schedule.onsets["eyes-closed"][0])
    count = int(round(_BLINKS_PER_MIN[schedule.paradigm] * (end - 1.0) / 60.0))
    times = np.sort(rng.uniform(1.0, end, count))
    keep = np.diff(times, prepend=-np.inf) > _MIN_BLINK_GAP_S
    return np.round(times[keep], 3)


def add_blinks(scalp, rng, schedule, sfreq):
    """Add blinks to the scalp potentials.

    Parameters
    ----------
    scalp : heschl.synth.brain.ScalpParts
        Reference-free potentials under construction, V.
    rng : numpy.random.Generator
        Source of blink times and sizes.
    schedule : Schedule
        The recording's schedule (length, paradigm, rest blocks).
    sfreq : float
        Sampling rate, Hz.

    Returns
    -------
    list of float
        Blink peak times, s.
    """
    times = _blink_times(rng, schedule)
    sizes = rng.uniform(*_BLINK_UV, times.size) * UV
    course = place_kernel(times - 0.3, _blink_kernel(sfreq), scalp.n_times, sfreq, sizes)
    scalp.add(geometry.blink_topography(), course)
    return times.tolist()


def _band_noise(rng, n_samples, sfreq, band):
    """Gaussian noise filtered to ``band`` (Hz) with unit rms."""
    sos = scipy.signal.butter(4, band, btype="bandpass", fs=sfreq, output="sos")
    noise = scipy.signal.sosfiltfilt(sos, rng.standard_normal(n_samples + 200))[100:-100]
    return noise / noise.std()


def add_muscle(scalp, rng, duration, sfreq):
    """Add bursts of 20-100 Hz activity over a temporal muscle, one or two a minute.

    ``scalp`` is a :class:`heschl.synth.brain.ScalpParts`; ``duration`` in s.

    Returns
    -------
    list of [float, float]
        ``[start, stop]`` of each burst, s.
    """
    n_bursts = max(1, int(round(duration / 60.0))) + int(rng.integers(0, 2))
    bursts = []
    for _ in range(n_bursts):
        start = round(float(rng.uniform(2.0, duration - 3.0)), 3)
        length = round(float(rng.uniform(0.2, 1.0)), 3)
        centre = _MUSCLE_CHANNELS[int(rng.integers(len(_MUSCLE_CHANNELS)))]
        size = rng.uniform(*_MUSCLE_UV) * UV
        first, n = int(round(start * sfreq)), int(round(length * sfreq))
        burst = _band_noise(rng, n, sfreq, _MUSCLE_BAND_HZ)
        burst *= scipy.signal.windows.tukey(n, 0.3) * size
        topography = geometry.focal_topography(centre, 0.03)
        scalp.dense[:, first:first + n] += np.outer(topography, burst)
        bursts.append([start, round(start + length, 3)])
    return bursts


def add_drift(scalp, rng, sfreq):
    """Add an independent slow random-walk drift to every point.

    A random walk with one step per 2 s knot is joined by a cubic spline, evaluated
    every 0.1 s and interpolated linearly in between. ``scalp`` is a
    :class:`heschl.synth.brain.ScalpParts` holding whole seconds; ``sfreq`` in Hz.
    """
    n_points, n_times = scalp.dense.shape
    step = int(round(0.1 * sfreq))
    n_steps = n_times // step
    knots = np.arange(0.0, n_times / sfreq + 2 * _DRIFT_KNOT_S, _DRIFT_KNOT_S)
    walk = np.cumsum(rng.standard_normal((n_points, knots.size)), axis=1)
    spline = scipy.interpolate.CubicSpline(knots, walk * _DRIFT_STEP_UV * UV, axis=1)
    coarse = spline(np.arange(n_steps + 1) * step / sfreq).astype(np.float32)
    fraction = (np.arange(step) / step).astype(np.float32)
    blocks = scalp.dense[:, : n_steps * step].reshape(n_points, n_steps, step)
    blocks += coarse[:, :-1, None]
    blocks += np.diff(coarse, axis=1)[:, :, None] * fraction


def add_line_noise(scalp, rng, sfreq, frequency):
    """Add mains pick-up at every point, 1-4 µV, nearly in phase.

    The same random numbers are drawn whatever the frequency, so sites differ only in
    the mains frequency.

    Parameters
    ----------
    scalp : heschl.synth.brain.ScalpParts
        Potentials under construction, V.
    rng : numpy.random.Generator
        Source of amplitudes and phases.
    sfreq : float
        Sampling rate, Hz.
    frequency : float
        Mains frequency, Hz.
    """
    n_points = scalp.dense.shape[0]
    amplitude = rng.uniform(1.0, 4.0, n_points) * UV
    phase = rng.uniform(0, 2 * np.pi) + rng.normal(0.0, 0.3, n_points)
    angle = 2 * np.pi * frequency * np.arange(scalp.n_times) / sfreq
    scalp.add(amplitude * np.cos(phase), np.sin(angle))
    scalp.add(amplitude * np.sin(phase), np.cos(angle))


def choose_bad_channels(rng, common_channels):
    """Pick one or two bad channels among the common channels.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of the choice.
    common_channels : sequence of str
        Candidates, 10-10 names; the fronto-central region is never chosen.

    Returns
    -------
    list of dict
        ``{"standard_name": str, "kind": str}`` per bad channel.
    """
    eligible = [name for name in common_channels if name not in PROTECTED]
    n_bad = int(rng.integers(1, 3))
    names = rng.choice(eligible, n_bad, replace=False)
    kinds = rng.choice(BAD_KINDS, n_bad)
    return [{"standard_name": str(n), "kind": str(k)} for n, k in zip(names, kinds)]


def _pops(rng, n_times, sfreq):
    """Decaying steps of random sign, about one every 4 s, V."""
    count = rng.poisson(_POPS_PER_S * n_times / sfreq)
    onsets = rng.uniform(0.0, n_times / sfreq, count)
    sizes = rng.uniform(*_POP_UV, count) * rng.choice([-1.0, 1.0], count) * UV
    tau = rng.uniform(0.5, 1.5)
    kernel = np.exp(-np.arange(int(5 * tau * sfreq)) / (tau * sfreq))
    return place_kernel(onsets, kernel, n_times, sfreq, sizes)


def corrupt_channel(signal, kind, rng, sfreq):
    """Return a stored channel made bad.

    Parameters
    ----------
    signal : ndarray, shape (n_times,)
        The channel as referenced at recording, V.
    kind : {"flat", "noisy", "popping"}
        The fault.
    rng : numpy.random.Generator
        Source of the fault's noise.
    sfreq : float
        Sampling rate, Hz.

    Returns
    -------
    ndarray, shape (n_times,)
    """
    noise = rng.standard_normal(signal.size)
    if kind == "flat":
        return noise * _FLAT_UV * UV
    if kind == "noisy":
        return signal + noise * _NOISY_UV * UV
    return signal + _pops(rng, signal.size, sfreq)


def draw_saturation(rng, duration):
    """Draw one amplifier saturation of 0.15-0.25 s in the middle of the recording.

    Returns
    -------
    list of float
        ``[start, stop]``, s.
    """
    start = round(float(rng.uniform(0.2, 0.8) * duration), 3)
    return [start, round(start + float(rng.uniform(0.15, 0.25)), 3)]


def apply_saturation(data, window, sfreq, rail=RAIL_V):
    """Clip stored channels to the rail; pin every channel there during ``window``.

    Parameters
    ----------
    data : ndarray, shape (n_channels, n_times)
        Stored EEG, V; modified in place.
    window : [float, float] or None
        Saturation start and stop, s; each channel sits at the rail of the sign it had
        when the saturation started.
    sfreq : float
        Sampling rate of ``data``, Hz.
    rail : float, default=RAIL_V
        Rail, V.
    """
    np.clip(data, -rail, rail, out=data)
    if window is None:
        return
    first, last = (int(round(t * sfreq)) for t in window)
    sign = np.where(data[:, first] < 0, -1.0, 1.0)
    data[:, first:last] = (sign * rail)[:, None]


def add_low_count_transients(scalp, rng, deviant_onsets, sfreq):
    """Spoil all but a few deviant trials with large movement transients.

    Each spoiled deviant gets a broad 150-300 µV biphasic deflection (a Ricker wavelet,
    zero area, so high-pass filters leave no tail) centred 0.2 s after its onset,
    inside the deviant's own epoch and clear of its neighbours' epochs.

    Returns
    -------
    list of float
        Onsets of the spoiled deviants, s.
    """
    n_spoiled = max(0, deviant_onsets.size - _LOW_COUNT_KEEP)
    spoiled = np.sort(rng.choice(deviant_onsets, n_spoiled, replace=False))
    sizes = rng.uniform(150.0, 300.0, n_spoiled) * UV * rng.choice([-1.0, 1.0], n_spoiled)
    shape = ((np.arange(int(round(0.4 * sfreq))) / sfreq) - 0.2) / 0.05
    kernel = (1.0 - shape**2) * np.exp(-0.5 * shape**2)  # zero area: no filter tail
    course = place_kernel(spoiled, kernel, scalp.n_times, sfreq, sizes)
    scalp.add(geometry.focal_topography("Cz", 0.08), course)
    return [round(float(t), 3) for t in spoiled]
