"""Ocular correction (EOG regression, ICA, frontal stand-ins) on a synthetic recording with known blinks.

The recording: 16 EEG channels at 10-20 positions (mne's template 10-05 montage),
250 Hz, 60 s. "Brain": 8 oscillations (4-30 Hz, mildly amplitude-modulated) with smooth
random topographies (6 uV each) plus 3 uV white sensor noise per channel. Blinks:
Gaussian bumps (sd 80 ms) every 2-5 s, 150 uV at Fp1/Fp2, falling off with distance from
them (e^-1 every 4 cm beyond 3 cm), and 200 uV on a VEOG channel with 5 uV of its own noise.

The acceptance threshold 0.2 on the largest |correlation| between corrected EEG and the
true blink time course is the project's own (ocular-correction issue), not a published
figure; 0.9 is the floor for the correlation of corrected channels with the blink-free data.
"""
import json

import mne
import numpy as np
import pytest

from heschl.errors import DefinitionError, InputDataError, ProcessingError
from heschl.ocular import NO_SOURCE, OcularCorrection, eog_correlation, max_abs_correlation, quiet_samples

SFREQ = 250.0  # Hz
UV = 1e-6      # V
CHANNELS = ["Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8", "T7", "C3", "Cz", "C4", "T8", "P3", "Pz", "P4", "Oz"]
ACCEPT = 0.2       # project's acceptance: max |corr(corrected EEG, true blinks)|
CLEAN_FLOOR = 0.9  # project's floor: min over channels of corr(corrected, blink-free)
BLINK_AT_FP = 150 * UV
BLINK_AT_VEOG = 200 * UV


def _montage():
    try:
        return mne.channels.make_standard_montage("colin27_1005")
    except ValueError:  # mne < 1.13
        return mne.channels.make_standard_montage("standard_1005")


def _synthetic(seed=20240611, duration=60.0):
    """Returns (raw, clean EEG (n_eeg, n_times) V, blink time course (n_times,), topography (n_eeg,))."""
    rng = np.random.default_rng(seed)
    n = int(round(duration * SFREQ))
    t = np.arange(n) / SFREQ
    pos = _montage().get_positions()["ch_pos"]
    xyz = np.array([pos[c] for c in CHANNELS])
    u = xyz / 0.1  # m -> about unit scale
    basis = np.column_stack([np.ones(len(u)), u, u ** 2, u[:, [0]] * u[:, [1]], u[:, [0]] * u[:, [2]],
                             u[:, [1]] * u[:, [2]]])
    n_osc = 8
    freqs = rng.uniform(4.0, 30.0, n_osc)
    # Mild envelopes keep the sources clearly non-Gaussian, as ICA's model assumes.
    env = 1 + 0.3 * np.sin(2 * np.pi * rng.uniform(0.05, 0.3, (n_osc, 1)) * t + rng.uniform(0, 2 * np.pi, (n_osc, 1)))
    phase = 2 * np.pi * freqs[:, None] * t + np.cumsum(0.02 * rng.standard_normal((n_osc, n)), axis=1)
    sources = env * np.sin(phase)
    sources /= sources.std(axis=1, keepdims=True)
    topo = basis @ rng.standard_normal((basis.shape[1], n_osc))
    topo /= np.sqrt((topo ** 2).mean(axis=0, keepdims=True))
    clean = 6 * UV * topo @ sources + 3 * UV * rng.standard_normal((len(CHANNELS), n))
    onsets = np.cumsum(rng.uniform(2.0, 5.0, int(duration)))
    blink = np.zeros(n)
    for onset in onsets[onsets < duration - 1.0]:
        blink += np.exp(-0.5 * ((t - onset) / 0.08) ** 2)
    front = (np.asarray(pos["Fp1"]) + np.asarray(pos["Fp2"])) / 2
    weight = np.exp(-np.maximum(np.linalg.norm(xyz - front, axis=1) - 0.03, 0.0) / 0.04)
    eeg = clean + BLINK_AT_FP * weight[:, None] * blink
    veog = BLINK_AT_VEOG * blink + 5 * UV * rng.standard_normal(n)
    info = mne.create_info(CHANNELS + ["VEOG"], SFREQ, ["eeg"] * len(CHANNELS) + ["eog"])
    raw = mne.io.RawArray(np.vstack([eeg, veog]), info, verbose="error")
    raw.set_montage(_montage(), on_missing="ignore", verbose="error")
    return raw, clean, blink, weight


