"""The study page's data (heschl.qc.study) and the page itself (heschl.pages.study).

The robust-range and stands-out rules are checked on hand-made values with the expected
marks worked out in the comments; the rest runs on the processed synthetic study, whose
truth.json names the site planted to stand out (docs/SCENARIO.md: Cedar's broken leads).
"""
import json
import math
import re
from html.parser import HTMLParser

import numpy as np
import pandas as pd
import pytest
import scipy.stats
import xarray as xr

from heschl.arrays import ARRAY_SUFFIXES
from heschl.inputs import discover
from heschl.outputs import recording_paths
from heschl.qc.study import (GRAND_CHANNELS, SITE_ALPHA, grand_averages, outside, qc_columns, robust_range,
                             robust_spread, stand_out, study_view)


# -- qc.tsv columns ------------------------------------------------------------------------


@pytest.fixture(scope="module")
def written(processed_study):
    """(study, recordings, features table, qc table, view) as the study page gets them."""
    study, _ = processed_study
    recordings = [r for r in discover(study) if recording_paths(study.output, r)["provenance"].is_file()]
    group = study.output / "group"
    table = pd.read_csv(group / "features.tsv", sep="\t", na_values=["n/a"], keep_default_na=False)
    qc_table = pd.read_csv(group / "qc.tsv", sep="\t", na_values=["n/a"], keep_default_na=False)
    return study, recordings, table, qc_table, study_view(study.output, recordings, table, qc_table)


def _qc(study, recording):
    return json.loads(recording_paths(study.output, recording)["qc"].read_text(encoding="utf-8"))


def test_qc_columns_of_a_written_qc_json(written):
    study, recordings, *_ = written
    low = next(r for r in recordings if r.participant_id == "sub-B02" and r.paradigm == "oddball")
    qc = _qc(study, low)
    columns = qc_columns(qc)
    deviant = qc["trials"]["deviant"]
    assert columns["kept_deviant"] == deviant["kept"] < deviant["minimum"]
    standard = qc["trials"]["standard"]
    skipped = standard["reasons"].get("skipped", 0)
    assert columns["dropped_standard"] == pytest.approx((standard["dropped"] - skipped) / (standard["planned"] - skipped))
    assert columns["channels_interpolated"] == len(qc["channels"]["interpolated"])
    assert columns["snr_deviant"] == pytest.approx(qc["snr"]["deviant"])
    assert columns["n_flags"] == len(qc["flags"])
    assert math.isnan(columns["blinks_kept"])  # Birch records no EOG
    cedar = next(r for r in recordings if r.site == "cedar" and r.paradigm == "oddball")
    # Cedar's blinks are corrected (ICA with its VEOG): blinks are meant to stay in the kept
    # trials, so they are not counted; the residual EOG correlation judges the correction.
    corrected = qc_columns(_qc(study, cedar))
    assert math.isnan(corrected["blinks_kept"]) and 0 <= corrected["eog_residual"] <= 1
    meg = next(r for r in recordings if r.site == "dogwood")
    assert {"snr_standard_mag", "snr_deviant_grad"} <= set(qc_columns(_qc(study, meg)))


def test_qc_columns_of_an_empty_record_are_nan_not_errors():
    columns = qc_columns({})
    assert columns["n_flags"] == 0
    assert all(math.isnan(columns[c]) for c in ("channels_interpolated", "line_ratio", "blinks_kept",
                                                 "eog_residual", "interpolated_fraction"))


def test_qc_table_carries_the_metric_columns(written):
    *_, qc_table, _ = written
    assert {"dropped_deviant", "kept_train", "channels_interpolated", "snr_train", "blinks_kept",
            "n_flags"} <= set(qc_table.columns)
    assert qc_table["channels_interpolated"].notna().all()


# -- robust ranges and the site rule on hand-made values ----------------------------------


