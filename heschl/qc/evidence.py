"""The evidence a recording's QC page draws, computed once here: the page never recomputes it.

:func:`recording_evidence` assembles one plain, JSON-ready dict (lists, rounded floats,
ints, strings; None for missing values) from what the stages recorded. The pieces that
must be taken while the data change are gathered on the way: :func:`channel_spectra`
before and after cleaning, :class:`OcularWatch` around the ocular step (handed to
:func:`heschl.clean.clean` as its ``watch``), and the per-cell rejection labels the
rejection step returns.

Units: spectra in the sensor type's display unit squared per Hz (uV^2/Hz, fT^2/Hz,
(fT/cm)^2/Hz), waves in the display unit (uV, fT, fT/cm), times in s, frequencies in Hz,
sensor positions in m on the plane of ``mne.viz.plot_topomap`` (head radius
:data:`HEAD_RADIUS_M`).
"""
from __future__ import annotations

import logging
import math

import numpy as np

__all__ = ["recording_evidence", "channel_spectra", "spectrum_limit", "sensor_map", "decision_matrix",
           "OcularWatch", "blink_average", "event_related", "steady_state", "resting", "rounded",
           "DECISION_CODES", "HEAD_RADIUS_M", "BOOTSTRAP_RESAMPLES"]

log = logging.getLogger(__name__)

#: Radius of the head outline on the sensor maps, m (mne's default sphere).
HEAD_RADIUS_M = 0.095
#: Welch segment of the channel spectra, s: 0.5 Hz bins.
SPECTRUM_SEGMENT_S = 2.0
#: Codes of the decision image, one digit per cell.
DECISION_CODES = {"0": "kept", "1": "interpolated", "2": "beyond limit", "3": "rejected with its trial",
                  "4": "skipped"}
#: Reasons (their text before the first colon) that mean the rejection step dropped a trial;
#: every other reason (skip rules, window past the data, equalisation) marks it skipped.
REJECTED_BY = ("peak-to-peak", "adaptive")
#: Trial resamples of the difference wave's bootstrap band, and their seed.
BOOTSTRAP_RESAMPLES, BOOTSTRAP_SEED = 200, 0
#: Half width, Hz, and step of the steady-state time-frequency image around the stimulation frequency.
TF_HALF_WIDTH_HZ, TF_STEP_HZ = 10.0, 1.0
#: Blink-locked window, s around each blink peak.
BLINK_WINDOW_S = (-0.5, 0.7)
#: Channels shown in the blink-locked average, first present first (at most four).
BLINK_CHANNELS = ("Fp1", "Fp2", "AF3", "AF4", "Fz", "F3", "F4", "FCz", "Cz")
#: Longest time axis kept for images, samples (longer ones are thinned by an integer step).
MAX_COLUMNS = 200


def rounded(x, digits=4):
    """``x`` as nested lists of floats with ``digits`` significant digits; NaN and inf become None."""
    arr = np.asarray(x, dtype=float)
    if arr.ndim == 0:
        v = float(arr)
        return float(f"{v:.{digits}g}") if math.isfinite(v) else None
    return [rounded(v, digits) for v in arr] if arr.ndim > 1 else \
        [float(f"{v:.{digits}g}") if math.isfinite(v) else None for v in arr.tolist()]


def _display(kind):
    from ..sensors import DISPLAY

    return DISPLAY[kind]


# -- spectra of every channel -------------------------------------------------------------

def spectrum_limit(sfreq, line_frequency=None):
    """Highest frequency the channel spectra keep, Hz.

    1.2 x the highest line harmonic below Nyquist when the site has a line frequency,
    else 100 Hz; never above Nyquist.
    """
    nyquist = sfreq / 2.0
    if line_frequency:
        harmonics = [k * line_frequency for k in range(1, 20) if k * line_frequency < nyquist]
        if harmonics:
            return min(nyquist, 1.2 * harmonics[-1])
    return min(nyquist, 100.0)


