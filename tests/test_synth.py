"""Tests of the synthetic multi-site study (heschl.synth).

Files are read back with mne's own readers only, never with heschl's pipeline, so the
generator and the pipeline stay independent. Most tests shorten the recordings (see the
``short`` fixture); the ones that check marker counts and timing use the real ``test``
size of a single recording.
"""
from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from pathlib import Path

import edfio
import mne
import numpy as np
import pytest
import scipy.signal
import scipy.special

from heschl import synth
from heschl.synth import COMMON_CHANNELS, MEG_SITES, SITES, make_study, write_recording
from heschl.synth import brain, events
from heschl.synth.sites import CHANNELS_32, CHANNELS_64

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

SEED = 1234
REGION = ["Fz", "FC1", "FC2", "FCz", "Cz"]
BIRCH_NAMES = {"T7": "T3", "T8": "T4", "P7": "T5", "P8": "T6"}


@pytest.fixture
def short(monkeypatch):
    """Shorten every paradigm so whole studies are written in about a second."""
    monkeypatch.setitem(events.DURATIONS["oddball"], "test", 30)
    monkeypatch.setitem(events.DURATIONS["clicktrain"], "test", 10)
    monkeypatch.setitem(events.DURATIONS["rest"], "test", 8)


def _read(path):
    """Read any of the three formats with mne, preloaded."""
    path = Path(path)
    if path.suffix == ".vhdr":
        return mne.io.read_raw_brainvision(path, preload=True, verbose=False)
    if path.suffix == ".edf":
        return mne.io.read_raw_edf(path, preload=True, verbose=False)
    return mne.io.read_raw_fif(path, preload=True, verbose=False)


def _write(folder, site, paradigm, *, subject="S01", group="control", seed=SEED,
           artefacts=True):
    """Write one test-size recording; return (truth, path of the file to open)."""
    truth = write_recording(folder, site=site, paradigm=paradigm, subject=subject,
                            group=group, seed=seed, size="test", artefacts=artefacts)
    return truth, Path(folder) / truth["files"][0]


def _digest(folder):
    """sha256 of every file in a folder, by name."""
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(Path(folder).iterdir())}


def _all_onsets(truth):
    """Every true stimulus onset of a recording, sorted, s."""
    return np.sort(np.concatenate([np.asarray(v) for v in truth["events_s"].values()]))


# --- public API and tables -----------------------------------------------------------


def test_public_names():
    assert synth.__all__ == ["make_study", "write_recording", "SITES", "MEG_SITES",
                             "COMMON_CHANNELS"]
    assert SITES == ("alder", "birch", "cedar")
    assert MEG_SITES == ("dogwood",)
    assert len(COMMON_CHANNELS) == len(set(COMMON_CHANNELS)) == 33
    assert COMMON_CHANNELS[:32] == CHANNELS_32 and COMMON_CHANNELS[32] == "FCz"
    assert len(CHANNELS_64) == len(set(CHANNELS_64)) == 64
    assert set(COMMON_CHANNELS) <= set(CHANNELS_64)


# Modules of heschl the generator may load; everything else (the stages, pipeline, QC,
# inputs, arrays, group, report, batch, ...) would let it share a table with the code it
# tests. heschl.synth uses none of the four today; they are stdlib/numpy-only helpers.
SYNTH_MAY_LOAD = {"heschl", "heschl.errors", "heschl.sensors", "heschl.vocabulary",
                  "heschl.numeric"}
PIPELINE_STAGES = ("heschl.harmonise", "heschl.clean", "heschl.linenoise", "heschl.ocular",
                   "heschl.adaptive", "heschl.segment", "heschl.features",
                   "heschl.pipeline", "heschl.qc", "heschl.inputs", "heschl.arrays",
                   "heschl.group", "heschl.pages", "heschl.batch", "heschl.stages")


def _heschl_modules_after_import(module):
    """Names of the heschl modules loaded by importing `module` in a fresh interpreter."""
    code = (f"import json, sys; import {module}; "
            "print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] == 'heschl')))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=False)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("module", ["heschl.synth"] + [
    f"heschl.synth.{p.stem}" for p in sorted(Path(synth.__file__).parent.glob("*.py"))
    if p.stem != "__init__"])
