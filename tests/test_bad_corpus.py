"""The corpus of bad inputs (tests/badcorpus.py), through the command line as a user meets it.

One study holds every damaged recording (files, markers, channels, signal), each at its
own site, in a folder whose name has a space and non-ASCII letters; the definition
mistakes are the cases of tests/test_config.py run through ``heschl check``. For every
case: the one-line message, the exit code, no partial outputs, the inputs unchanged, the
other recordings unaffected; and ``heschl run`` meets, before cleaning, exactly what
``heschl check`` reported (one code path). DEVELOPERS.md lists every case.
"""
import hashlib
import re
from pathlib import Path

import pytest

from heschl.cli import main

gen2 = pytest.importorskip("gen2")
badcorpus = pytest.importorskip("badcorpus")

ROOT = Path(__file__).parents[1]


def _hashes(root):
    return {p: hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(Path(root, "raw").rglob("*")) if p.is_file() and not p.is_symlink()}


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    root = tmp_path_factory.mktemp("tiny")
    study = gen2.make_study(root, n_channels=32, subjects=1, paradigms=("oddball",), size="test", seed=4,
                            sfreq=250.0, duration_s=20.0)
    common = re.search(r"^common_channels = \[(.*)\]$", study.read_text(encoding="utf-8"), flags=re.M).group(1)
    return next(root.rglob("*_raw.fif")), [c.strip().strip('"') for c in common.split(",")]


@pytest.fixture(scope="module")
def corpus(tiny, tmp_path_factory):
    """Every case and one intact recording, checked once (the check's lines by file)."""
    import os

    fif, common = tiny
    root = tmp_path_factory.mktemp("corpus") / "bad input Ω é"
    study, ids, goods = badcorpus.build(root, fif, common)
    before = _hashes(root)
    cwd = os.getcwd()
    os.chdir(root)
    try:
        code, out = _main(["check", "study.toml"])
    finally:
        os.chdir(cwd)
    return {"root": root, "study": study, "ids": ids, "goods": goods, "code": code, "out": out, "before": before}


def _main(args):
    import contextlib
    import io

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(args)
    return code, out.getvalue() + err.getvalue()


def _lines(out, pid, kind):
    """The ``kind`` ("problem" or "warning") lines of participant ``pid``'s file."""
    return [line.strip()[len(kind) + 2:] for line in out.splitlines()
            if line.strip().startswith(kind + ":") and f"/{pid}/" in line]


@pytest.mark.parametrize("case", sorted(badcorpus.CASES))
def test_check_reports_each_case_in_one_line(corpus, case):
    _, _, outcome, words = badcorpus.CASES[case]
    pid = corpus["ids"][case]
    problems, warnings = _lines(corpus["out"], pid, "problem"), _lines(corpus["out"], pid, "warning")
    if outcome == "error":
        (line,) = problems
        assert line.startswith(f"raw/case_{case.replace('-', '_')}/{pid}/{pid}_task-oddball"), line
        assert line.endswith("."), line     # where: what; fix.
        assert "; " in line and "Traceback" not in line
        for w in words:
            assert w in line, (w, line)
    elif outcome == "warn":
        assert not problems, problems
        for w in words:
            assert any(w in x for x in warnings), (w, warnings)
    else:
        assert not problems and not warnings, problems + warnings


def test_check_counts_the_corpus_and_exits_1(corpus):
    n_error = sum(c[2] == "error" for c in badcorpus.CASES.values())
    assert corpus["code"] == 1
    found = len(badcorpus.CASES) + len(corpus["goods"])
    assert f"{found} recording(s) found, {n_error} with problems" in corpus["out"]
    assert not (corpus["root"] / "derivatives").exists()      # check writes nothing
    assert _hashes(corpus["root"]) == corpus["before"]


#: Processed fully by the run test (the rest of the warn/pass cases are processed like
#: these; check covers them): kept few, for the suite's time.
RUN_ALSO = ("signal-nan-stretch", "markers-past-the-end")


