"""The QC page of one recording, drawn from its recorded results and evidence.

Every figure is drawn from ``evidence`` (:mod:`heschl.qc.evidence`), ``qc`` and
``provenance`` as they read back from their JSON files; nothing is computed here beyond
placing recorded numbers on axes.
"""
from __future__ import annotations

import logging
import math

from .. import __version__
from ..signoff import signoff_fingerprint
from .common import CAUTION, PALETTE, SIGNOFF_META, colours, css, environment, figure, png

__all__ = ["render_recording", "signoff_fingerprint"]

log = logging.getLogger(__name__)

_TYPE_NAMES = {"eeg": "EEG", "mag": "MEG magnetometers", "grad": "MEG gradiometers"}
#: Marker and colour of each bad-channel reason on the sensor maps (shape and colour both differ).
_REASON_STYLE = {"flat": ("s", "third"), "noisy": ("^", "rejected"), "unpredictable": ("D", "fourth"),
                 "study file": ("X", "second")}
_OTHER_REASON = ("P", "contrast")
_ZERO = {"color": PALETTE["muted"], "lw": 0.6}


def _finite(values):
    return [v for v in values if isinstance(v, (int, float)) and math.isfinite(v)]


def _nan(values):
    """None -> NaN, for matplotlib."""
    return [float("nan") if v is None else v for v in values]


def _legend(ax, **kwargs):
    if ax.get_legend_handles_labels()[0]:
        ax.legend(frameon=False, fontsize=8, **kwargs)


def _section(key, title, figures, note=None):
    return {"id": key, "title": title, "figures": [f for f in figures if f], "note": note}


def _figure(key, title, fig, caption):
    return {"id": key, "title": title, "png": png(fig), "caption": caption}


# -- spectra ---------------------------------------------------------------------------------

def figure_spectra(spectra, sensors, kind):
    """Every channel's spectrum before and after cleaning, one sensor type; bad channels highlighted."""
    block = spectra["types"][kind]
    freqs = spectra["freqs"]
    sensors = sensors or {"channels": [], "state": []}
    bad = {c for c, s in zip(sensors["channels"], sensors["state"]) if s != "good"}
    cleaned = bool(_finite([v for row in block["after"] for v in row]))
    panels = (("before", "before cleaning"), ("after", "after cleaning")) if cleaned else \
        (("before", "as the recording stopped (not cleaned)"),)
    fig, axes = figure(9.6 if cleaned else 6.0, 3.0, ncols=len(panels), sharey=True)
    axes = axes if cleaned else [[axes]]
    positive = any(v > 0 for key, _ in panels for v in _finite([v for row in block[key] for v in row]))
    for ax, (key, label) in zip(axes[0], panels):
        lo, hi = spectra["pass_band"]
        ax.axvspan(lo, min(hi, freqs[-1]), color=PALETTE["window"], alpha=0.45, lw=0, label="pass band")
        for name, psd in zip(block["channels"], block[key]):
            # a recording of zeros (flat everywhere) has nothing to show on a log scale
            draw = ax.semilogy if positive else ax.plot
            draw(freqs, _nan(psd), color=PALETTE["second"] if name in bad else PALETTE["first"],
                 lw=1.1 if name in bad else 0.5, alpha=0.9 if name in bad else 0.35)
        for f in spectra.get("line_harmonics", []):
            ax.axvline(f, color=PALETTE["contrast"], lw=0.8, ls=":")
        ax.set_title(label, fontsize=9)
        ax.set_xlabel("frequency (Hz)")
        ax.set_xlim(0, freqs[-1])
    floor = [v for v in _finite([v for row in block["before"] for v in row]) if v > 0]
    if floor:
        # The stop band of the after panel may fall by many decades: show it down to a
        # hundredth of the low end (1st percentile) before cleaning, so the pass band stays
        # readable; a restored reference channel of zeros is not a floor.
        import numpy as np

        axes[0][0].set_ylim(bottom=0.01 * float(np.percentile(floor, 1)))
    axes[0][0].set_ylabel(f"PSD ({block['unit']})")
    axes[0][0].plot([], [], color=PALETTE["first"], lw=0.8, label="channel")
    if bad & set(block["channels"]):
        axes[0][0].plot([], [], color=PALETTE["second"], lw=1.1,
                        label="bad channel (interpolated in cleaning)" if cleaned else "bad channel")
    if spectra.get("line_harmonics"):
        axes[0][0].plot([], [], color=PALETTE["contrast"], lw=0.8, ls=":", label="line frequency, harmonics")
    _legend(axes[0][0], loc="lower left")
    return fig


