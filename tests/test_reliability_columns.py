"""The reliability columns heschl writes, checked against references.

The values of ``se``, ``ci_low``/``ci_high`` and ``reliability`` in a features table
come from :func:`heschl.features.compute_features`; these tests feed it trials of a known
distribution and compare the written columns with mne (used as a reference library) and
with the truth the trials were drawn around.
"""
import dataclasses

import mne
import numpy as np
import pytest

from heschl import config
from heschl.features import Source, compute_features

SFREQ = 250.0
TIMES = np.arange(-25, 100) / SFREQ  # -0.1 to 0.396 s, exact multiples of the sample period
CHANNELS = ["Fz", "FC1", "FC2", "FCz", "Cz", "TP9", "TP10"]
UV = 1e-6


@pytest.fixture(scope="module")
def oddball():
    paradigm = config.load_paradigm(config.builtin_dir("paradigms") / "oddball.toml")
    core = config.load_feature_set(config.builtin_dir("features") / "oddball-core.toml", paradigm)
    return paradigm, core


def _only(feature_set, *names):
    return dataclasses.replace(feature_set, measures=tuple(m for m in feature_set.measures if m.name in names))


def _trials(rng, n, amplitude, noise=5 * UV):
    """n trials: ``amplitude`` (V) on every channel in 0.10-0.25 s, plus white noise."""
    x = noise * rng.standard_normal((n, len(CHANNELS), TIMES.size))
    x[..., (TIMES >= 0.10) & (TIMES <= 0.25)] += amplitude
    return x


def _sme_of_region_mean(trials, window):
    """mne's compute_sme on the region-mean trials (one virtual channel).

    heschl's window holds both edge samples; mne's ``get_data(tmin, tmax)`` (inside
    compute_sme) leaves out the sample at ``tmax`` (seen with mne 1.13 here), so ``stop``
    is one sample past the window's end: the same samples on both sides.
    """
    region = trials[:, :5].mean(axis=1, keepdims=True)
    info = mne.create_info(["region"], SFREQ, "eeg")
    epochs = mne.EpochsArray(region, info, tmin=TIMES[0], baseline=None, verbose="error")
    stop = window[1] + 1 / SFREQ
    return float(mne.stats.erp.compute_sme(epochs, start=window[0], stop=stop)[0])


def test_se_column_of_a_mean_amplitude_equals_mne_compute_sme(oddball):
    # Luck, Stewart, Simmons & Rhemtulla 2021 (docs/REFERENCES.md F28): the SME of a mean
    # amplitude is SD(single-trial window means) / sqrt(N); mne's compute_sme is the
    # reference (numpy's default SD, ddof=0). For the difference wave the errors of
    # deviants and standards add in quadrature (independent trials). 1e-9 relative: the
    # same numbers summed in another order.
    paradigm, core = oddball
    rng = np.random.default_rng(7)
    data = {"deviant": _trials(rng, 37, -3 * UV), "standard": _trials(rng, 121, 0.0)}
    source = Source(data, TIMES, CHANNELS, SFREQ, paradigm)
    fs = _only(core, "mismatch_mean_amplitude", "n1_standard_mean_amplitude")
    rows = {r["feature"]: r for r in compute_features(fs, source, paradigm.rejection.min_trials)}
    n1 = _sme_of_region_mean(data["standard"], (0.08, 0.12)) * 1e6
    assert rows["n1_standard_mean_amplitude"]["se"] == pytest.approx(n1, rel=1e-9)
    mismatch = np.hypot(_sme_of_region_mean(data["deviant"], (0.10, 0.25)),
                        _sme_of_region_mean(data["standard"], (0.10, 0.25))) * 1e6
    assert rows["mismatch_mean_amplitude"]["se"] == pytest.approx(mismatch, rel=1e-9)


def test_interval_columns_cover_the_truth_at_the_nominal_rate(oddball):
    # Percentile bootstrap (Efron & Tibshirani 1993, docs/REFERENCES.md F29): over many
    # recordings drawn around a known mismatch of -2 uV, the written 95 % interval holds
    # the truth in about 95 % of them. 300 recordings: binomial SE 1.3 %; the percentile
    # interval of a mean of 30-40 trials runs slightly narrow (about 1 % under, common
    # practice), so 0.90-0.99 is about 4 SE below and 3 SE above the nominal rate.
    paradigm, core = oddball
    fs = dataclasses.replace(_only(core, "mismatch_mean_amplitude"),
                             reliability=dict(core.reliability, bootstrap=150, splits=10))
    rng = np.random.default_rng(11)
    covered, se_ratio = [], []
    for k in range(300):
        data = {"deviant": _trials(rng, 35, -2 * UV), "standard": _trials(rng, 40, 0.0)}
        source = Source(data, TIMES, CHANNELS, SFREQ, paradigm)
        row = next(r for r in compute_features(fs, source, {}, seed=k) if r["feature"] == "mismatch_mean_amplitude")
        covered.append(row["ci_low"] <= -2.0 <= row["ci_high"])
        # The interval's width agrees with the analytic SME: 2 x 1.96 SE for a normal mean.
        se_ratio.append((row["ci_high"] - row["ci_low"]) / (2 * 1.96 * row["se"]))
    assert 0.90 <= np.mean(covered) <= 0.99
    assert np.median(se_ratio) == pytest.approx(1.0, abs=0.08)


def test_reliability_column_tells_a_response_from_noise(oddball):
    # Subject-level reliability (Clayson, Brush & Hajcak 2021, docs/REFERENCES.md F31):
    # t / (t + se^2) with t = max(value^2 - se^2, 0): near 1 for a response far above its
    # error, near 0 for trials with no response at all.
    paradigm, core = oddball
    fs = _only(core, "mismatch_mean_amplitude")
    rng = np.random.default_rng(3)
    strong = Source({"deviant": _trials(rng, 40, -6 * UV), "standard": _trials(rng, 120, 0.0)},
                    TIMES, CHANNELS, SFREQ, paradigm)
    null = Source({"deviant": _trials(rng, 40, 0.0), "standard": _trials(rng, 120, 0.0)},
                  TIMES, CHANNELS, SFREQ, paradigm)
    high = next(r for r in compute_features(fs, strong, {}) if r["feature"] == "mismatch_mean_amplitude")
    low = next(r for r in compute_features(fs, null, {}) if r["feature"] == "mismatch_mean_amplitude")
    assert high["reliability"] > 0.95 and low["reliability"] < 0.5
