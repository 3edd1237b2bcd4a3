"""Model-ready labelled arrays (xarray Datasets) from kept trials, and their NetCDF files.

:func:`model_arrays` turns a :class:`heschl.features.Source` into one
:class:`xarray.Dataset` per kind of array; :func:`write_netcdf` writes one to a NetCDF-4
file through a temporary name. Values are SI. Every numeric variable and coordinate
carries a ``units`` attribute ("V", "V^2", "s", "Hz", "V^2/Hz" or "1" for EEG; T and T/m
in place of V for magnetometers and gradiometers, named per channel by the
``channel_type`` coordinate; a cross-spectrum between two types is in the product of
their units per Hz); text labels
(``signal``, ``channel``, ``channel_to``, ``signal_kind``) carry a ``long_name`` instead,
since a unit of a name means nothing and unit-aware readers would try to parse it.
Dataset attributes hold the caller's provenance, flattened to text and numbers.

Kinds (dataset name: variables, dims):

- ``waveforms`` (event-related, steady-state): ``average`` (signal, channel, time) in V,
  every condition average and every contrast (difference wave), and ``n_trials`` (signal).
- ``itpc`` (steady-state with a stimulation frequency): ``itpc`` (signal, channel, time),
  dimensionless, and ``evoked_power`` in V^2, per condition at the scalar coordinate
  ``frequency``; Morlet wavelets of ``heschl.features.N_CYCLES`` cycles.
- ``spectra`` (resting): ``psd`` (signal, channel, frequency) in V^2/Hz, the mean Welch
  density over kept segments.
- ``csd`` (resting, on request): ``real`` and ``imag`` (signal, frequency, channel,
  channel_to) in V^2/Hz. NetCDF has no complex type, so the cross-spectral density is
  stored as its two parts; rebuild it with ``ds["real"] + 1j * ds["imag"]``.
  ``S[f, i, j]`` is `scipy.signal.csd` of channel ``i`` (x) with channel_to ``j`` (y).
  It is Hermitian exactly (``real`` symmetric, ``imag`` antisymmetric, zero on the
  diagonal) and its diagonal is the ``psd`` of the same segments.
"""
from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np
import xarray as xr

from .vocabulary import DESIGNS
from .errors import DefinitionError, InputDataError, did_you_mean, problem
from .features import N_CYCLES, spectrum_of
from .numeric.crossspectra import cross_spectra
from .numeric.phase import evoked_power, itpc
from .numeric.spectra import welch_psd
from .sensors import SI

__all__ = ["ARRAY_SUFFIXES", "flat_attributes", "model_arrays", "recording_arrays", "write_netcdf"]

#: BIDS-derivatives suffix of each dataset: ``<stem>_desc-<name>_<suffix>.nc``.
ARRAY_SUFFIXES = {"waveforms": "erp", "itpc": "tfr", "spectra": "psd", "csd": "csd"}

#: Dataset attributes heschl sets itself; provenance may not use these keys.
RESERVED_ATTRIBUTES = ("heschl_array", "design", "description", "contrasts", "welch_segment_s",
                       "welch_overlap", "welch_window", "morlet_n_cycles")

_LABELS = {"signal": "condition or contrast (difference wave) of the paradigm",
           "signal_kind": "condition or contrast",
           "channel": "channel", "channel_to": "second channel of the cross-spectrum (y)"}
_WINDOW = "hann"  # the Welch taper of Source.spectrum and cross_spectra (their default)