@pytest.fixture(scope="module")
def corpus_run(tiny, tmp_path_factory):
    fif, common = tiny
    cases = [c for c, v in badcorpus.CASES.items() if v[2] == "error"] + list(RUN_ALSO)
    root = tmp_path_factory.mktemp("corpus-run")
    study, ids, goods = badcorpus.build(root, fif, common, cases=cases, good=1)
    before = _hashes(root)
    code_check, out_check = _main(["check", str(study)])
    code, out = _main(["-q", "run", "--jobs", "2", str(study)])
    return {"root": root, "ids": ids, "goods": goods, "code": code, "out": out, "check": out_check,
            "before": before, "output": root / "derivatives" / "heschl"}


def test_run_stops_each_bad_recording_with_the_line_check_printed(corpus_run):
    import pandas as pd

    r = corpus_run
    assert r["code"] == 1
    stopped = {}
    for line in r["out"].splitlines():
        m = re.match(r"\s*(failed|unusable): (.*)$", line)
        if m:
            stopped[line] = m.groups()
    qc = pd.read_csv(r["output"] / "group" / "qc.tsv", sep="\t").set_index("participant_id")
    for case, pid in r["ids"].items():
        outcome = badcorpus.CASES[case][2]
        (checked,) = _lines(r["check"], pid, "problem") or [None]
        mine = [(kind, text) for kind, text in stopped.values() if f"/{pid}/" in text]
        if outcome != "error":
            assert checked is None and not mine, (case, checked, mine)
            assert not str(qc.loc[pid, "flags"]).startswith("stopped")
            continue
        (kind, text), = mine
        # the run's line holds the check's line: the same rule, the same words
        assert checked in text or checked.split(": ", 1)[1] in text, (case, checked, text)
        assert qc.loc[pid, "verdict"] == ("failed" if kind == "failed" else "unusable"), case
        outputs = list(r["output"].glob(f"{pid}/*/*"))
        if kind == "failed":      # unreadable: no output at all, nothing half-written
            assert outputs == [], (case, outputs)
        else:                     # read but unusable: its page and records, no features
            names = {p.name.split("_", 2)[-1] for p in outputs}
            assert {"review.html", "qc.json", "provenance.json"} <= names, (case, names)
            table = next(p for p in outputs if p.name.endswith("_features.tsv"))
            assert len(table.read_text(encoding="utf-8").strip().splitlines()) == 1, case   # its header only


def test_run_writes_every_good_output_and_leaves_inputs_and_no_temporary_file(corpus_run):
    r = corpus_run
    for pid in r["goods"]:
        assert (r["output"] / pid / "eeg" / f"{pid}_task-oddball_provenance.json").exists()
    assert _hashes(r["root"]) == r["before"]
    assert [p for p in r["output"].rglob("*") if ".tmp" in p.name or p.name.startswith(".")] == []


# --------------------------------------------------------------------------- definitions
from test_config import INVALID, PARADIGMS  # noqa: E402  (the loader's cases)


@pytest.mark.parametrize("case", sorted(INVALID))
def test_a_definition_mistake_stops_check_with_one_line_and_exit_2(case, tmp_path, monkeypatch):
    kind, base, text, key, what, fix = INVALID[case]
    monkeypatch.chdir(tmp_path)
    (tmp_path / "participants.tsv").write_text("participant_id\tsite\nsub-01\talpha\n")
    (tmp_path / "raw" / "alpha").mkdir(parents=True)
    study = _definition_study(kind, base, text, tmp_path)
    code, out = _main(["check", study.name])
    (line,) = out.strip().splitlines()
    assert code == 2, (case, line)
    assert line.startswith(f"heschl: {kind}.toml: " + (f"{key}: " if key else "")), line
    assert fix in line and all(w in line for w in what), (case, line)
    written = {"participants.tsv", "raw", "study.toml", f"{kind}.toml"} | ({f"{base}.toml"} if kind == "features" else set())
    assert {p.name for p in tmp_path.iterdir()} == written      # nothing written by check


