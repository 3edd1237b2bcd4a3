"""Speed and memory of heschl on the synthetic study, reported as ratios from one run.

Not a test: run it by hand, from the repository root,

    python benchmarks/run.py --size test

It writes the synthetic study of the chosen size to a temporary folder and measures, in
one run on this machine:

- one recording per kind (an EEG oddball of 64 channels, the MEG oddball of 138 sensors):
  wall time per minute of recording and peak memory over the size of its input file,
  each in its own process so that peak memory is that recording's alone;
- the whole study with 1 and with 2 worker processes: the speed-up (serial time over
  parallel time) and how long resuming an unchanged study takes relative to the first run.

Ratios, not absolute times, are what carry over between machines.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
from pathlib import Path

_ONE = """
import json, resource, sys, time
from heschl.config import load_study
from heschl.inputs import discover
from heschl.pipeline import process_recording
study = load_study(sys.argv[1])
r = next(r for r in discover(study) if r.site == sys.argv[2] and r.paradigm == "oddball")
t = time.perf_counter()
result = process_recording(study, r)
wall = time.perf_counter() - t
print(json.dumps({"wall_s": wall, "duration_s": result["qc"]["duration_s"],
                  "input_bytes": sum(p.stat().st_size for p in [r.path]),
                  "peak_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss}))
"""


def one_recording(study_file, site):
    done = subprocess.run([sys.executable, "-c", _ONE, str(study_file), site], capture_output=True, text=True,
                          check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def whole_study(study_file, jobs, force):
    code = ("import sys, time; from heschl.config import load_study; from heschl.batch import run_study; "
            "s = load_study(sys.argv[1]); t = time.perf_counter(); "
            f"run_study(s, jobs={jobs}, force={force}); print(time.perf_counter() - t)")
    done = subprocess.run([sys.executable, "-c", code, str(study_file)], capture_output=True, text=True, check=True)
    return float(done.stdout.strip().splitlines()[-1])


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size", default="test", choices=("test", "demo", "bench"))
    args = parser.parse_args(argv)
    from heschl.synth import make_study

    with tempfile.TemporaryDirectory() as folder:
        study_file = make_study(Path(folder), size=args.size)
        rows = {}
        for site, label in (("cedar", "EEG oddball, 64 ch"), ("dogwood", "MEG oddball, 138 sensors")):
            m = one_recording(study_file, site)
            rows[label] = m
            print(f"{label}: {m['wall_s'] / (m['duration_s'] / 60):.1f} s per recorded minute; "
                  f"peak memory {m['peak_kib'] * 1024 / m['input_bytes']:.1f} x the input file "
                  f"({m['peak_kib'] / 1024:.0f} MiB for {m['input_bytes'] / 2**20:.0f} MiB)")
        serial = whole_study(study_file, 1, True)
        parallel = whole_study(study_file, 2, True)
        resumed = whole_study(study_file, 2, False)
        print(f"whole study ({args.size}): 1 worker {serial:.0f} s, 2 workers {parallel:.0f} s; "
              f"speed-up {serial / parallel:.2f} x; resuming an unchanged study takes "
              f"{resumed / parallel:.3f} of a full run")
        rows["study"] = {"serial_s": serial, "parallel_s": parallel, "resumed_s": resumed}
        print(json.dumps(rows, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