def model_arrays(source, *, design, provenance, channels=None, stimulation_frequency=None,
                 spectrum=None, csd=None):
    """Labelled arrays of one recording, one dataset per kind.

    Parameters
    ----------
    source : heschl.features.Source
        Kept trials (V) per condition, their times (s), channel names and sfreq (Hz).
    design : {"event-related", "steady-state", "resting"}
        The paradigm's design; must equal ``source.paradigm.design``.
    provenance : dict
        Flat dict of dataset attributes (heschl version, participant, site, paradigm,
        input key, definitions hash, ...). Nested values are JSON-encoded, see
        `flat_attributes`.
    channels : list of str or None, default=None
        Channels to keep, in this order; None keeps all, in recording order.
    stimulation_frequency : float or None, Hz, default=None
        Steady-state only: adds the ``itpc`` dataset at this frequency.
    spectrum : dict or None, default=None
        Resting only, required there: Welch settings ``{"segment": s, "overlap": fraction}``
        (a feature set's ``spectrum``).
    csd : dict or None, default=None
        Resting only: adds the ``csd`` dataset; keys ``segment`` (s), ``overlap``
        (fraction), and optionally ``fmin``, ``fmax`` (Hz, None for no limit).

    Returns
    -------
    arrays : dict of str -> xarray.Dataset
        Keys among ``waveforms``, ``itpc``, ``spectra``, ``csd`` (see the module notes).
    """
    where = f"model_arrays ({source.paradigm.name})"
    _check_design(where, design, source, stimulation_frequency, spectrum, csd)
    picks, names = _picks(where, source, channels)
    attrs = dict(flat_attributes(provenance, where), design=design)
    if design == "resting":
        arrays = {"spectra": _spectra(where, source, picks, names, spectrum)}
        if csd is not None:
            arrays["csd"] = _csd(where, source, picks, names, csd)
    else:
        arrays = {"waveforms": _waveforms(source, picks, names)}
        if stimulation_frequency is not None:
            arrays["itpc"] = _itpc(source, picks, names, float(stimulation_frequency))
    for name, dataset in arrays.items():
        dataset.attrs.update(attrs, heschl_array=name)
    return arrays