def _definition_study(kind, base, text, folder):
    """The study file for one definition case: the broken file itself (a study), or a
    study naming the broken paradigm or feature set file."""
    from test_config import STUDY

    if kind == "study":
        (folder / "study.toml").write_text(text)
        return folder / "study.toml"
    (folder / f"{kind}.toml").write_text(text)
    if kind == "paradigm":
        analyses = 'paradigm = "paradigm.toml"\nfeature_sets = ["oddball-core"]'
    else:
        (folder / f"{base}.toml").write_text(PARADIGMS[base])
        analyses = f'paradigm = "{base}.toml"\nfeature_sets = ["features.toml"]'
    study = STUDY.replace('paradigm = "oddball"\nfeature_sets = ["oddball-core"]', analyses)
    (folder / "study.toml").write_text(study)
    return folder / "study.toml"


# --------------------------------------------------------------------------- places
def test_an_output_folder_inside_the_recordings_is_refused(tiny, tmp_path):
    fif, common = tiny
    study, ids, goods = badcorpus.build(tmp_path, fif, common, cases=[], good=1)
    study.write_text(study.read_text(encoding="utf-8").replace('output = "derivatives/heschl"',
                                                               'output = "raw/case_intact/heschl"'), encoding="utf-8")
    before = _hashes(tmp_path)
    for command in ("check", "run"):
        code, out = _main([command, str(study)])
        (line,) = out.strip().splitlines()
        assert code == 2 and "output: " in line and "lies inside raw/case_intact" in line, line
        assert "sites.case_intact.files.oddball" in line and "outside the recordings" in line, line
    assert not (tmp_path / "raw" / "case_intact" / "heschl").exists()
    assert _hashes(tmp_path) == before


def test_permission_denied_on_the_output_is_one_line(tiny, tmp_path, monkeypatch):
    # The suite may run as root, where a read-only folder is still writable: the refusal
    # is simulated by patching the folder maker, as the operating system reports it.
    import errno

    fif, common = tiny
    study, ids, goods = badcorpus.build(tmp_path, fif, common, cases=[], good=1)
    real = Path.mkdir

    def refuse(self, *a, **k):
        if "derivatives" in self.parts:
            raise PermissionError(errno.EACCES, "Permission denied", str(self))
        return real(self, *a, **k)

    monkeypatch.setattr(Path, "mkdir", refuse)
    code, out = _main(["-q", "run", str(study)])
    (line,) = [x for x in out.strip().splitlines() if "heschl:" in x or "failed:" in x]
    assert code == 1 and "cannot be written: permission denied" in line and "choose an output folder" in line, out
    assert not (tmp_path / "derivatives").exists()


# --------------------------------------------------------------------------- the table
def test_every_case_is_in_the_developers_table():
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    table = text[text.index("## Bad input: cases, messages, tests"):]
    table = table[:table.index("\n## ", 5)]
    missing = [c for c in [*badcorpus.CASES, *INVALID] if f"`{c}`" not in table]
    assert not missing, missing
    assert len(badcorpus.CASES) + len(INVALID) >= 60


def test_nan_samples_are_held_and_their_trials_dropped(corpus_run):
    # Before: NaN samples reached the filters and spread over the whole channel; now they
    # are held at the last finite value (a stuck run) and the trials touching 8-9 s drop.
    # The case (tests/badcorpus.py) writes NaN at 8.0-9.0 s (samples 2000-2250 at 250 Hz);
    # a trial of the oddball's window -0.1..0.5 s touches it when its onset lies in
    # 7.5-9.1 s; the lower bound 7.3 is that with 0.2 s of slack.
    import json

    pid = corpus_run["ids"]["signal-nan-stretch"]
    folder = corpus_run["output"] / pid / "eeg"
    prov = json.loads(next(folder.glob("*_provenance.json")).read_text(encoding="utf-8"))
    spans = prov["steps"]["harmonise"]["non_finite"]
    assert sorted(spans) == ["F7", "Fp1", "Fp2"] and all(s == [[2000, 2250]] for s in spans.values())
    dropped = [e for e in prov["steps"]["trial_log"] if not e["kept"] and (e["reason"] or "").startswith("saturation")]
    assert dropped and all(7.3 < e["onset_s"] < 9.1 for e in dropped), dropped
    features = (folder / f"{pid}_task-oddball_features.tsv").read_text(encoding="utf-8")
    assert "nan" not in features.lower().replace("n/a", "")
