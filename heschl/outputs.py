"""Write results in a BIDS-derivatives layout, every file through a temporary name.

A crash never leaves a half-written file that looks complete: each file is written to
``.<name>.tmp-<pid>`` beside its target and renamed into place.
"""
from __future__ import annotations

import json
import logging
import math
import os
from pathlib import Path

from . import __version__
from .config.feature_set import MEASURE_KINDS
from .errors import OutputError, problem
from .inputs import display_path
from .vocabulary import AMPLITUDE_UNITS, POWER_UNITS

log = logging.getLogger(__name__)

__all__ = ["write_atomic", "output_folder", "check_space", "recording_paths", "write_recording", "read_recording", "read_rows",
           "write_dataset_description",
           "write_group", "write_group_outputs", "FEATURE_COLUMNS", "FEATURE_SIDECAR"]

FEATURE_COLUMNS = ["feature", "value", "unit", "kind", "signal", "region", "window", "n_trials",
                   "ci_low", "ci_high", "se", "half_odd", "half_even", "reliability", "low_reliability",
                   "feature_set", "flags"]
FEATURE_SIDECAR = {
    "feature": {"Description": "Name of the measure, from the feature set."},
    "value": {"Description": "The measured value, in the unit of the row. NaN when it could not be computed."},
    "unit": {"Description": "Unit of value: an amplitude ("
                            + ", ".join(u for units in AMPLITUDE_UNITS.values() for u in units)
                            + "), a power (" + ", ".join(u for units in POWER_UNITS.values() for u in units)
                            + "), ms or s, Hz, or 1 (dimensionless)."},
    "kind": {"Description": "Measure kind: " + ", ".join(MEASURE_KINDS) + "."},
    "signal": {"Description": "Condition or contrast (difference wave) the measure reads; numerator/denominator for ratios."},
    "region": {"Description": "Named channel region of the feature set; values are averaged over its channels (root mean square with combine = rms)."},
    "window": {"Description": "Time window (s after the marker) and frequency, or band name."},
    "n_trials": {"Description": "Kept trials (epochs or segments) the value rests on; the smaller count for contrasts."},
    "ci_low": {"Description": "Lower end of the bootstrap percentile interval (level set in the feature set, default 95 %), "
                         "trials resampled within each condition; unit of value."},
    "ci_high": {"Description": "Upper end of the bootstrap percentile interval; unit of value."},
    "se": {"Description": "Standardized measurement error of the value (Luck et al. 2021), unit of value: for a "
                     "mean amplitude over a region mean the analytic SME, SD of the single-trial window means "
                     "(ddof=0) over sqrt(N), the two conditions of a difference wave added in quadrature; for "
                     "every other measure the bootstrap standard deviation (bootstrapped SME)."},
    "half_odd": {"Description": "The value from odd-numbered trials only, each condition split into equal halves "
                           "(an odd last trial left out); for the cohort split-half in group/summary.tsv."},
    "half_even": {"Description": "The value from even-numbered trials only."},
    "reliability": {"Description": "Subject-level reliability t/(t+se^2), t = max(value^2 - se^2, 0), se from random "
                                  "half splits (idea of Clayson, Brush & Hajcak 2021): how well the value stands "
                                  "apart from zero. Not a correlation across subjects. n/a for kinds without a "
                                  "meaningful zero (latencies, frequencies, exponents, p-values, ratios)."},
    "low_reliability": {"Description": "True when reliability is below the minimum set in the feature set "
                                      "([reliability] minimum, default 0.70: Clayson & Miller 2017); n/a when "
                                      "reliability is n/a. A caution, not a reason to drop the value."},
    "feature_set": {"Description": "Feature set that defines the measure."},
    "flags": {"Description": "Why the value should not be used as it is (e.g. trials below the paradigm minimum); "
                         "empty when none. Group statistics leave flagged values out."},
}


