"""Finding a study's recordings and what determines their outputs.

Discovery (file patterns per site and paradigm), the participants table, a recording's
companion files, their content hashes and the input key: one hash of the input bytes,
the resolved definitions, the package version and :data:`PIPELINE_REVISION`. A
recording whose provenance names the current key is up to date.
"""
from __future__ import annotations

import glob
import logging
import hashlib
import json
import os
import re
from dataclasses import dataclass
from pathlib import Path

from . import __version__
from .errors import DefinitionError, InputDataError, did_you_mean, problem

log = logging.getLogger(__name__)

__all__ = ["Recording", "PIPELINE_REVISION", "read_participants", "discover", "recording_files",
           "input_files", "input_hashes", "input_key", "analysis_of", "definitions_of", "display_path"]

#: Bumped whenever a change of code changes what a recording's outputs are, so that
#: resuming redoes recordings written by older code (the package version moves slower).
PIPELINE_REVISION = 6


@dataclass(frozen=True)
class Recording:
    """One file set of one participant in one paradigm at one site."""

    site: str
    paradigm: str
    participant_id: str          # "sub-<label>"
    group: str
    path: Path
    datatype: str = "eeg"        # BIDS datatype folder: "eeg" or "meg" (from the site)

    @property
    def label(self):
        return self.participant_id[4:]

    @property
    def stem(self):
        return f"{self.participant_id}_task-{self.paradigm}"

    @property
    def name(self):
        """How log lines and messages name the recording: participant and paradigm."""
        return f"{self.participant_id} {self.paradigm}"


def display_path(path):
    """A path as messages show it: relative to the working folder where possible."""
    try:
        return os.path.relpath(path)
    except ValueError:  # pragma: no cover - another drive on Windows
        return str(path)


def read_participants(path, labels=()):
    """participant_id -> group, from a tab-separated participants table.

    With declared ``labels`` (the study's ``[groups] labels``), a group the study does not
    declare is refused; an empty or "n/a" group is allowed (that participant enters no
    group comparison).
    """
    if path is None:
        return {}
    import pandas as pd

    table = pd.read_csv(path, sep="\t", dtype=str, keep_default_na=False)
    if "participant_id" not in table.columns:
        raise InputDataError(problem(path, "has no participant_id column",
                                     "add a participant_id column (and a group column)"))
    groups = [g.strip() or "n/a" for g in table["group"]] if "group" in table.columns else ["n/a"] * len(table)
    if labels:
        for pid, group in zip(table["participant_id"], groups):
            if group != "n/a" and group not in labels:
                raise DefinitionError(problem(
                    display_path(path), f'group "{group}" of {pid} is not declared in the study{did_you_mean(group, labels)}',
                    f"add it to [groups] labels in the study file ({', '.join(labels)} now) or correct the table"))
    return dict(zip(table["participant_id"], groups))


def discover(study):
    """Every recording the study's file patterns find, in a stable order."""
    groups = read_participants(study.participants, study.groups)
    found = []
    for site in study.sites.values():
        pattern = re.compile(site.subject_pattern)
        for analysis in study.analyses:
            pname = analysis.paradigm.name
            if pname not in site.files:
                continue
            names = sorted(glob.glob(str(study.root / site.files[pname])))
            if not names:
                log.warning("%s", empty_pattern_message(study, site.name, pname))
            for name in names:
                path = Path(name)
                match = pattern.search(path.name)
                if match is None:
                    raise InputDataError(problem(path, f'the subject pattern "{site.subject_pattern}" finds no id',
                                                 f"rename the file or set sites.{site.name}.subject_pattern"))
                pid = f"sub-{match.group(1)}"
                found.append(Recording(site.name, pname, pid, groups.get(pid, "n/a"), path, site.datatype))
    _check_unique(found)
    return found


