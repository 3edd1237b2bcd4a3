"""heschl against a hand-written mne + autoreject script and against the floor, on one
full-size synthetic participant; and how heschl scales.

Not a test: run it by hand, from the repository root, on a quiet machine,

    python benchmarks/versus.py [--rounds 2] [--minutes-scale 1] [--channels 64]
                                [--oddball-minutes 15] [--json out.json] [--folder KEEP_HERE]
    python benchmarks/versus.py --scaling [--rounds 2] [--minutes-scale 1] [--json out.json]
    python benchmarks/versus.py --study-speedup [--study-scale 0.3] [--study-subjects 7] [--json out.json]

(``--minutes-scale 0.05 --channels 32`` for a check that everything runs; the
hand-written script needs autoreject, from the test extra: ``pip install -e ".[test]"``.)

Comparison (the default):

(a) writes one participant with ``benchmarks/fullsize.py`` (oddball, click train, rest)
    into a temporary folder;
(b) measures the floor in every round: one process that reads the three files and
    band-passes each once, at the file's rate, as its paradigm says;
(c) alternates ``benchmarks/handwritten.py`` and ``heschl run --jobs 1``, each in a fresh
    process (round A: hand-written then heschl; round B: heschl then hand-written; and so
    on for ``--rounds``), heschl from an empty output folder every time, and reports the
    median times per paradigm and for the whole subject, the stage times (heschl's from
    the ``timings_s`` of each recording's provenance file, the script's from its own
    stopwatch) and peak memory;
(d) prints heschl / hand-written, heschl / floor and peak memory over the float64 size of
    the largest recording (all its channels x samples x 8 bytes at the file's rate);
(e) checks that the features agree within the tolerances of ``TOLERANCES`` (printed with
    their reasons); the exit code is 1 if any feature does not.

Peak memory is ``getrusage(RUSAGE_CHILDREN).ru_maxrss`` of a small wrapper process
around each measured command: the largest resident set of any one process it waited for
(the command or a worker of it), not a sum over processes running at once.

``--scaling``: heschl alone on the oddball at 5, 10 and 15 min (64 channels) and at 32,
64 and 128 channels (5 min), seconds and peak memory, as ratios to the smallest of each
series. ``--study-speedup``: a study of ``--study-subjects`` participants x 3 paradigms
(21 recordings by default) at ``--study-scale``, with ``--jobs 1`` and ``--jobs 2``.
"""
from __future__ import annotations

import argparse
import json
import math
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

import fullsize

HERE = Path(__file__).resolve().parent
PARADIGMS = fullsize.PARADIGMS

#: Runs one command, then prints its wall time, exit code and peak memory (KiB on
#: Linux, bytes on macOS) of the processes it waited for.
_WRAPPER = """
import json, resource, subprocess, sys, time
cmd, cwd, log = json.loads(sys.argv[1]), sys.argv[2], sys.argv[3]
with open(log, "w") as out:
    start = time.perf_counter()
    rc = subprocess.run(cmd, cwd=cwd, stdout=out, stderr=subprocess.STDOUT).returncode
    wall = time.perf_counter() - start
peak = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
print(json.dumps({"wall_s": wall, "rc": rc, "peak": peak}))
"""

#: The floor: read each file and band-pass it once, at the file's rate; stage times as JSON.
_FLOOR = """
import json, sys, time, tomllib
import mne
repository, out = sys.argv[1], sys.argv[2]
times = {}
for pair in sys.argv[3:]:
    paradigm, path = pair.split("=", 1)
    with open(f"{repository}/paradigms/{paradigm}.toml", "rb") as fh:
        low, high = tomllib.load(fh)["cleaning"]["pass_band"]
    start = time.perf_counter()
    raw = mne.io.read_raw_fif(path, preload=True, verbose="error")
    read = time.perf_counter()
    raw.filter(low, high, picks=["eeg", "eog"], verbose="error")
    times[paradigm] = {"read": read - start, "band-pass": time.perf_counter() - read}
    del raw
with open(out, "w") as fh:
    json.dump(times, fh)
"""


