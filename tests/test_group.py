"""Group summary: Hedges' g, t intervals of group means, flags and site adjustment.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>") or their textbook source. Random draws are seeded, so
every tolerance is a fixed, reasoned margin around a deterministic number.
"""
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from heschl.errors import DefinitionError, InputDataError
from heschl.group import POOLED, group_summary, hedges_g, mean_interval

EXACT = 1e-12  # the same arithmetic by another route: float rounding only


@pytest.fixture
def rng():
    return np.random.default_rng(20240927)


def _standardised(rng, n, mean=0.0, sd=1.0):
    """n values with sample mean ``mean`` and sample SD (ddof=1) ``sd``, to rounding."""
    x = rng.standard_normal(n)
    return mean + sd * (x - x.mean()) / x.std(ddof=1)


def _table(cells, feature="mismatch_mean_amplitude", unit="uV", paradigm="oddball", flags=None):
    """Tidy rows from ``{(site, group): values}``; participant ids unique per site."""
    rows = []
    for (site, group), values in cells.items():
        for i, v in enumerate(values):
            rows.append({"participant_id": f"sub-{site[:1].upper()}{group[:3]}{i:04d}", "site": site,
                         "group": group, "paradigm": paradigm, "feature": feature, "value": float(v),
                         "unit": unit, "flags": ""})
    table = pd.DataFrame(rows)
    for index, text in (flags or {}).items():
        table.loc[index, "flags"] = text
    return table


def _row(summary, scope):
    picked = summary.loc[summary["scope"] == scope]
    assert len(picked) == 1
    return picked.iloc[0]


def _d_via_t_test(a, b):
    """Cohen's d from scipy's pooled-variance t: t = diff / (s_p sqrt(1/n1 + 1/n2))."""
    t = stats.ttest_ind(a, b, equal_var=True).statistic
    return t * math.sqrt(1 / a.size + 1 / b.size)


# -- hedges_g: docs/REFERENCES.md F23 (Thune et al. 2016), Hedges & Olkin (1985) ------------------


def test_hedges_g_matches_scipy_d_times_j(rng):
    a = 3.0 + 2.0 * rng.standard_normal(23)
    b = 1.5 * rng.standard_normal(31)
    g, se, (low, high) = hedges_g(a, b)
    # F23: g = d * (1 - 3 / (4 (n1 + n2) - 9)), d from scipy's pooled t (ddof=1 pooled SD).
    j = 1 - 3 / (4 * (a.size + b.size) - 9)
    assert g == pytest.approx(_d_via_t_test(a, b) * j, abs=EXACT)
    # Same by plain numpy, pooled SD written out.
    sp = math.sqrt(((a.size - 1) * a.var(ddof=1) + (b.size - 1) * b.var(ddof=1)) / (a.size + b.size - 2))
    assert g == pytest.approx((a.mean() - b.mean()) / sp * j, abs=EXACT)
    # Hedges & Olkin (1985), from memory: SE = sqrt((n1+n2)/(n1 n2) + g^2 / (2 (n1+n2)));
    # 95 % normal interval g +/- 1.959963985 SE (the z quantile from scipy).
    n = a.size + b.size
    assert se == pytest.approx(math.sqrt(n / (a.size * b.size) + g * g / (2 * n)), abs=EXACT)
    z = stats.norm.ppf(0.975)
    assert (low, high) == pytest.approx((g - z * se, g + z * se), abs=EXACT)
    # Direction: g of (a, b) is minus g of (b, a).
    assert hedges_g(b, a)[0] == pytest.approx(-g, abs=EXACT)


def test_hedges_g_small_sample_correction_worked_value():
    # F23 formula by hand: n1 = n2 = 10, both SDs 1 and means 1 apart -> d = 1,
    # J = 1 - 3 / (80 - 9) = 68/71 (exact fraction; tolerance is float rounding).
    base = np.array([-1.0, 1.0] * 5) * math.sqrt(9 / 10)  # mean 0, sample SD (ddof=1) 1
    g, _, _ = hedges_g(base + 1.0, base)
    assert g == pytest.approx(68 / 71, abs=EXACT)


