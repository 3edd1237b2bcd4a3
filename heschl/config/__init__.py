"""Load and validate the three kinds of declarative file: paradigm, feature set, study.

Everything here is checked before any data are read, and nothing heavy is imported, so
``heschl check`` and definition errors are instant. Every error is one line naming the
file, the key path, what is wrong and how to fix it (see :func:`heschl.errors.problem`).

Units at this edge: times in seconds, frequencies in Hz, keys ending ``_uv`` in
microvolts and ``_ms`` in milliseconds. Inside the returned objects everything is SI
(s, Hz, V).

Modules: :mod:`.model` (the records), :mod:`.sections` (reading one table),
:mod:`.files` (TOML files and the built-in definitions), :mod:`.paradigm`,
:mod:`.feature_set` and :mod:`.study` (one loader each). The choice lists come from
:mod:`heschl.vocabulary` and are re-exported here.
"""
from __future__ import annotations

from ..vocabulary import (BAD_CHANNEL_POLICIES, BAND_CLOSURES, COMBINES, DATATYPES, DEFAULT_SUBJECT_PATTERN,
                          DESIGNS, LINE_NOISE_METHODS, OCULAR_METHODS, OCULAR_POLICIES, POLARITIES,
                          RECORDING_REFERENCE_WORDS, REFERENCE_WORDS, REJECTION_METHODS)
from .feature_set import MEASURE_KINDS, load_feature_set
from .files import builtin_dir, builtin_names, resolve_definition
from .model import (Analysis, Cleaning, Condition, Contrast, EpochSpec, FeatureSet, Measure, Paradigm, Rejection,
                    SegmentSpec, Site, SkipRule, Study)
from .paradigm import PEAK_TO_PEAK_KEYS, QUALITY_KEYS, load_paradigm
from .study import load_study

__all__ = [
    "Condition", "Contrast", "Cleaning", "EpochSpec", "SkipRule", "SegmentSpec",
    "Rejection", "Paradigm", "Measure", "FeatureSet", "Site", "Analysis", "Study",
    "MEASURE_KINDS", "load_paradigm", "load_feature_set", "load_study", "builtin_dir",
    "builtin_names", "resolve_definition", "QUALITY_KEYS", "PEAK_TO_PEAK_KEYS",
    # the vocabulary the files are checked against (declared in heschl.vocabulary)
    "DESIGNS", "DATATYPES", "LINE_NOISE_METHODS", "OCULAR_METHODS", "OCULAR_POLICIES", "BAD_CHANNEL_POLICIES",
    "REFERENCE_WORDS", "RECORDING_REFERENCE_WORDS", "REJECTION_METHODS", "BAND_CLOSURES", "COMBINES",
    "POLARITIES", "DEFAULT_SUBJECT_PATTERN",
]