def test_robust_spread_is_the_scaled_mad():
    # median 3, |x - 3| = 2, 1, 0, 1, 97 -> MAD 1 -> 1.4826 (the MAD scaled to a normal SD)
    median, spread, rule = robust_spread([1, 2, 3, 4, 100])
    assert (median, rule) == (3.0, "mad") and spread == pytest.approx(1.4826)
    np.testing.assert_array_equal(outside([1, 2, 3, 4, 100]), [False, False, False, False, True])


def test_a_zero_mad_falls_back_to_the_mean_absolute_deviation():
    # four zeros and 0.6: MAD 0, mean |x| = 0.12 -> spread 1.2533 * 0.12 = 0.1504, range +/- 0.451
    median, spread, rule = robust_spread([0, 0, 0, 0, 0.6])
    assert rule == "mean-ad" and spread == pytest.approx(1.2533 * 0.12)
    assert outside([0, 0, 0, 0, 0.6]).tolist() == [False] * 4 + [True]
    assert robust_range([2, 2, 2, 2]) == pytest.approx((1.7, 2.3))  # all equal: 5 % of the median
    assert robust_range([0, 0, 0, 0]) is None and not outside([0, 0, 0, 0]).any()
    assert robust_range([1, 2, 3]) is None  # fewer than four values


def test_a_shifted_site_stands_out_and_only_it():
    # Within-site residuals are all +/- 0.1: sd_w = sqrt(6 * 0.01 / 3) = 0.1414; study median
    # 10.15; c: (14.1 - 10.15) / (0.1414 * sqrt(1/2 + 1/4)) = 32 standard errors, both of its
    # recordings above every other; b: -0.15 / 0.1225 = -1.2.
    sites = ["a", "a", "b", "b", "c", "c"]
    judged = {e["site"]: e for e in stand_out(sites, [10.0, 10.2, 10.1, 9.9, 14.0, 14.2])}
    assert judged["c"]["stands_out"] == "higher" and judged["c"]["t"] == pytest.approx(32.2, abs=0.1)
    assert judged["a"]["stands_out"] is None and judged["b"]["stands_out"] is None
    # The limit is Student's t at N - S = 3 degrees of freedom (scipy.stats as the reference).
    assert judged["c"]["critical"] == pytest.approx(scipy.stats.t.ppf(1 - SITE_ALPHA / 2, 3))
    assert judged["c"]["critical"] == pytest.approx(5.84, abs=0.01)
    lower = {e["site"]: e["stands_out"] for e in stand_out(sites, [10.0, 10.2, 10.1, 9.9, 6.0, 6.2])}
    assert lower == {"a": None, "b": None, "c": "lower"}


def test_one_wild_recording_does_not_make_its_site_stand_out():
    # c = {10.0, 30.0}: sd_w grows to 8.2 and only one of c's two recordings lies beyond the
    # others, so the site is not marked; the recording is (median 10.05, MAD 0.1).
    sites = ["a", "a", "b", "b", "c", "c"]
    values = [10.0, 10.2, 10.1, 9.9, 10.0, 30.0]
    assert all(e["stands_out"] is None for e in stand_out(sites, values))
    assert outside(values).tolist() == [False] * 5 + [True]


def test_a_small_difference_between_tight_values_is_not_a_site_difference():
    # Kept trains 45/46 against 43/44 and 43/43 of 50: 4.0 standard errors, under the limit 5.84.
    judged = stand_out(["a", "a", "b", "b", "c", "c"], [45, 46, 43, 44, 43, 43])
    assert all(e["stands_out"] is None for e in judged)
    assert max(abs(e["t"]) for e in judged) == pytest.approx(4.0, abs=0.01)


def test_too_few_recordings_are_not_judged():
    judged = {e["site"]: e for e in stand_out(["a", "b", "b", "c", "c"], [50.0, 1.0, 1.1, 1.2, 1.0])}
    assert not judged["a"]["judged"]  # one recording only
    assert not any(e["judged"] for e in stand_out(["a", "a", "b", "b"], [1, 2, 9, 9]))  # one other site


# -- the processed study -------------------------------------------------------------------