# ----------------------------------------------------------------------------- measuring
def measure(cmd, cwd, log):
    """Run ``cmd`` in a fresh wrapper process; wall seconds, exit code and peak MiB."""
    done = subprocess.run([sys.executable, "-c", _WRAPPER, json.dumps([str(c) for c in cmd]), str(cwd), str(log)],
                          capture_output=True, text=True, check=True)
    result = json.loads(done.stdout.strip().splitlines()[-1])
    unit = 1 if sys.platform == "darwin" else 1024
    return {"wall_s": result["wall_s"], "rc": result["rc"], "peak_mib": result["peak"] * unit / 2 ** 20}


def _require(result, what, log):
    """Stop with the tail of the log when a measured command failed."""
    if result["rc"] != 0:
        tail = "".join(Path(log).read_text(encoding="utf-8", errors="replace").splitlines(True)[-15:])
        raise SystemExit(f"versus: {what} exited with {result['rc']}; the end of {log}:\n{tail}")


def heschl_command(study, jobs=1):
    """``heschl run STUDY --jobs N`` (the console script beside this Python, else the module)."""
    script = shutil.which("heschl", path=str(Path(sys.executable).parent))
    head = [script] if script else [sys.executable, "-c", "import sys; from heschl.cli import main; sys.exit(main())"]
    return head + ["run", str(study), "--jobs", str(jobs)]


def check_study(study, logs):
    """``heschl check STUDY`` once, untimed: stop early when heschl refuses the study."""
    command = heschl_command(study)
    command[command.index("run"):] = ["check", str(study)]
    log = Path(logs) / "heschl-check.log"
    _require(measure(command, Path(study).parent, log), "heschl check", log)
    print(Path(log).read_text(encoding="utf-8").strip().splitlines()[-1])


def run_heschl(study, jobs, logs, label):
    """Run heschl on a study from an empty output folder; time, memory and stage times."""
    output = Path(study).parent / "derivatives" / "heschl"
    shutil.rmtree(output, ignore_errors=True)
    log = Path(logs) / f"{label}.log"
    result = measure(heschl_command(study, jobs), Path(study).parent, log)
    _require(result, f"heschl run ({label})", log)
    result["stages"] = heschl_stages(output)
    result["features_text"] = (output / "group" / "features.tsv").read_text(encoding="utf-8")
    return result


def heschl_stages(output):
    """Per recording (``sub-X paradigm``): the stage seconds heschl recorded in its provenance."""
    stages = {}
    for path in sorted(Path(output).glob("sub-*/*/*_provenance.json")):
        record = json.loads(path.read_text(encoding="utf-8"))
        key = f"{record['recording']['participant_id']} {record['recording']['paradigm']}"
        stages[key] = {k: float(v) for k, v in record.get("timings_s", {}).items()}
    return stages


def run_handwritten(folder, logs, label):
    """Run benchmarks/handwritten.py on the study folder; time, memory, stage times, features."""
    out = Path(logs) / f"{label}.json"
    log = Path(logs) / f"{label}.log"
    result = measure([sys.executable, HERE / "handwritten.py", folder, "--json", out, "--quiet"], HERE.parent, log)
    _require(result, f"handwritten.py ({label})", log)
    result["paradigms"] = json.loads(out.read_text(encoding="utf-8"))["paradigms"]
    return result


def run_floor(folder, files, logs):
    """Read + one band-pass of every file in one process; time, memory and stage times."""
    out, log = Path(logs) / "floor.json", Path(logs) / "floor.log"
    pairs = [f"{p}={Path(folder) / f}" for p, f in files.items()]
    result = measure([sys.executable, "-c", _FLOOR, HERE.parent, out] + pairs, HERE.parent, log)
    _require(result, "the floor", log)
    result["stages"] = json.loads(out.read_text(encoding="utf-8"))
    return result


def median(values):
    """Median of the finite values (NaN when there is none)."""
    values = [v for v in values if v is not None and math.isfinite(v)]
    return statistics.median(values) if values else float("nan")


def _ratio(a, b):
    return a / b if b and math.isfinite(b) and b > 0 else float("nan")


