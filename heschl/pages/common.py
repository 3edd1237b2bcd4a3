"""What every page shares: the template environment, the palette, the caution, PNG figures.

Pages are self-contained: CSS is inlined from ``templates/style.css`` and figures are
embedded as base64 PNG, so they open offline. Everything drawn comes from recorded
results; nothing is recomputed here.
"""
from __future__ import annotations

import base64
import io

__all__ = ["CAUTION", "PALETTE", "environment", "css", "png", "figure", "colours", "num", "shown_signoff",
           "SIGNOFF_META"]

#: Name of the page's meta tag that carries the fingerprint of the sign-off it shows.
SIGNOFF_META = "heschl-signoff"

CAUTION = ("Research software, not a medical device. These pages support quality review of research "
           "recordings; clinical interpretation belongs to licensed practice and local rules.")

#: heschl's own palette, one colour per role on every page. The four series colours differ
#: in lightness as well as hue, so they stay apart for red-green colour-blind readers and
#: in greyscale.
PALETTE = {"first": "#1b5e8c", "second": "#e08a1e", "contrast": "#2b2b2b", "third": "#3aa58f",
           "fourth": "#b8417a", "window": "#efe3b8", "muted": "#9a9a9a",
           "kept": "#d8e6ef", "interpolated": "#e08a1e", "rejected": "#8c1b2f", "skipped": "#bdbdbd",
           # recording page evidence: the rest of a rejected trial's cells, the head outline
           "dropped": "#f3c6cc", "outline": "#5c6670"}


def environment():
    """The Jinja2 environment: autoescaped, strict about undefined values."""
    from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

    from ..config import builtin_dir

    env = Environment(loader=FileSystemLoader(str(builtin_dir("templates"))),
                      autoescape=select_autoescape(["html", "j2"]), undefined=StrictUndefined)
    env.filters["num"] = num
    return env


def num(value, digits=3):
    """A number for a table cell: ``digits`` significant digits, "n/a" for None and NaN."""
    try:
        value = float(value)
    except (TypeError, ValueError):
        return "n/a"
    if value != value:
        return "n/a"
    return f"{value:.{digits}g}"


def css():
    """The page style sheet, to inline."""
    from ..config import builtin_dir

    return (builtin_dir("templates") / "style.css").read_text(encoding="utf-8")


def png(fig):
    """The figure as base64 PNG text; closes it."""
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=90, bbox_inches="tight")
    plt.close(fig)
    return base64.b64encode(buf.getvalue()).decode("ascii")


def figure(width=6.4, height=3.0, ncols=1, nrows=1, **kwargs):
    """A new figure without top and right spines (Agg backend: no screen needed)."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(nrows, ncols, figsize=(width, height), squeeze=False, **kwargs)
    for ax in axes.flat:
        ax.spines[["top", "right"]].set_visible(False)
    return (fig, axes[0, 0]) if axes.size == 1 else (fig, axes)


def colours():
    """The series colours, in order."""
    return [PALETTE["first"], PALETTE["second"], PALETTE["contrast"], PALETTE["third"], PALETTE["fourth"]]


def shown_signoff(path):
    """The sign-off fingerprint a page on disk shows (its ``heschl-signoff`` meta tag), or
    None when the page is missing or carries none."""
    import re

    try:
        with open(path, encoding="utf-8") as fh:
            head = fh.read(4096)
    except OSError:
        return None
    found = re.search(rf'<meta name="{SIGNOFF_META}" content="([^"]*)"', head)
    return found.group(1) if found else None
