"""Grand averages of the study page, read from the model-ready arrays each recording wrote.

Read from the written arrays (``<stem>_desc-<name>_<suffix>.nc``): the difference waves of
an event-related paradigm (``waveforms``, signals whose ``signal_kind`` is "contrast"), the
ITPC course of a steady-state one (``itpc``), the spectra of a resting one (``spectra``),
each averaged first over the channels of :data:`GRAND_CHANNELS` (the regions of the
built-in feature sets) and then over recordings, per site and per group, in display units
(uV, uV^2/Hz, ms). A recording is left out, with its reason, when its verdict is
"unusable", when a reviewer's current decision excludes it, when it lacks one of the
channels (MEG recordings) or when its axis differs from the first recording's.
"""
from __future__ import annotations

import numpy as np

__all__ = ["grand_averages", "filled", "GRAND_CHANNELS"]

#: Channels averaged for the grand averages, by design: the regions of the built-in
#: feature sets (fronto-central for responses, posterior for resting spectra).
GRAND_CHANNELS = {"event-related": ("Fz", "FC1", "FC2", "FCz", "Cz"),
                  "steady-state": ("Fz", "FC1", "FC2", "FCz", "Cz"),
                  "resting": ("P3", "Pz", "P4", "O1", "Oz", "O2")}
# Which array each design's grand average reads, its variable, signals and display.
_GRAND = {"event-related": ("waveforms", "average", "difference wave"),
          "steady-state": ("itpc", "itpc", "ITPC at the stimulation frequency"),
          "resting": ("spectra", "psd", "power spectral density")}
_DISPLAY = {"V": ("uV", 1e6), "V^2/Hz": ("uV^2/Hz", 1e12), "1": ("1", 1.0), "s": ("ms", 1e3), "Hz": ("Hz", 1.0)}


def _array_path(output, recording, name):
    from ..arrays import ARRAY_SUFFIXES
    from ..outputs import recording_paths

    return recording_paths(output, recording)["features"].parent / f"{recording.stem}_desc-{name}_{ARRAY_SUFFIXES[name]}.nc"


def _recording_design(output, recording):
    """The design the written arrays name, and the dataset to read (None without arrays)."""
    for design, (name, _, _) in (("steady-state", _GRAND["steady-state"]), ("resting", _GRAND["resting"]),
                                 ("event-related", _GRAND["event-related"])):
        path = _array_path(output, recording, name)
        if path.is_file():
            return design, path
    return None, None


def _course(path, design, channels):
    """One recording's channel-mean courses per signal, SI, with the axis; or the reason it
    cannot be used."""
    import xarray as xr

    _, variable, _ = _GRAND[design]
    with xr.open_dataset(path, engine="h5netcdf") as ds:
        names = [str(c) for c in ds["channel"].values]
        missing = [c for c in channels if c not in names]
        if missing:
            return None, f"has no channel {', '.join(missing)} (averages over {', '.join(channels)})"
        data = ds[variable]
        if design == "event-related":
            kinds = [str(k) for k in ds["signal_kind"].values]
            signals = [str(s) for s, k in zip(ds["signal"].values, kinds) if k == "contrast"]
        else:
            signals = [str(s) for s in ds["signal"].values]
        axis_name = "time" if "time" in data.dims else "frequency"
        mean = data.sel(channel=list(channels)).mean("channel")
        courses = {s: mean.sel(signal=s).values.astype(float) for s in signals}
        return {"axis_name": axis_name, "axis": ds[axis_name].values.astype(float),
                "axis_unit": ds[axis_name].attrs.get("units", ""), "unit": data.attrs.get("units", ""),
                "courses": courses}, None


def _left_out_reason(row):
    if row is None:
        return None
    if str(row.get("decision") or "") == "exclude":
        return "excluded by a reviewer" + (f" ({row['decision_reason']})" if filled(row.get("decision_reason")) else "")
    if row.get("verdict") == "unusable":
        return "verdict unusable"
    return None


def filled(value):
    """True for a table cell holding text (not empty, not "n/a", not NaN)."""
    return isinstance(value, str) and value not in ("", "n/a")


def _mean_courses(members, signals):
    out = []
    for signal in signals:
        stack = [m["courses"][signal] for m in members if signal in m["courses"]
                 and np.isfinite(m["courses"][signal]).all()]
        if stack:
            out.append({"signal": signal, "n": len(stack), "mean": np.mean(stack, axis=0)})
    return out


def grand_averages(output, recordings, qc_table, channels=None):
    """Grand averages per paradigm, per site and per group, from the written arrays.

    Parameters
    ----------
    output : path-like
        The derivatives folder.
    recordings : list of heschl.inputs.Recording
    qc_table : pandas.DataFrame
        One row per recording (participant_id, paradigm, verdict, decision); rows decide
        which recordings are left out (module notes).
    channels : dict or None, default=None
        Design -> channels to average; :data:`GRAND_CHANNELS` when None.

    Returns
    -------
    dict
        Paradigm -> ``design``, ``what``, ``channels``, ``axis`` (``name``, ``unit``,
        ``values`` in display units), ``unit`` (display), ``signals``, ``by_site`` and
        ``by_group`` (lists of ``{"site"|"group", "signal", "n", "mean"}``, ``mean`` a list
        in display units), ``left_out`` (``participant_id``, ``site``, ``why``).
    """
    channels = GRAND_CHANNELS if channels is None else channels
    rows = {(r["participant_id"], r["paradigm"]): r for r in qc_table.to_dict("records")} if len(qc_table) else {}
    found = {}
    for recording in recordings:
        design, path = _recording_design(output, recording)
        if design is None or design not in channels:
            continue
        entry = found.setdefault(recording.paradigm, {"design": design, "members": [], "left_out": []})
        why = _left_out_reason(rows.get((recording.participant_id, recording.paradigm)))
        course = None
        if why is None:
            course, why = _course(path, design, tuple(channels[design]))
        if course is not None and entry["members"] and not np.array_equal(course["axis"], entry["members"][0]["axis"]):
            course, why = None, f"its {course['axis_name']} axis differs from the other recordings'"
        if course is None:
            entry["left_out"].append({"participant_id": recording.participant_id, "site": recording.site, "why": why})
            continue
        entry["members"].append(dict(course, site=recording.site, group=recording.group))
    return {paradigm: _grand_entry(entry, channels) for paradigm, entry in found.items()}


def _grand_entry(entry, channels):
    design, members = entry["design"], entry["members"]
    _, _, what = _GRAND[design]
    out = {"design": design, "what": what, "channels": list(channels[design]), "left_out": entry["left_out"],
           "signals": [], "by_site": [], "by_group": [], "axis": None, "unit": None}
    if not members:
        return out
    first = members[0]
    unit, factor = _DISPLAY.get(first["unit"], (first["unit"], 1.0))
    axis_unit, axis_factor = _DISPLAY.get(first["axis_unit"], (first["axis_unit"], 1.0))
    signals = list(dict.fromkeys(s for m in members for s in m["courses"]))
    out.update(signals=signals, unit=unit,
               axis={"name": first["axis_name"], "unit": axis_unit, "values": (first["axis"] * axis_factor).tolist()})
    for scope in ("site", "group"):
        for label in dict.fromkeys(m[scope] for m in members):
            for mean in _mean_courses([m for m in members if m[scope] == label], signals):
                out[f"by_{scope}"].append({scope: label, "signal": mean["signal"], "n": mean["n"],
                                           "mean": (mean["mean"] * factor).tolist()})
    return out