def _spectra_section(evidence, provenance):
    spectra, sensors = evidence["spectra"], evidence.get("sensors")
    line = spectra.get("line_frequency")
    method = spectra.get("line_method") or "none"
    figures = []
    freqs = spectra["freqs"]
    step = float(freqs[1] - freqs[0]) if len(freqs) > 1 else 0.5
    welch = f"Welch, {1 / step:.3g} s segments, {step:.3g} Hz bins"   # 2 s, 0.5 Hz unless the data are shorter
    for kind in spectra["types"]:
        caption = (f"Thin lines: each {_TYPE_NAMES.get(kind, kind)} channel ({welch}). "
                   f"Look for the line peak{f' at {line:g} Hz' if line else ''} before cleaning and its removal "
                   f"after ({method}), channels standing apart from the bundle, and a smooth fall outside the "
                   "shaded pass band.") if not evidence.get("unusable") else (
                   f"Thin lines: each {_TYPE_NAMES.get(kind, kind)} channel ({welch}), "
                   "as harmonised (or as read where harmonising stopped); cleaning did not finish. Look for "
                   "channels standing apart from the bundle (flat ones far below, noisy ones above) and for "
                   f"the line peak{f' at {line:g} Hz' if line else ''}.")
        figures.append(_figure(f"spectra-{kind}", f"Spectra of every channel, {_TYPE_NAMES.get(kind, kind)}",
                               figure_spectra(spectra, sensors, kind), caption))
    return _section("spectra", "Spectra before and after cleaning", figures)


# -- the bad-channel detector, for a recording that stopped ------------------------------------

#: The detector's statistics the page draws: key, axis label, log scale, limit (from the
#: recorded limits: name and whether it is a lower or an upper limit).
_DETECTOR_PANELS = (
    ("amplitude", "robust amplitude ({unit})", True, None),
    ("amplitude_z", "amplitude, robust z over channels", False, ("noisy_z", "upper")),
    ("poor_fraction", "fraction of poor windows", False, ("max_unpredictable", "upper")),
    ("nearest_distance_ratio", "electrical distance to nearest / typical", True, ("bridge_ratio", "lower")),
)


