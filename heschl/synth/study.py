"""Write recordings and whole synthetic studies, with their ground truth.

An EEG recording is generated in four steps: the subject's brain (reference-free
potentials at 1000 Hz), scalp-level artefacts, the site's own reference and channel
faults, then the site's sampling rate, rail and file format. Random numbers come from
streams keyed by (seed, subject, group, paradigm, purpose), never by site: the same subject
written by two EEG sites has the same brain, the same artefacts and the same stimulus
schedule.

The MEG site (Dogwood, :mod:`heschl.synth.meg`) records the oddball only. It shares the
subject's parameters, stimulus schedule and blink times with the EEG sites (same
streams); its background, sensor noise, drift, mains and bad channels have streams of
their own, so adding it changed no EEG file.
"""
from __future__ import annotations

import datetime
import json
import logging
import re
import zlib
from fractions import Fraction
from pathlib import Path

import numpy as np
import scipy.signal

from . import artefacts as art
from . import geometry, meg
from .brain import SFREQ, background_patterns, draw_subject_params, expected_values
from .brain import scalp_potentials
from .events import make_schedule
from .sites import (
    ALL_SITES, COMMON_CHANNELS, GROUPS, MEG_SITES, PARADIGMS, SITE_DIFFERENCE, SITE_SPECS, SITES,
    SIZES,
)
from .writers import eeg_fif_info, write_brainvision, write_edf, write_fif

__all__ = ["make_study", "write_recording", "SUBJECTS_PER_GROUP", "MEG_SUBJECTS",
           "FEATURE_SETS", "study_toml_text", "SITES", "MEG_SITES"]

logger = logging.getLogger(__name__)

#: Subjects per group and EEG site for each size.
SUBJECTS_PER_GROUP = {"test": 1, "demo": 2, "bench": 1}

#: The subjects of each MEG site, ``(id, group)``, at every size.
MEG_SUBJECTS = {"dogwood": (("D01", "control"),)}

#: Feature sets of each paradigm's analysis in the study file.
FEATURE_SETS = {"oddball": ("oddball-core", "oddball-meg"),
                "clicktrain": ("clicktrain-core",), "rest": ("rest-core",)}

#: The one recording whose deviants are mostly spoiled: Birch's first comparison
#: subject, oddball.
LOW_COUNT = {"site": "birch", "paradigm": "oddball", "group": "comparison"}

_STIM_PULSE_SAMPLES = 5
_START = datetime.datetime(2026, 12, 1, 9, 0, 0)
STUDY_NAME = "Alder-Birch-Cedar auditory study (synthetic)"
_STIM_NAMES = {"fif": "STI 014", "meg-fif": meg.STIM_CHANNEL}


def _stream(seed, *keys):
    """Random generator for one purpose, from the study seed and text keys."""
    entropy = [int(seed)] + [zlib.crc32(str(key).encode("utf-8")) for key in keys]
    return np.random.default_rng(np.random.SeedSequence(entropy))


def _subject_number(subject):
    """Number in a subject id (``"B03"`` gives 3), 0 if there is none."""
    digits = re.sub(r"\D", "", subject)
    return int(digits) if digits else 0


def _is_low_count(site, paradigm, group, subject, size):
    """Whether this recording is the study's low-count recording."""
    first_comparison = SUBJECTS_PER_GROUP[size] + 1
    return (site, paradigm, group) == tuple(LOW_COUNT.values()) and (
        _subject_number(subject) == first_comparison)


def _check_choice(name, value, allowed):
    """Raise ValueError naming the argument, the value and what is allowed."""
    if value not in allowed:
        raise ValueError(f"heschl.synth: {name}: {value!r} is not known; "
                         f"choose one of {', '.join(map(repr, allowed))}.")


def _rows(names):
    """Row indices of points in the generator's point list."""
    return [geometry.POINTS.index(name) for name in names]


def _reference(scalp, spec):
    """Apply the site's recording reference; return stored rows and their names.

    Returns
    -------
    data : ndarray, shape (n_stored, n_times)
        EEG (then EOG at Cedar), V.
    names : list of str
        Names as the site writes them.
    """
    eeg = scalp[_rows(spec.channels)]
    if spec.reference == "average":
        eeg = eeg - eeg.mean(axis=0)
    elif spec.reference == "linked-mastoids":
        eeg = eeg - scalp[_rows(["M1", "M2"])].mean(axis=0)
    else:
        eeg = eeg - scalp[geometry.POINTS.index(spec.reference)]
    names = spec.file_channel_names()
    if not spec.eog:
        return eeg, names
    sup, inf, left, right = scalp[_rows(geometry.EOG_POINTS)]
    eog = {"HEOG": right - left, "VEOG": sup - inf}
    return np.vstack([eeg] + [eog[name][None] for name in spec.eog]), names + list(spec.eog)


