"""Load and validate the three kinds of declarative file: paradigm, feature set, study.

Everything here is checked before any data are read, and nothing heavy is imported, so
``heschl check`` and definition errors are instant. Every error is one line naming the
file, the key path, what is wrong and how to fix it (see :func:`heschl.errors.problem`).

Units at this edge: times in seconds, frequencies in Hz, keys ending ``_uv`` in
microvolts and ``_ms`` in milliseconds. Inside the returned objects everything is SI
(s, Hz, V).
"""
from __future__ import annotations

import math
import os
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path

from .errors import DefinitionError, did_you_mean, problem

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - exercised on Python 3.10 only
    import tomli as tomllib

__all__ = [
    "Condition", "Contrast", "Cleaning", "EpochSpec", "SkipRule", "SegmentSpec",
    "Rejection", "Paradigm", "Measure", "FeatureSet", "Site", "Analysis", "Study",
    "MEASURE_KINDS", "load_paradigm", "load_feature_set", "load_study", "builtin_dir",
    "builtin_names", "resolve_definition",
]

_REQUIRED = object()
DESIGNS = ("event-related", "steady-state", "resting")
REFERENCE_WORDS = ("average", "as-recorded", "linked-mastoids")
RECORDING_REFERENCE_WORDS = ("average", "linked-mastoids", "unknown")
REJECTION_METHODS = ("adaptive", "fixed", "none")
LINE_NOISE_METHODS = ("notch", "fit", "none")
OCULAR_METHODS = ("auto", "regression", "ica", "none")
BAD_CHANNEL_POLICIES = ("detect", "keep")
POLARITIES = ("negative", "positive")
BAND_CLOSURES = ("left", "right", "both", "neither")
COMBINES = ("mean", "rms")  # how a waveform measure joins its region's channels  # which band edges belong to the band

# Parameters of every measure kind: (required keys, optional keys, default unit, allowed units).
# heschl.features.MEASURES holds the functions; a test keeps the two in step.
# Amplitude and power units: EEG regions read uV or V, magnetometer regions fT or T,
# gradiometer regions fT/cm or T/m (heschl.sensors checks each region against its unit).
_AMPLITUDE_UNITS = ("uV", "V", "fT", "T", "fT/cm", "T/m")
_POWER_UNITS = ("uV^2", "V^2", "fT^2", "T^2", "(fT/cm)^2", "(T/m)^2")
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
                         ("log10(uV^2/Hz)", "log10(fT^2/Hz)", "log10((fT/cm)^2/Hz)")),
}
_EPOCH_KINDS = {"mean-amplitude", "peak-amplitude", "peak-latency", "itpc", "evoked-power",
                "fractional-area-latency", "induced-power", "ppc", "rayleigh-p", "snr", "snr-p"}
_SPECTRUM_KINDS = {"band-power", "relative-band-power", "band-ratio", "peak-frequency", "aperiodic-exponent",
                   "aperiodic-offset"}


# --------------------------------------------------------------------------- objects
@dataclass(frozen=True)
class Condition:
    name: str
    markers: tuple


@dataclass(frozen=True)
class Contrast:
    name: str
    plus: str
    minus: str


@dataclass(frozen=True)
class Cleaning:
    sampling_rate: float          # Hz
    pass_band: tuple              # (low, high) Hz
    reference: object             # "average" | "linked-mastoids" | "as-recorded" | tuple of channel names
    bad_channels: str             # "detect" | "keep"
    line_noise: str = "notch"     # "notch" | "fit" | "none"
    ocular: str = "none"          # "auto" | "regression" | "ica" | "none"


@dataclass(frozen=True)
class SkipRule:
    condition: str
    after: str


@dataclass(frozen=True)
class EpochSpec:
    window: tuple                 # (tmin, tmax) s
    baseline: object              # (start, stop) s or None
    skip: tuple = ()


@dataclass(frozen=True)
class SegmentSpec:
    length: float                 # s
    overlap: float                # fraction
    skip_start: float             # s


