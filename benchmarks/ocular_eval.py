"""Ocular correction without an EOG channel, method x generator (the evaluation table).

Run from the repository root: ``python benchmarks/ocular_eval.py [out.json [gen2,synth]]``
(about 25 minutes on 2 cores).

Every oddball EEG recording of both generators is processed by heschl's own stages
(harmonise, clean, segment and reject, features) once per ocular method, with the EOG
channels, where a site recorded them, left out of the ocular step (the question is what to
do without one); at sites with EOG channels, the corrections are also run with them
("regression+eog": Gratton-style regression on the EOG; "ica+eog": components chosen by
correlation with the EOG). Per recording and method it measures:

- blink residual at the frontal pole: the slope of the cleaned frontal-pole mean (virtual vertical EOG, see
  heschl.eyecomponents.virtual_eog) on the generator's true blink time course, over the
  samples of kept trials, as a share of the same slope in the uncorrected recording over
  all its samples (1 = blinks untouched, 0 = removed); both high-passed at 1 Hz. "n/a" when
  no kept trial holds a blink; the same at the mean of the mismatch region (Fz, FC1, FC2,
  FCz, Cz), where the features are measured;
- kept trials holding a true blink peak, and kept trials in all;
- the mismatch mean amplitude (oddball-core, fronto-central region, 0.10-0.25 s) minus
  its truth, in units of the row's SE (bootstrapped standardized measurement error), and
  the change against method "none" in the same units;
- ICA components removed and the seconds of the ocular step (fit and apply).

gen2 (tests/gen2) makes blinks (gamma pulses) and horizontal eye movements; heschl.synth
makes blinks only (two-sided Gaussian bumps) from its own dipoles. The property limits of
heschl.eyecomponents were chosen on gen2; heschl.synth is the measurement.
"""
from __future__ import annotations

import dataclasses
import json
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

METHODS = ("none", "regression", "ica")
#: Suffix of a method run with the site's EOG channels kept (where it recorded them).
WITH_EOG = "+eog"
WINDOW = (0.10, 0.25)   # s, the oddball-core mismatch window
REGION = ("Fz", "FC1", "FC2", "FCz", "Cz")   # its fronto-central region
#: Recording length, s: long enough that the mismatch's SE is a fraction of its size.
ODDBALL_S = 600.0


def _gen2_truth(rec, n, sfreq):
    from gen2.artefacts import blink_course

    course = blink_course(rec["artefacts"]["blinks"], n, sfreq)
    r = rec["responses"]
    grid = np.linspace(*WINDOW, 1501)
    mismatch = float(np.mean(r["mismatch_amplitude_uv"] * np.exp(-0.5 * ((grid - r["mismatch_latency_s"])
                                                                           / r["mismatch_sd_s"]) ** 2)))
    peaks = [b["peak_s"] for b in rec["artefacts"]["blinks"]]
    return course, mismatch, peaks


def _synth_truth(rec, n, sfreq):
    from heschl.synth.artefacts import blink_course

    return (blink_course(rec["blinks_s"], n, sfreq), rec["expected"]["mismatch_mean_amplitude_uv"],
            list(rec["blinks_s"]))


def _truth_of(truth, path, generator):
    if generator == "gen2":
        return next(v for k, v in truth["recordings"].items() if Path(k).name == Path(path).name)
    return next(r for r in truth["recordings"] if any(Path(f).name == Path(path).name for f in r["files"]))


def _high(x, sfreq):
    import mne

    return mne.filter.filter_data(np.atleast_2d(x).astype(float), sfreq, 1.0, None, verbose="error")


def _slope(y, b):
    d = float(b @ b)
    return float(y @ b / d) if d > 0 else float("nan")