def _resample(data, sfreq_out):
    """Resample from the generator's rate to the site's rate (polyphase, zero phase).

    The anti-alias filter is a Kaiser-windowed sinc reaching 6 zero crossings each side
    (at least 40 taps each side); scipy's default reaches 10, slower for 1000 to 512 Hz
    and no better below 100 Hz, where the EEG is.
    """
    ratio = Fraction(sfreq_out / SFREQ).limit_denominator(10_000)
    if ratio == 1:
        return data
    widest = max(ratio.numerator, ratio.denominator)
    half = max(6 * widest, 40)
    taps = scipy.signal.firwin(2 * half + 1, 1.0 / widest, window=("kaiser", 8.0))
    return scipy.signal.resample_poly(data, ratio.numerator, ratio.denominator, axis=1,
                                      window=taps.astype(data.dtype), padtype="line")


def _scalp_artefacts(scalp, schedule, keys, seed, low_count):
    """Add scalp-level artefacts in place and return their truth."""
    truth = {
        "blinks_s": art.add_blinks(scalp, _stream(seed, "blinks", *keys), schedule, SFREQ),
        "muscle_s": art.add_muscle(scalp, _stream(seed, "muscle", *keys),
                                   schedule.duration, SFREQ),
        "spoiled_deviants_s": [],
    }
    art.add_drift(scalp, _stream(seed, "drift", *keys), SFREQ)
    if low_count:
        truth["spoiled_deviants_s"] = art.add_low_count_transients(
            scalp, _stream(seed, "low-count", *keys), schedule.onsets["deviant"], SFREQ)
    return truth


def _bad_channels(data, names, spec, rng, common_channels, rng_leads=None):
    """Choose the recording's bad channels and corrupt them in place; return truth.

    One or two channels drawn at random (``cause`` "random"), then the site's broken
    leads (``cause`` "broken-lead", :attr:`SiteSpec.broken_leads`, from ``rng_leads``);
    a random draw that falls on a broken lead is left to the broken lead.
    """
    chosen = [dict(b, cause="random") for b in art.choose_bad_channels(rng, common_channels)
              if b["standard_name"] not in spec.broken_leads]
    for bad in chosen:
        row = list(spec.channels).index(bad["standard_name"])
        data[row] = art.corrupt_channel(data[row], bad["kind"], rng, SFREQ)
        bad["channel"] = names[row]
    for name, kind in spec.broken_leads.items():
        row = list(spec.channels).index(name)
        data[row] = art.corrupt_channel(data[row], kind, rng_leads, SFREQ)
        chosen.append({"standard_name": name, "kind": kind, "cause": "broken-lead", "channel": names[row]})
    return [{"channel": b["channel"], "standard_name": b["standard_name"],
             "kind": b["kind"], "cause": b["cause"]} for b in chosen]


def _start_time(subject, paradigm):
    """Start of a recording: one day per subject number, 20 min per paradigm."""
    return _START + datetime.timedelta(days=_subject_number(subject),
                                       minutes=20 * PARADIGMS.index(paradigm))


def _stim_channel(onsets, n_times, sfreq):
    """Stimulus channel: a pulse of the code at every ``(time_s, code)``, 0 elsewhere."""
    stim = np.zeros(n_times)
    for time, code in onsets:
        first = int(round(time * sfreq))
        stim[first:first + _STIM_PULSE_SAMPLES] = code
    return stim


def _write_files(folder, spec, subject, paradigm, data, names, schedule):
    """Write the stored signals in the site's format; return the file names."""
    stem = f"sub-{subject}_task-{paradigm}"
    codes = spec.markers[paradigm]
    start = _start_time(subject, paradigm)
    onsets = [(t + spec.trigger_delay_s, codes[c]) for t, c in schedule.all_onsets()]
    if spec.file_format == "brainvision":
        markers = [(t, "Stimulus", code) for t, code in onsets]
        return write_brainvision(folder, f"{stem}_eeg", data, names, spec.sfreq,
                                 reference=spec.reference, markers=markers, start=start)
    if spec.file_format == "edf":
        return write_edf(folder / f"{stem}_eeg.edf", data, names, spec.sfreq,
                         annotations=onsets, patient=f"sub-{subject}", start=start,
                         rail=art.RAIL_V)
    stim = _stim_channel(onsets, data.shape[1], spec.sfreq)
    types = ["eeg"] * len(spec.channels) + ["eog"] * len(spec.eog)
    info = eeg_fif_info(names, types, spec.sfreq, line_freq=spec.line_frequency)
    return write_fif(folder / f"{stem}_raw.fif", data, info, stim=stim, start=start,
                     subject=f"sub-{subject}")


