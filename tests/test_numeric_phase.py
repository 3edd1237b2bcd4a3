"""Morlet transform, ITPC, evoked/induced power, PPC and Rayleigh statistics.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>").
"""
import warnings

import numpy as np
import pytest
import scipy.special
import scipy.stats
from _helpers import AWKWARD_SFREQ, mne_notices_ignored
from mne import time_frequency as mne_tf

from heschl.errors import DefinitionError, InputDataError
from heschl.numeric import (
    band_power,
    evoked_power,
    induced_power,
    itpc,
    itpc_critical,
    morlet_transform,
    morlet_wavelet,
    pairwise_phase_consistency,
    rayleigh,
    total_power,
    welch_psd,
)

WORKED_ANGLES = np.array([0.785, 1.570, 3.141, 0.839, 5.934])  # rad, docs/REFERENCES.md F4


def _phase_locked_trials(rng, n_trials=60, sfreq=500.0, duration=1.5, freq=40.0):
    t = np.arange(int(round(duration * sfreq))) / sfreq
    clean = np.sin(2 * np.pi * freq * t)
    return t, clean + 0.01 * rng.standard_normal((n_trials, t.size))


# -- the transform ---------------------------------------------------------------------


def test_sinusoid_gives_rms_amplitude_and_cosine_phase():
    # Documented normalisation: |coef| = A / sqrt(2) and angle = cosine phase.
    amplitude, freq, phi = 20e-6, 13.0, 0.7  # V, Hz, rad
    t = np.arange(int(6 * AWKWARD_SFREQ)) / AWKWARD_SFREQ
    x = amplitude * np.cos(2 * np.pi * freq * t + phi)
    coefs = morlet_transform(x, AWKWARD_SFREQ, [freq])[0]
    inner = slice(t.size // 3, 2 * t.size // 3)  # > 5 envelope sd (0.43 s) from both ends
    # rtol 1e-6: cutting the Gaussian at +/- 5 sd leaves a tail mass of
    # erfc(5 / sqrt(2)) = 6e-7, which leaks the sinusoid's negative-frequency image.
    np.testing.assert_allclose(np.abs(coefs[inner]), amplitude / np.sqrt(2), rtol=1e-6)
    phase_error = np.angle(coefs[inner] * np.exp(-1j * (2 * np.pi * freq * t[inner] + phi)))
    assert np.max(np.abs(phase_error)) < 1e-5  # rad; same leakage, as an angle


def test_morlet_power_equals_welch_band_power_of_a_sinusoid():
    # Both give the mean power A^2 / 2 of a sinusoid (docs/REFERENCES.md F10: A = 5 -> 12.5 V^2).
    sfreq, amplitude = 500.0, 5.0
    t = np.arange(5000) / sfreq
    x = amplitude * np.sin(2 * np.pi * 40.0 * t)
    power = np.abs(morlet_transform(x, sfreq, [40.0])[0, 2500]) ** 2
    freqs, psd = welch_psd(x, sfreq, segment=1.0)
    assert band_power(freqs, psd, (38.0, 42.0)) == pytest.approx(12.5, rel=1e-9)
    assert power == pytest.approx(12.5, rel=2e-6)  # rel 2e-6: twice the 1e-6 amplitude leak


def test_transform_equals_direct_same_convolution_on_every_leading_axis(rng):
    x = rng.standard_normal((2, 3, 300))
    freqs = np.array([8.0, 21.5, 40.0])
    coefs = morlet_transform(x, AWKWARD_SFREQ, freqs, n_cycles=[3.0, 5.0, 7.0])
    assert coefs.shape == (2, 3, 3, 300)
    for j, (f, c) in enumerate(zip(freqs, [3.0, 5.0, 7.0])):
        w = morlet_wavelet(AWKWARD_SFREQ, f, c)
        direct = np.convolve(x[1, 2], w, mode="same")
        # atol 1e-12 on unit-variance data: FFT rounding only
        np.testing.assert_allclose(coefs[1, 2, j], direct, rtol=0, atol=1e-12)


def test_wavelet_shape_and_normalisation():
    w = morlet_wavelet(AWKWARD_SFREQ, 10.0, n_cycles=7.0)
    sd = 7.0 / (2 * np.pi * 10.0)
    assert w.size == 2 * int(np.floor(5 * sd * AWKWARD_SFREQ)) + 1
    assert np.abs(w).sum() == pytest.approx(np.sqrt(2), rel=1e-12)
    assert np.argmax(np.abs(w)) == w.size // 2  # centre sample is t = 0


def test_wavelet_longer_than_signal_is_refused():
    with pytest.raises(InputDataError, match=r"4 Hz wavelet spans \d+ samples but the signal"):
        morlet_transform(np.zeros(200), 250.0, [4.0, 40.0])


@pytest.mark.parametrize("freqs", [[0.0], [-5.0], [125.0], [300.0]])
def test_frequencies_outside_nyquist_range_are_refused(freqs):
    with pytest.raises(DefinitionError, match=r"outside \(0, 125\) Hz"):
        morlet_transform(np.zeros(1000), 250.0, freqs)


@pytest.mark.parametrize(("call", "error", "pattern"), [
    (lambda: morlet_transform(np.zeros(1000), -250.0, [10.0]), DefinitionError,
     r"sfreq: sfreq = -250.0 Hz is not a positive number"),
    (lambda: morlet_transform(np.zeros(1000), 250.0, [10.0], n_cycles=0), DefinitionError,
     r"n_cycles = 0 must be positive"),
    (lambda: morlet_transform(np.zeros(1000), 250.0, [10.0, 20.0], n_cycles=[3, 4, 5]),
     DefinitionError, r"one per frequency \(2\)"),
    (lambda: morlet_transform(np.zeros(1000), 250.0, []), DefinitionError,
     r"freqs has shape \(0,\)"),
    (lambda: morlet_transform(np.float64(1.0), 250.0, [10.0]), InputDataError,
     r"x has shape \(\); pass signals with time on the last axis"),
    (lambda: morlet_wavelet(250.0, [10.0, 20.0]), DefinitionError, r"freq has 2 values"),
])
def test_bad_transform_arguments_are_refused(call, error, pattern):
    with pytest.raises(error, match=pattern):
        call()


# -- ITPC ------------------------------------------------------------------------------


def test_itpc_of_phase_locked_trials_is_one(rng):
    # docs/REFERENCES.md F1: Tallon-Baudry et al. 1996 -- ITPC = 1 for identical phases;
    # 60 trials, 40 Hz, 1 % noise, fs 500 Hz, 1.5 s: >= 0.999 in the steady part.
    t, trials = _phase_locked_trials(rng)
    coefs = morlet_transform(trials, 500.0, [40.0])[:, 0]
    steady = (t >= 0.2) & (t <= 1.3)  # 7-cycle wavelet: 5 sd = 0.14 s from the ends
    assert itpc(coefs)[steady].min() >= 0.999


def test_itpc_equals_one_minus_circular_variance(rng):
    # docs/REFERENCES.md F1: Fisher 1993 mean resultant length; scipy.stats.circvar and
    # scipy.stats.directional_stats as references.
    angles = rng.uniform(-np.pi, np.pi, size=(37, 4)) * rng.uniform(0, 1, size=4)
    r = itpc(np.exp(1j * angles))
    np.testing.assert_allclose(r, 1 - scipy.stats.circvar(angles, axis=0), rtol=0, atol=1e-12)
    vectors = np.stack([np.cos(angles[:, 0]), np.sin(angles[:, 0])], axis=1)
    reference = scipy.stats.directional_stats(vectors).mean_resultant_length
    assert r[0] == pytest.approx(reference, abs=1e-12)
    # docs/REFERENCES.md F1/F4 worked angles: R = 0.497230 (recomputed there)
    assert itpc(np.exp(1j * WORKED_ANGLES)) == pytest.approx(0.497230, abs=1e-6)


def test_itpc_matches_mne_tfr_array_morlet(rng):
    # docs/REFERENCES.md F1: mne.time_frequency.tfr_array_morlet(output='itc') as reference.
    sfreq, n_times = 250.0, 500
    t = np.arange(n_times) / sfreq
    phases = rng.vonmises(0.0, 1.5, size=(30, 2, 1))
    data = np.cos(2 * np.pi * 10.0 * t + phases) + 0.8 * rng.standard_normal((30, 2, n_times))
    freqs = np.array([10.0, 40.0])
    own = itpc(morlet_transform(data, sfreq, freqs), axis=0)
    with mne_notices_ignored():
        ref = mne_tf.tfr_array_morlet(data, sfreq, freqs, n_cycles=7.0, zero_mean=False,
                                      output="itc", verbose=False)
    # atol 1e-6 (dimensionless ITPC): both use a Gaussian of sd n_cycles / (2 pi f) cut
    # near +/- 5 sd; ITPC ignores the overall scale, and the support may differ by one
    # sample at the cut, where the envelope is exp(-12.5) = 4e-6 of its peak.
    np.testing.assert_allclose(own, ref, rtol=0, atol=1e-6)


def test_itpc_of_zero_coefficients_is_zero_not_nan():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert itpc(np.zeros((10, 3), dtype=complex)).tolist() == [0.0, 0.0, 0.0]


def test_missing_trial_axis_is_refused():
    with pytest.raises(DefinitionError, match="axis 3 does not exist"):
        itpc(np.ones((4, 5), dtype=complex), axis=3)


# -- null distribution (docs/REFERENCES.md F2) --------------------------------------------------


@pytest.mark.parametrize("n", [5, 20, 60])
def test_mean_squared_itpc_is_one_over_n_under_uniform_phases(rng, n):
    # docs/REFERENCES.md F2: Fisher 1993 ch. 4 -- E[R^2] = 1/N exactly for uniform phases
    # (formula from memory there; checked here by Monte-Carlo within 3 standard errors).
    r2 = itpc(np.exp(1j * rng.uniform(0, 2 * np.pi, size=(n, 20000))), axis=0) ** 2
    se = r2.std(ddof=1) / np.sqrt(r2.size)
    assert abs(r2.mean() - 1 / n) < 3 * se


def test_itpc_null_follows_rayleigh_distribution(rng):
    # docs/REFERENCES.md F2: R ~ Rayleigh(scale 1/sqrt(2N)) for N >= 20; scipy.stats.rayleigh
    # as reference; E[R] = sqrt(pi / (4N)) within 1 % (approximation error < 0.5 % there).
    n = 20
    r = itpc(np.exp(1j * rng.uniform(0, 2 * np.pi, size=(n, 20000))), axis=0)
    assert scipy.stats.kstest(r, scipy.stats.rayleigh(scale=1 / np.sqrt(2 * n)).cdf).pvalue > 0.01
    assert abs(r.mean() / np.sqrt(np.pi / (4 * n)) - 1) < 0.01


def test_itpc_of_random_phase_sinusoids_through_the_transform(rng):
    # docs/REFERENCES.md F2: E[ITPC^2] = 1/N, averaged over many simulated experiments (a single
    # draw is not enough); here 2000 experiments of N = 20 trials of a 40 Hz sinusoid.
    n, sfreq = 20, 500.0
    t = np.arange(150) / sfreq  # just longer than the 139-sample wavelet
    phases = rng.uniform(0, 2 * np.pi, size=(n, 2000, 1))
    coefs = morlet_transform(np.cos(2 * np.pi * 40.0 * t + phases), sfreq, [40.0])
    r2 = itpc(coefs[..., 0, 75], axis=0) ** 2
    assert abs(r2.mean() - 1 / n) < 3 * r2.std(ddof=1) / np.sqrt(r2.size)


# -- evoked, total, induced (docs/REFERENCES.md F3) --------------------------------------------


def test_evoked_over_total_equals_itpc_squared_for_equal_amplitudes(rng):
    # docs/REFERENCES.md F3: Tallon-Baudry & Bertrand 1999 (definitions from memory; identity
    # recomputed there): evoked/total = ITPC^2 when all trials have equal amplitude.
    amplitude = 3e-6  # V
    coefs = amplitude * np.exp(1j * rng.vonmises(0.0, 2.0, size=(40, 5)))
    ratio = evoked_power(coefs) / total_power(coefs)
    np.testing.assert_allclose(ratio, itpc(coefs) ** 2, rtol=0, atol=1e-10)
    np.testing.assert_allclose(total_power(coefs), amplitude**2, rtol=1e-12)
    np.testing.assert_allclose(induced_power(coefs), total_power(coefs) - evoked_power(coefs),
                               rtol=0, atol=1e-10 * amplitude**2)


def test_identical_trials_have_no_induced_power(rng):
    # docs/REFERENCES.md F3: perfect phase locking -> induced = 0, evoked = total.
    t, trials = _phase_locked_trials(rng)
    coefs = morlet_transform(np.repeat(trials[:1], 25, axis=0), 500.0, [40.0])
    total = total_power(coefs)
    assert np.max(induced_power(coefs) / total) < 1e-10
    assert np.all(induced_power(coefs) >= 0)


def test_induced_power_is_power_of_trials_minus_their_average(rng):
    # Linearity of the transform (documented in induced_power).
    coefs = rng.standard_normal((12, 7)) + 1j * rng.standard_normal((12, 7))
    residual = total_power(coefs - coefs.mean(axis=0))
    np.testing.assert_allclose(induced_power(coefs), residual, rtol=1e-12)


def test_evoked_share_is_one_over_n_under_uniform_phases(rng):
    # docs/REFERENCES.md F3: uniform random phases -> E[evoked] = total / N; mean over 2000
    # simulated experiments within 5 % of 1/N.
    n = 30
    coefs = np.exp(1j * rng.uniform(0, 2 * np.pi, size=(n, 2000)))
    ratio = evoked_power(coefs) / total_power(coefs)
    assert ratio.mean() == pytest.approx(1 / n, rel=0.05)


# -- pairwise phase consistency (docs/REFERENCES.md F40) ----------------------------------------


def test_ppc_closed_form_equals_pairwise_sum(rng):
    # docs/REFERENCES.md F40: Vinck et al. 2010 -- PPC = mean over pairs of cos(theta_j - theta_k).
    angles = rng.uniform(-np.pi, np.pi, size=(23, 6))
    j, k = np.triu_indices(23, k=1)
    pairwise = np.cos(angles[j] - angles[k]).mean(axis=0)
    np.testing.assert_allclose(pairwise_phase_consistency(angles), pairwise, rtol=0, atol=1e-12)
    coefs = rng.uniform(0.5, 2.0, size=angles.shape) * np.exp(1j * angles)
    np.testing.assert_allclose(pairwise_phase_consistency(coefs), pairwise, rtol=0, atol=1e-12)


@pytest.mark.parametrize("n", [5, 20, 100])
def test_ppc_is_unbiased_under_uniform_phases(rng, n):
    # docs/REFERENCES.md F40: E[PPC] = 0 for every N under uniform phases, within 3 SE.
    ppc = pairwise_phase_consistency(rng.uniform(0, 2 * np.pi, size=(n, 20000)))
    assert abs(ppc.mean()) < 3 * ppc.std(ddof=1) / np.sqrt(ppc.size)


def test_ppc_estimates_squared_population_resultant_length(rng):
    # docs/REFERENCES.md F40: von Mises kappa = 2 -> rho = I1(2)/I0(2) = 0.6978, E[PPC] = rho^2.
    rho = scipy.special.i1(2.0) / scipy.special.i0(2.0)
    assert rho == pytest.approx(0.6978, abs=1e-4)
    ppc = pairwise_phase_consistency(rng.vonmises(0.0, 2.0, size=(15, 20000)))
    assert abs(ppc.mean() - rho**2) < 3 * ppc.std(ddof=1) / np.sqrt(ppc.size)


def test_ppc_needs_two_trials():
    with pytest.raises(InputDataError, match="1 trials along axis 0, at least 2 needed"):
        pairwise_phase_consistency(np.zeros((1, 4)))


# -- Rayleigh test and critical ITPC (docs/REFERENCES.md F4, F8) --------------------------------


def test_rayleigh_worked_example():
    # docs/REFERENCES.md F4: Zar, Biostatistical Analysis (eqs. 27.1-27.2 and p-value
    # approximation); pingouin circ_rayleigh docs example: Z = 1.236, p = 0.304844.
    z, p = rayleigh(WORKED_ANGLES)
    assert z == pytest.approx(1.236, abs=5e-4)  # printed to 3 decimals
    assert z == pytest.approx(1.23619, abs=1e-5)  # recomputed value in docs/REFERENCES.md F4
    assert p == pytest.approx(0.304844, abs=1e-6)
    assert np.exp(-z) == pytest.approx(0.2905, abs=1e-4)  # large-N form, not implemented


def test_rayleigh_from_itpc_and_n_matches_angles(rng):
    angles = rng.uniform(0, 2 * np.pi, size=(50, 8)) * rng.uniform(0.1, 1, size=8)
    z_angles, p_angles = rayleigh(angles)
    z_r, p_r = rayleigh(itpc(np.exp(1j * angles)), n=50)
    np.testing.assert_allclose(z_r, z_angles, rtol=1e-12)
    np.testing.assert_allclose(p_r, p_angles, rtol=1e-12)
    assert rayleigh(0.0, n=10)[1] == 1.0  # no resultant: p = 1 exactly


def test_rayleigh_refuses_bad_r_and_n():
    with pytest.raises(DefinitionError, match=r"R values outside \[0, 1\]"):
        rayleigh(1.5, n=10)
    with pytest.raises(DefinitionError, match="n = \\[2.5\\] is not a whole number"):
        rayleigh(0.3, n=[2.5])


@pytest.mark.parametrize(("n", "alpha", "expected"),
                         [(20, 0.05, 0.387), (50, 0.05, 0.245), (100, 0.05, 0.173),
                          (100, 0.01, 0.215)])
def test_itpc_critical_values(n, alpha, expected):
    # docs/REFERENCES.md F8: Cohen 2014 (book values from memory; recomputed there).
    assert itpc_critical(n, alpha) == pytest.approx(expected, abs=1e-3)


@pytest.mark.parametrize("n", [50, 100])
def test_itpc_critical_false_positive_rate(rng, n):
    # docs/REFERENCES.md F8: false-positive rate of ITPC > R_crit under uniform phases is
    # alpha within +/- 20 % relative for N >= 50 (recomputed there: 0.0489, 0.0493).
    r = itpc(np.exp(1j * rng.uniform(0, 2 * np.pi, size=(n, 20000))), axis=0)
    assert np.mean(r > itpc_critical(n, 0.05)) == pytest.approx(0.05, rel=0.2)


def test_itpc_critical_refuses_bad_alpha_and_n():
    with pytest.raises(DefinitionError, match=r"alpha = 1.5 is outside \(0, 1\)"):
        itpc_critical(20, alpha=1.5)
    with pytest.raises(DefinitionError, match=r"n = 0.0 is below 1"):
        itpc_critical(0)
