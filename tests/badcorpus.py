"""The corpus of bad recordings: each case made by code from one tiny gen2 recording.

One study holds every case, each at a site of its own (so each can have its own file type,
pattern and definitions) with a participant of its own (``sub-<n>``); :func:`build` writes
it. ``CASES`` says, per case, what ``heschl check`` and ``heschl run`` must say about it:

- ``"error"``: check and run refuse the recording with the same one line (the words given);
- ``"warn"``: check warns with the words given and run processes it;
- ``"pass"``: check finds nothing wrong (the file is odd but usable).

DEVELOPERS.md ("Bad input: cases, messages, tests") lists every case; a test keeps the
two in step. Imported by tests/test_bad_corpus.py (pytest puts tests/ on the path).
"""
import shutil
from pathlib import Path

import numpy as np

#: The participant of every case is sub-<number>; the site is the case id with "_" for "-".
SITE_PREFIX = "case_"

#: The gen2 tiny recording's marker codes (tests/gen2/study.py).
CODES = {"3": "standard", "4": "deviant"}


def _site(case):
    return SITE_PREFIX + case.replace("-", "_")


def _fif(raw, path):
    path.parent.mkdir(parents=True, exist_ok=True)
    raw.save(path, overwrite=True, verbose="error")


def _vhdr(raw, path, *, scale=1.0):
    """BrainVision by pybv (a writer independent of heschl's); the stimulus channel's
    events become "Stimulus/S  n" markers."""
    import mne
    import pybv

    path.parent.mkdir(parents=True, exist_ok=True)
    eeg = mne.pick_types(raw.info, eeg=True, misc=True, eog=True)
    events = mne.find_events(raw, stim_channel="STIM", verbose="error") if "STIM" in raw.ch_names else np.zeros((0, 3), int)
    ev = np.array([[s, c] for s, _, c in events], dtype=int).reshape(-1, 2)
    pybv.write_brainvision(data=raw.get_data(picks=eeg) * scale, sfreq=raw.info["sfreq"],
                           ch_names=[raw.ch_names[i] for i in eeg], fname_base=path.stem,
                           folder_out=str(path.parent), events=ev if len(ev) else None, unit="µV", overwrite=True)
    return path


def _data(raw, edit):
    """A copy of ``raw`` whose EEG data ``edit(data, eeg_rows, sfreq)`` changed in place."""
    import mne

    out = raw.copy()
    eeg = mne.pick_types(out.info, eeg=True)
    edit(out._data, eeg, out.info["sfreq"])
    return out


def _stim(raw, edit):
    out = raw.copy()
    i = out.ch_names.index("STIM")
    out._data[i] = edit(out._data[i].copy())
    return out


def _span(sfreq, a, b):
    return slice(int(a * sfreq), int(b * sfreq))


def _rename(raw, mapping):
    out = raw.copy()
    out.rename_channels(mapping)
    return out


def _cut(path, share):
    """Keep the first ``share`` of the file (a fraction) or the first ``share`` bytes (an int)."""
    data = path.read_bytes()
    path.write_bytes(data[:share if isinstance(share, int) else int(len(data) * share)])


# --------------------------------------------------------------------------- the makers
# Each maker writes its case's file(s) at ``base`` (a path without extension) from the
# tiny raw and returns the path its site's pattern must match.

def _empty(raw, base):
    p = base.with_name(base.name + "_raw.fif")
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_bytes(b"")
    return p


def _cut_fif(share):
    def make(raw, base):
        p = base.with_name(base.name + "_raw.fif")
        _fif(raw, p)
        _cut(p, share)
        return p
    return make


def _bytes_as(ext, content):
    """A file named like a recording (``ext``) that holds ``content`` instead."""
    def make(raw, base):
        p = base.with_name(base.name + ext)
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_bytes(content)
        return p
    return make


def _text_as(ext):
    return _bytes_as(ext, ("participant notes: nothing to see here\n" * 20).encode("utf-8"))


def _random_as(ext):
    return _bytes_as(ext, np.random.default_rng(7).bytes(40_000))


def _folder_as_fif(raw, base):
    p = base.with_name(base.name + "_raw.fif")
    p.mkdir(parents=True)
    (p / "inside.txt").write_text("a folder, not a recording\n", encoding="utf-8")
    return p


def _dangling_link(raw, base):
    p = base.with_name(base.name + "_raw.fif")
    p.parent.mkdir(parents=True, exist_ok=True)
    p.symlink_to(p.parent / "moved-away_raw.fif")
    return p


