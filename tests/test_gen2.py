"""The second synthetic generator (tests/gen2) checked on its own, before anything uses it.

gen2 never imports heschl, so these checks use numpy, scipy and mne only: the planted
truth is in the file, the exponential background has the covariance its formula says,
the dipole patterns are mne's forward solution, and the schedules meet heschl's
paradigm definitions.
"""
from __future__ import annotations

import json

import mne
import numpy as np
import pytest

import gen2
from gen2.signals import background, von_mises_kappa
from gen2.spatial import FRONTOCENTRAL, MASTOIDS, _fixed, AUDITORY, _info, _sphere

QUIET = {"blink": False, "saccade": False, "muscle": False, "pop": False, "drift": False, "mains": False}


def _read(path):
    raw = mne.io.read_raw_fif(path, preload=True, verbose="error")
    return raw


@pytest.fixture(scope="module")
def planted(tmp_path_factory):
    """A 20 s, 32-channel exponential-model oddball with one bad channel of every kind."""
    path = tmp_path_factory.mktemp("gen2") / "sub-G01_task-oddball_raw.fif"
    truth = gen2.make_recording(path, paradigm="oddball", n_channels=32, sfreq=500.0, duration_s=20.0,
                                spatial="exponential", bad=5, seed=3)
    return _read(path), truth


def test_planted_truth_names_stored_channels_and_every_kind(planted):
    raw, truth = planted
    kinds = {r["kind"] for r in truth["bad_channels"]}
    assert kinds == set(gen2.BAD_KINDS)
    eeg = [raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=True)]
    assert eeg == truth["stored_channels"] and "Cz" not in eeg      # recorded against Cz
    assert all(r["channel"] in eeg for r in truth["bad_channels"])
    assert not {r["channel"] for r in truth["bad_channels"]} & (set(FRONTOCENTRAL) | set(MASTOIDS))
    json.dumps(truth)                                                # JSON-ready


def test_flat_channel_has_the_planted_variance(planted):
    raw, truth = planted
    flat = next(r for r in truth["bad_channels"] if r["kind"] == "flat")
    x = raw.get_data(picks="eeg") * 1e6
    i = truth["stored_channels"].index(flat["channel"])
    # White noise of 0.15 µV rms, 10000 samples: the sample SD is within 3 % (chi-square, 4 SE).
    assert np.std(x[i]) == pytest.approx(flat["noise_uv"], rel=0.03)
    others = np.delete(np.std(x, axis=1), i)
    assert np.min(others) > 20 * flat["noise_uv"]


def test_bridged_pair_shares_one_signal_and_noisy_channel_is_large(planted):
    raw, truth = planted
    x = mne.filter.filter_data(raw.get_data(picks="eeg"), 500.0, 1.0, 30.0, verbose="error")
    names = truth["stored_channels"]
    pair = [r["channel"] for r in truth["bad_channels"] if r["kind"] == "bridged"]
    assert np.corrcoef(x[names.index(pair[0])], x[names.index(pair[1])])[0, 1] > 0.99
    noisy = next(r for r in truth["bad_channels"] if r["kind"] == "noisy")
    rms = np.sqrt(np.mean(x ** 2, axis=1))
    assert rms[names.index(noisy["channel"])] > 2.5 * np.median(rms)


def test_stim_channel_holds_the_schedule(planted):
    raw, truth = planted
    events = mne.find_events(raw, stim_channel="STIM", shortest_event=1, verbose="error")
    codes = truth["events"]["codes"]
    assert np.allclose(events[:, 0] / raw.info["sfreq"], truth["events"]["onsets_s"], atol=1.0 / raw.info["sfreq"])
    assert [codes[lab] for lab in truth["events"]["labels"]] == list(events[:, 2])


@pytest.mark.parametrize("sensor_noise", [0.0, 0.3])
def test_exponential_background_has_the_formula_covariance(sensor_noise):
    """Correlation of the background equals (1 - s)(c exp(-d/6 cm) + (1 - c) I) + s I, checked with numpy."""
    names = gen2.cap_names(32)
    pos = gen2.positions(names)
    d = np.linalg.norm(pos[:, None] - pos[None], axis=-1)
    expected = (1 - sensor_noise) * (0.85 * np.exp(-d / 0.06) + 0.15 * np.eye(32)) + sensor_noise * np.eye(32)
    model = gen2.spatial_model(names, "exponential", coupling=0.85)
    sfreq, n = 200.0, 240_000
    x = background(np.random.default_rng(11), model.mixing, np.diag(model.cov), n, sfreq, 1.3, sensor_noise)
    # The same 1-30 Hz filter on every channel keeps the spatial covariance (the spectrum is
    # separable) and shortens the 1/f memory, so the sampling error is small.
    x = mne.filter.filter_data(x.astype(float), sfreq, 1.0, 30.0, verbose="error")
    got = np.corrcoef(x)
    # Sampling error only: measured over seeds it falls as 1/sqrt(n) with no bias (mean error
    # over pairs < 0.003); at 1200 s the largest of 496 pair errors is about 0.02-0.03.
    err = np.abs(got - expected)
    assert np.max(err) < 0.045 and np.mean(err) < 0.01