def write_netcdf(path, dataset):
    """Write a dataset to a NetCDF-4 file (h5netcdf) through a temporary name and a rename.

    The file is written to ``.<name>.tmp-<pid>`` beside ``path`` and moved into place
    with `os.replace`; on any failure the temporary file is removed, so ``path`` is
    either the previous file or the complete new one.

    Parameters
    ----------
    path : str or path-like
        Target file, e.g. ``sub-01_task-rest_desc-spectra_psd.nc``; folders are created.
    dataset : xarray.Dataset

    Returns
    -------
    path : pathlib.Path
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    try:
        dataset.to_netcdf(tmp, engine="h5netcdf")
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def flat_attributes(provenance, where="provenance"):
    """Provenance as NetCDF attributes: text and numbers only.

    Text, integers and floats (numpy scalars included) stay as they are; paths become
    text; everything else (dicts, lists, True/False, None) becomes its JSON text, e.g.
    ``{"numpy": "2.4"}`` -> ``'{"numpy": "2.4"}'`` and None -> ``"null"``.
    """
    out = {}
    for key, value in dict(provenance).items():
        if not isinstance(key, str) or key in RESERVED_ATTRIBUTES:
            raise DefinitionError(problem(
                where, f"provenance key {key!r} is not text or is one heschl sets itself",
                f"use another text key; reserved: {', '.join(RESERVED_ATTRIBUTES)}", key="provenance"))
        out[key] = _attribute(value)
    return out


def _attribute(value):
    if isinstance(value, (bool, np.bool_)) or value is None:
        return json.dumps(None if value is None else bool(value))
    if isinstance(value, (str, int, float, np.integer, np.floating)):
        return value.item() if isinstance(value, np.generic) else value
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    return json.dumps(value, sort_keys=True, default=_json_default)


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    raise TypeError(f"cannot write {type(value).__name__} as a NetCDF attribute")


# --------------------------------------------------------------------------- checks
def _check_design(where, design, source, stimulation_frequency, spectrum, csd):
    if design not in DESIGNS:
        raise DefinitionError(problem(where, f'design "{design}" is not known{did_you_mean(design, DESIGNS)}',
                                      f"use one of: {', '.join(DESIGNS)}", key="design"))
    if design != source.paradigm.design:
        raise DefinitionError(problem(
            where, f'design "{design}" differs from the paradigm\'s design "{source.paradigm.design}"',
            "pass source.paradigm.design", key="design"))
    _check_options(where, design, source, stimulation_frequency, spectrum, csd)
    missing = [c for c in source.paradigm.conditions if c not in source.data]
    if missing:
        raise InputDataError(problem(where, f"no trials array for condition(s) {', '.join(missing)}",
                                     "pass every condition of the paradigm in source.data, "
                                     "with 0 trials if none were kept", key="source.data"))


def _check_options(where, design, source, stimulation_frequency, spectrum, csd):
    unused = {"stimulation_frequency": stimulation_frequency is not None and design != "steady-state",
              "spectrum": spectrum is not None and design != "resting",
              "csd": csd is not None and design != "resting"}
    for key, bad in unused.items():
        if bad:
            raise DefinitionError(problem(where, f'{key} is not used by a "{design}" design',
                                          "leave it out (None)", key=key))
    if design == "resting" and spectrum is None:
        raise DefinitionError(problem(where, "a resting design needs Welch settings",
                                      'pass spectrum={"segment": 2.0, "overlap": 0.5} (s, fraction)',
                                      key="spectrum"))
    if stimulation_frequency is not None and not (
            math.isfinite(float(stimulation_frequency)) and 0 < float(stimulation_frequency) < source.sfreq / 2):
        raise DefinitionError(problem(
            where, f"stimulation_frequency = {stimulation_frequency} Hz is outside (0, {source.sfreq / 2:g}) Hz",
            "pass the stimulation rate in Hz, below half the sampling rate", key="stimulation_frequency"))


def _picks(where, source, channels):
    if channels is None:
        return list(range(len(source.ch_names))), list(source.ch_names)
    names = list(channels)
    for name in names:
        if name not in source.ch_names:
            same_letters = [c for c in source.ch_names if c.lower() == name.lower()]
            hint = f' (did you mean "{same_letters[0]}"?)' if same_letters else did_you_mean(name, source.ch_names)
            raise DefinitionError(problem(
                where, f'channel "{name}" is not in the recording{hint}',
                f"choose from: {', '.join(source.ch_names)}", key="channels"))
    if not names or len(set(names)) != len(names):
        raise DefinitionError(problem(where, f"channels {names} is empty or names a channel twice",
                                      "list each channel once, or pass None for all", key="channels"))
    return [source.ch_names.index(n) for n in names], names


def _settings(where, key, given, required, optional=()):
    given = dict(given)
    known = tuple(required) + tuple(optional)
    for name in given:
        if name not in known:
            raise DefinitionError(problem(where, f'unknown setting "{name}"{did_you_mean(name, known)}',
                                          f"use: {', '.join(known)}", key=key))
    missing = [name for name in required if name not in given]
    if missing:
        raise DefinitionError(problem(where, f"missing setting(s) {', '.join(missing)}",
                                      f"pass {key} with keys {', '.join(known)}", key=key))
    return given


# --------------------------------------------------------------------------- datasets
def _label(dim, values):
    return (dim, np.array(values, dtype=object), {"long_name": _LABELS[dim]})


def _channel_coords(names, source=None, picks=None):
    coords = {"channel": _label("channel", names)}
    if source is not None:
        types = [getattr(source, "ch_types", ["eeg"] * len(source.ch_names))[i] for i in picks]
        coords["channel_type"] = ("channel", np.array(types, dtype=object),
                                  {"long_name": "sensor type: eeg (V), mag (T) or grad (T/m)"})
    return coords


def _unit(source, picks, power=""):
    """SI unit of the picked channels' data ("V", "T", "T/m"), squared or per Hz by ``power``."""
    types = {getattr(source, "ch_types", ["eeg"] * len(source.ch_names))[i] for i in picks}
    if len(types) != 1:
        return {"": "V, T or T/m by channel_type", "^2": "V^2, T^2 or (T/m)^2 by channel_type",
                "^2/Hz": "V^2/Hz, T^2/Hz or (T/m)^2/Hz by channel_type"}[power]
    base = SI[types.pop()]
    if not power:
        return base
    return (f"({base})" if "/" in base else base) + power


