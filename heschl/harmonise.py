"""Read a recording and bring it to the study's common form.

Channel names (site aliases, old 10-20 names, letter case), channel types, electrode
positions, markers (site code maps, trigger-delay correction), the recording reference
channel, the common channel set and the sampling rate. Every change is recorded in a
plain ``dict`` that ends up in ``qc.json`` and ``provenance.json``.
"""
from __future__ import annotations

import contextlib
import logging
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import HeschlError, InputDataError, problem
from .sensors import data_picks, types_of
from .vocabulary import RECORDING_REFERENCE_WORDS

__all__ = ["OLD_NAMES", "Markers", "read_raw", "standard_montage", "standard_name_map",
           "canonical_channel_names", "extract_markers", "inspect", "harmonise", "non_finite_samples"]

log = logging.getLogger(__name__)

# Old 10-20 labels renamed in the 10-10 nomenclature (ACNS Guideline 2, 2016; same positions).
OLD_NAMES = {"T3": "T7", "T4": "T8", "T5": "P7", "T6": "P8"}
_EOG_WORDS = ("EOG", "HEOG", "VEOG", "LEOG", "REOG")
_READERS = {".vhdr": "BrainVision", ".edf": "EDF", ".bdf": "BDF", ".fif": "FIF", ".set": "MATLAB .set",
            ".gz": "FIF"}


@dataclass
class Markers:
    """Marker onsets in seconds from the first sample, already corrected for trigger delay."""

    onsets: np.ndarray                    # shape (n,), s
    labels: list                          # marker labels of the paradigm
    unknown: dict = field(default_factory=dict)   # code in file -> count, codes the site map lacks


def read_raw(path, notes=None, preload=True):
    """Read any supported recording with mne's readers, read-only.

    Parameters
    ----------
    path : path-like
        .vhdr, .edf, .bdf, .fif or .set file.
    notes : list or None
        When given, receives what the reader said about the file (see `reader_notes`):
        its warnings in its own words, and how much of the file is missing when the file
        holds less data than its header or markers declare.
    preload : bool, default=True
        Read the data into memory (False: the header only, for ``heschl check``).

    Returns
    -------
    raw : mne.io.BaseRaw
    """
    import warnings

    import mne

    from .inputs import display_path

    path = Path(path)
    check_file(path)
    try:
        with warnings.catch_warnings(record=True) as said:
            warnings.simplefilter("always")
            raw = mne.io.read_raw(path, preload=False, verbose="warning")
    except Exception as exc:  # readers raise many kinds; the user needs one line
        raise InputDataError(_unreadable(path, exc)) from None
    if raw.n_times == 0:
        raise InputDataError(problem(display_path(path), "holds no samples (its header lists channels but no "
                                     "data)", "copy the recording again from its source; its data part is empty"))
    words = [_plain(str(w.message), path) for w in said] + (_load(raw, path) if preload else [])
    if notes is not None:
        notes.extend(reader_notes(path, raw, words))
    return raw


def _load(raw, path):
    """Load an opened recording's data; the reader's warnings, as messages show them."""
    import warnings

    try:
        with warnings.catch_warnings(record=True) as said:
            warnings.simplefilter("always")
            raw.load_data(verbose="warning")
    except Exception as exc:  # as at opening: one line
        raise InputDataError(_unreadable(path, exc)) from None
    return [_plain(str(w.message), path) for w in said]


def _markers(raw, site, paradigm, where):
    """The paradigm's markers in ``raw`` by the site's map; read failures in one line."""
    with _reading(where):
        return extract_markers(raw, site.markers[paradigm.name], site.trigger_delay, where,
                               f"[sites.{site.name}.markers.{paradigm.name}]")


