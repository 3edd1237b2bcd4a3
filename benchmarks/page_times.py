"""Time drawing every recording page of a processed study from its written results.

Run from the repository root after ``heschl run``: ``python benchmarks/page_times.py
path/to/study.toml``. Prints seconds per page (median and slowest, EEG and MEG apart).
"""
from __future__ import annotations

import statistics
import sys
import time


def main(study_path):
    from heschl.batch import _page
    from heschl.config import load_study
    from heschl.inputs import discover
    from heschl.outputs import read_recording

    study = load_study(study_path)
    times = {}
    for recording in discover(study):
        try:
            recorded = read_recording(study.output, recording)
        except FileNotFoundError:
            continue
        t0 = time.perf_counter()
        _page(recording, recorded, None)
        times.setdefault(recording.datatype, []).append(time.perf_counter() - t0)
    for kind, values in times.items():
        print(f"{kind}: {len(values)} pages, median {statistics.median(values):.2f} s, slowest {max(values):.2f} s")


if __name__ == "__main__":
    main(sys.argv[1])