def figure_detector(block):
    """Each channel's detector statistics, one sensor type, bad channels highlighted, limits drawn."""
    names = list(block["channels"])
    bad = set(block["bad"])
    fig, axes = figure(9.6, 5.0, nrows=2, ncols=2)
    x = list(range(len(names)))
    for ax, (key, label, log_scale, limit) in zip([a for row in axes for a in row], _DETECTOR_PANELS):
        factor = block["factor"] if key == "amplitude" else 1.0
        values = [block["channels"][c].get(key) for c in names]
        shown = [float("nan") if v is None else v * factor for v in values]
        colours_ = [PALETTE["second"] if c in bad else PALETTE["first"] for c in names]
        ax.scatter(x, shown, s=12, c=colours_, zorder=3)
        if limit and limit[0] in block["limits"]:
            ax.axhline(block["limits"][limit[0]], color=PALETTE["rejected"], lw=1.0, ls="--",
                       label=f"limit {limit[0]} = {block['limits'][limit[0]]:g} ({limit[1]})")
            _legend(ax, loc="best")
        if log_scale and _finite(shown) and min(_finite(shown)) > 0:
            ax.set_yscale("log")
        ax.set_ylabel(label.format(unit=block["unit"]), fontsize=8)
        step = max(1, len(names) // 32)
        ax.set_xticks(x[::step], names[::step], rotation=90, fontsize=6)
    axes[1][0].set_xlabel("channel")
    axes[1][1].set_xlabel("channel")
    return fig


def _detector_section(evidence):
    detector = evidence.get("detector") or {}
    figures = [_figure(f"detector-{kind}", f"Bad-channel statistics, {_TYPE_NAMES.get(kind, kind)}",
                       figure_detector(block),
                       f"Orange: the {len(block['bad'])} of {len(block['channels'])} channels found bad. Each "
                       "statistic compares a channel with the recording's own channels; dashed lines are the "
                       "limits. Look for whether the bad channels are a few outliers or most of the cap "
                       "(a loose reference or ground makes every channel bad).")
               for kind, block in detector.items()]
    return _section("detector", "Why channels were found bad", figures,
                    None if figures else "Cleaning did not get to the bad-channel detector.")


# -- sensor maps -----------------------------------------------------------------------------

def _head(ax, radius):
    import numpy as np

    t = np.linspace(0, 2 * np.pi, 200)
    style = {"color": PALETTE["outline"], "lw": 1.2}
    ax.plot(radius * np.cos(t), radius * np.sin(t), **style)
    ax.plot([-0.12 * radius, 0, 0.12 * radius], [0.99 * radius, 1.12 * radius, 0.99 * radius], **style)
    for side in (-1, 1):
        ax.plot(side * radius * np.array([1.0, 1.06, 1.08, 1.06, 1.0]),
                radius * np.array([0.15, 0.12, 0.0, -0.12, -0.15]), **style)


def figure_sensor_map(sensors, kind):
    """Positions of one sensor type on the head, bad channels by reason, interpolated ones ringed."""
    fig, ax = figure(4.2, 4.2)
    rows = [i for i, t in enumerate(sensors["types"]) if t == kind]
    radius = sensors["head_radius"]
    _head(ax, radius)
    xs, ys = [sensors["x"][i] or 0.0 for i in rows], [sensors["y"][i] or 0.0 for i in rows]
    good = [i for i in rows if sensors["state"][i] == "good"]
    ax.scatter([sensors["x"][i] for i in good], [sensors["y"][i] for i in good], s=14, color=PALETTE["muted"],
               label="good", zorder=2)
    for reason in dict.fromkeys(sensors["state"][i] for i in rows if sensors["state"][i] != "good"):
        marker, role = _REASON_STYLE.get(reason, _OTHER_REASON)
        chosen = [i for i in rows if sensors["state"][i] == reason]
        ax.scatter([sensors["x"][i] for i in chosen], [sensors["y"][i] for i in chosen], s=60, marker=marker,
                   color=PALETTE[role], label=f"bad: {reason}", zorder=3)
        for i in chosen:
            ax.annotate(sensors["channels"][i], (sensors["x"][i], sensors["y"][i]), fontsize=7,
                        xytext=(4, 4), textcoords="offset points")
    ringed = [i for i in rows if sensors["interpolated"][i]]
    if ringed:
        ax.scatter([sensors["x"][i] for i in ringed], [sensors["y"][i] for i in ringed], s=150,
                   facecolors="none", edgecolors=PALETTE["contrast"], lw=1.0, label="interpolated", zorder=4)
    extent = max([1.2 * radius] + [abs(v) * 1.08 for v in xs + ys])
    ax.set_xlim(-extent, extent)
    ax.set_ylim(-extent, extent)
    ax.set_aspect("equal")
    ticks = [-0.1, 0.0, 0.1]
    ax.set_xticks(ticks, [f"{t * 100:g}" for t in ticks])
    ax.set_yticks(ticks, [f"{t * 100:g}" for t in ticks])
    ax.set_xlabel("left - right on the projection (cm)")
    ax.set_ylabel("back - front (cm)")
    ax.set_title(f"{_TYPE_NAMES.get(kind, kind)}: {len(rows)} channels", fontsize=9)
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def _sensor_section(evidence):
    sensors = evidence["sensors"]
    figures = []
    for kind in dict.fromkeys(sensors["types"]):
        n_bad = sum(1 for t, s in zip(sensors["types"], sensors["state"]) if t == kind and s != "good")
        figures.append(_figure(f"map-{kind}", f"Sensor map, {_TYPE_NAMES.get(kind, kind)}",
                               figure_sensor_map(sensors, kind),
                               f"{n_bad} bad channel(s), marked by the kind of reason and ringed when interpolated. "
                               "Look for bad channels that cluster (a loose cap region or a bridge) rather than "
                               "scattered single channels. Nose up; positions projected from the montage."))
    return _section("sensors", "Sensors: bad and interpolated channels", figures)


# -- rejection -------------------------------------------------------------------------------

_CODE_ROLES = {"0": "kept", "1": "interpolated", "2": "rejected", "3": "dropped", "4": "skipped"}


def figure_decisions(decisions):
    """Trials x channels image of the decision for every cell, with the condition of each trial."""
    from matplotlib.colors import ListedColormap
    from matplotlib.patches import Patch

    cells = decisions["cells"]
    channels = decisions["channels"]
    codes = sorted(decisions["codes"])
    grid = [[int(c) for c in row] for row in cells] or [[4] * len(channels)]
    height = min(6.0, 2.2 + 0.006 * len(cells))
    fig, axes = figure(9.6, height, ncols=2, gridspec_kw={"width_ratios": [1, 40], "wspace": 0.02})
    stripe_ax, ax = axes[0]
    cmap = ListedColormap([PALETTE[_CODE_ROLES[c]] for c in codes])
    ax.imshow(grid, aspect="auto", interpolation="nearest", cmap=cmap, vmin=-0.5, vmax=len(codes) - 0.5)
    names = list(dict.fromkeys(decisions["conditions"]))
    series = colours()
    stripe = [[names.index(c)] for c in decisions["conditions"]] or [[0]]
    stripe_ax.imshow(stripe, aspect="auto", interpolation="nearest",
                     cmap=ListedColormap(series[:max(1, len(names))]), vmin=-0.5, vmax=max(1, len(names)) - 0.5)
    stripe_ax.set_xticks([])
    stripe_ax.set_ylabel("trial (in recording order)")
    ax.set_yticks([])
    step = max(1, len(channels) // 40)
    ax.set_xticks(range(0, len(channels), step), channels[::step], rotation=90, fontsize=6)
    ax.set_xlabel("channel")
    handles = [Patch(color=PALETTE[_CODE_ROLES[c]], label=decisions["codes"][c]) for c in codes]
    handles += [Patch(color=series[i], label=f"condition: {n}") for i, n in enumerate(names)]
    ax.legend(handles=handles, frameon=False, fontsize=7, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def figure_kept(trials):
    """Kept trials against the minimum, per condition."""
    fig, ax = figure(4.2, 2.6)
    names = list(trials)
    planned = [trials[c]["planned"] for c in names]
    kept = [trials[c]["kept"] for c in names]
    ax.bar(names, planned, color=PALETTE["kept"], label="planned")
    ax.bar(names, kept, width=0.5, color=PALETTE["first"], label="kept")
    for i, c in enumerate(names):
        ax.plot([i - 0.4, i + 0.4], [trials[c]["minimum"]] * 2, color=PALETTE["rejected"], lw=2,
                label="minimum" if i == 0 else None)
    ax.set_xlabel("condition")
    ax.set_ylabel("trials (count)")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def _rejection_section(evidence, qc, provenance):
    method = provenance["steps"]["rejection"].get("method", "none")
    decisions = dict(evidence["decisions"])
    image = _figure("decisions", "Decision for every trial and channel", figure_decisions(decisions),
                    f"Rejection method: {method}. Rows are trials, columns channels. Look for whole columns "
                    "(one channel failing throughout: a bad channel detection missed), bands of rows (a noisy "
                    "stretch), and interpolation piling up on a few channels.")
    kept = _figure("kept", "Kept trials per condition", figure_kept(qc["trials"]),
                   "Bars: planned and kept trials; red line: the paradigm's minimum. A kept bar below its line "
                   "means too few trials for the features of that condition.")
    return _section("rejection", "Rejection", [image, kept])


# -- ocular ----------------------------------------------------------------------------------

def figure_components(ica):
    """Correlation of each ICA component with each EOG source; removed components marked."""
    fig, ax = figure(6.4, 2.6)
    rows = ica["correlations"]
    n = len(rows)
    width = 0.8 / max(1, len(ica["sources"]))
    for j, (colour, name) in enumerate(zip(colours(), ica["sources"])):
        ax.bar([k + j * width for k in range(n)], [abs(r[j] or 0.0) for r in rows], width=width, color=colour,
               label=f"|r| with {name}")
    ax.axhline(ica["threshold"], color=PALETTE["rejected"], lw=1, ls="--", label="removal threshold")
    for k in ica["excluded"]:
        ax.annotate("removed", (k, min(1.0, max(abs(v or 0.0) for v in rows[k]) + 0.03)), fontsize=7,
                    ha="center")
    ax.set_ylim(0, 1.1)
    ax.set_xticks(range(n))
    ax.set_xlabel("ICA component")
    ax.set_ylabel("|correlation| (unitless)")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


#: Property columns of the component table: key, heading, digits.
_PROPERTY_COLUMNS = (("frontal", "frontal pole", 3), ("lateral", "lateral frontal", 3), ("mirror", "left-right", 2),
                     ("veog", "|r| vEOG", 2), ("heog", "|r| hEOG", 2), ("low", "share < 4 Hz", 2),
                     ("kurtosis", "kurtosis", 3))
_KIND_NAMES = {"blink": "blink", "saccade": "horizontal eye movement", "eog": "correlated with EOG"}


def figure_component_maps(ica, sensors):
    """Topography of each removed component on the sensor positions (colour: relative weight)."""
    removed = ica["excluded"][:4]
    fig, axes = figure(2.6 * len(removed) + 0.8, 2.9, ncols=len(removed))
    axes = [[axes]] if len(removed) == 1 else axes
    where = {c: i for i, c in enumerate(sensors["channels"])}
    for ax, k in zip(axes[0], removed):
        chans = [c for c in ica["channels"] if c in where]
        weights = [ica["patterns"][str(k)][ica["channels"].index(c)] or 0.0 for c in chans]
        _head(ax, sensors["head_radius"])
        dots = ax.scatter([sensors["x"][where[c]] for c in chans], [sensors["y"][where[c]] for c in chans],
                          c=weights, cmap="RdBu_r", vmin=-1, vmax=1, s=28, edgecolors=PALETTE["outline"],
                          linewidths=0.3, zorder=3)
        ax.set_title(f"component {k}: {_KIND_NAMES.get(ica['kinds'][str(k)], ica['kinds'][str(k)])}", fontsize=8)
        ax.set_aspect("equal")
        ax.set_xticks([])
        ax.set_yticks([])
        extent = 1.25 * sensors["head_radius"]
        ax.set_xlim(-extent, extent)
        ax.set_ylim(-extent, extent)
    fig.colorbar(dots, ax=list(axes[0]), shrink=0.8, label="weight / largest weight")
    return fig


def _component_table(ica):
    """Every component's properties, the limits, and the decision, as a section table."""
    limits = ica["limits"] or {}
    head = ["component"] + [title for _, title, _ in _PROPERTY_COLUMNS] + ["decision"]
    rows = []
    for k, props in enumerate(ica["properties"]):
        kind = ica["kinds"].get(str(k))
        rows.append({"cls": "short" if kind else "",
                     "cells": [str(k)] + [_num(props.get(key), d) for key, _, d in _PROPERTY_COLUMNS]
                     + [f"removed: {_KIND_NAMES.get(kind, kind)}" if kind else "kept"]})
    for kind, rules in limits.items():
        rows.append({"cls": "limits", "cells": [f"{_KIND_NAMES.get(kind, kind)} needs"] + [
            (f"{'≥' if rules[key][0] == 'min' else '≤'} {rules[key][1]:g}" if key in rules else "")
            for key, _, _ in _PROPERTY_COLUMNS] + ["every limit"]})
    return {"head": head, "rows": rows}


def _num(value, digits):
    from .common import num

    return num(value, digits)


def figure_weights(regression):
    """Regression weights (propagation factors) per corrected channel and source."""
    fig, ax = figure(9.6, 2.6)
    channels = regression["channels"]
    width = 0.8 / max(1, len(regression["sources"]))
    for j, (colour, name) in enumerate(zip(colours(), regression["sources"])):
        ax.bar([k + j * width for k in range(len(channels))], [w[j] or 0.0 for w in regression["weights"]],
               width=width, color=colour, label=name)
    ax.axhline(0, **_ZERO)
    ax.set_xticks(range(len(channels)), channels, rotation=90, fontsize=6)
    ax.set_xlabel("corrected channel")
    ax.set_ylabel("weight (V per V of EOG)")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def figure_blinks(blinks):
    """Blink-locked averages before (dashed) and after (solid) correction, a few channels."""
    fig, ax = figure(6.4, 2.8)
    times = [t * 1e3 for t in blinks["times"]]
    for colour, name, before, after in zip(colours(), blinks["channels"], blinks["before"],
                                           blinks["after"] or [None] * len(blinks["channels"])):
        ax.plot(times, _nan(before), color=colour, lw=1.0, ls="--" if after else "-", alpha=0.6 if after else 1.0,
                label=f"{name} before" if after else name)
        if after:
            ax.plot(times, _nan(after), color=colour, lw=1.6, label=f"{name} after")
    ax.axvline(0, **_ZERO)
    ax.axhline(0, **_ZERO)
    ax.set_xlabel("time from blink peak (ms)")
    ax.set_ylabel(f"average ({blinks['unit']})")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0), ncol=1)
    return fig


def _ocular_section(evidence):
    ocular = evidence["ocular"]
    figures, notes = [], []
    table = None
    ica = ocular.get("ica")
    if ica and ica.get("selection") == "properties":
        if ica["excluded"] and ica.get("patterns") and evidence.get("sensors"):
            figures.append(_figure("ica-maps", "Removed ICA components", figure_component_maps(ica, evidence["sensors"]),
                                   "Topography of each removed component (red and blue: opposite polarity). A blink "
                                   "sits at the frontal pole, the same on both sides; a horizontal eye movement is "
                                   "positive on one side of the front and negative on the other. A removed component "
                                   "whose weight reaches the centre or the back of the head took brain signal."))
        table = _component_table(ica)
        notes.append(f"No EOG channel: ICA components were judged by their properties (table); "
                     f"{len(ica['excluded'])} of {len(ica['properties'])} removed.")
    elif ica:
        figures.append(_figure("ica", "ICA components and the eye signal", figure_components(ica),
                               "Components above the dashed threshold were removed when their time course was "
                               "also slow and heavy-tailed (table). Look for one or two clear ocular components; "
                               "many removed components mean brain signal went with them."))
        if ica.get("properties"):
            table = _component_table(ica)
    if ocular.get("regression"):
        figures.append(_figure("weights", "Regression weights", figure_weights(ocular["regression"]),
                               "Fraction of the EOG subtracted from each channel. Expect the largest weights "
                               "frontally, falling towards the back of the head."))
    blinks = ocular.get("blinks")
    if blinks and blinks.get("before"):
        title = ("Blink-locked average before and after correction" if blinks.get("after")
                 else "Blink-locked average (not corrected)")
        figures.append(_figure("blinks", title, figure_blinks(blinks),
                               f"{blinks['n']} blinks found on {blinks['source']}. After correction the frontal "
                               "channels should stay flat where the blink peaks; a residual hump is blink left in."))
    if ocular.get("missing"):
        notes.append(f"Correction: {ocular['missing']}.")
    if ocular.get("blinks_missing"):
        notes.append(f"Blink-locked average: {ocular['blinks_missing']}.")
    elif blinks is not None and not blinks.get("before"):
        notes.append(f"No blinks found on {blinks['source']}: no blink-locked average.")
    section = _section("ocular", "Ocular artefacts", figures, " ".join(notes) or None)
    section["table"] = table
    return section


# -- the design's figures --------------------------------------------------------------------

def figure_waves(er):
    """Region-mean condition averages and difference waves, windows shaded, bootstrap band."""
    fig, ax = figure(6.4, 3.0)
    times = [t * 1e3 for t in er["times"]]
    for lo, hi in er["windows"]:
        ax.axvspan(lo * 1e3, hi * 1e3, color=PALETTE["window"], alpha=0.6, lw=0)
    for colour, (name, wave) in zip(colours(), er["waves"].items()):
        band = er["bands"].get(name)
        if band:
            ax.fill_between(times, _nan(band["low"]), _nan(band["high"]), color=colour, alpha=0.18, lw=0,
                            label=f"{name}: {er['level']:.0%} bootstrap band")
        ax.plot(times, _nan(wave), color=colour, lw=2.0 if band else 1.4, label=name)
    ax.axhline(0, **_ZERO)
    ax.axvline(0, **_ZERO)
    ax.set_xlabel("time after marker (ms)")
    ax.set_ylabel(f"{er['region']} mean ({er['unit']})")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def figure_butterfly(er, kind):
    block = er["butterfly"][kind]
    fig, ax = figure(6.4, 2.8)
    times = [t * 1e3 for t in er["times"]]
    for lo, hi in er["windows"]:
        ax.axvspan(lo * 1e3, hi * 1e3, color=PALETTE["window"], alpha=0.6, lw=0)
    for wave in block["waves"]:
        ax.plot(times, _nan(wave), color=PALETTE["first"], lw=0.6, alpha=0.5)
    ax.axhline(0, **_ZERO)
    ax.axvline(0, **_ZERO)
    ax.set_xlabel("time after marker (ms)")
    ax.set_ylabel(f"{er['butterfly_signal']} ({block['unit']})")
    return fig


def figure_topographies(er, kind):
    """The difference wave's mean over each measure window on the head (mne's plot_topomap)."""
    import numpy as np
    from mne.viz import plot_topomap

    block = er["topographies"][kind]
    maps = block["windows"]
    fig, axes = figure(2.4 * max(1, len(maps)) + 0.6, 2.6, ncols=max(1, len(maps)))
    axes = [axes] if len(maps) <= 1 else list(axes[0])
    pos = np.column_stack([block["x"], block["y"]])
    values = [v for m in maps for v in _finite(m["values"])]
    limit = max((abs(v) for v in values), default=1.0) or 1.0
    # Root mean squares of co-located sensors have no sign: a one-sided scale for them.
    cmap, vlim = ("Reds", (0.0, limit)) if block.get("combined") else ("RdBu_r", (-limit, limit))
    image = None
    for ax, m in zip(axes, maps):
        image, _ = plot_topomap(np.array(_nan(m["values"])), pos, axes=ax, show=False, cmap=cmap,
                                vlim=vlim, sphere=(0.0, 0.0, 0.0, er.get("head_radius", 0.095)),
                                contours=4, sensors=True, res=40, image_interp="linear")
        ax.set_title(f"{m['window'][0] * 1e3:g}-{m['window'][1] * 1e3:g} ms", fontsize=9)
    if image is not None:
        bar = fig.colorbar(image, ax=axes, shrink=0.8)
        what = "RMS of pair" if block.get("combined") else er["butterfly_signal"]
        bar.set_label(f"{what} ({block['unit']})")
    return fig


def _event_section(evidence):
    er = evidence["event_related"]
    shown = er.get("butterfly_signal")
    figures = [_figure("waves", "Condition averages and difference waves", figure_waves(er),
                       f"Region {er['region']}; shaded: the measure windows; band: {er['level']:.0%} bootstrap "
                       f"band of the difference wave ({er['resamples']} trial resamples). Check that the "
                       "difference wave leaves zero inside its window and the band does not straddle zero there.")]
    for kind in er.get("butterfly", {}):
        name = _TYPE_NAMES.get(kind, kind)
        figures.append(_figure(f"butterfly-{kind}", f"Butterfly: {shown}, every channel, {name}",
                               figure_butterfly(er, kind),
                               f"Each line is one channel's {shown} wave. Look for one channel far outside the "
                               "bundle (a bad channel left in) and for a common deflection in the windows."))
        if er["topographies"][kind]["windows"]:
            figures.append(_figure(f"topo-{kind}", f"Topography of {shown} over each measure window, {name}",
                                   figure_topographies(er, kind),
                                   "Mean over each window, nose up. An auditory mismatch response is "
                                   "fronto-central (negative at Fz, positive at the mastoids under an average "
                                   "reference); a single hot spot at one sensor is an artefact."))
    return _section("erp", "Event-related responses", figures)


def figure_tf(ss, cond, key, label, vmax=None):
    block = ss["conditions"][cond]
    fig, ax = figure(4.6, 2.8)
    times, freqs = ss["tf_times"], ss["tf_freqs"]
    step_t = (times[1] - times[0]) if len(times) > 1 else 1.0
    step_f = (freqs[1] - freqs[0]) if len(freqs) > 1 else 1.0
    extent = [(times[0] - step_t / 2) * 1e3, (times[-1] + step_t / 2) * 1e3, freqs[0] - step_f / 2,
              freqs[-1] + step_f / 2]
    image = ax.imshow([_nan(r) for r in block[key]], aspect="auto", origin="lower", extent=extent,
                      cmap="viridis", vmin=0, vmax=vmax, interpolation="nearest")
    ax.axvline(0, color="#ffffff", lw=0.8, ls="--")
    ax.axhline(ss["frequency"], color="#ffffff", lw=0.6, ls=":")
    ax.set_xlabel("time after train onset (ms)")
    ax.set_ylabel("frequency (Hz)")
    fig.colorbar(image, ax=ax).set_label(label)
    return fig


def figure_itpc(ss):
    fig, ax = figure(6.4, 2.8)
    times = [t * 1e3 for t in ss["times"]]
    for colour, (cond, block) in zip(colours(), ss["conditions"].items()):
        ax.plot(times, _nan(block["itpc"]), color=colour, lw=1.6, label=cond)
        if block.get("prestim_itpc") is not None:
            ax.axhline(block["prestim_itpc"], color=colour, lw=1.0, ls="--", label=f"{cond}: pre-stimulus level")
        if block.get("critical_itpc") is not None:
            ax.axhline(block["critical_itpc"], color=colour, lw=0.8, ls=":",
                       label=f"{cond}: chance (Rayleigh p = 0.05, n = {block['n_trials']})")
    ax.axvline(0, **_ZERO)
    ax.set_ylim(0, 1)
    ax.set_xlabel("time after train onset (ms)")
    ax.set_ylabel(f"ITPC at {ss['frequency']:g} Hz (0-1)")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def _steady_section(evidence):
    ss = evidence["steady_state"]
    figures = [_figure("itpc", "Phase coherence over the train", figure_itpc(ss),
                       f"Region {ss['region']}. ITPC should rise well above its pre-stimulus level (dashed) after "
                       "onset, stay up during the train and fall after it; below the dotted chance line it is "
                       "not a response.")]
    for cond in ss["conditions"]:
        figures.append(_figure(f"tf-itpc-{cond}", f"ITPC over time and frequency, {cond}",
                               figure_tf(ss, cond, "tf_itpc", "ITPC (0-1)", vmax=1.0),
                               f"Look for a band at {ss['frequency']:g} Hz (dotted) during the train only; "
                               "coherence spread over all frequencies at onset is the onset response."))
        figures.append(_figure(f"tf-power-{cond}", f"Evoked power over time and frequency, {cond}",
                               figure_tf(ss, cond, "tf_evoked_power", f"evoked power ({ss['power_unit']})"),
                               "Power of the average: the steady-state response should sit at the stimulation "
                               "frequency during the train."))
    return _section("ssr", "Steady-state response", figures)


def figure_rest(rest):
    fig, ax = figure(6.4, 3.2)
    freqs = rest.get("freqs", [])
    for i, (name, (lo, hi)) in enumerate(rest["bands"].items()):
        ax.axvspan(lo, hi, color=PALETTE["window"] if i % 2 == 0 else PALETTE["kept"], alpha=0.6, lw=0)
        ax.text((lo + hi) / 2, 1.0, name, transform=ax.get_xaxis_transform(), ha="center", va="bottom",
                fontsize=7)
    for colour, (cond, psd) in zip(colours(), rest["psd"].items()):
        ax.semilogy(freqs, _nan(psd), color=colour, lw=1.6, label=cond)
        fit = rest["fits"][cond]
        ax.semilogy(fit["freqs"], _nan(fit["line"]), color=colour, lw=1.0, ls="--",
                    label=f"{cond}: aperiodic fit (exponent {fit['exponent']:.2f})" if fit["exponent"] is not None
                    else f"{cond}: aperiodic fit")
        if fit.get("peak_hz") is not None and fit.get("peak_psd") is not None:
            ax.plot([fit["peak_hz"]], [fit["peak_psd"]], marker="v", color=colour, ms=7, ls="none",
                    label=f"{cond}: alpha peak {fit['peak_hz']:.1f} Hz")
    inside = [p for psd in rest["psd"].values() for f, p in zip(freqs, psd)
              if p and rest["pass_band"][0] <= f <= rest["pass_band"][1]]
    if inside:
        ax.set_ylim(bottom=0.5 * min(inside))
    ax.set_xlim(0, rest["pass_band"][1] + 5.0)
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel(f"{rest['region']} PSD ({rest['unit']})")
    _legend(ax, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    return fig


def _rest_section(evidence):
    rest = evidence["resting"]
    return _section("rest", "Resting spectra", [_figure(
        "rest-spectra", "Spectra per condition", figure_rest(rest),
        f"Region {rest['region']}; shaded: the feature set's bands. Eyes-closed alpha should stand above eyes-open "
        "alpha at the marked peak; the dashed aperiodic fit should follow the spectrum outside the peaks.")])


_DESIGN_SECTIONS = {"event-related": _event_section, "steady-state": _steady_section, "resting": _rest_section}


# -- the page --------------------------------------------------------------------------------

def _truthy(value):
    if isinstance(value, str):
        return value.strip().lower() in ("true", "1", "yes")
    return bool(value) and not (isinstance(value, float) and math.isnan(value))


def _text(value):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return str(value)


def _rows(rows):
    """Feature rows as the table shows them: booleans parsed, missing text empty."""
    out = []
    for row in rows:
        r = dict(row)
        r["low_reliability"] = _truthy(r.get("low_reliability"))
        for key in ("flags", "unit", "signal", "region", "window", "feature"):
            r[key] = _text(r.get(key))
        out.append(r)
    return out


def _detector_rows(detector):
    """The detector's statistics as table rows, bad channels first (None without a detector record)."""
    if not detector:
        return None
    rows = []
    for kind, block in detector.items():
        for name, stats in block["channels"].items():
            rows.append(dict(stats, channel=name, kind=kind, unit=block["unit"],
                             amplitude_shown=None if stats.get("amplitude") is None else stats["amplitude"] * block["factor"],
                             reason=block["bad"].get(name)))
    return sorted(rows, key=lambda r: (r["reason"] is None, r["kind"], r["channel"]))


def render_recording(recording, qc, rows, provenance, evidence, signoff=None):
    """The QC page of one recording, as HTML text.

    Parameters
    ----------
    recording : heschl.inputs.Recording
        For ``participant_id``, ``paradigm``, ``site``, ``group`` and ``stem``.
    qc, provenance, evidence : dict
        As read back from their JSON files (None for missing numbers).
    rows : list of dict
        The features table (values may be NaN or None).
    signoff : dict or None
        The reviewer's decision as :func:`heschl.signoff.signoff_for` gives it.
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    design = evidence["design"]
    if evidence.get("unusable"):
        # Stopped before features: the evidence that led there, nothing drawn that was not recorded.
        sections = [_spectra_section(evidence, provenance)]
        sections += [_sensor_section(evidence)] if evidence.get("sensors") else []
        sections += [_detector_section(evidence)]
    else:
        sections = [_spectra_section(evidence, provenance), _sensor_section(evidence),
                    _rejection_section(evidence, qc, provenance), _ocular_section(evidence),
                    _DESIGN_SECTIONS[design](evidence)]
    log.debug("Page of %s: verdict %s, %d flag(s)", recording.stem, qc["verdict"], len(qc["flags"]))
    return environment().get_template("recording.html.j2").render(
        css=css(), caution=CAUTION, version=__version__, recording=recording, qc=qc, rows=_rows(rows),
        sections=sections, provenance=provenance, signoff=signoff, signoff_meta=SIGNOFF_META,
        detector=_detector_rows(evidence.get("detector")),
        fingerprint=signoff_fingerprint(signoff))