def read_for_run(path, site, paradigm, where, notes=None):
    """Read a recording for ``heschl run``: the header, the markers, then the data channels.

    Markers on a stimulus channel are read from the file before the data are loaded
    (reading one channel is cheap), so that the stimulus channel is never loaded: picking
    it out of loaded data copies the whole recording (2.6 s and 0.47 GB for a 15-minute
    64-channel file at 1000 Hz; benchmarks/NOTES.md). When the markers cannot be read,
    everything is loaded and `inspect` raises the same one-line reason as ``heschl check``.

    Parameters
    ----------
    path : path-like
    site, paradigm : heschl.config.Site, heschl.config.Paradigm
    where : str
        The file, for messages.
    notes : list or None
        As for `read_raw`.

    Returns
    -------
    raw : mne.io.BaseRaw
        Loaded.
    markers : Markers or None
        None when they could not be read (`inspect` will say why).
    """
    import mne

    path = Path(path)
    raw = read_raw(path, notes=notes, preload=False)
    try:
        markers = _markers(raw, site, paradigm, where)
    except InputDataError:
        markers = None
    if markers is not None:
        stim = [raw.ch_names[i] for i in mne.pick_types(raw.info, stim=True, exclude=[])]
        if stim and len(stim) < len(raw.ch_names):
            raw.drop_channels(stim)
    words = _load(raw, path)
    if notes is not None:  # the loading's own warnings; the header's are in already
        known = {n.get("words") for n in notes}
        notes.extend(n for n in reader_notes(path, raw, words) if n["kind"] == "reader" and n["words"] not in known)
    return raw, markers


def check_file(path):
    """The checks of a recording's main file that need no reader: a supported type, a file
    (not a folder, not a broken link), not empty. One line otherwise."""
    from .inputs import display_path

    path = Path(path)
    shown = display_path(path)
    suffix = path.suffix.lower()
    if suffix not in _READERS:
        raise InputDataError(problem(shown, f'file type "{suffix}" is not supported',
                                     f"convert it to one of: {', '.join(sorted(set(_READERS) - {'.gz'}))}"))
    if path.is_dir():
        raise InputDataError(problem(shown, "is a folder, not a file",
                                     "narrow the site's file pattern in the study file so it matches recordings only"))
    if path.is_symlink() and not path.exists():
        raise InputDataError(problem(shown, f"is a link to {os.readlink(path)}, which does not exist",
                                     "restore the file the link points to or remove the link"))
    if not path.is_file():
        raise InputDataError(problem(shown, "file not found", "check the site's file pattern in the study file"))
    if path.stat().st_size == 0:
        raise InputDataError(problem(shown, "is empty (0 bytes)",
                                     "copy the recording again from its source; the copy was not completed"))


def _plain(text, path):
    """A reader's words with the file's absolute path shown as messages show paths."""
    import re

    from .inputs import display_path

    path = Path(str(path))
    text = re.sub(r"(?:Posix|Windows)?Path\('([^']*)'\)", r"\1", text)
    for full in {str(path.absolute()), str(path.resolve())}:
        text = text.replace(full, display_path(path))
    folder = str(path.absolute().parent) + os.sep
    return text.replace(folder, display_path(path.parent) + os.sep if display_path(path.parent) != "." else "")


def _unreadable(path, exc):
    """The one line for a file its reader fails on (at opening, or on a later read of an
    unloaded file's data)."""
    from .inputs import display_path

    text = str(exc).splitlines()[0] if str(exc) else exc.__class__.__name__
    kind = _READERS.get(Path(str(path)).suffix.lower(), "its type")
    return problem(display_path(path), f"cannot be read as {kind} ({_plain(text, path)})",
                   "check that the file is complete and of the type its name says")


@contextlib.contextmanager
def _reading(where):
    """Reads of a file's data (for an unloaded raw, the first touch of the samples) fail
    with the same one line as opening it."""
    try:
        yield
    except HeschlError:
        raise
    except Exception as exc:  # readers raise many kinds; the user needs one line
        raise InputDataError(_unreadable(where, exc)) from None


