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
from .numeric.spectra import band_power, snr_neighbours, welch_psd
from .vocabulary import COMBINES, DEFAULT_BAND_CLOSURE, MEG_SENSOR_TYPES

__all__ = ["MEASURES", "UNIT_SCALE", "RELIABILITY_COLUMNS", "Source", "applicable", "compute_features",
           "reliability_columns", "spectrum_of"]

log = logging.getLogger(__name__)

# Factor from the SI value to the reported unit.
UNIT_SCALE = {"uV": 1e6, "V": 1.0, "ms": 1e3, "s": 1.0, "1": 1.0, "uV^2": 1e12, "V^2": 1.0, "Hz": 1.0,
              "fT": 1e15, "T": 1.0, "fT^2": 1e30, "T^2": 1.0,                       # magnetometers (T)
              "fT/cm": 1e13, "T/m": 1.0, "(fT/cm)^2": 1e26, "(T/m)^2": 1.0}         # gradiometers (T/m)
# Quantities on a log scale are shifted, not scaled: log10(uV^2/Hz) = log10(V^2/Hz) + 12.
UNIT_SHIFT = {"log10(uV^2/Hz)": 12.0, "log10(fT^2/Hz)": 30.0, "log10((fT/cm)^2/Hz)": 26.0}
N_CYCLES = 7.0  # Morlet cycles for phase measures; temporal SD 28 ms at 40 Hz (docs/REFERENCES.md F24)


class Source:
    """Kept trials of one recording and the shared intermediate results.

    Parameters
    ----------
    data : dict of str -> ndarray, shape (n_trials, n_channels, n_times), V
    times : ndarray, shape (n_times,), s
    ch_names : list of str
    sfreq : float, Hz
    paradigm : heschl.config.Paradigm
    ch_types : list of str or None
        Sensor type of each channel ("eeg", "mag", "grad"); None means all EEG. Data are in
        the type's SI unit (V, T, T/m).

    Notes
    -----
    :meth:`subset` gives a Source over chosen trials (drawn with repetition for the
    bootstrap, or a half for split-half estimates) that shares the per-trial wavelet
    coefficients and spectra of its parent, so reliability estimates cost averages, not
    new transforms.
    """

    def __init__(self, data, times, ch_names, sfreq, paradigm, _shared=None, _index=None, ch_types=None):
        self.times, self.ch_names = times, list(ch_names)
        self.ch_types = list(ch_types) if ch_types is not None else ["eeg"] * len(self.ch_names)
        self.sfreq, self.paradigm = sfreq, paradigm
        self._cache = {}
        self._shared = {"data": data} if _shared is None else _shared
        self._index = _index
        self.data = data if _index is None else None  # only the full Source holds its trial arrays

    def subset(self, index):
        """A Source over trials ``index[condition]`` (positions among all kept trials; repeats allowed)."""
        picks = {c: np.asarray(i, dtype=int) for c, i in index.items()}
        return Source(None, self.times, self.ch_names, self.sfreq, self.paradigm, self._shared, picks,
                      self.ch_types)

    def count(self, condition):
        """Number of trials of a condition in this Source."""
        return len(self._shared["data"][condition]) if self._index is None else len(self._index[condition])

    def conditions_of(self, signal):
        """The conditions a signal (condition or contrast) is made of."""
        if signal in self.paradigm.contrasts:
            c = self.paradigm.contrasts[signal]
            return [c.plus, c.minus]
        return [signal]

    def n_trials(self, signal):
        return min(self.count(c) for c in self.conditions_of(signal))

    def average(self, signal):
        """Condition average or difference wave, shape (n_channels, n_times), V."""
        key = ("average", signal)
        if key not in self._cache:
            if signal in self.paradigm.contrasts:
                c = self.paradigm.contrasts[signal]
                self._cache[key] = self.average(c.plus) - self.average(c.minus)
            else:
                trials = self._shared["data"][signal]
                if not self.count(signal):
                    self._cache[key] = np.full(trials.shape[1:], np.nan)
                elif self._index is None:
                    self._cache[key] = trials.mean(axis=0)
                else:  # weights by how often each trial was drawn: no copy of the trials
                    weights = np.bincount(self._index[signal], minlength=len(trials)) / self.count(signal)
                    flat = trials.reshape(len(trials), -1)
                    self._cache[key] = (weights @ flat).reshape(trials.shape[1:])
        return self._cache[key]

    def coefficients(self, signal, frequency, picks=None):
        """Morlet coefficients of the trials, shape (n_trials, n_picked_channels, n_times)."""
        key = ("morlet", signal, frequency)
        if key not in self._shared:
            coefs = morlet_transform(self._shared["data"][signal], self.sfreq, [frequency], n_cycles=N_CYCLES)
            self._shared[key] = coefs[..., 0, :]
        coefs = self._shared[key]
        rows = slice(None) if self._index is None else self._index[signal]
        if picks is None:
            return coefs[rows]
        return coefs[rows][:, picks] if self._index is None else coefs[np.ix_(rows, picks)]

    def spectrum(self, signal, spec):
        """Mean Welch density over kept segments: (freqs Hz, psd V^2/Hz, shape (n_channels, n_freqs))."""
        key = ("spectrum", signal, spec["segment"], spec["overlap"])
        if key not in self._shared:
            self._shared[key] = welch_psd(self._shared["data"][signal], self.sfreq, spec["segment"],
                                          overlap=spec["overlap"])
        if key not in self._cache:
            freqs, per_trial = self._shared[key]
            rows = slice(None) if self._index is None else self._index[signal]
            self._cache[key] = (freqs, per_trial[rows].mean(axis=0))
        return self._cache[key]

    def trials(self, condition):
        """The trials of a condition in this Source, shape (n, n_channels, n_times), SI unit."""
        trials = self._shared["data"][condition]
        return trials if self._index is None else trials[self._index[condition]]

    def memo(self, key, compute):
        """``compute()`` once per key for this Source (its trials), then the cached result."""
        if key not in self._cache:
            self._cache[key] = compute()
        return self._cache[key]

    def window_mask(self, window):
        return (self.times >= window[0]) & (self.times <= window[1])


