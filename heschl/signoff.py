"""A reviewer's decision on a recording, kept beside the study page and tied to its inputs.

Decisions live in ``<output>/group/decisions.tsv``, one row per recording, written by
``heschl decide`` or edited by hand::

    participant_id  site  paradigm  decision  comment  reviewer  decided_on  input_key

- ``decision``: ``include`` or ``exclude``.
- ``comment``: why, in the reviewer's words (required for ``exclude``).
- ``reviewer``: the reviewer's initials.
- ``decided_on``: ISO date (YYYY-MM-DD) of the decision.
- ``input_key``: the recording's input key (its provenance ``key``) the decision was made
  on. When the recording's inputs or definitions change, its key changes and the decision
  becomes *stale*: it is shown, but it does not count until the reviewer confirms it
  (``heschl decide`` again, or by copying the new key into the row).

A decision that counts is *current*; a recording without a row has state ``none``.
Excluded recordings stay in ``group/features.tsv`` and ``group/qc.tsv`` (with the
decision and its reason in columns) and leave the group statistics.
"""
from __future__ import annotations

import datetime as _dt
import hashlib
import json
import logging
import re
import shlex
from pathlib import Path

from .errors import InputDataError, did_you_mean, problem

__all__ = ["DECISIONS", "COLUMNS", "DECISION_STATES", "decisions_path", "read_decisions", "record_decision",
           "signoff_for", "signoff_fingerprint", "counts_as_excluded"]

log = logging.getLogger(__name__)

#: The decisions a reviewer can record.
DECISIONS = ("include", "exclude")
#: Columns of decisions.tsv, in order.
COLUMNS = ("participant_id", "site", "paradigm", "decision", "comment", "reviewer", "decided_on", "input_key")
#: States of a recording's sign-off.
DECISION_STATES = ("none", "current", "stale")

_REVIEWER = re.compile(r"^[A-Za-z][A-Za-z.\-]{0,9}$")
_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")


def decisions_path(output):
    """Where a study's decisions are kept: beside the study page."""
    return Path(output) / "group" / "decisions.tsv"


def _where(path, line=None):
    from .inputs import display_path

    return f"{display_path(path)}" + (f", line {line}" if line is not None else "")


def read_decisions(output):
    """The recorded decisions, ``(site, participant_id, paradigm) -> row dict``.

    A missing file means no decisions. A malformed file is refused in one line naming the
    file, the line and the fix; nothing is processed on a file heschl cannot trust.
    """
    path = decisions_path(output)
    if not path.exists():
        return {}
    text = path.read_text(encoding="utf-8")
    lines = [ln for ln in text.splitlines() if ln.strip()]
    if not lines:
        return {}
    header = lines[0].split("\t")
    missing = [c for c in COLUMNS if c not in header]
    if missing:
        raise InputDataError(problem(_where(path, 1), f"lacks the column(s) {', '.join(missing)}",
                                     "the header must be: " + " ".join(COLUMNS) + " (tab-separated)"))
    out = {}
    for number, line in enumerate(lines[1:], start=2):
        cells = line.split("\t")
        if len(cells) != len(header):
            raise InputDataError(problem(_where(path, number), f"has {len(cells)} cells for {len(header)} columns",
                                         "separate the cells by one tab each; no tabs inside a comment"))
        row = {c: v.strip() for c, v in zip(header, cells)}
        _check_row(row, _where(path, number))
        key = (row["site"], row["participant_id"], row["paradigm"])
        if key in out:
            raise InputDataError(problem(_where(path, number), f"repeats the decision on {row['participant_id']} "
                                         f"{row['paradigm']} at {row['site']}", "keep one row per recording"))
        out[key] = {c: row[c] for c in COLUMNS}
    return out


