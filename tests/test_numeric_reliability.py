"""Spearman-Brown, split-half reliability, bootstrap intervals and SME.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>"). Amplitudes are in V inside the code; "uV" in comments.
Simulations are vectorised and seeded, so every tolerance below is a fixed, reasoned
margin around a deterministic number.
"""
import numpy as np
import pytest

from heschl.errors import DefinitionError, InputDataError, ProcessingError
from heschl.numeric.erp import mean_amplitude, peak
from heschl.numeric.cohort import lengthening_factor, spearman_brown, split_half, split_half_cohort
from heschl.numeric.reliability import (bootstrap_interval, bootstrap_sme, sme_difference, sme_mean_amplitude,
                                        split_half_recording)

UV = 1e-6  # V
AWKWARD_SFREQ = 250 + np.pi  # Hz


def mean_score(t):
    """Mean over trials (axis 0); works one subset at a time and batched."""
    return t.mean(axis=0)


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def _standardised(rng, n, sd, mean=0.0):
    """n values with population SD (ddof=0) exactly ``sd`` (to rounding) and mean ``mean``."""
    x = rng.standard_normal(n)
    return mean + sd * (x - x.mean()) / x.std()


def _cohort(rng, n_subjects=1000, n_trials=100, true_sd=1.0, noise_sd=8.0):
    """Single-trial scores, shape (n_subjects, n_trials): true score + trial noise."""
    true = true_sd * rng.standard_normal((n_subjects, 1))
    return true + noise_sd * rng.standard_normal((n_subjects, n_trials))


# -- docs/REFERENCES.md F30: Spearman (1910); Brown (1910) ------------------------------------------


def test_spearman_brown_worked_values():
    # F30: split-half step-up 2r/(1+r): 0.6 -> 0.75, 0.5 -> 2/3 (exact arithmetic; 1e-12
    # leaves room for float rounding only).
    assert spearman_brown(0.6) == pytest.approx(0.75, abs=1e-12)
    assert spearman_brown(0.5) == pytest.approx(2 / 3, abs=1e-12)
    assert spearman_brown(0.5) == pytest.approx(0.6667, abs=5e-5)  # the rounded F30 value
    # F30 general form n r / (1 + (n - 1) r): n = 1 changes nothing; arrays broadcast.
    assert spearman_brown(0.37, factor=1.0) == pytest.approx(0.37, abs=1e-15)
    np.testing.assert_allclose(spearman_brown(np.array([0.2, 0.5]), factor=4.0),
                               [0.8 / 1.6, 2.0 / 2.5], atol=1e-12)


def test_lengthening_factor_round_trip():
    # F30: n = target (1 - r) / (r (1 - target)) inverts the prophecy formula, both ways
    # (float rounding only, hence 1e-12).
    r = np.array([0.1, 0.35, 0.6, 0.9])
    for n in (0.5, 2.0, 3.7, 10.0):
        np.testing.assert_allclose(lengthening_factor(r, spearman_brown(r, n)), n, rtol=1e-12)
    assert spearman_brown(0.5, lengthening_factor(0.5, 0.8)) == pytest.approx(0.8, abs=1e-12)
    assert lengthening_factor(0.5, 0.8) == pytest.approx(4.0, abs=1e-12)  # 0.8*0.5/(0.5*0.2)
    assert lengthening_factor(0.9, 0.8) < 1  # already reliable enough: fewer trials suffice


def test_spearman_brown_errors():
    with pytest.raises(InputDataError, match=r"spearman_brown: r: r = 1.2 is outside \[-1, 1\]"):
        spearman_brown([0.5, 1.2])
    with pytest.raises(DefinitionError, match=r"spearman_brown: factor: factor = 0 is not > 0"):
        spearman_brown(0.5, factor=0)
    with pytest.raises(InputDataError, match=r"lengthening_factor: r: r = 0 is outside \(0, 1\]"):
        lengthening_factor(0.0, 0.8)
    with pytest.raises(DefinitionError, match=r"target = 1 is outside \[0, 1\); choose"):
        lengthening_factor(0.5, 1.0)


# -- docs/REFERENCES.md F28: Luck, Stewart, Simmons & Rhemtulla (2021), SME -------------------------