def test_synth_never_imports_the_pipeline(module):
    # A shared table would make recovery tests blind to errors in it. Inspecting
    # sys.modules catches every import form (from heschl import x, relative, lazy at
    # import time, importlib).
    loaded = _heschl_modules_after_import(module)
    stages = [m for m in loaded
              if any(m == s or m.startswith(s + ".") for s in PIPELINE_STAGES)]
    assert not stages, f"{module} loads pipeline stages: {stages}"
    outside = [m for m in loaded if m not in SYNTH_MAY_LOAD
               and not (m == "heschl.synth" or m.startswith("heschl.synth."))]
    assert not outside, f"{module} loads heschl modules outside synth: {outside}"


@pytest.mark.parametrize("argument, value, match", [
    ("site", "oak", "site: 'oak' is not known; choose one of 'alder'"),
    ("paradigm", "mmn", "paradigm: 'mmn' is not known"),
    ("group", "patients", "group: 'patients' is not known"),
    ("size", "huge", "size: 'huge' is not known"),
])
def test_bad_arguments_are_named(tmp_path, argument, value, match):
    kwargs = dict(site="alder", paradigm="rest", subject="S01", group="control",
                  seed=SEED, size="test")
    kwargs[argument] = value
    with pytest.raises(ValueError, match=match):
        write_recording(tmp_path, **kwargs)


def test_negative_seed_is_refused(tmp_path):
    with pytest.raises(ValueError, match="seed: -1 is negative"):
        write_recording(tmp_path, site="alder", paradigm="rest", subject="S01",
                        group="control", seed=-1, size="test")


# --- determinism ---------------------------------------------------------------------


@pytest.mark.parametrize("site", SITES)
def test_same_seed_gives_identical_bytes(tmp_path, short, site):
    for name in ("a", "b"):
        _write(tmp_path / name, site, "clicktrain")
    _write(tmp_path / "c", site, "clicktrain", seed=SEED + 1)
    assert _digest(tmp_path / "a") == _digest(tmp_path / "b")
    data_files = [n for n in _digest(tmp_path / "a") if not n.endswith((".vhdr", ".vmrk"))]
    for name in data_files:
        assert _digest(tmp_path / "a")[name] != _digest(tmp_path / "c")[name]


def test_subject_parameters_are_shared_across_paradigms(tmp_path, short):
    truths = [_write(tmp_path / p, "cedar", p)[0] for p in ("oddball", "rest")]
    assert truths[0]["params"] == truths[1]["params"]


# --- each site's files, read back with mne -------------------------------------------


def test_alder_brainvision_reads_back(tmp_path):
    truth, path = _write(tmp_path, "alder", "oddball")
    assert [Path(f).suffix for f in truth["files"]] == [".vhdr", ".vmrk", ".eeg"]
    raw = _read(path)
    assert raw.info["sfreq"] == 500.0
    assert raw.ch_names == list(CHANNELS_32) == truth["channel_names_in_file"]
    assert "FCz" not in raw.ch_names  # the reference is not stored
    header = path.read_text(encoding="utf-8")
    assert header.count(",FCz,1,µV") == 32  # resolution 1 µV per unit, float32 samples
    # Stored in µV, read as V: scalp EEG is tens of µV.
    assert 3e-6 < np.median(np.std(raw.get_data(), axis=1)) < 3e-4
    counts = {d: int(np.sum(raw.annotations.description == d))
              for d in set(raw.annotations.description)}
    assert counts == {"Stimulus/standard": len(truth["events_s"]["standard"]),
                      "Stimulus/deviant": len(truth["events_s"]["deviant"])}
    # Onsets lie on a 2 ms grid, exactly on 500 Hz samples.
    np.testing.assert_allclose(raw.annotations.onset, _all_onsets(truth), atol=1e-9)


