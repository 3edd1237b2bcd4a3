"""Group comparison of the study feature table: group means, intervals and Hedges' g.

Two layers, as elsewhere in heschl: `hedges_g` and `mean_interval` take plain arrays;
`group_summary` reads the tidy study table (``group/features.tsv``, one row per
recording x feature) and calls them once per feature and scope.

Values keep the unit of their feature row (uV, ms, 1, ...); effect sizes are unitless.

Summary columns
---------------
One row per ``(paradigm, feature_set, feature, unit, scope)``; ``feature_set`` is part of
the key only when the table has that column (two feature sets may reuse a feature name).
``scope`` is each site label, then ``"pooled"``. With ``groups=("control", "comparison")``
and ``reference="control"`` the columns are::

    paradigm, [feature_set,] feature, unit, scope, contrast,
    n_control, mean_control, sd_control, mean_low_control, mean_high_control,
    n_comparison, mean_comparison, sd_comparison, mean_low_comparison, mean_high_comparison,
    difference, g, g_se, g_low, g_high, site_adjusted_g, split_half, n_excluded, n_missing,
    n_reviewer_excluded

- ``contrast``: text ``"<comparison> - <reference>"``, the direction of ``difference`` and ``g``.
- ``n_<group>``: recordings with a finite value that enter the numbers.
- ``mean_<group>``, ``sd_<group>`` (ddof=1): in the row's unit; NaN without data (sd with n < 2).
- ``mean_low_<group>``, ``mean_high_<group>``: t-based interval of the mean at ``level``,
  ``mean +/- t_{(1+level)/2, n-1} sd / sqrt(n)``; NaN with n < 2.
- ``difference``: ``mean_<comparison> - mean_<reference>``, in the row's unit.
- ``g``, ``g_se``, ``g_low``, ``g_high``: Hedges' g of comparison vs reference, its
  large-sample standard error and normal interval at ``level`` (see `hedges_g`); NaN with
  fewer than 2 recordings in either group.
- ``site_adjusted_g``: Hedges' g on site-centred values (see below).
- ``n_excluded``: rows of the two groups left out because their ``flags`` text is not
  empty (always 0 with ``exclude_flagged=False``).
- ``n_missing``: rows of the two groups kept by the flag rule but with a NaN value.
- ``n_reviewer_excluded``: rows left out because a reviewer's current decision excludes
  their recording (table column ``decision`` equal to ``"exclude"``; see
  :mod:`heschl.signoff`). Such rows count neither as flagged nor as missing.

Pooled and site-adjusted effects
--------------------------------
The ``"pooled"`` row simply puts every recording of all sites together; it ignores site,
so a site offset inflates the SDs and shrinks g. ``site_adjusted_g`` is a simple
adjustment: within each site the values are centred on the average of the two group
means of that site (the site mean if the groups were balanced; using the balanced mean
keeps an unequal group mix from pulling part of the group effect into the site mean),
then Hedges' g is computed on the centred values. A site lacking either group carries no
within-site contrast and is left out of the adjusted value. Centring spends one degree of
freedom per site, so the pooled SD of the centred values divides by
``n1 + n2 - 1 - sites`` instead of ``n1 + n2 - 2``, and J uses the same degrees of
freedom, ``J = 1 - 3 / (4 df - 1)`` (with one site both reduce to `hedges_g`); NaN
with fewer than 2 degrees of freedom. In a single-site row centring is a constant shift,
so ``site_adjusted_g`` equals ``g``. A model-based site adjustment (e.g. random site
effects, site-by-group interaction) is future work.
"""
from __future__ import annotations

import logging
import math

import numpy as np

from heschl.errors import DefinitionError, InputDataError, did_you_mean, problem
from heschl.numeric.effects import check_level, g_and_se, hedges_g, mean_interval

__all__ = ["hedges_g", "mean_interval", "group_summary", "POOLED"]  # the first two re-exported from numeric.effects

log = logging.getLogger(__name__)

#: Scope label of the all-sites row.
POOLED = "pooled"

REQUIRED_COLUMNS = ("participant_id", "site", "group", "paradigm", "feature", "unit", "value")



# -- table layer ---------------------------------------------------------------------------