def _check_arguments(site, paradigm, group, size, seed):
    """Validate write_recording's choices."""
    _check_choice("site", site, ALL_SITES)
    _check_choice("paradigm", paradigm, PARADIGMS)
    recorded = SITE_SPECS[site].paradigms
    if paradigm not in recorded:
        raise ValueError(f"heschl.synth: paradigm: {paradigm!r} is not recorded at {site} "
                         f"(an MEG site); choose one of {', '.join(map(repr, recorded))}.")
    _check_choice("group", group, GROUPS)
    _check_choice("size", size, SIZES)
    if int(seed) < 0:
        raise ValueError(f"heschl.synth: seed: {seed} is negative; use a whole number "
                         "of 0 or more.")


def write_recording(folder, *, site, paradigm, subject, group, seed, size="demo",
                    artefacts=True, common_channels=None):
    """Write one recording as ``site`` stores it, and return its ground truth.

    The brain, the stimulus schedule and the scalp-level artefacts depend on
    ``(seed, subject, group, paradigm, size)`` only, so writing the same subject as two
    EEG sites gives two files of one brain. The mains frequency, the reference, the
    channels, the rate and the format are the site's. ``site="dogwood"`` writes the MEG
    recording of :func:`heschl.synth.meg.simulate_oddball` (oddball only) with the same
    subject parameters, schedule and blink times. With ``artefacts=True`` and
    ``(site, paradigm, group) == ("birch", "oddball", "comparison")`` the first
    comparison subject of the size (``B02`` for test and bench, ``B03`` for demo) is
    the low-count recording: all but 18 deviants carry a large transient.

    Parameters
    ----------
    folder : path-like
        Folder to write into; created if missing.
    site : {"alder", "birch", "cedar", "dogwood"}
        How the file is stored.
    paradigm : {"oddball", "clicktrain", "rest"}
        What was recorded (Dogwood records only ``"oddball"``; the others raise
        ValueError there).
    subject : str
        Subject id, with or without ``sub-`` (``"A01"`` and ``"sub-A01"`` are the same).
    group : {"control", "comparison"}
        The subject's group; sets the group effects.
    seed : int
        Study seed (0 or more).
    size : {"test", "demo", "bench"}, default="demo"
        Recording length class.
    artefacts : bool, default=True
        Add blinks, muscle, drift, bad channels (at Cedar also its three broken leads,
        see :data:`heschl.synth.sites.SITE_DIFFERENCE`), a saturation (and the low-count
        transients); line noise is always present. At Dogwood: blinks, drift and two
        bad channels.
    common_channels : sequence of str, optional
        The study's common channels (default :data:`COMMON_CHANNELS`): bad channels are
        drawn from them and the expected values use their average reference (EEG).

    Returns
    -------
    dict
        The truth record; ``files`` are names relative to ``folder``.
    """
    _check_arguments(site, paradigm, group, size, seed)
    spec = SITE_SPECS[site]
    subject = str(subject).removeprefix("sub-")
    common = tuple(common_channels or COMMON_CHANNELS)
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    if spec.modality == "meg":
        return _write_meg_recording(folder, spec, subject, group, seed, size, artefacts)
    keys = (subject, group, paradigm, size)

    params = draw_subject_params(_stream(seed, "subject", subject, group), group)
    patterns = background_patterns(_stream(seed, "patterns", subject, group))
    schedule = make_schedule(_stream(seed, "events", *keys), paradigm, size)
    scalp = scalp_potentials(schedule, params, patterns, _stream(seed, "noise", *keys),
                             _stream(seed, "trials", *keys))
    low_count = artefacts and _is_low_count(site, paradigm, group, subject, size)
    truth = {"blinks_s": [], "muscle_s": [], "spoiled_deviants_s": []}
    if artefacts:
        truth = _scalp_artefacts(scalp, schedule, keys, seed, low_count)
    art.add_line_noise(scalp, _stream(seed, "line", *keys), SFREQ, spec.line_frequency)

    data, names = _reference(scalp.total(), spec)
    del scalp
    bad = []
    if artefacts:
        bad = _bad_channels(data, names, spec, _stream(seed, "bad", *keys), common,
                            _stream(seed, "broken-leads", *keys))
    data = _resample(data, spec.sfreq)
    saturation = (art.draw_saturation(_stream(seed, "saturation", *keys),
                                      schedule.duration) if artefacts else None)
    art.apply_saturation(data, saturation, spec.sfreq)
    files = _write_files(folder, spec, subject, paradigm, data, names, schedule)
    logger.info("Wrote %s %s sub-%s (%d channels, %d s).", site, paradigm, subject,
                len(names), schedule.duration)
    expected = expected_values(paradigm, params, common, patterns=patterns)
    return _truth_record(spec, subject, group, schedule, files, names, params, truth,
                         bad, saturation, low_count, expected)