def channel_spectra(raw, fmax, segment=SPECTRUM_SEGMENT_S, chunk=8):
    """Welch PSD of every data channel of ``raw`` up to ``fmax``, by sensor type.

    The data are read ``chunk`` channels at a time, so no second copy of the recording is
    held. ``raw`` is not modified.

    Parameters
    ----------
    raw : mne.io.BaseRaw
    fmax : float, Hz
    segment : float, default=2.0
        Welch segment, s (0.5 Hz bins), 50 % overlap, Hann window
        (:func:`heschl.numeric.spectra.welch_psd`).
    chunk : int, default=8

    Returns
    -------
    freqs : ndarray, shape (n_freqs,), Hz
    by_type : dict
        Sensor type -> ``{"channels": [...], "psd": ndarray (n_channels, n_freqs)}`` in the
        type's display unit squared per Hz.
    """
    from ..numeric.spectra import welch_psd
    from ..sensors import by_type, data_picks, types_of

    picks = data_picks(raw.info)
    sfreq = raw.info["sfreq"]
    # A recording shorter than one segment (an unusable one, shown for what it holds) gets
    # one segment as long as the data.
    segment = min(segment, raw.n_times / sfreq)
    out, freqs = {}, None
    for kind, idx in by_type(types_of(raw.info, picks)).items():
        factor = _display(kind)[1]
        rows = []
        for start in range(0, len(idx), chunk):
            sel = picks[idx[start:start + chunk]]
            freqs, psd = welch_psd(raw.get_data(picks=sel), sfreq, segment)
            rows.append(psd[:, freqs <= fmax + 1e-9] * factor ** 2)
        out[kind] = {"channels": [raw.ch_names[i] for i in picks[idx]], "psd": np.vstack(rows)}
    freqs = freqs[freqs <= fmax + 1e-9] if freqs is not None else np.array([])
    return freqs, out


def _spectra_record(freqs, before, after, cleaning, pass_band, line_frequency):
    line = cleaning.get("line_noise") or {}
    types = {}
    for kind, b in before.items():
        a = after.get(kind, {"psd": np.full_like(b["psd"], np.nan)})
        unit = _display(kind)[0]
        types[kind] = {"channels": b["channels"], "unit": f"{unit}^2/Hz" if "/" not in unit else f"({unit})^2/Hz",
                       "before": rounded(b["psd"], 3), "after": rounded(a["psd"], 3)}
    return {"freqs": rounded(freqs), "pass_band": list(pass_band), "line_frequency": line_frequency,
            "line_harmonics": [f for f in line.get("frequencies_hz", []) if f <= (freqs[-1] if len(freqs) else 0)],
            "line_method": line.get("method"), "types": types}


# -- sensor map ----------------------------------------------------------------------------

def _plane(pos):
    """Azimuthal equidistant projection of 3-D positions (m) about the origin onto the
    topomap plane: the polar angle from the vertex maps linearly to the radius, 90 degrees
    (the equator of the sphere) to the head outline."""
    r = np.linalg.norm(pos, axis=1)
    polar = np.arccos(np.clip(pos[:, 2] / np.where(r > 0, r, 1.0), -1.0, 1.0))
    azimuth = np.arctan2(pos[:, 1], pos[:, 0])
    rho = polar / (np.pi / 2) * HEAD_RADIUS_M
    return np.column_stack([rho * np.cos(azimuth), rho * np.sin(azimuth)])


def sensor_map(info, ch_names, cleaning):
    """2-D positions of the analysed channels and what cleaning decided about each.

    MEG positions are taken to head coordinates with ``info["dev_head_t"]`` first.

    Returns
    -------
    dict
        ``channels``, ``types``, ``x``, ``y`` (m), ``state`` ("good", or the kind of the
        bad-channel reason: "flat", "noisy", "unpredictable", "study file", ...),
        ``reason`` (the full reason or None), ``interpolated`` (bool), ``head_radius``.
    """
    import mne

    index = [info["ch_names"].index(c) for c in ch_names]
    pos = np.array([info["chs"][i]["loc"][:3] for i in index], dtype=float)
    types = [mne.channel_type(info, i) for i in index]
    trans = info.get("dev_head_t")
    meg = np.array([t in ("mag", "grad") for t in types])
    if meg.any() and trans is not None:
        pos[meg] = mne.transforms.apply_trans(trans["trans"], pos[meg])
    xy = _plane(np.nan_to_num(pos))
    bads, interpolated = cleaning.get("bad_channels", {}), set(cleaning.get("interpolated", []))
    states = [_reason_kind(bads[c]) if c in bads else "good" for c in ch_names]
    return {"channels": list(ch_names), "types": types, "x": rounded(xy[:, 0]), "y": rounded(xy[:, 1]),
            "state": states, "reason": [bads.get(c) for c in ch_names],
            "interpolated": [c in interpolated for c in ch_names], "head_radius": HEAD_RADIUS_M}