def reader_notes(path, raw, words):
    """What the reader said about a file, and whether the file holds all it declares.

    Parameters
    ----------
    path : pathlib.Path
    raw : mne.io.BaseRaw
        As read.
    words : list of str
        The reader's warnings.

    Returns
    -------
    notes : list of dict
        ``{"kind": "reader", "words": str}`` per distinct warning, and at most one
        ``{"kind": "truncated", "declared_s", "read_s", "missing_s", "basis"}`` when the
        header (EDF/BDF: records x record duration) or the last marker (BrainVision)
        declares more data than the file holds.
    """
    notes = [{"kind": "reader", "words": w.splitlines()[0]} for w in dict.fromkeys(words) if w.strip()]
    read_s = raw.n_times / raw.info["sfreq"]
    declared, basis = _declared_length(path, raw.info["sfreq"])
    if declared is not None and declared > read_s + 1.0 / raw.info["sfreq"]:
        notes.append({"kind": "truncated", "declared_s": round(float(declared), 3), "read_s": round(float(read_s), 3),
                      "missing_s": round(float(declared - read_s), 3), "basis": basis})
    return notes


def _declared_length(path, sfreq):
    """Seconds of data the file declares beyond what was read, and on what basis; (None, None)."""
    import re

    suffix = path.suffix.lower()
    try:
        if suffix in (".edf", ".bdf"):
            with open(path, "rb") as fh:
                head = fh.read(256)
            records, duration = int(head[236:244].strip()), float(head[244:252].strip())
            if records > 0 and duration > 0:
                return records * duration, "its header's record count"
        elif suffix == ".vhdr":
            text = path.read_text(encoding="latin-1", errors="replace")
            m = re.search(r"^MarkerFile=(.+)$", text, flags=re.M)
            if m:
                marks = (path.parent / m.group(1).strip()).read_text(encoding="latin-1", errors="replace")
                positions = [int(p) for p in re.findall(r"^Mk\d+=[^,\n]*,[^,\n]*,(\d+)", marks, flags=re.M)]
                if positions:
                    return max(positions) / sfreq, "its last marker"
    except (OSError, ValueError):
        pass
    return None, None


def standard_montage():
    """mne's template 10-05 montage (colin27 positions; older mne calls it standard_1005)."""
    import mne

    try:
        return mne.channels.make_standard_montage("colin27_1005")
    except ValueError:  # mne < 1.13
        return mne.channels.make_standard_montage("standard_1005")


def standard_name_map():
    """Map upper-case label -> correctly cased 10-05 label, old 10-20 names resolved."""
    names = {n.upper(): n for n in standard_montage().ch_names}
    for old, new in OLD_NAMES.items():
        names[old.upper()] = new
    return names


def canonical_channel_names(names, aliases=None, standard=None):
    """Rename channels to 10-10/10-05 spelling.

    Order: the site's own aliases, then the built-in old 10-20 names, then letter case,
    after stripping an "EEG " prefix. Names that match nothing are kept as they are.

    Returns
    -------
    mapping : dict
        Old name -> new name, only for names that change.
    """
    standard = standard_name_map() if standard is None else standard
    aliases = aliases or {}
    mapping = {}
    for name in names:
        new = aliases.get(name)
        if new is None:
            bare = name.strip()
            if bare.upper().startswith("EEG "):
                bare = bare[4:].strip()
            new = standard.get(bare.upper(), bare)
        if new != name:
            mapping[name] = new
    return mapping


