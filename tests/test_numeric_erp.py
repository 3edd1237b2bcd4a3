"""Mean amplitude, peak and region average on a synthetic mismatch negativity.

External facts are named beside each assertion with their REFERENCES.md entry
(docs/REFERENCES.md, "F<n>").
"""
import numpy as np
import pytest
import scipy.stats
from _helpers import AWKWARD_SFREQ

from heschl.errors import DefinitionError, InputDataError
from heschl.numeric import mean_amplitude, peak, region_mean

CHANNELS = ["Fz", "Cz", "Pz"]
SCALES = np.array([1.0, 0.8, 0.3])  # docs/REFERENCES.md F18: fronto-central maximum
MMN_PEAK, MMN_SD, MMN_AMPLITUDE = 0.180, 0.030, -2e-6  # s, s, V (docs/REFERENCES.md F18)


def _times(sfreq, tmin=-0.1, tmax=0.5):
    """Epoch time axis with a sample at 0 s."""
    return np.arange(int(np.ceil(tmin * sfreq)), int(np.floor(tmax * sfreq)) + 1) / sfreq


def _mmn(times):
    """Noise-free deviant waveforms, shape (3 channels, n_times), V."""
    shape = np.exp(-0.5 * ((times - MMN_PEAK) / MMN_SD) ** 2)
    return MMN_AMPLITUDE * SCALES[:, np.newaxis] * shape


# -- docs/REFERENCES.md F18: Naatanen et al. 2007; Duncan et al. 2009 ----------------------------


def test_mmn_peak_latency_and_amplitude():
    # Difference wave = deviant - standard; standards = 0. Noise-free template with a
    # sample at 180 ms: latency 180 ms +/- 1 sample, amplitude -2 uV +/- 1e-9 uV.
    sfreq = 500.0
    times = _times(sfreq)
    difference = _mmn(times) - np.zeros_like(_mmn(times))
    result = peak(difference, times, (0.10, 0.25), polarity="negative")
    assert abs(result.latency[0] - MMN_PEAK) <= 1 / sfreq
    assert result.amplitude[0] == pytest.approx(MMN_AMPLITUDE, abs=1e-15)  # 1e-9 uV in V
    assert result.is_local.all()


def test_mmn_peak_latency_at_awkward_sfreq():
    # docs/REFERENCES.md F18: latency within one sample even with no sample at 180 ms.
    times = _times(AWKWARD_SFREQ)
    result = peak(_mmn(times), times, (0.10, 0.25))
    assert np.all(np.abs(result.latency - MMN_PEAK) <= 1 / AWKWARD_SFREQ)


def test_mmn_mean_amplitude_against_samples_and_integral():
    # Mean over 100-250 ms, both ends included. fs 1000 Hz: the inclusive mean of 151
    # samples differs from integral / 0.15 s by ~0.6 % (at 500 Hz the extra endpoint
    # sample alone would make it 1.3 %, beyond the 1 % of docs/REFERENCES.md F18).
    sfreq = 1000.0
    times = _times(sfreq)
    template = _mmn(times)
    value = mean_amplitude(template, times, (0.10, 0.25))
    first, last = 100 + 100, 100 + 250  # sample numbers of 100 ms and 250 ms (tmin -0.1 s)
    np.testing.assert_allclose(value, template[:, first:last + 1].mean(axis=1), rtol=1e-12)
    lo, hi = (np.array([0.10, 0.25]) - MMN_PEAK) / MMN_SD
    integral = MMN_SD * np.sqrt(2 * np.pi) * np.diff(scipy.stats.norm.cdf([lo, hi]))[0]
    np.testing.assert_allclose(value, MMN_AMPLITUDE * SCALES * integral / 0.15, rtol=0.01)
    assert CHANNELS[int(np.argmin(value))] == "Fz"  # fronto-central maximum


def test_mean_amplitude_is_linear_in_the_conditions(rng):
    # docs/REFERENCES.md F18: mean(dev) - mean(std) == mean(dev - std).
    times = _times(500.0)
    standard = 3e-6 * rng.standard_normal((3, times.size))
    deviant = standard + _mmn(times) + 1e-6 * rng.standard_normal((3, times.size))
    by_condition = (mean_amplitude(deviant, times, (0.1, 0.25))
                    - mean_amplitude(standard, times, (0.1, 0.25)))
    # atol 1e-20 V: float rounding on uV-sized values (1e-14 of them)
    np.testing.assert_allclose(by_condition, mean_amplitude(deviant - standard, times,
                                                            (0.1, 0.25)), rtol=0, atol=1e-20)