def _region(source, regions, name, x):
    return region_mean(x, source.ch_names, regions[name])


def _region_wave(m, source, regions):
    """The measure's waveform over its region: the channel mean, or with ``combine = "rms"``
    the root mean square over the channels at each time (polarity-free; for planar
    gradiometers, whose sign depends on their orientation to the source)."""
    p = m.params
    wave = source.average(p["signal"])
    if p.get("combine", COMBINES[0]) == "rms":
        picks = [source.ch_names.index(c) for c in regions[p["region"]]]
        return np.sqrt(np.mean(wave[picks] ** 2, axis=0))
    return _region(source, regions, p["region"], wave)


def _mean_amplitude(m, source, regions, bands):
    p = m.params
    wave = _region_wave(m, source, regions)
    return float(mean_amplitude(wave, source.times, p["window"]))


def _peak(m, source, regions):
    p = m.params
    wave = _region_wave(m, source, regions)
    result = peak(wave, source.times, p["window"], polarity=p["polarity"])
    return result[0], result[1]


def _peak_amplitude(m, source, regions, bands):
    return float(_peak(m, source, regions)[0])


def _peak_latency(m, source, regions, bands):
    return float(_peak(m, source, regions)[1])


def _phase_window(m, source, regions, fn):
    p = m.params
    picks = [source.ch_names.index(c) for c in regions[p["region"]] if c in source.ch_names]
    coefs = source.coefficients(p["signal"], p["frequency"], picks)
    values = fn(coefs, axis=0)  # (n_channels, n_times)
    return float(values[:, source.window_mask(p["window"])].mean())


def _itpc(m, source, regions, bands):
    return _phase_window(m, source, regions, itpc)


def _evoked_power(m, source, regions, bands):
    return _phase_window(m, source, regions, evoked_power)


def _band(m, source, regions, bands, signal, band):
    freqs, psd = source.spectrum(signal, m.params["spectrum"])
    closed = m.params.get("closures", {}).get(band, DEFAULT_BAND_CLOSURE)
    return band_power(freqs, _region(source, regions, m.params["region"], psd), bands[band], closed=closed)


def _band_power(m, source, regions, bands):
    return float(_band(m, source, regions, bands, m.params["signal"], m.params["band"]))


def _relative_band_power(m, source, regions, bands):
    p = m.params
    return float(_band(m, source, regions, bands, p["signal"], p["band"])
                 / _band(m, source, regions, bands, p["signal"], p["relative_to"]))