def extract_markers(raw, code_map, delay, where, section="[sites.<site>.markers.<paradigm>]"):
    """Markers of the paradigm found in ``raw``, in seconds from its first sample.

    Parameters
    ----------
    raw : mne.io.BaseRaw
    code_map : dict
        Code as found in the file (annotation text or stimulus value as text) -> marker label.
    delay : float, s
        How late the site's markers are; subtracted from every onset.
    where : str
        The file, for messages.
    """
    import mne

    codes, onsets = [], []
    if len(raw.annotations):
        ids = {str(d): i + 1 for i, d in enumerate(sorted(set(raw.annotations.description)))}
        events, _ = mne.events_from_annotations(raw, event_id=ids, verbose="error")
        names = {v: k for k, v in ids.items()}
        codes = [names[int(c)] for c in events[:, 2]]
        onsets = list((events[:, 0] - raw.first_samp) / raw.info["sfreq"])
    stim = [raw.ch_names[i] for i in mne.pick_types(raw.info, stim=True)]
    if stim and not codes:
        events = mne.find_events(raw, stim_channel=stim[0], shortest_event=1, initial_event=True,
                                 consecutive=True, verbose="error")
        codes = [str(int(c)) for c in events[:, 2]]
        onsets = list((events[:, 0] - raw.first_samp) / raw.info["sfreq"])
    unknown, keep_on, keep_lab = {}, [], []
    for code, onset in zip(codes, onsets):
        if code in code_map:
            keep_on.append(onset - delay)
            keep_lab.append(code_map[code])
        else:
            unknown[code] = unknown.get(code, 0) + 1
    if not keep_lab:
        if not codes:
            what = "holds no markers at all (no annotations" + (")" if stim else ", no stimulus channel)")
        else:
            what = f"no marker of the paradigm found (codes in the file: {', '.join(sorted(unknown)[:8])})"
        raise InputDataError(problem(where, what, f"map the site's codes to the paradigm's markers under {section} "
                                     "in the study file" if codes else "check that the markers were exported"))
    order = np.argsort(keep_on, kind="stable")
    return Markers(np.asarray(keep_on)[order], [keep_lab[i] for i in order], unknown)


def inspect(raw, site, paradigm, common_channels, where, markers=None):
    """Every rule of harmonising that the header and a cheap read of the data decide.

    One code path for ``heschl run`` (through `harmonise`) and ``heschl check``: whatever
    this passes, harmonising can do; whatever harmonising would refuse before cleaning,
    this refuses first, with the same one-line message. It renames and types the channels
    of ``raw`` (the header only, so an unloaded raw serves) and reads the data only for
    the markers of a stimulus channel, the unit check's slices and the count of samples
    that are not finite.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Preloaded or not; its channel names and types are changed in place.
    site : heschl.config.Site
    paradigm : heschl.config.Paradigm
    common_channels : sequence of str
        The study's channel set; empty keeps every EEG channel.
    where : str
        The file, for messages.
    markers : Markers or None
        Already read from the file (`read_for_run`); None reads them here.

    Returns
    -------
    markers : Markers
    record : dict
        What was found: the renaming, EOG channels, the reference channel to restore,
        the amplitude check, the channels kept and the samples that are not finite.

    Raises
    ------
    heschl.errors.InputDataError
        The one-line reason the recording cannot be harmonised.
    """
    record = {"file_sampling_rate": float(raw.info["sfreq"]), "file_channels": list(raw.ch_names),
              "duration_s": float(raw.n_times / raw.info["sfreq"])}
    _check_length(record["duration_s"], paradigm, where)
    if markers is None:
        markers = _markers(raw, site, paradigm, where)
    _check_conditions(markers, paradigm, site, where)
    record["trigger_delay_s"] = site.trigger_delay
    renamed = canonical_channel_names(raw.ch_names, site.channel_aliases)
    _check_unique(raw.ch_names, renamed, where)
    raw.rename_channels(renamed)
    record["renamed"] = renamed
    record["eog_channels"] = _set_types(raw, site)
    record["absent_eog"] = [n for n in site.eog_channels if n not in raw.ch_names]
    ref = reference_channel(site)
    restore = ref if ref is not None and ref not in raw.ch_names else None
    record["restored_reference"] = restore
    _check_datatype(raw, site, where, n_eeg=len(_eeg_picks(raw)))
    eeg = [raw.ch_names[i] for i in _eeg_picks(raw)] + ([restore] if restore else [])
    # The study's common channels are an EEG cap; an MEG site keeps its sensors (and any
    # EEG it records beside them) as they are.
    common = list(common_channels) if site.datatype == "eeg" else []
    record["missing_channels"] = missing = [c for c in common if c not in eeg]
    if missing:
        raise InputDataError(problem(where, f"lacks {len(missing)} of the study's common channels "
                                     f"({', '.join(missing[:6])})",
                                     "add channel_aliases for them or shorten common_channels"))
    kept = common or eeg
    if kept and (restore or not _positions_measured(raw, [n for n in kept if n != restore])):
        known = set(standard_montage().ch_names)
        unknown = [n for n in kept if n not in known]
        if unknown:
            raise InputDataError(problem(where, f"no standard position for channels {', '.join(unknown[:6])}",
                                         "map them to 10-05 names with channel_aliases in the study file"))
    target = paradigm.cleaning.sampling_rate
    if raw.info["sfreq"] < target - 1e-9:
        raise InputDataError(problem(where, f"sampled at {raw.info['sfreq']:g} Hz, below the paradigm's "
                                     f"{target:g} Hz", "lower cleaning.sampling_rate in the paradigm"))
    with _reading(where):
        record["non_finite"] = non_finite_samples(raw, data_picks(raw.info))
        n = raw.n_times
        if record["non_finite"] and all(sum(b - a for a, b in record["non_finite"].get(raw.ch_names[i], ())) == n
                                        for i in data_picks(raw.info)):
            raise InputDataError(problem(where, "every sample of every data channel is NaN or infinite",
                                         "re-export the recording from its source; this export holds no values"))
        record["amplitude_check"] = check_units(raw, where)
    # The data channels harmonising will keep, in its order (harmonise() records what it
    # did keep under the same keys; a test holds the two equal).
    import mne

    meg = list(mne.pick_types(raw.info, meg=True, eeg=False, ref_meg=False, exclude=[]))
    record["channels"] = kept + [raw.ch_names[i] for i in meg]
    record["channel_types"] = dict(zip(record["channels"], ["eeg"] * len(kept) + types_of(raw.info, meg)))
    return markers, record