def _vhdr_without(ext):
    def make(raw, base):
        p = _vhdr(raw, base.with_name(base.name + "_eeg.vhdr"))
        p.with_suffix(ext).unlink()
        return p
    return make


def _vhdr_edit(old, new):
    def make(raw, base):
        p = _vhdr(raw, base.with_name(base.name + "_eeg.vhdr"))
        text = p.read_text(encoding="utf-8")
        assert old in text, (old, text[:400])
        p.write_text(text.replace(old, new), encoding="utf-8")
        return p
    return make


def _vhdr_zero_samples(raw, base):
    p = _vhdr(raw, base.with_name(base.name + "_eeg.vhdr"))
    p.with_suffix(".eeg").write_bytes(b"")
    return p


def _vhdr_cut(share):
    def make(raw, base):
        p = _vhdr(raw, base.with_name(base.name + "_eeg.vhdr"))
        _cut(p.with_suffix(".eeg"), share)
        return p
    return make


def _vhdr_markers_past_end(raw, base):
    # pybv refuses markers outside the data, so they are appended to its marker file.
    p = _vhdr(raw, base.with_name(base.name + "_eeg.vhdr"))
    vmrk = p.with_suffix(".vmrk")
    text = vmrk.read_text(encoding="utf-8")
    last = max(int(line.split("=")[0][2:]) for line in text.splitlines() if line.startswith("Mk"))
    extra = "".join(f"Mk{last + k}=Stimulus,S  3,{raw.n_times + 250 * k},1,0\n" for k in range(1, 6))
    vmrk.write_text(text.rstrip("\n") + "\n" + extra, encoding="utf-8")
    return p


def _fif_of(transform):
    def make(raw, base):
        p = base.with_name(base.name + "_raw.fif")
        _fif(transform(raw), p)
        return p
    return make


def _no_stim(raw):
    return raw.copy().drop_channels(["STIM"])


def _unknown_codes(raw):
    return _stim(raw, lambda s: np.where(s > 0, 7.0, 0.0))


def _no_deviant(raw):
    return _stim(raw, lambda s: np.where(s == 4, 3.0, s))


def _drop(names):
    return lambda raw: raw.copy().drop_channels(names)


def _flat_all(raw):
    return _data(raw, lambda d, eeg, sf: d.__setitem__(eeg, 0.0))


def _scaled(factor):
    return lambda raw: _data(raw, lambda d, eeg, sf: d.__setitem__(eeg, d[eeg] * factor))


def _no_eeg(raw):
    out = raw.copy()
    out.set_channel_types({n: "misc" for n in out.ch_names if n != "STIM"}, verbose="error")
    return out


def _numbered(raw):
    return _rename(raw, {n: f"E{i + 1}" for i, n in enumerate(raw.ch_names) if n != "STIM"})


def _resampled(rate):
    return lambda raw: raw.copy().resample(rate, verbose="error")


def _around_first_deviant(raw):
    # 0.3 s around the first deviant (and no other marker): shorter than the 0.6 s epoch.
    import mne

    events = mne.find_events(raw, stim_channel="STIM", verbose="error")
    t = events[events[:, 2] == 4][0, 0] / raw.info["sfreq"]
    return raw.copy().crop(t - 0.05, t + 0.25, include_tmax=False)


def _stretch(value, a=8.0, b=9.0, rows=None):
    def edit(d, eeg, sf):
        picks = eeg if rows is None else eeg[:rows]
        d[np.ix_(picks, np.arange(d.shape[1])[_span(sf, a, b)])] = value
    return lambda raw: _data(raw, edit)


def _clipped(raw):
    # Every EEG channel clipped at +-60 uV for the whole file: the clipped samples sit at
    # the file's extreme values.
    return _data(raw, lambda d, eeg, sf: d.__setitem__(eeg, np.clip(d[eeg], -60e-6, 60e-6)))


def _lower_case(raw):
    return _rename(raw, {n: n.lower() for n in raw.ch_names if n != "STIM"})


def _old_names(raw):
    return _rename(raw, {"T7": "T3", "T8": "T4", "P7": "T5", "P8": "T6"})


def _duplicate_after_renaming(raw):
    return _rename(raw, {"C3": "T3"})        # T3 is the old name of T7, which the file has


def _vhdr_scaled(scale):
    # pybv takes volts and stores microvolts: values scaled by 1e-6 are stored as if in
    # volts while the header declares microvolts.
    def make(raw, base):
        return _vhdr(raw, base.with_name(base.name + "_eeg.vhdr"), scale=scale)
    return make