def _band_ratio(m, source, regions, bands):
    p = m.params
    num = _band(m, source, regions, bands, p["numerator"], p["band"])
    den = _band(m, source, regions, bands, p["denominator"], p["band"])
    return float(num / den)


def _fractional_area_latency(m, source, regions, bands):
    p = m.params
    wave = _region_wave(m, source, regions)
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

    def compute():
        wave = _region(source, regions, p["region"], source.average(p["signal"]))[source.window_mask(p["window"])]
        return np.fft.rfftfreq(wave.size, 1.0 / source.sfreq), np.abs(np.fft.rfft(wave)) ** 2

    return source.memo(("evoked-spectrum", p["signal"], p["region"], tuple(p["window"])), compute)


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


def _aperiodic(m, source, regions):
    return source.memo(("aperiodic", m.params["signal"], m.params["region"]),
                       lambda: aperiodic_fit(*_region_spectrum(m, source, regions)))


def _aperiodic_exponent(m, source, regions, bands):
    return float(_aperiodic(m, source, regions)[0])


def _aperiodic_offset(m, source, regions, bands):
    return float(_aperiodic(m, source, regions)[1])


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


# Kinds whose value has no meaningful zero: a subject-level "told apart from zero"
# reliability makes no sense for them; their reliability comes from the cohort split-half
# in the group summary.
NO_ZERO_KINDS = {"peak-latency", "fractional-area-latency", "peak-frequency", "aperiodic-exponent",
                 "aperiodic-offset", "rayleigh-p", "snr-p", "band-ratio", "snr"}


def _measure(m, source, feature_set):
    """One measure's value in its reported unit."""
    value = MEASURES[m.kind](m, source, feature_set.regions, feature_set.bands)
    return value + UNIT_SHIFT[m.unit] if m.unit in UNIT_SHIFT else value * UNIT_SCALE[m.unit]


def _evaluate(measures, source, feature_set):
    from .errors import DefinitionError
    from .inputs import display_path

    out = []
    for m in measures:
        try:
            out.append(_measure(m, source, feature_set))
        except DefinitionError as exc:
            # The definition asks for something the numeric code refuses: never a NaN.
            raise DefinitionError(f"{display_path(feature_set.source)}: measure {m.name}: {exc}") from None
        except (ValueError, FloatingPointError, ZeroDivisionError):
            out.append(float("nan"))  # a resample can lack what a measure needs
    return np.asarray(out, dtype=float)


#: Reliability columns of every feature row.
RELIABILITY_COLUMNS = ("ci_low", "ci_high", "se", "half_odd", "half_even", "reliability")


def reliability_columns(measures, source, feature_set, values, seed=0):
    """Interval, standard error and subject-level reliability of every measure.

    The array functions of :mod:`heschl.numeric.reliability` resample trial *indices*
    within each condition, independently (deviants and standards of a difference wave
    each keep their own count); the score of a resample is every measure of a
    :meth:`Source.subset`, which reuses the per-trial transforms.

    * ``ci_low``/``ci_high``: percentile bootstrap interval over trials
      (`bootstrap_interval`).
    * ``se``: the standardized measurement error (Luck et al. 2021): analytic for a mean
      amplitude over a region mean (`sme_mean_amplitude`, `sme_difference` for a
      difference wave; equals mne's ``compute_sme``), the bootstrap SD otherwise.
    * ``half_odd``/``half_even``: the value from odd and from even trials of each
      condition (equal halves; `split_half_recording` with "odd-even"); the group
      summary turns them into the Spearman-Brown-corrected cohort split-half.
    * ``reliability``: subject-level, from random half splits (`split_half_recording`):
      how well the value is told apart from zero; NaN for kinds without a meaningful
      zero (latencies, frequencies, exponents, p-values, ratios, RMS over channels).

    Returns
    -------
    columns : list of dict
        One dict of :data:`RELIABILITY_COLUMNS` per measure.
    """
    from .numeric.reliability import bootstrap_interval, split_half_recording

    settings = feature_set.reliability
    conditions = sorted({c for m in measures for s in _signals_of(m) for c in source.conditions_of(s)})
    indices = [np.arange(source.count(c)) for c in conditions]

    def score(*picked):
        return _evaluate(measures, source.subset(dict(zip(conditions, picked))), feature_set)

    boot_seed, split_seed = np.random.SeedSequence(seed).spawn(2)
    low, high, boot_sd = bootstrap_interval(None, score, n_boot=settings["bootstrap"], level=settings["level"],
                                            seed=np.random.default_rng(boot_seed), groups=indices)
    full = np.asarray(values, dtype=float)  # the score of all trials: not computed again
    odd_even = split_half_recording(None, score, method="odd-even", groups=indices, full_score=full)["halves"][0]
    splits = split_half_recording(None, score, method="random", n_splits=settings["splits"],
                                  seed=np.random.default_rng(split_seed), groups=indices, full_score=full)
    out = []
    for k, m in enumerate(measures):
        sme = _analytic_sme(m, source, feature_set)
        # An RMS over channels is positive even for pure noise: "apart from zero" means nothing.
        no_zero = m.kind in NO_ZERO_KINDS or m.params.get("combine") == "rms" or not np.isfinite(values[k])
        out.append({"ci_low": float(np.atleast_1d(low)[k]), "ci_high": float(np.atleast_1d(high)[k]),
                    "se": float(np.atleast_1d(boot_sd)[k]) if sme is None else sme,
                    "half_odd": float(odd_even[0, k]), "half_even": float(odd_even[1, k]),
                    "reliability": float("nan") if no_zero else float(np.atleast_1d(splits["reliability"])[k])})
    return out