@pytest.fixture(scope="module")
def recording():
    return _synthetic()


@pytest.fixture
def raw(recording):
    return recording[0].copy()


@pytest.fixture(scope="module")
def fitted(recording):
    """Regression and ICA fitted once on (a copy of) the recording."""
    raw = recording[0]
    return {m: OcularCorrection(m).fit(raw.copy()) for m in ("regression", "ica")}


def _blink_corr(raw, blink, picks="eeg"):
    return max_abs_correlation(raw.get_data(picks=picks), blink[None])


def _min_clean_corr(raw, clean, names=CHANNELS):
    x = raw.get_data(picks=names)
    rows = [CHANNELS.index(n) for n in names]
    return min(np.corrcoef(a, b)[0, 1] for a, b in zip(x, clean[rows]))


def test_synthetic_blinks_dominate_before_correction(recording):
    raw, clean, blink, _ = recording
    # Sanity of the fixture: blinks are what Fp1 mostly shows.
    assert _blink_corr(raw, blink) > 0.8
    assert _min_clean_corr(raw, clean) < 0.5


@pytest.mark.parametrize("method", ["regression", "ica"])
def test_correction_meets_the_acceptance(recording, fitted, method):
    # Project acceptance (issue): max |corr| with the true blinks < 0.2 and every channel
    # correlating > 0.9 with its blink-free signal.
    raw, clean, blink, _ = recording
    corrected = fitted[method].apply(raw)
    assert _blink_corr(corrected, blink) < ACCEPT
    assert _min_clean_corr(corrected, clean) > CLEAN_FLOOR
    rec = fitted[method].record()
    assert rec["method"] == method and rec["sources"] == ["VEOG"] and rec["eog_channels"] == ["VEOG"]
    assert rec["stand_ins_used"] is False and rec["skipped_reason"] is None
    assert rec["residual_correlation"]["before"] > 0.8 > ACCEPT > rec["residual_correlation"]["after"]
    assert set(rec["residual_correlation"]["by_source"]) == {"VEOG"} and rec["fit_excluded_s"] == 0.0
    assert json.loads(json.dumps(rec)) == rec  # plain data for qc.json / provenance


def test_regression_recovers_the_propagation_factors(fitted, recording):
    # Gratton, Coles & Donchin (1983): the correction factor is the least-squares slope of
    # EEG on EOG. Truth here: 150 uV x weight / 200 uV. Tolerance 0.03 V/V (4 % of the
    # largest factor, 0.75): the VEOG's own 5 uV noise shrinks the slope by about 1.5 %
    # (errors in the regressor) and the 6-15 uV brain signal adds scatter of about 0.005.
    _, _, _, weight = recording
    est = fitted["regression"]
    assert est.coef_.shape == (len(CHANNELS), 1)
    np.testing.assert_allclose(est.coef_[:, 0], BLINK_AT_FP / BLINK_AT_VEOG * weight, atol=0.03)
    rec = est.record()["regression"]
    assert rec["max_abs_channel"] in ("Fp1", "Fp2")
    assert rec["coefficients"]["Oz"]["VEOG"] == pytest.approx(est.coef_[CHANNELS.index("Oz"), 0])


