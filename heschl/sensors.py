"""Sensor types: which channels hold data, and in which unit people read them.

EEG channels are in V, magnetometers in T and planar gradiometers in T/m inside heschl
(mne's SI units). Every stage that compares amplitudes (bad-channel detection,
rejection thresholds, signal-to-noise ratios, features) does so within one sensor type:
a value in V and one in T cannot be pooled. This module names the types and the unit
each is shown in.
"""
from __future__ import annotations

__all__ = ["DATA_TYPES", "DISPLAY", "SI", "data_picks", "types_of", "by_type", "show", "unit_type"]

#: Channel types that carry brain signal, in the order stages report them.
DATA_TYPES = ("eeg", "mag", "grad")

#: Type -> SI unit of its data inside heschl.
SI = {"eeg": "V", "mag": "T", "grad": "T/m"}

#: Type -> (unit shown to people, factor from the SI value to it).
DISPLAY = {"eeg": ("uV", 1e6), "mag": ("fT", 1e15), "grad": ("fT/cm", 1e13)}

# Reported unit -> the sensor type whose quantity it measures (amplitudes, powers, log powers).
_UNIT_TYPES = {
    "uV": "eeg", "V": "eeg", "uV^2": "eeg", "V^2": "eeg", "log10(uV^2/Hz)": "eeg",
    "fT": "mag", "T": "mag", "fT^2": "mag", "T^2": "mag", "log10(fT^2/Hz)": "mag",
    "fT/cm": "grad", "T/m": "grad", "(fT/cm)^2": "grad", "(T/m)^2": "grad", "log10((fT/cm)^2/Hz)": "grad",
}


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