def _check_row(row, where):
    if row["decision"] not in DECISIONS:
        raise InputDataError(problem(where, f'decision "{row["decision"]}" is not one of {", ".join(DECISIONS)}'
                                     f"{did_you_mean(row['decision'], DECISIONS)}", "write include or exclude"))
    if not _REVIEWER.match(row["reviewer"]):
        raise InputDataError(problem(where, f'reviewer "{row["reviewer"]}" is not initials',
                                     "give the reviewer's initials (letters, up to 10)"))
    if row["decision"] == "exclude" and not row["comment"]:
        raise InputDataError(problem(where, "an exclusion without a comment", "say why in the comment column"))
    if not _DATE.match(row["decided_on"]):
        raise InputDataError(problem(where, f'decided_on "{row["decided_on"]}" is not a date',
                                     "write it as YYYY-MM-DD"))
    for column in ("participant_id", "site", "paradigm", "input_key"):
        if not row[column]:
            raise InputDataError(problem(where, f"the {column} cell is empty", f"fill in {column}"))


def _clean_text(text):
    """A comment as one TSV cell: no tabs or line breaks."""
    return " ".join(str(text).split())


def record_decision(study, recording, decision, reviewer, comment="", today=None):
    """Record (or replace) the decision on one processed recording; returns the row.

    The decision is tied to the recording's input key as written in its provenance, so the
    recording must have been processed (``heschl run``) first.
    """
    from .outputs import recording_paths, write_atomic

    if decision not in DECISIONS:
        raise InputDataError(problem("decide", f'"{decision}" is not a decision', "use include or exclude"))
    provenance = recording_paths(study.output, recording)["provenance"]
    if not provenance.exists():
        raise InputDataError(problem(recording.path, f"{recording.participant_id} {recording.paradigm} has no "
                                     "outputs yet", "run heschl run on the study first, then decide"))
    key = json.loads(provenance.read_text(encoding="utf-8"))["key"]
    rows = read_decisions(study.output)
    row = {"participant_id": recording.participant_id, "site": recording.site, "paradigm": recording.paradigm,
           "decision": decision, "comment": _clean_text(comment), "reviewer": str(reviewer).strip(),
           "decided_on": (today or _dt.date.today()).isoformat(), "input_key": key}
    _check_row(row, "decide")
    rows[(row["site"], row["participant_id"], row["paradigm"])] = row
    lines = ["\t".join(COLUMNS)] + ["\t".join(r[c] for c in COLUMNS) for _, r in sorted(rows.items())]
    write_atomic(decisions_path(study.output), "\n".join(lines) + "\n")
    return row


def signoff_for(study, recording, row, current_key):
    """What the page shows about a recording's sign-off (plain data).

    The ready command names the study file as seen from its own folder, so a page does
    not change with the folder a run was started from.

    ``row`` is its decisions.tsv row or None; ``current_key`` its input key now.
    """
    state = "none" if row is None else ("current" if row["input_key"] == current_key else "stale")

    suggested = "exclude" if row is None else row["decision"]
    command = " ".join(["heschl", "decide", shlex.quote(Path(study.source).name),
                        shlex.quote(recording.participant_id), shlex.quote(recording.paradigm), suggested,
                        "--site", shlex.quote(recording.site), "--by", "XX", "--why", shlex.quote(
                            row["comment"] if row and row["comment"] else "reason in a few words")])
    return {"state": state, "decision": None if row is None else row["decision"],
            "comment": "" if row is None else row["comment"], "reviewer": "" if row is None else row["reviewer"],
            "decided_on": "" if row is None else row["decided_on"],
            "decision_key": None if row is None else row["input_key"], "current_key": current_key,
            "command": command}


def signoff_fingerprint(signoff):
    """A short stable hash of what a page shows about its sign-off ("none" for None)."""
    if signoff is None:
        return "none"
    text = json.dumps(signoff, sort_keys=True)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:16]


def counts_as_excluded(signoff):
    """True when the recording is excluded by a current decision."""
    return bool(signoff) and signoff["state"] == "current" and signoff["decision"] == "exclude"
