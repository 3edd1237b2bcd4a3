"""The records a definition file becomes: plain frozen dataclasses, values in SI units."""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from ..vocabulary import DATATYPES

__all__ = ["Condition", "Contrast", "Cleaning", "SkipRule", "EpochSpec", "SegmentSpec", "Rejection",
           "Paradigm", "Measure", "FeatureSet", "Site", "Analysis", "Study"]


@dataclass(frozen=True)
class Condition:
    name: str
    markers: tuple


@dataclass(frozen=True)
class Contrast:
    name: str
    plus: str
    minus: str


@dataclass(frozen=True)
class Cleaning:
    sampling_rate: float          # Hz
    pass_band: tuple              # (low, high) Hz
    reference: object             # "average" | "linked-mastoids" | "as-recorded" | tuple of channel names
    bad_channels: str             # "detect" | "keep"
    line_noise: str = "notch"     # "notch" | "fit" | "none"
    ocular: str = "auto"          # "auto" (ICA) | "regression" | "ica" | "none"


@dataclass(frozen=True)
class SkipRule:
    condition: str
    after: str


@dataclass(frozen=True)
class EpochSpec:
    window: tuple                 # (tmin, tmax) s
    baseline: object              # (start, stop) s or None
    skip: tuple = ()


@dataclass(frozen=True)
class SegmentSpec:
    length: float                 # s
    overlap: float                # fraction
    skip_start: float             # s


#: Default limit of the muscle score (heschl.muscle.find_muscle): chosen on heschl.synth,
#: measured on tests/gen2 (benchmarks/muscle_recall.py).
MUSCLE_Z = 8.0


@dataclass(frozen=True)
class Rejection:
    method: str
    peak_to_peak: object          # V or None (EEG)
    min_trials: dict
    detection_high_pass: float = 1.0   # Hz, adaptive: decisions learned on a copy high-passed here
    max_cluster: int = 3               # adaptive: largest group of neighbouring interpolated channels
    equalise: bool = False             # equalise kept trial counts across conditions
    # fixed: limits of the MEG sensor types, SI (T for magnetometers, T/m for gradiometers)
    peak_to_peak_meg: dict = field(default_factory=dict)
    muscle_z: object = MUSCLE_Z        # focal high-frequency score limit (heschl.muscle), None = off


@dataclass(frozen=True)
class Paradigm:
    name: str
    design: str
    summary: str
    source: str
    conditions: dict
    contrasts: dict
    cleaning: Cleaning
    epochs: object                # EpochSpec or None
    segments: object              # SegmentSpec or None
    rejection: Rejection
    stimulation: dict
    quality: dict
    document: dict = field(repr=False, compare=False)

    @property
    def signals(self):
        """Names a measure may read: conditions and contrasts."""
        return list(self.conditions) + list(self.contrasts)


@dataclass(frozen=True)
class Measure:
    name: str
    kind: str
    params: dict
    unit: str


@dataclass(frozen=True)
class FeatureSet:
    name: str
    paradigm: str
    summary: str
    source: str
    regions: dict
    bands: dict
    spectrum: dict
    measures: tuple
    reliability: dict = field(default_factory=dict)
    band_closures: dict = field(default_factory=dict)   # band -> "left" | "right" | "both" | "neither"
    document: dict = field(repr=False, compare=False, default_factory=dict)


@dataclass(frozen=True)
class Site:
    name: str
    recording_reference: str
    line_frequency: float         # Hz
    trigger_delay: float          # s (markers late by this much)
    files: dict                   # paradigm -> glob pattern (relative to the study file)
    markers: dict                 # paradigm -> {code in file: marker label}
    channel_aliases: dict
    eog_channels: tuple
    subject_pattern: str
    bad_channels: dict            # participant_id -> tuple of channel names
    datatype: str = DATATYPES[0]  # BIDS datatype of the site's recordings: "eeg" or "meg"


@dataclass(frozen=True)
class Analysis:
    paradigm: Paradigm
    feature_sets: tuple


@dataclass(frozen=True)
class Study:
    name: str
    source: str
    root: Path
    output: Path
    participants: object          # Path or None
    common_channels: tuple
    analyses: tuple
    sites: dict
    document: dict = field(repr=False, compare=False)
    groups: tuple = ()               # declared group labels ([groups] labels); () when undeclared
    reference_group: object = None   # the reference among them ([groups] reference), or None