def test_sme_of_standardised_window_means(rng):
    # F28: 400 trials whose window means have SD exactly 10 uV (ddof=0) -> SME = 10/20 =
    # 0.5 uV. Tolerance 1e-12 uV (1e-18 V): float rounding of the standardisation only.
    times = np.arange(-25, 126) / AWKWARD_SFREQ
    window = (0.1, 0.3)
    trials = 5 * UV * rng.standard_normal((400, times.size))
    shift = _standardised(rng, 400, 10 * UV, mean=-2 * UV) - mean_amplitude(trials, times, window)
    trials += shift[:, np.newaxis]  # a constant shifts the window mean by exactly itself
    means = mean_amplitude(trials, times, window)
    assert sme_mean_amplitude(means) == pytest.approx(0.5 * UV, abs=1e-12 * UV)
    # F28: ddof=1 exceeds the ddof=0 value by sqrt(N/(N-1)).
    assert sme_mean_amplitude(means, ddof=1) == pytest.approx(
        0.5 * UV * np.sqrt(400 / 399), abs=1e-12 * UV)


def test_sme_equals_mne_compute_sme():
    # F28 (mne 1.13.2 source): compute_sme = data.mean(axis=2).std(axis=0)/sqrt(n), numpy
    # ddof=0, so ours with ddof=0 must match exactly (same samples, same operations).
    import mne  # a hard dependency: a missing mne must fail, not skip
    from mne.stats.erp import compute_sme

    sfreq, tmin = 250.0, -0.1  # s; mne's grid: tmin + k / sfreq
    data = 8 * UV * np.random.default_rng(7).standard_normal((400, 3, 150))
    info = mne.create_info(["Fz", "Cz", "Pz"], sfreq, "eeg")
    epochs = mne.EpochsArray(data, info, tmin=tmin, verbose="error")  # no warnings raised
    start, stop = 0.1, 0.2
    # mne's get_data(tmin, tmax) may leave out the sample at tmax (it does in mne 1.13)
    # whereas heschl windows include both ends; feed ours exactly the samples mne uses.
    n_used = epochs.get_data(tmin=start, tmax=stop).shape[-1]
    first = int(np.argmin(np.abs(epochs.times - start)))
    window = (epochs.times[first], epochs.times[first + n_used - 1])
    ours = sme_mean_amplitude(mean_amplitude(epochs.get_data(), epochs.times, window))
    np.testing.assert_array_equal(ours, compute_sme(epochs, start, stop))
    # ddof=1 is larger by sqrt(N/(N-1)) (F28); 1e-12 relative covers float rounding.
    np.testing.assert_allclose(
        sme_mean_amplitude(mean_amplitude(data, epochs.times, window), ddof=1),
        compute_sme(epochs, start, stop) * np.sqrt(400 / 399), rtol=1e-12)


def test_sme_halving_trials_multiplies_by_sqrt2(rng):
    # F28: SME shrinks as 1/sqrt(N), so 200 instead of 400 trials gives sqrt(2) x, within
    # 10 % (the F28 margin). Averaged over 300 simulated recordings the sampling error of
    # the ratio is ~0.4 %, so 10 % cannot fail by chance.
    means = 10 * UV * rng.standard_normal((400, 300))  # (trials, recordings)
    ratio = sme_mean_amplitude(means[:200]).mean() / sme_mean_amplitude(means).mean()
    assert ratio == pytest.approx(np.sqrt(2), rel=0.10)


def test_bootstrap_sme_of_mean_amplitude_matches_analytic(rng):
    # F28: for the mean amplitude the bootstrapped SME estimates the analytic SME (the
    # bootstrap variance of a mean is the ddof=0 variance / N). 2000 resamples: relative
    # SE of a bootstrap SD ~ 1/sqrt(2*2000) = 1.6 %, so 6 % is ~4 SE.
    means = _standardised(rng, 120, 10 * UV)
    assert bootstrap_sme(means, mean_score, n_boot=2000, batched=True) == pytest.approx(
        sme_mean_amplitude(means), rel=0.06)


