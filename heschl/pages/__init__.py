"""QC pages: one per recording and one per study, from recorded results (never recomputed here)."""
from __future__ import annotations

from .common import CAUTION, PALETTE, shown_signoff
from .recording import render_recording
from .study import render_study

__all__ = ["render_recording", "render_study", "shown_signoff", "CAUTION", "PALETTE"]
