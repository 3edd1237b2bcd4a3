"""Study-level QC: the metric columns of ``group/qc.tsv``, the site distributions with their
robust ranges, the site that stands out, and grand averages per site and per group.

Everything the study page draws is computed here (:func:`study_view`); the page layer only
draws it. The inputs are the files each recording wrote (qc.json, the features table, the
model-ready NetCDF arrays), never the pipeline's objects.

qc.tsv metric columns
---------------------
:func:`qc_columns` turns one recording's qc.json into flat columns, NaN where the recording
does not measure a metric. ``<condition>`` and ``<signal>`` are written in lower case, every
run of characters other than letters and digits replaced by ``_`` (``eyes-open`` ->
``eyes_open``, ``standard (MAG)`` -> ``standard_mag``)::

    kept_<condition>, dropped_<condition>, channels_interpolated, interpolated_fraction,
    snr_<signal>, line_ratio, blinks_kept, eog_residual, n_flags

- ``kept_<condition>``: trials (epochs or segments) kept, count.
- ``dropped_<condition>``: fraction (0-1) of the eligible trials that were dropped;
  eligible = planned minus those skipped by design (a standard right after a deviant).
  The fraction the "many-dropped" flag reads; NaN without eligible trials.
- ``channels_interpolated``: channels marked bad and interpolated, count, all sensor types.
- ``interpolated_fraction``: interpolated fraction (0-1) of the worst sensor type, the
  value the "channels-interpolated" flag reads.
- ``snr_<signal>``: plus-minus SNR of the condition average over the region channels
  (qc.json ``snr``), dimensionless, about 1 without a response; one column per sensor
  type at an MEG recording (``snr_standard_mag``, ``snr_standard_grad``).
- ``line_ratio``: residual line-noise ratio after cleaning, power at the line frequency
  over its neighbouring bins (qc.json ``line_noise.ratio_after`` where the record holds it).
- ``blinks_kept``: fraction (0-1) of kept trials that hold a blink found on the vertical
  EOG (qc.json ``ocular.kept_blinks.fraction``); NaN without a vertical EOG and after an
  ocular correction (the correction is judged by ``eog_residual`` then).
- ``eog_residual``: correlation of the EEG with the EOG source after correction
  (qc.json ``ocular.corrected_residual``); NaN without a correction.
- ``n_flags``: number of flags of every level.

Robust ranges and the site that stands out (heschl's choices)
-------------------------------------------------------------
Each panel holds one metric or feature of one paradigm, one value per recording.

- A **recording is outside** (:func:`robust_range`, :func:`outside`) when its value lies
  beyond ``median +/- 3 spreads`` of all recordings of the paradigm, judged with at least
  :data:`MIN_RANGE_RECORDINGS` values. The spread is the scaled median absolute
  deviation, ``1.4826 * median(|x - median(x)|)``, an estimate of the standard deviation
  of normal data that the outliers cannot inflate (median +/- 3 scaled MADs as an outlier
  rule: Leys et al. 2013, docs/REFERENCES.md F41, who call 3 "very
  conservative" and recommend 2.5; from memory). When more than half the values are equal
  the MAD is 0; then the spread is ``1.2533 * mean(|x - median|)`` (the mean absolute
  deviation scaled to a normal SD by sqrt(pi/2); common practice for a robust z-score
  with a zero MAD), and when that is 0 too (all values equal), 5 % of ``|median|``. With
  no spread left (all values 0) there is no range and nothing is marked.
- A **site stands out** (:func:`stand_out`) when (1) its median differs from the median
  of all recordings (its own included: with three sites or more one extreme site cannot
  move it far) by more than the two-sided 99 % quantile of Student's t in standard errors,
  ``sd_w * sqrt(1/n_site + 1/n_others)``, and (2) more than half of its recordings lie
  beyond every recording of the other sites, on that side. ``sd_w`` is the standard
  deviation pooled within sites (each value minus its site's mean, squared, summed, over
  ``N - S`` degrees of freedom for N recordings at S sites; the two-sample t statistic
  with pooled variance is common practice, its use here heschl's choice). It is
  deliberately not robust: one wild recording widens it, so a single bad recording is
  marked as outside without making its site stand out. The t quantile asks for larger
  differences when recordings are few (5.8 standard errors at 3 degrees of freedom, two
  recordings at each of three sites; 3.2 at 9); (1) keeps a small difference between
  tight values from counting, (2) keeps a difference carried by overlapping
  distributions from counting. When every site's recordings agree exactly (``sd_w`` = 0),
  ``sd_w`` is ``1/sqrt(12)`` for whole numbers (the SD of rounding to a whole number:
  counts) and 5 % of the median otherwise. Judged only for a site with at least
  :data:`MIN_SITE_RECORDINGS` values, against at least :data:`MIN_REFERENCE_RECORDINGS`
  values from at least :data:`MIN_REFERENCE_SITES` other sites, with at least
  :data:`MIN_DOF` degrees of freedom. A mark asks a reviewer to look; it is not a test
  result: with many panels a chance mark remains possible (on the synthetic study at size
  "test" the largest unplanted difference was 4.0 standard errors).
- ``n_flags`` and ``interpolated_fraction`` get no panel (:data:`NOT_DRAWN`); QC metrics and region-level features
  measured at fewer than two sites get none either (per-channel values
  ``<feature>.<channel>`` stay in the tables).

Grand averages
--------------
See :mod:`heschl.qc.grand`.
"""
from __future__ import annotations