def _n_trials(source, signals):
    counts = np.array([source.n_trials(s) for s in signals], dtype=np.int64)
    return ("signal", counts, {"units": "1", "long_name": "kept trials (segments); the smaller count for a contrast"})


def _time(source):
    return ("time", np.asarray(source.times, dtype=float), {"units": "s", "long_name": "time from the marker"})


def _waveforms(source, picks, names):
    paradigm = source.paradigm
    signals = paradigm.signals
    average = np.stack([source.average(s)[picks] for s in signals])
    kinds = ["contrast" if s in paradigm.contrasts else "condition" for s in signals]
    contrasts = {name: f"{c.plus} - {c.minus}" for name, c in paradigm.contrasts.items()}
    return xr.Dataset(
        {"average": (("signal", "channel", "time"), average,
                     {"units": _unit(source, picks), "long_name": "condition average or difference wave (plus - minus)"}),
         "n_trials": _n_trials(source, signals)},
        coords={"signal": _label("signal", signals), "signal_kind": ("signal", np.array(kinds, dtype=object),
                                                                     {"long_name": _LABELS["signal_kind"]}),
                **_channel_coords(names, source, picks), "time": _time(source)},
        attrs={"description": f"Condition averages and difference waves of the kept trials, in {_unit(source, picks)}.",
               "contrasts": json.dumps(contrasts)})


def _itpc(source, picks, names, frequency):
    conditions = list(source.paradigm.conditions)
    shape = (len(picks), source.times.size)
    phase, power = [], []
    for c in conditions:
        if source.n_trials(c) == 0:
            phase.append(np.full(shape, np.nan))
            power.append(np.full(shape, np.nan))
            continue
        coefs = source.coefficients(c, frequency)[:, picks, :]
        phase.append(itpc(coefs, axis=0))
        power.append(evoked_power(coefs, axis=0))
    dims = ("signal", "channel", "time")
    return xr.Dataset(
        {"itpc": (dims, np.stack(phase), {"units": "1", "long_name": "inter-trial phase coherence"}),
         "evoked_power": (dims, np.stack(power),
                          {"units": _unit(source, picks, "^2"), "long_name": "power of the trial-averaged coefficients"}),
         "n_trials": _n_trials(source, conditions)},
        coords={"signal": _label("signal", conditions), **_channel_coords(names, source, picks), "time": _time(source),
                "frequency": ((), frequency, {"units": "Hz", "long_name": "stimulation frequency"})},
        attrs={"description": "Phase locking and evoked power at the stimulation frequency "
                              "from complex Morlet wavelets.",
               "morlet_n_cycles": N_CYCLES})


def _spectra(where, source, picks, names, spectrum):
    spec = _settings(where, "spectrum", spectrum, ("segment", "overlap"))
    conditions = list(source.paradigm.conditions)
    freqs = welch_psd(np.zeros(source.times.size), source.sfreq, spec["segment"], spec["overlap"])[0]
    psd = np.full((len(conditions), len(picks), freqs.size), np.nan)
    for k, c in enumerate(conditions):
        if source.n_trials(c) > 0:
            psd[k] = source.spectrum(c, spec)[1][picks]
    return xr.Dataset(
        {"psd": (("signal", "channel", "frequency"), psd,
                 {"units": _unit(source, picks, "^2/Hz"), "long_name": "power spectral density (Welch, mean over kept segments)"}),
         "n_trials": _n_trials(source, conditions)},
        coords={"signal": _label("signal", conditions), **_channel_coords(names, source, picks),
                "frequency": ("frequency", freqs, {"units": "Hz"})},
        attrs={"description": f"One-sided Welch power spectral density per condition, in {_unit(source, picks, '^2/Hz')}.",
               **_welch_attributes(spec)})


