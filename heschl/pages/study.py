"""The study page: the sites side by side, grand averages, group comparisons, every recording.

Drawn from the written tables and from :func:`heschl.qc.study.study_view`; nothing is
computed here beyond placing what was recorded on axes.
"""
from __future__ import annotations

import logging
import math

from .. import __version__
from .common import CAUTION, PALETTE, colours, css, environment, figure, png

__all__ = ["render_study"]

log = logging.getLogger(__name__)

#: Columns of the distribution grids.
GRID_COLUMNS = 4
#: Highest frequency drawn in the grand-average spectra, Hz.
SPECTRA_TOP_HZ = 50.0


def _plain(text):
    """Text for matplotlib as it is: a "$" would start mathtext."""
    return str(text).replace("$", r"\$")


def _site_colours(sites):
    series = colours()
    return {site: series[i % len(series)] for i, site in enumerate(sites)}


def _strip(ax, panel, sites, palette):
    """One strip plot: values per site, the robust range, site medians, marks."""
    index = {site: i for i, site in enumerate(sites)}
    if panel["low"] is not None:
        ax.axhspan(panel["low"], panel["high"], color=PALETTE["window"], alpha=0.6, lw=0)
    standing = {s["site"] for s in panel["standing_out"]}
    for site in standing:
        ax.axvspan(index[site] - 0.45, index[site] + 0.45, color=PALETTE["rejected"], alpha=0.12, lw=0)
    offsets = {}
    for point in panel["points"]:
        i = index[point["site"]]
        k = offsets.get(i, 0)
        offsets[i] = k + 1
        x = i + (((k % 5) - 2) * 0.07)  # fixed spread within a site, so equal values stay apart
        ax.plot(x, point["value"], "o", ms=5, color=palette[point["site"]], zorder=3,
                mec=PALETTE["rejected"] if point["outside"] else "white", mew=1.8 if point["outside"] else 0.5)
    for entry in panel["sites"]:
        i = index[entry["site"]]
        ax.plot([i - 0.3, i + 0.3], [entry["median"]] * 2, color=PALETTE["contrast"], lw=1.2, zorder=2)
    ax.set_xticks(range(len(sites)))
    ax.set_xticklabels([_plain(s) for s in sites], fontsize=7)
    for tick, site in zip(ax.get_xticklabels(), sites):
        if site in standing:
            tick.set_color(PALETTE["rejected"])
            tick.set_fontweight("bold")
    ax.set_xlim(-0.6, len(sites) - 0.4)
    values = [p["value"] for p in panel["points"]]
    pad = 0.12 * (max(values) - min(values)) or 0.1 * abs(values[0]) or 0.5
    ax.set_ylim(min(values) - pad, max(values) + pad)  # the data set the view; the range band is clipped
    unit = "" if panel["unit"] in ("", "1") else f" ({_plain(panel['unit'])})"
    title = _plain(panel["label"]) + ("  \u25b2 " + ", ".join(_plain(s) for s in sorted(standing)) if standing else "")
    ax.set_title(title, fontsize=8, color=PALETTE["rejected"] if standing else PALETTE["contrast"], loc="left")
    ax.set_ylabel(_plain(panel["unit"]) if unit else "value (1)", fontsize=7)
    ax.tick_params(labelsize=7)


def figure_distributions(panels, sites):
    """A grid of strip plots, one panel per metric or feature; base64 PNG or None."""
    if not panels:
        return None
    ncols = min(GRID_COLUMNS, len(panels))
    nrows = math.ceil(len(panels) / ncols)
    fig, axes = figure(width=2.55 * ncols, height=2.05 * nrows, ncols=ncols, nrows=nrows)
    flat = list(axes.flat) if hasattr(axes, "flat") else [axes]
    palette = _site_colours(sites)
    for ax, panel in zip(flat, panels):
        _strip(ax, panel, sites, palette)
    for ax in flat[len(panels):]:
        ax.set_visible(False)
    fig.supxlabel("site", fontsize=8)
    fig.tight_layout()
    return png(fig)


def _grand_axes(ax, grand, key, styles):
    axis = grand["axis"]
    resting = grand["design"] == "resting"
    shown = [i for i, f in enumerate(axis["values"]) if not resting or f <= SPECTRA_TOP_HZ]
    xs = [axis["values"][i] for i in shown]
    for entry in grand[f"by_{key}"]:
        colour, style = styles(entry)
        ys = [entry["mean"][i] for i in shown]
        label = f"{_plain(entry[key])} {_plain(entry['signal'])} (n={entry['n']})" if resting or len(grand["signals"]) > 1 \
            else f"{_plain(entry[key])} (n={entry['n']})"
        (ax.semilogy if resting else ax.plot)(xs, ys, color=colour, ls=style, lw=1.5, label=label)
    if not resting:
        ax.axhline(0, color=PALETTE["muted"], lw=0.6)
        ax.axvline(0, color=PALETTE["muted"], lw=0.6)
    ax.set_xlabel("frequency (Hz)" if resting else f"time after the marker ({axis['unit']})", fontsize=8)
    unit = grand["unit"]
    label = {"event-related": f"difference wave ({unit})", "steady-state": "ITPC (1)",
             "resting": f"PSD ({unit})"}[grand["design"]]
    ax.set_ylabel(label, fontsize=8)
    if grand["design"] == "steady-state":
        ax.set_ylim(0, 1)
    ax.set_title(f"by {key}", fontsize=9, loc="left")
    ax.legend(frameon=False, fontsize=7)
    ax.tick_params(labelsize=7)