@dataclass(frozen=True)
class Rejection:
    method: str
    peak_to_peak: object          # V or None (EEG)
    min_trials: dict
    detection_high_pass: float = 1.0   # Hz, adaptive: decisions learned on a copy high-passed here
    max_cluster: int = 3               # adaptive: largest group of neighbouring interpolated channels
    equalise: bool = False             # equalise kept trial counts across conditions
    # fixed: limits of the MEG sensor types, SI (T for magnetometers, T/m for gradiometers)
    peak_to_peak_meg: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Paradigm:
    name: str
    design: str
    summary: str
    source: str
    conditions: dict
    contrasts: dict
    cleaning: Cleaning
    epochs: object                # EpochSpec or None
    segments: object              # SegmentSpec or None
    rejection: Rejection
    stimulation: dict
    quality: dict
    document: dict = field(repr=False, compare=False)

    @property
    def signals(self):
        """Names a measure may read: conditions and contrasts."""
        return list(self.conditions) + list(self.contrasts)


@dataclass(frozen=True)
class Measure:
    name: str
    kind: str
    params: dict
    unit: str


@dataclass(frozen=True)
class FeatureSet:
    name: str
    paradigm: str
    summary: str
    source: str
    regions: dict
    bands: dict
    spectrum: dict
    measures: tuple
    reliability: dict = field(default_factory=dict)
    band_closures: dict = field(default_factory=dict)   # band -> "left" | "right" | "both" | "neither"
    document: dict = field(repr=False, compare=False, default_factory=dict)


@dataclass(frozen=True)
class Site:
    name: str
    recording_reference: str
    line_frequency: float         # Hz
    trigger_delay: float          # s (markers late by this much)
    files: dict                   # paradigm -> glob pattern (relative to the study file)
    markers: dict                 # paradigm -> {code in file: marker label}
    channel_aliases: dict
    eog_channels: tuple
    subject_pattern: str
    bad_channels: dict            # participant_id -> tuple of channel names
    datatype: str = "eeg"         # BIDS datatype of the site's recordings: "eeg" or "meg"


@dataclass(frozen=True)
class Analysis:
    paradigm: Paradigm
    feature_sets: tuple


@dataclass(frozen=True)
class Study:
    name: str
    source: str
    root: Path
    output: Path
    participants: object          # Path or None
    common_channels: tuple
    analyses: tuple
    sites: dict
    document: dict = field(repr=False, compare=False)


# --------------------------------------------------------------------------- reading
class _Section:
    """One TOML table being read: typed getters, unknown keys refused with did-you-mean."""

    def __init__(self, data, where, path, known):
        self.data, self.where, self.path = data, where, path
        if not isinstance(data, dict):
            self.fail(None, f"expected a table, got {_show(data)}", "write it as a [table]")
        for key in data:
            if key not in known:
                self.fail(key, f'unknown key "{key}"{did_you_mean(key, known)}',
                          f"use one of: {', '.join(sorted(known))}")

    def key(self, key):
        return ".".join(p for p in (self.path, key) if p)

    def fail(self, key, what, fix):
        raise DefinitionError(problem(self.where, what, fix, key=self.key(key) if key else self.path))

    def raw(self, key, default=_REQUIRED):
        if key in self.data:
            return self.data[key]
        if default is _REQUIRED:
            self.fail(key, "missing required key", f'add "{key} = ..." to the file')
        return default

    def string(self, key, default=_REQUIRED, choices=None):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if not isinstance(value, str) or not value.strip():
            self.fail(key, f"expected a non-empty text, got {_show(value)}", 'write it in quotes, e.g. "name"')
        if choices is not None and value not in choices:
            self.fail(key, f'"{value}" is not a known choice{did_you_mean(value, choices)}',
                      f"use one of: {', '.join(choices)}")
        return value

    def number(self, key, default=_REQUIRED, unit="", low=None, high=None, strict_low=False):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.fail(key, f"expected a number{_in(unit)}, got {_show(value)}", "write a plain number")
        _check_range(self, key, float(value), unit, low, high, strict_low)
        return float(value)

    def integer(self, key, default=_REQUIRED, low=None):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(key, f"expected a whole number, got {_show(value)}", "write a whole number such as 30")
        if low is not None and value < low:
            self.fail(key, f"{value} is below the minimum {low}", f"use a whole number of at least {low}")
        return value

    def pair(self, key, default=_REQUIRED, unit="s", low=None, high=None):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if (not isinstance(value, list) or len(value) != 2
                or any(isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
                       for v in value)):
            self.fail(key, f"expected two finite numbers [start, stop]{_in(unit)}, got {_show(value)}",
                      "write it as [start, stop]")
        start, stop = float(value[0]), float(value[1])
        if not start < stop:
            self.fail(key, f"[{_num(start)}, {_num(stop)}] {unit} does not increase",
                      "put the smaller value first")
        for v in (start, stop):
            _check_range(self, key, v, unit, low, high, False)
        return (start, stop)

    def strings(self, key, default=_REQUIRED, allow_single=False):
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if allow_single and isinstance(value, str):
            value = [value]
        if (not isinstance(value, list) or not value
                or not all(isinstance(v, str) and v.strip() for v in value)):
            self.fail(key, f"expected a list of texts, got {_show(value)}", 'write it as ["a", "b"]')
        if len(set(value)) != len(value):
            dup = sorted({v for v in value if value.count(v) > 1})
            self.fail(key, f"repeats {', '.join(dup)}", "list each name once")
        return tuple(value)

    def table(self, key, default=_REQUIRED):
        if key not in self.data and default is _REQUIRED:
            self.fail(key, "missing required table", f"add a [{self.key(key)}] table")
        value = self.raw(key, default)
        if value is default and default is not _REQUIRED:
            return value
        if not isinstance(value, dict):
            self.fail(key, f"expected a table, got {_show(value)}", f"write it as [{self.key(key)}]")
        return value

    def sub(self, key, known, default=_REQUIRED):
        value = self.table(key, default)
        if value is None:
            return None
        return _Section(value, self.where, self.key(key), known)


