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

__all__ = ["quality_record", "evidence", "recording_evidence", "verdict", "FLAG_LEVELS", "trial_counts", "kept_blinks",
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
             + _flags.input_flags(markers, harmonised["file_sampling_rate"], rows)
             + _flags.inversion_flags(inversion, cleaning["reference"]) + _flags.ocular_flags(ocular, limits))
    return {
        "participant_id": recording.participant_id, "site": recording.site, "group": recording.group,
        "paradigm": recording.paradigm,
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