def empty_pattern_message(study, site, paradigm):
    """The one line for a site file pattern that finds no file."""
    return problem(display_path(study.source), f'sites.{site}.files.{paradigm} = "{study.sites[site].files[paradigm]}" '
                   f"matches no file under {display_path(study.root)}",
                   "correct the pattern (relative to the study file's folder) or remove it")


def empty_patterns(study):
    """(site, paradigm) of every file pattern that finds no file."""
    return [(site.name, a.paradigm.name) for site in study.sites.values() for a in study.analyses
            if a.paradigm.name in site.files and not glob.glob(str(study.root / site.files[a.paradigm.name]))]


def _check_unique(found):
    """A participant belongs to one site, and has one file per paradigm.

    Outputs are named by participant and paradigm, so two recordings sharing both would
    write the same files; the same participant at two sites is almost always two people
    given the same id.
    """
    sites, files = {}, {}
    for rec in found:
        first = sites.setdefault(rec.participant_id, rec)
        if first.site != rec.site:
            raise DefinitionError(problem(
                display_path(rec.path), f"participant id {rec.participant_id} is also found at site {first.site} "
                f"({display_path(first.path)}); a participant id must be unique in the study",
                f"give each site's participants their own ids (rename the files or set sites.{rec.site}"
                ".subject_pattern to take a site prefix into the id)"))
        other = files.setdefault((rec.participant_id, rec.paradigm), rec)
        if other.path != rec.path:
            raise DefinitionError(problem(
                display_path(rec.path), f"{rec.participant_id} has a second {rec.paradigm} file "
                f"({display_path(other.path)}) matched by sites.{rec.site}.files.{rec.paradigm}",
                "keep one file per participant and paradigm, or narrow the file pattern"))


def recording_files(path):
    """The main file and its companions (BrainVision header, markers and data; the .fdt data of a .set file)."""
    path = Path(path)
    files = [path]
    if path.suffix.lower() == ".vhdr":
        text = path.read_text(encoding="latin-1", errors="replace")
        for key in ("DataFile", "MarkerFile"):
            m = re.search(rf"^{key}=(.+)$", text, flags=re.M)
            if m:
                files.append(path.parent / m.group(1).strip())
    elif path.suffix.lower() == ".set" and path.with_suffix(".fdt").exists():
        files.append(path.with_suffix(".fdt"))
    return files


def _sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def input_files(path):
    """The main file and its companions, each checked to be there: the same front door for
    ``heschl check`` and ``heschl run``. One line naming the file otherwise."""
    from .harmonise import check_file

    check_file(path)
    files = recording_files(path)
    for f in files[1:]:
        if not f.is_file():
            raise InputDataError(problem(display_path(path), f"its companion file {f.name} is missing",
                                         f"put {f.name} beside {Path(path).name} (its header names it) or correct "
                                         "the header"))
    return files


def input_hashes(recording):
    """sha256 of every input file of a recording, keyed by file name."""
    return {f.name: _sha256(f) for f in input_files(recording.path)}


def input_key(hashes, definitions):
    """One hash of everything that determines a recording's outputs."""
    text = json.dumps({"inputs": hashes, "definitions": definitions, "heschl": __version__,
                       "revision": PIPELINE_REVISION}, sort_keys=True)
    return hashlib.sha256(text.encode()).hexdigest()


def analysis_of(study, recording):
    """The study's analysis (paradigm and feature sets) of a recording's paradigm."""
    return next(a for a in study.analyses if a.paradigm.name == recording.paradigm)


def definitions_of(study, recording):
    """The resolved definitions one recording is processed with (for provenance and the key)."""
    analysis = analysis_of(study, recording)
    site = study.sites[recording.site]
    return {
        "paradigm": analysis.paradigm.document,
        "feature_sets": {fs.name: fs.document for fs in analysis.feature_sets},
        "site": {k: _plain(v) for k, v in vars(site).items()},
        "common_channels": list(study.common_channels),
    }


def _plain(value):
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    return value