def test_hedges_g_recovers_meta_analytic_mmn_effect(rng):
    # F21 (Umbricht & Krljes 2005): mean MMN effect size 0.99; two groups with true
    # d = 0.99 and n = 2000 each give g = 0.99 +/- 0.10 (about 3 SE of d ~ 0.034).
    n = 2000
    comparison = 0.99 + rng.standard_normal(n)
    control = rng.standard_normal(n)
    g, se, (low, high) = hedges_g(comparison, control)
    assert g == pytest.approx(0.99, abs=0.10)
    # F21 gives SE of d ~ 0.034 at this size (two decimals: +/- 0.001 covers the rounding).
    assert se == pytest.approx(0.034, abs=0.001)
    assert low < g < high


def test_hedges_g_nan_when_too_few_or_no_spread():
    # Fewer than 2 per group: no pooled SD, so NaN (not an exception).
    for a, b in (([1.0], [1.0, 2.0, 3.0]), ([1.0, 2.0], []), ([], [])):
        g, se, (low, high) = hedges_g(a, b)
        assert all(math.isnan(v) for v in (g, se, low, high))
    # Pooled SD of 0: d undefined.
    assert math.isnan(hedges_g([2.0, 2.0], [1.0, 1.0])[0])


@pytest.mark.parametrize("a, match", [([1.0, float("nan"), 2.0], r"hedges_g: a: a holds 1 non-finite"),
                                      ([[1.0, 2.0], [3.0, 4.0]], r"hedges_g: a: a has shape \(2, 2\), not \(n,\)")])
def test_hedges_g_rejects_bad_input(a, match):
    with pytest.raises(InputDataError, match=match):
        hedges_g(a, [1.0, 2.0, 3.0])


def test_level_outside_unit_interval_is_rejected():
    with pytest.raises(DefinitionError, match=r"hedges_g: level: level = 95 is not between 0 and 1; pass"):
        hedges_g([1.0, 2.0], [3.0, 4.0], level=95)
    with pytest.raises(DefinitionError, match=r"mean_interval: level: level = 0 is not between"):
        mean_interval([1.0, 2.0], level=0)


# -- mean_interval: Student's t interval (scipy.stats.t) ------------------------------------


def test_mean_interval_matches_scipy_t_interval(rng):
    x = 4.0 + 3.0 * rng.standard_normal(9)
    for level in (0.95, 0.90):
        mean, (low, high) = mean_interval(x, level=level)
        # scipy.stats.t.interval with scale = SEM (ddof=1): same formula, another route.
        expected = stats.t.interval(level, x.size - 1, loc=x.mean(), scale=stats.sem(x))
        assert mean == pytest.approx(x.mean(), abs=EXACT)
        assert (low, high) == pytest.approx(expected, abs=EXACT)


def test_mean_interval_covers_at_nominal_rate(rng):
    # Student (1908): for normal data the t interval covers the true mean with
    # probability exactly `level`. 4000 samples of n = 6: binomial SE of the coverage is
    # sqrt(0.95 * 0.05 / 4000) = 0.0034, so +/- 0.011 is about 3 SE.
    samples = 10.0 + 2.0 * rng.standard_normal((4000, 6))
    covered = [low <= 10.0 <= high for _, (low, high) in (mean_interval(s) for s in samples)]
    assert np.mean(covered) == pytest.approx(0.95, abs=0.011)


def test_mean_interval_degenerate_sizes():
    mean, (low, high) = mean_interval([])
    assert math.isnan(mean) and math.isnan(low) and math.isnan(high)
    mean, (low, high) = mean_interval([2.5])
    assert mean == 2.5 and math.isnan(low) and math.isnan(high)


# -- group_summary -------------------------------------------------------------------------


def test_summary_columns_scopes_and_pooled_numbers(rng):
    cells = {("alder", "control"): rng.standard_normal(12), ("alder", "comparison"): 0.5 + rng.standard_normal(10),
             ("birch", "control"): rng.standard_normal(8), ("birch", "comparison"): 0.5 + rng.standard_normal(9)}
    summary = group_summary(_table(cells))
    assert list(summary.columns) == [
        "paradigm", "feature", "unit", "scope", "contrast",
        "n_control", "mean_control", "sd_control", "mean_low_control", "mean_high_control",
        "n_comparison", "mean_comparison", "sd_comparison", "mean_low_comparison", "mean_high_comparison",
        "difference", "g", "g_se", "g_low", "g_high", "site_adjusted_g", "split_half", "n_excluded", "n_missing",
        "n_reviewer_excluded"]
    assert list(summary["scope"]) == ["alder", "birch", POOLED]
    assert set(summary["contrast"]) == {"comparison - control"}
    # Pooled = all recordings together, no site term.
    comparison = np.concatenate([cells["alder", "comparison"], cells["birch", "comparison"]])
    control = np.concatenate([cells["alder", "control"], cells["birch", "control"]])
    pooled = _row(summary, POOLED)
    assert (pooled["n_control"], pooled["n_comparison"]) == (20, 19)
    assert pooled["g"] == pytest.approx(hedges_g(comparison, control)[0], abs=EXACT)
    assert pooled["difference"] == pytest.approx(comparison.mean() - control.mean(), abs=EXACT)
    # t interval of each group mean, as scipy.stats.t.interval gives it.
    expected = stats.t.interval(0.95, control.size - 1, loc=control.mean(), scale=stats.sem(control))
    assert (pooled["mean_low_control"], pooled["mean_high_control"]) == pytest.approx(expected, abs=EXACT)
    birch = _row(summary, "birch")
    assert birch["g"] == pytest.approx(hedges_g(cells["birch", "comparison"], cells["birch", "control"])[0],
                                       abs=EXACT)