def _check_range(section, key, value, unit, low, high, strict_low):
    if low is not None and (value < low or (strict_low and value == low)):
        word = "above" if strict_low else "at least"
        section.fail(key, f"{_num(value)}{_sp(unit)} is out of range", f"use a value {word} {_num(low)}{_sp(unit)}")
    if high is not None and value > high:
        section.fail(key, f"{_num(value)}{_sp(unit)} is out of range", f"use a value of at most {_num(high)}{_sp(unit)}")


def _show(value):
    text = repr(value) if not isinstance(value, str) else f'"{value}"'
    return text if len(text) < 60 else text[:57] + "..."


def _num(value):
    return f"{value:g}"


def _sp(unit):
    return f" {unit}" if unit else ""


def _in(unit):
    return f" in {unit}" if unit else ""


def _display(path):
    path = Path(path)
    try:
        return os.path.relpath(path)
    except ValueError:  # pragma: no cover - other drive on Windows
        return str(path)


def _read_toml(path, kind):
    where = _display(path)
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh), where
    except FileNotFoundError:
        raise DefinitionError(problem(where, f"{kind} file not found", "check the path or the name")) from None
    except tomllib.TOMLDecodeError as exc:
        raise DefinitionError(problem(where, f"not valid TOML ({exc})", "fix the syntax at that line")) from None
    except (IsADirectoryError, PermissionError, UnicodeDecodeError) as exc:
        raise DefinitionError(problem(where, f"cannot be read ({exc.__class__.__name__})",
                                      f"give the path of a readable {kind} .toml file")) from None


# --------------------------------------------------------------------------- built-ins
def builtin_dir(kind):
    """Folder of the built-in definitions of one kind ("paradigms" or "features").

    Inside an installed wheel they sit in the package; in a source checkout (editable
    install) at the repository root.
    """
    here = Path(__file__).resolve().parent
    for candidate in (here / kind, here.parent / kind):
        if candidate.is_dir():
            return candidate
    raise DefinitionError(problem(str(here), f'built-in folder "{kind}" is missing from the installation',
                                  "reinstall heschl"))


def builtin_names(kind):
    """Sorted names of the built-in definitions of one kind."""
    return sorted(p.stem for p in builtin_dir(kind).glob("*.toml"))