# ----------------------------------------------------------------------------- feature tolerances
#: Kind -> (absolute allowance, relative allowance of heschl's value, multiple of heschl's
#: se column, why). A feature agrees when |heschl - hand-written| <= the largest of the
#: three. Both pipelines clean differently by design (heschl: bad channels, ICA of the
#: blinks, muscle marks, rejection learnt on a 1 Hz detection copy; the script: autoreject
#: on the analysis data, no ocular step), so they keep different trials and the values are
#: two estimates of one quantity: they should differ by about one standard error, never
#: by much more.
TOLERANCES = {
    "mean-amplitude": (0.5, 0.0, 1.0, "0.5 uV or 1 SE (heschl's SME): different kept trials and ocular step"),
    "peak-amplitude": (0.5, 0.0, 1.0, "0.5 uV or 1 SE (bootstrap SD): as mean amplitude; one sample, noisier"),
    "peak-latency": (12.0, 0.0, 1.0, "12 ms (3 samples at 250 Hz) or 1 SE: heschl wants a local peak, the "
                     "script takes the window's minimum"),
    "fractional-area-latency": (8.0, 0.0, 1.0, "8 ms (2 samples) or 1 SE: same rule, different trials"),
    "itpc": (0.05, 0.0, 1.0, "0.05 or 1 SE: a few trials more or less move ITPC by far less; wavelets "
             "of the same length and normalisation"),
    "ppc": (0.05, 0.0, 1.0, "0.05 or 1 SE: as ITPC"),
    "evoked-power": (0.0, 0.10, 1.0, "10 % or 1 SE: power of the trial average; different trials"),
    "induced-power": (0.0, 0.10, 1.0, "10 % or 1 SE: mean single-trial power less the evoked"),
    "snr": (0.0, 0.20, 1.0, "20 % or 1 SE: one bin over six neighbours of a short average"),
    "band-power": (0.0, 0.10, 1.0, "10 % or 1 SE: same segments but for rejection and ICA"),
    "relative-band-power": (0.0, 0.10, 1.0, "10 % or 1 SE: a ratio of two band powers"),
    "band-ratio": (0.0, 0.10, 1.0, "10 % or 1 SE: eyes-closed over eyes-open alpha power"),
    "peak-frequency": (0.5, 0.0, 1.0, "0.5 Hz (one bin) or 1 SE: heschl removes the 1/f background "
                       "before picking the peak, the script does not"),
    "aperiodic-exponent": (0.1, 0.0, 1.0, "0.1 or 1 SE: heschl's line is Huber-weighted, the script's plain "
                           "least squares, same bins"),
    "aperiodic-offset": (0.1, 0.0, 1.0, "0.1 log10 unit or 1 SE: as the exponent"),
}
#: Kinds reported but not judged, and why.
NOT_JUDGED = {
    "rayleigh-p": "a p-value: a monotone function of itpc_40 and the trial count, judged there; small "
                  "changes of ITPC move it by orders of magnitude",
    "snr-p": "not computed by the script (an F-test p-value of snr_40, judged there)",
}


def compare_features(heschl_rows, script):
    """Every heschl feature row against the script's value of the same name.

    Parameters
    ----------
    heschl_rows : list of dict
        Rows of heschl's group/features.tsv for the participant (``paradigm``,
        ``feature``, ``kind``, ``unit``, ``value``, ``se``).
    script : dict
        ``{paradigm: {feature name: value}}`` from handwritten.py.

    Returns
    -------
    list of dict
        One per heschl row (and per script feature heschl lacks): the values, the
        difference, the allowance and a verdict ``agrees``, ``DIFFERS``, ``not judged`` or
        ``not computed``.
    """
    out = []
    for row in heschl_rows:
        mine = script.get(row["paradigm"], {}).get(row["feature"])
        entry = dict(row, script=mine, difference=None, allowed=None)
        if row["kind"] in NOT_JUDGED or mine is None:
            entry["verdict"] = "not judged" if mine is not None else "not computed"
            entry["why"] = NOT_JUDGED.get(row["kind"], "the script has no feature of this name")
        else:
            absolute, relative, n_se, why = TOLERANCES[row["kind"]]
            se = row["se"] if math.isfinite(row["se"]) else 0.0
            entry["allowed"] = max(absolute, relative * abs(row["value"]), n_se * se)
            entry["difference"] = mine - row["value"]
            ok = math.isfinite(entry["difference"]) and abs(entry["difference"]) <= entry["allowed"]
            entry["verdict"], entry["why"] = ("agrees" if ok else "DIFFERS"), why
        out.append(entry)
    known = {(r["paradigm"], r["feature"]) for r in heschl_rows}
    for paradigm, features in script.items():
        for name, value in features.items():
            if (paradigm, name) not in known:
                out.append({"paradigm": paradigm, "feature": name, "kind": "", "unit": "", "value": float("nan"),
                            "se": float("nan"), "script": value, "difference": None, "allowed": None,
                            "verdict": "no heschl row", "why": "heschl wrote no feature of this name"})
    return out


