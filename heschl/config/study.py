"""Study files: the analyses (paradigm and feature sets) and the sites that record them."""
from __future__ import annotations

import re
from pathlib import Path

from ..errors import did_you_mean
from ..vocabulary import DATATYPES, DEFAULT_SUBJECT_PATTERN, MAX_CHANNEL_NAME, RECORDING_REFERENCE_WORDS
from .feature_set import load_feature_set
from .files import _display, _read_toml, resolve_definition
from .model import Analysis, Site, Study
from .paradigm import load_paradigm
from .sections import _REQUIRED, _Section, _num

__all__ = ["load_study"]

_STUDY_KEYS = {"name", "output", "participants", "common_channels", "analyses", "sites", "groups"}
_SITE_KEYS = {"datatype", "recording_reference", "line_frequency", "trigger_delay_ms", "files", "markers",
              "channel_aliases", "eog_channels", "subject_pattern", "bad_channels"}


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
    groups, reference = _groups(top)
    output = output if output.is_absolute() else root / output
    _check_output_place(top, output, root, sites)
    return Study(name=name, source=str(path), root=root,
                 output=output,
                 participants=participants, common_channels=common, analyses=analyses,
                 sites=sites, document=doc, groups=groups, reference_group=reference)


def _groups(top):
    """The declared group labels and the reference group (``[groups]``).

    One label (a single-group study) needs no reference; with two, the reference is
    required and the group summary compares the other group against it. Comparisons of
    more than two groups are not supported.
    """
    if top.raw("groups", default=None) is None:
        return (), None
    section = top.sub("groups", {"labels", "reference"})
    labels = section.strings("labels")
    if not labels:
        section.fail("labels", "no group labels given", 'list the labels of participants.tsv, e.g. ["control", "patient"]')
    if len(labels) > 2:
        section.fail("labels", f"{len(labels)} groups declared; heschl compares two groups",
                     "declare two labels (run separate studies for other pairs)")
    reference = section.string("reference", default=None if len(labels) == 1 else _REQUIRED)
    if reference is not None and reference not in labels:
        section.fail("reference", f'"{reference}" is not one of the labels{did_you_mean(reference, labels)}',
                     "choose the reference among [groups] labels")
    return tuple(labels), reference


def _check_output_place(top, output, root, sites):
    """The output folder may not lie inside a folder a site's file pattern searches: the
    outputs would sit among the recordings (and a later pattern could match them)."""
    import os

    out = output.resolve()
    for site in sites.values():
        for pname, pattern in site.files.items():
            parts = Path(pattern).parent.parts
            fixed = []
            for part in parts:
                if any(c in part for c in "*?["):
                    break
                fixed.append(part)
            folder = (root / Path(*fixed)).resolve() if fixed else root.resolve()
            if not fixed or folder == root.resolve():
                continue    # a pattern at the study's own folder: outputs go in their own subfolder
            if out == folder or folder in out.parents:
                top.fail("output", f'"{os.path.relpath(output, root)}" lies inside {os.path.relpath(folder, root)}, '
                         f"where sites.{site.name}.files.{pname} looks for recordings",
                         'choose an output folder outside the recordings, e.g. "derivatives/heschl"')


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


def _recording_reference(section, ref):
    """A site's recording reference: one of the recording-reference words or a channel name.

    A text close to a word (any letter case) is taken for a misspelt word, not for a
    channel; a text longer than any channel name, or with surrounding spaces or control
    characters, is no channel name either.
    """
    if ref in RECORDING_REFERENCE_WORDS:
        return ref
    key, fix = "recording_reference", (f"use one of: {', '.join(RECORDING_REFERENCE_WORDS)}, "
                                       "or the name of the channel the site recorded against")
    hint = did_you_mean(ref.lower(), RECORDING_REFERENCE_WORDS)
    if hint:
        section.fail(key, f'"{ref}" is not a recording-reference word{hint}', fix)
    if len(ref) > MAX_CHANNEL_NAME or ref != ref.strip() or not ref.isprintable():
        section.fail(key, f'"{ref}" is neither a recording-reference word nor a channel name '
                     f"(at most {MAX_CHANNEL_NAME} characters, no surrounding spaces)", fix)
    return ref


def _site(section, name, paradigms):
    datatype = section.string("datatype", default="eeg", choices=DATATYPES)
    ref = _recording_reference(section, section.string("recording_reference", default="unknown"))
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
