"""Cross-spectral density matrices, coherence, imaginary coherency and shrinkage.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>").
"""
import numpy as np
import pytest
import scipy.signal
from _helpers import AWKWARD_SFREQ, mne_notices_ignored, scipy_welch
from mne import time_frequency as mne_tf

from heschl.errors import DefinitionError, InputDataError
from heschl.numeric import welch_psd
from heschl.numeric.crossspectra import coherence, cross_spectra, imaginary_coherency, regularise


def _mixed_trials(rng, n_trials=6, n_times=1000):
    """Three channels in V; the third mixes the first two, so channels are coupled."""
    x = 10e-6 * rng.standard_normal((n_trials, 3, n_times))
    x[:, 2] = 0.6 * x[:, 0] - 0.4 * x[:, 1] + 0.2 * x[:, 2]
    return x


def _diagonal(csd):
    return np.diagonal(csd, axis1=-2, axis2=-1)  # (n_freqs, n_channels)


# -- structure of the CSD matrix (docs/REFERENCES.md F37) ---------------------------------------


def test_csd_is_hermitian_positive_semidefinite_with_the_welch_psd_on_its_diagonal(rng):
    # docs/REFERENCES.md F37 (Bendat & Piersol 2010; scipy.signal.csd / welch).
    x = _mixed_trials(rng)
    freqs, csd = cross_spectra(x, AWKWARD_SFREQ, segment=2.0, overlap=0.5)
    assert csd.shape == (freqs.size, 3, 3) and np.iscomplexobj(csd)
    scale = np.abs(csd).max()
    # Hermitian to 1e-12 of the largest entry (F37's tolerance, made relative: V^2/Hz
    # values are ~1e-12 themselves)
    assert np.abs(csd - np.conj(np.swapaxes(csd, -1, -2))).max() <= 1e-12 * scale
    eigenvalues = np.linalg.eigvalsh(csd)
    traces = np.real(np.trace(csd, axis1=-2, axis2=-1))
    assert np.all(eigenvalues >= -1e-12 * traces[:, None])  # PSD up to rounding, F37
    assert np.all(np.imag(_diagonal(csd)) == 0)  # auto-spectra are real, F37
    # diagonal == own Welch, averaged over trials, rel 1e-10 (F37; same periodograms)
    _, psd = welch_psd(x, AWKWARD_SFREQ, segment=2.0, overlap=0.5)
    np.testing.assert_allclose(np.real(_diagonal(csd)), psd.mean(axis=0).T, rtol=1e-10)
    # ... and == scipy.signal.welch with the same nperseg/noverlap/detrend (F37, F9)
    ref_f, ref_p, _ = scipy_welch(x, AWKWARD_SFREQ, segment=2.0, overlap=0.5)
    np.testing.assert_allclose(freqs, ref_f, rtol=1e-12)
    np.testing.assert_allclose(np.real(_diagonal(csd)), ref_p.mean(axis=0).T, rtol=1e-10)


def test_off_diagonals_equal_scipy_csd_of_channel_i_with_channel_j(rng):
    # docs/REFERENCES.md F37: scipy.signal.csd(x=channel i, y=channel j) as the reference,
    # including its conj(X_i) X_j order; rel 1e-10, the same sums in another order.
    x = _mixed_trials(rng, n_trials=1, n_times=1500)[0]
    nperseg = round(1.5 * AWKWARD_SFREQ)  # 155 samples, odd: no Nyquist bin
    freqs, csd = cross_spectra(x, AWKWARD_SFREQ, segment=1.5, overlap=0.75, fmin=4.0,
                               fmax=30.0, window="hamming")
    ref_f, ref = scipy.signal.csd(x[:, None, :], x[None, :, :], AWKWARD_SFREQ,
                                  window="hamming", nperseg=nperseg,
                                  noverlap=round(0.75 * nperseg), detrend="constant")
    keep = (ref_f >= 4.0) & (ref_f <= 30.0)
    np.testing.assert_allclose(freqs, ref_f[keep], rtol=1e-12)
    np.testing.assert_allclose(csd, np.moveaxis(ref[..., keep], -1, 0), rtol=1e-10,
                               atol=1e-10 * np.abs(ref).max())


