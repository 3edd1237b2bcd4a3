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


def test_mains_left_in_at_a_site_with_a_restored_reference_is_flagged(tmp_path, capsys):
    # Before: the restored reference (a channel of zeros) made the residual line-noise
    # ratio NaN for every recording, so 100 uV of 50 Hz with line_noise = "none" passed.
    import mne
    import numpy as np

    study = gen2.make_study(tmp_path, n_channels=32, subjects=1, paradigms=("clicktrain",), size="test", seed=6,
                            sfreq=250.0, duration_s=30.0, reference="Cz")
    path = next((tmp_path / "raw").rglob("*_raw.fif"))
    raw = mne.io.read_raw_fif(path, preload=True, verbose="error")
    gains = np.random.default_rng(0).uniform(0.5, 1.5, (len(mne.pick_types(raw.info, eeg=True)), 1))
    raw.apply_function(lambda x: x + 100e-6 * gains * np.sin(2 * np.pi * 50.0 * raw.times), picks="eeg",
                       channel_wise=False, verbose="error")
    raw.save(path, overwrite=True, verbose="error")
    text = (Path(__file__).parents[1] / "paradigms" / "clicktrain.toml").read_text(encoding="utf-8")
    (tmp_path / "clicktrain-keep-mains.toml").write_text(text.replace('line_noise = "notch"', 'line_noise = "none"'),
                                                         encoding="utf-8")
    study.write_text(study.read_text(encoding="utf-8").replace('paradigm = "clicktrain"',
                                                               'paradigm = "clicktrain-keep-mains.toml"'),
                     encoding="utf-8")
    assert "Cz" not in mne.io.read_raw_fif(path, verbose="error").ch_names   # restored as zeros by heschl
    main(["-q", "run", str(study)])
    qc = json.loads(next(tmp_path.rglob("*_qc.json")).read_text(encoding="utf-8"))
    flags = {f["code"]: f for f in qc["flags"]}
    assert "line-noise" in flags and flags["line-noise"]["level"] == "caution", qc["flags"]
    prov = json.loads(next(tmp_path.rglob("*_provenance.json")).read_text(encoding="utf-8"))
    assert prov["steps"]["clean"]["line_noise"]["ratio_after"] > 3.0


def test_a_saturated_stretch_drops_its_trials_with_that_reason(tiny, tmp_path, capsys):
    # Before: 10 s with every channel stuck at one value passed; its epochs were kept.
    import mne

    shutil.copytree(tiny.parent, tmp_path / "s")
    study = tmp_path / "s" / "study.toml"
    path = next((tmp_path / "s" / "raw").rglob("*_raw.fif"))
    raw = mne.io.read_raw_fif(path, preload=True, verbose="error")
    eeg = mne.pick_types(raw.info, eeg=True)
    a, b = (int(t * raw.info["sfreq"]) for t in (6.0, 11.0))
    data = raw.get_data()
    data[eeg, a:b] = data[eeg, a:a + 1]            # every channel held at its value at 6 s
    raw._data[:] = data
    raw.save(path, overwrite=True, verbose="error")
    main(["-q", "run", str(study)])
    out = tmp_path / "s" / "derivatives" / "heschl"
    prov = json.loads(next(out.rglob("*_provenance.json")).read_text(encoding="utf-8"))
    sat = prov["steps"]["clean"]["saturation"]
    assert len(sat["stretches_s"]) == 1
    start, stop = sat["stretches_s"][0]
    assert abs(start - 6.0) < 0.02 and abs(stop - 11.0) < 0.02 and len(sat["channels"][0]) == len(eeg)
    log = prov["steps"]["trial_log"]
    inside = [e for e in log if 6.0 - 0.5 < e["onset_s"] < 11.0 + 0.1 and not (e["reason"] or "").startswith("skipped")]
    assert inside and all(not e["kept"] and e["reason"].startswith("saturation") for e in inside), inside
    qc = json.loads(next(out.rglob("*_qc.json")).read_text(encoding="utf-8"))
    assert sum(t["reasons"].get("saturation", 0) for t in qc["trials"].values()) == len(inside)
    page = next(out.rglob("*_review.html")).read_text(encoding="utf-8")
    assert "saturation" in page


def _local_feature_set(study, edit):
    """Copy features/oddball-core.toml next to the study, edited by ``edit(text)``, and use it."""
    text = (Path(__file__).parents[1] / "features" / "oddball-core.toml").read_text(encoding="utf-8")
    (study.parent / "my-oddball.toml").write_text(edit(text), encoding="utf-8")
    study.write_text(study.read_text(encoding="utf-8").replace('feature_sets = ["oddball-core"]',
                                                               'feature_sets = ["my-oddball.toml"]'),
                     encoding="utf-8")


@pytest.mark.parametrize("edit, words", [
    # Before: "FCzz" made the set look like an MEG set: "not applicable", exit 0.
    (lambda t: t.replace('frontocentral = ["Fz", "FC1", "FC2", "FCz", "Cz"]',
                         'frontocentral = ["Fz", "FC1", "FC2", "FCzz", "Cz"]'),
     ['"FCzz" is not a 10-05 electrode name', 'did you mean "FCz"']),
    # Before: fraction = 1.0 passed the loader and became NaN "could not be computed".
    (lambda t: t.replace("fraction = 0.5 ", "fraction = 1.0 "), ["fraction", "1 is out of range", "below 1"]),
])
def test_definition_mistakes_stop_check_and_run_with_one_line(study, capsys, edit, words):
    _local_feature_set(study, edit)
    for command in ("check", "run"):
        code, _, err = _run([command, str(study)], capsys)
        assert code == 2 and len(err.splitlines()) == 1 and "my-oddball.toml" in err, (command, err)
        for w in words:
            assert w in err, err
    assert not (study.parent / "derivatives").exists()