def harmonise(raw, site, paradigm, common_channels, where, markers=None):
    """Names, types, montage, reference channel, channel set and rate, in that order.

    The rules come from `inspect` (shared with ``heschl check``); this applies them.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Preloaded; changed in place (it is this task's own copy).
    site : heschl.config.Site
    paradigm : heschl.config.Paradigm
    common_channels : sequence of str
        The study's channel set; empty keeps every EEG channel.
    where : str
        The file, for messages.
    markers : Markers or None
        Already read (`read_for_run`), else read here.

    Returns
    -------
    raw : mne.io.BaseRaw
    markers : Markers
    record : dict
        What was found and changed.
    """
    markers, record = inspect(raw, site, paradigm, common_channels, where, markers=markers)
    renamed = record["renamed"]
    if renamed:
        log.info("Renamed %d channel%s (%s)", len(renamed), "" if len(renamed) == 1 else "s",
                 ", ".join(f"{a} -> {b}" for a, b in list(renamed.items())[:4]) + (", ..." if len(renamed) > 4 else ""))
    if record["non_finite"]:
        hold_non_finite(raw, record["non_finite"])
    _restore_reference(raw, record["restored_reference"])
    _pick_common(raw, common_channels if site.datatype == "eeg" else ())
    if len(_eeg_picks(raw)):
        _set_montage(raw)
    # Runs of identical samples, before resampling smears them (heschl.saturation); the
    # held non-finite samples are such runs too.
    from .saturation import stuck_runs

    record["stuck_runs"] = stuck_runs(raw, data_picks(raw.info), exclude=[record["restored_reference"]],
                                      also=record["non_finite"])
    target = paradigm.cleaning.sampling_rate
    if abs(raw.info["sfreq"] - target) > 1e-9:
        log.info("Resampled from %g Hz to %g Hz", raw.info["sfreq"], target)
        # Polyphase: anti-alias filter and decimation in one pass (scipy's resample_poly
        # through mne), in time linear in the recording's length. Measured about as fast
        # as the FFT method at these lengths, with the same peak memory (benchmarks/NOTES.md).
        from .memory import give_back

        give_back()  # the freed temporaries of the checks above, before the largest step
        raw.resample(target, method="polyphase", verbose="error")
    record["sampling_rate"] = float(raw.info["sfreq"])
    picks = data_picks(raw.info)
    record["channels"] = [raw.ch_names[i] for i in picks]
    record["channel_types"] = dict(zip(record["channels"], types_of(raw.info, picks)))
    record["datatype"] = site.datatype
    return raw, markers, record