def _reason_kind(reason):
    head = reason.split(":")[0].strip()
    return "study file" if "study file" in head else head


# -- rejection as a picture ----------------------------------------------------------------

def decision_matrix(entries, cell_labels, n_channels):
    """The decision for every trial x channel cell, in trial-log order.

    Parameters
    ----------
    entries : list of dict
        The trial log (``condition``, ``kept``, ``reason``, ``index`` for cut trials).
    cell_labels : ndarray of int, shape (n_cut, n_channels), or None
        Per cut trial and channel: 0 within the limit, 1 beyond it, 2 interpolated (from
        the rejection step); None when the method judged no cell.
    n_channels : int

    Returns
    -------
    dict
        ``codes`` (digit -> meaning, :data:`DECISION_CODES`), ``conditions`` (one per
        trial), ``state`` (one character per trial: k kept, r rejected, s skipped) and
        ``cells`` (one string of ``n_channels`` digits per trial).
    """
    cells, states, conditions = [], [], []
    for entry in entries:
        idx = entry.get("index")
        labels = (np.asarray(cell_labels[idx]) if cell_labels is not None and idx is not None
                  else np.zeros(n_channels, dtype=int))
        reason = (entry.get("reason") or "").split(":")[0]
        if entry["kept"]:
            state, row = "k", np.select([labels == 2, labels == 1], [1, 2], 0)
        elif idx is not None and reason in REJECTED_BY:
            state, row = "r", np.where(labels >= 1, 2, 3)
        else:
            state, row = "s", np.full(n_channels, 4)
        states.append(state)
        conditions.append(entry["condition"])
        cells.append("".join(str(int(v)) for v in row))
    return {"codes": dict(DECISION_CODES), "conditions": conditions, "state": "".join(states), "cells": cells}


# -- ocular correction ----------------------------------------------------------------------

def blink_average(x, eog, sfreq, peaks, window=BLINK_WINDOW_S):
    """Average of ``x`` locked to blink peaks.

    Parameters
    ----------
    x : ndarray, shape (n_channels, n_times)
    eog : ndarray, shape (n_times,) (unused but for its length)
    sfreq : float, Hz
    peaks : ndarray, s from the first sample
    window : (float, float), s

    Returns
    -------
    times : ndarray, s
    average : ndarray, shape (n_channels, n_window), or None when no blink fits the data
    n : int
        Blinks averaged.
    """
    start, stop = int(round(window[0] * sfreq)), int(round(window[1] * sfreq))
    times = np.arange(start, stop + 1) / sfreq
    centres = [int(round(p * sfreq)) for p in peaks]
    centres = [c for c in centres if c + start >= 0 and c + stop < len(eog)]
    if not centres:
        return times, None, 0
    stack = np.stack([x[:, c + start:c + stop + 1] for c in centres])
    return times, stack.mean(axis=0), len(centres)