def test_birch_edf_reads_back_with_late_markers(tmp_path):
    truth, path = _write(tmp_path, "birch", "oddball")
    raw = _read(path)
    assert raw.info["sfreq"] == 512.0
    assert len(raw.ch_names) == 64
    assert raw.ch_names == truth["channel_names_in_file"]
    for new, old in BIRCH_NAMES.items():
        assert old in raw.ch_names and new not in raw.ch_names
    assert {"FP1", "FZ", "FCZ", "CZ", "POZ", "TP9"} <= set(raw.ch_names)
    assert {s.physical_dimension for s in edfio.read_edf(path).signals} == {"uV"}
    assert 3e-6 < np.median(np.std(raw.get_data(), axis=1)) < 3e-4
    descriptions = raw.annotations.description
    assert np.sum(descriptions == "11") == len(truth["events_s"]["standard"])
    assert np.sum(descriptions == "12") == len(truth["events_s"]["deviant"])
    # Every marker is 18 ms late; tolerance one sample at 512 Hz (the stored text is
    # in fact exact to 1 µs).
    delay = raw.annotations.onset - _all_onsets(truth)
    np.testing.assert_allclose(delay, 0.018, atol=1 / 512)
    assert truth["trigger_delay_ms"] == 18.0


def test_cedar_fif_reads_back(tmp_path):
    truth, path = _write(tmp_path, "cedar", "oddball")
    assert path.name.endswith("_raw.fif")
    raw = _read(path)
    assert raw.info["sfreq"] == 1000.0
    assert raw.ch_names == list(CHANNELS_64) + ["HEOG", "VEOG", "STI 014"]
    assert raw.get_channel_types() == ["eeg"] * 64 + ["eog", "eog", "stim"]
    assert raw.info["line_freq"] == 50.0
    assert 3e-6 < np.median(np.std(raw.get_data(picks="eeg"), axis=1)) < 3e-4
    # Average reference at recording: the 64 EEG channels sum to zero, except where a
    # bad channel was corrupted after referencing.
    bad = [b["channel"] for b in truth["bad_channels"]]
    good = raw.copy().pick("eeg").drop_channels(bad).get_data()
    assert np.median(np.abs(good.mean(axis=0))) < 0.2 * np.median(np.abs(good))
    found = mne.find_events(raw, stim_channel="STI 014", verbose=False)
    assert np.sum(found[:, 2] == 1) == len(truth["events_s"]["standard"])
    assert np.sum(found[:, 2] == 2) == len(truth["events_s"]["deviant"])
    np.testing.assert_allclose(found[:, 0] / 1000.0, _all_onsets(truth), atol=1e-9)


@pytest.mark.parametrize("site, expected", [
    ("alder", {"clicktrain": {"Stimulus/train"},
               "rest": {"Stimulus/eyes-open", "Stimulus/eyes-closed"}}),
    ("birch", {"clicktrain": {"21"}, "rest": {"31", "32"}}),
    ("cedar", {"clicktrain": {1}, "rest": {10, 20}}),
])
def test_clicktrain_and_rest_markers(tmp_path, short, site, expected):
    for paradigm, codes in expected.items():
        truth, path = _write(tmp_path / paradigm, site, paradigm)
        raw = _read(path)
        if site == "cedar":
            found = set(mne.find_events(raw, verbose=False)[:, 2].tolist())
        else:
            found = set(raw.annotations.description)
        assert found == codes
    assert len(truth["events_s"]["eyes-open"]) == len(truth["events_s"]["eyes-closed"]) == 1


def test_cedar_eog_sees_blinks(tmp_path, short):
    truth, path = _write(tmp_path, "cedar", "oddball")
    raw = _read(path)
    veog = raw.get_data(picks="VEOG")[0]
    peaks = (np.asarray(truth["blinks_s"]) * 1000).astype(int)
    assert peaks.size > 0
    # Blinks of 130-220 µV at Fp1 are larger still in the vertical EOG.
    assert np.all(np.abs(veog[peaks] - np.median(veog)) > 100e-6)


# --- the same brain, whoever stores it ------------------------------------------------


def _common_average(raw, site):
    """Common channels, 10-10 names, average reference over them, as an array (V)."""
    if site == "alder":
        raw = mne.add_reference_channels(raw, "FCz")
    names = {name.upper(): name for name in CHANNELS_64}
    names.update({old: new for new, old in BIRCH_NAMES.items()})
    raw.rename_channels(lambda name: names.get(name.upper(), name))
    data = raw.get_data(picks=list(COMMON_CHANNELS))
    return data - data.mean(axis=0)