def resolve_definition(name, kind, base, where, key):
    """Path of a definition given by built-in name or by path relative to ``base``."""
    text = str(name)
    if text.endswith(".toml") or "/" in text or os.sep in text:
        path = Path(text)
        return path if path.is_absolute() else Path(base) / path
    candidate = builtin_dir(kind) / f"{text}.toml"
    if candidate.is_file():
        return candidate
    names = builtin_names(kind)
    label = {"features": "feature set"}.get(kind, kind[:-1])
    raise DefinitionError(problem(where, f'no built-in {label} named "{text}"{did_you_mean(text, names)}',
                                  f"use one of: {', '.join(names)}, or a path ending in .toml", key=key))


# --------------------------------------------------------------------------- paradigm
_PARADIGM_KEYS = {"name", "design", "summary", "conditions", "contrasts", "cleaning", "epochs",
                  "segments", "rejection", "stimulation", "quality"}
# QC thresholds: key -> (default, low, high). A recording beyond one is flagged "caution".
QUALITY_KEYS = {
    "max_dropped": (0.3, 0.0, 1.0),        # fraction of a condition's planned trials dropped
    "max_interpolated": (0.15, 0.0, 1.0),  # fraction of channels interpolated
    "min_snr": (1.1, 0.0, None),           # plus-minus SNR of each condition average (epoch designs)
    "max_line_ratio": (3.0, 1.0, None),    # residual line-noise power over neighbouring bins
    "max_eog_correlation": (0.2, 0.0, 1.0),  # residual |correlation| of EEG with EOG
    "max_blink_trials": (0.05, 0.0, 1.0),    # fraction of kept trials holding a blink (vertical EOG)
}


def load_paradigm(path):
    """Read and validate a paradigm file; returns a :class:`Paradigm`."""
    doc, where = _read_toml(path, "paradigm")
    top = _Section(doc, where, "", _PARADIGM_KEYS)
    name = top.string("name")
    design = top.string("design", choices=DESIGNS)
    conditions = _conditions(top)
    contrasts = _contrasts(top, conditions)
    cleaning = _cleaning(top)
    epochs, segments = _timing(top, design, conditions)
    rejection = _rejection(top, conditions)
    stimulation = _stimulation(top, cleaning)
    section = top.sub("quality", set(QUALITY_KEYS), default={})
    quality = {k: section.number(k, default=d, low=lo, high=hi) for k, (d, lo, hi) in QUALITY_KEYS.items()}
    return Paradigm(name=name, design=design, summary=top.string("summary", default=""),
                    source=str(path), conditions=conditions, contrasts=contrasts,
                    cleaning=cleaning, epochs=epochs, segments=segments, rejection=rejection,
                    stimulation=stimulation, quality=quality, document=doc)


def _conditions(top):
    table = top.table("conditions")
    if not table:
        top.fail("conditions", "no conditions defined", "add at least one [conditions.<name>] table")
    conditions, seen = {}, {}
    for cname in table:
        section = top.sub("conditions", set(table)).sub(cname, {"markers"})
        markers = section.strings("markers", allow_single=True)
        for marker in markers:
            if marker in seen:
                section.fail("markers", f'marker "{marker}" already defines condition "{seen[marker]}"',
                             "give each marker to one condition")
            seen[marker] = cname
        conditions[cname] = Condition(cname, markers)
    return conditions


def _contrasts(top, conditions):
    table = top.table("contrasts", default={})
    contrasts = {}
    for cname in table:
        if cname in conditions:
            top.fail(f"contrasts.{cname}", f'"{cname}" is already a condition', "give the contrast its own name")
        section = top.sub("contrasts", set(table)).sub(cname, {"plus", "minus"})
        plus = section.string("plus", choices=list(conditions))
        minus = section.string("minus", choices=list(conditions))
        if plus == minus:
            section.fail("minus", f'plus and minus are both "{plus}"', "name two different conditions")
        contrasts[cname] = Contrast(cname, plus, minus)
    return contrasts


