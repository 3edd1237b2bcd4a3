"""One recording from file to features: read, harmonise, clean, segment, reject, measure.

:func:`process_recording` is a pure task: its outputs are determined by the input bytes,
the definitions and the package version, which is what makes resuming and parallel runs
simple. It only orchestrates: every stage lives in its own module and records its
decisions; QC is built in :mod:`heschl.qc`; it returns plain data that
:mod:`heschl.outputs` writes.
"""
from __future__ import annotations

import logging
import os
import time

from . import __version__
from .errors import InputDataError
from .inputs import PIPELINE_REVISION, analysis_of, definitions_of, display_path, input_hashes, input_key

__all__ = ["process_recording", "package_versions", "PIPELINE_REVISION"]

log = logging.getLogger(__name__)


class _Clock:
    """Seconds spent in each stage."""

    def __init__(self):
        self.times, self._t = {}, time.perf_counter()

    def lap(self, name):
        from .memory import give_back

        now = time.perf_counter()
        self.times[name] = round(now - self._t, 3)
        give_back()  # the stage's freed temporaries back to the system (heschl.memory)
        self._t = time.perf_counter()


def process_recording(study, recording, hashes=None):
    """Run every stage for one recording; every log line on the way names it.

    ``hashes`` (from :func:`heschl.inputs.input_hashes`) may be passed when the caller has
    them already, so that the input files are read for hashing only once.

    Returns
    -------
    result : dict
        ``rows`` (feature rows), ``qc``, ``provenance``, ``evidence`` (what the QC page
        draws, JSON-ready; see :func:`heschl.qc.evidence.recording_evidence`) and
        ``arrays`` (model-ready datasets), all plain data.
    """
    from .runlog import recording_context

    with recording_context(recording.name):
        return _process(study, recording, hashes)


def _process(study, recording, hashes):
    """The stages of :func:`process_recording`, in order."""
    from .arrays import recording_arrays
    from .clean import clean
    from .features import Source, applicable, compute_features
    from .harmonise import harmonise, read_for_run
    from .qc import quality_record
    from .qc.evidence import OcularWatch, channel_spectra, recording_evidence, spectrum_limit

    analysis = analysis_of(study, recording)
    paradigm, site = analysis.paradigm, study.sites[recording.site]
    where = display_path(recording.path)
    clock = _Clock()
    hashes = input_hashes(recording) if hashes is None else hashes
    definitions = definitions_of(study, recording)
    key = input_key(hashes, definitions)
    reader = []   # what the reader said about the file (warnings, truncation)
    # An unreadable file ends here, without a page.
    raw, early_markers = read_for_run(recording.path, site, paradigm, where, notes=reader)
    clock.lap("read")
    # What the stages found so far, for the page of a recording that turns out unusable.
    found = {"stage": "harmonise", "raw": raw, "harmonised": None, "cleaning": None, "spectra_before": None,
             "fmax": spectrum_limit(raw.info["sfreq"], site.line_frequency)}
    try:
        raw, markers, harmonised = harmonise(raw, site, paradigm, study.common_channels, where, markers=early_markers)
        harmonised["reader_notes"] = reader
        found.update(raw=raw, harmonised=harmonised, stage="channels")
        analysis, skipped_sets = applicable(analysis, harmonised["channels"], where,
                                            set(harmonised["channel_types"].values()))
        clock.lap("harmonise")
        # Spectra of the harmonised data before clean() changes raw in place: Welch averages
        # only, read a few channels at a time, so no second copy of the recording is kept.
        fmax = spectrum_limit(raw.info["sfreq"], site.line_frequency)
        spectra_before = channel_spectra(raw, fmax)
        found.update(spectra_before=spectra_before, stage="clean")
        watch = OcularWatch()
        cleaning = clean(raw, paradigm, site.bad_channels.get(recording.participant_id, ()), where,
                         restored=harmonised["restored_reference"], line_frequency=site.line_frequency, watch=watch,
                         stuck=harmonised.pop("stuck_runs", None))
        found.update(cleaning=cleaning, stage="segment and reject")
        spectra_after = channel_spectra(raw, fmax)
        clock.lap("clean")
        trials, times, entries, ch_names, rejection, counts = _segment_and_reject(raw, markers, paradigm, cleaning)
    except InputDataError as exc:
        clock.lap(found["stage"])
        return _unusable(study, recording, analysis, site, found, exc, hashes, definitions, key, clock)
    cell_labels = rejection.pop("cell_labels", None)  # for the page's decision image, not provenance
    clock.lap("segment and reject")
    source = Source(trials, times, ch_names, raw.info["sfreq"], paradigm,
                    ch_types=[harmonised["channel_types"][c] for c in ch_names])
    rows = [row for fs in analysis.feature_sets for row in compute_features(fs, source, paradigm.rejection.min_trials)]
    log.info("%d features from %d feature set(s)", len(rows), len(analysis.feature_sets))
    clock.lap("features")
    arrays = recording_arrays(analysis, source, recording, key, definitions)
    clock.lap("arrays")
    steps = {"harmonised": harmonised, "cleaning": cleaning, "markers": markers, "rejection": rejection,
             "counts": counts}
    qc = quality_record(recording, analysis, source, steps, rows, skipped_sets)
    evidence = recording_evidence(analysis, source, raw.info, {
        "cleaning": cleaning, "entries": entries, "cell_labels": cell_labels, "ocular": watch.record_,
        "spectra": (spectra_before[0], spectra_before[1], spectra_after[1]), "line_frequency": site.line_frequency})
    clock.lap("evidence")
    log.info("Verdict %s (%d flag%s)", qc["verdict"], len(qc["flags"]), "" if len(qc["flags"]) == 1 else "s")
    provenance = _provenance(study, recording, hashes, key, definitions, clock, {
        "harmonise": harmonised, "clean": cleaning, "rejection": dict(rejection, trials=counts),
        "trial_log": entries})
    return {"rows": rows, "qc": qc, "provenance": provenance, "evidence": evidence, "arrays": arrays}


