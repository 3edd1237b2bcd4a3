"""Cleaning policies: bad channels, forced bads, ocular policy, equalised trial counts."""
from dataclasses import replace

import numpy as np

import mne

from heschl import config
from heschl.clean import BadChannelDetector, clean, ocular_method
from heschl.harmonise import standard_montage
from heschl.segment import reject

NAMES = ["Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8", "FC5", "FC1", "FC2", "FC6", "T7", "C3", "Cz",
         "C4", "T8", "CP5", "CP1", "CP2", "CP6", "P7", "P3", "Pz", "P4", "P8", "O1", "Oz", "O2"]
SFREQ = 250.0


def _brain(seed=0, seconds=60):
    """Spatially smooth background: a few sources seen through distance-based gains, V."""
    rng = np.random.default_rng(seed)
    pos = np.array([standard_montage().get_positions()["ch_pos"][n] for n in NAMES])
    centres = rng.normal(0, 0.05, (6, 3))
    gains = np.exp(-np.linalg.norm(pos[:, None] - centres[None], axis=2) ** 2 / (2 * 0.06 ** 2))
    n = int(seconds * SFREQ)
    sources = rng.normal(0, 1, (6, n))
    x = gains @ sources
    x = x / x.std() * 5e-6
    return x + rng.normal(0, 0.5e-6, x.shape)


def _raw(x, names=NAMES, eog=None):
    ch = list(names) + ([eog[0]] if eog else [])
    types = ["eeg"] * len(names) + (["eog"] if eog else [])
    data = np.vstack([x, eog[1][None]]) if eog else x
    raw = mne.io.RawArray(data, mne.create_info(ch, SFREQ, types), verbose="error")
    raw.set_montage(standard_montage(), on_missing="ignore", verbose="error")
    return raw


def test_detector_finds_flat_noisy_and_popping_channels():
    x = _brain()
    rng = np.random.default_rng(1)
    x[NAMES.index("P8")] = rng.normal(0, 0.02e-6, x.shape[1])             # flat
    x[NAMES.index("T7")] += rng.normal(0, 60e-6, x.shape[1])               # noisy
    pops = np.zeros(x.shape[1])
    for start in range(0, x.shape[1], int(4 * SFREQ)):
        pops[start:] += rng.choice([-1, 1]) * 200e-6 * np.exp(-np.arange(x.shape[1] - start) / SFREQ)
    x[NAMES.index("CP1")] += pops                                            # popping
    detector = BadChannelDetector()
    params = dict(vars(detector))
    assert detector.fit(x, NAMES, SFREQ) is detector
    assert vars(detector) | params == vars(detector)  # parameters unchanged by fit (estimator contract)
    assert set(detector.bads_) == {"P8", "T7", "CP1"}
    assert detector.bads_["P8"].startswith("flat:") and detector.bads_["T7"].startswith("noisy:")
    assert detector.bads_["CP1"].startswith(("unpredictable:", "noisy:"))


def test_detector_leaves_clean_data_and_the_restored_reference_alone():
    x = _brain(seed=2)
    x[NAMES.index("Cz")] = 0.0  # a restored recording reference is all zeros by design
    detector = BadChannelDetector().fit(x, NAMES, SFREQ, exclude=["Cz"])
    assert detector.bads_ == {}


def _paradigm(**cleaning):
    p = config.load_paradigm(config.builtin_dir("paradigms") / "clicktrain.toml")
    return replace(p, cleaning=replace(p.cleaning, **cleaning))


def test_channels_forced_bad_in_the_study_are_interpolated_with_that_reason():
    raw = _raw(_brain(seed=3))
    record = clean(raw, _paradigm(line_noise="none"), forced_bads=("O2",), where="x.fif")
    assert record["bad_channels"] == {"O2": "marked bad in the study file"}
    assert record["interpolated"] == ["O2"]


def test_ocular_auto_is_ica_with_or_without_eog():
    # The default follows benchmarks/ocular_eval.py (DEVELOPERS.md): ICA, its components
    # chosen by EOG correlation where an EOG exists and by their properties where not.
    x = _brain(seed=4)
    assert ocular_method(_raw(x, eog=("VEOG", x[0])), "auto") == "ica"
    assert ocular_method(_raw(x), "auto") == "ica"
    assert ocular_method(_raw(x), "regression") == "regression"
    record = clean(_raw(x), _paradigm(ocular="auto", line_noise="none"), where="x.fif")
    assert record["ocular"]["policy"] == "auto" and record["ocular"]["method"] == "ica"
    assert record["ocular"]["ica"]["selection"] == "properties"


def test_line_noise_is_removed_and_measured():
    x = _brain(seed=5)
    t = np.arange(x.shape[1]) / SFREQ
    x = x + 10e-6 * np.sin(2 * np.pi * 50 * t)
    record = clean(_raw(x), _paradigm(line_noise="notch"), where="x.fif", line_frequency=50.0)
    line = record["line_noise"]
    assert 50.0 in line["frequencies_hz"]
    assert line["ratio_before"] > 10 > 3 > line["ratio_after"]  # 3: the default max_line_ratio


def test_equalise_keeps_evenly_spaced_trials_and_logs_why():
    p = config.load_paradigm(config.builtin_dir("paradigms") / "oddball.toml")
    p = replace(p, rejection=replace(p.rejection, method="none", equalise=True))
    rng = np.random.default_rng(6)
    x = rng.normal(0, 1e-6, (30, 2, 10))
    entries = [{"condition": "deviant" if i % 5 == 0 else "standard", "kept": False, "reason": None, "index": i}
               for i in range(30)]
    arrays, entries, record = reject(x, np.arange(10) / SFREQ, entries, ["Fz", "Cz"], p)
    assert len(arrays["deviant"]) == len(arrays["standard"]) == 6
    dropped = [e for e in entries if not e["kept"]]
    assert len(dropped) == 18 and all(e["reason"] == "equalised: standard reduced to 6 trials" for e in dropped)
    kept_std = [e["index"] for e in entries if e["kept"] and e["condition"] == "standard"]
    assert kept_std[0] == 1 and kept_std[-1] == 29  # spread over the whole recording


def test_blinks_are_found_once_each_on_their_own_side_despite_a_saturation():
    # A blink is a 100-400 uV deflection of the vertical EOG lasting a few hundred ms
    # (common practice, from memory). Here they go negative; one larger positive
    # saturation must not make the detector take the blinks' side lobes for blinks.
    from heschl.numeric.blinks import blink_peaks

    t = np.arange(int(60 * SFREQ)) / SFREQ
    peaks = np.arange(3.0, 57.0, 4.5)
    eog = -sum(150e-6 * np.exp(-0.5 * ((t - p) / 0.07) ** 2) for p in peaks)
    eog = eog + np.random.default_rng(7).normal(0, 2e-6, t.size)
    eog[(t > 32.0) & (t < 32.2)] = 1.5e-3  # a short amplifier saturation
    found = blink_peaks(eog, SFREQ)
    nearest = np.array([np.min(np.abs(found - p)) for p in peaks])
    assert np.all(nearest < 0.03)  # every blink, at its peak (not at its side lobes)
    extra = [f for f in found if np.min(np.abs(peaks - f)) >= 0.03]
    # The saturation's own filter ringing may add deflections next to it, never elsewhere;
    # trials there are dropped by rejection anyway.
    assert len(extra) <= 3 and all(abs(f - 32.1) < 0.6 for f in extra)