def heschl_features(output, participant):
    """The participant's rows of heschl's group/features.tsv as plain dicts."""
    import pandas as pd

    table = pd.read_csv(Path(output) / "group" / "features.tsv", sep="\t")
    table = table[table["participant_id"] == participant]
    return [{"paradigm": r.paradigm, "feature": r.feature, "kind": r.kind, "unit": r.unit,
             "value": float(r.value), "se": float(r.se), "n_trials": r.n_trials, "flags": r.flags}
            for r in table.itertuples()]


# ----------------------------------------------------------------------------- printing
def _show(value, digits=4):
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return "-"
    return f"{value:.{digits}g}"


def print_table(header, rows):
    """A plain fixed-width table."""
    widths = [max(len(str(x)) for x in column) for column in zip(header, *rows)]
    for line in [header, ["-" * w for w in widths]] + rows:
        print("  ".join(str(x).ljust(w) for x, w in zip(line, widths)))


def print_trials(output, script):
    """Kept trials per condition in heschl (its qc.json) and in the script."""
    print("\nKept trials of planned (heschl; script)")
    for paradigm in PARADIGMS:
        path = next(Path(output).glob(f"sub-F01/*/sub-F01_task-{paradigm}_qc.json"))
        qc = json.loads(path.read_text(encoding="utf-8"))
        mine = script[paradigm]
        print(f"  {paradigm:<11} " + ", ".join(
            f"{c} {t['kept']} of {t['planned']}; {mine['n_trials'].get(c)} of {mine['planned'].get(c)}"
            for c, t in qc["trials"].items()))


def print_tolerances():
    """The tolerances and why, as the comparison applies them."""
    print("\nTolerances: |heschl - script| <= max(absolute, relative x |heschl|, k x heschl's se)")
    rows = [[kind, _show(a), f"{r:.0%}" if r else "-", _show(k), why] for kind, (a, r, k, why) in TOLERANCES.items()]
    rows += [[kind, "-", "-", "-", "not judged: " + why] for kind, why in NOT_JUDGED.items()]
    print_table(["kind", "absolute", "relative", "k x se", "why"], rows)


def print_features(entries):
    """The feature comparison, one row per feature."""
    rows = [[e["paradigm"], e["feature"], e["unit"], _show(e["value"]), _show(e["se"], 2), _show(e["script"]),
             _show(e["difference"], 2), _show(e["allowed"], 2), e["verdict"]] for e in entries]
    print_table(["paradigm", "feature", "unit", "heschl", "se", "script", "difference", "allowed", "verdict"], rows)
    counts = {v: sum(e["verdict"] == v for e in entries) for v in dict.fromkeys(e["verdict"] for e in entries)}
    print("Features: " + ", ".join(f"{n} {v}" for v, n in counts.items()))


