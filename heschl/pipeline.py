"""One recording from file to features: read, harmonise, clean, segment, reject, measure.

:func:`process_recording` is a pure task: its outputs are determined by the input bytes,
the definitions and the package version, which is what makes resuming and parallel runs
simple. It returns plain data; :mod:`heschl.outputs` writes it.
"""
from __future__ import annotations

import glob
import hashlib
import logging
import re
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from . import __version__
from .errors import InputDataError, problem

__all__ = ["Recording", "discover", "recording_files", "process_recording", "input_key"]

log = logging.getLogger(__name__)


@dataclass(frozen=True)
class Recording:
    """One file set of one participant in one paradigm at one site."""

    site: str
    paradigm: str
    participant_id: str          # "sub-<label>"
    group: str
    path: Path
    datatype: str = "eeg"        # BIDS datatype folder: "eeg" or "meg" (from the site)

    @property
    def label(self):
        return self.participant_id[4:]

    @property
    def stem(self):
        return f"{self.participant_id}_task-{self.paradigm}"


def read_participants(path):
    """participant_id -> group, from a tab-separated participants table."""
    if path is None:
        return {}
    import pandas as pd

    table = pd.read_csv(path, sep="\t", dtype=str)
    if "participant_id" not in table.columns:
        raise InputDataError(problem(path, "has no participant_id column",
                                     "add a participant_id column (and a group column)"))
    groups = table["group"] if "group" in table.columns else ["n/a"] * len(table)
    return dict(zip(table["participant_id"], groups))


def discover(study):
    """Every recording the study's file patterns find, in a stable order."""
    groups = read_participants(study.participants)
    found = []
    for site in study.sites.values():
        pattern = re.compile(site.subject_pattern)
        for analysis in study.analyses:
            pname = analysis.paradigm.name
            if pname not in site.files:
                continue
            for name in sorted(glob.glob(str(study.root / site.files[pname]))):
                path = Path(name)
                match = pattern.search(path.name)
                if match is None:
                    raise InputDataError(problem(path, f'the subject pattern "{site.subject_pattern}" finds no id',
                                                 f"rename the file or set sites.{site.name}.subject_pattern"))
                pid = f"sub-{match.group(1)}"
                found.append(Recording(site.name, pname, pid, groups.get(pid, "n/a"), path, site.datatype))
    return found


def recording_files(path):
    """The main file and its companions (BrainVision header, markers and data; the .fdt data of a .set file)."""
    path = Path(path)
    files = [path]
    if path.suffix.lower() == ".vhdr":
        text = path.read_text(encoding="latin-1", errors="replace")
        for key in ("DataFile", "MarkerFile"):
            m = re.search(rf"^{key}=(.+)$", text, flags=re.M)
            if m:
                files.append(path.parent / m.group(1).strip())
    elif path.suffix.lower() == ".set" and path.with_suffix(".fdt").exists():
        files.append(path.with_suffix(".fdt"))
    return files


def _sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def input_hashes(recording):
    """sha256 of every input file of a recording, keyed by file name."""
    out = {}
    for f in recording_files(recording.path):
        if not f.exists():
            raise InputDataError(problem(f, "companion file not found",
                                         f"put it beside {recording.path.name} as its header names it"))
        out[f.name] = _sha256(f)
    return out


#: Bumped whenever a change of code changes what a recording's outputs are, so that
#: resuming redoes recordings written by older code (the package version moves slower).
PIPELINE_REVISION = 3


