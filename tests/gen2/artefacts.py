"""Scalp artefacts with their truth: blinks, saccades, muscle bursts, electrode pops, drift, mains.

Each function returns an array to add (µV, shape (n_channels, n_times)) or adds in place,
and a list of plain records of what it injected. Shapes and rates are this generator's
own choices (see ``RATES``).
"""
from __future__ import annotations

import numpy as np

from .caps import montage, positions

__all__ = ["RATES", "event_times", "blink_pattern", "saccade_pattern", "blink_course", "saccade_course",
           "blinks", "saccades", "muscle",
           "pops", "drift", "mains"]

#: Events per minute by paradigm (rest: eyes-open block; no blinks with the eyes closed).
RATES = {
    "blink": {"oddball": 11.0, "clicktrain": 5.0, "rest": 9.0},
    "saccade": {"oddball": 3.0, "clicktrain": 2.0, "rest": 4.0},
    "muscle": {"oddball": 1.2, "clicktrain": 1.2, "rest": 0.8},
    "pop": {"oddball": 0.3, "clicktrain": 0.3, "rest": 0.3},
}
BLINK_UV = (80.0, 220.0)          # peak at the mean of Fp1/Fp2
BLINK_SHAPE = (3.0, 0.045)        # gamma pulse: order k, time constant s (peak at k * tau = 135 ms)
SACCADE_UV = (20.0, 60.0)         # step height at the lateral frontal electrode nearest the eye
MUSCLE_UV = (8.0, 30.0)           # rms at the burst's centre electrode
MUSCLE_BAND = (20.0, 150.0)       # Hz (capped below Nyquist)
POP_UV = (100.0, 300.0)
DRIFT_UV = 10.0                   # rms of the slow wander per electrode
MAINS_UV = 0.6                    # amplitude at every electrode
TEMPORAL = ("T7", "T8", "FT7", "FT8", "TP7", "TP8")


def event_times(rng, rate_per_min, windows, min_gap=1.5, margin=0.5):
    """Poisson event times (s) inside ``windows`` [(start, stop), ...], at least ``min_gap`` apart."""
    times = []
    for start, stop in windows:
        t = start + margin
        while True:
            t += min_gap + rng.exponential(60.0 / rate_per_min) if rate_per_min > 0 else np.inf
            if t > stop - margin:
                break
            times.append(t)
    return np.asarray(times)


def _eyes():
    where = montage().get_positions()["ch_pos"]
    left, right = np.asarray(where["Fp1"]), np.asarray(where["Fp2"])
    down = np.array([0.0, 0.012, -0.035])     # m: the eyes lie below and in front of Fp1/Fp2
    return left + down, right + down


def _falloff(pos, eye, length=0.035):
    return np.exp(-np.linalg.norm(pos - eye, axis=1) / length)


def blink_pattern(names):
    """Symmetric frontal-pole pattern, 1 at the mean of Fp1/Fp2 (reference-free)."""
    pos, (le, re) = positions(names), _eyes()
    p = _falloff(pos, le) + _falloff(pos, re)
    fp = positions(["Fp1", "Fp2"])
    return p / np.mean(_falloff(fp, le) + _falloff(fp, re))


def saccade_pattern(names):
    """Horizontal dipolar pattern: + on the left, - on the right, 1 at F7 (reference-free)."""
    pos, (le, re) = positions(names), _eyes()
    f7 = positions(["F7"])
    return (_falloff(pos, le, 0.05) - _falloff(pos, re, 0.05)) / (_falloff(f7, le, 0.05) - _falloff(f7, re, 0.05))


def _blink_pulse(sfreq):
    """The unit blink: a gamma pulse of ``BLINK_SHAPE``, peak 1 at k * tau."""
    k, tau = BLINK_SHAPE
    t = np.arange(int(8 * k * tau * sfreq)) / sfreq
    return (t / (k * tau)) ** k * np.exp(k - t / tau)


def _saccade_edge(t, c):
    return 1.0 / (1.0 + np.exp(-(t - c) / 0.008))   # ~30 ms 10-90 % rise


def blink_course(records, n, sfreq):
    """The blinks' time course (µV at the mean of Fp1/Fp2) rebuilt from their truth records."""
    pulse = _blink_pulse(sfreq)
    course = np.zeros(n)
    for b in records:
        i = int(round(b["onset_s"] * sfreq))
        seg = pulse[:max(0, min(len(pulse), n - i))]
        course[i:i + len(seg)] += b["amplitude_uv"] * seg
    return course


def saccade_course(records, times):
    """The eye movements' time course (µV at F7) rebuilt from their truth records."""
    course = np.zeros(len(times))
    with np.errstate(over="ignore"):
        for s in records:
            course += s["amplitude_uv"] * (_saccade_edge(times, s["onset_s"])
                                           - _saccade_edge(times, s["onset_s"] + s["hold_s"]))
    return course