def non_finite_samples(raw, picks, block_s=60.0):
    """Stretches of samples that are NaN or infinite, per channel, read in blocks.

    Some exporters write NaN where the amplifier lost samples. Returns channel ->
    list of (start_sample, stop_sample); channels with none are left out.
    """
    sfreq, n = raw.info["sfreq"], raw.n_times
    step = max(1, int(block_s * sfreq))
    bad = {}
    for a in range(0, n, step):
        x = raw.get_data(picks=picks, start=a, stop=min(n, a + step))
        rows = np.flatnonzero(~np.all(np.isfinite(x), axis=1))
        for r in rows:
            edges = np.diff(np.concatenate([[0], (~np.isfinite(x[r])).astype(np.int8), [0]]))
            spans = zip(np.flatnonzero(edges == 1) + a, np.flatnonzero(edges == -1) + a)
            bad.setdefault(raw.ch_names[picks[r]], []).extend((int(s), int(e)) for s, e in spans)
    for name, spans in bad.items():   # join spans split by a block edge
        joined = [list(spans[0])]
        for s, e in spans[1:]:
            if s == joined[-1][1]:
                joined[-1][1] = e
            else:
                joined.append([s, e])
        bad[name] = [tuple(x) for x in joined]
    return bad


def hold_non_finite(raw, spans):
    """Replace NaN or infinite samples by the last finite value before them (the first
    finite value after them at the start), so that filters work and the stretch becomes a
    run of one value that `heschl.saturation` marks and whose trials are dropped."""
    for name, items in spans.items():
        i = raw.ch_names.index(name)
        row = raw._data[i]
        finite = np.isfinite(row)
        if not finite.any():
            row[:] = 0.0
            continue
        for s, e in items:
            row[s:e] = row[s - 1] if s > 0 else row[np.flatnonzero(finite)[0]]
    total = sum(e - s for items in spans.values() for s, e in items)
    log.warning("%d samples that are NaN or infinite in %d channel(s) held at the last finite value", total,
                len(spans))


#: Plausible robust amplitude (1.4826 x median absolute deviation, median over the
#: channels of one type) of scalp signals band-passed 1-30 Hz: (low, high, unit factor,
#: unit). EEG 0.1-500 uV (common practice: background EEG is tens of microvolts); MEG
#: magnetometers 1 fT-100 pT and gradiometers 1 fT/cm-10 pT/cm (brain fields are tens to
#: thousands of fT; Hämäläinen et al. 1993, from memory). A factor of 10^6 outside these is
#: a unit mistake, not a recording. docs/REFERENCES.md F48.
PLAUSIBLE_AMPLITUDE = {"eeg": (0.1e-6, 500e-6, 1e6, "uV"), "mag": (1e-15, 1e-10, 1e15, "fT"),
                       "grad": (1e-13, 1e-9, 1e13, "fT/cm")}

#: Seconds of data the unit check reads: this many 10 s slices spread over the recording.
_UNIT_SLICES = 6