class OcularWatch:
    """Watches the ocular step of :func:`heschl.clean.clean` (its ``watch``) and keeps the
    blink-locked averages before and after it, and what the step removed.

    Blinks are found (:func:`heschl.numeric.blinks.blink_peaks`) on the vertical EOG, or
    on the mean of the frontal stand-ins the correction used, before the correction; the
    same blinks are averaged after it. Only a few channels are kept
    (:data:`BLINK_CHANNELS`, in uV).

    Attributes
    ----------
    record_ : dict
        JSON-ready; see :meth:`__call__`.
    """

    def __init__(self):
        self.record_ = {"corrected": False}
        self._before = None

    def __call__(self, stage, raw, ocular):
        if stage == "before-ocular":
            self._before = self._locked(raw)
        elif stage == "after-ocular":
            self.record_ = self._finish(raw, ocular)

    def _source(self, raw):
        """The blink source: (label, time course in V), or (None, None)."""
        from .metrics import vertical_eog

        channel = vertical_eog(raw)
        if channel is not None:
            return channel, raw.get_data(picks=[channel])[0]
        stand_ins = [c for c in ("Fp1", "Fp2") if c in raw.ch_names]
        if stand_ins:
            return f"mean({', '.join(stand_ins)})", raw.get_data(picks=stand_ins).mean(axis=0)
        return None, None

    def _locked(self, raw, peaks=None):
        import mne

        from ..numeric.blinks import blink_peaks

        label, eog = self._source(raw)
        if eog is None:
            return None
        sfreq = raw.info["sfreq"]
        peaks = blink_peaks(eog, sfreq) if peaks is None else peaks
        eeg = {raw.ch_names[i] for i in mne.pick_types(raw.info, eeg=True, meg=False, exclude=[])}
        shown = [c for c in BLINK_CHANNELS if c in eeg][:4]
        x = np.vstack([raw.get_data(picks=shown), eog[None, :]]) if shown else eog[None, :]
        times, avg, n = blink_average(x, eog, sfreq, peaks)
        return {"source": label, "peaks": peaks, "channels": shown + [label], "times": times, "average": avg,
                "n": n}

    def _finish(self, raw, ocular):
        rec = ocular.record() if ocular is not None else {}
        out = {"method": rec.get("method"), "sources": rec.get("sources", []),
               "skipped_reason": rec.get("skipped_reason"),
               "corrected": rec.get("method") not in (None, "none") and not rec.get("skipped_reason")}
        ica = getattr(ocular, "component_correlations_", None)
        if ica is not None:
            excluded = {e["component"]: e["kind"] for e in rec["ica"]["excluded"]}
            out["ica"] = {"sources": rec.get("sources", []), "correlations": rounded(ica, 3),
                          "excluded": sorted(excluded), "kinds": {str(k): v for k, v in excluded.items()},
                          "threshold": rec["ica"]["threshold"], "selection": rec["ica"]["selection"],
                          "limits": rec["ica"]["limits"],
                          "properties": ([{k: rounded(v, 3) for k, v in props.items()} for props in rec["ica"]["properties"]]
                                         if rec["ica"]["properties"] else None)}
            if excluded:
                patterns = ocular.ica_.get_components()
                out["ica"]["channels"] = list(ocular.ica_.ch_names)
                out["ica"]["patterns"] = {str(k): rounded(patterns[:, k] / np.abs(patterns[:, k]).max(), 3)
                                          for k in sorted(excluded)}
        if rec.get("regression"):
            coefs = rec["regression"]["coefficients"]
            out["regression"] = {"channels": list(coefs), "sources": rec.get("sources", []),
                                 "weights": rounded([[row[s] for s in rec["sources"]] for row in coefs.values()], 3)}
        if not out["corrected"]:
            out["missing"] = rec.get("skipped_reason") or ("not corrected (method none): blinks are left to "
                                                           "epoch rejection")
        before = self._before
        if before is None or before["average"] is None:
            out["blinks"] = None if before is None else {"source": before["source"], "n": 0}
            if before is None:
                out["blinks_missing"] = "no vertical EOG and no Fp1/Fp2 to find blinks on"
            return out
        after = self._locked(raw, before["peaks"]) if out["corrected"] else None
        out["blinks"] = {"source": before["source"], "n": before["n"], "unit": "uV",
                         "times": rounded(before["times"]), "channels": before["channels"],
                         "before": rounded(before["average"] * 1e6),
                         "after": rounded(after["average"] * 1e6) if after and after["average"] is not None else None}
        return out


# -- the design's own evidence --------------------------------------------------------------

def _regions(analysis):
    regions = {}
    for fs in analysis.feature_sets:
        regions.update(fs.regions)
    return regions


