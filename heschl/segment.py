"""Cut cleaned data into epochs (event-related, steady-state) or segments (resting), then
reject by the paradigm's policy. Every trial carries its fate and the reason.
"""
from __future__ import annotations

import logging
import numpy as np

from .numeric.rejection import fixed_threshold, peak_to_peak
from .vocabulary import MIN_ADAPTIVE_EPOCHS

__all__ = ["epoch_plan", "segment_plan", "cut", "reject"]

log = logging.getLogger(__name__)


def epoch_plan(markers, paradigm):
    """Trials planned from markers: (onset_s, condition, reason-or-None) per marker.

    Skip rules of the paradigm (e.g. the standard after a deviant) mark trials as skipped.
    """
    by_marker = {m: c.name for c in paradigm.conditions.values() for m in c.markers}
    conds = [by_marker[label] for label in markers.labels]
    plan = []
    for i, (onset, cond) in enumerate(zip(markers.onsets, conds)):
        reason = None
        for rule in paradigm.epochs.skip:
            if cond == rule.condition and i > 0 and conds[i - 1] == rule.after:
                reason = f"skipped: follows a {rule.after}"
        plan.append((float(onset), cond, reason))
    return plan


def segment_plan(markers, paradigm, duration):
    """Fixed-length segments inside each block, from its marker to the next or the end."""
    by_marker = {m: c.name for c in paradigm.conditions.values() for m in c.markers}
    spec = paradigm.segments
    step = spec.length * (1.0 - spec.overlap)
    ends = list(markers.onsets[1:]) + [duration]
    plan = []
    for onset, label, end in zip(markers.onsets, markers.labels, ends):
        start = onset + spec.skip_start
        n = int(np.floor((end - start - spec.length) / step + 1e-9)) + 1
        plan.extend((float(start + k * step), by_marker[label], None) for k in range(max(n, 0)))
    return plan


_HALF = 16  # half length of the fractional-delay kernel, samples


def fractional_delay_kernel(delta, half=_HALF, beta=8.0):
    """Kaiser-windowed sinc taps ``h`` with ``sum_j h[j] x[k + j - half] ~= x(k + delta)``.

    Parameters
    ----------
    delta : float
        Fraction of a sample, 0 <= delta < 1.
    half : int, default=16
        Taps on each side; 33 taps with beta 8 keep the error below about 1e-3 up to
        0.4 x the sampling rate (windowed-sinc interpolation, common practice).
    """
    n = np.arange(-half, half + 1)
    taps = np.sinc(n - delta) * np.kaiser(2 * half + 1, beta)
    return taps / taps.sum()


def cut(raw, plan, window, picks=None, data=None):
    """Cut trials from continuous data, aligned to the marker with sub-sample precision.

    Markers rarely fall on the analysis rate's sample grid (they were sampled at the
    file's rate, then corrected for trigger delay). Rounding to the nearest sample would
    jitter trials by up to half a sample (2 ms at 250 Hz, 29 degrees at 40 Hz), so each
    trial is interpolated at its exact onset with a windowed-sinc fractional delay.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Cleaned data.
    plan : list of (onset_s, condition, reason or None)
    window : (tmin, tmax), s
    picks : array of int or None
        Channels to cut; None cuts the data channels (EEG, magnetometers, gradiometers).
    data : ndarray, shape (len(picks), raw.n_times), or None
        The continuous data of ``picks`` to cut instead of ``raw``'s (e.g. a filtered
        copy of them); None reads them from ``raw``.

    Returns
    -------
    x : ndarray, shape (n_cut, n_channels, n_times), V
    times : ndarray, s
    entries : list of dict
        The log, one entry per planned trial, with ``index`` into ``x`` for cut trials.
    """
    from numpy.lib.stride_tricks import sliding_window_view

    if picks is None:
        from .sensors import data_picks

        picks = data_picks(raw.info)
    if data is None:
        data = raw.get_data(picks=picks)
    sfreq = raw.info["sfreq"]
    start = int(round(window[0] * sfreq))
    n_times = int(round((window[1] - window[0]) * sfreq)) + 1
    times = (start + np.arange(n_times)) / sfreq
    entries, where = [], []
    for onset, cond, reason in plan:
        position = onset * sfreq
        base = int(np.floor(position + 1e-9))
        first = base + start - _HALF
        entry = {"condition": cond, "onset_s": round(onset, 4), "kept": False, "reason": reason}
        if reason is None and (first < 0 or first + n_times + 2 * _HALF > data.shape[1]):
            entry["reason"] = "outside the recording: window reaches past the data"
        if entry["reason"] is None:
            entry["index"] = len(where)
            where.append((first, position - base))
        entries.append(entry)
    x = np.empty((len(where), len(picks), n_times))  # filled in place: no list of pieces to stack
    for i, (first, fraction) in enumerate(where):
        segment = data[:, first:first + n_times + 2 * _HALF]
        taps = fractional_delay_kernel(max(0.0, fraction))
        np.matmul(sliding_window_view(segment, 2 * _HALF + 1, axis=1), taps, out=x[i])
    return x, times, entries


