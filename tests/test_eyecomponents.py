"""Ocular ICA components found by their properties (heschl.eyecomponents), without an EOG.

Sources of the checks: the 10-10 / 10-05 electrode names (odd numbers over the left
hemisphere, even over the right, "z" on the midline; ACNS Guideline 5, 2006, and the 10-05
extension's "h" half positions, Oostenveld & Praamstra 2001, from memory; docs/REFERENCES.md
F16, F17 and F47); scipy's Welch estimate and the moment definition of excess kurtosis as
reference computations; the second, independent generator (tests/gen2) for blinks and
horizontal eye movements the limits must find.
"""
import json

import mne
import numpy as np
import pytest

from heschl.eyecomponents import (LIMITS, channel_groups, component_properties, mirror_pairs, ocular_kind,
                                  virtual_eog)
from heschl.ocular import OcularCorrection

gen2 = pytest.importorskip("gen2")  # tests/gen2, on the path through pytest's rootdir

NAMES = ["Fp1", "Fpz", "Fp2", "AF7", "AFz", "AF8", "AFp3h", "AFp4h", "AFF1h", "AFF2h", "F7", "Fz", "F8",
         "FT9", "FT10", "T7", "Cz", "O1", "O2", "EXG1"]


def test_mirror_pairs_follow_the_10_10_numbering():
    # Odd left, even right, same row letters and half-position flag; midline and unknown
    # names have no twin; T7 has none here (no T8).
    pairs = {(NAMES[a], NAMES[b]) for a, b in mirror_pairs(NAMES)}
    assert pairs == {("Fp1", "Fp2"), ("AF7", "AF8"), ("AFp3h", "AFp4h"), ("AFF1h", "AFF2h"), ("F7", "F8"),
                     ("FT9", "FT10"), ("O1", "O2")}


def test_channel_groups_pole_and_lateral_frontal():
    g = {k: {NAMES[i] for i in v} for k, v in channel_groups(NAMES).items()}
    # Frontal pole: rows Fp, AFp, AF (AFF lies between AF and F, behind the pole).
    assert g["pole"] == {"Fp1", "Fpz", "Fp2", "AF7", "AFz", "AF8", "AFp3h", "AFp4h"}
    assert g["left"] == {"AF7", "F7", "FT9"} and g["right"] == {"AF8", "F8", "FT10"}


def _props(pattern, course, names=NAMES, sfreq=250.0):
    pattern = np.asarray(pattern, float)[:, None]
    data = pattern * course[None, :]
    return component_properties(pattern, course[None, :], names, sfreq, data=data)[0]


def test_mirror_is_plus_one_for_symmetric_and_minus_one_for_antisymmetric_patterns():
    rng = np.random.default_rng(0)
    course = rng.standard_normal(5000)
    sym = np.array([1.0 if n[-1].isdigit() or n.endswith("h") else 0.5 for n in NAMES])
    assert _props(sym, course)["mirror"] == pytest.approx(1.0)
    anti = np.zeros(len(NAMES))
    for a, b in mirror_pairs(NAMES):
        anti[a], anti[b] = 1.0 + a, -(1.0 + a)
    assert _props(anti, course)["mirror"] == pytest.approx(-1.0)


def test_low_share_and_kurtosis_against_reference_computations():
    # A 2 Hz sine has all its power below 4 Hz, a 10 Hz sine none (Welch, 0.25 Hz bins,
    # Hann window: leakage is far below 1 %); excess kurtosis equals m4 / m2^2 - 3 computed
    # from the moments (Fisher's definition); a sine's is -1.5 (textbook value).
    t = np.arange(60 * 250) / 250.0
    pattern = np.ones(len(NAMES))
    slow, fast = _props(pattern, np.sin(2 * np.pi * 2 * t)), _props(pattern, np.sin(2 * np.pi * 10 * t))
    assert slow["low"] > 0.99 and fast["low"] < 0.01
    assert slow["kurtosis"] == pytest.approx(-1.5, abs=1e-3)
    spikes = np.zeros_like(t)
    spikes[::500] = 1.0
    c = spikes - spikes.mean()
    assert _props(pattern, spikes)["kurtosis"] == pytest.approx((c ** 4).mean() / (c ** 2).mean() ** 2 - 3)