def write_atomic(path, data):
    """Write text or bytes to ``path`` through a temporary file and a rename.

    A failed write (a full disk, a folder without write permission) removes its temporary
    file and raises :class:`heschl.errors.OutputError` with one line naming the file.
    """
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    mode = "wb" if isinstance(data, bytes) else "w"
    output_folder(path.parent)
    try:
        with open(tmp, mode, **({} if mode == "wb" else {"encoding": "utf-8", "newline": "\n"})) as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except OSError as exc:
        _remove(tmp)
        raise _output_error(path, exc) from None
    except BaseException:
        _remove(tmp)
        raise
    return path


def _remove(path):
    """Delete a file if it is there; never raises (a failed write is being cleaned up)."""
    try:
        Path(path).unlink(missing_ok=True)
    except OSError:
        pass


def output_folder(folder):
    """Create ``folder`` (and its parents), or raise a one-line :class:`OutputError`."""
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except (FileExistsError, NotADirectoryError):
        blocker = next((p for p in [folder, *folder.parents] if p.exists() and not p.is_dir()), folder)
        raise OutputError(problem(display_path(folder), f"cannot be made a folder: {display_path(blocker)} is a file",
                                  "choose another output folder in the study file, or move the file away")) from None
    except OSError as exc:
        raise _output_error(folder, exc) from None
    return folder


def _output_error(path, exc):
    import errno

    if exc.errno == errno.ENOSPC:
        what, fix = "cannot be written: the disk is full", "free disk space (or choose another output folder) and run again"
    elif exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        what, fix = "cannot be written: permission denied", "choose an output folder you may write to"
    else:
        what, fix = f"cannot be written ({exc.strerror or exc.__class__.__name__})", "check the output folder"
    return OutputError(problem(display_path(path), what, fix))


#: Free space, bytes, kept on top of what a recording's outputs need (HDF5 can crash the
#: process rather than raise when the disk fills during a write).
_SPACE_MARGIN = 64 * 2 ** 20


def check_space(folder, needed):
    """Raise `OutputError` when ``folder``'s disk has less than ``needed`` bytes plus a margin."""
    import shutil

    free = shutil.disk_usage(output_folder(folder)).free
    if free < needed + _SPACE_MARGIN:
        raise OutputError(problem(display_path(folder), f"only {free / 2 ** 20:.0f} MB free and this recording's "
                                  f"outputs need about {(needed + _SPACE_MARGIN) / 2 ** 20:.0f} MB",
                                  "free disk space (or choose another output folder) and run again"))


def _json(obj):
    return json.dumps(obj, indent=2, sort_keys=False, default=_default, allow_nan=False) + "\n"


def _default(value):
    import numpy as np

    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating,)):
        return None if not math.isfinite(value) else float(value)
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def _finite(obj):
    """Replace NaN/inf by None so the JSON is standard."""
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    return obj


def recording_paths(output, recording):
    """Paths of one recording's outputs (in the BIDS datatype folder: eeg/ or meg/)."""
    folder = Path(output) / recording.participant_id / getattr(recording, "datatype", "eeg")
    stem = recording.stem
    return {
        "features": folder / f"{stem}_features.tsv",
        "features_json": folder / f"{stem}_features.json",
        "qc": folder / f"{stem}_qc.json",
        "provenance": folder / f"{stem}_provenance.json",
        "evidence": folder / f"{stem}_evidence.json",
        "page": folder / f"{stem}_review.html",
    }


def features_tsv(rows):
    """The tidy features table as TSV text."""
    import pandas as pd

    table = pd.DataFrame(rows, columns=FEATURE_COLUMNS)
    return table.to_csv(sep="\t", index=False, na_rep="n/a", float_format="%.6g", lineterminator="\n")