def _first_region(analysis, source):
    regions = _regions(analysis)
    region = next(iter(regions), None)
    if region is None:
        return None, [], "eeg"
    picks = [source.ch_names.index(c) for c in regions[region] if c in source.ch_names]
    return region, picks, source.ch_types[picks[0]] if picks else "eeg"


def _thin(n):
    return max(1, int(math.ceil(n / MAX_COLUMNS)))


def _level(analysis):
    return next((fs.reliability.get("level", 0.95) for fs in analysis.feature_sets), 0.95)


def _windows(analysis):
    return sorted({tuple(m.params["window"]) for fs in analysis.feature_sets for m in fs.measures
                   if m.params.get("window")})


def event_related(analysis, source, sensors):
    """Region averages and difference waves with the bootstrap band, the butterfly of the
    difference wave and its topography over each measure window.

    The band is the pointwise percentile interval, at the feature set's level, of the
    region-mean difference wave over :data:`BOOTSTRAP_RESAMPLES` resamples of the trials
    of each condition (with replacement, seed :data:`BOOTSTRAP_SEED`).
    """
    paradigm = analysis.paradigm
    region, picks, kind = _first_region(analysis, source)
    unit, factor = _display(kind)
    level = _level(analysis)
    out = {"region": region, "unit": unit, "times": rounded(source.times),
           "windows": [list(w) for w in _windows(analysis)], "head_radius": HEAD_RADIUS_M, "level": level,
           "waves": {}, "bands": {}, "resamples": BOOTSTRAP_RESAMPLES}
    if picks:
        out["waves"] = {s: rounded(source.average(s)[picks].mean(axis=0) * factor)
                        for s in paradigm.signals if source.n_trials(s) > 0}
        rng = np.random.default_rng(BOOTSTRAP_SEED)
        for name, contrast in paradigm.contrasts.items():
            if min(source.count(contrast.plus), source.count(contrast.minus)) < 2:
                continue
            means = []
            for cond in (contrast.plus, contrast.minus):
                per_trial = source.trials(cond)[:, picks].mean(axis=1)
                draw = rng.integers(0, len(per_trial), size=(BOOTSTRAP_RESAMPLES, len(per_trial)))
                means.append(per_trial[draw].mean(axis=1))
            diff = (means[0] - means[1]) * factor
            tail = 50.0 * (1.0 - level)
            out["bands"][name] = {"low": rounded(np.percentile(diff, tail, axis=0)),
                                  "high": rounded(np.percentile(diff, 100.0 - tail, axis=0))}
    shown = next((c for c in paradigm.contrasts if source.n_trials(c) > 0), None)
    if shown is None:
        shown = next((c for c in paradigm.conditions if source.n_trials(c) > 0), None)
    out["butterfly_signal"] = shown
    out["butterfly"], out["topographies"] = {}, {}
    if shown is not None:
        wave = source.average(shown)
        for t in dict.fromkeys(source.ch_types):
            idx = [i for i, x in enumerate(source.ch_types) if x == t]
            u, f = _display(t)
            out["butterfly"][t] = {"unit": u, "channels": [source.ch_names[i] for i in idx],
                                   "waves": rounded(wave[idx] * f)}
            out["topographies"][t] = _topographies(wave[idx], source, [source.ch_names[i] for i in idx],
                                                   sensors, t, _windows(analysis))
    return out


def _topographies(wave, source, names, sensors, kind, windows):
    """Window means of one sensor type's wave at its sensor positions.

    Co-located sensors (the two planar gradiometers of one location) become one point:
    the root mean square of their values (the usual way to show planar gradients, which
    have no sign of their own; common practice).
    """
    unit, factor = _display(kind)
    where = {c: (x, y) for c, x, y in zip(sensors["channels"], sensors["x"], sensors["y"])}
    points = {}
    for i, name in enumerate(names):
        points.setdefault(where[name], []).append(i)
    groups = list(points.values())
    combined = any(len(g) > 1 for g in groups)
    maps = []
    for w in windows:
        means = wave[:, source.window_mask(w)].mean(axis=1) * factor
        values = [float(np.sqrt(np.mean(means[g] ** 2))) if combined else float(means[g[0]]) for g in groups]
        maps.append({"window": list(w), "values": rounded(values)})
    return {"unit": unit, "channels": [[names[i] for i in g] for g in groups],
            "x": [p[0] for p in points], "y": [p[1] for p in points],
            "combined": "root mean square of co-located sensors" if combined else None, "windows": maps}