def _analytic_sme(m, source, feature_set):
    """SD of the single-trial window means over sqrt(N) (ddof=0), in the reported unit, for a
    mean amplitude over a region mean; None for any other measure."""
    from .numeric.reliability import sme_difference, sme_mean_amplitude

    if m.kind != "mean-amplitude" or m.params.get("combine", COMBINES[0]) != "mean":
        return None
    smes = []
    for c in source.conditions_of(m.params["signal"]):
        trials = region_mean(source.trials(c), source.ch_names, feature_set.regions[m.params["region"]])
        smes.append(sme_mean_amplitude(mean_amplitude(trials, source.times, m.params["window"])))
    sme = smes[0] if len(smes) == 1 else sme_difference(*smes)
    return float(sme) * UNIT_SCALE[m.unit]


def compute_features(feature_set, source, min_trials, seed=0):
    """Every measure of a feature set, with its reliability, as rows for the features table.

    Parameters
    ----------
    feature_set : heschl.config.FeatureSet
    source : Source
    min_trials : dict
        Condition -> minimum kept trials (from the paradigm); a measure reading a
        condition under its minimum is flagged.
    seed : int, default=0
        Seed of the resampling (bootstrap, random splits).
    """
    measures = list(feature_set.measures)
    check_units(feature_set, source)
    values = _evaluate(measures, source, feature_set)
    usable = [all(source.count(c) >= 2 for s in _signals_of(m) for c in source.conditions_of(s))
              for m in measures]
    reliable = [m for m, ok in zip(measures, usable) if ok]
    columns = iter(reliability_columns(reliable, source, feature_set, values[np.asarray(usable)], seed)
                   if reliable else ())
    rows = []
    for k, m in enumerate(measures):
        signals = _signals_of(m)
        flags = _trial_flags(source, signals, min_trials)
        value = values[k] if min(source.n_trials(s) for s in signals) > 0 else float("nan")
        if not np.isfinite(value):
            flags.append("could not be computed")
        extra = next(columns) if usable[k] else dict.fromkeys(RELIABILITY_COLUMNS, float("nan"))
        low_reliability = (bool(extra["reliability"] < feature_set.reliability["minimum"])
                           if np.isfinite(extra["reliability"]) else None)
        rows.append({"feature": m.name, "value": float(value), "unit": m.unit, "kind": m.kind,
                     "signal": "/".join(signals), "region": m.params["region"],
                     "window": _describe(m), "n_trials": min(source.n_trials(s) for s in signals),
                     **extra, "low_reliability": low_reliability, "feature_set": feature_set.name,
                     "flags": "; ".join(flags)})
    return rows


def region_type(feature_set, region, source):
    """The one sensor type of a region's channels in this recording (regions may not mix types)."""
    from .errors import DefinitionError, problem

    kinds = {source.ch_types[source.ch_names.index(c)] for c in feature_set.regions[region] if c in source.ch_names}
    if len(kinds) > 1:
        raise DefinitionError(problem(feature_set.source, f"region {region} mixes sensor types "
                                      f"({', '.join(sorted(kinds))}); amplitudes in V and T cannot be averaged",
                                      "split it into one region per sensor type", key=f"regions.{region}"))
    return next(iter(kinds), None)


