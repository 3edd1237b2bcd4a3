"""A recording that is read but cannot be used still gets its page, with the evidence
that led there, and stays listed in the study's tables; only an unreadable file ends
without a page.

The recordings come from the second, independent generator (tests/gen2), so the broken
channels are planted by code that was not written with heschl's rules in view.
"""
import json

import pandas as pd
import pytest

from heschl.cli import main

gen2 = pytest.importorskip("gen2")  # tests/gen2, on the path through pytest's rootdir


@pytest.fixture(scope="module")
def half_broken(tmp_path_factory):
    """Two 32-channel oddballs: sub-G01 with half of its channels broken (10 flat, 6 noisy),
    sub-G02 intact; run through the command line as a user would."""
    root = tmp_path_factory.mktemp("half-broken")
    study = gen2.make_study(root, n_channels=32, sensor_noise=0.1, subjects=2, paradigms=("oddball",),
                            bad={"G01": ["flat"] * 10 + ["noisy"] * 6}, duration_s=60, seed=3)
    assert main(["-q", "run", str(study)]) == 1   # one recording unusable
    truth = json.loads((root / "truth.json").read_text(encoding="utf-8"))
    planted = {r["channel"] for rec in truth["recordings"].values() if rec["subject"] == "G01"
               for r in rec["bad_channels"]}
    return root / "derivatives" / "heschl", planted


def test_an_unusable_recording_gets_a_page_that_shows_why(half_broken):
    output, planted = half_broken
    folder = output / "sub-G01" / "eeg"
    qc = json.loads((folder / "sub-G01_task-oddball_qc.json").read_text(encoding="utf-8"))
    assert qc["verdict"] == "unusable"
    assert qc["unusable"]["stage"] == "clean"
    (reason,) = [f["message"] for f in qc["flags"]]
    assert "EEG channels are bad" in reason and "more than a quarter" in reason
    found = set(qc["channels"]["found_bad"])
    assert found and found <= planted  # what it found is what was planted, nothing else

    evidence = json.loads((folder / "sub-G01_task-oddball_evidence.json").read_text(encoding="utf-8"))
    stats = evidence["detector"]["eeg"]["channels"]
    assert len(stats) == 32 and set(evidence["detector"]["eeg"]["bad"]) == found
    assert evidence["spectra"]["types"]["eeg"]["before"]  # spectra as harmonised
    assert [c for c, s in zip(evidence["sensors"]["channels"], evidence["sensors"]["state"]) if s != "good"]

    page = (folder / "sub-G01_task-oddball_review.html").read_text(encoding="utf-8")
    head = page[:page.index('id="signoff"')]
    assert 'class="verdict unusable"' in head and "EEG channels are bad" in head  # first screenful
    for section in ('id="spectra"', 'id="sensors"', 'id="detector"', 'id="statistics"'):
        assert section in page
    for channel in found:
        assert f"<td>{channel}</td>" in page
    assert "Research software, not a medical device" in page
    # No features and no arrays are written for it, and nothing claims to be a measure.
    features = pd.read_csv(folder / "sub-G01_task-oddball_features.tsv", sep="\t")
    assert len(features) == 0
    assert not list(folder.glob("*.nc"))


def test_the_study_lists_the_unusable_recording(half_broken):
    output, _ = half_broken
    qc = pd.read_csv(output / "group" / "qc.tsv", sep="\t", na_values=["n/a"], keep_default_na=False)
    row = qc.loc[qc["participant_id"] == "sub-G01"].iloc[0]
    assert row["verdict"] == "unusable" and "EEG channels are bad" in row["flags"]
    features = pd.read_csv(output / "group" / "features.tsv", sep="\t")
    assert "sub-G01" not in set(features["participant_id"])
    page = (output / "group" / "review.html").read_text(encoding="utf-8")
    assert "sub-G01" in page and "sub-G01/eeg/sub-G01_task-oddball_review.html" in page


def test_an_unusable_recording_is_not_processed_again_when_nothing_changed(half_broken, tmp_path, capsys):
    output, _ = half_broken
    study = output.parent.parent / "study.toml"
    assert main(["run", str(study)]) == 1
    assert "2 already up to date" in capsys.readouterr().out


def test_a_recording_whose_rate_the_paradigm_cannot_meet_gets_a_page(tmp_path):
    # Harmonising stops (sampled below the analysis rate): the page shows the spectra as read.
    study = gen2.make_study(tmp_path, n_channels=32, subjects=1, paradigms=("oddball",), sfreq=200.0,
                            duration_s=30)
    assert main(["-q", "run", str(study)]) == 1   # one recording unusable
    folder = tmp_path / "derivatives" / "heschl" / "sub-G01" / "eeg"
    qc = json.loads((folder / "sub-G01_task-oddball_qc.json").read_text(encoding="utf-8"))
    assert qc["verdict"] == "unusable" and qc["unusable"]["stage"] == "harmonise"
    assert "below the paradigm" in qc["flags"][0]["message"]
    page = (folder / "sub-G01_task-oddball_review.html").read_text(encoding="utf-8")
    assert 'id="spectra"' in page and "stopped before the bad-channel detector" in page