# ----------------------------------------------------------------------------- comparison mode
def comparison(args, folder, logs):
    """Modes (a)-(e): write, floor, alternate the two pipelines, ratios, features."""
    study = fullsize.write_study(folder, scale=args.minutes_scale, channels=args.channels,
                                 oddball_minutes=args.oddball_minutes)
    recordings = json.loads((folder / "truth.json").read_text(encoding="utf-8"))["recordings"]["sub-F01"]
    files = {p: recordings[p]["file"] for p in PARADIGMS}
    largest = max(recordings[p]["n_channels"] * recordings[p]["n_samples"] * 8 for p in PARADIGMS)
    print(f"Wrote {study} ({args.channels} EEG channels; "
          + ", ".join(f"{p} {recordings[p]['duration_s'] / 60:.1f} min" for p in PARADIGMS) + ")")
    check_study(study, logs)
    rounds = {"handwritten": [], "heschl": []}
    floors = []
    for number in range(args.rounds):
        # The floor in every round too: its reading time depends on the page cache as
        # much as the two pipelines' do, so it is measured beside them, not once.
        floors.append(run_floor(folder, files, logs))
        order = ("handwritten", "heschl") if number % 2 == 0 else ("heschl", "handwritten")
        for which in order:
            label = f"{which}-round{number + 1}"
            result = (run_handwritten(folder, logs, label) if which == "handwritten"
                      else run_heschl(study, 1, logs, label))
            rounds[which].append(result)
            print(f"round {number + 1} ({'AB'[number % 2]}): {which} {result['wall_s']:.1f} s, "
                  f"{result['peak_mib']:.0f} MiB")
    floor = _median_floor(floors)
    summary = summarise_times(floor, rounds, largest)
    print_times(summary, args.rounds)
    entries = compare_features(heschl_features(folder / "derivatives" / "heschl", "sub-F01"),
                               {p: r["features"] for p, r in rounds["handwritten"][-1]["paradigms"].items()})
    print_trials(folder / "derivatives" / "heschl", rounds["handwritten"][-1]["paradigms"])
    print_tolerances()
    print()
    print_features(entries)
    summary["features"] = entries
    summary["identical_across_rounds"] = {
        "heschl": len({r["features_text"] for r in rounds["heschl"]}) == 1,
        "handwritten": all(len({json.dumps(r["paradigms"][p]["features"], sort_keys=True)
                                for r in rounds["handwritten"]}) == 1 for p in PARADIGMS)}
    print("Feature values identical in every round: " + ", ".join(
        f"{k} {'yes' if v else 'NO'}" for k, v in summary["identical_across_rounds"].items()))
    return summary, any(e["verdict"] == "DIFFERS" for e in entries)


def _median_floor(floors):
    """The floor's medians over rounds: wall time, peak memory and each stage's seconds."""
    return {"wall_s": median([f["wall_s"] for f in floors]), "peak_mib": median([f["peak_mib"] for f in floors]),
            "stages": {p: {k: median([f["stages"][p][k] for f in floors]) for k in floors[0]["stages"][p]}
                       for p in floors[0]["stages"]}}


def _heschl_paradigm_seconds(result):
    """Seconds of heschl's stages per paradigm of sub-F01."""
    return {p: sum(result["stages"].get(f"sub-F01 {p}", {}).values()) for p in PARADIGMS}


def summarise_times(floor, rounds, largest):
    """Medians over rounds of the times per paradigm, the stages and peak memory."""
    hand, hes = rounds["handwritten"], rounds["heschl"]
    per = {}
    for p in PARADIGMS:
        per[p] = {"handwritten_s": median([sum(r["paradigms"][p]["times_s"].values()) for r in hand]),
                  "heschl_s": median([_heschl_paradigm_seconds(r)[p] for r in hes]),
                  "floor_s": sum(floor["stages"][p].values())}
    per["whole subject"] = {"handwritten_s": median([r["wall_s"] for r in hand]),
                            "heschl_s": median([r["wall_s"] for r in hes]), "floor_s": floor["wall_s"]}
    stages = {"heschl": {p: _median_stages([r["stages"].get(f"sub-F01 {p}", {}) for r in hes]) for p in PARADIGMS},
              "handwritten": {p: _median_stages([r["paradigms"][p]["times_s"] for r in hand]) for p in PARADIGMS},
              "floor": floor["stages"]}
    memory = {"handwritten_mib": median([r["peak_mib"] for r in hand]),
              "heschl_mib": median([r["peak_mib"] for r in hes]), "floor_mib": floor["peak_mib"],
              "largest_recording_float64_mib": largest / 2 ** 20}
    return {"times": per, "stages": stages, "memory": memory,
            "rounds": {"handwritten": [_plain_round(r) for r in hand], "heschl": [_plain_round(r) for r in hes]}}


def _median_stages(records):
    names = list(dict.fromkeys(k for r in records for k in r))
    return {k: median([r.get(k) for r in records]) for k in names}


def _plain_round(result):
    return {k: v for k, v in result.items() if k in ("wall_s", "rc", "peak_mib", "stages")}