#: case id -> (group, maker, outcome, words). ``words``: fragments the one line holds
#: (errors) or a warning holds (warn). Site settings beyond the pattern and the markers go
#: in SITE_EXTRA.
CASES = {
    # ---- files
    "file-empty": ("files", _empty, "error", ["is empty (0 bytes)"]),
    "file-cut-to-300-bytes": ("files", _cut_fif(300), "error", ["cannot be read as FIF"]),
    "file-fif-cut-to-half": ("files", _cut_fif(0.5), "error", ["cannot be read as FIF"]),
    "file-text-named-fif": ("files", _text_as("_raw.fif"), "error", ["cannot be read as FIF"]),
    "file-text-named-vhdr": ("files", _text_as("_eeg.vhdr"), "error", ["cannot be read as BrainVision"]),
    "file-random-bytes-edf": ("files", _random_as("_eeg.edf"), "error", ["cannot be read as EDF"]),
    "file-random-bytes-set": ("files", _random_as("_eeg.set"), "error", ["cannot be read as MATLAB .set"]),
    "file-folder-named-fif": ("files", _folder_as_fif, "error", ["is a folder, not a file"]),
    "file-dangling-link": ("files", _dangling_link, "error", ["is a link to", "which does not exist"]),
    "file-unsupported-type": ("files", _text_as("_eeg.xyz"), "error", ['file type ".xyz" is not supported']),
    "file-vhdr-without-eeg": ("files", _vhdr_without(".eeg"), "error",
                              ["its companion file sub-11_task-oddball_eeg.eeg is missing"]),
    "file-vhdr-without-vmrk": ("files", _vhdr_without(".vmrk"), "error", ["companion file", ".vmrk is missing"]),
    "file-vhdr-names-missing-data": ("files", _vhdr_edit("DataFile=", "DataFile=elsewhere-"), "error",
                                     ["its companion file elsewhere-sub-"]),
    "file-vhdr-garbled-header": ("files", _vhdr_edit("[Common Infos]", "[Comon Infos]"), "error",
                                 ["cannot be read as BrainVision"]),
    "file-zero-samples": ("files", _vhdr_zero_samples, "error", ["holds no samples"]),
    "file-vhdr-data-cut-to-90": ("files", _vhdr_cut(0.9), "warn", ["truncated: holds 18.0 s of the 18.7 s", "outside data range"]),
    # ---- markers
    "markers-none": ("markers", _fif_of(_no_stim), "error", ["holds no markers at all"]),
    "markers-only-unknown-codes": ("markers", _fif_of(_unknown_codes), "error",
                                   ["no marker of the paradigm found (codes in the file: 7)",
                                    "[sites.case_markers_only_unknown_codes.markers.oddball]"]),
    "markers-past-the-end": ("markers", _vhdr_markers_past_end, "warn",
                            ["Omitted 5 annotation(s) that were outside data range",
                             "truncated: holds 20.0 s of the 25.0 s its last marker declares"]),
    "markers-condition-without-trials": ("markers", _fif_of(_no_deviant), "error",
                                         ['no marker of condition "deviant" (found: standard 36)']),
    # ---- channels
    "channels-common-one-missing": ("channels", _fif_of(_drop(["O2"])), "error",
                                    ["lacks 1 of the study's common channels (O2)"]),
    "channels-common-region-missing": ("channels", _fif_of(_drop(["Fz", "FC1", "FC2", "FCz"])), "error",
                                       ["lacks 4 of the study's common channels"]),
    "channels-numbered-names": ("channels", _fif_of(_numbered), "error", ["lacks 31 of the study's common channels"]),
    "channels-duplicate-after-renaming": ("channels", _fif_of(_duplicate_after_renaming), "error",
                                          ["channels T7 appear twice after renaming"]),
    "channels-no-eeg": ("channels", _fif_of(_no_eeg), "error", ["holds no EEG or MEG channel"]),
    "channels-all-flat": ("channels", _fif_of(_flat_all), "error", ["every channel is flat (zero)"]),
    "channels-volts-declared-microvolts": ("channels", _fif_of(_scaled(1e6)), "error",
                                           ["microvolts (or femtotesla) where the file declares volts"]),
    "channels-microvolts-declared-volts": ("channels", _fif_of(_scaled(1e-6)), "error",
                                           ["stored in volts (tesla) where the file declares microvolts"]),
    "channels-vhdr-volts-stored-microvolts-declared": ("channels", _vhdr_scaled(1e-6), "error",
                                                ["stored in volts (tesla) where the file declares microvolts"]),
    "channels-eog-named-but-absent": ("channels", _fif_of(lambda r: r), "warn",
                                      ["eog_channels names VEOG, which the file lacks"]),
    "channels-lower-case-names": ("channels", _fif_of(_lower_case), "pass", []),
    "channels-old-10-20-names": ("channels", _fif_of(_old_names), "pass", []),
    # ---- signal
    "signal-rate-below-the-paradigms": ("signal", _fif_of(_resampled(200.0)), "error",
                                        ["sampled at 200 Hz, below the paradigm's 250 Hz"]),
    "signal-shorter-than-an-epoch": ("signal", _fif_of(_around_first_deviant), "error",
                                     ["lasts 0.3 s, shorter than one epoch of the paradigm (0.6 s)"]),
    "signal-nan-stretch": ("signal", _fif_of(_stretch(np.nan, rows=3)), "warn",
                           ["250 samples of Fp1 are NaN or infinite", "250 samples of F7"]),
    "signal-inf-stretch": ("signal", _fif_of(_stretch(np.inf, rows=1)), "warn", ["NaN or infinite"]),
    "signal-all-nan": ("signal", _fif_of(_stretch(np.nan, 0.0, 20.0)), "error",
                       ["every sample of every data channel is NaN or infinite"]),
    "signal-clipped": ("signal", _fif_of(_clipped), "pass", []),
}