def test_fewer_segments_than_channels_gives_rank_four_until_regularised(rng):
    # docs/REFERENCES.md F37: 8 white-noise channels, 4 non-overlapping segments -> rank 4.
    sfreq, nperseg = 250.0, 250
    x = 10e-6 * rng.standard_normal((8, 4 * nperseg))
    # fmin above 0 Hz: the mean removed from every segment leaves nothing at DC
    freqs, csd = cross_spectra(x, sfreq, segment=nperseg / sfreq, overlap=0.0, fmin=1.0)
    ranks = np.linalg.matrix_rank(csd, hermitian=True)  # default tol: max eig * 8 * eps
    assert np.all(ranks == 4)
    # Adding c * I shifts every eigenvalue by exactly c (algebra); rel 1e-10 of the
    # trace covers the eigen-solver's rounding.
    before = csd.copy()
    loaded = regularise(csd, 0.1)
    np.testing.assert_array_equal(csd, before)  # input untouched
    traces = np.real(np.trace(csd, axis1=-2, axis2=-1))
    shift = np.linalg.eigvalsh(loaded) - np.linalg.eigvalsh(csd)
    np.testing.assert_allclose(shift, np.broadcast_to(0.1 * traces[:, None] / 8, shift.shape),
                               rtol=0, atol=1e-10 * traces.max())
    assert np.all(np.linalg.matrix_rank(loaded, hermitian=True) == 8)
    np.testing.assert_array_equal(regularise(csd, 0.0), csd)


# -- mne as an independent reference (docs/REFERENCES.md F39) -----------------------------------


def test_csd_at_10_hz_matches_mne_csd_array_fourier(rng):
    # docs/REFERENCES.md F39: mne.time_frequency.csd_array_fourier, one whole-epoch FFT per
    # epoch, averaged over epochs -- our Welch with one segment per trial.
    sfreq, n_times = 250.0, 500  # 0.5 Hz bins; 10 Hz lies on a bin
    common = rng.standard_normal((40, 1, n_times))
    gains = np.array([1.0, -0.8, 0.6, 1.2])[:, None]  # a shared source: |S_ij| is large
    x = 10e-6 * (gains * common + 0.5 * rng.standard_normal((40, 4, n_times)))
    freqs, csd = cross_spectra(x, sfreq, segment=n_times / sfreq, fmin=10.0, fmax=10.0)
    assert freqs.tolist() == [10.0]
    with mne_notices_ignored():
        ref = mne_tf.csd_array_fourier(x, sfreq, fmin=9.9, fmax=10.1, n_fft=n_times,
                                       verbose=False).get_data(frequency=10.0)
    ours = csd[0]
    assert np.array_equal(ref, ref.conj().T) and np.array_equal(ours, ours.conj().T)
    # rtol 0.01 (F39): mne tapers with the symmetric Hann window (np.hanning) and
    # normalises by 3N/8, ours with the periodic Hann and sum(w^2); both remove each
    # epoch's mean, so only the window differs (0.5 % at most over 30 seeds here).
    np.testing.assert_allclose(np.abs(ours), np.abs(ref), rtol=0.01)
    # mne stores X_i conj(X_j), the conjugate of scipy's order used here
    np.testing.assert_allclose(ours, ref.conj(), rtol=0, atol=0.01 * np.abs(ref).max())


# -- coherence and imaginary coherency --------------------------------------------------


def test_coherence_of_a_scaled_copy_is_one_and_its_imaginary_coherency_zero(rng):
    # Definition |S_ij|^2 / (S_ii S_jj) (Bendat & Piersol 2010, docs/REFERENCES.md F37 source):
    # a channel and a scaled copy are perfectly coherent at zero lag.
    base = 10e-6 * rng.standard_normal(3000)
    x = np.stack([base, -2.5 * base, rng.standard_normal(3000) * 1e-6])
    freqs, csd = cross_spectra(x, AWKWARD_SFREQ, segment=2.0, fmin=0.5)
    coh = coherence(csd)
    np.testing.assert_allclose(coh[:, 0, 1], 1.0, rtol=1e-12)  # rounding only
    np.testing.assert_allclose(_diagonal(coh), 1.0, rtol=1e-12)
    icoh = imaginary_coherency(csd)
    assert np.abs(icoh[:, 0, 1]).max() < 1e-12  # dimensionless; rounding only
    np.testing.assert_array_equal(icoh, -np.swapaxes(icoh, -1, -2))  # antisymmetric
    assert coh.shape == csd.shape and np.all(coh <= 1 + 1e-12)


