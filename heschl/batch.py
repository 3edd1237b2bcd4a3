"""Run a whole study: discover recordings, process each as an independent task (serially,
in local worker processes, or on a Dask cluster), skip recordings whose outputs are up to
date, then write the study tables and page. One failing recording never stops the others.

Every task is pure (file bytes and definitions in, files out) and writes its outputs
atomically, with provenance last, so any scheduler can run it, a crashed run resumes
where it stopped, and a task run twice writes the same files.
"""
from __future__ import annotations

import json
import logging
import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from multiprocessing import get_context
from pathlib import Path

from .errors import HeschlError

__all__ = ["run_study", "check_study", "process_and_write", "up_to_date"]

log = logging.getLogger(__name__)


def _limit_threads():
    """Worker set-up: one BLAS thread (parallelism is over recordings), and an end when the
    parent process is gone (a killed ``heschl run`` must not leave workers writing)."""
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[var] = "1"
    from threadpoolctl import threadpool_limits

    threadpool_limits(1)
    _watch_parent()


#: Seconds between a worker's looks at its parent process.
PARENT_POLL_S = 0.5


_WATCHING = []


def _watch_parent():
    """Exit this process soon after its parent dies (checked from a daemon thread, once)."""
    import threading
    import time

    if _WATCHING:
        return
    parent = os.getppid()
    _WATCHING.append(parent)

    def watch():
        while True:
            time.sleep(PARENT_POLL_S)
            if os.getppid() != parent:      # re-parented: the run that started us is gone
                os._exit(1)

    threading.Thread(target=watch, name="heschl-parent-watch", daemon=True).start()


