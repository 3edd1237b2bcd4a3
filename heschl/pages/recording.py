"""The QC page of one recording, drawn from its recorded results."""
from __future__ import annotations

import logging

from .. import __version__
from .common import CAUTION, PALETTE, colours, css, environment, figure, png

__all__ = ["render_recording"]

log = logging.getLogger(__name__)


def _plot_courses(ax, curves, key):
    """Draw each named course of ``curves[key]`` over ``curves["times"]`` (s, shown in ms)."""
    times = [t * 1e3 for t in curves["times"]]
    for colour, (name, course) in zip(colours(), curves.get(key, {}).items()):
        ax.plot(times, course, color=colour, lw=1.6, label=name)


def _finish(fig, ax, xlabel, ylabel):
    """Label the axes, add the legend and return the figure as base64 PNG."""
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    ax.legend(frameon=False, fontsize=8)
    return png(fig)


def figure_waves(curves):
    """Region-mean condition averages and difference waves, measurement windows shaded."""
    fig, ax = figure()
    for lo, hi in curves.get("windows", []):
        ax.axvspan(lo * 1e3, hi * 1e3, color=PALETTE["window"], alpha=0.5, lw=0)
    _plot_courses(ax, curves, "waves")
    ax.axhline(0, color="#999999", lw=0.6)
    ax.axvline(0, color="#999999", lw=0.6)
    return _finish(fig, ax, "time after marker (ms)",
                   f"{curves.get('region', '')} mean ({curves.get('unit', 'uV')})")


def figure_itpc(curves):
    """ITPC at the stimulation frequency over time, region mean."""
    fig, ax = figure()
    _plot_courses(ax, curves, "itpc")
    ax.axvline(0, color="#999999", lw=0.6)
    ax.set_ylim(0, 1)
    return _finish(fig, ax, "time after train onset (ms)",
                   f"ITPC at {curves.get('frequency', 0):g} Hz")


def figure_spectra(curves):
    """Region-mean spectra per condition, log power."""
    fig, ax = figure()
    for colour, (name, psd) in zip(colours(), curves.get("psd", {}).items()):
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
    return environment().get_template("recording.html.j2").render(
        css=css(), caution=CAUTION, version=__version__, recording=recording, qc=result["qc"],
        rows=result["rows"], figure={"title": title, "png": image, "hint": hint},
        provenance=result["provenance"])
