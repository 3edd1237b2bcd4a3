"""A heschl study of gen2 recordings: raw files, study.toml, participants.tsv, truth.json."""
from __future__ import annotations

import json
from pathlib import Path

from .caps import cap_names
from .events import CODES
from .recording import make_recording

__all__ = ["make_study", "acceptance_recording", "study_toml", "SITE", "FEATURE_SETS"]

SITE = "gen2lab"
FEATURE_SETS = {"oddball": "oddball-core", "clicktrain": "clicktrain-core", "rest": "rest-core"}


def _quote(items):
    return "[" + ", ".join(f'"{i}"' for i in items) + "]"


def study_toml(channels, paradigms, reference="Cz", line=50.0, fmt="fif"):
    """The text of a study file naming the gen2 site, its files and marker codes."""
    ext, word = ("_raw.fif", None) if fmt == "fif" else ("_eeg.vhdr", "Stimulus/S{:3d}")
    lines = ['name = "gen2 synthetic study"', 'output = "derivatives/heschl"',
             'participants = "participants.tsv"', f"common_channels = {_quote(channels)}", "",
             "[groups]", 'labels = ["control"]', ""]
    for p in paradigms:
        lines += ["[[analyses]]", f'paradigm = "{p}"', f'feature_sets = ["{FEATURE_SETS[p]}"]', ""]
    lines += [f"[sites.{SITE}]", f'recording_reference = "{reference or "average"}"',
              f"line_frequency = {float(line)}", f"[sites.{SITE}.files]"]
    lines += [f'{p} = "raw/{SITE}/sub-*/sub-*_task-{p}{ext}"' for p in paradigms]
    for p in paradigms:
        lines.append(f"[sites.{SITE}.markers.{p}]")
        lines += [f'"{code if word is None else word.format(code)}" = "{label}"' for label, code in CODES[p].items()]
    return "\n".join(lines) + "\n"


def make_study(root, *, n_channels=64, sensor_noise=0.15, spatial="dipoles", subjects=2,
               paradigms=("oddball", "clicktrain", "rest"), size="test", seed=0, **kw):
    """Write a study of ``subjects`` x ``paradigms`` gen2 recordings under ``root``.

    Extra keywords go to :func:`gen2.make_recording` (``sfreq``, ``bad``, ``artefacts``,
    ``exponent``, ``coupling``, ``reference``, ``line``, ``duration_s``, ``fmt``). ``bad``
    may also be a dict subject id -> ``bad`` argument.

    Returns
    -------
    path : pathlib.Path
        The study file.
    """
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    bad = kw.pop("bad", None)
    fmt = kw.get("fmt", "fif")
    ext = "_raw.fif" if fmt == "fif" else "_eeg.vhdr"
    truth = {"generator": "gen2", "site": SITE, "recordings": {}}
    ids = [f"G{i + 1:02d}" for i in range(subjects)]
    for sid in ids:
        for p in paradigms:
            rel = f"raw/{SITE}/sub-{sid}/sub-{sid}_task-{p}{ext}"
            planted = bad.get(sid) if isinstance(bad, dict) and sid in bad else (None if isinstance(bad, dict) else bad)
            truth["recordings"][rel] = make_recording(
                root / rel, paradigm=p, n_channels=n_channels, spatial=spatial, sensor_noise=sensor_noise,
                size=size, seed=seed, subject=sid, bad=planted, **kw)
    (root / "participants.tsv").write_text("participant_id\tgroup\n" + "".join(f"sub-{s}\tcontrol\n" for s in ids),
                                           encoding="utf-8")
    (root / "truth.json").write_text(json.dumps(truth, indent=1, ensure_ascii=False), encoding="utf-8")
    path = root / "study.toml"
    path.write_text(study_toml(cap_names(n_channels), paradigms, kw.get("reference", "Cz"), kw.get("line", 50.0),
                               fmt), encoding="utf-8")
    return path


#: The settings of the acceptance recording of issue 10: 64 channels at 1000 Hz, background
#: covariance 0.85 exp(-d / 6 cm) + 0.15 I (the 0.15 is the independent share, so no extra
#: sensor noise), 1/f^1.3, one flat and one noisy planted channel, full length.
ACCEPTANCE = {"n_channels": 64, "sfreq": 1000.0, "spatial": "exponential", "coupling": 0.85,
              "sensor_noise": 0.0, "exponent": 1.3, "bad": ["flat", "noisy"], "size": "full", "subjects": 1}


def acceptance_recording(path, paradigms=("oddball", "clicktrain", "rest"), seed=0):
    """Write the acceptance study (one subject, every paradigm, full length) under ``path``.

    Returns the study file's path.
    """
    return make_study(path, paradigms=paradigms, seed=seed, **ACCEPTANCE)
