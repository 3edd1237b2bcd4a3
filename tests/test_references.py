"""Citations resolve inside the repository.

Code, tests and notes cite outside facts as ``docs/REFERENCES.md F<n>`` and the invented
demo study as ``docs/SCENARIO.md``. These tests scan the cited files and check that

- every cited ``F<n>`` has an entry heading ``### F<n>. <title>`` in docs/REFERENCES.md;
- no file cites a path outside the repository (a sibling folder of notes, a path that
  climbs out with ``..``, or an absolute path to a references file);
- docs/SCENARIO.md exists when anything cites it.

Every entry is also a parametrised case: it must have its source, fact and status lines,
and an entry that nothing cites is reported as a skip (not an error: an entry may be kept
as background for a check not written yet).

The scanner takes the repository root as an argument (:func:`citation_problems`), so the
checks can be run on a scratch copy.
"""
from __future__ import annotations

import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: Folders whose .py files are scanned, relative to the root.
PY_FOLDERS = ("heschl", "tests", "benchmarks")
#: Other scanned files, as glob patterns relative to the root.
OTHER_FILES = ("DEVELOPERS.md", "README.md", "features/*.toml", "paradigms/*.toml",
               "docs/SCENARIO.md")

REFERENCES = Path("docs", "REFERENCES.md")
SCENARIO = Path("docs", "SCENARIO.md")

# The file name (with or without ".md", maybe followed by a comma), then "F<n>" and any
# list of further "F<m>" joined to it by "/", ",", ";", "&" or "and" (e.g. "F1/F4",
# "F10, F11, F14", "F10 / F12").
_CITATION = re.compile(
    r"\bREFERENCES(?:\.md)?,?\s+(F\d+(?:\s*(?:,|/|;|&|and)\s*F\d+)*)\b")
_NUMBER = re.compile(r"F(\d+)")
_SCENARIO_CITATION = re.compile(r"\bSCENARIO\.md\b")
_ENTRY = re.compile(r"^### F(\d+)\. (\S.*)$", re.MULTILINE)
# Paths that leave the repository. Written without the literal strings they match, so that
# this file, which is scanned too, does not match itself.
_NOTES_FOLDER = "shared"
_OUTSIDE = (
    re.compile(r"(?:\.\./)+" + _NOTES_FOLDER + r"\b"),               # a climb to the notes
    re.compile(r"\b" + _NOTES_FOLDER + "/"),                          # the notes folder
    re.compile(r"\.\./[\w./-]*(?:REFERENCES|SCENARIO)\.md"),          # any climb out
    re.compile(r"(?<![\w.-])/[\w./-]*(?:REFERENCES|SCENARIO)\.md"),   # an absolute path
)


def scanned_files(root):
    """Return the files whose citations are checked.

    Parameters
    ----------
    root : path-like
        Repository root.

    Returns
    -------
    list of pathlib.Path
        Every ``.py`` file under :data:`PY_FOLDERS` and the files of :data:`OTHER_FILES`,
        sorted.
    """
    root = Path(root)
    files = set()
    for folder in PY_FOLDERS:
        files.update(p for p in (root / folder).rglob("*.py") if p.is_file())
    for pattern in OTHER_FILES:
        files.update(p for p in root.glob(pattern) if p.is_file())
    return sorted(files)


def scan(root):
    """Collect the citations of every scanned file.

    Parameters
    ----------
    root : path-like
        Repository root.

    Returns
    -------
    dict
        ``"entries"``: {cited number: [``"path:line"``, ...]}; ``"scenario"``: places
        citing docs/SCENARIO.md; ``"outside"``: ``"path:line: text"`` of every path that
        leaves the repository. Paths are relative to ``root``.
    """
    root = Path(root)
    found = {"entries": {}, "scenario": [], "outside": []}
    for path in scanned_files(root):
        relative = path.relative_to(root).as_posix()
        text = path.read_text(encoding="utf-8", errors="replace")
        for match in _CITATION.finditer(text):
            place = f"{relative}:{text.count(chr(10), 0, match.start()) + 1}"
            for number in _NUMBER.findall(match.group(1)):
                found["entries"].setdefault(int(number), []).append(place)
        for match in _SCENARIO_CITATION.finditer(text):
            found["scenario"].append(f"{relative}:{text.count(chr(10), 0, match.start()) + 1}")
        for number, line in enumerate(text.splitlines(), start=1):
            for pattern in _OUTSIDE:
                hit = pattern.search(line)
                if hit:
                    found["outside"].append(f"{relative}:{number}: {hit.group(0)}")
    return found


def entries(root):
    """Return the entries of docs/REFERENCES.md as {number: (title, body)}.

    Parameters
    ----------
    root : path-like
        Repository root.

    Returns
    -------
    dict of int to (str, str)
        Empty if the file is missing. A number headed twice keeps its first entry (see
        :func:`duplicate_entries`).
    """
    path = Path(root) / REFERENCES
    if not path.is_file():
        return {}
    text = path.read_text(encoding="utf-8")
    matches = list(_ENTRY.finditer(text))
    result = {}
    for match, following in zip(matches, matches[1:] + [None]):
        end = following.start() if following else len(text)
        body = text[match.end():end]
        # An entry ends at the next heading of any level.
        body = re.split(r"^#{1,3} ", body, maxsplit=1, flags=re.MULTILINE)[0]
        result.setdefault(int(match.group(1)), (match.group(2).strip(), body))
    return result


def duplicate_entries(root):
    """Return the F numbers headed more than once in docs/REFERENCES.md."""
    path = Path(root) / REFERENCES
    if not path.is_file():
        return []
    numbers = [int(m.group(1)) for m in _ENTRY.finditer(path.read_text(encoding="utf-8"))]
    return sorted({n for n in numbers if numbers.count(n) > 1})