def check_units(feature_set, source):
    """Every measure's unit must be one of its region's sensor type (uV for EEG, fT for magnetometers, ...)."""
    from .errors import DefinitionError, problem
    from .sensors import DISPLAY, unit_type

    for m in feature_set.measures:
        kind = region_type(feature_set, m.params["region"], source)
        wanted = unit_type(m.unit)
        if kind is not None and wanted is not None and wanted != kind:
            base = DISPLAY[kind][0]
            squared = f"({base})^2" if "/" in base else f"{base}^2"
            suggestion = (f"log10({squared}/Hz)" if m.unit.startswith("log10(")
                          else squared if "^2" in m.unit else base)
            raise DefinitionError(problem(
                feature_set.source, f'measure {m.name} reads region {m.params["region"]}, whose channels are '
                f'{kind.upper()}, but its unit "{m.unit}" is for {wanted.upper()}',
                f'set unit = "{suggestion}" for this measure', key="measures.unit"))


def _trial_flags(source, signals, min_trials):
    flags = []
    paradigm = source.paradigm
    for s in signals:
        conds = [paradigm.contrasts[s].plus, paradigm.contrasts[s].minus] if s in paradigm.contrasts else [s]
        for c in conds:
            kept = source.count(c)
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


#: Welch settings when no feature set of a resting paradigm names its own.
DEFAULT_SPECTRUM = {"segment": 2.0, "overlap": 0.5}


def spectrum_of(analysis):
    """The Welch settings of an analysis: those of its first feature set."""
    return next((fs.spectrum for fs in analysis.feature_sets), DEFAULT_SPECTRUM)


def applicable(analysis, channels, where, types=None):
    """The analysis restricted to the feature sets written for this recording's sensors.

    A feature set whose regions name only 10-05 electrode positions is for EEG; any other
    is for MEG (its regions name sensors of an MEG system). A set for a sensor modality the
    recording lacks (an EEG set on an MEG recording) is left out, with the reason. A set
    for a modality the recording has must find all of its region channels: a missing one
    is an error, never a silently smaller region.

    Parameters
    ----------
    analysis : heschl.config.Analysis
    channels : list of str
        The recording's data channels after harmonising.
    where : str
        The file, for messages.
    types : set of str or None
        Sensor types present ("eeg", "mag", "grad"); None means EEG only.

    Returns
    -------
    analysis : heschl.config.Analysis
        With only the feature sets that apply.
    skipped : dict
        Feature set name -> why it does not apply.
    """
    import dataclasses

    from .errors import InputDataError, problem
    from .harmonise import standard_name_map

    types = {"eeg"} if types is None else set(types)
    electrodes = set(standard_name_map().values())
    present, used, skipped = set(channels), [], {}
    for fs in analysis.feature_sets:
        wanted = {c for names in fs.regions.values() for c in names}
        modality = "eeg" if wanted <= electrodes else "meg"
        has = "eeg" in types if modality == "eeg" else bool(types & set(MEG_SENSOR_TYPES))
        missing = sorted(wanted - present)
        if not missing:
            used.append(fs)
        elif not has:
            skipped[fs.name] = (f"its regions name {modality.upper()} channels ({', '.join(sorted(wanted)[:4])}"
                                f"{', ...' if len(wanted) > 4 else ''}) and this recording has no "
                                f"{modality.upper()} channel")
        else:
            raise InputDataError(problem(where, f'lacks channels {", ".join(missing[:6])} of the regions of feature '
                                         f'set "{fs.name}"', "add channel_aliases for them in the study file or "
                                         "remove them from the feature set's regions"))
    if not used:
        raise InputDataError(problem(where, f'no feature set of paradigm "{analysis.paradigm.name}" reads its '
                                     f"channels ({'; '.join(f'{k}: {v}' for k, v in skipped.items())})",
                                     "add a feature set whose regions name this recording's channels"))
    if skipped:
        log.info("Feature set%s %s not applicable to this recording", "" if len(skipped) == 1 else "s",
                 ", ".join(skipped))
    return dataclasses.replace(analysis, feature_sets=tuple(used)), skipped