def check_units(raw, where, exclude=()):
    """Refuse data whose amplitude says the stored unit is not the declared one.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Preloaded, in SI units as the reader scaled them.
    where : str
        The file, for the message.
    exclude : sequence of str
        Channels left out (a restored reference channel of zeros).

    Not finite samples are read as zeros here (`non_finite_samples` reports them).

    Returns
    -------
    record : dict
        Sensor type -> robust amplitude in the type's display unit.

    Raises
    ------
    heschl.errors.InputDataError
        When a sensor type's median robust amplitude lies outside `PLAUSIBLE_AMPLITUDE`.
    """
    import mne

    from .vocabulary import MAD_TO_SD

    sfreq, n = raw.info["sfreq"], raw.n_times
    width = min(n, int(10 * sfreq))
    starts = np.unique(np.linspace(0, n - width, _UNIT_SLICES).astype(int))
    high = min(30.0, 0.45 * sfreq)
    out = {}
    for kind, (low_v, high_v, factor, unit) in PLAUSIBLE_AMPLITUDE.items():
        picks = [i for i in mne.pick_types(raw.info, meg=kind if kind != "eeg" else False, eeg=kind == "eeg",
                                           exclude="bads") if raw.ch_names[i] not in exclude]
        if not picks or width < int(sfreq):
            continue
        x = np.concatenate([raw.get_data(picks=picks, start=a, stop=a + width) for a in starts], axis=1)
        if not np.all(np.isfinite(x)):
            x = np.where(np.isfinite(x), x, 0.0)
        x = mne.filter.filter_data(x.astype(float), sfreq, 1.0, high, verbose="error")
        amp = float(np.median(MAD_TO_SD * np.median(np.abs(x - np.median(x, axis=1, keepdims=True)), axis=1)))
        out[kind] = amp * factor
        if low_v <= amp <= high_v:
            continue
        if amp == 0:
            what, fix = "every channel is flat (zero)", "check the recording; the amplifier recorded nothing"
        elif amp > high_v:
            ratio = amp / high_v
            what = (f"{kind.upper()} amplitude {amp * factor:.3g} {unit} (robust, 1-{high:g} Hz, median over "
                    f"{len(picks)} channels) is {ratio:.2g}x above a plausible {high_v * factor:g} {unit}: "
                    "the values look stored in microvolts (or femtotesla) where the file declares volts (tesla)")
            fix = "re-export the file with its true unit in the header"
        else:
            ratio = low_v / amp
            what = (f"{kind.upper()} amplitude {amp * factor:.3g} {unit} (robust, 1-{high:g} Hz, median over "
                    f"{len(picks)} channels) is {ratio:.2g}x below a plausible {low_v * factor:g} {unit}: "
                    "the values look stored in volts (tesla) where the file declares microvolts (femtotesla)")
            fix = "re-export the file with its true unit in the header"
        raise InputDataError(problem(where, what, fix))
    return out


def _check_length(duration, paradigm, where):
    """A recording shorter than one epoch (or one resting segment) gives no trial at all."""
    if paradigm.epochs is not None:
        need, what = paradigm.epochs.window[1] - paradigm.epochs.window[0], "epoch"
    else:
        need, what = paradigm.segments.skip_start + paradigm.segments.length, "segment after the skipped start"
    if duration < need:
        raise InputDataError(problem(where, f"lasts {duration:.3g} s, shorter than one {what} of the paradigm "
                                     f"({need:.3g} s)", "check that this is the whole recording"))


def _check_conditions(markers, paradigm, site, where):
    """Every condition of the paradigm has at least one marker: a condition with none is
    almost always a code the site's marker map lacks or names wrongly."""
    found = {m: 0 for m in (m for c in paradigm.conditions.values() for m in c.markers)}
    for label in markers.labels:
        found[label] = found.get(label, 0) + 1
    empty = [c.name for c in paradigm.conditions.values() if not any(found.get(m) for m in c.markers)]
    if empty:
        seen = ", ".join(f"{label} {n}" for label, n in found.items() if n)
        unknown = ", ".join(f"{code} x{n}" for code, n in list(markers.unknown.items())[:4])
        raise InputDataError(problem(
            where, f'no marker of condition "{empty[0]}"' + (f" (and {len(empty) - 1} more)" if len(empty) > 1 else "")
            + f" (found: {seen or 'none'}" + (f"; codes the site does not map: {unknown}" if unknown else "") + ")",
            f"map its code under [sites.{site.name}.markers.{paradigm.name}] in the study file, or check the "
            "recording"))