def test_the_planted_site_is_the_one_the_view_marks(written):
    study, recordings, table, qc_table, view = written
    planted = json.loads((study.root / "truth.json").read_text(encoding="utf-8"))["site_difference"]
    assert planted["applied"] and planted["site"] == "cedar"
    marks = view["standing_out"]
    assert {m["site"] for m in marks} == {planted["site"]}, [m["why"] for m in marks]
    # Cedar's broken leads show in the channel count of every EEG paradigm.
    by_paradigm = {m["paradigm"] for m in marks if m["name"] == "channels_interpolated" and m["direction"] == "higher"}
    assert by_paradigm == {"oddball", "clicktrain", "rest"}
    assert all("cedar stands out on channels interpolated" in m["why"] for m in marks
               if m["name"] == "channels_interpolated")


def test_the_study_page_marks_the_planted_site(written):
    study, *_ = written
    page = (study.output / "group" / "review.html").read_text(encoding="utf-8")
    box = page[page.index('id="stands-out"'):]
    box = box[:box.index("</div>")]
    assert re.search(r'data-site="cedar" data-metric="channels_interpolated"', box)
    assert "cedar stands out on channels interpolated" in box
    assert page.index('id="stands-out"') < page.index('id="recordings"')  # above the table
    assert page.index('id="sites"') < page.index('id="recordings-table"')


class _Rows(HTMLParser):
    """Collects the rows of the recordings table."""

    def __init__(self):
        super().__init__()
        self.inside, self.rows = False, []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "table" and attrs.get("id") == "recordings-table":
            self.inside = True
        elif self.inside and tag == "tr" and "data-participant" in attrs:
            self.rows.append((attrs["data-participant"], attrs["data-paradigm"]))

    def handle_endtag(self, tag):
        if tag == "table":
            self.inside = False


def test_the_sortable_table_lists_every_recording(written):
    study, recordings, *_ = written
    page = (study.output / "group" / "review.html").read_text(encoding="utf-8")
    parser = _Rows()
    parser.feed(page)
    assert sorted(parser.rows) == sorted((r.participant_id, r.paradigm) for r in recordings)
    assert 'class="sortable recordings"' in page and 'addEventListener("click", sort)' in page
    assert "<script src" not in page and "<link" not in page  # inline only


def test_grand_averages_equal_a_direct_mean_of_the_arrays(written):
    study, recordings, _, qc_table, view = written
    grand = grand_averages(study.output, recordings, qc_table)
    assert set(grand) == {"oddball", "clicktrain", "rest"}
    left_out = {(l["participant_id"], p) for p, g in grand.items() for l in g["left_out"]}
    for paradigm, name, variable, signal, factor in (("oddball", "waveforms", "average", "mismatch", 1e6),
                                                     ("clicktrain", "itpc", "itpc", "train", 1.0),
                                                     ("rest", "spectra", "psd", "eyes-closed", 1e12)):
        design = grand[paradigm]["design"]
        for site in ("alder", "cedar"):
            members = [r for r in recordings if r.paradigm == paradigm and r.site == site
                       and (r.participant_id, paradigm) not in left_out]
            if not members:
                continue
            courses = []
            for r in members:
                path = recording_paths(study.output, r)["features"].parent / f"{r.stem}_desc-{name}_{ARRAY_SUFFIXES[name]}.nc"
                with xr.open_dataset(path, engine="h5netcdf") as ds:
                    courses.append(ds[variable].sel(signal=signal, channel=list(GRAND_CHANNELS[design]))
                                   .mean("channel").values)
            expected = np.mean(courses, axis=0) * factor
            entry = next(e for e in grand[paradigm]["by_site"] if e["site"] == site and e["signal"] == signal)
            assert entry["n"] == len(members)
            np.testing.assert_allclose(entry["mean"], expected, rtol=1e-10)
    # The view carries the same averages, and the MEG recording is left out with its reason.
    assert view["paradigms"][0]["grand"]["by_site"] == grand[view["paradigms"][0]["paradigm"]]["by_site"]
    assert any(l["site"] == "dogwood" and "no channel" in l["why"] for l in grand["oddball"]["left_out"])