def test_reference_sets_direction(rng):
    cells = {("alder", "control"): rng.standard_normal(10), ("alder", "comparison"): 1 + rng.standard_normal(10)}
    forward = _row(group_summary(_table(cells)), POOLED)
    backward = _row(group_summary(_table(cells), reference="comparison"), POOLED)
    assert backward["contrast"] == "control - comparison"
    assert backward["g"] == pytest.approx(-forward["g"], abs=EXACT)
    assert backward["difference"] == pytest.approx(-forward["difference"], abs=EXACT)


def test_flagged_rows_are_excluded_and_counted(rng):
    cells = {("alder", "control"): rng.standard_normal(10), ("alder", "comparison"): rng.standard_normal(10)}
    table = _table(cells)
    # Two flagged comparison rows with absurd values: they must not reach the numbers.
    table.loc[[10, 11], "value"] = 1e6
    table.loc[[10, 11], "flags"] = "12 deviant trials kept, fewer than the paradigm minimum of 30"
    summary = group_summary(table)
    row = _row(summary, POOLED)
    kept = cells["alder", "comparison"][2:]
    assert row["n_comparison"] == 8 and row["n_control"] == 10 and row["n_excluded"] == 2
    assert row["mean_comparison"] == pytest.approx(kept.mean(), abs=EXACT)
    assert _row(summary, "alder")["n_excluded"] == 2
    # Kept when asked: every row counted, none excluded.
    row = _row(group_summary(table, exclude_flagged=False), POOLED)
    assert row["n_comparison"] == 10 and row["n_excluded"] == 0
    assert row["mean_comparison"] > 1e5


def test_summary_degrades_to_nan_without_enough_recordings(rng):
    # Only one group, and a feature with a single comparison recording: NaN, no exception
    # and no warning (pytest turns warnings into errors for this project).
    one_group = _table({("alder", "control"): rng.standard_normal(5)}, feature="itpc_40", unit="1")
    single = _table({("alder", "control"): rng.standard_normal(4), ("alder", "comparison"): [0.3]},
                    feature="itpc_40_prestimulus", unit="1")
    summary = group_summary(pd.concat([one_group, single], ignore_index=True))
    assert len(summary) == 4  # two features x (alder, pooled)
    row = summary.loc[(summary["feature"] == "itpc_40") & (summary["scope"] == POOLED)].iloc[0]
    assert row["n_control"] == 5 and row["n_comparison"] == 0
    assert all(math.isnan(row[c]) for c in ("mean_comparison", "sd_comparison", "mean_low_comparison",
                                            "difference", "g", "g_se", "g_low", "g_high", "site_adjusted_g"))
    row = summary.loc[(summary["feature"] == "itpc_40_prestimulus") & (summary["scope"] == POOLED)].iloc[0]
    assert row["n_comparison"] == 1 and row["mean_comparison"] == 0.3
    assert math.isnan(row["mean_low_comparison"]) and math.isnan(row["g"])
    assert not math.isnan(row["difference"])


def test_nan_values_are_counted_as_missing(rng):
    table = _table({("alder", "control"): rng.standard_normal(6), ("alder", "comparison"): rng.standard_normal(6)})
    table.loc[0, "value"] = np.nan
    row = _row(group_summary(table), POOLED)
    assert row["n_control"] == 5 and row["n_missing"] == 1 and row["n_excluded"] == 0