def write_recording(output, recording, result, render_page):
    """Write arrays, features (+ sidecar), QC, the page's evidence, the page, and provenance last.

    ``render_page(recorded)`` gets the recording's results as they read back from the
    files (see :func:`read_recording`) and returns the page's HTML, so a page drawn now
    and a page drawn again later from disk are the same page.

    Provenance is the marker of a complete recording: resuming trusts a recording only
    when its provenance exists and names the same input key.
    """
    from .arrays import ARRAY_SUFFIXES, write_netcdf

    paths = recording_paths(output, recording)
    folder = paths["features"].parent
    texts = {name: _json(_finite(result[name])) for name in ("qc", "evidence")}
    arrays = result.get("arrays", {})
    check_space(folder, 2 * sum(int(d.nbytes) for d in arrays.values()) + sum(len(t) for t in texts.values()))
    # The old provenance goes first: until the new one is written last, the recording is
    # incomplete and a rerun processes it again (all outputs or none).
    paths["provenance"].unlink(missing_ok=True)
    written = []
    try:
        for name, dataset in arrays.items():
            target = folder / f"{recording.stem}_desc-{name}_{ARRAY_SUFFIXES[name]}.nc"
            try:
                written.append(write_netcdf(target, dataset).name)
            except OSError as exc:
                raise _output_error(target, exc) from None
        result["provenance"]["arrays"] = written
        texts["provenance"] = _json(_finite(result["provenance"]))
        write_atomic(paths["features"], features_tsv(result["rows"]))
        write_atomic(paths["features_json"], _json(FEATURE_SIDECAR))
        write_atomic(paths["qc"], texts["qc"])
        write_atomic(paths["evidence"], texts["evidence"])
        recorded = {name: json.loads(text) for name, text in texts.items()}
        recorded["rows"] = read_rows(paths["features"])
        write_atomic(paths["page"], render_page(recorded))
        write_atomic(paths["provenance"], texts["provenance"])
    except BaseException:
        for name in written:
            _remove(folder / name)
        for key in ("features", "features_json", "qc", "evidence", "page"):
            _remove(paths[key])
        raise
    return paths


def read_rows(path):
    """A features table as a list of dicts, None where the table says n/a."""
    import pandas as pd

    table = pd.read_csv(path, sep="\t", na_values=["n/a"], keep_default_na=False)
    return [{k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in row.items()}
            for row in table.to_dict("records")]


def read_recording(output, recording):
    """A processed recording's results as written: ``qc``, ``evidence``, ``provenance``
    (dicts) and ``rows`` (the features table); what every page is drawn from."""
    paths = recording_paths(output, recording)
    out = {name: json.loads(paths[name].read_text(encoding="utf-8")) for name in ("qc", "evidence", "provenance")}
    out["rows"] = read_rows(paths["features"])
    return out


def write_dataset_description(output, study_name):
    """BIDS derivatives ``dataset_description.json``."""
    desc = {"Name": f"heschl derivatives: {study_name}", "BIDSVersion": "1.9.0", "DatasetType": "derivative",
            "GeneratedBy": [{"Name": "heschl", "Version": __version__,
                             "Description": "Declarative multi-site processing of auditory EEG/MEG paradigms."}]}
    return write_atomic(Path(output) / "dataset_description.json", _json(desc))


def write_group(output, table, qc_table, page_html=None, summary=None):
    """Study-level tables (and page) under ``<output>/group``: features, QC, and the group
    summary (means with intervals and Hedges' g per site and pooled) when there is one."""
    folder = Path(output) / "group"
    if summary is not None:
        write_atomic(folder / "summary.tsv", summary.to_csv(sep="\t", index=False, na_rep="n/a",
                                                            float_format="%.6g", lineterminator="\n"))
    write_atomic(folder / "features.tsv", table.to_csv(sep="\t", index=False, na_rep="n/a",
                                                       float_format="%.6g", lineterminator="\n"))
    write_atomic(folder / "qc.tsv", qc_table.to_csv(sep="\t", index=False, na_rep="n/a", float_format="%.6g",
                                                    lineterminator="\n"))
    if page_html is not None:
        write_atomic(folder / "review.html", page_html)
    return folder