def steady_state(analysis, source):
    """ITPC and evoked power over time and frequency around the stimulation frequency, and
    the ITPC course at it with its pre-stimulus level, region mean (channel measures averaged).

    Morlet coefficients (:func:`heschl.numeric.phase.morlet_transform`, the features'
    cycles) are taken one frequency at a time on the region's channels only.
    """
    from ..features import N_CYCLES
    from ..numeric.phase import evoked_power, itpc, itpc_critical, morlet_transform

    paradigm = analysis.paradigm
    region, picks, kind = _first_region(analysis, source)
    unit, factor = _display(kind)
    freq = float(paradigm.stimulation.get("frequency", 40.0))
    nyquist = source.sfreq / 2.0
    freqs = [f for f in np.arange(freq - TF_HALF_WIDTH_HZ, freq + TF_HALF_WIDTH_HZ + 1e-9, TF_STEP_HZ)
             if 1.0 <= f < nyquist - 1.0]
    step = _thin(len(source.times))
    baseline = paradigm.epochs.baseline if paradigm.epochs and paradigm.epochs.baseline else (None, 0.0)
    pre = (source.times < 0) if baseline[0] is None else source.window_mask(baseline)
    out = {"region": region, "frequency": freq, "power_unit": f"{unit}^2", "times": rounded(source.times),
           "tf_times": rounded(source.times[::step]), "tf_freqs": rounded(freqs), "baseline": list(baseline)
           if baseline[0] is not None else None, "conditions": {}}
    for cond in paradigm.conditions:
        n = source.n_trials(cond)
        if n < 2 or not picks:
            continue
        course = itpc(source.coefficients(cond, freq, picks), axis=0).mean(axis=0)
        trials = source.trials(cond)[:, picks]
        rows_itpc, rows_power = [], []
        for f in freqs:
            coefs = morlet_transform(trials, source.sfreq, [f], n_cycles=N_CYCLES)[..., 0, ::step]
            rows_itpc.append(itpc(coefs, axis=0).mean(axis=0))
            rows_power.append(evoked_power(coefs, axis=0).mean(axis=0) * factor ** 2)
        out["conditions"][cond] = {"n_trials": int(n), "itpc": rounded(course),
                                   "prestim_itpc": rounded(course[pre].mean()) if pre.any() else None,
                                   "critical_itpc": rounded(itpc_critical(n)),
                                   "tf_itpc": rounded(rows_itpc, 3), "tf_evoked_power": rounded(rows_power, 3)}
    return out


def resting(analysis, source):
    """Region spectra per condition with the bands, the alpha peak and the aperiodic fit,
    by the same numeric functions (and defaults) the features use."""
    from ..features import spectrum_of
    from ..numeric.rhythms import aperiodic_fit, peak_frequency

    paradigm = analysis.paradigm
    region, picks, kind = _first_region(analysis, source)
    unit, factor = _display(kind)
    bands = {}
    for fs in analysis.feature_sets:
        bands.update({k: list(v) for k, v in fs.bands.items()})
    peak_band = tuple(bands.get("alpha", (8.0, 13.0)))
    spec = spectrum_of(analysis)
    out = {"region": region, "unit": f"{unit}^2/Hz", "bands": bands, "peak_band": list(peak_band),
           "pass_band": list(paradigm.cleaning.pass_band), "fit_range": [2.0, 40.0], "psd": {}, "fits": {}}
    for cond in paradigm.conditions:
        if source.n_trials(cond) == 0 or not picks:
            continue
        freqs, psd = source.spectrum(cond, spec)
        region_psd = psd[picks].mean(axis=0)
        exponent, offset = aperiodic_fit(freqs, region_psd)
        peak = peak_frequency(freqs, region_psd, peak_band)
        inside = (freqs >= 2.0) & (freqs <= 40.0)
        line = 10.0 ** (float(offset) - float(exponent) * np.log10(freqs[inside])) * factor ** 2
        out["freqs"] = rounded(freqs)
        out["psd"][cond] = rounded(region_psd * factor ** 2)
        out["fits"][cond] = {"exponent": rounded(exponent), "offset": rounded(offset + 2 * math.log10(factor)),
                             "freqs": rounded(freqs[inside]), "line": rounded(line),
                             "peak_hz": rounded(peak),
                             "peak_psd": rounded(np.interp(float(peak), freqs, region_psd) * factor ** 2)
                             if np.isfinite(peak) else None}
    return out