def test_window_edges_survive_rounding_of_the_time_grid():
    # 0.1 s is 0.1 + 2.8e-17 on this grid: it must still be the first sample inside.
    times = np.arange(-50, 251) * 0.002
    x = np.arange(times.size, dtype=float)
    expected = x[(np.arange(-50, 251) >= 50) & (np.arange(-50, 251) <= 125)].mean()
    assert mean_amplitude(x, times, (0.1, 0.25)) == pytest.approx(expected, rel=1e-12)


# -- peak conventions ------------------------------------------------------------------


def test_local_peak_beats_a_more_extreme_window_edge():
    # The window ends on a falling flank that is lower than the genuine trough inside.
    times = np.arange(0, 100) / 100.0
    x = np.zeros(100)
    x[30] = -1.0          # local trough at 0.30 s
    x[55:] = -np.arange(45) * 0.3  # descending flank: -1.5 at 0.60 s, lower still beyond
    result = peak(x, times, (0.2, 0.6))
    assert (result.amplitude, result.latency, result.is_local) == (-1.0, 0.30, True)
    assert peak(x, times, (0.2, 0.6), local=0).amplitude == pytest.approx(-1.5)  # the edge


def test_fallback_to_window_extreme_when_no_local_peak_is_flagged():
    times = np.arange(0, 100) / 100.0
    x = -times.copy()  # monotonic: no local minimum anywhere
    result = peak(x, times, (0.2, 0.6))
    assert result.latency == pytest.approx(0.6)
    assert result.amplitude == pytest.approx(-0.6)
    assert not result.is_local


def test_neighbours_outside_the_window_decide_a_peak_on_its_edge():
    times = np.arange(0, 100) / 100.0
    x = np.abs(times - 0.6)  # V-shaped trough exactly on the window's end
    assert peak(x, times, (0.2, 0.6)).is_local  # samples after 0.6 s are higher
    y = np.abs(times - 0.63)  # trough outside: 0.61, 0.62 s are lower than 0.6 s
    assert not peak(y, times, (0.2, 0.6)).is_local


def test_samples_without_enough_neighbours_are_not_local_peaks():
    times = np.arange(0, 50) / 100.0
    x = times.copy()  # minimum at the first sample: no left neighbours to compare
    assert not peak(x, times, (0.0, 0.2), local=2).is_local


def test_plateau_is_not_a_local_peak_and_local_zero_disables_the_test():
    times = np.arange(0, 50) / 100.0
    x = np.zeros(50)
    x[20:23] = -1.0
    assert not peak(x, times, (0.1, 0.4)).is_local
    assert peak(x, times, (0.1, 0.4), local=0).latency == pytest.approx(0.20)  # earliest


def test_peak_is_vectorised_over_leading_axes(rng):
    times = _times(AWKWARD_SFREQ)
    x = rng.standard_normal((2, 4, times.size))
    result = peak(x, times, (0.05, 0.3), polarity="positive", local=1)
    assert result.amplitude.shape == result.latency.shape == result.is_local.shape == (2, 4)
    for i in range(2):
        for j in range(4):
            single = peak(x[i, j], times, (0.05, 0.3), polarity="positive", local=1)
            assert (single.amplitude, single.latency) == (result.amplitude[i, j],
                                                          result.latency[i, j])


@pytest.mark.parametrize(("kwargs", "error", "pattern"), [
    ({"polarity": "negtive"}, DefinitionError,
     r'polarity = "negtive" is not one of negative, positive \(did you mean "negative"\?\)'),
    ({"local": -1}, DefinitionError, r"local = -1 is not a whole number >= 0"),
    ({"window": (0.3, 0.7)}, DefinitionError,
     r"window \[0.3, 0.7\] s reaches outside the epoch \[-0.1, 0.5\] s"),
    ({"window": (0.25, 0.1)}, DefinitionError, r"window \[0.25, 0.1\] s ends before it starts"),
    ({"window": (0.1001, 0.1009)}, DefinitionError, r"holds no sample"),
])
def test_bad_peak_arguments_are_refused(kwargs, error, pattern):
    times = _times(500.0)
    kwargs = {"window": (0.1, 0.25), **kwargs}
    with pytest.raises(error, match=pattern):
        peak(_mmn(times), times, **kwargs)