def _cleaning(top):
    section = top.sub("cleaning", {"sampling_rate", "pass_band", "reference", "bad_channels", "line_noise",
                                   "ocular"})
    rate = section.number("sampling_rate", unit="Hz", low=50.0)
    band = section.pair("pass_band", unit="Hz", low=0.0)
    if band[0] <= 0:
        section.fail("pass_band", f"lower edge {_num(band[0])} Hz must be above 0 Hz",
                     "use e.g. 0.1 Hz for event-related data")
    if band[1] >= rate / 2:
        # docs/REFERENCES.md F26: the low-pass must stay below the Nyquist frequency of the new rate.
        section.fail("pass_band", f"upper edge {_num(band[1])} Hz is not below the Nyquist frequency "
                     f"{_num(rate / 2)} Hz of sampling_rate {_num(rate)} Hz",
                     f"lower the upper edge below {_num(rate / 2)} Hz or raise sampling_rate")
    ref = section.raw("reference", default="average")
    if isinstance(ref, list):
        ref = section.strings("reference")
    elif not isinstance(ref, str) or not ref.strip():
        section.fail("reference", f"expected a text or a list of channel names, got {_show(ref)}",
                     'use "average", "linked-mastoids", "as-recorded", a channel name or a list of channel names')
    elif ref not in REFERENCE_WORDS:
        ref = (ref,)
    policy = section.string("bad_channels", default="detect", choices=BAD_CHANNEL_POLICIES)
    line = section.string("line_noise", default="notch", choices=LINE_NOISE_METHODS)
    ocular = section.string("ocular", default="none", choices=OCULAR_METHODS)
    return Cleaning(rate, band, ref, policy, line, ocular)


def _timing(top, design, conditions):
    if design == "resting":
        if "epochs" in top.data:
            top.fail("epochs", 'a "resting" paradigm is cut into segments, not epochs',
                     "replace [epochs] with [segments]")
        section = top.sub("segments", {"length", "overlap", "skip_start"})
        length = section.number("length", unit="s", low=0.0, strict_low=True)
        overlap = section.number("overlap", default=0.0, low=0.0, high=0.95)
        skip_start = section.number("skip_start", default=0.0, unit="s", low=0.0)
        return None, SegmentSpec(length, overlap, skip_start)
    if "segments" in top.data:
        top.fail("segments", f'an "{design}" paradigm is cut into epochs around markers',
                 "replace [segments] with [epochs]")
    section = top.sub("epochs", {"window", "baseline", "skip"})
    window = section.pair("window", unit="s")
    if not window[0] <= 0 < window[1]:
        section.fail("window", f"[{_num(window[0])}, {_num(window[1])}] s does not include the marker at 0 s",
                     "start the window at or before 0 s")
    baseline = section.pair("baseline", default=None, unit="s")
    if baseline is not None and (baseline[0] < window[0] or baseline[1] > window[1]):
        section.fail("baseline", f"[{_num(baseline[0])}, {_num(baseline[1])}] s is not inside the epoch "
                     f"window [{_num(window[0])}, {_num(window[1])}] s", "choose a baseline inside the window")
    skip, rules = [], section.raw("skip", default=[])
    if not isinstance(rules, list):
        section.fail("skip", f"expected a list of tables, got {_show(rules)}",
                     'write it as skip = [{ condition = "a", after = "b" }]')
    for i, rule in enumerate(rules):
        rule_section = _Section(rule, section.where, f"{section.key('skip')}[{i}]", {"condition", "after"})
        skip.append(SkipRule(rule_section.string("condition", choices=list(conditions)),
                             rule_section.string("after", choices=list(conditions))))
    return EpochSpec(window, baseline, tuple(skip)), None


# Fixed peak-to-peak limits per sensor type: key -> (type, unit, factor from SI, default).
# The MEG defaults are the limits of mne's own tutorials (4000 fT, 4000 fT/cm; common practice).
PEAK_TO_PEAK_KEYS = {
    "peak_to_peak_uv": ("eeg", "uV", 1e6, None),
    "peak_to_peak_ft": ("mag", "fT", 1e15, 4000.0),
    "peak_to_peak_ft_per_cm": ("grad", "fT/cm", 1e13, 4000.0),
}