def _check_datatype(raw, site, where, n_eeg):
    """The site's datatype must match what the file holds (an MEG file at an EEG site is a mix-up)."""
    import mne

    meg = len(mne.pick_types(raw.info, meg=True, eeg=False))
    eeg = n_eeg
    if site.datatype == "meg" and not meg:
        raise InputDataError(problem(where, f'holds no MEG channels but site "{site.name}" has datatype = "meg"',
                                     f'set sites.{site.name}.datatype = "eeg" in the study file'))
    if site.datatype == "eeg" and meg:
        raise InputDataError(problem(where, f"holds {meg} MEG channels but site \"{site.name}\" has datatype = "
                                     '"eeg"', f'set sites.{site.name}.datatype = "meg" in the study file'))
    if not meg and not eeg:
        raise InputDataError(problem(where, "holds no EEG or MEG channel",
                                     "check the file; heschl reads EEG and MEG recordings"))


def _check_unique(names, mapping, where):
    new = [mapping.get(n, n) for n in names]
    dup = sorted({n for n in new if new.count(n) > 1})
    if dup:
        raise InputDataError(problem(where, f"channels {', '.join(dup)} appear twice after renaming",
                                     "fix the site's channel_aliases in the study file"))


def _set_types(raw, site):
    """Type the site's EOG channels (and EOG-named ones) as EOG; return every EOG channel."""
    import mne

    eog = [n for n in raw.ch_names if n in site.eog_channels or n.upper() in _EOG_WORDS]
    if eog:
        raw.set_channel_types({n: "eog" for n in eog}, verbose="error")
    return [raw.ch_names[i] for i in mne.pick_types(raw.info, eog=True, exclude=[])]


def reference_channel(site):
    """The channel a site recorded against, by its standard name, or None when the site's
    recording reference is a word (average, linked mastoids, unknown), not a channel."""
    ref = site.recording_reference
    if ref in RECORDING_REFERENCE_WORDS:
        return None
    return standard_name_map().get(ref.upper(), ref)


def _restore_reference(raw, name):
    """Add the recording reference channel ``name`` back (all zeros); None: nothing to add."""
    import mne

    if name is None:
        return None
    import warnings

    with warnings.catch_warnings():
        # A file with positions gets a reference channel without one; the montage set
        # right after this (_set_montage) gives it its position, so mne's note is moot.
        warnings.filterwarnings("ignore", message="Location for this channel is unknown",
                                category=RuntimeWarning)
        mne.add_reference_channels(raw, name, copy=False)
    return name


def _pick_common(raw, common):
    """Keep the common channels (every EEG channel when none are given), EOG and MEG;
    `inspect` has made sure none is missing."""
    import mne

    eeg = [raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=True, meg=False)]
    keep = list(common) if common else eeg
    other = [n for n in raw.ch_names if n in set(
        raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=False, eog=True, meg=True))]
    # mne copies the whole recording for a pick or a reordering, even one that changes
    # nothing (0.47 GB for a 15-minute 64-channel file at 1000 Hz): only when needed.
    wanted = keep + [n for n in other if n not in keep]
    if wanted != list(raw.ch_names):
        if set(wanted) != set(raw.ch_names):
            raw.pick(wanted, verbose="error")
        if list(raw.ch_names) != wanted:
            raw.reorder_channels(wanted)


def _positions_measured(raw, names):
    """Whether every channel in ``names`` has a measured (finite, non-zero) position."""
    locs = np.array([raw.info["chs"][raw.ch_names.index(n)]["loc"][:3] for n in names])
    return bool(len(locs)) and np.all(np.isfinite(locs)) and not np.any(np.all(locs == 0.0, axis=1))


def _set_montage(raw):
    """Template 10-05 positions for the EEG channels, unless the file has digitised ones
    (`inspect` has made sure every channel that needs one has a standard name)."""
    eeg = [raw.ch_names[i] for i in _eeg_picks(raw)]
    if _positions_measured(raw, eeg):
        return  # every EEG channel has a measured position: keep it
    raw.set_montage(standard_montage(), on_missing="ignore", verbose="error")


def _eeg_picks(raw):
    import mne

    return mne.pick_types(raw.info, eeg=True, meg=False)