import logging
import math
import re

import numpy as np

from ..vocabulary import MAD_TO_SD
from .grand import GRAND_CHANNELS, filled, grand_averages

__all__ = ["qc_columns", "metric_columns", "column_label", "robust_spread", "robust_range", "outside",
           "stand_out", "grand_averages", "recording_rows", "study_view", "ROBUST_K", "SITE_ALPHA", "GRAND_CHANNELS",
           "MIN_RANGE_RECORDINGS", "MIN_SITE_RECORDINGS", "MIN_REFERENCE_RECORDINGS", "MIN_REFERENCE_SITES"]

log = logging.getLogger(__name__)

#: Half-width of every robust range, in spreads (scaled MADs).
ROBUST_K = 3.0
#: Scale of the mean absolute deviation to a normal standard deviation, sqrt(pi / 2).
MEAN_AD_TO_SD = 1.2533
#: Spread when all values agree, as a fraction of |median| (heschl's choice).
RELATIVE_FLOOR = 0.05
#: Values a recording range needs.
MIN_RANGE_RECORDINGS = 4
#: Recordings a site needs to be judged.
MIN_SITE_RECORDINGS = 2
#: Recordings of the other sites a site is judged against, and from how many sites.
MIN_REFERENCE_RECORDINGS = 4
MIN_REFERENCE_SITES = 2
#: Two-sided level of the t quantile of the site rule.
SITE_ALPHA = 0.01
#: Degrees of freedom the pooled within-site SD needs.
MIN_DOF = 2
#: Metric columns without a distribution panel: a count of flags of every kind mixes notes
#: a site cannot help (no EOG channel) with problems, and the interpolated fraction says
#: what the channel count says (over a common channel set).
NOT_DRAWN = ("n_flags", "interpolated_fraction")
# Column name -> (label, unit); prefixes end with "_" and take the condition or signal.
_METRICS = (("dropped_", "dropped", "fraction"), ("kept_", "kept trials", "trials"),
            ("channels_interpolated", "channels interpolated", "channels"),
            ("interpolated_fraction", "interpolated, worst sensor type", "fraction"),
            ("snr_", "SNR (plus-minus)", "1"), ("line_ratio", "residual line noise", "ratio"),
            ("blinks_kept", "kept trials with a blink", "fraction"),
            ("eog_residual", "EEG-EOG correlation after correction", "1"), ("n_flags", "flags", "count"))


# -- qc.tsv columns ------------------------------------------------------------------------


def _slug(text):
    """Lower case, runs of other characters than letters and digits as one "_"."""
    return re.sub(r"[^a-z0-9]+", "_", str(text).lower()).strip("_")


def _number(value):
    """A float, NaN for None, text and non-finite values."""
    if isinstance(value, bool) or value is None:
        return math.nan
    try:
        value = float(value)
    except (TypeError, ValueError):
        return math.nan
    return value if math.isfinite(value) else math.nan


