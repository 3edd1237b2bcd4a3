"""Peak-to-peak artefact rejection with a fixed threshold, keeping a reason per epoch.

Amplitudes are in V inside; reasons are written in uV for people.
"""
from __future__ import annotations

import logging

import numpy as np

from heschl.errors import DefinitionError, InputDataError, problem
from heschl.sensors import DISPLAY

__all__ = ["peak_to_peak", "fixed_threshold"]

logger = logging.getLogger(__name__)

#: Limits above this many volts (10 mV) are taken for a unit mistake (uV passed as V).
MAX_PLAUSIBLE_LIMIT = 1e-2


def peak_to_peak(x):
    """Peak-to-peak amplitude (max - min over time) per epoch and channel.

    Parameters
    ----------
    x : ndarray, shape (n_epochs, n_channels, n_times), V
        Epochs. A constant offset per epoch and channel (baseline correction) does not
        change the result.

    Returns
    -------
    ptp : ndarray, shape (n_epochs, n_channels), V
        NaN wherever the channel holds a NaN.
    """
    x = np.asarray(x, dtype=float)
    if x.ndim != 3 or x.shape[-1] == 0:
        raise InputDataError(problem(
            "peak_to_peak", f"x has shape {x.shape}",
            "pass epochs shaped (n_epochs, n_channels, n_times)", key="x"))
    return x.max(axis=-1) - x.min(axis=-1)


def _microvolts(value_v, other_v=None):
    """Format V as uV with 1 decimal (dropping '.0'); more decimals if needed to differ."""
    for decimals in range(1, 7):
        text = f"{value_v * 1e6:.{decimals}f}"
        if other_v is None or text != f"{other_v * 1e6:.{decimals}f}":
            break
    return text[:-2] if text.endswith(".0") else text


def _limits(limit, n_channels):
    limits = np.asarray(limit, dtype=float)
    if limits.ndim > 1 or limits.size not in (1, n_channels) or not np.all(
            np.isfinite(limits) & (limits > 0)):
        raise DefinitionError(problem(
            "fixed_threshold", f"limit = {limits.tolist()} V is not one positive value or "
            f"one per channel ({n_channels})",
            "pass the peak-to-peak limit in V, e.g. 100e-6", key="limit"))
    if np.any(limits > MAX_PLAUSIBLE_LIMIT):
        raise DefinitionError(problem(
            "fixed_threshold", f"limit = {limits.max():g} V is above "
            f"{MAX_PLAUSIBLE_LIMIT:g} V and looks like a value in uV",
            "pass the limit in V, e.g. 100e-6 for 100 uV", key="limit"))
    return np.broadcast_to(limits, (n_channels,))


def _reason(value, lim, name, kind="eeg"):
    if not np.isfinite(value):
        return f"peak-to-peak not finite ({value}) at {name}"
    unit, factor = DISPLAY[kind]
    scale = factor / 1e6  # _microvolts shows value * 1e6
    return f"peak-to-peak {_microvolts(value * scale, lim * scale)} {unit} > {_microvolts(lim * scale)} {unit} at {name}"


def fixed_threshold(ptp, limit, channel_names, types=None):
    """Mark epochs whose peak-to-peak amplitude exceeds a fixed limit on any channel.

    Parameters
    ----------
    ptp : ndarray, shape (n_epochs, n_channels), V
        Peak-to-peak amplitudes from `peak_to_peak`.
    limit : float or ndarray, shape (n_channels,), V
        Largest accepted peak-to-peak amplitude; an epoch is dropped when a channel is
        strictly above it (or is not finite). 100e-6 V is a common choice for EEG.
    channel_names : sequence of str, length n_channels
        Names used in the reasons.
    types : sequence of str or None
        Sensor type per channel ("eeg", "mag", "grad"), for the unit of the reasons
        (uV, fT, fT/cm); None means all EEG. Limits are then in T or T/m for MEG channels.

    Returns
    -------
    keep : ndarray of bool, shape (n_epochs,)
        True for epochs that pass.
    reasons : list of tuple of str, length n_epochs
        One string per offending channel, e.g.
        ``"peak-to-peak 212 uV > 100 uV at Fp1"``; an empty tuple for kept epochs.
    """
    ptp = np.asarray(ptp, dtype=float)
    names = [str(c) for c in channel_names]
    if ptp.ndim != 2 or ptp.shape[1] != len(names):
        raise InputDataError(problem(
            "fixed_threshold", f"ptp has shape {ptp.shape} but {len(names)} channel names "
            "were given", "pass ptp shaped (n_epochs, n_channels) and one name per channel",
            key="channel_names"))
    kinds = list(types) if types is not None else ["eeg"] * len(names)
    limits = _limits(limit, len(names))
    bad = ~np.isfinite(ptp) | (ptp > limits)
    keep = ~bad.any(axis=1)
    reasons = [tuple(_reason(ptp[e, c], limits[c], names[c], kinds[c]) for c in np.flatnonzero(row))
               for e, row in enumerate(bad)]
    n_drop = int((~keep).sum())
    logger.info("Dropped %d of %d epochs (%.0f %%) by peak-to-peak limit",
                n_drop, keep.size, 100.0 * n_drop / max(keep.size, 1))
    return keep, reasons