def _meg_streams(seed, subject, group, keys):
    """The random streams of a Dogwood recording (see meg.simulate_oddball)."""
    streams = {name: _stream(seed, f"meg-{name}", *keys)
               for name in ("noise", "drift", "line", "bad")}
    streams["patterns"] = _stream(seed, "meg-patterns", subject, group)
    streams["blinks"] = _stream(seed, "blinks", *keys)  # the EEG sites' blink times
    return streams


def _write_meg_recording(folder, spec, subject, group, seed, size, artefacts):
    """Write one Dogwood (MEG) oddball recording; return its truth record."""
    paradigm = "oddball"
    keys = (subject, group, paradigm, size)
    params = draw_subject_params(_stream(seed, "subject", subject, group), group)
    schedule = make_schedule(_stream(seed, "events", *keys), paradigm, size)
    recording = meg.simulate_oddball(schedule, params,
                                     _meg_streams(seed, subject, group, keys),
                                     artefacts=artefacts)
    codes = spec.markers[paradigm]
    onsets = [(t + spec.trigger_delay_s, codes[c]) for t, c in schedule.all_onsets()]
    stim = _stim_channel(onsets, recording.data.shape[1], spec.sfreq)
    files = write_fif(folder / spec.file_names(subject, paradigm)[0], recording.data,
                      meg.measurement_info(spec.sfreq), stim=stim,
                      start=_start_time(subject, paradigm), subject=f"sub-{subject}")
    names = list(meg.CHANNELS) + list(spec.eog)
    logger.info("Wrote %s %s sub-%s (%d channels, %d s).", spec.name, paradigm, subject,
                len(names), schedule.duration)
    truth = {"blinks_s": recording.blinks_s, "muscle_s": [], "spoiled_deviants_s": []}
    return _truth_record(spec, subject, group, schedule, files, names, params, truth,
                         recording.bad_channels, None, False, meg.expected_fields(params))


def _truth_record(spec, subject, group, schedule, files, names, params, truth, bad,
                  saturation, low_count, expected):
    """Assemble the JSON-ready truth of one recording."""
    paradigm = schedule.paradigm
    stim = _STIM_NAMES.get(spec.file_format)
    channel_names = list(names) + ([stim] if stim else [])
    return {
        "site": spec.name,
        "participant_id": f"sub-{subject}",
        "group": group,
        "paradigm": paradigm,
        "modality": spec.modality,
        "files": files,
        "sfreq": spec.sfreq,
        "duration_s": schedule.duration,
        "channel_names_in_file": channel_names,
        "recording_reference": spec.reference,
        "line_frequency": spec.line_frequency,
        "trigger_delay_ms": round(spec.trigger_delay_s * 1e3, 3),
        "marker_codes": dict(spec.markers[paradigm]),
        "events_s": {c: [round(float(t), 3) for t in times]
                     for c, times in schedule.onsets.items()},
        "bad_channels": bad,
        "blinks_s": truth["blinks_s"],
        "muscle_s": truth["muscle_s"],
        "saturation_s": [saturation] if saturation else [],
        "low_count_condition": "deviant" if low_count else None,
        "spoiled_deviants_s": truth["spoiled_deviants_s"],
        "params": params,
        "expected": expected,
    }


def _subjects(site, size):
    """``(subject id, group)`` of one site: controls first, then comparisons."""
    if site in MEG_SUBJECTS:
        return list(MEG_SUBJECTS[site])
    n = SUBJECTS_PER_GROUP[size]
    letter = SITE_SPECS[site].letter
    return [(f"{letter}{g * n + k + 1:02d}", group)
            for g, group in enumerate(GROUPS) for k in range(n)]


def _toml_list(values):
    """TOML inline array of strings."""
    return "[" + ", ".join(json.dumps(v) for v in values) + "]"