def test_background_scale_and_spectrum():
    """Unit rms in 1-30 Hz per series and a log-log slope of -a (Welch, scipy as the reference)."""
    from scipy.signal import welch

    z = gen2.signals.coloured_noise(np.random.default_rng(5), 8, 120_000, 500.0, 1.3)
    f, p = welch(z, 500.0, nperseg=2000)
    sel = (f >= 2) & (f <= 100)
    slope = np.polyfit(np.log(f[sel]), np.log(p.mean(axis=0)[sel]), 1)[0]
    assert slope == pytest.approx(-1.3, abs=0.05)
    band = (f >= 1) & (f <= 30)
    assert np.sqrt(np.sum(p.mean(axis=0)[band]) * (f[1] - f[0])) == pytest.approx(1.0, rel=0.06)


def test_dipole_patterns_are_mnes_forward_solution():
    """The auditory pattern equals mne.make_forward_solution for the same two dipoles (mne as the reference, docs/REFERENCES.md F42)."""
    names = gen2.cap_names(64)
    model = gen2.spatial_model(names, "dipoles")
    rr, nn = _fixed(names, AUDITORY)
    src = mne.setup_volume_source_space(pos={"rr": rr, "nn": nn}, verbose="error")
    fwd = mne.make_forward_solution(_info(names), trans=None, src=src, bem=_sphere(tuple(names)), meg=False,
                                    eeg=True, verbose="error")
    gain = fwd["sol"]["data"].reshape(len(names), 2, 3)            # free orientation: x, y, z per source
    p = np.einsum("cdk,dk->c", gain, nn)
    p -= p.mean()
    ref = p / np.mean([p[names.index(c)] for c in FRONTOCENTRAL])
    assert np.allclose(model.response, ref, atol=1e-6 * np.abs(ref).max())
    assert model.truth["sphere_radius_m"] == pytest.approx(0.09, abs=0.015)    # an adult head, from memory


@pytest.mark.parametrize("spatial", ["dipoles", "exponential"])
def test_response_reverses_at_the_mastoids(spatial):
    """Under an average reference the fronto-central response inverts at TP9/TP10 (docs/REFERENCES.md F19)."""
    names = gen2.cap_names(32)
    model = gen2.spatial_model(names, spatial)
    assert np.mean([model.response[names.index(c)] for c in FRONTOCENTRAL]) == pytest.approx(1.0)
    assert all(model.response[names.index(m)] < -0.3 for m in MASTOIDS)
    assert abs(model.response.sum()) < 1e-9                          # average reference


def test_von_mises_concentration_gives_the_itpc():
    """Mean resultant length of a von Mises law is I1(k)/I0(k) (docs/REFERENCES.md F43, from memory); check by sampling."""
    for target in (0.5, 0.8):
        phases = np.random.default_rng(2).vonmises(0.0, von_mises_kappa(target), 200_000)
        assert abs(np.abs(np.mean(np.exp(1j * phases))) - target) < 0.005


def test_schedules_meet_the_paradigm_minimums(tmp_path):
    """Test-size recordings carry more trials than heschl's minimums (paradigms/*.toml)."""
    truth = gen2.make_recording(tmp_path / "o_raw.fif", paradigm="oddball", n_channels=32, sfreq=500.0,
                                spatial="exponential", artefacts=QUIET)
    labels = truth["events"]["labels"]
    after_deviant = sum(1 for a, b in zip(labels, labels[1:]) if a == "deviant" and b == "standard")
    assert labels.count("deviant") >= 35 and labels.count("standard") - after_deviant >= 120
    assert all(a != b or a == "standard" for a, b in zip(labels, labels[1:]))   # never two deviants in a row
    assert 60 <= truth["duration_s"] <= 125


def test_make_study_writes_a_study_heschl_can_read(tmp_path):
    """study.toml, participants.tsv and truth.json for a tiny study; the study file parses as TOML."""
    import tomllib

    path = gen2.make_study(tmp_path, n_channels=32, subjects=1, paradigms=("rest",), sfreq=500.0,
                           spatial="exponential", duration_s=25.0, bad=["flat"])
    doc = tomllib.loads(path.read_text(encoding="utf-8"))
    truth = json.loads((tmp_path / "truth.json").read_text(encoding="utf-8"))
    (rel, rec), = truth["recordings"].items()
    assert (tmp_path / rel).is_file() and rec["bad_channels"][0]["kind"] == "flat"
    assert doc["sites"]["gen2lab"]["markers"]["rest"] == {"21": "eyes-open", "22": "eyes-closed"}
    assert doc["common_channels"] == gen2.cap_names(32)
    assert (tmp_path / "participants.tsv").read_text(encoding="utf-8").splitlines()[1] == "sub-G01\tcontrol"


def test_bad_arguments_are_one_line_errors(tmp_path):
    with pytest.raises(ValueError, match="n_channels: 40 is not a cap size"):
        gen2.make_recording(tmp_path / "x_raw.fif", paradigm="rest", n_channels=40)
    with pytest.raises(ValueError, match='spatial: "sheet" is not a spatial model'):
        gen2.spatial_model(gen2.cap_names(32), "sheet")
    with pytest.raises(ValueError, match="bad: unknown kind 'loose'"):
        gen2.make_recording(tmp_path / "x_raw.fif", paradigm="rest", n_channels=32, bad=["loose"])
    with pytest.raises(ValueError, match="sensor_noise: 1.2 is outside"):
        gen2.make_recording(tmp_path / "x_raw.fif", paradigm="rest", sensor_noise=1.2)
