"""Named features from kept trials, dispatched by measure kind.

``MEASURES`` maps each kind of :data:`heschl.config.MEASURE_KINDS` to a function
``f(measure, source) -> value in SI units``. ``Source`` holds the kept trials and caches
what several measures share (condition averages, wavelet coefficients, spectra).
"""
from __future__ import annotations

import logging

import numpy as np

from .numeric.erp import fractional_area_latency, mean_amplitude, peak, region_mean
from .numeric.phase import (evoked_power, induced_power, itpc, morlet_transform, pairwise_phase_consistency,
                            rayleigh)
from .numeric.rhythms import aperiodic_fit, peak_frequency
from .numeric.spectra import band_power, relative_band_power, snr_neighbours, welch_psd

__all__ = ["MEASURES", "UNIT_SCALE", "Source", "compute_features"]

log = logging.getLogger(__name__)

# Factor from the SI value to the reported unit.
UNIT_SCALE = {"uV": 1e6, "V": 1.0, "ms": 1e3, "s": 1.0, "1": 1.0, "uV^2": 1e12, "V^2": 1.0, "Hz": 1.0}
# Quantities on a log scale are shifted, not scaled: log10(uV^2/Hz) = log10(V^2/Hz) + 12.
UNIT_SHIFT = {"log10(uV^2/Hz)": 12.0}
N_CYCLES = 7.0  # Morlet cycles for phase measures; temporal SD 28 ms at 40 Hz (REFERENCES F24)


class Source:
    """Kept trials of one recording and the shared intermediate results.

    Parameters
    ----------
    data : dict of str -> ndarray, shape (n_trials, n_channels, n_times), V
    times : ndarray, shape (n_times,), s
    ch_names : list of str
    sfreq : float, Hz
    paradigm : heschl.config.Paradigm
    """

    def __init__(self, data, times, ch_names, sfreq, paradigm):
        self.data, self.times, self.ch_names = data, times, list(ch_names)
        self.sfreq, self.paradigm = sfreq, paradigm
        self._cache = {}

    def n_trials(self, signal):
        if signal in self.paradigm.contrasts:
            c = self.paradigm.contrasts[signal]
            return min(len(self.data[c.plus]), len(self.data[c.minus]))
        return len(self.data[signal])

    def average(self, signal):
        """Condition average or difference wave, shape (n_channels, n_times), V."""
        key = ("average", signal)
        if key not in self._cache:
            if signal in self.paradigm.contrasts:
                c = self.paradigm.contrasts[signal]
                self._cache[key] = self.average(c.plus) - self.average(c.minus)
            else:
                trials = self.data[signal]
                self._cache[key] = trials.mean(axis=0) if len(trials) else np.full(trials.shape[1:], np.nan)
        return self._cache[key]

    def coefficients(self, signal, frequency):
        """Morlet coefficients, shape (n_trials, n_channels, n_times)."""
        key = ("morlet", signal, frequency)
        if key not in self._cache:
            coefs = morlet_transform(self.data[signal], self.sfreq, [frequency], n_cycles=N_CYCLES)
            self._cache[key] = coefs[..., 0, :]
        return self._cache[key]

    def spectrum(self, signal, spec):
        """Mean Welch density over kept segments: (freqs Hz, psd V^2/Hz, shape (n_channels, n_freqs))."""
        key = ("spectrum", signal, spec["segment"], spec["overlap"])
        if key not in self._cache:
            freqs, psd = welch_psd(self.data[signal], self.sfreq, spec["segment"], overlap=spec["overlap"])
            self._cache[key] = (freqs, psd.mean(axis=0))
        return self._cache[key]

    def window_mask(self, window):
        return (self.times >= window[0]) & (self.times <= window[1])


def _region(source, regions, name, x):
    return region_mean(x, source.ch_names, regions[name])


def _mean_amplitude(m, source, regions, bands):
    p = m.params
    wave = _region(source, regions, p["region"], source.average(p["signal"]))
    return float(mean_amplitude(wave, source.times, p["window"]))


def _peak(m, source, regions):
    p = m.params
    wave = _region(source, regions, p["region"], source.average(p["signal"]))
    result = peak(wave, source.times, p["window"], polarity=p["polarity"])
    return result[0], result[1]


def _peak_amplitude(m, source, regions, bands):
    return float(_peak(m, source, regions)[0])


def _peak_latency(m, source, regions, bands):
    return float(_peak(m, source, regions)[1])


def _phase_window(m, source, regions, fn):
    p = m.params
    picks = [source.ch_names.index(c) for c in regions[p["region"]] if c in source.ch_names]
    coefs = source.coefficients(p["signal"], p["frequency"])[:, picks, :]
    values = fn(coefs, axis=0)  # (n_channels, n_times)
    return float(values[:, source.window_mask(p["window"])].mean())


def _itpc(m, source, regions, bands):
    return _phase_window(m, source, regions, itpc)


def _evoked_power(m, source, regions, bands):
    return _phase_window(m, source, regions, evoked_power)


def _band(m, source, regions, bands, signal, band):
    freqs, psd = source.spectrum(signal, m.params["spectrum"])
    return band_power(freqs, _region(source, regions, m.params["region"], psd), bands[band])


def _band_power(m, source, regions, bands):
    return float(_band(m, source, regions, bands, m.params["signal"], m.params["band"]))