def test_bootstrap_sme_of_peak_amplitude_shrinks_with_trials(rng):
    # F28: peak measures need a bootstrapped SME, which shrinks roughly as 1/sqrt(N).
    # Gaussian component at 180 ms (SD 30 ms), -4 uV, in 10 uV white noise; the score is
    # the peak amplitude of the averaged waveform. Quadrupling the trials would halve a
    # linear score's SME; the peak also picks the most negative noise sample near the
    # top, which shrinks a little more slowly, hence the band 0.4-0.7 (from memory: peak
    # scores scale only roughly as 1/sqrt(N); the bootstrap SD has ~3 % error at 600
    # resamples). Peak latency is deliberately not used: at white noise its bootstrap
    # SME is erratic, jumping between samples.
    times = np.arange(-25, 126) / AWKWARD_SFREQ
    signal = -4 * UV * np.exp(-0.5 * ((times - 0.18) / 0.03) ** 2)

    def amplitude(t):  # works batched: average over axis 0, peak over the last axis
        return peak(t.mean(axis=0), times, (0.1, 0.3), polarity="negative").amplitude

    trials = signal + 10 * UV * rng.standard_normal((400, times.size))
    few = bootstrap_sme(trials[:100], amplitude, n_boot=600, batched=True)
    many = bootstrap_sme(trials, amplitude, n_boot=600, batched=True)
    assert 0.4 < many / few < 0.7
    # One subset at a time gives the very same numbers (same resamples, drawn first).
    assert bootstrap_sme(trials[:100], amplitude, n_boot=50) == bootstrap_sme(
        trials[:100], amplitude, n_boot=50, batched=True)


# -- docs/REFERENCES.md F29: error propagation; Luck et al. (2021) -----------------------------------


def test_sme_of_difference_deviant_minus_standard(rng):
    # F29: 150 deviants, 850 standards, equal single-trial SD s:
    # sqrt(s^2/150 + s^2/850) = 0.0886 s (rounded; exact value to 1e-12 relative).
    s = 6 * UV
    deviants = _standardised(rng, 150, s, mean=-3 * UV)
    standards = _standardised(rng, 850, s)
    analytic = sme_difference(sme_mean_amplitude(deviants), sme_mean_amplitude(standards))
    assert analytic == pytest.approx(s * np.sqrt(1 / 150 + 1 / 850), rel=1e-12)
    assert analytic / s == pytest.approx(0.0886, abs=5e-5)
    # F29: bootstrap within condition, 5000 draws: within 5 % (relative SE of the
    # bootstrap SD is 1/sqrt(2*5000) = 1 %; ddof=0 SMEs match the bootstrap's variance).
    low, high, boot_sd = bootstrap_interval(
        None, lambda d, st: d.mean(axis=0) - st.mean(axis=0), n_boot=5000,
        groups=[deviants, standards], batched=True)
    assert boot_sd == pytest.approx(analytic, rel=0.05)
    assert low < -3 * UV < high  # the interval holds the difference of the sample means
    # bootstrap_sme is the same bootstrap SD (same seed, same resamples).
    assert bootstrap_sme(None, lambda d, st: d.mean(axis=0) - st.mean(axis=0), n_boot=5000,
                         groups=[deviants, standards], batched=True) == boot_sd


def test_sme_difference_rejects_negative():
    with pytest.raises(InputDataError, match=r"sme_difference: sme_b: sme_b = -1 is negative"):
        sme_difference(1.0, -1.0)


# -- Bootstrap percentile interval: Efron & Tibshirani (1993), common practice -------------


def test_bootstrap_interval_coverage(rng):
    # Common practice (from memory): a 95 % percentile interval for the mean of normal
    # data covers the true mean ~95 % of the time (slightly less at small N: ~94.6 % at
    # N = 100, since it uses z and a ddof=0 spread). 1000 simulated recordings: binomial
    # SE sqrt(.95*.05/1000) = 0.7 %, so +/- 3 % is > 4 SE.
    true_mean = 3 * UV
    recordings = true_mean + 10 * UV * rng.standard_normal((1000, 100))
    covered = 0
    for trials in recordings:
        low, high, _ = bootstrap_interval(trials, mean_score, n_boot=1000,
                                          seed=rng, batched=True)
        covered += low <= true_mean <= high
    assert covered / 1000 == pytest.approx(0.95, abs=0.03)


def test_bootstrap_interval_per_channel_and_unbatched(rng):
    # Vector scores: one interval per channel; batched and one-at-a-time agree exactly
    # (indices are drawn before scoring). Analytic truth: a constant channel has a
    # zero-width interval and zero bootstrap SD.
    trials = np.column_stack([rng.standard_normal(50), np.full(50, 2.0)])
    low, high, sd = bootstrap_interval(trials, mean_score, n_boot=200, batched=True)
    assert low.shape == high.shape == sd.shape == (2,)
    assert low[1] == high[1] == 2.0 and sd[1] == 0.0
    unbatched = bootstrap_interval(trials, mean_score, n_boot=200)
    for ours, theirs in zip((low, high, sd), unbatched):
        np.testing.assert_array_equal(ours, theirs)


