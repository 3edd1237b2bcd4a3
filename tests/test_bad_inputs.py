"""Bad input and faults: one clear line, a non-zero exit, nothing lost or half-written.

Every case is made by code from a tiny recording of the independent generator (tests/gen2:
one participant, 20 s oddball, 32 channels at 250 Hz); DEVELOPERS.md lists the cases
("Bad input: cases, messages, tests"). Each test checks the message (one line naming the
file and the fix), the exit code, that no output was written where none should be, and
that the input files are unchanged.
"""
import hashlib
import json
import shutil
from pathlib import Path

import pytest

from heschl.cli import main

gen2 = pytest.importorskip("gen2")  # tests/gen2, on the path through pytest's rootdir


def _hashes(root):
    return {p: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(Path(root, "raw").rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    """A one-participant gen2 study (its study file, unprocessed)."""
    root = tmp_path_factory.mktemp("tiny")
    return gen2.make_study(root, n_channels=32, subjects=1, paradigms=("oddball",), size="test", seed=4,
                           sfreq=250.0, duration_s=20.0)


@pytest.fixture
def study(tiny, tmp_path):
    """A private copy of the tiny study."""
    shutil.copytree(tiny.parent, tmp_path / "s")
    return tmp_path / "s" / "study.toml"


def _run(args, capsys):
    code = main(args)
    out, err = capsys.readouterr()
    return code, out, err.strip()


def _second_site(study):
    """Add a site "otherlab" whose folder holds a copy of gen2lab's participant."""
    root = study.parent
    shutil.copytree(root / "raw" / "gen2lab", root / "raw" / "otherlab")
    text = study.read_text(encoding="utf-8")
    block = text[text.index("[sites.gen2lab]"):]
    text += "\n" + block.replace("gen2lab", "otherlab")
    study.write_text(text, encoding="utf-8")


def test_the_same_participant_id_at_two_sites_is_refused_naming_both_files(study, capsys):
    # Before: both sites wrote sub-G01_task-oddball_* and the group table mixed them.
    _second_site(study)
    before = _hashes(study.parent)
    for command in ("check", "run"):
        code, _, err = _run([command, str(study)], capsys)
        assert code == 2, (command, err)
        assert len(err.splitlines()) == 1 and "Traceback" not in err
        assert "sub-G01" in err and "otherlab" in err and "gen2lab" in err and "unique" in err
        assert "subject_pattern" in err   # the fix
    assert not (study.parent / "derivatives").exists()
    assert _hashes(study.parent) == before


def test_distinct_ids_at_two_sites_pass(study, capsys):
    # The fix the message names: each site's participants get their own ids.
    _second_site(study)
    folder = study.parent / "raw" / "otherlab"
    for p in sorted(folder.rglob("*G01*"), key=lambda p: -len(p.parts)):
        p.rename(p.with_name(p.name.replace("G01", "O01")))
    (study.parent / "participants.tsv").write_text("participant_id\tgroup\nsub-G01\tcontrol\nsub-O01\tcontrol\n",
                                                   encoding="utf-8")
    code, out, err = _run(["check", str(study)], capsys)
    assert code == 0, err


def test_two_files_for_one_participant_and_paradigm_are_refused(study, capsys):
    root = study.parent
    src = next((root / "raw" / "gen2lab").rglob("*_raw.fif"))
    shutil.copy(src, src.with_name(src.name.replace("_raw.fif", "_run-2_raw.fif")))
    text = study.read_text(encoding="utf-8").replace("sub-*_task-oddball_raw.fif", "sub-*_task-oddball*raw.fif")
    study.write_text(text, encoding="utf-8")
    code, _, err = _run(["check", str(study)], capsys)
    assert code == 2 and len(err.splitlines()) == 1
    assert "second oddball file" in err and "run-2" in err


def _rescale(study, factor):
    """Rewrite the study's FIF with its values multiplied by ``factor`` (a unit mistake)."""
    import mne

    path = next((study.parent / "raw" / "gen2lab").rglob("*_raw.fif"))
    raw = mne.io.read_raw_fif(path, preload=True, verbose="error")
    raw.apply_function(lambda x: x * factor, picks="eeg", channel_wise=False, verbose="error")
    raw.save(path, overwrite=True, verbose="error")
    return path


@pytest.mark.parametrize("factor, words", [(1e6, "microvolts (or femtotesla) where the file declares volts"),
                                           (1e-6, "volts (tesla) where the file declares microvolts")])
def test_data_off_by_a_million_are_refused_with_the_likely_cause(study, capsys, factor, words):
    # Before: a mismatch of -1.2 million uV (or -1e-6 uV) got the verdict "note".
    # Limits: 0.1-500 uV robust EEG amplitude (common practice; docs/REFERENCES.md F48).
    _rescale(study, factor)
    before = _hashes(study.parent)
    code, out, err = _run(["run", str(study)], capsys)
    assert code == 1
    (line,) = [x for x in out.splitlines() if x.strip().startswith("unusable:")]
    assert words in line and "re-export" in line and "sub-G01_task-oddball_raw.fif" in line
    out_dir = study.parent / "derivatives" / "heschl"
    (features,) = out_dir.rglob("*_features.tsv")
    assert len(features.read_text(encoding="utf-8").strip().splitlines()) == 1   # its header, no values
    qc = json.loads(next(out_dir.rglob("*_qc.json")).read_text(encoding="utf-8"))
    assert qc["verdict"] == "unusable" and words in qc["unusable"]["reason"]
    assert _hashes(study.parent) == before


def test_check_reports_the_unit_mistake_that_run_meets(study, capsys):
    # One rule for check and run: what run refuses, check reports first.
    _rescale(study, 1e6)
    code, out, err = _run(["check", str(study)], capsys)
    assert code == 1
    assert "declares volts" in out + err and "sub-G01_task-oddball_raw.fif" in out + err


@pytest.fixture(scope="module")
def synth_files(tmp_path_factory):
    """heschl.synth's study (test size): its EDF (Birch) and BrainVision (Alder) writers."""
    from heschl.synth import make_study

    return make_study(tmp_path_factory.mktemp("synth"), size="test")


def _only(study_file, keep, tmp_path):
    """A copy of the synthetic study reduced to one oddball file (``keep``, relative)."""
    root = tmp_path / "one"
    src = study_file.parent
    for rel in [keep] + ([keep.replace(".vhdr", ".vmrk"), keep.replace(".vhdr", ".eeg")] if keep.endswith(".vhdr")
                         else []):
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(src / rel, root / rel)
    shutil.copy(src / "participants.tsv", root / "participants.tsv")
    text = (src / "study.toml").read_text(encoding="utf-8")
    site = keep.split("/")[1]
    lines, section = [], None
    for line in text.splitlines():
        if line.startswith("["):
            section = line
        if section and section.startswith("[sites.") and not section.startswith((f"[sites.{site}]",
                                                                                 f"[sites.{site}.")):
            continue          # other sites go
        if section and section.startswith(f"[sites.{site}.markers.") and "oddball" not in section:
            continue          # and the other paradigms
        if f"raw/{site}/" in line:
            if "oddball" not in line:
                continue
            line = line.split("=")[0] + f'= "{keep}"'
        lines.append(line)
    text = "\n".join(lines) + "\n"
    for other in ("clicktrain", "rest"):
        text = text.replace(f'[[analyses]]\nparadigm = "{other}"\nfeature_sets = ["{other}-core"]\n', "")
    (root / "study.toml").write_text(text, encoding="utf-8")
    return root / "study.toml"


def _truncate(path, share=0.9):
    import os

    size = os.path.getsize(path)
    os.truncate(path, int(size * share) // 256 * 256)


@pytest.mark.parametrize("keep, data, words", [
    ("raw/birch/sub-B01/sub-B01_task-oddball_eeg.edf", ".edf", "Number of records from the header"),
    ("raw/alder/sub-A01/sub-A01_task-oddball_eeg.vhdr", ".eeg", "outside data range")])
def test_a_truncated_file_is_flagged_with_the_readers_words_and_what_is_missing(synth_files, tmp_path, capsys,
                                                                                  keep, data, words):
    # Before: mne's warnings were hidden (verbose="error") and a file cut to 90 % got the
    # verdict of the intact one; markers past the end were dropped without a word.
    study = _only(synth_files, keep, tmp_path)
    _truncate(study.parent / keep.replace(Path(keep).suffix, data))
    code, out, err = _run(["check", str(study)], capsys)
    assert "warning:" in out and "truncated: holds" in out and words in out and "1 with warnings" in out
    code, out, err = _run(["-q", "run", str(study)], capsys)
    qc = json.loads(next((study.parent / "derivatives").rglob("*_qc.json")).read_text(encoding="utf-8"))
    flags = {f["code"]: f for f in qc["flags"]}
    assert flags["truncated-file"]["level"] == "caution" and qc["verdict"] in ("caution", "unusable")
    assert "missing" in flags["truncated-file"]["message"]
    share = float(flags["truncated-file"]["message"].split("(")[1].split("%")[0])
    assert 5 <= share <= 15              # cut to 90 % of the bytes: about 10 % of the time
    assert words in flags["reader-warning"]["message"]
