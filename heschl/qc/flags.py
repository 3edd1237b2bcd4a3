"""Flags and the verdict of one recording, from its recorded QC metrics.

A flag is ``{"level", "code", "message"}`` with a level of :data:`FLAG_LEVELS`; the
verdict is the worst level, or "clear" without flags. Every rule reads the metrics and
the paradigm's ``[quality]`` limits; none recomputes a metric.
"""
from __future__ import annotations

import numpy as np

from ..vocabulary import FLAG_LEVELS
from .metrics import vertical_residual

__all__ = ["FLAG_LEVELS", "flag", "verdict", "trial_flags", "channel_flags", "snr_flags", "cleaning_flags",
           "input_flags", "inversion_flags", "ocular_flags"]


def flag(level, code, message):
    """One flag record."""
    return {"level": level, "code": code, "message": message}


def verdict(flags):
    """The recording's verdict: its worst flag level, or "clear" without flags."""
    worst = max((FLAG_LEVELS.index(f["level"]) for f in flags), default=-1)
    return "clear" if worst < 0 else FLAG_LEVELS[worst]


def trial_flags(counts, limits):
    """A condition under its minimum is unusable; one that lost many eligible trials is a caution."""
    flags = []
    for c, n in counts.items():
        if n["kept"] < n["minimum"]:
            reasons = ", ".join(f"{k} {v}" for k, v in n["reasons"].items()) or "none dropped"
            flags.append(flag("unusable", "too-few-trials",
                              f"{c}: {n['kept']} trials kept, below the minimum {n['minimum']} "
                              f"({n['planned']} planned; dropped: {reasons})"))
            continue
        skipped = n["reasons"].get("skipped", 0)  # left out by design, not for artefacts
        eligible, dropped = n["planned"] - skipped, n["dropped"] - skipped
        if eligible and dropped / eligible > limits["max_dropped"]:
            flags.append(flag("caution", "many-dropped", f"{c}: {dropped} of {eligible} trials dropped, "
                              f"more than {limits['max_dropped']:.0%}"))
    return flags


def channel_flags(channels, limits):
    """Interpolated channels: a note, or a caution above the limit for the worst sensor type."""
    bads = channels["bad"]
    if not bads:
        return []
    by_type = channels["by_type"]
    level = "caution" if channels["interpolated_fraction"] > limits["max_interpolated"] else "note"
    tally = (", ".join(f"{v['interpolated']} of {v['channels']} {k.upper()}" for k, v in by_type.items()
                       if v["interpolated"]) if len(by_type) > 1
             else f"{len(bads)} of {len(channels['analysed'])}")
    return [flag(level, "channels-interpolated", f"{tally} channel(s) interpolated: " + ", ".join(sorted(bads)))]


def snr_flags(snr, limits):
    """Condition averages whose plus-minus SNR is under the limit."""
    return [flag("caution", "low-snr", f"{c}: average SNR {value:.2f} below {limits['min_snr']:g} "
                 "(plus-minus estimate)")
            for c, value in snr.items() if value is not None and value < limits["min_snr"]]


def cleaning_flags(cleaning, limits, paradigm):
    """Flags from the line-noise and ocular records."""
    flags = []
    ocular = cleaning.get("ocular") or {}
    if ocular.get("skipped_reason") and ocular.get("policy") != "none":
        flags.append(flag("caution", "no-ocular-correction", ocular["skipped_reason"]))
    ica = ocular.get("ica") or {}
    if ica.get("selection") == "properties" and not ica.get("excluded"):
        flags.append(flag("note", "no-ocular-component",
                          f"no EOG channel and none of the {ica.get('n_components')} ICA components has every "
                          "property of a blink or an eye movement: any left were left to epoch rejection. "
                          "Check the frontal channels of the averages"))
    worst = vertical_residual(ocular)
    if worst is not None and worst > limits["max_eog_correlation"]:
        flags.append(flag("caution", "ocular-residual", f"EEG still correlates {worst:.2f} with the EOG source "
                          f"after correction (limit {limits['max_eog_correlation']:g})"))
    line = cleaning.get("line_noise") or {}
    ratio = line.get("ratio_after")
    if ratio is not None and line.get("line_frequency_hz", 1e9) <= paradigm.cleaning.pass_band[1] \
            and ratio > limits["max_line_ratio"]:
        flags.append(flag("caution", "line-noise", f"line-noise power {ratio:.1f} x its neighbours after removal "
                          f"(limit {limits['max_line_ratio']:g})"))
    return flags


def input_flags(markers, file_rate, rows, reader_notes=()):
    """What the reader said about the file (a truncated file is a caution), unmapped
    marker codes, a low sampling rate, features that could not be computed."""
    flags = []
    for note in reader_notes:
        if note["kind"] == "truncated":
            share = note["missing_s"] / note["declared_s"]
            flags.append(flag("caution", "truncated-file",
                              f"the file holds {note['read_s']:.1f} s of the {note['declared_s']:.1f} s "
                              f"{note['basis']} declares: {note['missing_s']:.1f} s ({share:.0%}) missing, and "
                              "any markers there with it"))
        else:
            flags.append(flag("note", "reader-warning", f"the file's reader says: {note['words']}"))
    if markers.unknown:
        flags.append(flag("note", "unmapped-markers", "codes in the file not used by this paradigm: "
                          + ", ".join(f"{k} ({v})" for k, v in sorted(markers.unknown.items()))))
    if file_rate < 200:
        # docs/REFERENCES.md F27: digital EEG guidelines ask for at least 200 Hz.
        flags.append(flag("caution", "low-sampling-rate", f"recorded at {file_rate:g} Hz, below 200 Hz"))
    if any(not np.isfinite(r["value"]) for r in rows):
        flags.append(flag("unusable", "missing-features", "some features could not be computed"))
    return flags


def inversion_flags(inversion, reference):
    """Under the average reference a mismatch that does not invert at the mastoids is noted."""
    if reference.get("reference") != "average":
        return []
    return [flag("note", "no-mastoid-inversion",
                 f"{signal} does not invert at the mastoids under the average reference "
                 f"({v['region']} {v['region_uv']:.2f} uV, {'/'.join(v['mastoids'])} {v['mastoid_uv']:.2f} uV); "
                 "a supratemporal generator would (Naatanen et al. 2007)")
            for signal, v in inversion.items() if not v["inverted"]]


def ocular_flags(ocular, limits):
    """A recording without EOG gets a note that blinks were only left to rejection; one
    with a vertical EOG is flagged when too many kept trials still hold a blink."""
    if not ocular["eog_channels"]:
        if ocular["method"] in ("none", None):
            return [flag("note", "no-eog", "no EOG channel: ocular artefacts were not corrected and cannot be "
                         f"measured against an EOG; they were left to epoch rejection (cleaning.ocular = "
                         f"\"{ocular['policy']}\"). Check frontal channels of the averages for blink residue")]
        return []
    blinks = ocular["kept_blinks"]
    if blinks is None and ocular["method"] in ("none", None):
        return [flag("note", "no-vertical-eog", f"EOG channels {', '.join(ocular['eog_channels'])}: none is named "
                     "as the vertical one (VEOG), so blinks in kept trials were not counted; rename it VEOG with "
                     "channel_aliases in the study file")]
    if blinks and blinks["fraction"] is not None and blinks["fraction"] > limits["max_blink_trials"]:
        return [flag("caution", "blinks-in-kept-trials",
                     f"{blinks['kept_with_blink']} of {blinks['kept_trials']} kept trials hold a blink found on "
                     f"{blinks['channel']} (more than {limits['max_blink_trials']:.0%})")]
    return []
