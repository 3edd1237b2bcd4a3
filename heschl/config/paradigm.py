"""Paradigm files: conditions, contrasts, cleaning, epochs or segments, rejection, QC limits."""
from __future__ import annotations

from ..vocabulary import (BAD_CHANNEL_POLICIES, DESIGNS, DISPLAY_UNITS, LINE_NOISE_METHODS, OCULAR_POLICIES,
                          REFERENCE_WORDS, REJECTION_METHODS)
from .files import _read_toml
from .model import MUSCLE_Z, Cleaning, Condition, Contrast, EpochSpec, Paradigm, Rejection, SegmentSpec, SkipRule
from .sections import _Section, _num, _show

__all__ = ["QUALITY_KEYS", "PEAK_TO_PEAK_KEYS", "load_paradigm"]

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
    ocular = section.string("ocular", default="auto", choices=OCULAR_POLICIES)
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
    "peak_to_peak_uv": ("eeg", *DISPLAY_UNITS["eeg"], None),
    "peak_to_peak_ft": ("mag", *DISPLAY_UNITS["mag"], 4000.0),
    "peak_to_peak_ft_per_cm": ("grad", *DISPLAY_UNITS["grad"], 4000.0),
}


def _rejection(top, conditions):
    section = top.sub("rejection", {"method", "min_trials", "detection_high_pass", "max_cluster", "equalise", "muscle_z"}
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
    if section.raw("muscle_z", default=MUSCLE_Z) is False:
        muscle = None
    else:
        muscle = section.number("muscle_z", default=MUSCLE_Z, low=0.0, strict_low=True)
    counts = section.sub("min_trials", set(conditions), default={})
    min_trials = {c: counts.integer(c, low=1) for c in counts.data}
    return Rejection(method, ptp, min_trials, high_pass, max_cluster, equalise, meg, muscle)


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