def write_group_outputs(study, recordings, summaries, decisions=None):
    """Group feature table, QC table and study page, read back from the written files.

    ``decisions`` (from :func:`heschl.signoff.read_decisions`; read here when None) are
    carried into both tables as columns: a current "exclude" keeps the recording's rows
    but leaves them out of the group summary.
    """
    import pandas as pd

    from .group import group_summary
    from .pages import render_study
    from .qc.study import qc_columns, study_view
    from .signoff import read_decisions, signoff_for

    decisions = read_decisions(study.output) if decisions is None else decisions
    tables, qc_rows, done = [], [], []
    for recording, summary in zip(recordings, summaries):
        if summary["status"] == "failed":
            continue
        paths = recording_paths(study.output, recording)
        key = json.loads(paths["provenance"].read_text(encoding="utf-8"))["key"]
        signoff = signoff_for(study, recording, decisions.get((recording.site, recording.participant_id,
                                                               recording.paradigm)), key)
        decided = {"decision": signoff["decision"] if signoff["state"] == "current" else None,
                   "decision_state": signoff["state"], "decision_reason": signoff["comment"] or None}
        table = pd.read_csv(paths["features"], sep="\t", na_values=["n/a"], keep_default_na=False)
        table.insert(0, "paradigm", recording.paradigm)
        table.insert(0, "group", recording.group)
        table.insert(0, "site", recording.site)
        table.insert(0, "participant_id", recording.participant_id)
        table["decision"], table["decision_reason"] = decided["decision"], decided["decision_reason"]
        tables.append(table)
        qc = json.loads(paths["qc"].read_text(encoding="utf-8"))
        qc_rows.append({"participant_id": recording.participant_id, "site": recording.site,
                        "group": recording.group, "paradigm": recording.paradigm, "verdict": qc["verdict"],
                        **decided, "reviewer": signoff["reviewer"] or None,
                        "decided_on": signoff["decided_on"] or None, **qc_columns(qc),
                        "flags": " | ".join(f["message"] for f in qc["flags"]),
                        "page": os.path.relpath(paths["page"], Path(study.output) / "group")})
        done.append(recording)
    _orphans(decisions, done)
    table = pd.concat(tables, ignore_index=True) if tables else pd.DataFrame()
    qc_table = _qc_table(qc_rows)
    failures = [s for s in summaries if s["status"] == "failed"]
    summary, groups = None, None
    if len(study.groups) == 2 and len(table):
        groups = (study.reference_group, next(g for g in study.groups if g != study.reference_group))
        summary = group_summary(table, groups=groups, reference=study.reference_group)
    elif len(table) and not study.groups and (set(table["group"]) - {"n/a"}):
        log.warning(
            "%s: participants belong to groups %s but the study declares none; add [groups] labels and "
            "reference to the study file for the group summary", study.source,
            ", ".join(sorted(set(table["group"]) - {"n/a"})))
    view = study_view(study.output, done, table, qc_table)
    page = render_study(study.name, table, qc_table, failures, summary, view, groups)
    # A recording that failed before it had outputs keeps its row: verdict "failed" and why.
    failed_rows = [{"participant_id": s["participant_id"], "site": s["site"], "group": s["group"],
                    "paradigm": s["paradigm"], "verdict": "failed", "flags": s["error"], "page": None}
                   for s in failures]
    written = _qc_table(qc_rows + failed_rows) if failed_rows else qc_table
    write_group(study.output, table, written, page, summary)
    return table, written


def _qc_table(rows):
    """One row per recording: identity, verdict and decision, the metric columns, then
    the flag texts and the page link; counts as integers (n/a where not measured)."""
    import pandas as pd

    table = pd.DataFrame(rows)
    if not len(table):
        return table
    last = ["flags", "page"]
    table = table[[c for c in table.columns if c not in last] + last]
    for column in table.columns:
        if column.startswith("kept_") or column in ("channels_interpolated", "n_flags"):
            table[column] = pd.to_numeric(table[column], errors="coerce").round().astype("Int64")
    return table


def _orphans(decisions, done):
    """Say which recorded decisions match no processed recording (kept in the file, not applied)."""
    known = {(r.site, r.participant_id, r.paradigm) for r in done}
    for site, pid, paradigm in sorted(set(decisions) - known):
        log.warning("decisions.tsv: the decision on %s %s at %s matches no processed "
                                            "recording; it is kept and not applied", pid, paradigm, site)
