"""Feature-set files: regions, bands, spectrum settings, reliability and the measures."""
from __future__ import annotations

import re

from ..errors import did_you_mean
from ..vocabulary import (AMPLITUDE_UNITS, BAND_CLOSURES, COMBINES, DEFAULT_BAND_CLOSURE, LOG_POWER_UNITS,
                          POLARITIES, POWER_UNITS, SENSOR_TYPES)
from .files import _read_toml
from .model import FeatureSet, Measure
from .sections import _Section, _num, _show

__all__ = ["MEASURE_KINDS", "load_feature_set"]

# Parameters of every measure kind: (required keys, optional keys, default unit, allowed units).
# heschl.features.MEASURES holds the functions; a test keeps the two in step.
# Amplitude and power units: EEG regions read uV or V, magnetometer regions fT or T,
# gradiometer regions fT/cm or T/m (heschl.sensors checks each region against its unit).
_AMPLITUDE_UNITS = tuple(u for t in SENSOR_TYPES for u in AMPLITUDE_UNITS[t])
_POWER_UNITS = tuple(u for t in SENSOR_TYPES for u in POWER_UNITS[t])
MEASURE_KINDS = {
    "mean-amplitude": ({"signal", "region", "window"}, {"combine"}, "uV", _AMPLITUDE_UNITS),
    "peak-amplitude": ({"signal", "region", "window", "polarity"}, {"combine"}, "uV", _AMPLITUDE_UNITS),
    "peak-latency": ({"signal", "region", "window", "polarity"}, {"combine"}, "ms", ("ms", "s")),
    "itpc": ({"signal", "region", "frequency", "window"}, set(), "1", ("1",)),
    "evoked-power": ({"signal", "region", "frequency", "window"}, set(), "uV^2", _POWER_UNITS),
    "band-power": ({"signal", "region", "band"}, set(), "uV^2", _POWER_UNITS),
    "relative-band-power": ({"signal", "region", "band", "relative_to"}, set(), "1", ("1",)),
    "band-ratio": ({"numerator", "denominator", "region", "band"}, set(), "1", ("1",)),
    "fractional-area-latency": ({"signal", "region", "window", "polarity"}, {"fraction", "combine"}, "ms",
                                ("ms", "s")),
    "induced-power": ({"signal", "region", "frequency", "window"}, set(), "uV^2", _POWER_UNITS),
    "ppc": ({"signal", "region", "frequency", "window"}, set(), "1", ("1",)),
    "rayleigh-p": ({"signal", "region", "frequency", "window"}, set(), "1", ("1",)),
    "snr": ({"signal", "region", "frequency", "window"}, set(), "1", ("1",)),
    "snr-p": ({"signal", "region", "frequency", "window"}, set(), "1", ("1",)),
    "peak-frequency": ({"signal", "region", "band"}, set(), "Hz", ("Hz",)),
    "aperiodic-exponent": ({"signal", "region"}, set(), "1", ("1",)),
    "aperiodic-offset": ({"signal", "region"}, set(), "log10(uV^2/Hz)",
                         tuple(u for t in SENSOR_TYPES for u in LOG_POWER_UNITS[t])),
}
_EPOCH_KINDS = {"mean-amplitude", "peak-amplitude", "peak-latency", "itpc", "evoked-power",
                "fractional-area-latency", "induced-power", "ppc", "rayleigh-p", "snr", "snr-p"}
_SPECTRUM_KINDS = {"band-power", "relative-band-power", "band-ratio", "peak-frequency", "aperiodic-exponent",
                   "aperiodic-offset"}


_FEATURE_KEYS = {"name", "paradigm", "summary", "regions", "bands", "spectrum", "measures", "reliability"}
_MEASURE_KEYS = {"name", "kind", "signal", "region", "window", "frequency", "band", "polarity",
                 "numerator", "denominator", "relative_to", "unit", "fraction", "per_channel", "combine"}