def test_a_band_above_nyquist_names_the_rate(tmp_path, capsys):
    # Before: a band of 100-200 Hz at a 250 Hz analysis rate was measured and written.
    from heschl.config import load_paradigm
    from heschl.config.feature_set import load_feature_set
    from heschl.errors import DefinitionError

    root = Path(__file__).parents[1]
    text = (root / "features" / "rest-core.toml").read_text(encoding="utf-8")
    path = tmp_path / "rest-high.toml"
    path.write_text(text.replace("[bands]", "[bands]\nultra = [100.0, 200.0]", 1)
                    + '\n[[measures]]\nkind = "band-power"\nsignal = "eyes-open"\nregion = "posterior"\n'
                    'band = "ultra"\n', encoding="utf-8")
    with pytest.raises(DefinitionError, match="above the Nyquist frequency 125 Hz"):
        load_feature_set(path, load_paradigm(root / "paradigms" / "rest.toml"))


def test_a_file_pattern_that_matches_nothing_is_reported(study, capsys):
    # Before: the site was skipped without a word.
    study.write_text(study.read_text(encoding="utf-8").replace("sub-*_task-oddball_raw.fif",
                                                               "sub-*_task-odball_raw.fif"), encoding="utf-8")
    code, out, err = _run(["check", str(study)], capsys)
    assert code == 1 and "matches no file" in out and "sites.gen2lab.files.oddball" in out


def _leftovers(root):
    """Temporary files and outputs of the tiny study's recording, if any.

    The recording's log under ``logs/`` is kept on purpose after a failure (it says why).
    """
    return sorted(p.name for p in Path(root).rglob("*") if p.is_file() and (".tmp-" in p.name or "task-" in p.name)
                  and "derivatives" in p.parts and "logs" not in p.parts)


def test_an_output_folder_under_a_file_is_one_line(study, capsys):
    # Before: a raw FileExistsError / NotADirectoryError traceback.
    (study.parent / "blocker").write_text("not a folder", encoding="utf-8")
    study.write_text(study.read_text(encoding="utf-8").replace('output = "derivatives/heschl"',
                                                               'output = "blocker/heschl"'), encoding="utf-8")
    code, out, err = _run(["run", str(study)], capsys)
    assert code == 1 and len(err.splitlines()) == 1 and "Traceback" not in err
    assert "cannot be made a folder" in err and "blocker is a file" in err


def test_a_full_disk_fails_the_recording_in_one_line_and_leaves_nothing(study, capsys, monkeypatch):
    # Before: the NetCDF writer crashed the process (exit 139) or a traceback left a
    # temporary file. Simulated: the disk reports 1 MB free.
    import collections
    import shutil as sh

    usage = collections.namedtuple("usage", "total used free")
    monkeypatch.setattr(sh, "disk_usage", lambda path: usage(2 ** 30, 2 ** 30 - 2 ** 20, 2 ** 20))
    code, out, err = _run(["-q", "run", str(study)], capsys)
    assert code == 1
    (line,) = [x for x in out.splitlines() if x.strip().startswith("failed:")]
    assert "only 1 MB free" in line and "free disk space" in line
    assert _leftovers(study.parent) == []
    (log,) = (study.parent / "derivatives" / "heschl" / "logs").glob("*.log")
    assert "only 1 MB free" in log.read_text(encoding="utf-8")


def test_a_write_that_hits_a_full_disk_removes_what_it_wrote(study, capsys, monkeypatch):
    # The disk fills while the outputs are written (ENOSPC from the file system): the
    # recording fails in one line and none of its outputs nor a temporary file is left.
    import errno
    import os as _os

    import heschl.outputs as outputs

    real = _os.fsync

    def full(fd):
        # The recording's own feature table, after its arrays were written (Linux: the
        # file behind a descriptor is named in /proc/self/fd).
        name = _os.readlink(f"/proc/self/fd/{fd}")
        if "_features.tsv" in name and "group" not in name:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(fd)

    monkeypatch.setattr(outputs.os, "fsync", full)
    code, out, err = _run(["-q", "run", str(study)], capsys)
    assert code == 1
    (line,) = [x for x in out.splitlines() if x.strip().startswith("failed:")]
    assert "the disk is full" in line
    assert _leftovers(study.parent) == []


def test_one_bad_recording_among_good_ones(tmp_path, capsys):
    # Acceptance of the bad-input issue: every good output is written, the bad one is
    # listed (with its row in group/qc.tsv), and the run exits 1.
    import pandas as pd

    study = gen2.make_study(tmp_path, n_channels=32, subjects=3, paradigms=("oddball",), size="test", seed=12,
                            sfreq=250.0, duration_s=20.0)
    bad = next((tmp_path / "raw").rglob("sub-G02_*_raw.fif"))
    bad.write_bytes(bad.read_bytes()[:300])          # cut to its first 300 bytes: unreadable
    code, out, err = _run(["-q", "run", str(study)], capsys)
    assert code == 1
    (line,) = [x for x in out.splitlines() if x.strip().startswith("failed:")]
    assert "sub-G02_task-oddball_raw.fif" in line and "cannot be read" in line
    output = tmp_path / "derivatives" / "heschl"
    for sub in ("sub-G01", "sub-G03"):
        assert (output / sub / "eeg" / f"{sub}_task-oddball_provenance.json").exists()
    qc = pd.read_csv(output / "group" / "qc.tsv", sep="\t")
    row = qc.set_index("participant_id").loc["sub-G02"]
    assert row["verdict"] == "failed" and "cannot be read" in row["flags"]
    assert set(qc["participant_id"]) == {"sub-G01", "sub-G02", "sub-G03"}