def _rejection(top, conditions):
    section = top.sub("rejection", {"method", "min_trials", "detection_high_pass", "max_cluster", "equalise"}
                      | set(PEAK_TO_PEAK_KEYS))
    method = section.string("method", choices=REJECTION_METHODS)
    ptp, meg = None, {}
    if method == "fixed":
        ptp = section.number("peak_to_peak_uv", unit="uV", low=0.0, strict_low=True) * 1e-6
        for key, (kind, unit, factor, default) in PEAK_TO_PEAK_KEYS.items():
            if kind != "eeg":
                meg[kind] = section.number(key, default=default, unit=unit, low=0.0, strict_low=True) / factor
    for key in PEAK_TO_PEAK_KEYS:
        if key in section.data and method != "fixed":
            section.fail(key, f'is only used with method = "fixed", not "{method}"',
                         "remove it or set method = \"fixed\"")
    for key in ("detection_high_pass", "max_cluster"):
        if key in section.data and method != "adaptive":
            section.fail(key, f'is only used with method = "adaptive", not "{method}"',
                         "remove it or set method = \"adaptive\"")
    high_pass = section.number("detection_high_pass", default=1.0, unit="Hz", low=0.0, strict_low=True, high=10.0)
    max_cluster = section.integer("max_cluster", default=3, low=1)
    equalise = section.raw("equalise", default=False)
    if not isinstance(equalise, bool):
        section.fail("equalise", f"expected true or false, got {_show(equalise)}", "write equalise = true or false")
    counts = section.sub("min_trials", set(conditions), default={})
    min_trials = {c: counts.integer(c, low=1) for c in counts.data}
    return Rejection(method, ptp, min_trials, high_pass, max_cluster, equalise, meg)


def _stimulation(top, cleaning):
    section = top.sub("stimulation", {"frequency", "duration"}, default=None)
    if section is None:
        return {}
    out = {"frequency": section.number("frequency", unit="Hz", low=0.0, strict_low=True),
           "duration": section.number("duration", default=None, unit="s", low=0.0, strict_low=True)}
    if out["frequency"] >= cleaning.sampling_rate / 2:
        section.fail("frequency", f"{_num(out['frequency'])} Hz is not below the Nyquist frequency "
                     f"{_num(cleaning.sampling_rate / 2)} Hz", "raise cleaning.sampling_rate")
    return out


# --------------------------------------------------------------------------- feature set
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
    bands, closures = {}, {}
    band_table = top.sub("bands", set(top.table("bands", default={})), default={})
    for bname in band_table.data:
        if isinstance(band_table.data[bname], dict):  # { range = [lo, hi], closed = "both" }
            entry = band_table.sub(bname, {"range", "closed"})
            bands[bname] = entry.pair("range", unit="Hz", low=0.0)
            closures[bname] = entry.string("closed", default="left", choices=BAND_CLOSURES)
        else:
            bands[bname] = band_table.pair(bname, unit="Hz", low=0.0)
            closures[bname] = "left"
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
        fixed["fraction"] = section.number("fraction", default=0.5, low=0.0, high=1.0, strict_low=True)
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


# --------------------------------------------------------------------------- study
_STUDY_KEYS = {"name", "output", "participants", "common_channels", "analyses", "sites"}
DATATYPES = ("eeg", "meg")  # BIDS datatypes heschl writes
_SITE_KEYS = {"datatype", "recording_reference", "line_frequency", "trigger_delay_ms", "files", "markers",
              "channel_aliases", "eog_channels", "subject_pattern", "bad_channels"}
DEFAULT_SUBJECT_PATTERN = r"sub-([A-Za-z0-9]+)"


def load_study(path):
    """Read and validate a study file and every definition it names; returns a :class:`Study`."""
    path = Path(path)
    doc, where = _read_toml(path, "study")
    top = _Section(doc, where, "", _STUDY_KEYS)
    root = path.resolve().parent
    name = top.string("name")
    output = Path(top.string("output", default="derivatives/heschl"))
    participants = top.string("participants", default=None)
    if participants is not None:
        participants = root / participants
        if not participants.is_file():
            top.fail("participants", f'file "{_display(participants)}" not found',
                     "give the path of a participants table relative to the study file")
    common = top.strings("common_channels", default=())
    analyses = _analyses(top, root)
    sites = _sites(top, {a.paradigm.name: a.paradigm for a in analyses})
    return Study(name=name, source=str(path), root=root,
                 output=output if output.is_absolute() else root / output,
                 participants=participants, common_channels=common, analyses=analyses,
                 sites=sites, document=doc)