def print_times(summary, n_rounds):
    """Times, ratios, stages and memory of the comparison."""
    print(f"\nSeconds (median of {n_rounds} round(s); per paradigm: the sum of the stages, heschl's from its "
          "provenance; whole subject: the process's wall time, start-up and writing included)")
    rows = []
    for name, t in summary["times"].items():
        rows.append([name, _show(t["handwritten_s"]), _show(t["heschl_s"]), _show(t["floor_s"]),
                     _show(_ratio(t["heschl_s"], t["handwritten_s"]), 3),
                     _show(_ratio(t["heschl_s"], t["floor_s"]), 3)])
    print_table(["", "handwritten", "heschl", "floor", "heschl/handwritten", "heschl/floor"], rows)
    print("(floor: read the file and one band-pass at the file's rate; heschl and the script resample to "
          "250 Hz first)")
    for who in ("heschl", "handwritten", "floor"):
        print(f"\nStages of {who} (s, median)")
        for p, stages in summary["stages"][who].items():
            print(f"  {p:<11} " + ", ".join(f"{k} {_show(v, 3)}" for k, v in stages.items()))
        if who == "heschl":
            whole = summary["times"]["whole subject"]["heschl_s"]
            inside = sum(sum(s.values()) for s in summary["stages"]["heschl"].values())
            print(f"  outside the stages (start-up, writing files and pages, group tables): {_show(whole - inside, 3)}")
    m = summary["memory"]
    print(f"\nPeak memory (largest single process, MiB): handwritten {m['handwritten_mib']:.0f}, heschl "
          f"{m['heschl_mib']:.0f}, floor {m['floor_mib']:.0f}; largest recording as float64 "
          f"{m['largest_recording_float64_mib']:.0f} MiB")
    size = m["largest_recording_float64_mib"]
    print(f"Peak memory / largest recording: handwritten {m['handwritten_mib'] / size:.2f}, "
          f"heschl {m['heschl_mib'] / size:.2f}, floor {m['floor_mib'] / size:.2f}")


# ----------------------------------------------------------------------------- scaling mode
#: (oddball minutes, channels) of the two series; (5, 64) belongs to both.
LENGTHS = ((5, 64), (10, 64), (15, 64))
CHANNELS = ((5, 32), (5, 64), (5, 128))


def scaling(args, folder, logs):
    """heschl alone on oddballs of three lengths and three channel counts."""
    cells = {}
    for minutes, channels in dict.fromkeys(LENGTHS + CHANNELS):
        root = folder / f"oddball-{minutes}min-{channels}ch"
        study = fullsize.write_study(root, scale=args.minutes_scale, channels=channels, oddball_minutes=minutes,
                                     paradigms=("oddball",))
        truth = json.loads((root / "truth.json").read_text(encoding="utf-8"))["recordings"]["sub-F01"]["oddball"]
        results = [run_heschl(study, 1, logs, f"scaling-{minutes}min-{channels}ch-round{k + 1}")
                   for k in range(args.rounds)]
        cells[(minutes, channels)] = {
            "minutes": truth["duration_s"] / 60, "channels": channels,
            "wall_s": median([r["wall_s"] for r in results]),
            "stages_s": median([sum(r["stages"].get("sub-F01 oddball", {}).values()) for r in results]),
            "peak_mib": median([r["peak_mib"] for r in results]),
            "float64_mib": truth["n_channels"] * truth["n_samples"] * 8 / 2 ** 20}
        print(f"oddball {cells[(minutes, channels)]['minutes']:.2f} min, {channels} ch: "
              f"{cells[(minutes, channels)]['wall_s']:.1f} s, {cells[(minutes, channels)]['peak_mib']:.0f} MiB")
    for title, series in (("length (64 channels)", LENGTHS), ("channels (5 min before --minutes-scale)", CHANNELS)):
        base = cells[series[0]]
        print(f"\nheschl on the oddball by {title}; ratios to the first row")
        rows = [[f"{c['minutes']:.2f}", c["channels"], _show(c["wall_s"]), _show(c["stages_s"]), _show(c["peak_mib"]),
                 _show(_ratio(c["float64_mib"], base["float64_mib"]), 3), _show(_ratio(c["wall_s"], base["wall_s"]), 3),
                 _show(_ratio(c["stages_s"], base["stages_s"]), 3), _show(_ratio(c["peak_mib"], base["peak_mib"]), 3)]
                for c in (cells[k] for k in series)]
        print_table(["minutes", "channels", "wall s", "stages s", "peak MiB", "data x", "wall x", "stages x",
                     "memory x"], rows)
    return {f"{m}min-{c}ch": v for (m, c), v in cells.items()}


