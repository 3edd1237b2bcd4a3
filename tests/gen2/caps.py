"""Electrode caps of 32, 64 and 128 channels with 10-05 names, and their positions.

Positions come from mne's template 10-05 montage (the same template heschl falls back
on), so a channel's position in the files matches the one heschl would give it.
"""
from __future__ import annotations

import functools
import warnings

import numpy as np

__all__ = ["CAPS", "montage", "cap_names", "positions", "nearest"]

_CAP32 = ("Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8", "FC5", "FC1", "FCz", "FC2", "FC6",
          "T7", "C3", "Cz", "C4", "T8", "TP9", "CP5", "CP1", "CP2", "CP6", "TP10",
          "P7", "P3", "Pz", "P4", "P8", "POz", "O1", "Oz", "O2")

_CAP64 = ("Fp1", "Fpz", "Fp2", "AF7", "AF3", "AFz", "AF4", "AF8",
          "F7", "F5", "F3", "F1", "Fz", "F2", "F4", "F6", "F8",
          "FT7", "FC5", "FC3", "FC1", "FCz", "FC2", "FC4", "FC6", "FT8",
          "T7", "C5", "C3", "C1", "Cz", "C2", "C4", "C6", "T8",
          "TP9", "TP7", "CP5", "CP3", "CP1", "CPz", "CP2", "CP4", "CP6", "TP8", "TP10",
          "P7", "P5", "P3", "P1", "Pz", "P2", "P4", "P6", "P8",
          "PO7", "PO3", "POz", "PO4", "PO8", "O1", "Oz", "O2", "Iz")

_EXTRA128 = ("AFp3h", "AFp4h", "AFF5h", "AFF3h", "AFF1h", "AFF2h", "AFF4h", "AFF6h",
             "FFT7h", "FFC5h", "FFC3h", "FFC1h", "FFC2h", "FFC4h", "FFC6h", "FFT8h",
             "FTT7h", "FCC5h", "FCC3h", "FCC1h", "FCC2h", "FCC4h", "FCC6h", "FTT8h",
             "TTP7h", "CCP5h", "CCP3h", "CCP1h", "CCP2h", "CCP4h", "CCP6h", "TTP8h",
             "TPP7h", "CPP5h", "CPP3h", "CPP1h", "CPP2h", "CPP4h", "CPP6h", "TPP8h",
             "PPO5h", "PPO3h", "PPO1h", "PPO2h", "PPO4h", "PPO6h",
             "POO7h", "POO3h", "POO4h", "POO8h", "OI1h", "OI2h",
             "F9", "F10", "FT9", "FT10", "T9", "T10", "P9", "P10", "PO9", "PO10", "AF5", "AF6")

CAPS = {32: _CAP32, 64: _CAP64, 128: _CAP64 + _EXTRA128}


@functools.lru_cache(maxsize=1)
def montage():
    """mne's template 10-05 montage (colin27 positions; standard_1005 on older mne)."""
    import mne

    try:
        return mne.channels.make_standard_montage("colin27_1005")
    except ValueError:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return mne.channels.make_standard_montage("standard_1005")


def cap_names(n_channels):
    """The names of a cap of ``n_channels`` (32, 64 or 128)."""
    if n_channels not in CAPS:
        raise ValueError(f"gen2: n_channels: {n_channels} is not a cap size; use one of 32, 64, 128.")
    return list(CAPS[n_channels])


def positions(names):
    """Electrode positions, ndarray shape (n_channels, 3), m, in the montage's frame."""
    ch_pos = montage().get_positions()["ch_pos"]
    return np.array([ch_pos[n] for n in names], dtype=float)


def nearest(names, name):
    """Other channels of ``names`` ordered by distance from ``name``."""
    pos = positions(names)
    i = names.index(name)
    order = np.argsort(np.linalg.norm(pos - pos[i], axis=1))
    return [names[j] for j in order if j != i]