def _site_toml(site):
    """The ``[sites.<site>]`` tables of the study file.

    An EEG site names its recording reference and trigger delay; an MEG site has
    ``datatype = "meg"``, no reference and no delay (0 ms).
    """
    spec = SITE_SPECS[site]
    lines = [f"[sites.{site}]"]
    if spec.modality == "eeg":
        lines.append(f"recording_reference = {json.dumps(spec.reference)}")
    else:
        lines.append(f"datatype = {json.dumps(spec.modality)}")
    lines.append(f"line_frequency = {spec.line_frequency:.1f}")
    if spec.modality == "eeg":
        lines.append(f"trigger_delay_ms = {spec.trigger_delay_s * 1e3:.1f}")
    if spec.eog:
        lines.append(f"eog_channels = {_toml_list(spec.eog)}")
    lines.append(f"[sites.{site}.files]")
    for paradigm in spec.paradigms:
        name = spec.file_names("*", paradigm)[0]
        lines.append(f'{paradigm} = "raw/{site}/sub-*/{name}"')
    for paradigm in spec.paradigms:
        lines.append(f"[sites.{site}.markers.{paradigm}]")
        for condition, code in spec.markers[paradigm].items():
            text = f"Stimulus/{code}" if spec.file_format == "brainvision" else str(code)
            lines.append(f"{json.dumps(text)} = {json.dumps(condition)}")
    return "\n".join(lines) + "\n"


def study_toml_text(common_channels=COMMON_CHANNELS):
    """Return the text of the synthetic study's ``study.toml``.

    Parameters
    ----------
    common_channels : sequence of str, default=COMMON_CHANNELS
        The study's common channels.

    Returns
    -------
    str
    """
    head = [f"name = {json.dumps(STUDY_NAME)}",
            'output = "derivatives/heschl"',
            'participants = "participants.tsv"',
            f"common_channels = {_toml_list(common_channels)}", "",
            "[groups]", f"labels = {_toml_list(GROUPS)}", f"reference = {json.dumps(GROUPS[0])}", ""]
    for paradigm in PARADIGMS:
        head += ["[[analyses]]", f"paradigm = {json.dumps(paradigm)}",
                 f"feature_sets = {_toml_list(FEATURE_SETS[paradigm])}", ""]
    return "\n".join(head) + "\n" + "\n".join(_site_toml(site) for site in ALL_SITES)


def make_study(root, *, size="demo", seed=20261201, artefacts=True):
    """Write the whole synthetic study under ``root``: three EEG sites and Dogwood (MEG).

    Writes ``raw/<site>/sub-<id>/...`` for every site, subject and paradigm the site
    records (Dogwood: subject ``D01``, control, oddball only, at every size), then
    ``participants.tsv``, ``truth.json`` and ``study.toml`` (paths relative to it).
    ``truth.json`` holds ``site_difference``: the planted difference between the sites
    (:data:`heschl.synth.sites.SITE_DIFFERENCE`, with ``applied`` False when
    ``artefacts=False``).

    Parameters
    ----------
    root : path-like
        Study folder; created if missing, existing files of the same names replaced.
    size : {"test", "demo", "bench"}, default="demo"
        Subjects per group and EEG site (1, 2, 1) and recording lengths.
    seed : int, default=20261201
        Study seed; every random number derives from it.
    artefacts : bool, default=True
        Inject artefacts (see :func:`write_recording`).

    Returns
    -------
    pathlib.Path
        Path of ``study.toml``.
    """
    _check_choice("size", size, SIZES)
    root = Path(root)
    recordings, participants = [], []
    for site in ALL_SITES:
        for subject, group in _subjects(site, size):
            participants.append((f"sub-{subject}", site, group))
            relative = Path("raw", site, f"sub-{subject}")
            for paradigm in SITE_SPECS[site].paradigms:
                record = write_recording(root / relative, site=site, paradigm=paradigm,
                                         subject=subject, group=group, seed=seed,
                                         size=size, artefacts=artefacts)
                record["files"] = [(relative / name).as_posix() for name in record["files"]]
                recordings.append(record)
    rows = ["participant_id\tsite\tgroup"] + ["\t".join(p) for p in participants]
    (root / "participants.tsv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    truth = {"seed": int(seed), "size": size, "common_channels": list(COMMON_CHANNELS),
             "site_difference": dict(SITE_DIFFERENCE, applied=bool(artefacts)),
             "recordings": recordings}
    (root / "truth.json").write_text(json.dumps(truth, indent=1) + "\n", encoding="utf-8")
    study = root / "study.toml"
    study.write_text(study_toml_text(), encoding="utf-8")
    logger.info("Wrote a %s study of %d recordings under %s.", size, len(recordings), root)
    return study

