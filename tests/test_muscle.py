"""Muscle bursts (heschl.muscle): the band, the score, and bursts of both generators found."""
from __future__ import annotations

import json

import mne
import numpy as np
import pytest
from scipy import stats

import gen2
from heschl.cli import main
from heschl.config.model import MUSCLE_Z
from heschl.muscle import _stretches, find_muscle, focal_count, muscle_band, muscle_courses, overlapping, robust_z


def test_band_is_mnes_default_where_the_rate_allows():
    # Source: mne.preprocessing.annotate_muscle_zscore documentation, filter_freq default
    # (110, 140) Hz (mne as a reference library). Below 300 Hz the top of what is left.
    assert muscle_band(1000.0) == (110.0, 140.0)
    assert muscle_band(300.0) == (110.0, 140.0)
    assert muscle_band(250.0) == pytest.approx((68.75, 112.5))


def test_robust_z_gives_normal_data_unit_spread():
    # Source: Leys et al. 2013 (docs/REFERENCES.md F41): 1.4826 = 1 / Phi^-1(0.75), computed
    # with scipy here, makes the MAD a consistent estimate of a normal standard deviation.
    assert 1.0 / stats.norm.ppf(0.75) == pytest.approx(1.4826, abs=1e-4)
    x = np.random.default_rng(0).normal(3.0, 2.5, 100_000)
    z = robust_z(x)
    # abs 0.02: the SE of a median and of an SD of 100 000 normal values are about 0.004
    # and 0.0022 (sqrt(pi / 2n) and 1 / sqrt(2n), textbook); 0.02 is 5-9 SE.
    assert np.median(z) == pytest.approx(0.0, abs=0.02) and z.std() == pytest.approx(1.0, abs=0.02)


def test_stretches_close_short_gaps_and_overlap_is_symmetric():
    mask = np.zeros(100, dtype=bool)
    mask[10:20] = mask[22:30] = mask[60:70] = True
    # At 10 samples/s a 0.2 s gap closes (20 -> 22), a 3 s gap does not.
    assert _stretches(mask, 10.0, 0.3) == [[1.0, 3.0], [6.0, 7.0]]
    assert _stretches(mask, 10.0, 0.1) == [[1.0, 2.0], [2.2, 3.0], [6.0, 7.0]]
    assert overlapping(0.9, (-0.1, 0.5), [[1.0, 3.0]]) == (1.0, 3.0)
    assert overlapping(0.4, (-0.1, 0.5), [[1.0, 3.0]]) is None
    assert focal_count(32) == 2 and focal_count(64) == 4 and focal_count(128) == 8


def _raw(n_channels=32, sfreq=250.0, seconds=60.0, seed=1):
    names = gen2.cap_names(n_channels)
    info = mne.create_info(names, sfreq, "eeg")
    rng = np.random.default_rng(seed)
    x = rng.normal(scale=5e-6, size=(n_channels, int(seconds * sfreq)))
    return mne.io.RawArray(x, info, verbose="error"), names


def test_a_focal_burst_is_found_and_a_popping_bad_channel_is_not():
    raw, names = _raw()
    sfreq = raw.info["sfreq"]
    t = raw.times
    rng = np.random.default_rng(2)
    burst = (t > 20.0) & (t < 20.6)
    hf = mne.filter.filter_data(rng.normal(size=len(t)), sfreq, 60.0, 110.0, verbose="error")
    x = raw.get_data()
    for name, gain in (("T7", 1.0), ("TP9", 0.6), ("FC5", 0.5)):
        x[names.index(name), burst] += 40e-6 * gain * hf[burst] / hf[burst].std()
    # A lead that pops every few seconds: steps have broadband high-frequency power.
    pop = names.index("Pz")
    for onset in np.arange(5.0, 55.0, 7.0):
        x[pop, t > onset] += 60e-6 * np.exp(-(t[t > onset] - onset) / 0.2)
    x[names.index("Cz")] = 0.0  # a restored reference of zeros has no variance to z-score by
    raw = mne.io.RawArray(x, raw.info, verbose="error")
    courses = muscle_courses(raw)
    assert "Cz" not in courses["names"]
    record = find_muscle(courses, MUSCLE_Z, exclude={"Pz": "noisy"})
    assert len(record["stretches_s"]) == 1
    a, b = record["stretches_s"][0]
    # The 0.6 s burst, widened by the 4 Hz low-pass only: mne's default FIR for a 4 Hz
    # cut-off has a 1 Hz transition band, i.e. a kernel of 3.3 / 1 Hz = 3.3 s whose main
    # lobe spreads an edge by about 1 / (2 x 1 Hz) = 0.5 s each side (mne filter design,
    # from memory), so at most 0.6 + 2 x 0.5 = 1.6 s.
    assert a < 20.6 and b > 20.0 and b - a < 1.6
    assert json.loads(json.dumps(record)) == record


def test_gaussian_background_marks_nothing():
    raw, _ = _raw(n_channels=64, seed=3)
    record = find_muscle(muscle_courses(raw), MUSCLE_Z)
    assert record["stretches_s"] == [] and record["channels_used"] == 64


def test_gen2_bursts_drop_their_trials_with_reason_muscle(tmp_path):
    # Recovery on the independent generator: every planted burst overlapping a trial
    # drops it with the reason "muscle", counted per condition in qc.json.
    study = gen2.make_study(tmp_path, n_channels=32, sfreq=1000.0, subjects=1, paradigms=("oddball",), seed=11,
                            artefacts={"muscle": True, "blink": True})
    assert main(["-q", "run", str(study)]) == 0
    truth = json.loads((tmp_path / "truth.json").read_text())
    (rel, rec), = truth["recordings"].items()
    bursts = [(m["onset_s"], m["onset_s"] + m["duration_s"]) for m in rec["artefacts"]["muscle"]]
    assert bursts
    out = tmp_path / "derivatives" / "heschl" / "sub-G01" / "eeg"
    prov = json.loads((out / "sub-G01_task-oddball_provenance.json").read_text())
    stretches = prov["steps"]["clean"]["muscle"]["stretches_s"]
    assert all(any(x < b and y > a for x, y in stretches) for a, b in bursts)
    assert all(any(x < b + 1.0 and y > a - 1.0 for a, b in bursts) for x, y in stretches)
    log = prov["steps"]["trial_log"]
    hit = [e for e in log if e.get("reason", "") and e["reason"].startswith("muscle")]
    assert hit and all(any(e["onset_s"] - 0.1 < b and e["onset_s"] + 0.5 > a for a, b in bursts) for e in hit)
    qc = json.loads((out / "sub-G01_task-oddball_qc.json").read_text())
    assert sum(c["reasons"].get("muscle", 0) for c in qc["trials"].values()) == len(hit)