def test_same_brain_through_every_site(tmp_path, short):
    # Resample to 250 Hz, then keep 1-30 Hz with one filter: line noise (50 or 60 Hz)
    # is the one site-dependent signal left once artefacts are off.
    sos = scipy.signal.butter(8, [1.0, 30.0], btype="bandpass", fs=250.0, output="sos")
    signals = {}
    for site in SITES:
        truth, path = _write(tmp_path / site, site, "rest", artefacts=False)
        data = _common_average(_read(path), site)
        up, down = {"alder": (1, 2), "birch": (125, 256), "cedar": (1, 4)}[site]
        data = scipy.signal.resample_poly(data, up, down, axis=1)
        signals[site] = scipy.signal.sosfiltfilt(sos, data, axis=1)[:, 250:-250]
    reference = signals["cedar"]
    for site in ("alder", "birch"):
        difference = np.sqrt(np.mean((signals[site] - reference) ** 2))
        # Birch's 16-bit samples (0.05 µV steps) and the resamplers differ a little.
        assert difference < 0.01 * np.sqrt(np.mean(reference**2)), site


# --- artefact truth -------------------------------------------------------------------


def test_bad_channels_match_their_truth(tmp_path, short):
    seen = set()
    for number in range(1, 9):
        truth, path = _write(tmp_path / str(number), "birch", "rest",
                             subject=f"S{number:02d}")
        raw = _read(path)
        data = raw.get_data()
        sos = scipy.signal.butter(4, 1.0, btype="highpass", fs=512.0, output="sos")
        filtered = scipy.signal.sosfiltfilt(sos, data, axis=1)
        # Robust spread (median absolute deviation): the saturation must not count.
        deviation = np.abs(filtered - np.median(filtered, axis=1, keepdims=True))
        spreads = 1.4826 * np.median(deviation, axis=1)
        typical = np.median(spreads)
        for bad in truth["bad_channels"]:
            assert bad["standard_name"] in COMMON_CHANNELS
            assert bad["standard_name"] not in REGION
            expected_name = BIRCH_NAMES.get(bad["standard_name"], bad["standard_name"])
            assert bad["channel"] == expected_name.upper()
            row = raw.ch_names.index(bad["channel"])
            spread = spreads[row]
            if bad["kind"] == "flat":
                assert spread < 0.05 * typical
            elif bad["kind"] == "noisy":
                assert spread > 3 * typical
            else:
                assert np.max(np.abs(np.diff(data[row]))) > 50e-6
            seen.add(bad["kind"])
    assert seen == {"flat", "noisy", "popping"}


def test_cedar_broken_leads_are_bad_in_every_recording(tmp_path, short):
    # The planted site difference (docs/SCENARIO.md, "A site that stands out"): Cedar's worn
    # cap has the same broken leads in every recording, on top of the random bad channels.
    from heschl.synth.sites import SITE_DIFFERENCE

    leads = SITE_DIFFERENCE["channels"]
    assert SITE_DIFFERENCE["site"] == "cedar" and len(leads) == 5
    assert not set(leads) & set(REGION + ["P3", "Pz", "P4", "O1", "Oz", "O2", "TP9", "TP10", "Fp1", "Fp2"])
    for number, paradigm in ((1, "oddball"), (2, "rest")):
        truth, path = _write(tmp_path / str(number), "cedar", paradigm, subject=f"S{number:02d}")
        broken = {b["standard_name"]: b["kind"] for b in truth["bad_channels"] if b["cause"] == "broken-lead"}
        assert broken == leads
        # A random draw that falls on a broken lead is left to the broken lead.
        assert {b["cause"] for b in truth["bad_channels"]} <= {"random", "broken-lead"}
        raw = _read(path)
        sos = scipy.signal.butter(4, 1.0, btype="highpass", fs=1000.0, output="sos")
        filtered = scipy.signal.sosfiltfilt(sos, raw.get_data(picks="eeg"), axis=1)
        deviation = np.abs(filtered - np.median(filtered, axis=1, keepdims=True))
        spreads = dict(zip(raw.copy().pick("eeg").ch_names, 1.4826 * np.median(deviation, axis=1)))
        typical = np.median(list(spreads.values()))
        for name, kind in leads.items():
            assert spreads[name] < 0.05 * typical if kind == "flat" else spreads[name] > 3 * typical
    truth, _ = _write(tmp_path / "alder", "alder", "rest")
    assert {b["cause"] for b in truth["bad_channels"]} == {"random"}
    truth, _ = _write(tmp_path / "off", "cedar", "rest", artefacts=False)
    assert truth["bad_channels"] == []
    study = json.loads((make_study(tmp_path / "study", size="test", seed=SEED).parent / "truth.json").read_text())
    assert study["site_difference"] == dict(SITE_DIFFERENCE, applied=True)