def input_key(hashes, definitions):
    """One hash of everything that determines a recording's outputs."""
    import json

    text = json.dumps({"inputs": hashes, "definitions": definitions, "heschl": __version__,
                       "revision": PIPELINE_REVISION}, sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()


def definitions_of(study, recording):
    """The resolved definitions one recording is processed with (for provenance and the key)."""
    analysis = next(a for a in study.analyses if a.paradigm.name == recording.paradigm)
    site = study.sites[recording.site]
    return {
        "paradigm": analysis.paradigm.document,
        "feature_sets": {fs.name: fs.document for fs in analysis.feature_sets},
        "site": {k: _plain(v) for k, v in vars(site).items()},
        "common_channels": list(study.common_channels),
    }


def _plain(value):
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value


class _Clock:
    def __init__(self):
        self.times, self._t = {}, time.perf_counter()

    def lap(self, name):
        now = time.perf_counter()
        self.times[name] = round(now - self._t, 3)
        self._t = now


def process_recording(study, recording, hashes=None):
    """Run every stage for one recording.

    ``hashes`` (from :func:`input_hashes`) may be passed when the caller has them already,
    so that the input files are read for hashing only once.

    Returns
    -------
    result : dict
        ``rows`` (feature rows), ``qc``, ``provenance`` and ``curves`` (arrays the QC page
        plots), all plain data.
    """
    from .clean import clean
    from .harmonise import harmonise, read_raw

    analysis = next(a for a in study.analyses if a.paradigm.name == recording.paradigm)
    paradigm, site = analysis.paradigm, study.sites[recording.site]
    where = _display(recording.path)
    clock = _Clock()
    hashes = input_hashes(recording) if hashes is None else hashes
    definitions = definitions_of(study, recording)
    key = input_key(hashes, definitions)
    raw = read_raw(recording.path)
    clock.lap("read")
    raw, markers, harmonised = harmonise(raw, site, paradigm, study.common_channels, where)
    analysis, skipped_sets = applicable(analysis, harmonised["channels"], where,
                                        set(harmonised["channel_types"].values()))
    clock.lap("harmonise")
    cleaning = clean(raw, paradigm, site.bad_channels.get(recording.participant_id, ()), where,
                     restored=harmonised["restored_reference"], line_frequency=site.line_frequency)
    clock.lap("clean")
    ocular = cleaning.get("ocular") or {}
    corrected = ocular.get("method") not in (None, "none") and not ocular.get("skipped_reason")
    trials_data, times, entries, ch_names, rejection = _trials(raw, markers, paradigm, corrected)
    clock.lap("segment and reject")
    source = _source(trials_data, times, ch_names, raw.info["sfreq"], paradigm,
                     [harmonised["channel_types"][c] for c in ch_names])
    rows = []
    for fs in analysis.feature_sets:
        rows.extend(_features(fs, source, paradigm))
    curves = _curves(analysis, source)
    clock.lap("features")
    arrays = _arrays(analysis, source, recording, key, definitions)
    clock.lap("arrays")
    counts = _counts(entries, paradigm)
    snr = _snr(source, paradigm, analysis)
    qc = _qc(recording, harmonised, cleaning, markers, counts, rows, paradigm, snr)
    qc["mastoid_inversion"] = _mastoid_inversion(analysis, source)
    qc["flags"].extend(_inversion_flags(qc["mastoid_inversion"], cleaning["reference"]))
    qc["ocular"] = _ocular_qc(cleaning, rejection, harmonised)
    qc["flags"].extend(_ocular_flags(qc["ocular"], paradigm.quality))
    qc["verdict"] = verdict(qc["flags"])
    qc["feature_sets"] = {"used": [fs.name for fs in analysis.feature_sets], "not_applicable": skipped_sets}
    provenance = {
        "recording": {"site": recording.site, "participant_id": recording.participant_id,
                      "group": recording.group, "paradigm": recording.paradigm, "file": where,
                      "datatype": recording.datatype},
        "inputs_sha256": hashes,
        "key": key,
        "definitions": definitions,
        "steps": {"harmonise": harmonised, "clean": cleaning,
                  "rejection": dict(rejection, trials=counts),
                  "trial_log": entries},
        "versions": package_versions(),
        "timings_s": clock.times,
    }
    return {"rows": rows, "qc": qc, "provenance": provenance, "curves": curves, "arrays": arrays}


def applicable(analysis, channels, where, types=None):
    """The analysis restricted to the feature sets written for this recording's sensors.

    A feature set whose regions name only 10-05 electrode positions is for EEG; any other
    is for MEG (its regions name sensors of an MEG system). A set for a sensor modality the
    recording lacks (an EEG set on an MEG recording) is left out, with the reason. A set
    for a modality the recording has must find all of its region channels: a missing one
    is an error, never a silently smaller region.

    Parameters
    ----------
    analysis : heschl.config.Analysis
    channels : list of str
        The recording's data channels after harmonising.
    where : str
        The file, for messages.
    types : set of str or None
        Sensor types present ("eeg", "mag", "grad"); None means EEG only.
    """
    import dataclasses

    from .harmonise import standard_name_map

    types = {"eeg"} if types is None else set(types)
    electrodes = set(standard_name_map().values())
    present, used, skipped = set(channels), [], {}
    for fs in analysis.feature_sets:
        wanted = {c for names in fs.regions.values() for c in names}
        modality = "eeg" if wanted <= electrodes else "meg"
        has = "eeg" in types if modality == "eeg" else bool(types & {"mag", "grad"})
        missing = sorted(wanted - present)
        if not missing:
            used.append(fs)
        elif not has:
            skipped[fs.name] = (f"its regions name {modality.upper()} channels ({', '.join(sorted(wanted)[:4])}"
                                f"{', ...' if len(wanted) > 4 else ''}) and this recording has no "
                                f"{modality.upper()} channel")
        else:
            raise InputDataError(problem(where, f'lacks channels {", ".join(missing[:6])} of the regions of feature '
                                         f'set "{fs.name}"', "add channel_aliases for them in the study file or "
                                         "remove them from the feature set's regions"))
    if not used:
        raise InputDataError(problem(where, f'no feature set of paradigm "{analysis.paradigm.name}" reads its '
                                     f"channels ({'; '.join(f'{k}: {v}' for k, v in skipped.items())})",
                                     "add a feature set whose regions name this recording's channels"))
    return dataclasses.replace(analysis, feature_sets=tuple(used)), skipped


def _display(path):
    import os

    try:
        return os.path.relpath(path)
    except ValueError:  # pragma: no cover
        return str(path)


def _trials(raw, markers, paradigm, corrected=False):
    from .segment import cut, epoch_plan, reject, segment_plan

    import mne

    from .sensors import data_picks, types_of

    picks = data_picks(raw.info)
    ch_names = [raw.ch_names[i] for i in picks]
    types = types_of(raw.info, picks)
    if paradigm.epochs is not None:
        plan = epoch_plan(markers, paradigm)
        window, baseline = paradigm.epochs.window, paradigm.epochs.baseline
    else:
        duration = raw.n_times / raw.info["sfreq"]
        plan = segment_plan(markers, paradigm, duration)
        window, baseline = (0.0, paradigm.segments.length - 1.0 / raw.info["sfreq"]), None
    x, times, entries = cut(raw, plan, window, picks)
    detection, info = None, None
    if paradigm.rejection.method == "adaptive":
        # Learn rejection on a copy high-passed for detection: slow ERP components kept by
        # a 0.1 Hz analysis high-pass would otherwise inflate the thresholds' rejections.
        copy = raw.copy().filter(paradigm.rejection.detection_high_pass, None, picks=picks, verbose="error")
        detection, _, _ = cut(copy, plan, window, picks)
        info = mne.pick_info(raw.info, picks)
    data, entries, record = reject(x, times, entries, ch_names, paradigm, baseline, detection, info, types)
    record["kept_blinks"] = kept_blinks(raw, entries, window) if corrected is False else None
    return data, times, entries, ch_names, record


#: Blink detection on the vertical EOG: peaks of the 1-10 Hz band-passed EOG above this,
#: at least `_BLINK_GAP_S` apart, on the side where the EOG's largest deflections lie
#: (the 99.5th percentile of each side decides, so one saturation cannot flip it; taking
#: the wrong side finds the two side lobes of every blink instead of the blink). Blinks
#: reach 100-400 uV at a vertical EOG (common practice, from memory). Measured only when
#: nothing corrected the blinks: after a correction they are meant to stay in the kept
#: trials, and the residual EOG correlation judges the correction instead.
BLINK_THRESHOLD_V = 75e-6
_BLINK_GAP_S = 0.3
_BLINK_MARGIN_S = 0.1  # a blink peaking this close outside a trial still reaches into it


def blink_peaks(eog, sfreq, threshold=BLINK_THRESHOLD_V):
    """Blink peak times (s from the first sample) in one vertical EOG channel, V."""
    import mne
    import scipy.signal

    band = mne.filter.filter_data(np.asarray(eog, dtype=float), sfreq, 1.0, 10.0, verbose="error")
    sign = 1.0 if np.percentile(band, 99.5) >= -np.percentile(band, 0.5) else -1.0
    peaks, _ = scipy.signal.find_peaks(sign * band, height=threshold, distance=max(1, int(_BLINK_GAP_S * sfreq)))
    return peaks / sfreq


def vertical_eog(raw):
    """The vertical EOG channel: one named VEOG, else the only EOG channel, else None."""
    import mne

    names = [raw.ch_names[i] for i in mne.pick_types(raw.info, eog=True, exclude=[])]
    vertical = [n for n in names if "VEOG" in n.upper() or n.upper() in ("EOG_V", "VEO")]
    if vertical:
        return vertical[0]
    return names[0] if len(names) == 1 else None


def kept_blinks(raw, entries, window):
    """How many kept trials contain a blink found on the vertical EOG.

    What is left of blinks after cleaning and rejection, measured where it can be: on a
    vertical EOG channel (None without one).

    Parameters
    ----------
    raw : mne.io.BaseRaw
        The cleaned recording, with its EOG channels.
    entries : list of dict
        The trial log (``kept``, ``onset_s``).
    window : (float, float), s
        Trial window around each onset.

    Returns
    -------
    dict or None
        ``channel``, ``threshold_uv``, ``blinks`` (found in the recording), ``kept_trials``,
        ``kept_with_blink`` and ``fraction``.
    """
    channel = vertical_eog(raw)
    if channel is None:
        return None
    peaks = blink_peaks(raw.get_data(picks=[channel])[0], raw.info["sfreq"])
    kept = [e for e in entries if e["kept"]]
    hit = sum(bool(np.any((peaks >= e["onset_s"] + window[0] - _BLINK_MARGIN_S)
                          & (peaks <= e["onset_s"] + window[1] + _BLINK_MARGIN_S))) for e in kept)
    return {"channel": channel, "threshold_uv": BLINK_THRESHOLD_V * 1e6, "blinks": int(len(peaks)),
            "kept_trials": len(kept), "kept_with_blink": int(hit),
            "fraction": round(hit / len(kept), 4) if kept else None}


def _source(data, times, ch_names, sfreq, paradigm, types=None):
    from .features import Source

    return Source(data, times, ch_names, sfreq, paradigm, ch_types=types)


def _features(feature_set, source, paradigm):
    from .features import compute_features

    return compute_features(feature_set, source, paradigm.rejection.min_trials)


def _counts(entries, paradigm):
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


def _arrays(analysis, source, recording, key, definitions):
    """Model-ready arrays (xarray datasets) with provenance attributes."""
    import json

    from .arrays import model_arrays

    paradigm = analysis.paradigm
    kwargs = {}
    if paradigm.design == "steady-state" and paradigm.stimulation.get("frequency"):
        kwargs["stimulation_frequency"] = paradigm.stimulation["frequency"]
    if paradigm.design == "resting":
        spec = next((fs.spectrum for fs in analysis.feature_sets), {"segment": 2.0, "overlap": 0.5})
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


MASTOIDS = ("M1", "M2", "TP9", "TP10")


def _mastoid_inversion(analysis, source):
    """For each contrast read by a mean-amplitude measure: its value in the measure's region
    and at the mastoids over the same window, in uV. Under an average or nose reference a
    supratemporal generator makes the two opposite in sign (docs/REFERENCES.md F19)."""
    from .numeric.erp import mean_amplitude, region_mean

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


def _inversion_flags(inversion, reference):
    if reference.get("reference") != "average":
        return []
    return [_flag("note", "no-mastoid-inversion",
                  f"{signal} does not invert at the mastoids under the average reference "
                  f"({v['region']} {v['region_uv']:.2f} uV, {'/'.join(v['mastoids'])} {v['mastoid_uv']:.2f} uV); "
                  "a supratemporal generator would (Naatanen et al. 2007)")
            for signal, v in inversion.items() if not v["inverted"]]


def _snr(source, paradigm, analysis=None):
    """Plus-minus SNR of each condition average, after the marker.

    Pooled over the channels of the feature sets' regions, where a response is measured
    (all channels when there are no regions), and within one sensor type: V and T cannot
    be summed, and most of an MEG helmet sees little of an auditory source. With several
    types the key is "<condition> (<TYPE>)".
    """
    from .numeric.erp import plus_minus_snr
    from .sensors import by_type

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


def _curves(analysis, source):
    """Arrays for the QC page's figures, computed once here (the page never recomputes)."""
    paradigm = analysis.paradigm
    regions = {}
    for fs in analysis.feature_sets:
        regions.update(fs.regions)
    curves = {"times": source.times.tolist(), "pass_band": list(paradigm.cleaning.pass_band)}
    region = next(iter(regions), None)
    if region is None:
        return curves
    picks = [source.ch_names.index(c) for c in regions[region] if c in source.ch_names]
    curves["region"] = region
    from .sensors import DISPLAY

    unit, factor = DISPLAY[source.ch_types[picks[0]]] if picks else DISPLAY["eeg"]
    curves["unit"] = unit
    windows = {m.params["window"] for fs in analysis.feature_sets for m in fs.measures if m.params.get("window")}
    curves["windows"] = sorted(windows)
    if paradigm.design == "event-related":
        curves["waves"] = {s: (source.average(s)[picks].mean(axis=0) * factor).tolist()
                           for s in paradigm.signals if source.n_trials(s) > 0}
    elif paradigm.design == "steady-state":
        from .numeric.phase import itpc

        freq = paradigm.stimulation.get("frequency", 40.0)
        curves["frequency"] = freq
        curves["itpc"] = {c: itpc(source.coefficients(c, freq, picks), axis=0).mean(axis=0).tolist()
                          for c in paradigm.conditions if source.n_trials(c) > 1}
    else:
        spec = next((fs.spectrum for fs in analysis.feature_sets), {"segment": 2.0, "overlap": 0.5})
        curves["psd"] = {}
        for c in paradigm.conditions:
            if source.n_trials(c) > 0:
                freqs, psd = source.spectrum(c, spec)
                curves["freqs"] = freqs.tolist()
                curves["psd"][c] = (psd[picks].mean(axis=0) * factor ** 2).tolist()
    return curves


FLAG_LEVELS = ("note", "caution", "unusable")


def verdict(flags):
    """The recording's verdict: its worst flag level, or "clear" without flags."""
    worst = max((FLAG_LEVELS.index(f["level"]) for f in flags), default=-1)
    return "clear" if worst < 0 else FLAG_LEVELS[worst]


def _ocular_qc(cleaning, rejection, harmonised):
    """What was done about ocular artefacts and what is left of them in the kept trials."""
    ocular = cleaning.get("ocular") or {}
    return {"policy": ocular.get("policy"), "method": ocular.get("method"),
            "eog_channels": harmonised["eog_channels"],
            "corrected_residual": (ocular.get("residual_correlation") or {}).get("after"),
            "kept_blinks": rejection.get("kept_blinks")}


def _ocular_flags(ocular, limits):
    """A recording without EOG gets a note that blinks were only left to rejection; one
    with a vertical EOG is flagged when too many kept trials still hold a blink."""
    if not ocular["eog_channels"]:
        if ocular["method"] in ("none", None):
            return [_flag("note", "no-eog", "no EOG channel: ocular artefacts were not corrected and cannot be "
                          f"measured against an EOG; they were left to epoch rejection (cleaning.ocular = "
                          f"\"{ocular['policy']}\"). Check frontal channels of the averages for blink residue")]
        return []
    blinks = ocular["kept_blinks"]
    if blinks is None and ocular["method"] in ("none", None):
        return [_flag("note", "no-vertical-eog", f"EOG channels {', '.join(ocular['eog_channels'])}: none is named "
                      "as the vertical one (VEOG), so blinks in kept trials were not counted; rename it VEOG with "
                      "channel_aliases in the study file")]
    if blinks and blinks["fraction"] is not None and blinks["fraction"] > limits["max_blink_trials"]:
        return [_flag("caution", "blinks-in-kept-trials",
                      f"{blinks['kept_with_blink']} of {blinks['kept_trials']} kept trials hold a blink found on "
                      f"{blinks['channel']} (more than {limits['max_blink_trials']:.0%})")]
    return []


def _flag(level, code, message):
    return {"level": level, "code": code, "message": message}


def _qc(recording, harmonised, cleaning, markers, counts, rows, paradigm, snr):
    limits = paradigm.quality
    flags = _trial_flags(counts, limits)
    bads = cleaning["bad_channels"]
    n_channels = len(harmonised["channels"])
    types = harmonised["channel_types"]
    by_kind = {}
    for name, kind in types.items():
        by_kind.setdefault(kind, [0, 0])[0] += 1
        by_kind[kind][1] += name in bads
    fraction = max((b / n for n, b in by_kind.values()), default=0.0)  # the worst sensor type
    if bads:
        level = "caution" if fraction > limits["max_interpolated"] else "note"
        tally = ", ".join(f"{b} of {n} {k.upper()}" for k, (n, b) in by_kind.items() if b) if len(by_kind) > 1 \
            else f"{len(bads)} of {n_channels}"
        flags.append(_flag(level, "channels-interpolated", f"{tally} channel(s) interpolated: "
                           + ", ".join(sorted(bads))))
    for c, value in snr.items():
        if value is not None and value < limits["min_snr"]:
            flags.append(_flag("caution", "low-snr", f"{c}: average SNR {value:.2f} below {limits['min_snr']:g} "
                               "(plus-minus estimate)"))
    flags.extend(_cleaning_flags(cleaning, limits, paradigm))
    if markers.unknown:
        flags.append(_flag("note", "unmapped-markers", "codes in the file not used by this paradigm: "
                           + ", ".join(f"{k} ({v})" for k, v in sorted(markers.unknown.items()))))
    if harmonised["file_sampling_rate"] < 200:
        # docs/REFERENCES.md F27: digital EEG guidelines ask for at least 200 Hz.
        flags.append(_flag("caution", "low-sampling-rate",
                           f"recorded at {harmonised['file_sampling_rate']:g} Hz, below 200 Hz"))
    if any(not np.isfinite(r["value"]) for r in rows):
        flags.append(_flag("unusable", "missing-features", "some features could not be computed"))
    return {
        "participant_id": recording.participant_id, "site": recording.site, "group": recording.group,
        "paradigm": recording.paradigm,
        "verdict": verdict(flags),
        "flags": flags,
        "thresholds": limits,
        "channels": {"file": harmonised["file_channels"], "renamed": harmonised["renamed"],
                     "restored_reference": harmonised["restored_reference"],
                     "eog": harmonised["eog_channels"], "analysed": harmonised["channels"],
                     "bad": bads, "interpolated": cleaning["interpolated"],
                     "interpolated_fraction": fraction,
                     "by_type": {k: {"channels": n, "interpolated": b} for k, (n, b) in by_kind.items()}},
        "datatype": harmonised.get("datatype", "eeg"),
        "markers": {"counts": _marker_counts(markers), "unmapped": markers.unknown,
                    "trigger_delay_s": harmonised["trigger_delay_s"]},
        "trials": counts,
        "snr": snr,
        "sampling_rate_hz": {"file": harmonised["file_sampling_rate"], "analysis": harmonised["sampling_rate"]},
        "duration_s": harmonised["duration_s"],
        "filter": cleaning["filter"],
        "reference": cleaning["reference"],
    }


def _cleaning_flags(cleaning, limits, paradigm):
    """Flags from the line-noise and ocular records."""
    flags = []
    ocular = cleaning.get("ocular") or {}
    if ocular.get("skipped_reason") and ocular.get("policy") != "none":
        flags.append(_flag("caution", "no-ocular-correction", ocular["skipped_reason"]))
    residual = (ocular.get("residual_correlation") or {}).get("by_source", {})
    vertical = {k: v for k, v in residual.items() if "HEOG" not in k.upper()}
    worst = max((v["after"] for v in vertical.values()), default=None)
    if worst is not None and worst > limits["max_eog_correlation"]:
        flags.append(_flag("caution", "ocular-residual", f"EEG still correlates {worst:.2f} with the EOG source "
                           f"after correction (limit {limits['max_eog_correlation']:g})"))
    line = cleaning.get("line_noise") or {}
    ratio = line.get("ratio_after")
    if ratio is not None and line.get("line_frequency_hz", 1e9) < paradigm.cleaning.pass_band[1] \
            and ratio > limits["max_line_ratio"]:
        flags.append(_flag("caution", "line-noise", f"line-noise power {ratio:.1f} x its neighbours after removal "
                           f"(limit {limits['max_line_ratio']:g})"))
    return flags


def _trial_flags(counts, limits):
    flags = []
    for c, n in counts.items():
        if n["kept"] < n["minimum"]:
            reasons = ", ".join(f"{k} {v}" for k, v in n["reasons"].items()) or "none dropped"
            flags.append(_flag("unusable", "too-few-trials",
                               f"{c}: {n['kept']} trials kept, below the minimum {n['minimum']} "
                               f"({n['planned']} planned; dropped: {reasons})"))
            continue
        skipped = n["reasons"].get("skipped", 0)  # left out by design, not for artefacts
        eligible, dropped = n["planned"] - skipped, n["dropped"] - skipped
        if eligible and dropped / eligible > limits["max_dropped"]:
            flags.append(_flag("caution", "many-dropped", f"{c}: {dropped} of {eligible} trials dropped, "
                               f"more than {limits['max_dropped']:.0%}"))
    return flags


def _marker_counts(markers):
    out = {}
    for label in markers.labels:
        out[label] = out.get(label, 0) + 1
    return out


def package_versions():
    """Versions of heschl and the libraries whose numbers shape the outputs."""
    from importlib import metadata

    out = {"heschl": __version__}
    for name in ("mne", "numpy", "scipy", "autoreject", "pandas", "jinja2", "matplotlib"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    import sys

    out["python"] = sys.version.split()[0]
    return out