def test_coherence_of_independent_noise_sits_at_its_small_sample_bias(rng):
    # From memory (Bendat & Piersol 2010, docs/REFERENCES.md F37 source): for independent
    # Gaussian signals the coherence estimated from K independent segments has
    # expectation 1/K (it follows Beta(1, K - 1)).
    sfreq, nperseg, k = 250.0, 250, 20
    x = 10e-6 * rng.standard_normal((8, k * nperseg))
    _, csd = cross_spectra(x, sfreq, segment=nperseg / sfreq, overlap=0.0, fmin=1.0,
                           fmax=124.0)  # non-overlapping: the K segments are independent
    rows, cols = np.triu_indices(8, 1)
    coh = coherence(csd)[:, rows, cols]  # 124 bins x 28 pairs
    # rel 10 %: each value has sd ~ 1/K; ~3500 values, correlated between neighbouring
    # Hann bins, leave a standard error of about 3 % of 1/K (spread 2 % over 8 seeds).
    assert coh.mean() == pytest.approx(1 / k, rel=0.10)


def test_imaginary_coherency_of_a_quarter_cycle_lag_is_minus_one():
    # Definition Im(S_ij) / sqrt(S_ii S_jj) (imaginary part of coherency, Nolte et al.
    # 2004, from memory): channel 1 lags channel 0 by a quarter cycle, so
    # S_01 = conj(X_0) X_1 is proportional to exp(-i pi/2) and the value is -1.
    sfreq, freq = 256.0, 8.0  # a whole number of cycles per 1 s segment
    t = np.arange(int(10 * sfreq)) / sfreq
    x = 5e-6 * np.stack([np.sin(2 * np.pi * freq * t),
                         np.sin(2 * np.pi * freq * t - np.pi / 2)])
    freqs, csd = cross_spectra(x, sfreq, segment=1.0, fmin=freq, fmax=freq)
    icoh = imaginary_coherency(csd)[0]
    # 1e-9: noise-free, bin-centred tones; the image at -8 Hz leaks only rounding
    assert icoh[0, 1] == pytest.approx(-1.0, abs=1e-9)
    assert icoh[1, 0] == pytest.approx(1.0, abs=1e-9)
    assert coherence(csd)[0, 0, 1] == pytest.approx(1.0, abs=1e-9)


def test_silent_channel_gives_nan_coherence():
    # Documented: NaN where a channel has no power.
    csd = np.array([[[2.0, 0.0], [0.0, 0.0]]], dtype=complex)
    assert np.isnan(coherence(csd)[0, 0, 1]) and np.isnan(imaginary_coherency(csd)[0, 1, 0])
    assert coherence(csd)[0, 0, 0] == 1.0


# -- messages ---------------------------------------------------------------------------


@pytest.mark.parametrize("call, error, pattern", [
    (lambda x: cross_spectra(x[0, 0], 250.0, 1.0), InputDataError,
     r"cross_spectra: x: x has shape \(1000,\) and dtype float64; pass real signals shaped"),
    (lambda x: cross_spectra(x + 0j, 250.0, 1.0), InputDataError,
     r"x has shape \(2, 3, 1000\) and dtype complex128"),
    (lambda x: cross_spectra(x, -250.0, 1.0), DefinitionError,
     r"sfreq: sfreq = -250.0 Hz is not positive"),
    (lambda x: cross_spectra(x, 250.0, 0.004), DefinitionError,
     r"segment: segment = 0.004 s is 1 samples at 250 Hz"),
    (lambda x: cross_spectra(x, 250.0, 8.0), InputDataError,
     r"segment = 8 s \(2000 samples\) is longer than the data \(1000 samples, 4 s\)"),
    (lambda x: cross_spectra(x, 250.0, 1.0, overlap=1.0), DefinitionError,
     r"overlap: overlap = 1.0 is outside \[0, 1\)"),
    (lambda x: cross_spectra(x, 250.0, 1.0, window="hanning-ish"), DefinitionError,
     r"window: window = 'hanning-ish' is not a known window"),
    (lambda x: cross_spectra(x, 250.0, 1.0, fmin=10.2, fmax=10.8), DefinitionError,
     r"fmin: fmin = 10.2 Hz to fmax = 10.8 Hz holds no bin of the spectrum \(0 to 125 Hz "
     r"in steps of 1 Hz\); widen the range"),
    (lambda x: coherence(np.ones((4, 2, 3))), InputDataError,
     r"coherence: csd: csd has shape \(4, 2, 3\); pass matrices shaped"),
    (lambda x: regularise(np.eye(2), -0.1), DefinitionError,
     r"regularise: shrinkage: shrinkage = -0.1 is not a finite number >= 0"),
])
def test_errors_name_the_value_and_the_fix(rng, call, error, pattern):
    x = rng.standard_normal((2, 3, 1000))
    with pytest.raises(error, match=pattern):
        call(x)