#: Extra lines for a case's site table.
SITE_EXTRA = {"channels-eog-named-but-absent": ['eog_channels = ["VEOG"]']}


def study_text(root, common, paths):
    """The study file naming one site per case."""
    lines = ['name = "bad-input corpus"', 'output = "derivatives/heschl"', 'participants = "participants.tsv"',
             "common_channels = [" + ", ".join(f'"{c}"' for c in common) + "]", "",
             "[groups]", 'labels = ["control"]', "",
             "[[analyses]]", 'paradigm = "oddball"', 'feature_sets = ["oddball-core"]', ""]
    for case, path in paths.items():
        vhdr = path.name.endswith(".vhdr")
        lines += [f"[sites.{_site(case)}]", 'recording_reference = "Cz"', "line_frequency = 50.0",
                  *SITE_EXTRA.get(case, []),
                  f"[sites.{_site(case)}.files]", f'oddball = "{path.relative_to(root).as_posix()}"', f"[sites.{_site(case)}.markers.oddball]"]
        lines += [f'"{"Stimulus/S{:3d}".format(int(c)) if vhdr else c}" = "{label}"' for c, label in CODES.items()]
        lines.append("")
    return "\n".join(lines)


def build(root, tiny_fif, common, cases=None, good=1):
    """Write the corpus study under ``root``: the ``cases`` (default all) and ``good``
    intact copies of the tiny recording (participants sub-OK1...). Returns
    (study path, {case: participant id}, [good participant ids])."""
    import mne

    root = Path(root)
    raw = mne.io.read_raw_fif(tiny_fif, preload=True, verbose="error")
    cases = list(CASES) if cases is None else list(cases)
    paths, ids = {}, {}
    for i, case in enumerate(cases, start=1):
        pid = f"{i:02d}"
        ids[case] = f"sub-{pid}"
        paths[case] = CASES[case][1](raw, root / "raw" / _site(case) / f"sub-{pid}" / f"sub-{pid}_task-oddball")
    goods = []
    for k in range(1, good + 1):
        pid = f"OK{k}"
        target = root / "raw" / "case_intact" / f"sub-{pid}" / f"sub-{pid}_task-oddball_raw.fif"
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(tiny_fif, target)
        goods.append(f"sub-{pid}")
    if good:
        paths["intact"] = root / "raw" / "case_intact" / "sub-OK1" / "sub-OK1_task-oddball_raw.fif"
    text = study_text(root, common, paths)
    if good:
        text = text.replace('oddball = "raw/case_intact/sub-OK1/sub-OK1_task-oddball_raw.fif"',
                            'oddball = "raw/case_intact/sub-*/sub-*_task-oddball_raw.fif"')
    (root / "study.toml").write_text(text, encoding="utf-8")
    (root / "participants.tsv").write_text(
        "participant_id\tgroup\n" + "".join(f"{p}\tcontrol\n" for p in [*ids.values(), *goods]), encoding="utf-8")
    return root / "study.toml", ids, goods