_DESIGNS = {"event-related": "event_related", "steady-state": "steady_state", "resting": "resting"}


def recording_evidence(analysis, source, info, steps):
    """Everything the recording's QC page draws, as one JSON-ready dict.

    Parameters
    ----------
    analysis : heschl.config.Analysis
    source : heschl.features.Source
        The kept trials.
    info : mne.Info
        The recording's info, with positions.
    steps : dict
        ``cleaning`` (the cleaning record), ``entries`` (trial log), ``cell_labels``
        (or None), ``spectra`` ((freqs, before, after) from :func:`channel_spectra`),
        ``ocular`` (:attr:`OcularWatch.record_`), ``line_frequency`` (Hz or None).

    Returns
    -------
    dict
        ``design``, ``spectra``, ``sensors``, ``decisions``, ``ocular`` and one of
        ``event_related``, ``steady_state``, ``resting``.
    """
    paradigm = analysis.paradigm
    freqs, before, after = steps["spectra"]
    sensors = sensor_map(info, source.ch_names, steps["cleaning"])
    out = {"design": paradigm.design,
           "spectra": _spectra_record(freqs, before, after, steps["cleaning"], paradigm.cleaning.pass_band,
                                      steps.get("line_frequency")),
           "sensors": sensors,
           "decisions": dict(decision_matrix(steps["entries"], steps.get("cell_labels"), len(source.ch_names)),
                             channels=list(source.ch_names)),
           "ocular": steps.get("ocular") or {"corrected": False}}
    if paradigm.design == "event-related":
        out["event_related"] = event_related(analysis, source, sensors)
    elif paradigm.design == "steady-state":
        out["steady_state"] = steady_state(analysis, source)
    else:
        out["resting"] = resting(analysis, source)
    return out


def unusable_evidence(analysis, info, cleaning, spectra, line_frequency, stage):
    """What the page of an unusable recording draws: the spectra as far as the stages got
    (harmonised, before cleaning; or as read when harmonising stopped), the sensor map
    where the channels have positions, and the bad-channel detector's statistics per
    channel where cleaning got to them.

    Parameters
    ----------
    analysis : heschl.config.Analysis
    info : mne.Info
    cleaning : dict
        What cleaning decided until it stopped (may be empty).
    spectra : tuple
        ``(freqs, before)`` or ``(freqs, before, after)`` from :func:`channel_spectra`.
    line_frequency : float or None, Hz
    stage : str
        Where the recording stopped.
    """
    freqs, before = spectra[0], spectra[1]
    names = [c for block in before.values() for c in block["channels"]]
    out = {"design": analysis.paradigm.design, "unusable": {"stage": stage},
           "spectra": _spectra_record(freqs, before, {}, cleaning, analysis.paradigm.cleaning.pass_band,
                                      line_frequency),
           "sensors": None, "detector": None}
    located = [c for c in names if np.any(info["chs"][info["ch_names"].index(c)]["loc"][:3])]
    if names and len(located) == len(names):
        out["sensors"] = sensor_map(info, names, dict(cleaning, interpolated=[]))
    if cleaning.get("detector"):
        out["detector"] = {kind: {"unit": _display(kind)[0], "factor": _display(kind)[1],
                                  "limits": (cleaning.get("detector_limits") or {}).get(kind, {}),
                                  "channels": stats, "bad": {c: cleaning["bad_channels"][c] for c in stats
                                                             if c in cleaning.get("bad_channels", {})}}
                           for kind, stats in cleaning["detector"].items()}
    return out
