"""The study page: verdicts per recording and group effects, drawn from the written tables."""
from __future__ import annotations

from .. import __version__
from .common import CAUTION, css, environment

__all__ = ["render_study"]


def render_study(study_name, table, qc_table, failures, summary=None):
    """The study page: verdicts per recording, and group effects per site and pooled."""
    rows = summary.to_dict("records") if summary is not None and len(summary) else []
    return environment().get_template("study.html.j2").render(
        css=css(), caution=CAUTION, version=__version__, name=study_name,
        qc=qc_table.to_dict("records") if len(qc_table) else [], summary=rows, failures=failures)