def _analyses(top, root):
    items = top.raw("analyses", default=None)
    if not isinstance(items, list) or not items:
        top.fail("analyses", "expected at least one [[analyses]] entry",
                 'add [[analyses]] with paradigm = "..." and feature_sets = [...]')
    analyses, seen = [], set()
    for i, item in enumerate(items):
        section = _Section(item, top.where, f"analyses[{i}]", {"paradigm", "feature_sets"})
        ppath = resolve_definition(section.string("paradigm"), "paradigms", root, top.where, section.key("paradigm"))
        paradigm = load_paradigm(ppath)
        if paradigm.name in seen:
            section.fail("paradigm", f'paradigm "{paradigm.name}" is listed twice', "list each paradigm once")
        seen.add(paradigm.name)
        sets = []
        for fname in section.strings("feature_sets", allow_single=True):
            fpath = resolve_definition(fname, "features", root, top.where, section.key("feature_sets"))
            sets.append(load_feature_set(fpath, paradigm))
        analyses.append(Analysis(paradigm, tuple(sets)))
    return tuple(analyses)


def _sites(top, paradigms):
    table = top.table("sites")
    if not table:
        top.fail("sites", "no sites defined", "add a [sites.<name>] table with its files")
    return {name: _site(top.sub("sites", set(table)).sub(name, _SITE_KEYS), name, paradigms)
            for name in table}


def _site(section, name, paradigms):
    datatype = section.string("datatype", default="eeg", choices=DATATYPES)
    ref = section.string("recording_reference", default="unknown")
    line = section.number("line_frequency", unit="Hz", low=0.0, strict_low=True)
    if line not in (50.0, 60.0):
        section.fail("line_frequency", f"{_num(line)} Hz is not a mains frequency", "use 50 or 60")
    delay = section.number("trigger_delay_ms", default=0.0, unit="ms", low=-1000.0, high=1000.0) / 1000.0
    for pname in section.table("files"):
        if pname not in paradigms:
            section.fail(f"files.{pname}", f'paradigm "{pname}" is not in [[analyses]]'
                         f"{did_you_mean(pname, paradigms)}",
                         f'add [[analyses]] with paradigm = "{pname}", or remove the pattern')
    files_section = section.sub("files", set(paradigms))
    files = {p: files_section.string(p) for p in files_section.data}
    if not files:
        section.fail("files", "no file patterns given", 'add e.g. oddball = "raw/site/*.vhdr" under [files]')
    markers_section = section.sub("markers", set(paradigms), default={})
    markers = {}
    for pname in files:
        if pname not in markers_section.data:
            section.fail(f"markers.{pname}", "missing: the site's marker codes for this paradigm are not given",
                         f"add [sites.{name}.markers.{pname}] mapping each code in the files to a marker")
        codes = markers_section.table(pname)
        labels = [m for c in paradigms[pname].conditions.values() for m in c.markers]
        inner = _Section(codes, section.where, markers_section.key(pname), set(codes))
        markers[pname] = {str(code): inner.string(code, choices=labels) for code in codes}
    aliases_section = section.sub("channel_aliases", set(section.table("channel_aliases", default={})), default={})
    aliases = {k: aliases_section.string(k) for k in aliases_section.data}
    eog = section.strings("eog_channels", default=())
    pattern = section.string("subject_pattern", default=DEFAULT_SUBJECT_PATTERN)
    try:
        if re.compile(pattern).groups < 1:
            section.fail("subject_pattern", f'"{pattern}" has no (group) for the subject id',
                         r'put the id in parentheses, e.g. "sub-([A-Za-z0-9]+)"')
    except re.error as exc:
        section.fail("subject_pattern", f'"{pattern}" is not a valid regular expression ({exc})',
                     "fix the pattern")
    forced = section.sub("bad_channels", set(section.table("bad_channels", default={})), default={})
    bad = {k: forced.strings(k) for k in forced.data}
    return Site(name=name, recording_reference=ref, line_frequency=line, trigger_delay=delay,
                files=files, markers=markers, channel_aliases=aliases, eog_channels=eog,
                subject_pattern=pattern, bad_channels=bad, datatype=datatype)