def load_feature_set(path, paradigm):
    """Read and validate a feature-set file against its paradigm; returns a :class:`FeatureSet`."""
    doc, where = _read_toml(path, "feature set")
    top = _Section(doc, where, "", _FEATURE_KEYS)
    name = top.string("name")
    target = top.string("paradigm")
    if target != paradigm.name:
        top.fail("paradigm", f'reads paradigm "{target}" but is listed with paradigm "{paradigm.name}"',
                 "list it under the paradigm it was written for, or change its paradigm key")
    regions = {}
    region_table = top.sub("regions", set(top.table("regions", default={})), default={})
    for rname in region_table.data:
        regions[rname] = region_table.strings(rname)
        _check_region_names(region_table, rname, regions[rname])
    bands, closures = {}, {}
    band_table = top.sub("bands", set(top.table("bands", default={})), default={})
    for bname in band_table.data:
        if isinstance(band_table.data[bname], dict):  # { range = [lo, hi], closed = "both" }
            entry = band_table.sub(bname, {"range", "closed"})
            bands[bname] = entry.pair("range", unit="Hz", low=0.0)
            closures[bname] = entry.string("closed", default=DEFAULT_BAND_CLOSURE, choices=BAND_CLOSURES)
        else:
            bands[bname] = band_table.pair(bname, unit="Hz", low=0.0)
            closures[bname] = DEFAULT_BAND_CLOSURE
    spectrum = top.sub("spectrum", {"segment", "overlap"}, default={})
    spec = {"segment": spectrum.number("segment", default=2.0, unit="s", low=0.0, strict_low=True),
            "overlap": spectrum.number("overlap", default=0.5, low=0.0, high=0.95)}
    rel = top.sub("reliability", {"minimum", "bootstrap", "splits", "level"}, default={})
    reliability = {"minimum": rel.number("minimum", default=0.7, low=0.0, high=1.0),
                   "bootstrap": rel.integer("bootstrap", default=150, low=20),
                   "splits": rel.integer("splits", default=30, low=2),
                   "level": rel.number("level", default=0.95, low=0.5, high=0.999)}
    raw_measures = top.raw("measures", default=None)
    if not isinstance(raw_measures, list) or not raw_measures:
        top.fail("measures", "expected at least one [[measures]] entry", "add a [[measures]] table")
    measures, names = [], set()
    for i, item in enumerate(raw_measures):
        section = _Section(item, where, f"measures[{i}]", _MEASURE_KEYS)
        for measure in _expand_measure(section, paradigm, regions, bands, spec, closures):
            if measure.name in names:
                section.fail("name", f'measure name "{measure.name}" is used twice', "give each measure its own name")
            names.add(measure.name)
            measures.append(measure)
    return FeatureSet(name=name, paradigm=target, summary=top.string("summary", default=""),
                      source=str(path), regions=regions, bands=bands, spectrum=spec,
                      measures=tuple(measures), reliability=reliability, band_closures=closures,
                      document=doc)


def _check_region_names(table, rname, names):
    """A region names either 10-05 electrodes or MEG sensors, not both: a name that is no
    electrode among electrode names is a typo (with the closest electrode offered)."""
    from ..harmonise import standard_name_map

    known = standard_name_map()
    odd = [n for n in names if n.upper() not in known]
    if odd and len(odd) < len(names):
        name = odd[0]
        table.fail(rname, f'channel "{name}" is not a 10-05 electrode name, and the region\'s other channels are'
                   f"{did_you_mean(name, sorted(set(known.values())))}",
                   "correct the name (heschl renames each site's channels to 10-05 names; a region holds one "
                   "sensor type)")


def _expand_measure(section, paradigm, regions, bands, spec, closures=None):
    kind = section.string("kind", choices=list(MEASURE_KINDS))
    required, optional, default_unit, units = MEASURE_KINDS[kind]
    for key in section.data:
        if key not in required | optional | {"name", "kind", "unit", "per_channel"}:
            section.fail(key, f'is not used by kind "{kind}"',
                         f"remove it; kind \"{kind}\" takes {', '.join(sorted(required | optional))}")
    for key in sorted(required):
        section.raw(key)
    unit = section.string("unit", default=default_unit, choices=units)
    _check_design(section, kind, paradigm)
    fixed = {}
    if "window" in required:
        fixed["window"] = _measure_window(section, paradigm)
    if "frequency" in required:
        fixed["frequency"] = _measure_frequency(section, paradigm)
    if "polarity" in required:
        fixed["polarity"] = section.string("polarity", choices=POLARITIES)
    if "fraction" in optional:
        fixed["fraction"] = section.number("fraction", default=0.5, low=0.0, high=1.0, strict_low=True,
                                           strict_high=True)
    if "combine" in optional:
        fixed["combine"] = section.string("combine", default="mean", choices=COMBINES)
        if fixed["combine"] == "rms" and fixed.get("polarity") == "negative":
            section.fail("polarity", 'a root mean square over channels is never negative',
                         'use polarity = "positive" with combine = "rms"')
    region = fixed["region"] = section.string("region")
    if region not in regions:
        section.fail("region", f'"{region}" is not defined under [regions]{did_you_mean(region, regions)}',
                     f"define it under [regions] or use one of: {', '.join(regions) or 'none yet'}")
    for key in ("numerator", "denominator"):
        if key in required:
            fixed[key] = section.string(key, choices=list(paradigm.conditions))
    if "relative_to" in required:
        fixed["relative_to"] = section.string("relative_to", choices=list(bands) or ["(define [bands])"])
    signals = section.strings("signal", allow_single=True) if "signal" in required else (None,)
    for signal in signals:
        if signal is not None and signal not in paradigm.signals:
            section.fail("signal", f'"{signal}" is not a condition or contrast of paradigm "{paradigm.name}"'
                         f"{did_you_mean(signal, paradigm.signals)}", f"use one of: {', '.join(paradigm.signals)}")
    band_names = section.strings("band", allow_single=True) if "band" in required else (None,)
    for band in band_names:
        if band is not None and band not in bands:
            section.fail("band", f'"{band}" is not defined under [bands]{did_you_mean(band, bands)}',
                         f"define it under [bands] or use one of: {', '.join(bands) or 'none yet'}")
        if band is not None:
            _check_band(section, band, bands[band], paradigm)
    explicit = section.string("name", default=None)
    if explicit is not None and len(signals) * len(band_names) > 1:
        section.fail("name", "one name for a measure that expands over several signals or bands",
                     "remove name (names are then built from kind, band, signal and region)")
    per_channel = section.raw("per_channel", default=False)
    if not isinstance(per_channel, bool):
        section.fail("per_channel", f"expected true or false, got {_show(per_channel)}",
                     "write per_channel = true to add one value per channel of the region")
    for signal in signals:
        for band in band_names:
            params = dict(fixed, signal=signal, band=band, spectrum=spec, closures=dict(closures or {}))
            name = explicit or _auto_name(kind, band, signal, fixed["region"])
            yield Measure(name=name, kind=kind, params=params, unit=unit)
            for channel in regions[region] if per_channel else ():
                # One value per channel: the channel is a region of its own.
                regions.setdefault(channel, (channel,))
                yield Measure(name=f"{name}.{channel}", kind=kind, params=dict(params, region=channel), unit=unit)