def test_saturation_pins_every_channel_to_the_rail(tmp_path, short):
    truth, path = _write(tmp_path, "alder", "oddball")
    raw = _read(path)
    [(start, stop)] = truth["saturation_s"]
    first, last = int(np.ceil(start * 500)), int(stop * 500)
    window = raw.get_data()[:, first:last]
    np.testing.assert_allclose(np.abs(window), 1.5e-3, rtol=1e-6)


def test_artefacts_off_leaves_clean_truth(tmp_path, short):
    truth, _ = _write(tmp_path, "birch", "oddball", artefacts=False)
    assert truth["bad_channels"] == truth["blinks_s"] == truth["muscle_s"] == []
    assert truth["saturation_s"] == [] and truth["low_count_condition"] is None


# --- the whole study ------------------------------------------------------------------


def test_make_study_layout_and_truth(tmp_path, short):
    study_file = make_study(tmp_path / "study", size="test", seed=SEED)
    root = study_file.parent
    assert study_file.name == "study.toml"
    study = tomllib.loads(study_file.read_text(encoding="utf-8"))
    assert study["name"] == "Alder-Birch-Cedar auditory study (synthetic)"
    assert study["output"] == "derivatives/heschl"
    assert study["common_channels"] == list(COMMON_CHANNELS)
    assert [a["paradigm"] for a in study["analyses"]] == ["oddball", "clicktrain", "rest"]
    assert [a["feature_sets"] for a in study["analyses"]] == [
        ["oddball-core", "oddball-meg"], ["clicktrain-core"], ["rest-core"]]
    assert set(study["sites"]) == set(SITES + MEG_SITES)
    assert study["sites"]["dogwood"]["datatype"] == "meg"
    assert "recording_reference" not in study["sites"]["dogwood"]
    assert study["sites"]["birch"]["trigger_delay_ms"] == 18.0
    assert study["sites"]["birch"]["recording_reference"] == "linked-mastoids"
    assert study["sites"]["alder"]["recording_reference"] == "FCz"
    assert study["sites"]["cedar"]["eog_channels"] == ["HEOG", "VEOG"]
    assert study["sites"]["alder"]["markers"]["oddball"] == {
        "Stimulus/standard": "standard", "Stimulus/deviant": "deviant"}
    assert study["sites"]["cedar"]["markers"]["rest"] == {"10": "eyes-open",
                                                          "20": "eyes-closed"}

    truth = json.loads((root / "truth.json").read_text(encoding="utf-8"))
    assert truth["seed"] == SEED and truth["size"] == "test"
    # Three EEG sites with two subjects and three paradigms; Dogwood: D01, oddball.
    assert len(truth["recordings"]) == 3 * 2 * 3 + 1
    for site, spec in study["sites"].items():
        for paradigm, pattern in spec["files"].items():
            assert not Path(pattern).is_absolute()
            found = sorted(p.relative_to(root).as_posix() for p in root.glob(pattern))
            listed = sorted(r["files"][0] for r in truth["recordings"]
                            if r["site"] == site and r["paradigm"] == paradigm)
            assert found == listed and len(found) == (1 if site in MEG_SITES else 2)
    assert {r["modality"] for r in truth["recordings"] if r["site"] in SITES} == {"eeg"}
    assert [(r["participant_id"], r["paradigm"], r["modality"]) for r in truth["recordings"]
            if r["site"] == "dogwood"] == [("sub-D01", "oddball", "meg")]
    for record in truth["recordings"]:
        for name in record["files"]:
            assert (root / name).is_file()
    low = [(r["site"], r["participant_id"], r["paradigm"])
           for r in truth["recordings"] if r["low_count_condition"]]
    assert low == [("birch", "sub-B02", "oddball")]

    rows = (root / "participants.tsv").read_text(encoding="utf-8").splitlines()
    assert rows[0] == "participant_id\tsite\tgroup"
    assert rows[1:] == ["sub-A01\talder\tcontrol", "sub-A02\talder\tcomparison",
                        "sub-B01\tbirch\tcontrol", "sub-B02\tbirch\tcomparison",
                        "sub-C01\tcedar\tcontrol", "sub-C02\tcedar\tcomparison",
                        "sub-D01\tdogwood\tcontrol"]