def test_bootstrap_errors(rng):
    trials = rng.standard_normal(20)
    with pytest.raises(DefinitionError, match=r"bootstrap_interval: level: level = 1.5 is "
                                              r"outside \(0, 1\)"):
        bootstrap_interval(trials, mean_score, level=1.5)
    with pytest.raises(DefinitionError, match=r"both trials and groups were given; pass "
                                              r"trials=None"):
        bootstrap_interval(trials, mean_score, groups=[trials, trials])
    with pytest.raises(DefinitionError, match=r"bootstrap_sme: n_boot: n_boot = 1 is not a "
                                              r"whole number >= 2"):
        bootstrap_sme(trials, mean_score, n_boot=1)
    with pytest.raises(InputDataError, match=r"groups\[1\]: groups\[1\] has shape \(1,\), "
                                             r"fewer than 2 trials"):
        bootstrap_sme(None, mean_score, groups=[trials, trials[:1]])
    with pytest.raises(ProcessingError, match=r"with batched=True score_fn returned shape "
                                              r"\(\) for 10 subsets"):
        bootstrap_sme(trials, np.mean, n_boot=10, batched=True)


# -- docs/REFERENCES.md F31: Clayson & Miller (2017); Lord & Novick (1968) --------------------------

# F31 classical test theory: reliability of an N-trial mean = sT^2 / (sT^2 + se^2 / N);
# sT = 1, se = 8, N = 100 -> 1 / (1 + 0.64) = 0.6098.
CTT_RELIABILITY = 1 / (1 + 8 ** 2 / 100)


def test_ctt_reliability_value():
    assert CTT_RELIABILITY == pytest.approx(0.6098, abs=5e-5)  # F31 rounded value


def test_cohort_odd_even_split_half(rng):
    # F31: 1000 simulated subjects -> SB-corrected odd/even split-half within 0.08 of
    # 0.6098 (F31 gives SD 0.055 across replicates for 200 subjects, ~0.025 for 1000, so
    # 0.08 is ~3 SD).
    trials = _cohort(rng)
    result = split_half(mean_score, trials, method="odd-even", batched=True)
    assert result["n_splits"] == 1
    assert result["r_sb"] == pytest.approx(CTT_RELIABILITY, abs=0.08)
    # The same as correlating the two half scores by hand (split_half_cohort); float
    # rounding only (1e-12). Unbatched gives the same numbers.
    by_hand = split_half_cohort(trials[:, 0::2].mean(axis=1), trials[:, 1::2].mean(axis=1))
    assert result["r_sb"] == pytest.approx(by_hand, abs=1e-12)
    assert split_half(np.mean, trials)["r_sb"] == pytest.approx(by_hand, abs=1e-12)
    assert result["r_sb"] == pytest.approx(spearman_brown(result["r_half"]), abs=1e-12)


def test_cohort_random_split_half(rng):
    # F31: the mean over many random (permutation) splits is also within 0.08 of 0.6098.
    trials = _cohort(rng)
    result = split_half(mean_score, trials, method="random", n_splits=100, rng=1,
                        batched=True)
    assert result["n_splits"] == 100 and result["r_sb_splits"].shape == (100,)
    assert result["r_sb"] == pytest.approx(CTT_RELIABILITY, abs=0.08)
    assert result["r_sb"] == pytest.approx(result["r_sb_splits"].mean(), abs=1e-12)
    # Same seed, one subject at a time and with unequal trial counts allowed: the same
    # splits, hence the same values (summation order only, 1e-12).
    few = trials[:40]
    batched = split_half(mean_score, few, method="random", n_splits=5, rng=3, batched=True)
    unbatched = split_half(np.mean, list(few), method="random", n_splits=5, rng=3)
    np.testing.assert_allclose(batched["r_sb_splits"], unbatched["r_sb_splits"], atol=1e-12)


def test_cohort_split_half_ragged_and_axis(rng):
    # Trial counts may differ between subjects; `axis` names the trial axis; vector
    # scores (two channels) give one reliability per channel. Channel 2 is pure noise
    # (no true-score variance) so its reliability is near 0 (+/- 0.2: ~3 SE of r for 60
    # subjects), channel 1 follows F31's CTT with N ~ 100 (+/- 0.25, ~3 SE at 60 subjects).
    subjects = []
    for n in rng.integers(90, 111, size=60):
        true = rng.standard_normal()
        channels = np.stack([true + 8 * rng.standard_normal(n), 8 * rng.standard_normal(n)])
        subjects.append(channels)  # shape (2 channels, n trials): trials on axis 1
    result = split_half(lambda t: t.mean(axis=0), subjects, method="random", n_splits=20,
                        rng=0, axis=1)
    assert result["r_sb"].shape == (2,)
    assert result["r_sb"][0] == pytest.approx(CTT_RELIABILITY, abs=0.25)
    assert abs(result["r_sb"][1]) < 0.2