def test_ica_removes_one_blink_component(fitted):
    # Common practice: a blink is one independent component, correlating almost
    # perfectly with the VEOG (|r| > 0.9 here; threshold 0.5 is the estimator's default).
    # 15 components of 16 channels holding 8 sources: FastICA may stop without converging
    # on the near-Gaussian rest, which is recorded, not required.
    rec = fitted["ica"].record()["ica"]
    assert isinstance(rec["converged"], bool) and rec["selection"] == "eog-correlation"
    assert rec["n_components"] == 15 and len(rec["properties"]) == 15
    # Removed only with a slow, heavy-tailed time course as well (heschl.eyecomponents).
    assert rec["excluded"][0]["properties"]["kurtosis"] >= 5.0
    assert len(rec["excluded"]) == 1 and rec["excluded"][0]["kind"] == "eog"
    assert rec["excluded"][0]["source"] == "VEOG" and abs(rec["excluded"][0]["correlation"]) > 0.9
    assert fitted["ica"].ica_.exclude == [rec["excluded"][0]["component"]]


@pytest.mark.parametrize("method", ["regression", "ica"])
def test_recorded_residual_matches_the_helper(recording, fitted, method):
    # The residual metric recorded at fit equals eog_correlation on the data before and
    # after apply: 1 Hz high-pass filtering commutes with the (spatial) correction, so
    # only rounding differs (tolerance 1e-6 in correlation).
    raw = recording[0]
    rec = fitted[method].record()["residual_correlation"]
    assert rec["before"] == pytest.approx(eog_correlation(raw, ["VEOG"]), abs=1e-6)
    assert rec["after"] == pytest.approx(eog_correlation(fitted[method].apply(raw), ["VEOG"]), abs=1e-6)
    assert rec["high_pass_hz"] == 1.0 and rec["n_channels"] == len(CHANNELS)


@pytest.mark.parametrize("method", ["regression", "ica"])
def test_stand_ins_without_an_eog_channel(recording, method):
    # Without EOG the mean of Fp1/Fp2 stands in for it (documented compromise).
    raw0, clean, blink, _ = recording
    raw = raw0.copy().drop_channels(["VEOG"])
    est = OcularCorrection(method).fit(raw)
    rec = est.record()
    assert rec["stand_ins_used"] is True and rec["stand_ins"] == ["Fp1", "Fp2"]
    assert rec["sources"] == ["mean(Fp1, Fp2)"] and rec["eog_channels"] == []
    others = [c for c in CHANNELS if c not in ("Fp1", "Fp2")]
    corrected = est.apply(raw)
    before, after = _blink_corr(raw, blink, others), _blink_corr(corrected, blink, others)
    assert rec["residual_correlation"]["after"] < rec["residual_correlation"]["before"]
    if method == "regression":
        # The proxy carries frontal brain activity that the other channels share, which
        # biases the slopes (here 0.58 -> 0.33, above the acceptance): the compromise
        # named in OcularCorrection's notes. Only a reduction is required of it.
        assert after < before
        assert rec["corrected_channels"] == others
        np.testing.assert_array_equal(corrected.get_data(picks=["Fp1", "Fp2"]), raw.get_data(picks=["Fp1", "Fp2"]))
    else:
        # ICA uses the proxy only to choose components: the acceptance holds on every
        # channel, the stand-ins included.
        assert _blink_corr(corrected, blink) < ACCEPT
        assert _min_clean_corr(corrected, clean) > CLEAN_FLOOR
        assert rec["corrected_channels"] == CHANNELS


def _saturated(raw, start=30.2, stop=30.4):
    """A copy with every channel stuck at +/-1.5 mV (an amplifier rail) from start to stop, s."""
    out = raw.copy()
    signs = np.where(np.arange(len(out.ch_names)) % 2, -1.0, 1.0)[:, None]
    stuck = (out.times >= start) & (out.times < stop)
    out.apply_function(lambda x: np.where(stuck, 1.5e-3 * signs, x), picks="all", channel_wise=False,
                       verbose="error")
    return out