def _relative_band_power(m, source, regions, bands):
    p = m.params
    freqs, psd = source.spectrum(p["signal"], p["spectrum"])
    region = _region(source, regions, p["region"], psd)
    return float(relative_band_power(freqs, region, bands[p["band"]], bands[p["relative_to"]]))


def _band_ratio(m, source, regions, bands):
    p = m.params
    num = _band(m, source, regions, bands, p["numerator"], p["band"])
    den = _band(m, source, regions, bands, p["denominator"], p["band"])
    return float(num / den)


def _fractional_area_latency(m, source, regions, bands):
    p = m.params
    wave = _region(source, regions, p["region"], source.average(p["signal"]))
    return float(fractional_area_latency(wave, source.times, p["window"], p["polarity"], p.get("fraction", 0.5)))


def _induced_power(m, source, regions, bands):
    return _phase_window(m, source, regions, induced_power)


def _ppc(m, source, regions, bands):
    return _phase_window(m, source, regions, pairwise_phase_consistency)


def _rayleigh_p(m, source, regions, bands):
    """Rayleigh p (Zar's approximation) of the region-mean ITPC over the window and its trial count."""
    r = _phase_window(m, source, regions, itpc)
    return float(rayleigh(r, n=source.n_trials(m.params["signal"]))[1])


def _evoked_spectrum(m, source, regions):
    """Periodogram of the region-mean average in the window (rectangular window), V^2."""
    p = m.params
    wave = _region(source, regions, p["region"], source.average(p["signal"]))[source.window_mask(p["window"])]
    spectrum = np.abs(np.fft.rfft(wave)) ** 2
    return np.fft.rfftfreq(wave.size, 1.0 / source.sfreq), spectrum


def _snr(m, source, regions, bands):
    freqs, spectrum = _evoked_spectrum(m, source, regions)
    return float(snr_neighbours(freqs, spectrum, m.params["frequency"])[0])


def _snr_p(m, source, regions, bands):
    freqs, spectrum = _evoked_spectrum(m, source, regions)
    return float(snr_neighbours(freqs, spectrum, m.params["frequency"])[1])


def _region_spectrum(m, source, regions):
    freqs, psd = source.spectrum(m.params["signal"], m.params["spectrum"])
    return freqs, _region(source, regions, m.params["region"], psd)


def _peak_frequency(m, source, regions, bands):
    freqs, psd = _region_spectrum(m, source, regions)
    return float(peak_frequency(freqs, psd, bands[m.params["band"]]))


def _aperiodic_exponent(m, source, regions, bands):
    freqs, psd = _region_spectrum(m, source, regions)
    return float(aperiodic_fit(freqs, psd)[0])


def _aperiodic_offset(m, source, regions, bands):
    freqs, psd = _region_spectrum(m, source, regions)
    return float(aperiodic_fit(freqs, psd)[1])


MEASURES = {
    "mean-amplitude": _mean_amplitude,
    "peak-amplitude": _peak_amplitude,
    "peak-latency": _peak_latency,
    "itpc": _itpc,
    "evoked-power": _evoked_power,
    "band-power": _band_power,
    "relative-band-power": _relative_band_power,
    "band-ratio": _band_ratio,
    "fractional-area-latency": _fractional_area_latency,
    "induced-power": _induced_power,
    "ppc": _ppc,
    "rayleigh-p": _rayleigh_p,
    "snr": _snr,
    "snr-p": _snr_p,
    "peak-frequency": _peak_frequency,
    "aperiodic-exponent": _aperiodic_exponent,
    "aperiodic-offset": _aperiodic_offset,
}


def _signals_of(m):
    p = m.params
    return [s for s in (p.get("signal"), p.get("numerator"), p.get("denominator")) if s]


def compute_features(feature_set, source, min_trials):
    """Every measure of a feature set, as rows for the features table.

    Parameters
    ----------
    feature_set : heschl.config.FeatureSet
    source : Source
    min_trials : dict
        Condition -> minimum kept trials (from the paradigm); a measure reading a
        condition under its minimum is flagged.
    """
    rows = []
    for m in feature_set.measures:
        signals = _signals_of(m)
        counts = {s: source.n_trials(s) for s in signals}
        flags = _trial_flags(source, signals, min_trials)
        if any(n == 0 for n in counts.values()):
            value = float("nan")
            flags.append("no trials left")
        else:
            value = MEASURES[m.kind](m, source, feature_set.regions, feature_set.bands)
            value = value + UNIT_SHIFT[m.unit] if m.unit in UNIT_SHIFT else value * UNIT_SCALE[m.unit]
        rows.append({"feature": m.name, "value": value, "unit": m.unit, "kind": m.kind,
                     "signal": "/".join(signals), "region": m.params["region"],
                     "window": _describe(m), "n_trials": min(counts.values()),
                     "feature_set": feature_set.name, "flags": "; ".join(flags)})
    return rows


def _trial_flags(source, signals, min_trials):
    flags = []
    paradigm = source.paradigm
    for s in signals:
        conds = [paradigm.contrasts[s].plus, paradigm.contrasts[s].minus] if s in paradigm.contrasts else [s]
        for c in conds:
            kept = len(source.data[c])
            if kept < min_trials.get(c, 0):
                flags.append(f"{c}: {kept} trials < minimum {min_trials[c]}")
    return flags


def _describe(m):
    p = m.params
    if p.get("window"):
        return f"{p['window'][0]:g}-{p['window'][1]:g} s" + (f" at {p['frequency']:g} Hz" if p.get("frequency") else "")
    if p.get("band"):
        return f"band {p['band']}"
    return ""