def up_to_date(study, recording, hashes):
    """True when every output exists and provenance names the same input key.

    ``hashes`` are the recording's current input hashes (:func:`heschl.inputs.input_hashes`).
    """
    from .inputs import definitions_of, input_key
    from .outputs import recording_paths

    paths = recording_paths(study.output, recording)
    if not all(p.exists() for p in paths.values()):
        return False
    try:
        old = json.loads(paths["provenance"].read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    folder = paths["provenance"].parent
    if not all((folder / name).exists() for name in old.get("arrays", [])):
        return False
    return old.get("key") == input_key(hashes, definitions_of(study, recording))


def process_and_write(study, recording, force=False, decision=None):
    """One task: process a recording and write its outputs; returns a small summary.

    ``decision`` is the recording's row of ``group/decisions.tsv`` (or None). A recording
    whose outputs are up to date is not processed again, but its page is drawn again
    from its files when the sign-off it shows is no longer the one on record.

    Never raises for a problem with the recording: the error becomes part of the summary.
    """
    from threadpoolctl import threadpool_limits

    from .runlog import recording_context, recording_log

    summary = {"site": recording.site, "participant_id": recording.participant_id,
               "paradigm": recording.paradigm, "group": recording.group, "status": "done", "error": None}
    with recording_log(recording.name) as captured, recording_context(recording.name):
        try:
            with threadpool_limits(1):
                # One BLAS thread in every mode (serial, pool, Dask): the same sums in the same
                # order give the same digits whatever --jobs is.
                _process_and_write(study, recording, force, decision, summary)
        except HeschlError as exc:
            summary.update(status="failed", error=str(exc))
        except Exception as exc:  # one recording never stops the study; the reason is kept
            log.debug("unexpected failure", exc_info=True)
            summary.update(status="failed", error=f"{recording.path.name}: {exc.__class__.__name__}: {exc}")
        if summary["status"] == "failed":
            log.error("failed: %s", summary["error"])
    if summary["status"] != "unchanged":
        summary["log"] = _write_log(study, recording, captured.lines)
    return summary


def recording_log_path(output, recording):
    """Where a recording's log file goes: ``logs/<participant>_task-<paradigm>.log``."""
    return Path(output) / "logs" / f"{recording.stem}.log"


def _write_log(study, recording, lines):
    """Write the recording's log lines (kept after a failure); returns the path relative to
    the output folder, or None when the output folder cannot be written (the console and
    the summary still carry the reason)."""
    path = recording_log_path(study.output, recording)
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
        os.replace(tmp, path)
    except OSError:
        try:
            tmp.unlink(missing_ok=True)
        except OSError:
            pass
        return None
    return path.relative_to(study.output).as_posix()


def _process_and_write(study, recording, force, decision, summary):
    """The work of `process_and_write`; raises for a problem with the recording."""
    from .inputs import display_path, input_hashes
    from .outputs import write_recording
    from .pipeline import process_recording
    from .signoff import signoff_for

    hashes = input_hashes(recording)  # read once: for the resume check and for provenance
    if not force and up_to_date(study, recording, hashes):
        summary["status"] = "unchanged"
        summary["page_redrawn"] = _refresh_page(study, recording, decision)
        summary["unusable"] = _stored_unusable(study, recording)
        summary["file"] = display_path(recording.path)
        return summary
    result = process_recording(study, recording, hashes)
    signoff = signoff_for(study, recording, decision, result["provenance"]["key"])
    write_recording(study.output, recording, result, lambda recorded: _page(recording, recorded, signoff))
    summary["verdict"] = result["qc"]["verdict"]
    if result["qc"].get("unusable"):
        summary["unusable"] = result["qc"]["unusable"]["reason"]
        summary["file"] = display_path(recording.path)
    return summary


def _stored_unusable(study, recording):
    """The reason a recording processed before was unusable (from its qc.json), or None."""
    from .outputs import recording_paths

    try:
        qc = json.loads(recording_paths(study.output, recording)["qc"].read_text(encoding="utf-8"))
    except (OSError, ValueError, KeyError):
        return None
    return (qc.get("unusable") or {}).get("reason")


def _page(recording, recorded, signoff):
    """The recording's page from its recorded results and its sign-off."""
    from .pages import render_recording

    return render_recording(recording, recorded["qc"], recorded["rows"], recorded["provenance"],
                            recorded["evidence"], signoff)


def _refresh_page(study, recording, decision):
    """Draw an up-to-date recording's page again from its files when its sign-off changed.

    Returns True when the page was drawn again.
    """
    from .outputs import read_recording, recording_paths, write_atomic
    from .pages import shown_signoff
    from .signoff import signoff_fingerprint, signoff_for

    paths = recording_paths(study.output, recording)
    recorded = read_recording(study.output, recording)
    signoff = signoff_for(study, recording, decision, recorded["provenance"]["key"])
    if shown_signoff(paths["page"]) == signoff_fingerprint(signoff):
        return False
    write_atomic(paths["page"], _page(recording, recorded, signoff))
    log.info("%s: page drawn again for its sign-off (%s)", recording.stem, signoff["state"])
    return True


def run_study(study, *, jobs=1, force=False, cluster=None):
    """Process every recording of a study and write the study-level outputs.

    Parameters
    ----------
    study : heschl.config.Study
    jobs : int, default=1
        Worker processes; -1 uses every core (scikit-learn's meaning of ``n_jobs``). With
        ``cluster="local"``, the number of Dask workers.
    force : bool, default=False
        Process recordings even when their outputs are up to date.
    cluster : str or distributed.Client or None, default=None
        Run the tasks on Dask (``pip install "heschl[dask]"``): a scheduler address such as
        ``"tcp://10.0.0.5:8786"``, ``"local"`` for a cluster of ``jobs`` worker processes on
        this machine, or a connected ``distributed.Client``. Workers must see the study's
        files and output folder at the same paths (a shared file system).

    Returns
    -------
    summaries : list of dict
        One per recording, with ``status`` "done", "unchanged" or "failed", and
        ``unusable`` (the reason) for a recording that was read but cannot be used.
    """
    from .inputs import discover
    from .outputs import write_dataset_description, write_group_outputs

    from .signoff import read_decisions

    recordings = discover(study)
    decisions = read_decisions(study.output)  # a malformed file stops the run before any work
    decided = [decisions.get((r.site, r.participant_id, r.paradigm)) for r in recordings]
    write_dataset_description(study.output, study.name)
    jobs = os.cpu_count() if jobs == -1 else max(1, int(jobs))
    summaries = [None] * len(recordings)
    interrupted = None
    try:
        if cluster is not None:
            summaries = _run_on_dask(study, recordings, force, cluster, jobs, decided)
        elif jobs == 1 or len(recordings) < 2:
            log.info("Processing %d recordings in this process", len(recordings))
            for i, (r, d) in enumerate(zip(recordings, decided)):
                summaries[i] = process_and_write(study, r, force, d)
        else:
            _run_in_pool(study, recordings, force, decided, jobs, summaries)
    except KeyboardInterrupt as exc:   # SIGINT, or SIGTERM turned into it by the command line
        interrupted = exc
        log.warning("Interrupted: %d of %d recordings finished; the others are left for the next run",
                    sum(s is not None for s in summaries), len(recordings))
    summaries = [s if s is not None else _interrupted(r) for s, r in zip(summaries, recordings)]
    for s in summaries:
        if s["status"] == "failed":
            log.warning("failed: %s", s["error"])
    write_group_outputs(study, recordings, summaries, decisions)
    if interrupted is not None:
        raise Interrupted(study, summaries) from None
    return summaries


class Interrupted(KeyboardInterrupt):
    """A run stopped by SIGINT or SIGTERM; ``summaries`` holds every recording's state."""

    def __init__(self, study, summaries):
        super().__init__("interrupted")
        self.study, self.summaries = study, summaries


def _interrupted(recording):
    return {"site": recording.site, "participant_id": recording.participant_id, "paradigm": recording.paradigm,
            "group": recording.group, "status": "failed",
            "error": f"{recording.path.name}: not finished (the run was interrupted); the next run processes it"}


def _run_in_pool(study, recordings, force, decided, jobs, summaries):
    """Worker processes, largest files first; on an interrupt the workers are ended at once."""
    import multiprocessing

    log.info("Processing %d recordings with %d worker(s)", len(recordings), jobs)
    pool = ProcessPoolExecutor(max_workers=jobs, mp_context=get_context("spawn"), initializer=_limit_threads)
    try:
        # Largest files first (longest-processing-time first): the longest task does not
        # start last and leave one worker idle at the end.
        order = sorted(range(len(recordings)), key=lambda i: -_size(recordings[i]))
        futures = {pool.submit(process_and_write, study, recordings[i], force, decided[i]): i for i in order}
        for future in as_completed(futures):
            i = futures[future]
            summaries[i] = _outcome(future, recordings[i])
    except KeyboardInterrupt:
        for child in multiprocessing.active_children():
            child.terminate()
        pool.shutdown(wait=False, cancel_futures=True)
        raise
    pool.shutdown(wait=True)


CONNECT_TIMEOUT = "20s"  # how long to wait for a Dask scheduler


def _size(recording):
    """Bytes of a recording's input files (0 when unreadable: the task will say why)."""
    from .inputs import recording_files

    try:
        return sum(f.stat().st_size for f in recording_files(recording.path) if f.exists())
    except OSError:
        return 0


def _outcome(future, recording):
    """A finished task's summary; a task whose worker died becomes a failed summary."""
    try:
        return future.result()
    except Exception as exc:  # the worker process died (memory, signal) or the cluster went away
        return {"site": recording.site, "participant_id": recording.participant_id,
                "paradigm": recording.paradigm, "group": recording.group, "status": "failed",
                "error": f"{recording.path.name}: the worker running it stopped ({exc.__class__.__name__}: "
                         f"{str(exc).splitlines()[0] if str(exc) else ''})"}


def _task(study, recording, force, decision):
    """One recording on a Dask worker: one BLAS thread, as in the local pool."""
    _limit_threads()
    return process_and_write(study, recording, force, decision)


def _run_on_dask(study, recordings, force, cluster, jobs, decided):
    """Submit one task per recording to a Dask cluster; summaries in discovery order."""
    from .errors import InputDataError, problem

    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise InputDataError(problem("cluster", "Dask runs need the distributed package, which is not installed",
                                     'install it with pip install "heschl[dask]"')) from None
    own = None
    if isinstance(cluster, Client):
        client = cluster
    elif cluster == "local":
        own = LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True, dashboard_address=None)
        client = Client(own)
    else:
        try:
            client = Client(str(cluster), timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputDataError(problem("cluster", f'cannot reach the Dask scheduler at "{cluster}" '
                                         f"({exc.__class__.__name__})",
                                         "start the scheduler and workers, or check the address")) from None
    try:
        log.info("Processing %d recordings on Dask (%s)", len(recordings), client.scheduler.address)
        # pure=False: a task's result depends on files, not only on its arguments.
        shared = client.scatter(study, broadcast=True)  # sent once, not once per task
        futures = client.map(_task, [shared] * len(recordings), recordings, [force] * len(recordings), decided,
                             pure=False)
        # A lost worker fails its recording, not the run: every other summary is kept.
        return [_outcome(f, r) for f, r in zip(futures, recordings)]
    finally:
        if client is not cluster:
            client.close()
        if own is not None:
            own.close()


def check_study(study):
    """What each recording holds, without processing: channels, duration, markers.

    Returns
    -------
    rows : list of dict
        One per recording; ``error`` is set when the recording cannot be used as defined.
    """
    from .inputs import discover, empty_pattern_message, empty_patterns

    rows = [_check_one(study, r) for r in discover(study)]
    return rows + [{"site": site, "participant_id": None, "paradigm": paradigm, "file": None,
                    "error": empty_pattern_message(study, site, paradigm)} for site, paradigm in empty_patterns(study)]


def _check_one(study, recording):
    """One recording as ``heschl run`` would meet it before cleaning: the run's reader
    (the header and cheap reads only) and the run's harmonising rules
    (:func:`heschl.harmonise.inspect`), so that what passes here, the run can process."""
    from .features import applicable
    from .harmonise import inspect, read_raw
    from .inputs import analysis_of, display_path, input_files

    site = study.sites[recording.site]
    analysis = analysis_of(study, recording)
    paradigm = analysis.paradigm
    row = {"site": recording.site, "participant_id": recording.participant_id, "paradigm": recording.paradigm,
           "file": os.path.relpath(recording.path), "error": None}
    notes = []
    try:
        input_files(recording.path)
        raw = read_raw(recording.path, notes=notes, preload=False)
    except HeschlError as exc:
        row["error"] = str(exc)
        return row
    row["warnings"] = [f"truncated: holds {n['read_s']:.1f} s of the {n['declared_s']:.1f} s {n['basis']} declares"
                       if n["kind"] == "truncated" else f"the reader says: {n['words']}" for n in notes]
    row["channels"] = len(raw.ch_names)
    row["duration_s"] = round(raw.n_times / raw.info["sfreq"], 2)
    row["sampling_rate_hz"] = raw.info["sfreq"]
    try:
        markers, record = inspect(raw, site, paradigm, study.common_channels, display_path(recording.path))
        # A set for a sensor modality the file lacks is left out by design (no warning);
        # a set for one it has must find every region channel, or this raises.
        features_log = logging.getLogger("heschl.features")
        level = features_log.level
        features_log.setLevel(logging.WARNING)
        try:
            applicable(analysis, record["channels"], display_path(recording.path),
                       set(record["channel_types"].values()))
        finally:
            features_log.setLevel(level)
    except HeschlError as exc:
        row["error"] = str(exc)
        return row
    row["missing"] = record["missing_channels"]
    row["warnings"] += [f"{sum(e - s for s, e in spans)} samples of {name} are NaN or infinite; run holds them "
                        "at the last finite value and drops the trials they touch"
                        for name, spans in list(record["non_finite"].items())[:4]]
    row["warnings"] += [f"sites.{site.name}.eog_channels names {name}, which the file lacks; the ocular step "
                        "goes without it" for name in record["absent_eog"]]
    by_marker = {m: c.name for c in paradigm.conditions.values() for m in c.markers}
    counts = {c: 0 for c in paradigm.conditions}
    for label in markers.labels:
        counts[by_marker[label]] += 1
    row["conditions"] = counts
    row["unmapped"] = markers.unknown
    return row
