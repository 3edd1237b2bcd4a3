"""Recall and false marks of the muscle rule (heschl.muscle) on both generators.

Run from the repository root: ``python benchmarks/muscle_recall.py [out.json]``.

gen2 (tests/gen2, written independently of heschl.synth) plants 20-150 Hz bursts over a
temporal electrode at 1.2 a minute (0.8 at rest); heschl.synth plants 20-100 Hz bursts one
or two a minute. Each study is run end to end with ``heschl run``; a burst is found when a
marked stretch of the recording's clean record overlaps it. A marked stretch that meets
no burst (nor a pop or saturation, whose steps ring through the band-pass) within
`PAD_S` is false.
"""
from __future__ import annotations

import json
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
#: A marked stretch within this many seconds of a burst or another artefact is its tail
#: (the score is smoothed below 4 Hz, and a step rings through the band-pass), not false.
PAD_S = 1.0
sys.path.insert(0, str(ROOT / "tests"))


def _overlap(a, b, stretches):
    return any(x < b and y > a for x, y in stretches)


def _pad(spans, s=PAD_S):
    return [(a - s, b + s) for a, b in spans]


def _score(bursts, others, stretches):
    found = sum(_overlap(a, b, stretches) for a, b in bursts)
    false = sum(not _overlap(x, y, _pad(bursts)) and not _overlap(x, y, _pad(others)) for x, y in stretches)
    return found, len(bursts), false, len(stretches)


def _marked(study_root, rel):
    name = Path(rel).name.split("_raw")[0].split("_eeg")[0]
    sub = name.split("_")[0]
    prov = next((study_root / "derivatives" / "heschl" / sub).glob(f"*/{name}_provenance.json"))
    muscle = json.loads(prov.read_text())["steps"]["clean"].get("muscle") or {}
    return muscle.get("stretches_s", []), muscle.get("band_hz")


def gen2_cells(base):
    import gen2
    from heschl.cli import main

    rows = []
    for n_channels in (32, 64, 128):
        for sfreq in (250.0, 1000.0):
            root = base / f"gen2-{n_channels}-{sfreq:g}"
            study = gen2.make_study(root, n_channels=n_channels, sfreq=sfreq, subjects=2,
                                    paradigms=("oddball", "rest"), seed=11)
            t0 = time.time()
            main(["-q", "run", str(study)])
            truth = json.loads((root / "truth.json").read_text())
            cell = [0, 0, 0, 0]
            for rel, rec in truth["recordings"].items():
                art = rec["artefacts"]
                bursts = [(m["onset_s"], m["onset_s"] + m["duration_s"]) for m in art.get("muscle", [])]
                others = [(b["onset_s"], b["onset_s"] + 0.5) for b in art.get("pops", [])]
                stretches, band = _marked(root, rel)
                cell = [c + s for c, s in zip(cell, _score(bursts, others, stretches))]
            rows.append({"generator": "gen2", "channels": n_channels, "sfreq": sfreq, "band_hz": band,
                         "found": cell[0], "bursts": cell[1], "false": cell[2], "stretches": cell[3],
                         "seconds": round(time.time() - t0, 1)})
            print(rows[-1], flush=True)
    return rows


def synth_cells(base, size="test"):
    """The demo study of heschl.synth at ``size``: bursts per site and paradigm."""
    from heschl.cli import main
    from heschl.synth.study import make_study

    root = base / "synth"
    study = make_study(root, size=size)
    t0 = time.time()
    main(["-q", "run", "--jobs", "2", str(study)])
    truth = json.loads((root / "truth.json").read_text())
    cells = {}
    for rec in truth["recordings"]:
        rel = rec["files"][0]
        try:
            stretches, band = _marked(root, rel)
        except StopIteration:
            continue
        others = [tuple(s) for s in rec.get("saturation_s", [])]
        key = (rec["site"], rec["paradigm"])
        cell = cells.setdefault(key, [0, 0, 0, 0, band])
        for i, v in enumerate(_score([tuple(m) for m in rec["muscle_s"]], others, stretches)):
            cell[i] += v
    rows = [{"generator": "synth", "site": k[0], "paradigm": k[1], "band_hz": v[4], "found": v[0],
             "bursts": v[1], "false": v[2], "stretches": v[3]} for k, v in sorted(cells.items())]
    for r in rows:
        print(r, flush=True)
    print("synth seconds", round(time.time() - t0, 1), flush=True)
    return rows


if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        rows = gen2_cells(Path(tmp)) + synth_cells(Path(tmp))
    if len(sys.argv) > 1:
        Path(sys.argv[1]).write_text(json.dumps(rows, indent=1))