def citation_problems(root):
    """Return one line per broken citation under ``root``; empty when all resolve.

    Parameters
    ----------
    root : path-like
        Repository root (the real one, or a scratch copy).

    Returns
    -------
    list of str
    """
    root = Path(root)
    found = scan(root)
    known = entries(root)
    problems = []
    if not (root / REFERENCES).is_file() and found["entries"]:
        problems.append(f"{REFERENCES.as_posix()}: missing, but F numbers are cited")
    for number in sorted(set(found["entries"]) - set(known)):
        places = ", ".join(found["entries"][number])
        problems.append(f"F{number}: cited ({places}) but {REFERENCES.as_posix()} has no "
                        f"heading '### F{number}. <title>'")
    problems += [f"{place} (a path outside the repository; cite docs/ instead)"
                 for place in found["outside"]]
    if found["scenario"] and not (root / SCENARIO).is_file():
        problems.append(f"{SCENARIO.as_posix()}: missing, but cited at "
                        + ", ".join(found["scenario"]))
    return problems


# -- the repository -------------------------------------------------------------------------

@pytest.fixture(scope="module")
def found():
    return scan(ROOT)


def test_scanner_sees_the_files_that_cite(found):
    # The scanner must at least see the citations it is meant to check.
    assert len(scanned_files(ROOT)) > 20
    assert found["entries"], "no REFERENCES.md citation found: the scanner is broken"


def test_every_cited_entry_exists(found):
    cited, known = set(found["entries"]), set(entries(ROOT))
    missing = {f"F{n}": found["entries"][n] for n in sorted(cited - known)}
    assert cited <= known, f"cited without an entry in {REFERENCES.as_posix()}: {missing}"


def test_no_citation_points_outside_the_repository(found):
    assert found["outside"] == []


def test_scenario_exists_when_cited(found):
    if found["scenario"]:
        assert (ROOT / SCENARIO).is_file(), found["scenario"]


def test_entry_numbers_are_unique():
    assert duplicate_entries(ROOT) == []


def test_no_problems_at_all():
    # The same checks through the helper that scratch copies use.
    assert citation_problems(ROOT) == []


@pytest.mark.parametrize("number", sorted(entries(ROOT)), ids=lambda n: f"F{n}")
def test_entry(number, found):
    title, body = entries(ROOT)[number]
    assert title, f"F{number} has no title"
    assert re.search(r"^- Sources?:", body, re.MULTILINE), f"F{number}: no '- Source:' line"
    assert re.search(r"^- Fact:", body, re.MULTILINE), f"F{number}: no '- Fact:' line"
    status = re.search(r"^- Status: (.+)$", body, re.MULTILINE)
    assert status, f"F{number}: no '- Status:' line"
    assert re.search(r"confirmed|from memory|recomputed", status.group(1)), (
        f"F{number}: the status names none of confirmed / from memory / recomputed")
    if number not in found["entries"]:
        pytest.skip(f"F{number} ({title}) is not cited by any scanned file")


# -- the scanner on a scratch copy ----------------------------------------------------------

def _scratch(tmp_path, citing_text, *, with_scenario=True):
    """A minimal repository: this project's docs and one test file holding ``citing_text``."""
    (tmp_path / "docs").mkdir()
    (tmp_path / "tests").mkdir()
    (tmp_path / REFERENCES).write_text((ROOT / REFERENCES).read_text(encoding="utf-8"),
                                       encoding="utf-8")
    if with_scenario:
        (tmp_path / SCENARIO).write_text("# invented\n", encoding="utf-8")
    (tmp_path / "tests" / "test_x.py").write_text(citing_text, encoding="utf-8")
    return tmp_path


def _cite(target, number):
    """A citation comment, assembled so that this file does not cite it itself."""
    return "# " + target + " F" + str(number) + "\n"


def test_scanner_reports_a_citation_of_a_missing_entry(tmp_path):
    missing = max(entries(ROOT)) + 100
    target = "docs/REFERENCES" + ".md"
    root = _scratch(tmp_path, _cite(target, 1) + _cite(target, missing))
    problems = citation_problems(root)
    assert len(problems) == 1 and problems[0].startswith(f"F{missing}: cited (tests/test_x.py:2)")
    # A bare "REFERENCES F<n>" and a list "F1/F<n>" are read too.
    for text in (_cite("REFERENCES", missing), "# docs/REFERENCES" + ".md F1/F" + f"{missing}\n"):
        (root / "tests" / "test_x.py").write_text(text, encoding="utf-8")
        assert [p.split(":")[0] for p in citation_problems(root)] == [f"F{missing}"]


def test_scanner_reports_paths_outside_the_repository(tmp_path):
    climbs = "# see ../" + _NOTES_FOLDER + "/REFERENCES" + ".md\n"
    absolute = "# see /somewhere/" + "docs/REFERENCES" + ".md\n"
    root = _scratch(tmp_path, climbs + absolute)
    problems = citation_problems(root)
    assert any("tests/test_x.py:1" in p for p in problems)
    assert any("tests/test_x.py:2" in p for p in problems)
    # An ordinary word is not a path: "shared with the next" stays allowed.
    (root / "tests" / "test_x.py").write_text("# " + _NOTES_FOLDER + " with the next\n",
                                              encoding="utf-8")
    assert citation_problems(root) == []


def test_scanner_reports_a_missing_scenario(tmp_path):
    root = _scratch(tmp_path, "# docs/" + "SCENARIO" + ".md\n", with_scenario=False)
    assert citation_problems(root) == [
        f"{SCENARIO.as_posix()}: missing, but cited at tests/test_x.py:1"]