def _provenance(study, recording, hashes, key, definitions, clock, steps):
    return {
        "recording": {"site": recording.site, "participant_id": recording.participant_id,
                      "group": recording.group, "paradigm": recording.paradigm,
                      # relative to the study file, so outputs do not depend on the working folder
                      "file": os.path.relpath(recording.path, study.root),
                      "datatype": recording.datatype},
        "inputs_sha256": hashes,
        "key": key,
        "definitions": definitions,
        "steps": steps,
        "versions": package_versions(),
        "timings_s": clock.times,
    }


def _unusable(study, recording, analysis, site, found, exc, hashes, definitions, key, clock):
    """The result of a recording that was read but cannot give features: no rows and no
    arrays, the verdict "unusable" with the reason, and the evidence gathered until then
    (spectra, sensor map, the bad-channel detector's statistics) for its page."""
    from .qc import unusable_record
    from .qc.evidence import channel_spectra, unusable_evidence

    cleaning = found["cleaning"] or getattr(exc, "record", None) or {}
    raw = found["raw"]
    spectra = found["spectra_before"]
    if spectra is None:
        spectra = channel_spectra(raw, found["fmax"])  # the data as read: harmonising stopped
    stage = getattr(exc, "stage", None) or found["stage"]
    # The page is about this file: its path (relative to wherever heschl ran) would only
    # repeat the header; the console and provenance keep the whole message.
    reason = str(exc)
    prefix = f"{display_path(recording.path)}: "
    reason = reason[len(prefix):] if reason.startswith(prefix) else reason
    qc = unusable_record(recording, analysis, raw, found["harmonised"], cleaning, stage, reason)
    evidence = unusable_evidence(analysis, raw.info, cleaning, spectra, site.line_frequency, stage)
    clock.lap("evidence")
    log.warning("Verdict unusable at %s: %s", stage, exc)
    provenance = _provenance(study, recording, hashes, key, definitions, clock, {
        "harmonise": found["harmonised"], "clean": cleaning, "stopped": {"stage": stage, "reason": str(exc)}})
    return {"rows": [], "qc": qc, "provenance": provenance, "evidence": evidence, "arrays": {}}


def _segment_and_reject(raw, markers, paradigm, cleaning):
    """Cut epochs or segments, reject, and count what is left of blinks in the kept trials.

    Returns the kept trials per condition, their times, the trial log, the channel names,
    the rejection record and the trial counts per condition.
    """
    import mne

    from .qc import kept_blinks, trial_counts
    from .segment import cut, epoch_plan, reject, segment_plan
    from .sensors import data_picks, types_of

    picks = data_picks(raw.info)
    ch_names = [raw.ch_names[i] for i in picks]
    if paradigm.epochs is not None:
        plan = epoch_plan(markers, paradigm)
        window, baseline = paradigm.epochs.window, paradigm.epochs.baseline
    else:
        plan = segment_plan(markers, paradigm, raw.n_times / raw.info["sfreq"])
        window, baseline = (0.0, paradigm.segments.length - 1.0 / raw.info["sfreq"]), None
    x, times, entries = cut(raw, plan, window, picks)
    detection, info = None, None
    if paradigm.rejection.method == "adaptive":
        # Learn rejection on a copy high-passed for detection: slow ERP components kept by
        # a 0.1 Hz analysis high-pass would otherwise inflate the thresholds' rejections.
        # The data channels only, filtered in place (mne's filter_data with raw.filter's
        # defaults), and their trials cut from that array: no copy of the whole raw.
        copy = mne.filter.filter_data(raw.get_data(picks=picks), raw.info["sfreq"],
                                      paradigm.rejection.detection_high_pass, None, copy=False, verbose="error")
        detection, _, _ = cut(raw, plan, window, picks, data=copy)
        del copy  # only its trials are needed
        info = mne.pick_info(raw.info, picks)
    ocular = cleaning.get("ocular") or {}
    corrected = ocular.get("method") not in (None, "none") and not ocular.get("skipped_reason")
    blinks = None if corrected else _blink_stretches(raw)
    dropped = _stretch_drops(entries, window, cleaning, len(x), blinks)
    if detection is not None and any(r is not None for r in dropped):
        # Only the trials the rejection method will meet: the full array is freed here.
        detection = detection[[i for i, r in enumerate(dropped) if r is None]]
    data, entries, record = reject(x, times, entries, ch_names, paradigm, baseline, detection, info,
                                   types_of(raw.info, picks), dropped=dropped)
    record["kept_blinks"] = None if corrected else kept_blinks(raw, entries, window,
                                                                None if blinks is None else blinks["peaks_s"])
    counts = trial_counts(entries, paradigm)
    kept = sum(n["kept"] for n in counts.values())
    log.info("Kept %d of %d trials (%s)", kept, len(entries),
             ", ".join(f"{c} {n['kept']}" for c, n in counts.items()))
    return data, times, entries, ch_names, record, counts