def evaluate(study_path, generator, methods=METHODS):
    """Rows of the evaluation for every oddball EEG recording of a study."""
    import mne

    from heschl.clean import clean
    from heschl.config.study import load_study
    from heschl.eyecomponents import channel_groups
    from heschl.features import Source, applicable, compute_features
    from heschl.harmonise import harmonise, read_raw
    from heschl.inputs import analysis_of, discover, display_path
    from heschl.pipeline import _segment_and_reject

    study = load_study(study_path)
    truth = json.loads((Path(study_path).parent / "truth.json").read_text())
    rows = []
    for rec in discover(study):
        if rec.paradigm != "oddball" or rec.datatype != "eeg":
            continue
        analysis = analysis_of(study, rec)
        site = study.sites[rec.site]
        raw0, markers, h = harmonise(read_raw(rec.path), site, analysis.paradigm, study.common_channels,
                                     display_path(rec.path))
        with_eog = raw0.copy()
        if h["eog_channels"]:
            raw0.drop_channels(h["eog_channels"])
        analysis, _ = applicable(analysis, h["channels"], "eval", set(h["channel_types"].values()))
        sfreq = raw0.info["sfreq"]
        t_rec = _truth_of(truth, rec.path, generator)
        course, mismatch_truth, peaks = (_gen2_truth if generator == "gen2" else _synth_truth)(
            t_rec, raw0.n_times, sfreq)
        course = _high(course, sfreq)[0]
        reference = None
        variants = list(methods) + ([f"{m}{WITH_EOG}" for m in methods if m != "none"] if h["eog_channels"] else [])
        for method in variants:
            cleaning_def = dataclasses.replace(analysis.paradigm.cleaning, ocular=method.removesuffix(WITH_EOG))
            paradigm = dataclasses.replace(analysis.paradigm, cleaning=cleaning_def)
            raw = (with_eog if method.endswith(WITH_EOG) else raw0).copy()
            stamps = {}
            cleaning = clean(raw, paradigm, site.bad_channels.get(rec.participant_id, ()), "eval",
                             restored=h["restored_reference"], line_frequency=site.line_frequency,
                             watch=lambda stage, r, oc: stamps.__setitem__(stage, time.perf_counter()))
            seconds = stamps["after-ocular"] - stamps["before-ocular"]
            trials, times, entries, ch_names, rejection, counts = _segment_and_reject(
                raw, markers, paradigm, cleaning)
            source = Source(trials, times, ch_names, sfreq, paradigm,
                            ch_types=[h["channel_types"][c] for c in ch_names])
            feats = [r for fs in analysis.feature_sets
                     for r in compute_features(fs, source, paradigm.rejection.min_trials)]
            row = next(r for r in feats if r["feature"] == "mismatch_mean_amplitude" and not r.get("channel"))
            eeg = [raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=True, eog=False)]
            x = raw.get_data(picks=eeg)
            pole = channel_groups(eeg)["pole"]
            y = _high(x[pole].mean(axis=0) - x.mean(axis=0), sfreq)[0] * 1e6
            region = [eeg.index(c) for c in REGION if c in eeg]
            z = _high(x[region].mean(axis=0), sfreq)[0] * 1e6
            kept = [e for e in entries if e["kept"]]
            mask = np.zeros(raw.n_times, dtype=bool)
            w0, w1 = paradigm.epochs.window
            for e in kept:
                mask[max(0, int((e["onset_s"] + w0) * sfreq)):int((e["onset_s"] + w1) * sfreq) + 1] = True
            with_blink = sum(any(e["onset_s"] + w0 <= p <= e["onset_s"] + w1 for p in peaks) for e in kept)
            if method == "none":
                reference = _slope(y, course), _slope(z, course)
            residual = _slope(y[mask], course[mask]) / reference[0] if with_blink else float("nan")
            residual_region = _slope(z[mask], course[mask]) / reference[1] if with_blink else float("nan")
            ocular = cleaning["ocular"]
            removed = [dict(component=e["component"], kind=e["kind"]) for e in ((ocular.get("ica") or {})
                                                                                 .get("excluded") or [])]
            se = row["se"]
            rows.append({"generator": generator, "recording": Path(rec.path).name, "method": method,
                         "blink_residual": residual, "blink_residual_region": residual_region,
                         "kept_trials": len(kept), "kept_with_blink": with_blink,
                         "mismatch_uv": row["value"], "mismatch_truth_uv": mismatch_truth, "se_uv": se,
                         "bias_se": (row["value"] - mismatch_truth) / se, "components_removed": len(removed),
                         "removed": removed, "seconds": seconds})
            print(f"{generator} {rows[-1]['recording']:34s} {method:10s} residual {residual:5.2f} / {residual_region:5.2f} "
                  f"kept {len(kept):4d} (blink {with_blink:3d}) mismatch {row['value']:+.2f} truth "
                  f"{mismatch_truth:+.2f} SE {se:.2f} bias {rows[-1]['bias_se']:+.2f} removed {len(removed)} "
                  f"{seconds:.1f} s", flush=True)
    for r in rows:
        base = next(b for b in rows if b["recording"] == r["recording"] and b["method"] == "none")
        r["change_se"] = (r["mismatch_uv"] - base["mismatch_uv"]) / r["se_uv"]
    return rows


def summary(rows):
    """Method x generator: medians and means over recordings."""
    out = []
    for gen in dict.fromkeys(r["generator"] for r in rows):
        for method in dict.fromkeys(r["method"] for r in rows):
            sel = [r for r in rows if r["generator"] == gen and r["method"] == method]
            res = [r["blink_residual"] for r in sel if np.isfinite(r["blink_residual"])]
            reg = [r["blink_residual_region"] for r in sel if np.isfinite(r["blink_residual_region"])]
            out.append({"generator": gen, "method": method, "recordings": len(sel),
                        "blink_residual_median": float(np.median(res)) if res else None,
                        "blink_residual_region_median": float(np.median(reg)) if reg else None,
                        "kept_with_blink": int(sum(r["kept_with_blink"] for r in sel)),
                        "kept_trials": int(sum(r["kept_trials"] for r in sel)),
                        "bias_se_mean": float(np.mean([r["bias_se"] for r in sel])),
                        "bias_se_max_abs": float(np.max(np.abs([r["bias_se"] for r in sel]))),
                        "change_se_mean": float(np.mean([r["change_se"] for r in sel])),
                        "change_se_max_abs": float(np.max(np.abs([r["change_se"] for r in sel]))),
                        "components_removed_mean": float(np.mean([r["components_removed"] for r in sel])),
                        "seconds_median": float(np.median([r["seconds"] for r in sel]))})
    return out


def main(argv):
    import gen2

    from heschl.synth.study import make_study

    which = argv[2].split(",") if len(argv) > 2 else ("gen2", "synth")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        base = Path(tmp)
        for n_channels, noise in ((32, 0.1), (64, 0.15), (128, 0.2)) if "gen2" in which else ():
            study = gen2.make_study(base / f"gen2-{n_channels}", n_channels=n_channels, sensor_noise=noise,
                                    subjects=2, paradigms=("oddball",), seed=5, duration_s=ODDBALL_S)
            rows += evaluate(study, "gen2")
        if "synth" in which:
            make_study(base / "synth", size="bench")   # 900 s oddballs
            rows += evaluate(base / "synth" / "study.toml", "synth")
    table = summary(rows)
    for t in table:
        print(json.dumps(t))
    if len(argv) > 1:
        Path(argv[1]).write_text(json.dumps({"rows": rows, "summary": table}, indent=1))


if __name__ == "__main__":
    main(sys.argv)