def test_virtual_eog_correlation_survives_one_large_transient():
    # heschl's choice (CLIP_SD): a single transient 100x a blink on one frontal channel
    # must not hide the blinks from the virtual-EOG correlation.
    rng = np.random.default_rng(1)
    n, sfreq = 60 * 250, 250.0
    blinks = np.zeros(n)
    for i in rng.choice(n - 100, 20, replace=False):
        blinks[i:i + 60] += np.hanning(60)
    pole = np.array([i in channel_groups(NAMES)["pole"] for i in range(len(NAMES))], float)
    data = 100e-6 * pole[:, None] * blinks + 5e-6 * rng.standard_normal((len(NAMES), n))
    data[0, 3000:3050] += 10e-3
    veog, _ = virtual_eog(data, NAMES)
    props = component_properties(pole[:, None], blinks[None, :], NAMES, sfreq, data=data)[0]
    assert abs(np.corrcoef(blinks, veog)[0, 1]) < 0.4     # the plain correlation is lost
    assert props["veog"] > 0.8


def test_every_limit_is_needed_and_missing_channels_never_qualify():
    blink = {"frontal": 5.0, "lateral": 1.0, "mirror": 0.99, "veog": 0.9, "heog": 0.0, "low": 0.95,
             "kurtosis": 30.0}
    assert ocular_kind(blink) == "blink"
    for key in LIMITS["blink"]:
        side, value = LIMITS["blink"][key]
        worse = dict(blink, **{key: value - 0.01 if side == "min" else value + 0.01})
        assert ocular_kind(worse) is None, key
    assert ocular_kind(dict(blink, veog=float("nan"))) is None
    saccade = dict(blink, frontal=3.0, lateral=3.5, mirror=-0.98, veog=0.0, heog=0.8, low=0.9)
    assert ocular_kind(saccade) == "saccade"


@pytest.fixture(scope="module")
def gen2_recording(tmp_path_factory):
    """A 64-channel gen2 oddball with blinks and horizontal eye movements only, and its truth."""
    root = tmp_path_factory.mktemp("gen2-eyes")
    gen2.make_study(root, n_channels=64, subjects=1, paradigms=("oddball",), size="test", seed=21,
                    sfreq=250.0, artefacts={"blink": True, "saccade": True})
    (rel, truth), = json.loads((root / "truth.json").read_text(encoding="utf-8"))["recordings"].items()
    raw = mne.io.read_raw_fif(root / rel, preload=True, verbose="error")
    return raw, truth


def _courses(raw, truth):
    from gen2.artefacts import blink_course, saccade_course

    blink = blink_course(truth["artefacts"]["blinks"], raw.n_times, raw.info["sfreq"])
    move = saccade_course(truth["artefacts"]["saccades"], raw.times)
    return mne.filter.filter_data(np.vstack([blink, move]), raw.info["sfreq"], 1.0, None, verbose="error")


def _max_corr(raw, course):
    x = mne.filter.filter_data(raw.get_data(picks="eeg"), raw.info["sfreq"], 1.0, None, verbose="error")
    x = x - x.mean(axis=1, keepdims=True)
    c = course - course.mean()
    return float(np.max(np.abs(x @ c) / (np.linalg.norm(x, axis=1) * np.linalg.norm(c))))


def test_gen2_blinks_and_eye_movements_are_found_without_an_eog(gen2_recording):
    # The limits were chosen on gen2 recordings of other seeds; here a new one. Acceptance:
    # exactly one blink and one horizontal-movement component removed, and no EEG channel
    # correlating above 0.2 with either true course afterwards (the project's ocular
    # acceptance, as in tests/test_ocular.py).
    raw, truth = gen2_recording
    blink, move = _courses(raw, truth)
    assert _max_corr(raw, blink) > 0.8 and _max_corr(raw, move) > 0.5   # the artefacts are there
    est = OcularCorrection("ica").fit(raw)
    rec = est.record()["ica"]
    assert rec["selection"] == "properties" and len(rec["properties"]) == rec["n_components"]
    assert sorted(e["kind"] for e in rec["excluded"]) == ["blink", "saccade"]
    corrected = est.apply(raw)
    assert _max_corr(corrected, blink) < 0.2 and _max_corr(corrected, move) < 0.2
