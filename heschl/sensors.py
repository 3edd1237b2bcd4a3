"""Sensor types: which channels hold data, and in which unit people read them.

EEG channels are in V, magnetometers in T and planar gradiometers in T/m inside heschl
(mne's SI units). Every stage that compares amplitudes (bad-channel detection,
rejection thresholds, signal-to-noise ratios, features) does so within one sensor type:
a value in V and one in T cannot be pooled. This module names the types and the unit
each is shown in.
"""
from __future__ import annotations

from .vocabulary import AMPLITUDE_UNITS, DISPLAY_UNITS, LOG_POWER_UNITS, POWER_UNITS, SENSOR_TYPES, SI_UNITS

__all__ = ["DATA_TYPES", "DISPLAY", "SI", "data_picks", "types_of", "by_type", "show", "unit_type"]

#: Channel types that carry brain signal, in the order stages report them.
DATA_TYPES = SENSOR_TYPES

#: Type -> SI unit of its data inside heschl.
SI = SI_UNITS

#: Type -> (unit shown to people, factor from the SI value to it).
DISPLAY = DISPLAY_UNITS

# Reported unit -> the sensor type whose quantity it measures (amplitudes, powers, log powers).
_UNIT_TYPES = {u: t for table in (AMPLITUDE_UNITS, POWER_UNITS, LOG_POWER_UNITS) for t in SENSOR_TYPES
               for u in table[t]}


def data_picks(info):
    """Indices of the EEG, magnetometer and gradiometer channels (not EOG, not stimulus, not
    the reference magnetometers of axial-gradiometer systems, which record no brain signal)."""
    import mne

    return mne.pick_types(info, eeg=True, meg=True, ref_meg=False, exclude=[])


def types_of(info, picks=None):
    """Channel type of each picked channel ("eeg", "mag", "grad", ...)."""
    import mne

    picks = range(info["nchan"]) if picks is None else picks
    return [mne.channel_type(info, int(i)) for i in picks]


def by_type(types):
    """Type -> positions in ``types``, for the data types present, in :data:`DATA_TYPES` order."""
    out = {}
    for t in DATA_TYPES:
        idx = [i for i, x in enumerate(types) if x == t]
        if idx:
            out[t] = idx
    return out


def show(value, kind, decimals=1):
    """An SI amplitude as people read it, e.g. ``show(2e-5, "eeg") == "20.0 uV"``."""
    unit, factor = DISPLAY[kind]
    return f"{value * factor:.{decimals}f} {unit}"


def unit_type(unit):
    """The sensor type a reported unit belongs to, or None for unitless, time and frequency units."""
    return _UNIT_TYPES.get(unit)
