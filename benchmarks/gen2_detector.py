"""How heschl's bad-channel detector does on recordings of the second generator (tests/gen2).

Not a test: run it by hand, from the repository root,

    python benchmarks/gen2_detector.py                 # size "test", one recording per cell
    python benchmarks/gen2_detector.py --duration 60   # shorter oddballs

For every cap (32, 64, 128 channels), independent sensor-noise share (0, 0.1, 0.2, 0.3)
and spatial model (dipoles, exponential) it writes one gen2 oddball with one planted bad
channel of every kind (flat, noisy, bridged pair, high-impedance, intermittent: six
channels), brings it through heschl's harmonise, line-noise removal and pass band, and
runs heschl's detector exactly as ``heschl.clean.clean`` does (same detection copy, same
per-type settings), without the "more than a quarter bad" stop, so that every flag is
counted. It prints a table of recall, precision and the fraction of clean channels
flagged, whether ``clean`` would stop the recording, and recall by kind.

It measures; it changes nothing in heschl.
"""
from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

CAPS = (32, 64, 128)
NOISE = (0.0, 0.1, 0.2, 0.3)
MODELS = ("dipoles", "exponential")


def detect(study_path):
    """heschl's flags on the study's single oddball: {channel: reason}, channels, restored reference."""
    import mne

    from heschl.clean import DETECTOR_SETTINGS, FILTERED, BadChannelDetector, filter_pass_band
    from heschl.config import load_study
    from heschl.harmonise import harmonise, read_raw
    from heschl.inputs import analysis_of, discover
    from heschl.linenoise import remove_line_noise
    from heschl.sensors import by_type, data_picks, types_of

    study = load_study(study_path)
    recording = discover(study)[0]
    paradigm, site = analysis_of(study, recording).paradigm, study.sites[recording.site]
    raw = read_raw(recording.path)
    raw, _, harmonised = harmonise(raw, site, paradigm, study.common_channels, recording.path.name)
    from heschl.linenoise import channel_line_amplitudes

    ratios = channel_line_amplitudes(raw, site.line_frequency, data_picks(raw.info))
    remove_line_noise(raw, site.line_frequency, method=paradigm.cleaning.line_noise,
                      picks=[t for t in FILTERED if t in raw])
    filter_pass_band(raw, paradigm.cleaning.pass_band)
    picks = data_picks(raw.info)
    names = [raw.ch_names[i] for i in picks]
    restored = harmonised["restored_reference"]
    flags = {}
    for kind, idx in by_type(types_of(raw.info, picks)).items():
        # The detection copy of heschl.clean: 1 Hz high-passed (heschl.clean._detection_copy).
        x = mne.filter.filter_data(raw.get_data(picks=picks[idx]), raw.info["sfreq"], 1.0, None, verbose="error")
        det = BadChannelDetector(kind=kind, **DETECTOR_SETTINGS.get(kind, {}))
        det.fit(x, [names[i] for i in idx], raw.info["sfreq"], exclude=[restored] if restored else [],
                line_amplitude=None if ratios is None else ratios[idx])
        flags.update(det.bads_)
    return flags, names


def one(root, n_channels, noise, spatial, seed, duration):
    import gen2

    path = gen2.make_study(root, n_channels=n_channels, sensor_noise=noise, spatial=spatial, subjects=1,
                           paradigms=("oddball",), size="test", seed=seed, bad=5, duration_s=duration)
    truth = json.loads((root / "truth.json").read_text(encoding="utf-8"))
    (rec,) = truth["recordings"].values()
    planted = {r["channel"]: r["kind"] for r in rec["bad_channels"]}
    flags, names = detect(path)
    hit = set(flags) & set(planted)
    n_clean = len(names) - len(planted)
    return {"n_channels": n_channels, "sensor_noise": noise, "spatial": spatial, "seed": seed,
            "planted": planted, "flagged": flags,
            "recall": len(hit) / len(planted),
            "precision": len(hit) / len(flags) if flags else 1.0,
            "clean_flagged": len(set(flags) - set(planted)) / n_clean,
            "stopped": len(flags) > len(names) // 4,
            "found_by_kind": {k: sum(1 for c, kk in planted.items() if kk == k and c in flags) for k in set(planted.values())}}


def table(rows):
    lines = ["| model | channels | sensor noise | recall | precision | clean flagged | clean would stop | missed |",
             "|---|---|---|---|---|---|---|---|"]
    for r in rows:
        missed = ", ".join(f"{c} ({k})" for c, k in r["planted"].items() if c not in r["flagged"]) or "-"
        lines.append(f"| {r['spatial']} | {r['n_channels']} | {r['sensor_noise']:.1f} | {r['recall']:.2f} | "
                     f"{r['precision']:.2f} | {r['clean_flagged']:.0%} | {'yes' if r['stopped'] else 'no'} | {missed} |")
    kinds = {}
    for r in rows:
        for c, k in r["planted"].items():
            n, f = kinds.get(k, (0, 0))
            kinds[k] = (n + 1, f + (c in r["flagged"]))
    lines += ["", "| kind | planted | found | recall |", "|---|---|---|---|"]
    lines += [f"| {k} | {n} | {f} | {f / n:.2f} |" for k, (n, f) in sorted(kinds.items())]
    reasons = {}
    for r in rows:
        for c, why in r["flagged"].items():
            if c not in r["planted"]:
                word = why.split(":")[0]
                reasons[word] = reasons.get(word, 0) + 1
    lines += ["", "False flags by rule: " + (", ".join(f"{w} {n}" for w, n in sorted(reasons.items())) or "none")]
    return "\n".join(lines)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--duration", type=float, default=None, help="oddball length, s (default: gen2 test size)")
    parser.add_argument("--repeats", type=int, default=1, help="recordings (seeds) per cell")
    parser.add_argument("--out", type=Path, default=None, help="also write the rows as JSON here")
    args = parser.parse_args(argv)
    rows, start = [], time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp:
        for spatial in MODELS:
            for n_channels in CAPS:
                for noise in NOISE:
                    for seed in range(args.repeats):
                        root = Path(tmp) / f"{spatial}-{n_channels}-{noise}-{seed}"
                        rows.append(one(root, n_channels, noise, spatial, seed, args.duration))
                        r = rows[-1]
                        print(f"{spatial} {n_channels} ch, noise {noise:.1f}: recall {r['recall']:.2f}, precision "
                              f"{r['precision']:.2f}, clean flagged {r['clean_flagged']:.0%} "
                              f"({time.perf_counter() - start:.0f} s)", file=sys.stderr, flush=True)
    print(table(rows))
    print(f"\n{len(rows)} recordings in {time.perf_counter() - start:.0f} s")
    if args.out:
        args.out.write_text(json.dumps(rows, indent=1), encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