def qc_columns(qc):
    """The flat QC metric columns of one recording for ``group/qc.tsv``.

    Parameters
    ----------
    qc : dict
        The recording's qc.json as read back (see :func:`heschl.qc.quality_record`).

    Returns
    -------
    dict
        Column name -> value (float, NaN where not measured); names and meanings in the
        module notes.
    """
    out = {}
    for condition, n in (qc.get("trials") or {}).items():
        skipped = (n.get("reasons") or {}).get("skipped", 0)
        eligible, dropped = n.get("planned", 0) - skipped, n.get("dropped", 0) - skipped
        out[f"kept_{_slug(condition)}"] = _number(n.get("kept"))
        out[f"dropped_{_slug(condition)}"] = dropped / eligible if eligible > 0 else math.nan
    channels = qc.get("channels") or {}
    interpolated = channels.get("interpolated", channels.get("bad"))
    out["channels_interpolated"] = float(len(interpolated)) if interpolated is not None else math.nan
    out["interpolated_fraction"] = _number(channels.get("interpolated_fraction"))
    for signal, value in (qc.get("snr") or {}).items():
        out[f"snr_{_slug(signal)}"] = _number(value)
    line = qc.get("line_noise") or {}
    out["line_ratio"] = _number(line.get("ratio_after"))
    ocular = qc.get("ocular") or {}
    out["blinks_kept"] = _number((ocular.get("kept_blinks") or {}).get("fraction"))
    residual = ocular.get("corrected_residual")
    if isinstance(residual, dict):  # {"source": value} or {"after": value}: the largest
        residual = max((_number(v) for v in residual.values() if not math.isnan(_number(v))), default=None)
    out["eog_residual"] = _number(residual)
    out["n_flags"] = float(len(qc.get("flags") or []))
    return out


def _metric_kind(column):
    for key, label, unit in _METRICS:
        if column == key or (key.endswith("_") and column.startswith(key) and len(column) > len(key)):
            return key, label, unit
    return None


def metric_columns(qc_table):
    """The QC metric columns of a qc table, in the order of the module notes."""
    found = [c for c in qc_table.columns if _metric_kind(c)]
    order = [key for key, _, _ in _METRICS]
    return sorted(found, key=lambda c: (order.index(_metric_kind(c)[0]), list(qc_table.columns).index(c)))


def column_label(column):
    """(label, unit) of a QC metric column, e.g. ("dropped: eyes open", "fraction")."""
    key, label, unit = _metric_kind(column) or (column, column, "")
    if key.endswith("_"):
        label = f"{label}: {column[len(key):].replace('_', ' ')}"
    return label, unit


# -- robust ranges and the site that stands out --------------------------------------------