def _blink_stretches(raw):
    """Where a blink peaks on the vertical EOG (plus-minus the QC's margin), for recordings
    whose blinks nothing corrected; None without a vertical EOG channel.

    Such blinks are left to epoch rejection (MEG under ``ocular = "auto"``, or
    ``ocular = "none"``). A peak-to-peak threshold learnt for the data channels need not
    catch them (on the demo's MEG oddball 17 of 290 kept trials held one), so a trial
    that overlaps a blink found on the EOG is dropped with that reason: rejection by the
    EOG channel, common practice; the detector is the QC's (`heschl.qc.kept_blinks`).
    """
    from .numeric.blinks import blink_peaks
    from .qc.metrics import BLINK_MARGIN_S, BLINK_THRESHOLD_V, vertical_eog

    channel = vertical_eog(raw)
    if channel is None:
        return None
    peaks = blink_peaks(raw.get_data(picks=[channel])[0], raw.info["sfreq"])
    return {"channel": channel, "threshold_uv": BLINK_THRESHOLD_V * 1e6, "peaks_s": peaks,
            "stretches_s": [(float(p) - BLINK_MARGIN_S, float(p) + BLINK_MARGIN_S) for p in peaks]}


def _stretch_drops(entries, window, cleaning, n_cut, blinks=None):
    """Per cut trial (``n_cut`` of them), the reason that drops it before rejection, or None:
    a stretch where channels sit at one value (heschl.saturation), else a muscle burst
    (heschl.muscle), else an uncorrected blink on the vertical EOG (`_blink_stretches`)."""
    from .muscle import overlapping

    dropped = [None] * n_cut
    muscle, stuck = cleaning.get("muscle"), cleaning.get("saturation")
    sources = []
    if stuck and stuck["stretches_s"]:
        names = {tuple(s): c for s, c in zip(stuck["stretches_s"], stuck["channels"])}
        sources.append((stuck["stretches_s"], lambda hit: (
            f"saturation: {_few(names.get(tuple(hit), []))} at one value from {hit[0]:.2f} to {hit[1]:.2f} s")))
    if muscle and muscle["stretches_s"]:
        lo, hi = muscle["band_hz"]
        sources.append((muscle["stretches_s"], lambda hit: (
            f"muscle: {lo:.4g}-{hi:.4g} Hz power above z {muscle['limit_z']:g} from {hit[0]:.2f} to {hit[1]:.2f} s")))
    if blinks and blinks["stretches_s"]:
        sources.append((blinks["stretches_s"], lambda hit: (
            f"blink: {blinks['channel']} above {blinks['threshold_uv']:g} uV at {(hit[0] + hit[1]) / 2:.2f} s "
            "(not corrected)")))
    for entry in entries:
        if entry.get("index") is None:
            continue
        for stretches, reason in sources:
            hit = overlapping(entry["onset_s"], window, stretches)
            if hit is not None:
                dropped[entry["index"]] = reason(hit)
                break
    n = sum(r is not None for r in dropped)
    if n:
        log.info("Saturation, muscle and uncorrected blinks drop %d of %d trials before rejection", n, n_cut)
    return dropped


def _few(channels):
    """"F3", "F3 and F4", "12 channels"."""
    if len(channels) > 3:
        return f"{len(channels)} channels"
    return " and ".join(channels) or "channels"


def package_versions():
    """Versions of heschl and the libraries whose numbers shape the outputs."""
    import sys
    from importlib import metadata

    out = {"heschl": __version__}
    for name in ("mne", "numpy", "scipy", "pandas", "jinja2", "matplotlib"):
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    out["python"] = sys.version.split()[0]
    return out
