"""Command line: ``heschl demo``, ``heschl check``, ``heschl run``, ``heschl decide``.

Each command is a plain function ``run_<command>(...)`` returning data; :func:`main`
wraps them with argparse and returns the exit code, so tests call it directly.
"""
from __future__ import annotations

import argparse
import logging
import os
import signal
import sys
import threading
from pathlib import Path

from . import __version__
from .batch import Interrupted
from .errors import DefinitionError, HeschlError

__all__ = ["main", "run_demo", "run_check", "run_run", "run_decide"]

log = logging.getLogger("heschl")

EXIT_CODES = """exit codes:
  0  everything asked for was done
  1  one or more recordings failed, were unusable or could not be checked (the others were processed)
  2  the command line or a definition file (study, paradigm, feature set) is invalid"""


def run_check(study_path):
    """Validate the definitions and describe every recording; returns (study, rows)."""
    from .batch import check_study
    from .config import load_study

    study = load_study(study_path)
    return study, check_study(study)


def run_run(study_path, jobs=1, force=False, cluster=None):
    """Process a study; returns (study, summaries)."""
    from .batch import run_study
    from .config import load_study

    study = load_study(study_path)
    return study, run_study(study, jobs=jobs, force=force, cluster=cluster)


def run_decide(study_path, participant, paradigm, decision, reviewer, comment="", site=None):
    """Record a reviewer's decision on one processed recording; returns (study, row).

    The recording is named by participant id and paradigm (and site, when the id is not
    unique across sites). The next ``heschl run`` shows it on the pages and carries it into
    the group tables.
    """
    from .config import load_study
    from .errors import InputDataError, problem
    from .inputs import discover
    from .signoff import record_decision

    study = load_study(study_path)
    participant = participant if participant.startswith("sub-") else f"sub-{participant}"
    found = [r for r in discover(study) if r.participant_id == participant and r.paradigm == paradigm
             and (site is None or r.site == site)]
    if not found:
        raise InputDataError(problem(study_path, f"no recording of {participant} for paradigm {paradigm}"
                                     + (f" at site {site}" if site else ""),
                                     "check the participant id and paradigm (heschl check lists the recordings)"))
    if len(found) > 1:
        raise InputDataError(problem(study_path, f"{participant} {paradigm} is recorded at "
                                     f"{', '.join(r.site for r in found)}", "name the site with --site"))
    return study, record_decision(study, found[0], decision, reviewer, comment)


def run_demo(folder, size="demo", jobs=None, force=False):
    """Write the synthetic multi-site study to ``folder`` and process it; returns (study, summaries)."""
    from .synth import make_study

    folder = Path(folder)
    study_file = folder / "study.toml"
    if not study_file.exists():
        log.info("Writing the synthetic study (%s size) to %s", size, folder)
        study_file = make_study(folder, size=size)
    jobs = jobs or min(2, os.cpu_count() or 1)
    return run_run(study_file, jobs=jobs, force=force)


def _print_check(rows):
    failed = 0
    for r in rows:
        if r.get("conditions") is not None:
            counts = ", ".join(f"{k} {v}" for k, v in r["conditions"].items())
            missing = ", ".join(r["missing"]) or "none"
            print(f"{r['site']:8s} {r['participant_id']:10s} {r['paradigm']:11s} {r['channels']:3d} ch "
                  f"(missing: {missing}), {r['duration_s']:.1f} s at {r['sampling_rate_hz']:g} Hz; {counts}")
        for w in r.get("warnings") or ():
            print(f"  warning: {r['file']}: {w}")
        if r["error"]:
            failed += 1
            print(f"  problem: {r['error']}")
    warned = sum(bool(r.get("warnings")) for r in rows)
    found = sum(r["file"] is not None for r in rows)
    print(f"{found} recording(s) found, {failed} with problems" + (f", {warned} with warnings" if warned else "")
          + ".")
    return 1 if failed or not found else 0


def _print_run(study, summaries):
    done = sum(s["status"] == "done" for s in summaries)
    same = sum(s["status"] == "unchanged" for s in summaries)
    failed = [s for s in summaries if s["status"] == "failed"]
    unusable = [s for s in summaries if s["status"] != "failed" and s.get("unusable")]
    redrawn = sum(bool(s.get("page_redrawn")) for s in summaries)
    print(f"{len(summaries)} recording(s): {done} processed, {same} already up to date"
          + (f" ({redrawn} page(s) drawn again for a new or changed sign-off)" if redrawn else "")
          + f", {len(failed)} failed" + (f", {len(unusable)} unusable (each has its page)" if unusable else "") + ".")
    for s in failed:
        print(f"  failed: {s['error']}")
    for s in unusable:
        print(f"  unusable: {s['file']} ({s['participant_id']} {s['paradigm']} at {s['site']}): {s['unusable']}")
    print(f"Outputs: {os.path.relpath(study.output)}")
    print(f"Study page: {os.path.relpath(study.output / 'group' / 'review.html')}")
    print(f"Recording pages: {os.path.relpath(study.output)}/sub-*/<eeg or meg>/*_review.html")
    return 1 if failed or unusable or not summaries else 0