def test_split_half_constant_score_is_nan_without_warning():
    # Common practice: a score with no variance across subjects has no correlation;
    # NaN, and no RuntimeWarning (pytest turns warnings into errors).
    assert np.isnan(split_half_cohort(np.ones(5), np.arange(5.0)))


def test_split_half_errors(rng):
    trials = rng.standard_normal((10, 20))
    with pytest.raises(DefinitionError, match=r'split_half: method: method = "odd_even" is '
                                              r'not one of odd-even, random \(did you mean '
                                              r'"odd-even"\?\)'):
        split_half(np.mean, trials, method="odd_even")
    with pytest.raises(DefinitionError, match=r"n_splits = 0 is not a whole number >= 1"):
        split_half(np.mean, trials, method="random", n_splits=0)
    with pytest.raises(InputDataError, match=r"split_half: trials: 2 subjects cannot give a "
                                             r"meaningful correlation"):
        split_half(np.mean, trials[:2])
    with pytest.raises(InputDataError, match=r"batched=True needs equal trial shapes"):
        split_half(mean_score, [trials[0], trials[1], trials[2, :15]], batched=True)
    with pytest.raises(InputDataError, match=r"subject 0 has trials of shape \(20,\) with no "
                                             r"axis 1"):
        split_half(np.mean, trials, axis=1)
    with pytest.raises(InputDataError, match=r"split_half_cohort: scores_b: scores_a has "
                                             r"shape \(10,\) but scores_b has shape \(9,\)"):
        split_half_cohort(trials[:, 0], trials[:9, 0])


# -- Subject-level precision: Clayson, Brush & Hajcak (2021) idea; F28 for the SME ----------


def test_recording_split_half_se_matches_analytic_sme(rng):
    # F28 + Clayson, Brush & Hajcak (2021): for the mean amplitude the split-half SE,
    # SD(A - B)/2, estimates the analytic SME. The brief's margin is 15 % on average over
    # simulations. Derived here: over random splits E[(A - B)^2] / 4 = s^2 / N with the
    # ddof=1 trial SD s, so the mean squared ratio is 1 to within its sampling error
    # (~10 % per recording over 200 splits, ~0.7 % over 200 recordings; 3 % is > 4 SE).
    recordings = 10 * UV * rng.standard_normal((200, 100))
    se = np.array([split_half_recording(x, mean_score, n_splits=200, seed=rng,
                                        batched=True)["se"] for x in recordings])
    analytic = sme_mean_amplitude(recordings.T)  # ddof=0, shape (200,)
    assert np.mean(se / analytic) == pytest.approx(1.0, rel=0.15)
    ddof1 = sme_mean_amplitude(recordings.T, ddof=1)
    assert np.mean(se ** 2 / ddof1 ** 2) == pytest.approx(1.0, rel=0.03)


def test_recording_odd_even_se_is_unbiased_in_variance(rng):
    # One odd/even split: |A - B| / 2 is a one-difference estimate, unbiased for SME^2
    # (E[(A - B)^2] = 4 sigma^2 / N for independent trials). RMS over 1000 recordings vs
    # RMS analytic SME within 15 % (the brief's margin; sampling error of the RMS ~2.2 %).
    recordings = 10 * UV * rng.standard_normal((1000, 100))
    se = np.array([split_half_recording(x, mean_score, method="odd-even")["se"]
                   for x in recordings])
    analytic = sme_mean_amplitude(recordings.T)
    assert np.sqrt(np.mean(se ** 2)) == pytest.approx(np.sqrt(np.mean(analytic ** 2)), rel=0.15)


def test_recording_reliability_with_between_var_matches_ctt(rng):
    # Clayson, Brush & Hajcak (2021) subject-level reliability: between-person variance /
    # (between-person + this subject's error variance). With sT^2 = 1 and each subject's
    # split-half SE^2 ~ 64/100, the cohort mean is F31's CTT 0.6098. Jensen bias ~0.002
    # and sampling SE ~0.002 over 300 subjects, so 0.01 is ~4 SE.
    trials = _cohort(rng, n_subjects=300)
    reliability = [split_half_recording(x, mean_score, seed=rng, batched=True,
                                        between_var=1.0)["reliability"] for x in trials]
    assert np.mean(reliability) == pytest.approx(CTT_RELIABILITY, abs=0.01)