def robust_spread(values):
    """Median and spread of ``values`` (NaN ignored), and which rule gave the spread.

    Returns
    -------
    median : float
    spread : float
        Scaled MAD; when it is 0 the scaled mean absolute deviation; when that is 0 too,
        5 % of |median|; 0 when all values are 0 (NaN without values).
    rule : {"mad", "mean-ad", "relative", "none"}
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if not x.size:
        return math.nan, math.nan, "none"
    median = float(np.median(x))
    deviation = np.abs(x - median)
    for rule, spread in (("mad", MAD_TO_SD * float(np.median(deviation))),
                         ("mean-ad", MEAN_AD_TO_SD * float(np.mean(deviation))),
                         ("relative", RELATIVE_FLOOR * abs(median))):
        if spread > 0:
            return median, spread, rule
    return median, 0.0, "none"


def robust_range(values, k=ROBUST_K, min_values=MIN_RANGE_RECORDINGS):
    """``(low, high)`` = median -/+ k spreads of ``values``, or None without enough values
    (fewer than ``min_values`` finite ones) or without spread."""
    x = np.asarray(values, dtype=float)
    if np.isfinite(x).sum() < min_values:
        return None
    median, spread, _ = robust_spread(x)
    if not spread > 0:
        return None
    return median - k * spread, median + k * spread


def outside(values, k=ROBUST_K, min_values=MIN_RANGE_RECORDINGS):
    """Boolean array: which ``values`` lie outside their :func:`robust_range` (all False
    without a range; NaN is never outside)."""
    x = np.asarray(values, dtype=float)
    bounds = robust_range(x, k, min_values)
    if bounds is None:
        return np.zeros(x.shape, dtype=bool)
    with np.errstate(invalid="ignore"):
        return np.isfinite(x) & ((x < bounds[0]) | (x > bounds[1]))


def stand_out(sites, values, alpha=SITE_ALPHA, min_site=MIN_SITE_RECORDINGS, min_reference=MIN_REFERENCE_RECORDINGS,
              min_reference_sites=MIN_REFERENCE_SITES):
    """Judge every site against the other sites' recordings (rule in the module notes).

    Parameters
    ----------
    sites : sequence of str, shape (n_recordings,)
    values : sequence of float, shape (n_recordings,)
        One value per recording; NaN values are left out.
    alpha : float, default=SITE_ALPHA
        Two-sided level of the t quantile a site's difference must exceed.

    Returns
    -------
    list of dict
        Per site, in order of first appearance: ``site``, ``n``, ``median``, ``judged``
        (bool), ``reference_median`` (of all recordings), ``difference`` (site median
        minus it), ``spread`` (SD pooled within sites), ``dof``, ``t`` (difference
        over its standard error), ``critical`` (the t quantile), ``beyond`` (the site's
        recordings beyond every recording of the other sites, on the side of the
        difference) and ``stands_out`` (None, "higher" or
        "lower"). NaN where not judged.
    """
    from scipy import stats

    sites = np.asarray(list(sites), dtype=object)
    x = np.asarray(values, dtype=float)
    keep = np.isfinite(x)
    sites, x = sites[keep], x[keep]
    labels = list(dict.fromkeys(sites))
    dof = x.size - len(labels)
    residuals = np.concatenate([x[sites == s] - x[sites == s].mean() for s in labels]) if labels else x
    spread = math.sqrt(float(np.sum(residuals ** 2)) / dof) if dof > 0 else math.nan
    if spread == 0:  # every site's recordings agree exactly: counts, or a constant
        whole = bool(np.all(x == np.round(x)))
        spread = 1 / math.sqrt(12) if whole else RELATIVE_FLOOR * abs(float(np.median(x)))
    centre = float(np.median(x)) if x.size else math.nan
    out = []
    for site in labels:
        mine, others = x[sites == site], x[sites != site]
        entry = {"site": site, "n": int(mine.size), "median": float(np.median(mine)), "judged": False,
                 "reference_median": math.nan, "difference": math.nan, "spread": spread, "dof": dof, "t": math.nan,
                 "critical": math.nan, "beyond": 0, "stands_out": None}
        out.append(entry)
        if (mine.size < min_site or others.size < min_reference
                or len(set(sites[sites != site])) < min_reference_sites or dof < MIN_DOF or not spread > 0):
            continue
        reference = centre
        difference = entry["median"] - reference
        t = difference / (spread * math.sqrt(1 / mine.size + 1 / others.size))
        critical = float(stats.t.ppf(1 - alpha / 2, dof))
        beyond = int((mine > others.max()).sum() if difference > 0 else (mine < others.min()).sum())
        entry.update(judged=True, reference_median=reference, difference=difference, t=t, critical=critical,
                     beyond=beyond)
        if abs(t) > critical and beyond > mine.size / 2:
            entry["stands_out"] = "higher" if difference > 0 else "lower"
    return out


def _fmt(value):
    return "n/a" if value is None or not math.isfinite(value) else f"{value:.3g}"


def _why(entry, label, unit, paradigm):
    """The reason a site stands out, in words."""
    unit_text = "" if unit in ("1", "") else f" {unit}"
    return (f"{entry['site']} stands out on {label} ({paradigm}): its median {_fmt(entry['median'])}{unit_text} "
            f"is {entry['stands_out']} than the study median {_fmt(entry['reference_median'])}{unit_text}; the "
            f"difference is {abs(entry['t']):.1f} standard errors (limit {entry['critical']:.1f} at "
            f"{entry['dof']} degrees of freedom) and {entry['beyond']} of its {entry['n']} recordings lie "
            f"{'above' if entry['stands_out'] == 'higher' else 'below'} every recording of the other sites")


def _panel(paradigm, name, label, unit, source, frame):
    """One distribution panel: values per recording with outside marks, and the sites judged.

    ``frame`` holds participant_id, site, group and value (finite) of one paradigm.
    """
    values = frame["value"].to_numpy(dtype=float)
    bounds = robust_range(values)
    median, spread, rule = robust_spread(values)
    marks = outside(values)
    judged = stand_out(frame["site"], values)
    panel = {"paradigm": paradigm, "name": name, "label": label, "unit": unit, "source": source,
             "n": int(values.size), "median": median, "spread": spread, "spread_rule": rule,
             "low": bounds[0] if bounds else None, "high": bounds[1] if bounds else None,
             "points": [{"participant_id": p, "site": s, "group": g, "value": float(v), "outside": bool(o)}
                        for p, s, g, v, o in zip(frame["participant_id"], frame["site"], frame["group"], values,
                                                 marks)],
             "sites": judged, "standing_out": []}
    for entry in judged:
        if entry["stands_out"]:
            panel["standing_out"].append({"paradigm": paradigm, "name": name, "label": label, "unit": unit,
                                          "source": source, "site": entry["site"],
                                          "direction": entry["stands_out"], "site_median": entry["median"],
                                          "reference_median": entry["reference_median"],
                                          "difference": entry["difference"], "t": entry["t"],
                                          "critical": entry["critical"], "n": entry["n"],
                                          "why": _why(entry, label, unit, paradigm)})
    return panel


def _enough_sites(frame):
    return frame["site"].nunique() >= 2


def _metric_panels(paradigm, qc_table):
    rows = qc_table[qc_table["paradigm"] == paradigm]
    panels = []
    for column in metric_columns(qc_table):
        if column in NOT_DRAWN:
            continue
        frame = rows[["participant_id", "site", "group"]].assign(value=_numeric(rows[column]))
        frame = frame[np.isfinite(frame["value"])]
        if len(frame) and _enough_sites(frame):
            label, unit = column_label(column)
            panels.append(_panel(paradigm, column, label, unit, "qc", frame))
    return panels


def _numeric(series):
    import pandas as pd

    return pd.to_numeric(series, errors="coerce").astype(float)


def _feature_panels(paradigm, table):
    """One panel per region-level feature of the paradigm measured at two sites or more;
    per-channel values (``<feature>.<channel>``) are left to the table."""
    if not len(table):
        return []
    rows = table[(table["paradigm"] == paradigm) & ~table["feature"].astype(str).str.contains(".", regex=False)]
    keys = ["feature_set", "feature", "unit"] if "feature_set" in rows.columns else ["feature", "unit"]
    panels = []
    for key, part in rows.groupby(keys, sort=False, dropna=False):
        key = dict(zip(keys, key if isinstance(key, tuple) else (key,)))
        frame = part[["participant_id", "site", "group"]].assign(value=_numeric(part["value"]))
        frame = frame[np.isfinite(frame["value"])]
        if len(frame) and _enough_sites(frame):
            panels.append(_panel(paradigm, key["feature"], key["feature"], str(key["unit"]), "feature", frame))
    return panels


# -- grand averages ------------------------------------------------------------------------


# -- the recordings table ------------------------------------------------------------------


def _worst(row, prefix, pick):
    """(name, value) of the condition or signal with the worst value of a column family."""
    found = [(c[len(prefix):].replace("_", " "), _number(v)) for c, v in row.items()
             if c.startswith(prefix) and not math.isnan(_number(v))]
    return pick(found, key=lambda item: item[1]) if found else (None, math.nan)


def _cell(text, sort):
    return {"text": text, "sort": None if sort is None or (isinstance(sort, float) and math.isnan(sort)) else sort}


def recording_rows(qc_table, marked=None):
    """The rows of the study page's recordings table, one per recording, with display text
    and a sort key per cell (None sorts last); ``flags`` is the list of flag messages.

    Key metrics: the worst dropped fraction over conditions, channels interpolated, the
    lowest SNR over signals, the residual line-noise ratio, blinks in kept trials, and how
    many panels mark the recording outside (``marked``, from :func:`study_view`).
    """
    marked = marked or {}
    out = []
    for row in (qc_table.to_dict("records") if len(qc_table) else []):
        dropped_name, dropped = _worst(row, "dropped_", max)
        snr_name, snr = _worst(row, "snr_", min)
        lines = marked.get(f"{row['participant_id']}|{row['paradigm']}", [])
        decision = row.get("decision") if filled(row.get("decision")) else None
        state = row.get("decision_state") if filled(row.get("decision_state")) else "none"
        out.append({
            "site": row["site"], "participant_id": row["participant_id"], "group": row["group"],
            "paradigm": row["paradigm"], "verdict": row["verdict"], "page": row.get("page"),
            "flags": [f for f in str(row.get("flags")).split(" | ") if f] if filled(row.get("flags")) else [],
            "decision": decision, "decision_state": state,
            "decision_reason": row.get("decision_reason") if filled(row.get("decision_reason")) else "",
            "cells": {
                "dropped": _cell(f"{dropped:.0%} {dropped_name}" if dropped_name else "n/a", dropped),
                "channels": _cell(_fmt(_number(row.get("channels_interpolated"))),
                                  _number(row.get("channels_interpolated"))),
                "snr": _cell(f"{snr:.2f} {snr_name}" if snr_name else "n/a", snr),
                "line": _cell(_fmt(_number(row.get("line_ratio"))), _number(row.get("line_ratio"))),
                "blinks": _cell("n/a" if math.isnan(_number(row.get("blinks_kept")))
                                else f"{_number(row.get('blinks_kept')):.0%}", _number(row.get("blinks_kept"))),
                "outside": _cell(str(len(lines)), float(len(lines))),
            },
            "outside": lines,
        })
    return out


def _status(qc_table):
    """Counts for the page's status line: recordings, verdicts, decisions by state."""
    if not len(qc_table):
        return {"recordings": 0, "verdicts": {}, "decisions": {}}
    from ..vocabulary import FLAG_LEVELS

    counts = qc_table["verdict"].value_counts()
    verdicts = {v: int(counts[v]) for v in ("clear",) + tuple(FLAG_LEVELS) + tuple(sorted(set(counts.index)
                - {"clear", *FLAG_LEVELS})) if v in counts.index}
    decisions = {}
    for row in qc_table.to_dict("records"):
        state = row.get("decision_state") if filled(row.get("decision_state")) else "none"
        if state == "current" and filled(row.get("decision")):
            key = row["decision"]
        elif state == "stale":
            key = "stale"
        else:
            continue
        decisions[key] = decisions.get(key, 0) + 1
    return {"recordings": int(len(qc_table)), "verdicts": verdicts, "decisions": decisions}


