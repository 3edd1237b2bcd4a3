"""QC metrics of one recording, computed once from its results and written to qc.json.

The pages and the group tables read these records; nothing downstream recomputes them.
"""
from __future__ import annotations

import numpy as np

from ..numeric.blinks import BLINK_THRESHOLD_V, blink_peaks

__all__ = ["trial_counts", "marker_counts", "channel_record", "snr", "mastoid_inversion", "vertical_eog",
           "kept_blinks", "ocular_record", "MASTOIDS"]

MASTOIDS = ("M1", "M2", "TP9", "TP10")
#: A blink peaking this close outside a trial still reaches into it, s.
BLINK_MARGIN_S = 0.1


def trial_counts(entries, paradigm):
    """Planned, kept and dropped trials per condition, with the drop reasons counted."""
    counts = {c: {"planned": 0, "kept": 0, "dropped": 0, "reasons": {},
                  "minimum": paradigm.rejection.min_trials.get(c, 0)} for c in paradigm.conditions}
    for entry in entries:
        c = counts[entry["condition"]]
        c["planned"] += 1
        if entry["kept"]:
            c["kept"] += 1
        else:
            c["dropped"] += 1
            key = entry["reason"].split(":")[0]
            c["reasons"][key] = c["reasons"].get(key, 0) + 1
    return counts


def marker_counts(markers):
    """How often each paradigm marker occurs in the file."""
    out = {}
    for label in markers.labels:
        out[label] = out.get(label, 0) + 1
    return out


def channel_record(harmonised, cleaning):
    """Channels as found, renamed, analysed and interpolated, with the fraction of the worst sensor type."""
    bads = cleaning["bad_channels"]
    by_kind = {}
    for name, kind in harmonised["channel_types"].items():
        by_kind.setdefault(kind, [0, 0])[0] += 1
        by_kind[kind][1] += name in bads
    fraction = max((b / n for n, b in by_kind.values()), default=0.0)  # the worst sensor type
    return {"file": harmonised["file_channels"], "renamed": harmonised["renamed"],
            "restored_reference": harmonised["restored_reference"],
            "eog": harmonised["eog_channels"], "analysed": harmonised["channels"],
            "bad": bads, "interpolated": cleaning["interpolated"],
            "interpolated_fraction": fraction,
            "by_type": {k: {"channels": n, "interpolated": b} for k, (n, b) in by_kind.items()}}


def snr(source, paradigm, analysis=None):
    """Plus-minus SNR of each condition average, after the marker.

    Pooled over the channels of the feature sets' regions, where a response is measured
    (all channels when there are no regions), and within one sensor type: V and T cannot
    be summed, and most of an MEG helmet sees little of an auditory source. With several
    types the key is "<condition> (<TYPE>)".
    """
    from ..numeric.erp import plus_minus_snr
    from ..sensors import by_type

    if paradigm.epochs is None:
        return {}
    window = (0.0, float(source.times[-1]))
    wanted = {c for fs in (analysis.feature_sets if analysis else ()) for names in fs.regions.values() for c in names}
    groups = by_type(source.ch_types)
    out = {}
    for c, trials in source.data.items():
        for kind, idx in groups.items():
            inside = [i for i in idx if source.ch_names[i] in wanted] or idx
            value = float(plus_minus_snr(trials[:, inside], source.times, window, pooled=True))
            out[c if len(groups) == 1 else f"{c} ({kind.upper()})"] = value if np.isfinite(value) else None
    return out