def test_site_adjusted_g_removes_a_pure_site_offset(rng):
    # Within each site the groups differ by 0.5 with SD 1 (means and SDs exact by
    # construction); birch reads 5 units higher everywhere, and the group mix is
    # unbalanced (alder mostly controls, birch mostly comparisons), so the offset leaks
    # into the naive pooled contrast.
    base = {("alder", "control"): _standardised(rng, 60), ("alder", "comparison"): _standardised(rng, 15, 0.5),
            ("birch", "control"): _standardised(rng, 15), ("birch", "comparison"): _standardised(rng, 60, 0.5)}
    shifted = {cell: v + (5.0 if cell[0] == "birch" else 0.0) for cell, v in base.items()}
    summary = group_summary(_table(shifted))
    pooled = _row(summary, POOLED)
    # Worked by hand: after centring every cell has mean -0.25 (control) or +0.25
    # (comparison) and SD 1 (ddof=1), so each group's sum of squares is (60 - 1) + (15 - 1)
    # = 73; centring spent one df per site beyond the two group means, df = 150 - 1 - 2 =
    # 147, so d = 0.5 / sqrt(146 / 147) and g = d * (1 - 3 / (4 * 147 - 1)) (F23's J with
    # the df written out: 4 (n1 + n2) - 9 = 4 df - 1). Exact but for rounding.
    expected = 0.5 / math.sqrt(146 / 147) * (1 - 3 / (4 * 147 - 1))
    assert pooled["site_adjusted_g"] == pytest.approx(expected, abs=1e-9)
    # Close to the g of the same study without the offset: only the df differ (148 vs
    # 147), a relative change of about 1/300 on g ~ 0.5, so 0.005 is a margin.
    no_offset = _row(group_summary(_table(base)), POOLED)["g"]
    assert pooled["site_adjusted_g"] == pytest.approx(no_offset, abs=0.005)
    # The naive pooled g is far off (site offset mixed into the contrast), so the check bites.
    assert abs(pooled["g"] - pooled["site_adjusted_g"]) > 1.0
    # Centring on the plain site mean instead would let the group mix bias the estimate:
    # the centres sit 0.1 (alder) and 0.4 (birch) above the site's controls, unequal shifts
    # that leak into the contrast, and g drops to about 0.32 (fixed by construction, as the
    # cell means are exact; 0.1 is a margin).
    plain = []
    for site in ("alder", "birch"):
        centre = np.concatenate([shifted[site, "control"], shifted[site, "comparison"]]).mean()
        plain.append({g: shifted[site, g] - centre for g in ("control", "comparison")})
    plain_g = hedges_g(np.concatenate([p["comparison"] for p in plain]),
                       np.concatenate([p["control"] for p in plain]))[0]
    assert pooled["site_adjusted_g"] - plain_g > 0.1
    # In a single-site row centring is a constant shift: adjusted g equals g.
    for site in ("alder", "birch"):
        row = _row(summary, site)
        assert row["site_adjusted_g"] == pytest.approx(row["g"], abs=1e-9)


def test_site_adjusted_g_leaves_out_a_site_without_both_groups(rng):
    cells = {("alder", "control"): _standardised(rng, 20), ("alder", "comparison"): _standardised(rng, 20, 0.8),
             ("cedar", "control"): 40.0 + rng.standard_normal(7)}
    row = _row(group_summary(_table(cells)), POOLED)
    alder = hedges_g(cells["alder", "comparison"], cells["alder", "control"])[0]
    assert row["site_adjusted_g"] == pytest.approx(alder, abs=1e-9)
    assert row["n_control"] == 27  # the plain pooled numbers still use every recording


def test_site_adjusted_g_with_one_recording_per_cell(rng):
    # One recording per site and group: three sites leave df = 6 - 1 - 3 = 2, enough for a
    # number; two sites leave df = 1, too few, so NaN (never an exception or a warning).
    cells = {(site, group): [rng.standard_normal() + (0.7 if group == "comparison" else 0.0) + 3 * i]
             for i, site in enumerate(("alder", "birch", "cedar")) for group in ("control", "comparison")}
    three = _row(group_summary(_table(cells)), POOLED)
    diffs = np.array([cells[s, "comparison"][0] - cells[s, "control"][0] for s in ("alder", "birch", "cedar")])
    # Hand value: centred values are +/- diff_s / 2, so each group's sum of squares is
    # sum((diff_s - mean diff)^2) / 4 and d = mean(diff) / sqrt(2 * that / 2).
    ss = ((diffs - diffs.mean()) ** 2).sum() / 4
    expected = diffs.mean() / math.sqrt(2 * ss / 2) * (1 - 3 / (4 * 2 - 1))
    assert three["site_adjusted_g"] == pytest.approx(expected, abs=EXACT)
    two = {cell: v for cell, v in cells.items() if cell[0] != "cedar"}
    assert math.isnan(_row(group_summary(_table(two)), POOLED)["site_adjusted_g"])