def _csd(where, source, picks, names, settings):
    spec = _settings(where, "csd", settings, ("segment", "overlap"), ("fmin", "fmax"))
    conditions = list(source.paradigm.conditions)
    args = (source.sfreq, spec["segment"], spec["overlap"], spec.get("fmin"), spec.get("fmax"))
    freqs = cross_spectra(np.zeros((1, source.times.size)), *args)[0]
    matrices = np.full((len(conditions), freqs.size, len(picks), len(picks)), np.nan, dtype=complex)
    for k, c in enumerate(conditions):
        if source.n_trials(c) > 0:
            matrices[k] = cross_spectra(source.data[c][:, picks, :], *args)[1]
    dims = ("signal", "frequency", "channel", "channel_to")
    part = "part of the cross-spectral density S[f, channel, channel_to]"
    return xr.Dataset(
        {"real": (dims, matrices.real.copy(), {"units": _unit(source, picks, "^2/Hz"), "long_name": f"real {part}"}),
         "imag": (dims, matrices.imag.copy(), {"units": _unit(source, picks, "^2/Hz"), "long_name": f"imaginary {part}"}),
         "n_trials": _n_trials(source, conditions)},
        coords={"signal": _label("signal", conditions), "frequency": ("frequency", freqs, {"units": "Hz"}),
                **_channel_coords(names, source, picks), "channel_to": _label("channel_to", names)},
        attrs={"description": "Cross-spectral density matrices (Welch, one-sided, V^2/Hz) stored as "
                              "real and imaginary parts, since NetCDF has no complex type: "
                              "S = real + 1j * imag. S[f, i, j] = scipy.signal.csd(x=channel i, "
                              "y=channel_to j); Hermitian (S[f, j, i] = conj(S[f, i, j])); the "
                              "diagonal is the power spectral density.",
               **_welch_attributes(spec)})


def _welch_attributes(spec):
    return {"welch_segment_s": float(spec["segment"]), "welch_overlap": float(spec["overlap"]),
            "welch_window": _WINDOW}


def recording_arrays(analysis, source, recording, key, definitions):
    """The model-ready arrays of one recording, with its provenance as attributes.

    Parameters
    ----------
    analysis : heschl.config.Analysis
    source : heschl.features.Source
    recording : heschl.inputs.Recording
    key : str
        The recording's input key.
    definitions : dict
        The resolved definitions (hashed into ``definitions_sha256``).
    """
    import hashlib

    from . import __version__

    paradigm = analysis.paradigm
    kwargs = {}
    if paradigm.design == "steady-state" and paradigm.stimulation.get("frequency"):
        kwargs["stimulation_frequency"] = paradigm.stimulation["frequency"]
    if paradigm.design == "resting":
        spec = spectrum_of(analysis)
        low, high = paradigm.cleaning.pass_band
        kwargs.update(spectrum=spec, csd=dict(spec, fmin=low, fmax=high))
    provenance = {"heschl_version": __version__, "participant_id": recording.participant_id,
                  "site": recording.site, "group": recording.group, "paradigm": recording.paradigm,
                  "input_key": key,
                  "definitions_sha256": hashlib.sha256(json.dumps(definitions, sort_keys=True,
                                                                  default=str).encode()).hexdigest()}
    arrays = model_arrays(source, design=paradigm.design, provenance=provenance, **kwargs)
    if "csd" in arrays:
        arrays["csd"] = _with_coherence(arrays["csd"])
    return arrays


def _with_coherence(dataset):
    """Add magnitude-squared coherence, derived from the cross-spectral matrices."""
    from .numeric.crossspectra import coherence

    matrices = dataset["real"].values + 1j * dataset["imag"].values
    values = coherence(matrices)
    out = dataset.assign(coherence=(dataset["real"].dims, np.asarray(values, dtype=float)))
    out["coherence"].attrs.update(units="1", long_name="magnitude-squared coherence |S_ij|^2 / (S_ii S_jj)")
    return out