def reject(x, times, entries, ch_names, paradigm, baseline=None, detection=None, info=None, types=None,
           dropped=None):
    """Baseline-correct, apply the rejection policy, and split kept trials by condition.

    Parameters
    ----------
    x : ndarray, shape (n_cut, n_channels, n_times), V
        Analysis data of the cut trials: baseline-corrected and repaired in place when it
        is a writeable float64 array (a copy of the trials fewer; the pipeline does not
        reuse it).
    times : ndarray, s
    entries : list of dict
        The trial log from :func:`cut`.
    ch_names : list of str
    paradigm : heschl.config.Paradigm
    baseline : (float, float) or None, s
    detection : ndarray like ``x`` or None
        The same trials from a copy high-passed for detection (adaptive method only):
        thresholds are learned there and the decisions applied to ``x``.
    info : mne.Info or None
        Channel positions for interpolation (adaptive method only).
    types : list of str or None
        Sensor type of each channel ("eeg", "mag", "grad"); None means all EEG. Fixed
        limits are those of each channel's type.
    dropped : list of (str or None) or None
        Per cut trial, a reason it is dropped before the rejection method sees it (e.g.
        ``"muscle: ..."``), or None; such trials neither train nor meet the method.

    Returns
    -------
    arrays : dict of str -> ndarray, shape (n_kept, n_channels, n_times), V
    entries : list of dict
        The log with each trial's fate filled in.
    record : dict
        What the rejection method decided overall. With the fixed and adaptive methods it
        holds ``cell_labels`` (ndarray of int8, shape (n_cut, n_channels): 0 within the
        limit, 1 beyond it, 2 interpolated), for the QC page; not JSON-ready.
    """
    if not (isinstance(x, np.ndarray) and x.flags.writeable and x.dtype == np.float64):
        x = np.array(x, dtype=float)  # an array this function may change in place
    if baseline is not None and len(x):
        sel = (times >= baseline[0]) & (times <= baseline[1])
        x -= x[:, :, sel].mean(axis=2, keepdims=True)  # in place: no second copy of the trials
    keep, reasons, record = _decide_rest(x, detection, ch_names, paradigm, info, types or ["eeg"] * len(ch_names),
                                         dropped)
    data = {c: [] for c in paradigm.conditions}
    for entry in entries:
        idx = entry.get("index")
        if idx is None:
            continue
        if keep[idx]:
            entry["kept"] = True
            if record.get("interpolated"):
                entry["interpolated"] = record["interpolated"][idx]
            data[entry["condition"]].append(x[idx])
        else:
            entry["reason"] = reasons[idx]
    if paradigm.rejection.equalise:
        data = _equalise(data, entries)
    arrays = {c: (np.stack(v) if v else np.empty((0,) + x.shape[1:])) for c, v in data.items()}
    return arrays, entries, record


