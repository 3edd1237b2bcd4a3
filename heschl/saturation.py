"""Stretches where channels sit at one value: amplifier saturation, clipping, dropouts.

A digitised signal never repeats exactly the same value for tens of milliseconds: brain
activity and amplifier noise move it by many quantisation steps per sample. A run of
identical samples therefore means the amplifier sat at a rail, clipped at the file's
extreme value, or stopped delivering data (common practice). Such stretches must be
found on the data as stored, before any filter or resampling smears them into something
that looks like a signal.

Two steps, as for muscle (:mod:`heschl.muscle`): `stuck_runs` per channel on the
harmonised data at the file's rate, then `find_saturation` once the bad channels are
known (a channel that is flat throughout is a bad channel, not a stretch). Trials that
overlap a stretch are dropped with the reason "saturation" (:mod:`heschl.pipeline`).
"""
from __future__ import annotations

import logging

import numpy as np

__all__ = ["MIN_RUN_S", "stuck_runs", "find_saturation"]

log = logging.getLogger(__name__)

#: Shortest run of identical samples, s, that counts (heschl's choice: at 250 Hz and
#: above that is 13 or more samples, far more than a real signal repeats by chance).
MIN_RUN_S = 0.05

#: Stretches closer than this, s, are merged. One stuck channel is enough to mark a
#: stretch: its trials would otherwise carry a flat piece that no average removes.
_GAP_S = 0.1


def stuck_runs(raw, picks, exclude=(), also=None):
    """Runs of identical samples per channel.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Data as stored (before any filter or resampling); read one channel at a time.
    picks : sequence of int
        Channels to judge.
    exclude : sequence of str
        Channels not judged (a restored reference of zeros).
    also : dict or None
        Channel -> [(start_sample, stop_sample), ...] that count as runs whatever their
        length: samples the file held as NaN or infinite
        (:func:`heschl.harmonise.non_finite_samples`), now held at one value.

    Returns
    -------
    runs : dict
        Channel -> list of (start_s, stop_s) runs of at least `MIN_RUN_S`; channels
        without a run are left out.
    """
    sfreq = raw.info["sfreq"]
    min_len = max(3, int(np.ceil(MIN_RUN_S * sfreq)))
    out = {}
    for i in picks:
        name = raw.ch_names[i]
        if name in exclude:
            continue
        row = raw.get_data(picks=[i])[0]
        same = np.concatenate([[False], row[1:] == row[:-1]])     # sample equals the one before
        if not same.any():
            continue
        edges = np.diff(np.concatenate([[0], same.astype(np.int8), [0]]))
        starts, stops = np.flatnonzero(edges == 1) - 1, np.flatnonzero(edges == -1)
        keep = stops - starts >= min_len
        if keep.any():
            out[name] = [(float(a / sfreq), float(b / sfreq)) for a, b in zip(starts[keep], stops[keep])]
    for name, spans in (also or {}).items():
        if name in raw.ch_names and name not in exclude:
            out[name] = sorted(set(out.get(name, [])) | {(float(a / sfreq), float(b / sfreq)) for a, b in spans})
    return out


def find_saturation(runs, n_channels, exclude=(), duration=None):
    """Merge the channels' runs into stretches, leaving out bad channels.

    Parameters
    ----------
    runs : dict
        From `stuck_runs`.
    n_channels : int
        Channels judged (for the share in the record).
    exclude : collection of str
        Bad channels (they are interpolated; their runs say nothing about the rest).
    duration : float or None, s
        Recording length: a channel stuck for more than half of it is left to the
        bad-channel rules.

    Returns
    -------
    record : dict
        ``stretches_s`` [[start, stop], ...], ``channels`` (per stretch, the channels stuck in
        it), ``marked_s``, ``min_run_s``.
    """
    spans = []
    for name, items in runs.items():
        if name in exclude:
            continue
        if duration and sum(b - a for a, b in items) > 0.5 * duration:
            continue
        spans += [(a, b, name) for a, b in items]
    spans.sort()
    stretches, channels = [], []
    for a, b, name in spans:
        if stretches and a <= stretches[-1][1] + _GAP_S:
            stretches[-1][1] = max(stretches[-1][1], b)
            channels[-1].add(name)
        else:
            stretches.append([a, b])
            channels.append({name})
    record = {"stretches_s": [[round(a, 3), round(b, 3)] for a, b in stretches],
              "channels": [sorted(c) for c in channels], "n_channels": int(n_channels),
              "marked_s": round(float(sum(b - a for a, b in stretches)), 3), "min_run_s": MIN_RUN_S}
    if stretches:
        log.info("%d stretch%s where channels sit at one value (%.2f s)", len(stretches),
                 "" if len(stretches) == 1 else "es", record["marked_s"])
    return record