def test_saturation_is_left_out_of_the_fit(recording):
    # Common practice: saturated stretches are excluded before estimating a correction.
    # A 0.2 s rail (1.5 mV, alternating sign) would dominate the least-squares slopes; with
    # the default 1 mV peak-to-peak limit the factors stay within 0.03 V/V of the truth
    # (tolerance as in test_regression_recovers_the_propagation_factors).
    raw0, _, _, weight = recording
    raw = _saturated(raw0)
    truth = BLINK_AT_FP / BLINK_AT_VEOG * weight
    est = OcularCorrection().fit(raw)
    np.testing.assert_allclose(est.coef_[:, 0], truth, atol=0.03)
    # The rail's 1 s window plus half the 1 Hz high-pass (825 taps = 3.3 s at 250 Hz) on
    # either side: 1 + 2 x 1.648 s.
    assert est.record()["fit_excluded_s"] == pytest.approx(1.0 + 2 * 412 / SFREQ, abs=1e-9)
    spoiled = OcularCorrection(fit_reject=None).fit(raw)
    assert np.abs(spoiled.coef_[:, 0] - truth).max() > 0.1
    assert spoiled.record()["fit_excluded_s"] == 0.0


def test_too_little_quiet_data_skips(raw):
    est = OcularCorrection(fit_reject=1e-9).fit(raw)
    assert est.skipped_reason_ == ("only 0.0 s of data below 0.001 uV peak-to-peak (fit_reject) to fit on; "
                                   "at least 10 s needed")
    np.testing.assert_array_equal(est.apply(raw).get_data(), raw.get_data())


def test_quiet_samples_drops_whole_windows():
    # 1 s windows at 10 Hz: a 2 mV spike at sample 25 removes samples 20-29 only, or
    # 17-32 with 0.3 s of padding on either side.
    x = np.zeros((2, 45))
    x[1, 25] = 2e-3
    keep = quiet_samples(x, 10.0, 1e-3)
    assert keep.sum() == 35 and not keep[20:30].any()
    padded = quiet_samples(x, 10.0, 1e-3, pad=0.3)
    assert np.flatnonzero(~padded).tolist() == list(range(17, 33))
    assert quiet_samples(x, 10.0, None).all()


def test_named_eog_channel(recording):
    raw = recording[0].copy()
    raw.set_channel_types({"VEOG": "misc"}, verbose="error")
    rec = OcularCorrection(eog=["VEOG"]).fit(raw).record()
    assert rec["eog_channels"] == ["VEOG"] and rec["stand_ins_used"] is False


def test_skipped_without_eog_or_frontal_channels(recording):
    raw = recording[0].copy().drop_channels(["VEOG", "Fp1", "Fp2"])
    est = OcularCorrection("ica").fit(raw)
    assert est.skipped_reason_ == NO_SOURCE == "no EOG channel and no frontal channel to stand in"
    rec = est.record()
    assert rec["skipped_reason"] == NO_SOURCE and rec["residual_correlation"] is None and rec["ica"] is None
    out = est.apply(raw)
    assert out is not raw
    np.testing.assert_array_equal(out.get_data(), raw.get_data())


def test_method_none_changes_nothing(raw):
    est = OcularCorrection("none").fit(raw)
    np.testing.assert_array_equal(est.apply(raw).get_data(), raw.get_data())
    assert est.record()["method"] == "none" and est.record()["sources"] == []


@pytest.mark.parametrize("method", ["regression", "ica"])
def test_fit_and_apply_never_mutate_the_input(raw, method):
    # Estimator contract (scikit-learn's check_estimators idea): inputs stay untouched.
    before = raw.get_data().copy()
    est = OcularCorrection(method).fit(raw)
    np.testing.assert_array_equal(raw.get_data(), before)
    out = est.apply(raw)
    np.testing.assert_array_equal(raw.get_data(), before)
    assert out is not raw and not np.array_equal(out.get_data(), before)