def _is_flagged(flags):
    """True where the flags text is not empty (NaN, "" and "n/a" are empty)."""
    import pandas as pd

    return flags.map(lambda v: bool(pd.notna(v) and str(v).strip() not in ("", "n/a"))).astype(bool)


def _check_groups(groups, reference):
    where = "group_summary"
    groups = tuple(groups)
    if len(groups) != 2 or groups[0] == groups[1]:
        raise DefinitionError(problem(where, f"groups = {groups!r} is not two distinct labels",
                                      'pass two group labels, e.g. ("control", "comparison")',
                                      key="groups"))
    if reference not in groups:
        raise DefinitionError(problem(
            where, f"reference = {reference!r} is not one of groups {groups!r}"
            + did_you_mean(str(reference), [str(g) for g in groups]),
            "choose the reference among the groups", key="reference"))
    return groups


def _check_table(table):
    where = "group_summary"
    missing = [c for c in REQUIRED_COLUMNS if c not in table.columns]
    if missing:
        raise InputDataError(problem(where, f"the table has no column(s) {', '.join(missing)}",
                                     f"pass the study feature table with columns {', '.join(REQUIRED_COLUMNS)}",
                                     key="table"))
    if (table["site"].astype(str) == POOLED).any():
        raise InputDataError(problem(where, f'a site is labelled "{POOLED}", the label of the all-sites rows',
                                     "rename that site", key="site"))


def _columns(key, groups):
    per_group = [f"{stat}_{g}" for g in groups for stat in ("n", "mean", "sd", "mean_low", "mean_high")]
    return [*key, "scope", "contrast", *per_group, "difference", "g", "g_se", "g_low", "g_high",
            "site_adjusted_g", "split_half", "n_excluded", "n_missing", "n_reviewer_excluded"]


def _site_adjusted_g(rows, comparison, reference):
    """Hedges' g on values centred per site on the mean of the site's two group means."""
    out = {comparison: [], reference: []}
    for _, site_rows in rows.groupby("site", sort=True):
        by_group = {g: site_rows.loc[site_rows["group"] == g, "value"].to_numpy(float)
                    for g in (comparison, reference)}
        if any(v.size == 0 for v in by_group.values()):
            continue  # no within-site contrast
        centre = (by_group[comparison].mean() + by_group[reference].mean()) / 2
        for g, v in by_group.items():
            out[g].append(v - centre)
    if not out[comparison]:
        return math.nan
    sites = len(out[comparison])
    return g_and_se(np.concatenate(out[comparison]), np.concatenate(out[reference]), spent=sites - 1)[0]


def _scope_row(rows, n_excluded, n_missing, groups, comparison, reference, level):
    """Summary numbers of one scope; ``rows`` hold finite values of the two groups only."""
    row = {"contrast": f"{comparison} - {reference}"}
    values = {g: rows.loc[rows["group"] == g, "value"].to_numpy(float) for g in groups}
    for g in groups:
        mean, (low, high) = mean_interval(values[g], level=level)
        row.update({f"n_{g}": int(values[g].size), f"mean_{g}": mean,
                    f"sd_{g}": float(values[g].std(ddof=1)) if values[g].size >= 2 else math.nan,
                    f"mean_low_{g}": low, f"mean_high_{g}": high})
    row["difference"] = row[f"mean_{comparison}"] - row[f"mean_{reference}"]
    g, se, (low, high) = hedges_g(values[comparison], values[reference], level=level)
    row.update({"g": g, "g_se": se, "g_low": low, "g_high": high,
                "site_adjusted_g": _site_adjusted_g(rows, comparison, reference),
                "split_half": _cohort_split_half(rows),
                "n_excluded": int(n_excluded), "n_missing": int(n_missing)})
    return row


def _cohort_split_half(rows):
    """Spearman-Brown-corrected correlation across recordings of the odd- and even-trial
    values (docs/REFERENCES.md F31: Clayson & Miller 2017); NaN without those columns or with
    fewer than 3 recordings."""
    import pandas as pd

    from .numeric.cohort import split_half_cohort

    if not {"half_odd", "half_even"} <= set(rows.columns):
        return math.nan
    halves = rows[["half_odd", "half_even"]].apply(pd.to_numeric, errors="coerce").dropna()
    if len(halves) < 3 or halves.std().min() == 0:
        return math.nan
    return float(split_half_cohort(halves["half_odd"].to_numpy(float), halves["half_even"].to_numpy(float)))


