"""QC pages: figures and HTML from recorded results (never recomputed here).

Pages are self-contained: CSS is inlined from ``templates/style.css`` and figures are
embedded as base64 PNG, so they open offline.
"""
from __future__ import annotations

import base64
import io
import logging

from . import __version__

__all__ = ["render_recording", "render_study", "CAUTION"]

log = logging.getLogger(__name__)

CAUTION = ("Research software, not a medical device. These pages support quality review of research "
           "recordings; clinical interpretation belongs to licensed practice and local rules.")

# heschl's own palette: one colour per role, used on every page.
PALETTE = {"first": "#1b6f8a", "second": "#c0542c", "contrast": "#3b3b3b", "window": "#e8d9a8",
           "third": "#6a8a2b"}


def _environment():
    from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

    from .config import builtin_dir

    env = Environment(loader=FileSystemLoader(str(builtin_dir("templates"))),
                      autoescape=select_autoescape(["html", "j2"]), undefined=StrictUndefined)
    env.filters["num"] = _num
    return env


def _num(value, digits=3):
    try:
        value = float(value)
    except (TypeError, ValueError):
        return "n/a"
    if value != value:
        return "n/a"
    return f"{value:.{digits}g}"


def _css():
    from .config import builtin_dir

    return (builtin_dir("templates") / "style.css").read_text(encoding="utf-8")


def _png(fig):
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90, bbox_inches="tight")
    plt.close(fig)
    return base64.b64encode(buf.getvalue()).decode("ascii")


def _figure():
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(6.4, 3.0))
    ax.spines[["top", "right"]].set_visible(False)
    return fig, ax


def _colours():
    return [PALETTE["first"], PALETTE["second"], PALETTE["contrast"], PALETTE["third"]]


def _plot_courses(ax, curves, key):
    """Draw each named course of ``curves[key]`` over ``curves["times"]`` (s, shown in ms)."""
    times = [t * 1e3 for t in curves["times"]]
    for colour, (name, course) in zip(_colours(), curves.get(key, {}).items()):
        ax.plot(times, course, color=colour, lw=1.6, label=name)


def _finish(fig, ax, xlabel, ylabel):
    """Label the axes, add the legend and return the figure as base64 PNG."""
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.legend(frameon=False, fontsize=8)
    return _png(fig)


def figure_waves(curves):
    """Region-mean condition averages and difference waves, measurement windows shaded."""
    fig, ax = _figure()
    for lo, hi in curves.get("windows", []):
        ax.axvspan(lo * 1e3, hi * 1e3, color=PALETTE["window"], alpha=0.5, lw=0)
    _plot_courses(ax, curves, "waves")
    ax.axhline(0, color="#999999", lw=0.6)
    ax.axvline(0, color="#999999", lw=0.6)
    return _finish(fig, ax, "time after marker (ms)",
                   f"{curves.get('region', '')} mean ({curves.get('unit', 'uV')})")


def figure_itpc(curves):
    """ITPC at the stimulation frequency over time, region mean."""
    fig, ax = _figure()
    _plot_courses(ax, curves, "itpc")
    ax.axvline(0, color="#999999", lw=0.6)
    ax.set_ylim(0, 1)
    return _finish(fig, ax, "time after train onset (ms)",
                   f"ITPC at {curves.get('frequency', 0):g} Hz")


def figure_spectra(curves):
    """Region-mean spectra per condition, log power."""
    fig, ax = _figure()
    for colour, (name, psd) in zip(_colours(), curves.get("psd", {}).items()):
        ax.semilogy(curves["freqs"], psd, color=colour, lw=1.6, label=name)
    unit = curves.get("unit", "uV")
    shown = f"({unit})" if "/" in unit else unit
    ax.set_xlim(0, curves["pass_band"][1] + 5.0)
    ax.set_ylim(bottom=_floor(curves))
    return _finish(fig, ax, "frequency (Hz)", f"{curves.get('region', '')} PSD ({shown}^2/Hz)")


def _floor(curves):
    """Lower y limit: the smallest PSD value inside the pass band, so the stop band does not squash the plot."""
    lo, hi = curves["pass_band"]
    inside = [p for psd in curves.get("psd", {}).values()
              for f, p in zip(curves["freqs"], psd) if lo <= f <= hi and p > 0]
    return 0.5 * min(inside) if inside else None


def _main_figure(design, curves):
    if design == "event-related":
        return ("Condition averages and difference waves", figure_waves(curves),
                "Shaded: measurement windows of the feature set. Check that the difference wave's deflection "
                "falls inside its window and that the averages look like auditory responses, not noise or drift.")
    if design == "steady-state":
        return ("Phase coherence over the train", figure_itpc(curves),
                "ITPC should rise after onset, stay high during the train and fall after it; flat ITPC "
                "near its pre-stimulus level means no usable steady-state response.")
    return ("Resting spectra", figure_spectra(curves),
            "Eyes-closed alpha (8-13 Hz) should stand above eyes-open alpha; narrow peaks at 50/60 Hz "
            "above the pass band are line noise.")


def render_recording(recording, result, design):
    """The QC page of one recording, as HTML text."""
    title, image, hint = _main_figure(design, result["curves"])
    log.debug("Page of %s: verdict %s, %d flag(s)", recording.stem, result["qc"]["verdict"],
              len(result["qc"]["flags"]))
    return _environment().get_template("recording.html.j2").render(
        css=_css(), caution=CAUTION, version=__version__, recording=recording, qc=result["qc"],
        rows=result["rows"], figure={"title": title, "png": image, "hint": hint},
        provenance=result["provenance"])


def render_study(study_name, table, qc_table, failures, summary=None):
    """The study page: verdicts per recording, and group effects per site and pooled."""
    rows = summary.to_dict("records") if summary is not None and len(summary) else []
    return _environment().get_template("study.html.j2").render(
        css=_css(), caution=CAUTION, version=__version__, name=study_name,
        qc=qc_table.to_dict("records") if len(qc_table) else [], summary=rows, failures=failures)
