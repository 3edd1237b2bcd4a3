"""Planted bad channels by kind, applied to the data as recorded (µV, referential).

Kinds: ``flat`` (an input reading only amplifier noise), ``noisy`` (broadband noise of
3-6 x the channel's own amplitude added), ``bridged`` (two neighbours sharing one signal,
both listed), ``high-impedance`` (strong mains at the line frequency and its third
harmonic plus a large slow drift), ``intermittent`` (several spells of disconnection, in
which the channel reads a floating wander plus mains instead of EEG).
"""
from __future__ import annotations

import numpy as np

from .caps import nearest

__all__ = ["KINDS", "choose_bad", "plant"]

KINDS = ("flat", "noisy", "bridged", "high-impedance", "intermittent")


def choose_bad(rng, names, bad, protected):
    """Resolve the ``bad`` argument to ``{channel: kind}``.

    ``bad`` is None (none), an int (that many kinds in the order of KINDS, cycling), a
    list of kinds (channels drawn at random) or a dict channel -> kind. Channels in
    ``protected`` are never drawn. A ``bridged`` entry takes its nearest free neighbour
    as its partner.
    """
    if bad is None:
        return {}
    if isinstance(bad, dict):
        unknown = [k for k in bad.values() if k not in KINDS]
        if unknown:
            raise ValueError(f"gen2: bad: unknown kind {unknown[0]!r}; use one of {', '.join(KINDS)}.")
        return dict(bad)
    kinds = [KINDS[i % len(KINDS)] for i in range(bad)] if isinstance(bad, int) else list(bad)
    free = [n for n in names if n not in protected]
    chosen = {}
    for kind in kinds:
        if kind not in KINDS:
            raise ValueError(f"gen2: bad: unknown kind {kind!r}; use one of {', '.join(KINDS)}.")
        pool = [n for n in free if n not in chosen]
        name = pool[rng.integers(len(pool))]
        chosen[name] = kind
    return chosen


def _partner(names, name, taken, protected):
    return next(n for n in nearest(names, name) if n not in taken and n not in protected)


def _broadband(rng, n_times, sfreq, low=1.0, high=None):
    high = 0.4 * sfreq if high is None else high
    freqs = np.fft.rfftfreq(n_times, 1.0 / sfreq)
    x = np.fft.irfft(np.fft.rfft(rng.standard_normal(n_times)) * ((freqs >= low) & (freqs <= high)), n_times)
    return x / x.std()


def _wander(rng, n_times, sfreq, rms):
    walk = np.cumsum(rng.standard_normal(n_times)) / np.sqrt(sfreq)
    walk -= np.linspace(walk[0], walk[-1], n_times)
    return walk * rms / (walk.std() + 1e-12)


def plant(rng, x, names, sfreq, chosen, line, protected=(), typical=4.0):
    """Corrupt the chosen channels of ``x`` (µV) in place; returns the truth records.

    ``typical`` (µV) is the background's rms in 1-30 Hz; a noisy channel's added noise has
    3-6 times that rms in 1-30 Hz (white from 1 Hz to 0.4 x the sampling rate).

    Returns
    -------
    records : list of dict
        One per bad channel: ``channel``, ``kind`` and the kind's parameters (a bridged
        pair gives two records naming each other).
    """
    n = x.shape[1]
    t = np.arange(n) / sfreq
    records, taken = [], set(chosen)
    for name, kind in chosen.items():
        i = names.index(name)
        own = typical
        if kind == "flat":
            x[i] = 0.15 * rng.standard_normal(n) + rng.uniform(-20, 20)
            records.append({"channel": name, "kind": kind, "noise_uv": 0.15})
        elif kind == "noisy":
            factor = rng.uniform(3.0, 6.0)
            # White noise: the share of its power in 1-30 Hz is 29 / (0.4 sfreq - 1).
            total = factor * typical * np.sqrt((0.4 * sfreq - 1.0) / 29.0)
            x[i] += total * _broadband(rng, n, sfreq)
            records.append({"channel": name, "kind": kind, "added_rms_uv_1_30hz": round(factor * typical, 2),
                            "added_rms_uv": round(float(total), 2), "factor": round(float(factor), 2)})
        elif kind == "bridged":
            other = _partner(names, name, taken, protected)
            taken.add(other)
            j = names.index(other)
            shared = 0.5 * (x[i] + x[j])
            x[i] = shared + 0.02 * own * rng.standard_normal(n)
            x[j] = shared + 0.02 * own * rng.standard_normal(n)
            records.append({"channel": name, "kind": kind, "partner": other})
            records.append({"channel": other, "kind": kind, "partner": name})
        elif kind == "high-impedance":
            amp = rng.uniform(15.0, 40.0)
            phase = rng.uniform(0, 2 * np.pi)
            x[i] += amp * np.sin(2 * np.pi * line * t + phase) + amp / 3 * np.sin(2 * np.pi * 3 * line * t)
            x[i] += _wander(rng, n, sfreq, rng.uniform(40.0, 80.0))
            records.append({"channel": name, "kind": kind, "mains_uv": round(float(amp), 1)})
        elif kind == "intermittent":
            spells = _spells(rng, n / sfreq)
            for start, stop in spells:
                a, b = int(start * sfreq), int(stop * sfreq)
                x[i, a:b] = (_wander(rng, b - a, sfreq, rng.uniform(100.0, 300.0))
                             + 30.0 * np.sin(2 * np.pi * line * t[a:b]))
            records.append({"channel": name, "kind": kind,
                            "spells_s": [[round(a, 3), round(b, 3)] for a, b in spells],
                            "fraction": round(sum(b - a for a, b in spells) / (n / sfreq), 3)})
    return records


def _spells(rng, duration):
    """3-5 disconnection spells covering about 15-30 % of the recording."""
    k = int(rng.integers(3, 6))
    share = rng.uniform(0.15, 0.30)
    lengths = rng.dirichlet(np.ones(k)) * share * duration
    gaps = rng.dirichlet(np.ones(k + 1)) * (1 - share) * duration
    out, t = [], 0.0
    for g, length in zip(gaps, lengths):
        t += g
        out.append((float(t), float(t + length)))
        t += length
    return out
