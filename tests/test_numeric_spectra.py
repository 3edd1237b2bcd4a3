"""Welch spectra, band power and SNR against neighbouring bins.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>").
"""
import warnings

import numpy as np
import pytest
import scipy.signal
import scipy.stats
from _helpers import AWKWARD_SFREQ, mne_notices_ignored, scipy_welch
from mne import time_frequency as mne_tf

from heschl.errors import DefinitionError, InputDataError
from heschl.numeric import band_power, relative_band_power, snr_neighbours, welch_psd


def _tone(amplitude, freq, sfreq, duration):
    t = np.arange(int(round(duration * sfreq))) / sfreq
    return amplitude * np.sin(2 * np.pi * freq * t)


# -- Welch (docs/REFERENCES.md F9, F13) ---------------------------------------------------------


def test_welch_equals_scipy_welch_at_awkward_sfreq(rng):
    # docs/REFERENCES.md F9: scipy.signal.welch as reference (Welch 1967), identical parameters.
    x = 10e-6 * rng.standard_normal((3, 2, 3000))
    freqs, psd = welch_psd(x, AWKWARD_SFREQ, segment=2.0, overlap=0.5)
    ref_f, ref_p, nperseg = scipy_welch(x, AWKWARD_SFREQ, segment=2.0, overlap=0.5)
    assert nperseg == 206  # samples
    np.testing.assert_allclose(freqs, ref_f, rtol=1e-12)
    np.testing.assert_allclose(psd, ref_p, rtol=1e-12)
    assert psd.shape == (3, 2, nperseg // 2 + 1)


def test_welch_and_band_power_match_mne_psd_array_welch(rng):
    # docs/REFERENCES.md F13: mne.time_frequency.psd_array_welch equals scipy's Welch to ~1e-15.
    sfreq, n = 250.0, 500
    x = 10e-6 * rng.standard_normal((4, 15000))
    freqs, psd = welch_psd(x, sfreq, segment=n / sfreq)
    with mne_notices_ignored():
        ref_p, ref_f = mne_tf.psd_array_welch(x, sfreq, n_fft=n, n_per_seg=n,
                                              n_overlap=n // 2, window="hann",
                                              average="mean", verbose=False)
    np.testing.assert_allclose(freqs, ref_f, rtol=1e-12)
    # rtol 1e-9: both are the same averaged periodogram; only rounding differs
    np.testing.assert_allclose(band_power(freqs, psd, (8.0, 13.0)),
                               band_power(ref_f, ref_p, (8.0, 13.0)), rtol=1e-9)


def test_scipy_docstring_example_noise_floor_and_tone(rng):
    # docs/REFERENCES.md F9: scipy.signal.welch docstring example -- 2 Vrms at 1234 Hz plus
    # 0.001 V^2/Hz white noise, fs 10 kHz, 1e5 samples, nperseg 1024.
    fs, n = 10e3, 100_000
    t = np.arange(n) / fs
    x = 2 * np.sqrt(2) * np.sin(2 * np.pi * 1234 * t)
    x = x + rng.normal(scale=np.sqrt(0.001 * fs / 2), size=n)
    freqs, psd = welch_psd(x, fs, segment=1024 / fs)
    assert psd[256:].mean() == pytest.approx(0.001, rel=0.03)  # noise floor, 3 %
    _, flat = welch_psd(x, fs, segment=1024 / fs, window="flattop")
    w = scipy.signal.get_window("flattop", 1024)
    spectrum = flat * fs * np.sum(w**2) / np.sum(w) ** 2  # density -> power per bin
    assert np.sqrt(spectrum.max()) == pytest.approx(2.0, rel=0.02)  # Vrms, within 2 %


def test_segment_longer_than_data_is_refused():
    with pytest.raises(InputDataError, match=r"segment = 4 s \(1000 samples\) is longer than "
                                             r"the data \(500 samples, 2 s\)"):
        welch_psd(np.zeros(500), 250.0, segment=4.0)


@pytest.mark.parametrize(("kwargs", "pattern"), [
    ({"segment": 0.001}, r"segment = 0.001 s is 0 samples"),
    ({"segment": 1.0, "overlap": 1.0}, r"overlap = 1.0 is outside \[0, 1\)"),
    ({"segment": 1.0, "sfreq": 0.0}, r"sfreq = 0.0 Hz is not positive"),
    ({"segment": 1.0, "window": "hanning"}, r"window = 'hanning' is not a known window"),
])
def test_bad_welch_parameters_are_refused(kwargs, pattern):
    kwargs = {"sfreq": 250.0, **kwargs}
    with pytest.raises(DefinitionError, match=pattern):
        welch_psd(np.zeros(1000), **kwargs)


# -- band power (docs/REFERENCES.md F10, F11, F14) ---------------------------------------------


def test_band_power_of_sinusoid_is_half_amplitude_squared():
    # docs/REFERENCES.md F10: fact of the trade (Oppenheim & Schafer): mean power of A sin is
    # A^2/2; A = 5, 40 Hz, fs 500, nperseg 500, band 38-42 Hz -> 12.5 V^2.
    freqs, psd = welch_psd(_tone(5.0, 40.0, 500.0, 10.0), 500.0, segment=1.0)
    assert band_power(freqs, psd, (38.0, 42.0)) == pytest.approx(12.5, rel=1e-9)
    # docs/REFERENCES.md F10 / F12 (Harris 1978): density peak = 12.5 / (ENBW 1.5 bins * 1 Hz)
    assert psd.max() == pytest.approx(12.5 / 1.5, rel=1e-9)


@pytest.mark.parametrize(("closed", "bins"), [
    ("left", (0.25, 1.0)), ("right", (1.0, 0.25)), ("both", (0.25, 1.0, 0.25)),
    ("neither", (1.0,)),
])
def test_band_edges_follow_the_closure(closed, bins):
    # A bin-centred Hann tone puts 1/1.5 of its power in its bin and 0.25/1.5 in each
    # neighbour (docs/REFERENCES.md F12: periodic Hann, ENBW 1.5 bins), so band 39-41 Hz picks
    # a known share depending on which edge bins (39 and 41 Hz) belong to it.
    freqs, psd = welch_psd(_tone(5.0, 40.0, 500.0, 10.0), 500.0, segment=1.0)
    expected = 12.5 * sum(bins) / 1.5
    assert band_power(freqs, psd, (39.0, 41.0), closed=closed) == pytest.approx(expected,
                                                                                 rel=1e-9)


def test_bin_on_an_edge_despite_rounding_of_the_grid():
    # 7.999999999999998 Hz must count as the 8 Hz edge (left-closed alpha band starts
    # at 8 Hz; docs/REFERENCES.md F14 edge convention, lower edge included).
    freqs = np.arange(0, 40) * 0.5 + np.where(np.arange(40) == 16, -2e-15, 0.0)
    psd = np.ones(40)
    assert band_power(freqs, psd, (8.0, 13.0)) == pytest.approx(10 * 0.5)
    assert band_power(freqs, psd, (4.0, 8.0)) == pytest.approx(8 * 0.5)


def test_parseval_density_integrates_to_variance(rng):
    # docs/REFERENCES.md F11: Parseval's theorem (Oppenheim & Schafer; from memory, recomputed
    # there): white noise sd 3, 200000 samples, fs 500, nperseg 1000 -> within 1 %.
    x = 3.0 * rng.standard_normal(200_000)
    freqs, psd = welch_psd(x, 500.0, segment=2.0)
    assert band_power(freqs, psd, (0.0, 250.0), closed="both") == pytest.approx(x.var(),
                                                                                 rel=0.01)


def test_eyes_closed_over_eyes_open_alpha_ratio(rng):
    # docs/REFERENCES.md F15: Berger 1929; Barry et al. 2007 -- fs 250 Hz, 60 s, 20 uV vs 20/3 uV
    # 10 Hz alpha, nperseg 500: ratio 9 noise-free; with 5 uV white noise 8.3-9.0 over
    # 20 seeds (recomputed there); alpha peak in 9.5-10.5 Hz.
    closed_eyes, open_eyes = _tone(20e-6, 10.0, 250.0, 60.0), _tone(20e-6 / 3, 10.0, 250.0, 60.0)
    freqs, psd = welch_psd(np.stack([closed_eyes, open_eyes]), 250.0, segment=2.0)
    alpha = band_power(freqs, psd, (8.0, 13.0))
    assert alpha[0] / alpha[1] == pytest.approx(9.0, rel=1e-9)
    assert relative_band_power(freqs, psd, (8.0, 13.0), (1.0, 45.0))[0] == pytest.approx(1.0)
    noise = 5e-6 * rng.standard_normal((2, closed_eyes.size))
    freqs, psd = welch_psd(np.stack([closed_eyes, open_eyes]) + noise, 250.0, segment=2.0)
    alpha = band_power(freqs, psd, (8.0, 13.0))
    assert 8.3 <= alpha[0] / alpha[1] <= 9.0
    in_alpha = (freqs >= 8.0) & (freqs < 13.0)
    assert 9.5 <= freqs[in_alpha][np.argmax(psd[0, in_alpha])] <= 10.5


def test_relative_band_power_of_a_flat_channel_is_nan_without_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        value = relative_band_power(np.arange(50) * 0.5, np.zeros((2, 50)), (8, 13), (1, 20))
    assert np.isnan(value).all()


@pytest.mark.parametrize(("call", "error", "pattern"), [
    (lambda f, p: band_power(f, p, (8, 13), closed="lft"), DefinitionError,
     r'closed = "lft" is not one of left, right, both, neither \(did you mean "left"\?\)'),
    (lambda f, p: band_power(f, p, (13, 8)), DefinitionError, r"band \[13, 8\] Hz is empty"),
    (lambda f, p: band_power(f, p, (8.1, 8.4)), DefinitionError, r"holds no bin"),
    (lambda f, p: band_power(f[::-1], p, (8, 13)), InputDataError, r"not evenly spaced"),
    (lambda f, p: band_power(f, p[:-1], (8, 13)), InputDataError, r"psd has shape \(49,\)"),
    (lambda f, p: relative_band_power(f, p, (8, 13), (10, 20)), DefinitionError,
     r"band \[8, 13\] Hz is not inside the total band \[10, 20\] Hz"),
])
def test_bad_band_arguments_are_refused(call, error, pattern):
    with pytest.raises(error, match=pattern):
        call(np.arange(50) * 0.5, np.ones(50))


# -- SNR against neighbours (docs/REFERENCES.md F25) --------------------------------------------


def _noise_spectra(rng, n_draws, n_segments=1):
    """Rectangular-window periodograms of white noise: independent bins (fs 500, 2 s)."""
    x = rng.standard_normal((n_draws, 1000 * n_segments))
    return welch_psd(x, 500.0, segment=2.0, overlap=0.0, window="boxcar")


def test_snr_null_mean_and_f_distribution(rng):
    # docs/REFERENCES.md F25: Dobie & Wilson 1996; mne frequency-tagging tutorial -- under noise
    # SNR ~ F(2, 2K), mean 2K/(2K-2) = 1.2 for K = 6 (3 + 3 neighbours, skip 1).
    freqs, psd = _noise_spectra(rng, 20000)
    snr, p = snr_neighbours(freqs, psd, 40.0, n_neighbours=3, skip=1)
    null = scipy.stats.f(2, 12)
    assert abs(snr.mean() - 1.2) < 3 * np.sqrt(null.var() / snr.size)  # 3 SE = 0.031
    assert scipy.stats.kstest(snr, null.cdf).pvalue > 0.01
    np.testing.assert_allclose(p, null.sf(snr), rtol=1e-12)


def test_snr_of_averaged_periodograms_follows_wider_f_law(rng):
    # docs/REFERENCES.md F25: averages of M independent periodograms -> F(2M, 2MK).
    freqs, psd = _noise_spectra(rng, 5000, n_segments=4)
    snr, _ = snr_neighbours(freqs, psd, 40.0, n_averages=4)
    assert scipy.stats.kstest(snr, scipy.stats.f(8, 48).cdf).pvalue > 0.01


def test_snr_p_value_reference_points():
    # docs/REFERENCES.md F25: scipy.stats.f(2, 12).sf(10) = 0.00278, sf(30) = 2.14e-5.
    freqs = np.arange(20) * 1.0
    power = np.ones((2, 20))
    power[:, 10] = [10.0, 30.0]
    snr, p = snr_neighbours(freqs, power, 10.0)
    np.testing.assert_allclose(snr, [10.0, 30.0], rtol=1e-12)
    np.testing.assert_allclose(p, [0.00278, 2.14e-5], rtol=2e-3)  # given to 3 digits


def test_strong_40hz_tone_is_detected(rng):
    # docs/REFERENCES.md F25: a strong synthetic 40 Hz tone gives p < 1e-4.
    x = _tone(1.0, 40.0, 500.0, 2.0) + rng.standard_normal(1000)
    freqs, psd = welch_psd(x, 500.0, segment=2.0, window="boxcar")
    snr, p = snr_neighbours(freqs, psd, 40.0)
    assert p < 1e-4


@pytest.mark.parametrize(("kwargs", "pattern"), [
    ({"f0": 40.2}, r"f0 = 40.2 Hz falls between bins \(nearest 40 Hz, spacing 0.5 Hz\)"),
    ({"f0": 1.0}, r"neighbours of f0 = 1 Hz reach beyond the spectrum"),
    ({"f0": 40.0, "skip": -1}, r"skip = -1 is not a whole number >= 0"),
    ({"f0": 40.0, "n_neighbours": 0}, r"n_neighbours = 0 is not a whole number >= 1"),
])
def test_bad_snr_arguments_are_refused(kwargs, pattern):
    freqs = np.arange(201) * 0.5
    with pytest.raises(DefinitionError, match=pattern):
        snr_neighbours(freqs, np.ones(201), **kwargs)
    with pytest.raises(InputDataError, match=r"power has shape \(200,\) but freqs has 201"):
        snr_neighbours(freqs, np.ones(200), 40.0)