def _parser():
    parser = argparse.ArgumentParser(
        prog="heschl", description="Declarative multi-site processing of auditory EEG/MEG paradigms "
        "into quality-checked, model-ready features. Research software, not a medical device.",
        epilog=EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"heschl {__version__}")
    parser.add_argument("-v", "--verbose", action="count", default=0,
                        help="also print debugging detail (each stage's decisions are printed without it)")
    parser.add_argument("-q", "--quiet", action="store_true", help="only errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    demo = sub.add_parser("demo", help="generate the synthetic multi-site study and process it",
                          epilog=EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter)
    demo.add_argument("folder", nargs="?", default="heschl-demo", help="where to write it (default: heschl-demo)")
    demo.add_argument("--size", choices=("test", "demo"), default="demo", help="recording lengths (default: demo)")
    demo.add_argument("--jobs", type=int, default=None, help="worker processes (default: 2; -1 for all cores)")
    demo.add_argument("--force", action="store_true", help="reprocess recordings that are up to date")
    check = sub.add_parser("check", help="validate a study and describe its recordings without processing",
                           epilog=EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter)
    check.add_argument("study", help="the study .toml file")
    run = sub.add_parser("run", help="process every recording of a study",
                         epilog=EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter)
    run.add_argument("study", help="the study .toml file")
    run.add_argument("--jobs", type=int, default=1, help="worker processes (default: 1; -1 for all cores)")
    run.add_argument("--force", action="store_true", help="reprocess recordings that are up to date")
    run.add_argument("--cluster", metavar="ADDRESS", default=None,
                     help='run on Dask: a scheduler address (tcp://host:8786) or "local" for --jobs workers '
                     'on this machine; needs pip install "heschl[dask]" and paths every worker can see')
    decide = sub.add_parser("decide", help="record a reviewer's decision (include or exclude) on a recording",
                            epilog=EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter)
    decide.add_argument("study", help="the study .toml file")
    decide.add_argument("participant", help="participant id, e.g. sub-B03")
    decide.add_argument("paradigm", help="paradigm name, e.g. oddball")
    decide.add_argument("decision", choices=("include", "exclude"), help="what the recording is used for")
    decide.add_argument("--by", required=True, metavar="INITIALS", help="the reviewer's initials")
    decide.add_argument("--why", default="", metavar="TEXT", help="the reason (required to exclude)")
    decide.add_argument("--site", default=None, help="the site, when the participant id is not unique")
    return parser


def _logging(verbose, quiet):
    """Handlers for heschl's own loggers only; libraries keep their defaults."""
    level = logging.ERROR if quiet else (logging.INFO if verbose == 0 else logging.DEBUG)
    from .runlog import RecordingFilter

    handler = logging.StreamHandler()
    handler.setLevel(level)   # the logger itself may pass INFO on to a recording's log file
    handler.addFilter(RecordingFilter())
    handler.setFormatter(logging.Formatter("%(levelname)s %(recording)s%(message)s"))
    before = (list(log.handlers), log.level, log.propagate)
    log.handlers[:] = [handler]
    log.setLevel(level)
    log.propagate = False
    return before


def _restore_logging(before):
    """Put heschl's logger back as it was (main() may be called again, e.g. by tests)."""
    log.handlers[:], level, log.propagate = before
    log.setLevel(level)


def _stop_on_term():
    """SIGTERM ends a run as SIGINT does (workers ended, summary printed); returns the list
    the received signal number is put in."""
    received = []

    def handler(signum, frame):
        received.append(signum)
        raise KeyboardInterrupt

    if threading.current_thread() is threading.main_thread():
        received.append(None)   # placeholder for the handlers to restore
        received[0] = (signal.signal(signal.SIGTERM, handler), signal.signal(signal.SIGINT, handler))
    return received


def _signal_of(received):
    """The signal that stopped the run (SIGINT when none was recorded, e.g. a direct call)."""
    return received[-1] if len(received) > 1 else signal.SIGINT


def _restore_signals(received):
    if received:
        term, intr = received[0]
        signal.signal(signal.SIGTERM, term)
        signal.signal(signal.SIGINT, intr)


def main(argv=None):
    """Entry point; returns the exit code."""
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help()
        return 2
    before = _logging(args.verbose, args.quiet)
    received = _stop_on_term()
    try:
        if args.command == "check":
            _, rows = run_check(args.study)
            return _print_check(rows)
        if args.command == "decide":
            study, row = run_decide(args.study, args.participant, args.paradigm, args.decision, args.by,
                                    args.why, args.site)
            from .signoff import decisions_path

            print(f"{row['participant_id']} {row['paradigm']} at {row['site']}: {row['decision']} "
                  f"({row['reviewer']}, {row['decided_on']}) recorded in {os.path.relpath(decisions_path(study.output))}; "
                  "the next heschl run shows it on the pages and in the group tables.")
            return 0
        if args.command == "run":
            study, summaries = run_run(args.study, jobs=args.jobs, force=args.force, cluster=args.cluster)
        else:
            study, summaries = run_demo(args.folder, size=args.size, jobs=args.jobs, force=args.force)
        return _print_run(study, summaries)
    except Interrupted as exc:
        _print_run(exc.study, exc.summaries)
        signum = _signal_of(received)
        print(f"heschl: stopped by {signal.Signals(signum).name}; rerun the same command to finish "
              "(finished recordings are kept)", file=sys.stderr)
        return 128 + int(signum)
    except KeyboardInterrupt:
        signum = _signal_of(received)
        print(f"heschl: stopped by {signal.Signals(signum).name}", file=sys.stderr)
        return 128 + int(signum)
    except DefinitionError as exc:
        print(f"heschl: {exc}", file=sys.stderr)
        return 2
    except HeschlError as exc:
        print(f"heschl: {exc}", file=sys.stderr)
        return 1
    finally:
        _restore_signals(received)
        _restore_logging(before)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
