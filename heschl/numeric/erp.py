"""Event-related potential measures: mean amplitude, peak, region average.

Waveforms are in V with time on the last axis; ``times`` in s.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from heschl.errors import DefinitionError, InputDataError, did_you_mean, problem
from heschl.vocabulary import POLARITIES

__all__ = ["mean_amplitude", "peak", "Peak", "region_mean", "plus_minus_snr", "fractional_area_latency"]

#: A sample within this fraction of the sample period of a window edge counts as on
#: the edge, so float rounding of a time grid (0.1 vs 0.10000000000000003) is absorbed.
EDGE_TOLERANCE = 1e-6


class Peak(NamedTuple):
    """Result of `peak`: three arrays of the same shape.

    Attributes
    ----------
    amplitude : ndarray, V
        Signed value of the peak sample.
    latency : ndarray, s
        Time of the peak sample.
    is_local : ndarray of bool
        True where a local peak was found; False where none existed and the most
        extreme sample of the window was reported instead (the fallback).
    """

    amplitude: np.ndarray
    latency: np.ndarray
    is_local: np.ndarray


def _window_mask(x, times, window, where):
    """Check shapes and return the boolean mask of samples with lo <= t <= hi."""
    times = np.asarray(times, dtype=float)
    if times.ndim != 1 or times.size < 2 or np.shape(x)[-1:] != times.shape:
        raise InputDataError(problem(
            where, f"times has shape {times.shape} but x has shape {np.shape(x)}",
            "pass one time in s per sample on the last axis of x", key="times"))
    steps = np.diff(times)
    if not np.all(steps > 0):
        raise InputDataError(problem(where, "times are not strictly increasing",
                                     "pass the epoch time axis in s", key="times"))
    lo, hi = (float(v) for v in window)
    tol = EDGE_TOLERANCE * steps.min()
    if not lo <= hi:
        raise DefinitionError(problem(where, f"window [{lo:g}, {hi:g}] s ends before it starts",
                                      "give the start time first", key="window"))
    if lo < times[0] - tol or hi > times[-1] + tol:
        raise DefinitionError(problem(
            where, f"window [{lo:g}, {hi:g}] s reaches outside the epoch "
            f"[{times[0]:g}, {times[-1]:g}] s", "choose a window inside the epoch", key="window"))
    mask = (times >= lo - tol) & (times <= hi + tol)
    if not mask.any():
        raise DefinitionError(problem(
            where, f"window [{lo:g}, {hi:g}] s holds no sample (spacing {steps.min():g} s)",
            "widen the window", key="window"))
    return times, mask


def mean_amplitude(x, times, window):
    """Mean over the samples inside a time window.

    Parameters
    ----------
    x : ndarray, shape (..., n_times), V
        Waveforms, e.g. shape (n_channels, n_times).
    times : ndarray, shape (n_times,), s
        Sample times.
    window : (float, float), s
        Start and end; both ends are included: samples with
        ``window[0] <= t <= window[1]`` (to within ``EDGE_TOLERANCE`` sample periods).

    Returns
    -------
    amplitude : ndarray, shape (...), V
        The plain sample mean (no interpolation). It is linear:
        ``mean_amplitude(a - b) == mean_amplitude(a) - mean_amplitude(b)``.
    """
    x = np.asarray(x)
    _, mask = _window_mask(x, times, window, "mean_amplitude")
    return x[..., mask].mean(axis=-1)


def _local_peaks(y, local):
    """Mask of samples strictly greater than the ``local`` samples on each side.

    Samples with fewer than ``local`` neighbours on a side cannot be local peaks.
    """
    if local == 0:
        return np.ones(y.shape, dtype=bool)
    pad = [(0, 0)] * (y.ndim - 1) + [(local, local)]
    padded = np.pad(y, pad, constant_values=np.inf)
    views = np.lib.stride_tricks.sliding_window_view(padded, 2 * local + 1, axis=-1)
    neighbours = np.delete(views, local, axis=-1)
    return np.all(y[..., np.newaxis] > neighbours, axis=-1)


def peak(x, times, window, polarity="negative", local=2):
    """Most extreme local peak inside a time window.

    Parameters
    ----------
    x : ndarray, shape (..., n_times), V
        Waveforms; must not contain NaN.
    times : ndarray, shape (n_times,), s
        Sample times.
    window : (float, float), s
        Search window, both ends included (as in `mean_amplitude`).
    polarity : {"negative", "positive"}, default="negative"
        Look for minima ("negative") or maxima ("positive").
    local : int, default=2
        A local peak must be strictly more extreme than the ``local`` samples on each
        side. Those neighbours may lie outside the window but must exist in the epoch.
        0 disables the criterion.

    Returns
    -------
    result : Peak
        Named tuple ``(amplitude, latency, is_local)``, each of shape (...).
        Among the local peaks inside the window the most extreme one is reported
        (the earliest on ties). Where the window holds no local peak (e.g. a monotonic
        flank), the most extreme sample of the window is reported instead and
        ``is_local`` is False there: such a value sits on the window edge and is not a
        component peak.
    """
    where = "peak"
    if polarity not in POLARITIES:
        raise DefinitionError(problem(
            where, f'polarity = "{polarity}" is not one of {", ".join(POLARITIES)}'
            + did_you_mean(polarity, POLARITIES), "choose the sign of the component",
            key="polarity"))
    if int(local) != local or local < 0:
        raise DefinitionError(problem(where, f"local = {local} is not a whole number >= 0",
                                      "pass a number of samples such as 2", key="local"))
    x = np.asarray(x, dtype=float)
    times, mask = _window_mask(x, times, window, where)
    if np.isnan(x).any():
        raise InputDataError(problem(where, "x contains NaN", "remove or repair the bad "
                                     "samples before measuring peaks", key="x"))
    y = -x if polarity == "negative" else x
    candidates = _local_peaks(y, int(local)) & mask
    is_local = candidates.any(axis=-1)
    allowed = np.where(is_local[..., np.newaxis], candidates, mask)
    index = np.argmax(np.where(allowed, y, -np.inf), axis=-1)
    amplitude = np.take_along_axis(x, index[..., np.newaxis], axis=-1)[..., 0]
    return Peak(amplitude, times[index], is_local)


def _suggest(name, names):
    """Did-you-mean hint that also catches a difference of case only ('FZ' for 'Fz')."""
    same_case = [n for n in names if n.lower() == name.lower()]
    return f' (did you mean "{same_case[0]}"?)' if same_case else did_you_mean(name, names)


def region_mean(x, channel_names, region):
    """Average over the channels of a named region.

    Parameters
    ----------
    x : ndarray, shape (..., n_channels, n_times), V
        Waveforms with channels on the second-last axis.
    channel_names : sequence of str, length n_channels
        Names of the channels of ``x``, in order.
    region : sequence of str
        Channels to average (exact, case-sensitive names).

    Returns
    -------
    mean : ndarray, shape (..., n_times), V
    """
    where = "region_mean"
    x = np.asarray(x)
    names = [str(c) for c in channel_names]
    if x.ndim < 2 or x.shape[-2] != len(names):
        raise InputDataError(problem(
            where, f"x has shape {x.shape} but {len(names)} channel names were given",
            "pass one name per channel on axis -2 of x", key="channel_names"))
    wanted = [str(c) for c in region]
    if not wanted:
        raise DefinitionError(problem(where, "the region lists no channel",
                                      "name at least one channel", key="region"))
    missing = [c for c in wanted if c not in names]
    if missing:
        hints = ", ".join(c + _suggest(c, names) for c in missing)
        raise InputDataError(problem(
            where, f"channels {hints} of the region are not in the data "
            f"({len(names)} channels)", "fix the region or the channel names", key="region"))
    return x[..., [names.index(c) for c in wanted], :].mean(axis=-2)


def plus_minus_snr(trials, times, window, pooled=False):
    """Signal-to-noise ratio of an average, with noise from the plus-minus average.

    The plus-minus (alternating-sign) average cancels the time-locked signal and keeps
    noise of the same size as in the ordinary average (Schimmel 1967, Science
    155:1575-1577), so ``rms(average) / rms(plus-minus average)`` over the window is the
    amplitude SNR; about 1 when there is no response.

    Parameters
    ----------
    trials : ndarray, shape (n_trials, ..., n_times), V
    times : ndarray, shape (n_times,), s
    window : (float, float), s
    pooled : bool, default=False
        Pool the middle axes (e.g. channels) too, giving one SNR for the whole average.

    Returns
    -------
    snr : ndarray, shape (...), or float when ``pooled``
        NaN with fewer than two trials.
    """
    trials = np.asarray(trials, dtype=float)
    n = trials.shape[0] - trials.shape[0] % 2
    if n < 2:
        return float("nan") if pooled else np.full(trials.shape[1:-1], np.nan)
    _, mask = _window_mask(trials, times, window, "plus_minus_snr")
    signs = np.where(np.arange(n) % 2 == 0, 1.0, -1.0).reshape((n,) + (1,) * (trials.ndim - 1))
    average = trials[:n].mean(axis=0)[..., mask]
    noise = (signs * trials[:n]).mean(axis=0)[..., mask]
    axes = tuple(range(average.ndim)) if pooled else -1
    return np.sqrt((average ** 2).mean(axis=axes) / (noise ** 2).mean(axis=axes))


def fractional_area_latency(x, times, window, polarity="negative", fraction=0.5):
    """Time at which the area of the waveform's ``polarity`` part reaches ``fraction`` of it.

    Only the part of the waveform of the given sign counts (the negative part for a
    negative component); the area is accumulated over the window with the trapezoidal
    rule and the crossing is interpolated linearly between samples. Fractional-area
    latency is less sensitive to noise than peak latency (Kiesel et al. 2008,
    Psychophysiology 45:250-274; from memory).

    Parameters
    ----------
    x : ndarray, shape (..., n_times), V
    times : ndarray, shape (n_times,), s
    window : (float, float), s
    polarity : {"negative", "positive"}, default="negative"
    fraction : float, default=0.5
        Between 0 and 1.

    Returns
    -------
    latency : ndarray, shape (...), s
        NaN where the window holds no area of that sign.
    """
    where = "fractional_area_latency"
    if polarity not in POLARITIES:
        raise DefinitionError(problem(where, f'polarity "{polarity}" is not known{did_you_mean(polarity, POLARITIES)}',
                                      f"use one of: {', '.join(POLARITIES)}", key="polarity"))
    if not 0.0 < float(fraction) < 1.0:
        raise DefinitionError(problem(where, f"fraction {fraction} is not between 0 and 1",
                                      "use e.g. 0.5 for the 50 % area latency", key="fraction"))
    times, mask = _window_mask(x, times, window, where)
    t = times[mask]
    y = np.asarray(x, dtype=float)[..., mask]
    part = np.clip(-y if polarity == "negative" else y, 0.0, None)
    steps = (part[..., 1:] + part[..., :-1]) / 2.0 * np.diff(t)
    area = np.concatenate([np.zeros(part.shape[:-1] + (1,)), np.cumsum(steps, axis=-1)], axis=-1)
    total = area[..., -1:]
    goal = fraction * total
    out = np.full(part.shape[:-1], np.nan)
    flat_area, flat_goal, flat_out = area.reshape(-1, t.size), goal.reshape(-1), out.reshape(-1)
    for i, (a, g) in enumerate(zip(flat_area, flat_goal)):
        if a[-1] > 0:
            flat_out[i] = np.interp(g, a, t)
    return flat_out.reshape(out.shape) if out.ndim else float(flat_out[0])