def mastoid_inversion(analysis, source):
    """For each contrast read by a mean-amplitude measure: its value in the measure's region
    and at the mastoids over the same window, in uV. Under an average or nose reference a
    supratemporal generator makes the two opposite in sign (docs/REFERENCES.md F19)."""
    from ..numeric.erp import mean_amplitude, region_mean

    mastoids = [c for c in MASTOIDS if c in source.ch_names]
    out = {}
    if not mastoids:
        return out
    for fs in analysis.feature_sets:
        for m in fs.measures:
            signal = m.params.get("signal")
            if m.kind != "mean-amplitude" or signal not in analysis.paradigm.contrasts or signal in out:
                continue
            if set(fs.regions[m.params["region"]]) & set(mastoids) or source.n_trials(signal) == 0:
                continue
            wave = source.average(signal)
            region = mean_amplitude(region_mean(wave, source.ch_names, fs.regions[m.params["region"]]),
                                    source.times, m.params["window"]) * 1e6
            mastoid = mean_amplitude(region_mean(wave, source.ch_names, mastoids), source.times,
                                     m.params["window"]) * 1e6
            out[signal] = {"region": m.params["region"], "window_s": list(m.params["window"]),
                           "region_uv": float(region), "mastoids": mastoids, "mastoid_uv": float(mastoid),
                           "inverted": bool(np.sign(region) == -np.sign(mastoid) != 0)}
    return out


def vertical_eog(raw):
    """The vertical EOG channel: one named VEOG, else the only EOG channel, else None."""
    import mne

    names = [raw.ch_names[i] for i in mne.pick_types(raw.info, eog=True, exclude=[])]
    vertical = [n for n in names if "VEOG" in n.upper() or n.upper() in ("EOG_V", "VEO")]
    if vertical:
        return vertical[0]
    return names[0] if len(names) == 1 else None


def kept_blinks(raw, entries, window, peaks=None):
    """How many kept trials contain a blink found on the vertical EOG.

    What is left of blinks after cleaning and rejection, measured where it can be: on a
    vertical EOG channel (None without one). Measured only when nothing corrected the
    blinks: after a correction they are meant to stay in the kept trials, and the
    residual EOG correlation judges the correction instead.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        The cleaned recording, with its EOG channels.
    entries : list of dict
        The trial log (``kept``, ``onset_s``).
    window : (float, float), s
        Trial window around each onset.
    peaks : ndarray or None, s
        The blink peaks on the vertical EOG when already found (`blink_peaks`).

    Returns
    -------
    dict or None
        ``channel``, ``threshold_uv``, ``blinks`` (found in the recording), ``kept_trials``,
        ``kept_with_blink`` and ``fraction``.
    """
    channel = vertical_eog(raw)
    if channel is None:
        return None
    if peaks is None:
        peaks = blink_peaks(raw.get_data(picks=[channel])[0], raw.info["sfreq"])
    kept = [e for e in entries if e["kept"]]
    hit = sum(bool(np.any((peaks >= e["onset_s"] + window[0] - BLINK_MARGIN_S)
                          & (peaks <= e["onset_s"] + window[1] + BLINK_MARGIN_S))) for e in kept)
    return {"channel": channel, "threshold_uv": BLINK_THRESHOLD_V * 1e6, "blinks": int(len(peaks)),
            "kept_trials": len(kept), "kept_with_blink": int(hit),
            "fraction": round(hit / len(kept), 4) if kept else None}


def vertical_residual(ocular):
    """Largest residual correlation of the EEG with a vertical EOG source after correction
    (None when not measured). A horizontal EOG sits beside F7/F8 and shares their brain
    activity, so its residual says little about what is left of the eyes; nor does the
    frontal channels' own mean when no EOG was recorded (ICA by properties)."""
    if (ocular.get("ica") or {}).get("selection") == "properties":
        return None
    by_source = (ocular.get("residual_correlation") or {}).get("by_source", {})
    vertical = [v["after"] for k, v in by_source.items() if "HEOG" not in k.upper()]
    return max(vertical) if vertical else None


def ocular_record(cleaning, rejection, harmonised):
    """What was done about ocular artefacts and what is left of them in the kept trials."""
    ocular = cleaning.get("ocular") or {}
    return {"policy": ocular.get("policy"), "method": ocular.get("method"),
            "eog_channels": harmonised["eog_channels"],
            "corrected_residual": vertical_residual(ocular),
            "kept_blinks": rejection.get("kept_blinks")}