def test_low_count_recording_spoils_most_deviants(tmp_path):
    truth, _ = _write(tmp_path, "birch", "oddball", subject="B02", group="comparison")
    assert truth["low_count_condition"] == "deviant"
    n_deviants = len(truth["events_s"]["deviant"])
    assert n_deviants - len(truth["spoiled_deviants_s"]) == 18 < 30
    assert set(truth["spoiled_deviants_s"]) <= set(truth["events_s"]["deviant"])


# --- the generator's own expected values ---------------------------------------------


def test_expected_mismatch_matches_the_gaussian_model():
    params = brain.draw_subject_params(np.random.default_rng(0), "control")
    expected = brain.expected_values("oddball", params)
    peak = params["mismatch_peak_uv_fz"] * expected["region_factor"]
    mu, sd = params["mismatch_latency_ms"] / 1e3, params["mismatch_sd_ms"] / 1e3
    area = sd * np.sqrt(2 * np.pi) * np.diff(scipy.special.ndtr(
        (np.array([0.10, 0.25]) - mu) / sd))[0]
    # Sampled mean at 1000 Hz vs the integral: equal to well under 1 %.
    assert expected["mismatch_mean_amplitude_uv"] == pytest.approx(peak * area / 0.15,
                                                                   rel=0.01)
    assert expected["mismatch_peak_amplitude_uv"] == pytest.approx(peak, rel=1e-3)
    assert expected["mismatch_peak_latency_ms"] == params["mismatch_latency_ms"]


def test_comparison_group_has_smaller_effects():
    rng = np.random.default_rng(5)
    control = [brain.draw_subject_params(rng, "control") for _ in range(50)]
    comparison = [brain.draw_subject_params(rng, "comparison") for _ in range(50)]
    ratio = (np.mean([p["mismatch_peak_uv_fz"] for p in comparison])
             / np.mean([p["mismatch_peak_uv_fz"] for p in control]))
    assert ratio == pytest.approx(0.6, abs=0.03)
    assert max(p["assr_itpc"] for p in comparison) < min(p["assr_itpc"] for p in control)
    for p in control + comparison:
        assert brain.itpc_from_kappa(p["assr_kappa"]) == pytest.approx(p["assr_itpc"])


def test_noise_free_mismatch_is_recovered_from_the_file(tmp_path, monkeypatch):
    # Background and rhythms almost off, no artefacts: the stored data must give back
    # the expected mean amplitude (average reference over the common channels,
    # 0.10-0.25 s).
    monkeypatch.setattr(brain, "_BACKGROUND_UV", 1e-3)
    monkeypatch.setattr(brain, "_narrowband_noise",
                        lambda rng, n_times, *args: np.zeros(n_times))
    truth, path = _write(tmp_path, "birch", "oddball", artefacts=False)
    raw = _read(path)
    data = _common_average(raw, "birch")[[COMMON_CHANNELS.index(c) for c in REGION]]
    data = scipy.signal.sosfiltfilt(
        scipy.signal.butter(4, 30.0, fs=512.0, output="sos"), data.mean(axis=0))
    times = np.arange(-0.1, 0.5, 1 / 512)

    def average(onsets):
        # Markers are 18 ms late: undo it, as the study file tells the pipeline to.
        samples = np.round((np.asarray(onsets)[:, None] + times) * 512).astype(int)
        epochs = data[samples]
        return (epochs - epochs[:, times < 0].mean(axis=1, keepdims=True)).mean(axis=0)

    annotations = raw.annotations
    onsets = {code: annotations.onset[annotations.description == code] - 0.018
              for code in ("11", "12")}
    difference = (average(onsets["12"]) - average(onsets["11"])) * 1e6
    window = (times >= 0.10) & (times <= 0.25)
    expected = truth["expected"]["mismatch_mean_amplitude_uv"]
    assert difference[window].mean() == pytest.approx(expected, abs=0.05)  # µV
