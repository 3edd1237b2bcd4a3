"""Synthetic multi-site auditory EEG/MEG study with ground truth.

Writes the invented Alder-Birch-Cedar study: three EEG sites, each storing the same three
paradigms in its own file format, channel naming, reference, sampling rate, units and
marker codes, plus the MEG site Dogwood (one subject, oddball only, a whole-head array
of magnetometers and planar gradiometers), with artefacts whose positions are recorded in
``truth.json``.

This subpackage never imports heschl's pipeline: it carries its own description of each
site, so tests that recover its truth check the pipeline's tables independently.

Examples
--------
>>> from heschl.synth import make_study
>>> study_file = make_study("my-study", size="test")  # doctest: +SKIP
"""
from .sites import COMMON_CHANNELS, MEG_SITES, SITES
from .study import make_study, write_recording

__all__ = ["make_study", "write_recording", "SITES", "MEG_SITES", "COMMON_CHANNELS"]