def test_parameters_unchanged_by_fit(raw):
    # scikit-learn's contract: fit learns into attributes ending with "_" and leaves
    # constructor parameters exactly as given (same objects).
    stand_ins, eog = ("Fp1", "Fp2"), ["VEOG"]
    est = OcularCorrection("ica", eog=eog, stand_ins=stand_ins, ica_components=0.95, max_components=9,
                           threshold=0.6, random_state=3, high_pass=1.5, fit_reject=2e-3)
    params = dict(vars(est))
    est.fit(raw)
    assert {k: v for k, v in vars(est).items() if not k.endswith("_")} == params
    assert est.stand_ins is stand_ins and est.eog is eog and eog == ["VEOG"]
    assert est.n_components_ <= 9
    with pytest.raises(TypeError):
        OcularCorrection("ica", None)  # everything after method is keyword-only


def test_same_seed_same_result(raw):
    # random_state fixes FastICA's start: two fits agree to 1 nV (rounding only).
    a = OcularCorrection("ica", random_state=7).fit(raw)
    b = OcularCorrection("ica", random_state=7).fit(raw)
    assert a.excluded_ == b.excluded_
    np.testing.assert_allclose(a.apply(raw).get_data(), b.apply(raw).get_data(), rtol=0, atol=1e-9)


def test_eog_correlation_accepts_a_source_array(recording):
    raw, _, blink, _ = recording
    by_name = eog_correlation(raw, ["VEOG"])
    by_array = eog_correlation(raw, raw.get_data(picks=["VEOG"]))
    assert by_array == pytest.approx(by_name, abs=1e-9)
    assert 0.0 <= eog_correlation(raw, blink[None] * BLINK_AT_VEOG) <= 1.0


def test_max_abs_correlation_known_values():
    # Pearson correlation (common practice): r(x, -x) = -1, r with a constant is undefined -> 0 here.
    x = np.sin(np.linspace(0, 20, 500))[None]
    assert max_abs_correlation(x, -x) == pytest.approx(1.0, abs=1e-12)
    assert max_abs_correlation(x, np.ones((1, 500))) == 0.0


def test_errors_name_the_fix(raw):
    with pytest.raises(DefinitionError, match=r'method: method "regresion" is not known \(did you mean '
                                              r'"regression"\?\); use one of regression, ica, none'):
        OcularCorrection("regresion").fit(raw)
    with pytest.raises(DefinitionError, match=r"threshold: threshold = 1.5 is not a correlation in \(0, 1\)"):
        OcularCorrection(threshold=1.5).fit(raw)
    with pytest.raises(DefinitionError, match=r"ica_components = 1 is neither a variance fraction"):
        OcularCorrection("ica", ica_components=1).fit(raw)
    with pytest.raises(DefinitionError, match=r"max_components = 1 is not a count of at least 2"):
        OcularCorrection("ica", max_components=1).fit(raw)
    with pytest.raises(DefinitionError, match=r"fit_reject: fit_reject = -1 V is not a positive amplitude"):
        OcularCorrection(fit_reject=-1).fit(raw)
    with pytest.raises(DefinitionError, match=r"high_pass = 0 Hz is not positive; choose e.g. 1.0 Hz"):
        OcularCorrection(high_pass=0).fit(raw)
    with pytest.raises(InputDataError, match=r"eog: EOG channels HEOG are not in the recording \(17 channels\)"):
        OcularCorrection(eog=["HEOG"]).fit(raw)
    with pytest.raises(ProcessingError, match=r"apply was called before fit; call fit\(raw\) first"):
        OcularCorrection().apply(raw)
    est = OcularCorrection().fit(raw)
    with pytest.raises(InputDataError, match=r"channels Oz seen in fit are not in the data to correct"):
        est.apply(raw.copy().drop_channels(["Oz"]))