def _auto_name(kind, band, signal, region):
    parts = [kind] + [p for p in (band, signal, region) if p]
    return "_".join(re.sub(r"[^0-9A-Za-z]+", "_", p) for p in parts)


def _check_design(section, kind, paradigm):
    if kind in _EPOCH_KINDS and paradigm.epochs is None:
        section.fail("kind", f'"{kind}" needs epochs but paradigm "{paradigm.name}" is cut into segments',
                     "use a band kind (band-power, relative-band-power, band-ratio) for a resting paradigm")
    if kind in _SPECTRUM_KINDS and paradigm.segments is None:
        section.fail("kind", f'"{kind}" needs a resting paradigm but "{paradigm.name}" is {paradigm.design}',
                     "use an epoch kind (mean-amplitude, itpc, ...) for this paradigm")


def _check_band(section, name, band, paradigm):
    """A band must lie below the analysis Nyquist frequency and meet the pass band."""
    lo, hi = band
    nyquist = paradigm.cleaning.sampling_rate / 2
    pass_lo, pass_hi = paradigm.cleaning.pass_band
    if hi > nyquist:
        section.fail("band", f'band "{name}" [{_num(lo)}, {_num(hi)}] Hz reaches above the Nyquist frequency '
                     f"{_num(nyquist)} Hz of paradigm \"{paradigm.name}\" (analysis rate {_num(2 * nyquist)} Hz)",
                     "lower the band's upper edge or raise the paradigm's cleaning.sampling_rate")
    if hi <= pass_lo or lo >= pass_hi:
        section.fail("band", f'band "{name}" [{_num(lo)}, {_num(hi)}] Hz lies outside the pass band '
                     f"[{_num(pass_lo)}, {_num(pass_hi)}] Hz of paradigm \"{paradigm.name}\"",
                     "choose a band inside the pass band or widen the paradigm's cleaning.pass_band")


def _measure_window(section, paradigm):
    lo, hi = paradigm.epochs.window
    start, stop = section.pair("window", unit="s")
    if start < lo or stop > hi:
        section.fail("window", f"[{_num(start)}, {_num(stop)}] s is not inside the epoch window "
                     f"[{_num(lo)}, {_num(hi)}] s of paradigm \"{paradigm.name}\"",
                     "choose a window inside it or widen the paradigm's epochs.window")
    return (start, stop)


def _measure_frequency(section, paradigm):
    nyquist = paradigm.cleaning.sampling_rate / 2
    freq = section.number("frequency", unit="Hz", low=0.0, strict_low=True)
    if freq >= nyquist:
        # docs/REFERENCES.md F26: a 40 Hz analysis needs a sampling rate above 80 Hz.
        section.fail("frequency", f"{_num(freq)} Hz is not below the Nyquist frequency {_num(nyquist)} Hz "
                     f"of paradigm \"{paradigm.name}\"", "raise the paradigm's cleaning.sampling_rate")
    low, high = paradigm.cleaning.pass_band
    if not low < freq < high:
        section.fail("frequency", f"{_num(freq)} Hz is outside the pass band [{_num(low)}, {_num(high)}] Hz "
                     f"of paradigm \"{paradigm.name}\"", "widen the pass band or choose another frequency")
    return freq