# ----------------------------------------------------------------------------- study speed-up mode
def study_speedup(args, folder, logs):
    """A study of several participants x 3 paradigms with one and with two workers."""
    root = folder / "study"
    study = fullsize.write_study(root, subjects=args.study_subjects, scale=args.study_scale, channels=args.channels,
                                 oddball_minutes=args.oddball_minutes)
    n = args.study_subjects * len(PARADIGMS)
    print(f"Wrote a study of {n} recordings ({args.study_subjects} participants x {len(PARADIGMS)} paradigms, "
          f"scale {args.study_scale:g}, {args.channels} channels)")
    times = {1: [], 2: []}
    for number in range(args.rounds):
        for jobs in ((1, 2) if number % 2 == 0 else (2, 1)):
            result = run_heschl(study, jobs, logs, f"study-jobs{jobs}-round{number + 1}")
            times[jobs].append(result)
            print(f"round {number + 1}: --jobs {jobs} {result['wall_s']:.1f} s, {result['peak_mib']:.0f} MiB "
                  "(largest single process)")
    serial, parallel = median([r["wall_s"] for r in times[1]]), median([r["wall_s"] for r in times[2]])
    print(f"\nStudy of {n} recordings: --jobs 1 {serial:.1f} s, --jobs 2 {parallel:.1f} s; "
          f"speed-up {_ratio(serial, parallel):.2f} x")
    return {"recordings": n, "scale": args.study_scale, "serial_s": serial, "parallel_s": parallel,
            "speedup": _ratio(serial, parallel),
            "peak_mib": {str(j): median([r["peak_mib"] for r in times[j]]) for j in times}}


# ----------------------------------------------------------------------------- command line
def _parser():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=2, help="measured runs of each command (default 2)")
    parser.add_argument("--minutes-scale", type=float, default=1.0, help="factor on every duration (default 1)")
    parser.add_argument("--channels", type=int, choices=(32, 64, 128), default=64)
    parser.add_argument("--oddball-minutes", type=int, choices=(5, 10, 15), default=15)
    parser.add_argument("--scaling", action="store_true", help="heschl alone on oddballs of 3 lengths and 3 caps")
    parser.add_argument("--study-speedup", action="store_true", help="a multi-recording study, --jobs 1 vs 2")
    parser.add_argument("--study-subjects", type=int, default=7, help="participants of --study-speedup (default 7)")
    parser.add_argument("--study-scale", type=float, default=0.3, help="duration factor of --study-speedup (0.3)")
    parser.add_argument("--json", default=None, help="write a JSON summary here")
    parser.add_argument("--folder", default=None, help="work here and keep the files (default: a temporary folder)")
    return parser


def main(argv=None):
    """Run the chosen modes (the comparison when neither --scaling nor --study-speedup is given)."""
    args = _parser().parse_args(argv)
    if args.rounds < 1 or not args.minutes_scale > 0 or not args.study_scale > 0:
        raise SystemExit("versus: --rounds must be at least 1 and the scales positive.")
    with tempfile.TemporaryDirectory(prefix="heschl-versus-") as scratch:
        folder = Path(args.folder).resolve() if args.folder else Path(scratch)
        logs = folder / "logs"
        logs.mkdir(parents=True, exist_ok=True)
        summary, differs = {"arguments": vars(args)}, False
        if args.scaling:
            summary["scaling"] = scaling(args, folder, logs)
        if args.study_speedup:
            summary["study_speedup"] = study_speedup(args, folder, logs)
        if not (args.scaling or args.study_speedup):
            summary["comparison"], differs = comparison(args, folder, logs)
        if args.json:
            Path(args.json).write_text(json.dumps(summary, indent=1, default=str) + "\n", encoding="utf-8")
    return 1 if differs else 0


if __name__ == "__main__":
    sys.exit(main())