def _decide_rest(x, detection, ch_names, paradigm, info, types, dropped):
    """`_decide` on the trials not dropped beforehand; its results spread back over all.

    Returns the keep mask, the reasons and the record; the adaptive method's repairs are
    made in ``x`` itself.
    """
    if dropped is None or not any(dropped):
        return _decide(x, detection, ch_names, paradigm, info, types)
    rest = np.array([r is None for r in dropped], dtype=bool)
    idx = np.flatnonzero(rest)
    if detection is not None and len(detection) != len(idx):
        detection = detection[idx]  # else the caller passed the detection trials of these rows only
    part_keep, part_reasons, record = _decide(x, detection, ch_names, paradigm, info, types, rows=idx)
    keep = np.zeros(len(x), dtype=bool)
    keep[idx] = part_keep
    reasons = list(dropped)
    for i, r in zip(idx, part_reasons):
        reasons[i] = r
    if record.get("interpolated") is not None:
        full = [[] for _ in range(len(x))]
        for i, names in zip(idx, record["interpolated"]):
            full[i] = names
        record["interpolated"] = full
    if record.get("cell_labels") is not None:
        labels = np.zeros((len(x), len(ch_names)), dtype=np.int8)
        labels[idx] = record["cell_labels"]
        record["cell_labels"] = labels
    return keep, reasons, record


def _fixed_limits(rejection, types):
    """Per-channel peak-to-peak limits (SI) and the limits by type, as people read them."""
    from .sensors import DISPLAY

    by_kind = dict(rejection.peak_to_peak_meg, eeg=rejection.peak_to_peak)
    limits = np.array([by_kind[t] for t in types], dtype=float)
    shown = {t: f"{by_kind[t] * DISPLAY[t][1]:g} {DISPLAY[t][0]}" for t in dict.fromkeys(types)}
    return limits, shown


def _decide(x, detection, ch_names, paradigm, info, types, rows=None):
    """keep mask, reason per trial, and a record, by the paradigm's method, for the trials
    ``rows`` of ``x`` (all when None; no copy of them is made). The adaptive method repairs
    the kept trials in ``x`` itself."""
    method = paradigm.rejection.method
    n = len(x) if rows is None else len(rows)
    keep = np.ones(n, dtype=bool)
    reasons = [None] * n
    if method == "fixed" and n:
        limits, shown = _fixed_limits(paradigm.rejection, types)
        ptp = peak_to_peak(x) if rows is None else peak_to_peak(x)[rows]
        keep, found = fixed_threshold(ptp, limits, ch_names, types=types)
        reasons = ["peak-to-peak: " + "; ".join(r.replace("peak-to-peak ", "", 1) for r in found[i])
                   for i in range(n)]
        record = {"method": "fixed", "limits": shown}
        # Which cells were beyond their limit (fixed_threshold's rule), for the QC page's
        # decision image; the pipeline takes it out of the record before provenance.
        record["cell_labels"] = (~np.isfinite(ptp) | (ptp > limits)).astype(np.int8)
        log.info("Fixed peak-to-peak limits dropped %d of %d trial%s", int((~keep).sum()), n, "" if n == 1 else "s")
        if "eeg" in types:
            record["peak_to_peak_uv"] = paradigm.rejection.peak_to_peak * 1e6
        return keep, reasons, record
    if method == "adaptive":
        if n < MIN_ADAPTIVE_EPOCHS:
            return keep, reasons, {"method": "adaptive", "skipped": f"only {n} trials; "
                                   f"adaptive thresholds need at least {MIN_ADAPTIVE_EPOCHS}"}
        from .adaptive import adaptive_reject

        _, keep, found, record = adaptive_reject(x, detection, info, max_cluster=paradigm.rejection.max_cluster,
                                                 random_state=0, n_jobs=1, keep_labels=True, in_place=True,
                                                 rows=rows)
        record = dict(record, method="adaptive", cell_labels=record.pop("labels"))
        return keep, list(found), record
    return keep, reasons, {"method": "none"}


def _equalise(data, entries):
    """Keep the same number of trials in every condition: evenly spaced over the recording.

    Evenly spaced selection keeps the trials spread over time, so slow changes over the
    session weigh the same in every condition (deterministic; no random draw).
    """
    target = min(len(v) for v in data.values())
    kept = {c: [e for e in entries if e["kept"] and e["condition"] == c] for c in data}
    for c, trials in data.items():
        if len(trials) > target:
            chosen = set(np.round(np.linspace(0, len(trials) - 1, target)).astype(int)) if target else set()
            for i, entry in enumerate(kept[c]):
                if i not in chosen:
                    entry["kept"] = False
                    entry["reason"] = f"equalised: {c} reduced to {target} trials"
            data[c] = [t for i, t in enumerate(trials) if i in chosen]
    return data