def test_peak_refuses_nan_and_mismatched_times():
    times = _times(500.0)
    x = _mmn(times)
    x[0, 3] = np.nan
    with pytest.raises(InputDataError, match="x contains NaN"):
        peak(x, times, (0.1, 0.25))
    with pytest.raises(InputDataError, match=r"times has shape \(300,\) but x has shape"):
        mean_amplitude(x, times[:-1], (0.1, 0.25))
    with pytest.raises(InputDataError, match="times are not strictly increasing"):
        mean_amplitude(x, times[::-1], (0.1, 0.25))


# -- region mean -----------------------------------------------------------------------


def test_region_mean_averages_named_channels(rng):
    x = rng.standard_normal((5, 3, 40))
    np.testing.assert_allclose(region_mean(x, CHANNELS, ["Pz", "Fz"]),
                               x[:, [0, 2]].mean(axis=1), rtol=1e-15)


def test_region_mean_names_missing_channels():
    x = np.zeros((3, 10))
    with pytest.raises(InputDataError, match=r'channels FZ \(did you mean "Fz"\?\), T7 of '
                                             r"the region are not in the data"):
        region_mean(x, CHANNELS, ["FZ", "Cz", "T7"])
    with pytest.raises(InputDataError, match=r"x has shape \(3, 10\) but 2 channel names"):
        region_mean(x, CHANNELS[:2], ["Fz"])
    with pytest.raises(DefinitionError, match="the region lists no channel"):
        region_mean(x, CHANNELS, [])


def test_plus_minus_snr_is_about_one_without_a_response():
    # Schimmel (1967): the plus-minus average keeps the noise of the average; with noise
    # only, rms(average)/rms(plus-minus) has median ~1. 200 draws; 10 % tolerance on the median.
    from heschl.numeric.erp import plus_minus_snr

    rng = np.random.default_rng(3)
    times = np.arange(150) / 250.0
    snr = [plus_minus_snr(rng.normal(0, 10e-6, (60, 150)), times, (0.0, 0.596)) for _ in range(200)]
    assert abs(np.median(snr) - 1.0) < 0.1


def test_plus_minus_snr_grows_with_a_response_and_trial_count():
    from heschl.numeric.erp import plus_minus_snr

    rng = np.random.default_rng(4)
    times = np.arange(150) / 250.0
    signal = 5e-6 * np.sin(2 * np.pi * 5 * times)
    few = plus_minus_snr(signal + rng.normal(0, 20e-6, (16, 150)), times, (0.0, 0.596))
    many = plus_minus_snr(signal + rng.normal(0, 20e-6, (256, 150)), times, (0.0, 0.596))
    # The noise in an average shrinks as 1/sqrt(N) (common practice): with 16x the trials the
    # ratio (which counts signal plus residual noise over noise) rises from ~1.2 to ~3.
    assert many > 2 * few and few > 1.0
    assert np.isnan(plus_minus_snr(signal[None], times, (0.0, 0.5)))


def test_fractional_area_latency_of_a_symmetric_component_is_its_peak():
    # A symmetric component's 50 % area latency equals its peak time (Kiesel et al. 2008,
    # from memory); trapezoid + linear interpolation: within a tenth of a sample.
    from heschl.numeric.erp import fractional_area_latency

    sfreq = 100 + np.pi
    times = np.arange(-0.1, 0.6, 1 / sfreq)
    wave = -2e-6 * np.exp(-((times - 0.18) ** 2) / (2 * 0.03 ** 2))
    assert abs(fractional_area_latency(wave, times, (0.0, 0.4)) - 0.18) < 0.1 / sfreq
    # The 25 % point of a Gaussian lies 0.674 SD before its centre (normal quantile, scipy).
    from scipy.stats import norm

    expected = 0.18 + norm.ppf(0.25) * 0.03
    assert abs(fractional_area_latency(wave, times, (0.0, 0.4), fraction=0.25) - expected) < 0.5e-3
    assert np.isnan(fractional_area_latency(-wave, times, (0.0, 0.4)))  # no negative area
