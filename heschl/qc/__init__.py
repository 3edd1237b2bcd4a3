"""Quality control of one recording: metrics, flags and verdict, and the evidence the page draws.

:func:`quality_record` builds the record written to qc.json; :mod:`heschl.pages` and
the group tables read it and never recompute a metric or a flag.
"""
from __future__ import annotations

from . import flags as _flags
from . import evidence
from .evidence import recording_evidence
from .flags import FLAG_LEVELS, verdict
from .metrics import (channel_record, kept_blinks, marker_counts, mastoid_inversion, ocular_record, snr,
                      trial_counts, vertical_eog)

__all__ = ["quality_record", "unusable_record", "evidence", "recording_evidence", "verdict", "FLAG_LEVELS", "trial_counts", "kept_blinks",
           "vertical_eog"]


def quality_record(recording, analysis, source, steps, rows, skipped_sets):
    """The QC record of one recording: metrics, flags and verdict.

    Parameters
    ----------
    recording : heschl.inputs.Recording
    analysis : heschl.config.Analysis
        The analysis restricted to the feature sets that applied.
    source : heschl.features.Source
        The kept trials.
    steps : dict
        ``harmonised``, ``cleaning``, ``markers``, ``rejection`` and ``counts``: the
        records of the stages.
    rows : list of dict
        The feature rows.
    skipped_sets : dict
        Feature set -> why it did not apply.
    """
    paradigm = analysis.paradigm
    limits = paradigm.quality
    harmonised, cleaning, markers = steps["harmonised"], steps["cleaning"], steps["markers"]
    counts = steps["counts"]
    channels = channel_record(harmonised, cleaning)
    snrs = snr(source, paradigm, analysis)
    inversion = mastoid_inversion(analysis, source)
    ocular = ocular_record(cleaning, steps["rejection"], harmonised)
    found = (_flags.trial_flags(counts, limits) + _flags.channel_flags(channels, limits)
             + _flags.snr_flags(snrs, limits) + _flags.cleaning_flags(cleaning, limits, paradigm)
             + _flags.input_flags(markers, harmonised["file_sampling_rate"], rows,
                                 harmonised.get("reader_notes", ()))
             + _flags.inversion_flags(inversion, cleaning["reference"]) + _flags.ocular_flags(ocular, limits))
    return {
        **_identity(recording),
        "verdict": verdict(found),
        "flags": found,
        "thresholds": limits,
        "channels": channels,
        "datatype": harmonised.get("datatype", "eeg"),
        "markers": {"counts": marker_counts(markers), "unmapped": markers.unknown,
                    "trigger_delay_s": harmonised["trigger_delay_s"]},
        "trials": counts,
        "snr": snrs,
        "sampling_rate_hz": {"file": harmonised["file_sampling_rate"], "analysis": harmonised["sampling_rate"]},
        "duration_s": harmonised["duration_s"],
        "filter": cleaning["filter"],
        "reference": cleaning["reference"],
        "mastoid_inversion": inversion,
        "ocular": ocular,
        "line_noise": cleaning.get("line_noise"),
        "feature_sets": {"used": [fs.name for fs in analysis.feature_sets], "not_applicable": skipped_sets},
    }


def _identity(recording):
    """The keys that name a recording, first in every QC record."""
    return {"participant_id": recording.participant_id, "site": recording.site, "group": recording.group,
            "paradigm": recording.paradigm}


#: Words for the stage at which an unusable recording stopped, for its flag.
STOPPED_AT = {"harmonise": "harmonising", "channels": "matching the feature sets' channels",
              "clean": "cleaning", "segment and reject": "segmenting and rejection"}


def unusable_record(recording, analysis, raw, harmonised, cleaning, stage, reason):
    """The QC record of a recording that was read but cannot give features.

    The verdict is "unusable" with the reason as its flag; the channel record is kept
    where harmonising got that far (what was found bad and why), so the page and
    ``group/qc.tsv`` show the same evidence as for any recording.

    Parameters
    ----------
    recording : heschl.inputs.Recording
    analysis : heschl.config.Analysis
    raw : mne.io.BaseRaw
        The data as far as the stages got.
    harmonised : dict or None
        The harmonising record; None when harmonising itself stopped.
    cleaning : dict
        What cleaning decided until it stopped (may be empty).
    stage : str
        Key of :data:`STOPPED_AT`.
    reason : str
        The one-line error.
    """
    found = [_flags.flag("unusable", "cannot-use", f"stopped while {STOPPED_AT.get(stage, stage)}: {reason}")]
    channels = None
    if harmonised is not None and "bad_channels" in cleaning:
        channels = channel_record(harmonised, dict(cleaning, interpolated=[]))
        channels["found_bad"] = channels.pop("bad")
        channels["bad_fraction"], channels["interpolated_fraction"] = channels["interpolated_fraction"], None
    sfreq = float(raw.info["sfreq"])
    return {
        **_identity(recording),
        "verdict": verdict(found),
        "flags": found,
        "unusable": {"stage": stage, "reason": reason},
        "thresholds": analysis.paradigm.quality,
        "channels": channels,
        "datatype": (harmonised or {}).get("datatype", recording.datatype),
        "sampling_rate_hz": {"file": (harmonised or {}).get("file_sampling_rate", sfreq),
                             "analysis": (harmonised or {}).get("sampling_rate")},
        "duration_s": (harmonised or {}).get("duration_s", raw.n_times / sfreq),
        "line_noise": cleaning.get("line_noise"),
        "feature_sets": {"used": [], "not_applicable": {}},
    }