def test_recording_reliability_without_cohort(rng):
    # Definition (documented): t = max(score^2 - se^2, 0), reliability = t / (t + se^2).
    # Expected value built without the function's own output: over many random half
    # splits of a mean amplitude, se^2 -> s^2 / n with the ddof=1 trial SD s (the
    # analytic SME of Luck et al. 2021, docs/REFERENCES.md F28, up to sqrt(n / (n - 1))).
    # With 4000 splits the split average of se^2 is within ~1 % of s^2 / n; the data
    # are chosen so that reliability is ~0.7, where a 1 % error in se^2 moves it < 0.005.
    x = 1 * UV + 4 * UV * np.random.default_rng(1).standard_normal(60)
    result = split_half_recording(x, mean_score, batched=True, n_splits=4000, seed=2)
    sme2 = x.var(ddof=1) / x.size
    expected = max(1 - sme2 / x.mean() ** 2, 0.0)
    assert 0.5 < expected < 0.9
    assert result["reliability"] == pytest.approx(expected, abs=0.01)
    # Analytic truths: trials symmetric about 0 (exact binary values, so the sum cancels
    # exactly) score 0 -> reliability 0; a large score with small noise -> near 1.
    whole = rng.integers(-10, 11, size=60) * 2.0 ** -20  # ~1 uV steps, exact in binary
    symmetric = split_half_recording(np.concatenate([whole, -whole]), mean_score, batched=True)
    assert symmetric["score"] == 0.0 and symmetric["reliability"] == 0.0
    strong = split_half_recording(50 * UV + 0.4 * UV * rng.standard_normal(60), mean_score, batched=True)
    assert strong["reliability"] > 0.999


def test_recording_split_half_shapes_and_batching(rng):
    # Vector scores (3 channels): halves (n_splits, 2, 3); batched equals one subset at a
    # time exactly (same split indices, same arithmetic per subset).
    trials = rng.standard_normal((41, 3))  # odd count: one trial left out of each split
    batched = split_half_recording(trials, mean_score, n_splits=30, seed=5, batched=True)
    single = split_half_recording(trials, mean_score, n_splits=30, seed=5)
    assert batched["halves"].shape == (30, 2, 3) and batched["n_splits"] == 30
    assert batched["se"].shape == batched["reliability"].shape == (3,)
    np.testing.assert_array_equal(batched["halves"], single["halves"])
    np.testing.assert_array_equal(batched["score"], trials.mean(axis=0))
    odd_even = split_half_recording(trials, mean_score, method="odd-even")
    assert odd_even["n_splits"] == 1
    np.testing.assert_array_equal(odd_even["halves"][0],
                                  [trials[0:40:2].mean(axis=0), trials[1:40:2].mean(axis=0)])
    # A known full-trial score gives the same result without scoring all trials again.
    known = split_half_recording(trials, mean_score, n_splits=30, seed=5, full_score=trials.mean(axis=0))
    for key in ("halves", "score", "se", "reliability"):
        np.testing.assert_allclose(known[key], single[key], rtol=1e-12)
    with pytest.raises(DefinitionError, match=r"full_score has shape \(2,\), the half scores \(3,\)"):
        split_half_recording(trials, mean_score, full_score=np.zeros(2))


def test_recording_split_half_errors(rng):
    trials = rng.standard_normal(30)
    with pytest.raises(InputDataError, match=r"split_half_recording: trials: trials has shape "
                                             r"\(1,\), fewer than 2 trials"):
        split_half_recording(trials[:1], mean_score)
    with pytest.raises(DefinitionError, match=r"between_var: between_var = -1.0 is not a "
                                              r"finite value >= 0"):
        split_half_recording(trials, mean_score, between_var=-1.0)
    with pytest.raises(DefinitionError, match=r'method = "halves" is not one of'):
        split_half_recording(trials, mean_score, method="halves")
    with pytest.raises(InputDataError, match=r"sme_mean_amplitude: window_means: window_means "
                                             r"has shape \(1,\), too few trials for ddof = 1"):
        sme_mean_amplitude(trials[:1], ddof=1)