def blinks(rng, x, names, sfreq, times):
    """Add gamma-shaped blink pulses at ``times`` (s); returns their records."""
    k, tau = BLINK_SHAPE
    pulse = _blink_pulse(sfreq)
    pattern = blink_pattern(names)[:, None]
    out = []
    for onset in times:
        amp = rng.uniform(*BLINK_UV)
        i = int(round(onset * sfreq))
        seg = pulse[:max(0, min(len(pulse), x.shape[1] - i))]
        x[:, i:i + len(seg)] += (amp * pattern * seg).astype(x.dtype)
        out.append({"onset_s": round(float(onset), 4), "peak_s": round(float(onset + k * tau), 4),
                    "amplitude_uv": round(float(amp), 2)})
    return out


def saccades(rng, x, names, sfreq, times):
    """Add look-and-return steps (30 ms logistic edges, held 0.3-1.2 s); returns their records."""
    pattern = saccade_pattern(names)[:, None]
    n = x.shape[1]
    out = []
    for onset in times:
        amp = rng.uniform(*SACCADE_UV) * rng.choice([-1.0, 1.0])
        hold = rng.uniform(0.3, 1.2)
        i0, i1 = int((onset - 0.2) * sfreq), min(n, int((onset + hold + 0.4) * sfreq))
        if i0 < 0 or i1 <= i0:
            continue
        t = np.arange(i0, i1) / sfreq
        course = amp * (_saccade_edge(t, onset) - _saccade_edge(t, onset + hold))
        x[:, i0:i1] += (pattern * course).astype(x.dtype)
        out.append({"onset_s": round(float(onset), 4), "hold_s": round(float(hold), 3),
                    "amplitude_uv": round(float(amp), 2)})
    return out


def muscle(rng, x, names, sfreq, times):
    """Add broadband (20-150 Hz) bursts over a temporal electrode; returns their records."""
    pos = positions(names)
    centres = [c for c in TEMPORAL if c in names]
    high = min(MUSCLE_BAND[1], 0.45 * sfreq)
    out = []
    for onset in times:
        centre = centres[rng.integers(len(centres))]
        dur = rng.uniform(0.3, 1.2)
        rms = rng.uniform(*MUSCLE_UV)
        i0 = int(onset * sfreq)
        m = min(int(dur * sfreq), x.shape[1] - i0)
        if m < 10:
            continue
        freqs = np.fft.rfftfreq(m, 1.0 / sfreq)
        spec = np.fft.rfft(rng.standard_normal(m)) * ((freqs >= MUSCLE_BAND[0]) & (freqs <= high))
        course = np.fft.irfft(spec, m)
        course *= np.hanning(m) / (np.sqrt(np.mean((course * np.hanning(m)) ** 2)) or 1.0) * rms
        spread = np.exp(-np.sum((pos - pos[names.index(centre)]) ** 2, axis=1) / (2 * 0.025 ** 2))
        x[:, i0:i0 + m] += (spread[:, None] * course).astype(x.dtype)
        out.append({"onset_s": round(float(onset), 4), "duration_s": round(float(dur), 3), "channel": centre,
                    "rms_uv": round(float(rms), 2),
                    "channels": [names[j] for j in np.flatnonzero(spread > 0.3)]})
    return out


def pops(rng, x, names, sfreq, times, exclude=()):
    """Add electrode pops (a step decaying over 0.15-0.5 s) on single channels; returns records."""
    choices = [n for n in names if n not in exclude]
    out = []
    for onset in times:
        name = choices[rng.integers(len(choices))]
        amp = rng.uniform(*POP_UV) * rng.choice([-1.0, 1.0])
        tau = rng.uniform(0.15, 0.5)
        i0 = int(onset * sfreq)
        t = np.arange(min(int(6 * tau * sfreq), x.shape[1] - i0)) / sfreq
        x[names.index(name), i0:i0 + len(t)] += (amp * np.exp(-t / tau)).astype(x.dtype)
        out.append({"onset_s": round(float(onset), 4), "channel": name, "amplitude_uv": round(float(amp), 1),
                    "decay_s": round(float(tau), 3)})
    return out


def drift(rng, n_channels, n_times, sfreq, rms=DRIFT_UV):
    """Slow wander below about 0.1 Hz per electrode, ``rms`` µV; shape (n_channels, n_times)."""
    step = max(1, int(sfreq))                    # one random-walk step per second, interpolated
    n_coarse = n_times // step + 2
    walk = np.cumsum(rng.standard_normal((n_channels, n_coarse)), axis=1)
    walk -= walk.mean(axis=1, keepdims=True)
    walk *= rms / (walk.std(axis=1, keepdims=True) + 1e-12)
    t = np.arange(n_times) / step
    return np.stack([np.interp(t, np.arange(n_coarse), w) for w in walk]).astype(np.float32)


def mains(rng, n_channels, n_times, sfreq, line, amplitude=MAINS_UV):
    """Common mains pick-up (amplitude varying 0.5-1.5 x by channel); shape (n_channels, n_times)."""
    t = np.arange(n_times) / sfreq
    gains = amplitude * rng.uniform(0.5, 1.5, n_channels)
    return (gains[:, None] * np.sin(2 * np.pi * line * t + rng.uniform(0, 2 * np.pi))[None, :]).astype(np.float32)