def test_round_trip_through_the_written_table(tmp_path, rng):
    # The table as outputs.write_group_outputs writes and reads it: empty flags come back as
    # "" and missing values as NaN ("n/a" on disk).
    from heschl.outputs import write_group

    table = _table({("alder", "control"): rng.standard_normal(5), ("alder", "comparison"): rng.standard_normal(5)})
    table.loc[1, "value"] = np.nan
    table.loc[7, "flags"] = "12 deviant trials kept, fewer than the paradigm minimum of 30"
    folder = write_group(tmp_path, table, pd.DataFrame({"participant_id": []}))
    back = pd.read_csv(folder / "features.tsv", sep="\t", na_values=["n/a"], keep_default_na=False)
    row = _row(group_summary(back), POOLED)
    assert (row["n_control"], row["n_comparison"], row["n_missing"], row["n_excluded"]) == (4, 4, 1, 1)


def test_feature_sets_sharing_a_name_stay_apart(rng):
    first = _table({("alder", "control"): rng.standard_normal(4), ("alder", "comparison"): rng.standard_normal(4)})
    second = first.assign(value=first["value"] + 1.0)
    table = pd.concat([first.assign(feature_set="oddball-core"), second.assign(feature_set="oddball-extra")],
                      ignore_index=True)
    summary = group_summary(table)
    assert list(summary.columns[:4]) == ["paradigm", "feature_set", "feature", "unit"]
    assert len(summary) == 4


def test_empty_table_gives_empty_summary():
    summary = group_summary(pd.DataFrame())
    assert summary.empty and "site_adjusted_g" in summary.columns


# -- errors: one sentence shape ------------------------------------------------------------


def test_groups_and_reference_are_checked(rng):
    table = _table({("alder", "control"): rng.standard_normal(3)})
    with pytest.raises(DefinitionError, match=r"group_summary: reference: reference = 'contrl' is not one of "
                                              r"groups .* \(did you mean \"control\"\?\); choose"):
        group_summary(table, reference="contrl")
    with pytest.raises(DefinitionError, match=r"group_summary: groups: groups = \('control',\) is not two"):
        group_summary(table, groups=("control",))


def test_missing_columns_are_named(rng):
    table = _table({("alder", "control"): rng.standard_normal(3)}).drop(columns=["unit", "site"])
    with pytest.raises(InputDataError, match=r"group_summary: table: the table has no column\(s\) site, unit; pass"):
        group_summary(table)


def test_repeated_recording_is_refused(rng):
    table = _table({("alder", "control"): rng.standard_normal(3)})
    table = pd.concat([table, table.iloc[[0]]], ignore_index=True)
    with pytest.raises(InputDataError, match=r"group_summary: table: 2 rows repeat a recording and feature, "
                                             r"e\.g\. sub-Acon0000 at site alder"):
        group_summary(table)


def test_site_named_pooled_is_refused(rng):
    table = _table({("pooled", "control"): rng.standard_normal(3)})
    with pytest.raises(InputDataError, match=r'group_summary: site: a site is labelled "pooled"'):
        group_summary(table)


def test_cohort_split_half_from_odd_and_even_halves():
    # docs/REFERENCES.md F31 (Clayson & Miller 2017; Lord & Novick 1968): true-score SD 1, trial
    # noise SD 8, 100 trials -> reliability of the mean 0.6098; the Spearman-Brown-corrected
    # odd/even correlation over 1000 simulated recordings lands within 0.08 of it.
    rng = np.random.default_rng(11)
    true = rng.normal(0, 1, 1000)
    trials = true[:, None] + rng.normal(0, 8, (1000, 100))
    table = pd.DataFrame({"participant_id": [f"sub-{i}" for i in range(1000)], "site": "alder",
                          "group": np.where(np.arange(1000) % 2, "control", "comparison"), "paradigm": "p",
                          "feature": "f", "unit": "uV", "value": trials.mean(1),
                          "half_odd": trials[:, 0::2].mean(1), "half_even": trials[:, 1::2].mean(1), "flags": ""})
    summary = group_summary(table)
    assert abs(summary.set_index("scope").loc["pooled", "split_half"] - 0.6098) < 0.08