def figure_grand(grand, sites, groups):
    """Grand averages per site (left) and per group (right); base64 PNG or None."""
    if not grand or not grand["by_site"]:
        return None
    fig, axes = figure(width=10.0, height=3.1, ncols=2, nrows=1)
    left, right = axes.flat
    palette = _site_colours(sites)
    signal_style = {s: style for s, style in zip(grand["signals"], ("-", "--", ":", "-."))}
    group_colour = {g: c for g, c in zip(groups, (PALETTE["contrast"], PALETTE["fourth"], PALETTE["third"],
                                                  PALETTE["second"]))}
    _grand_axes(left, grand, "site", lambda e: (palette.get(e["site"], PALETTE["muted"]), signal_style[e["signal"]]))
    _grand_axes(right, grand, "group",
                lambda e: (group_colour.get(e["group"], PALETTE["muted"]), signal_style[e["signal"]]))
    fig.tight_layout()
    return png(fig)


def figure_forest(rows, sites):
    """Hedges' g with its interval per feature: pooled (black) and per site (site colours);
    rows are the summary rows of one paradigm. Base64 PNG or None."""
    features = list(dict.fromkeys(r["feature"] for r in rows if "." not in str(r["feature"])
                                  and r.get("scope") == "pooled" and _finite(r.get("g"))))
    if not features:
        return None
    palette = _site_colours(sites)
    fig, ax = figure(width=7.5, height=0.32 * len(features) + 1.0)
    scopes = [s for s in sites if any(r["scope"] == s for r in rows)] + ["pooled"]
    step = 0.7 / max(len(scopes), 1)
    for i, feature in enumerate(features):
        for k, scope in enumerate(scopes):
            row = next((r for r in rows if r["feature"] == feature and r["scope"] == scope), None)
            if row is None or not _finite(row.get("g")):
                continue
            y = i - 0.35 + k * step
            colour = PALETTE["contrast"] if scope == "pooled" else palette.get(scope, PALETTE["muted"])
            if _finite(row.get("g_low")) and _finite(row.get("g_high")):
                ax.plot([row["g_low"], row["g_high"]], [y, y], color=colour, lw=2.0 if scope == "pooled" else 1.0)
            ax.plot(row["g"], y, "D" if scope == "pooled" else "o", color=colour, ms=5 if scope == "pooled" else 3.5,
                    label=_plain(scope) if i == 0 else None)
    ax.axvline(0, color=PALETTE["muted"], lw=0.8)
    ax.set_yticks(range(len(features)))
    ax.set_yticklabels([_plain(f) for f in features], fontsize=7)
    ax.invert_yaxis()
    ax.set_xlabel("Hedges' g, comparison group minus reference (1), with its 95 % interval", fontsize=8)
    ax.legend(frameon=False, fontsize=7, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    ax.tick_params(labelsize=7)
    return png(fig)


def _finite(value):
    try:
        return math.isfinite(float(value))
    except (TypeError, ValueError):
        return False


def _summary_rows(summary, groups):
    """Summary rows as dicts, with the two groups' columns under fixed keys for the template."""
    if summary is None or not len(summary):
        return [], groups
    records = summary.to_dict("records")
    if groups is None:
        found = [c[len("mean_low_"):] for c in summary.columns if c.startswith("mean_low_")]
        groups = tuple(found[:2]) if len(found) >= 2 else None
    if groups is None:
        return [], None
    out = []
    for r in records:
        out.append(dict(r, ref={k: r.get(f"{k}_{groups[0]}") for k in ("n", "mean", "mean_low", "mean_high")},
                        other={k: r.get(f"{k}_{groups[1]}") for k in ("n", "mean", "mean_low", "mean_high")}))
    return out, groups


def _sections(view, summary_rows):
    sites, groups = view["sites"], view["groups"]
    out = []
    for block in view["paradigms"]:
        paradigm = block["paradigm"]
        rows = [r for r in summary_rows if r.get("paradigm") == paradigm]
        out.append({"paradigm": paradigm, "metrics_png": figure_distributions(block["metrics"], sites),
                    "features_png": figure_distributions(block["features"], sites),
                    "features_stand_out": any(p["standing_out"] for p in block["features"]),
                    "n_metrics": len(block["metrics"]), "n_features": len(block["features"]),
                    "grand": block["grand"], "grand_png": figure_grand(block["grand"], sites, groups),
                    "forest_png": figure_forest(rows, sites), "summary": rows,
                    "pooled": [r for r in rows if r.get("scope") == "pooled" and "." not in str(r["feature"])]})
    return out


def render_study(study_name, table, qc_table, failures, summary, view, groups=None):
    """The study page as HTML text.

    Parameters
    ----------
    study_name : str
    table : pandas.DataFrame
        The study features table (``group/features.tsv``).
    qc_table : pandas.DataFrame
        One row per recording (``group/qc.tsv``).
    failures : list of dict
        ``site``, ``participant_id``, ``paradigm``, ``error`` of each recording that failed.
    summary : pandas.DataFrame or None
        The group summary (:func:`heschl.group.group_summary`).
    view : dict
        :func:`heschl.qc.study.study_view` of the same results.
    groups : (str, str) or None
        ``(reference, other)`` group labels of the summary columns; found from the
        summary's ``mean_low_<group>`` columns when None.
    """
    summary_rows, groups = _summary_rows(summary, groups)
    sections = _sections(view, summary_rows)
    palette = _site_colours(view["sites"])
    log.debug("Study page: %d recording(s), %d failure(s), %d site mark(s)", len(view["recordings"]),
              len(failures), len(view["standing_out"]))
    return environment().get_template("study.html.j2").render(
        css=css() + "\n" + _study_css(), caution=CAUTION, version=__version__, name=study_name, view=view,
        sections=sections, failures=failures, groups=groups, site_colours=palette,
        n_features=int(len(table)))


def _study_css():
    from ..config import builtin_dir

    return (builtin_dir("templates") / "study.css").read_text(encoding="utf-8")