def group_summary(table, *, groups=("control", "comparison"), reference="control", level=0.95,
                  exclude_flagged=True):
    """Per feature and scope: group means with t intervals, difference and Hedges' g.

    Parameters
    ----------
    table : pandas.DataFrame
        The study feature table (``group/features.tsv``): columns participant_id, site,
        group, paradigm, feature, unit, value, and optionally flags and feature_set. Rows
        of other groups are ignored.
    groups : tuple of str, default=("control", "comparison")
        The two group labels compared; their order sets the column order.
    reference : str, default="control"
        The reference group; the other one is the comparison, and ``difference`` and
        ``g`` are comparison minus reference.
    level : float, default=0.95
        Coverage of the mean intervals and the g interval.
    exclude_flagged : bool, default=True
        Leave out rows whose ``flags`` text is not empty; they are counted in ``n_excluded``.

    Returns
    -------
    summary : pandas.DataFrame
        One row per (paradigm, [feature_set,] feature, unit, scope), sites first (sorted)
        then ``"pooled"``; columns as listed in the module docstring. Too few recordings
        give NaN, never an error.
    """
    import pandas as pd

    level = check_level(level, "group_summary")
    groups = _check_groups(groups, reference)
    comparison = groups[1] if groups[0] == reference else groups[0]
    key = ["paradigm", *(["feature_set"] if "feature_set" in table.columns else []), "feature", "unit"]
    if not len(table):
        return pd.DataFrame(columns=_columns(key, groups))
    _check_table(table)
    rows = table.loc[table["group"].isin(groups)].copy()
    rows["value"] = pd.to_numeric(rows["value"], errors="coerce")
    rows["_flagged"] = (_is_flagged(rows["flags"]) if exclude_flagged and "flags" in rows.columns
                        else False)
    rows["_decided"] = (rows["decision"].astype(str) == "exclude") if "decision" in rows.columns else False
    rows["_flagged"] = rows["_flagged"] & ~rows["_decided"]
    rows["_missing"] = ~rows["_flagged"] & ~rows["_decided"] & ~np.isfinite(rows["value"].to_numpy(float))
    _check_unique(rows, key)
    out = []
    for labels, feature_rows in rows.groupby(key, sort=True, dropna=False):
        scopes = [(s, feature_rows.loc[feature_rows["site"] == s]) for s in sorted(feature_rows["site"].unique())]
        for scope, scope_rows in [*scopes, (POOLED, feature_rows)]:
            used = scope_rows.loc[~scope_rows["_flagged"] & ~scope_rows["_missing"] & ~scope_rows["_decided"]]
            numbers = _scope_row(used, scope_rows["_flagged"].sum(), scope_rows["_missing"].sum(),
                                 groups, comparison, reference, level)
            numbers["n_reviewer_excluded"] = int(scope_rows["_decided"].sum())
            out.append({**dict(zip(key, labels)), "scope": scope, **numbers})
    log.info("Group summary: %d features x scopes; left out %d flagged, %d excluded by review and %d missing "
             "of %d rows", len(out), int(rows["_flagged"].sum()), int(rows["_decided"].sum()),
             int(rows["_missing"].sum()), len(rows))
    return pd.DataFrame(out, columns=_columns(key, groups))


def _check_unique(rows, key):
    """One row per recording and feature, or the group numbers would count it twice."""
    dup = rows.duplicated(subset=["site", "participant_id", *key], keep=False)
    if dup.any():
        first = rows.loc[dup].iloc[0]
        raise InputDataError(problem(
            "group_summary", f"{int(dup.sum())} rows repeat a recording and feature, e.g. "
            f"{first['participant_id']} at site {first['site']}, {first['paradigm']}/{first['feature']}",
            "keep one row per participant, site, paradigm and feature (or give the rows a "
            "feature_set column that tells them apart)", key="table"))