# -- the whole view ------------------------------------------------------------------------


def study_view(output, recordings, table, qc_table):
    """Everything the study page draws, computed from the written results.

    Parameters
    ----------
    output : path-like
        The derivatives folder.
    recordings : list of heschl.inputs.Recording
        The recordings processed (failed ones left out).
    table : pandas.DataFrame
        The study features table (``group/features.tsv``).
    qc_table : pandas.DataFrame
        One row per recording: participant_id, site, group, paradigm, verdict, flags,
        page, the :func:`qc_columns` metrics and the decision columns (may be absent).

    Returns
    -------
    dict
        ``sites`` and ``groups`` (in order of first appearance), ``paradigms`` (list of
        ``{"paradigm", "metrics", "features", "grand"}``, panels as built by the
        distribution rules of the module notes), ``standing_out`` (every site that stands
        out, with ``paradigm``, ``name``, ``label``, ``site``, ``direction`` and ``why`` in
        words), ``outside`` (``"<participant_id>|<paradigm>"`` -> labels of the panels where
        the recording is outside), ``recordings`` (the rows of the recordings table, see
        :func:`recording_rows`), ``status`` (counts of recordings, verdicts and decisions)
        and ``rules`` (the rules in words).
    """
    order = list(dict.fromkeys([r.paradigm for r in recordings]
                               + (list(qc_table["paradigm"]) if len(qc_table) else [])))
    grand = grand_averages(output, recordings, qc_table) if recordings else {}
    paradigms, standing, marked = [], [], {}
    for paradigm in order:
        metrics = _metric_panels(paradigm, qc_table) if len(qc_table) else []
        features = _feature_panels(paradigm, table)
        for panel in metrics + features:
            standing.extend(panel["standing_out"])
            for point in panel["points"]:
                if point["outside"]:
                    marked.setdefault(f"{point['participant_id']}|{paradigm}", []).append(panel["label"])
        paradigms.append({"paradigm": paradigm, "metrics": metrics, "features": features,
                          "grand": grand.get(paradigm)})
    rows = recording_rows(qc_table, marked)
    sites = list(dict.fromkeys([r.site for r in recordings] + (list(qc_table["site"]) if len(qc_table) else [])))
    groups = list(dict.fromkeys([r.group for r in recordings] + (list(qc_table["group"]) if len(qc_table) else [])))
    if standing:
        log.info("%d site mark(s): %s", len(standing), "; ".join(s["why"] for s in standing))
    return {"sites": sites, "groups": groups, "paradigms": paradigms, "standing_out": standing, "outside": marked,
            "recordings": rows, "status": _status(qc_table),
            "rules": {"k": ROBUST_K, "recording": (
                f"A recording is marked outside when its value lies beyond the median +/- {ROBUST_K:g} robust SD "
                f"(scaled median absolute deviation) of all recordings of its paradigm."),
                "site": (f"A site stands out when its median differs from the study median by more than the "
                         f"two-sided {1 - SITE_ALPHA:.0%} quantile of Student's t in standard errors (SD pooled "
                         f"within sites) and more than half of its recordings (at least {MIN_SITE_RECORDINGS}) lie "
                         f"beyond every recording of the other sites (at least {MIN_REFERENCE_RECORDINGS} from "
                         f"{MIN_REFERENCE_SITES} sites).")}}
