"""The words and constants that definition files and the processing stages share.

Each choice list and shared value is declared here once: :mod:`heschl.config` validates
definition files against it and the stages (cleaning, line noise, ocular correction,
segmenting, harmonising, sensor types) act on the same declaration, so a new choice
cannot be accepted by one side and unknown to the other. Standard library only, so that
importing it (and so ``heschl.config``) stays instant.

Order matters: a list is shown in this order in error messages ("use one of: ...").
"""
from __future__ import annotations

__all__ = [
    "DESIGNS", "DATATYPES", "SENSOR_TYPES", "MEG_SENSOR_TYPES", "SI_UNITS", "DISPLAY_UNITS", "AMPLITUDE_UNITS", "POWER_UNITS",
    "LOG_POWER_UNITS", "LINE_NOISE_METHODS", "OCULAR_METHODS", "OCULAR_POLICIES", "BAD_CHANNEL_POLICIES",
    "REFERENCE_WORDS", "RECORDING_REFERENCE_WORDS", "REJECTION_METHODS", "BAND_CLOSURES",
    "DEFAULT_BAND_CLOSURE", "COMBINES", "POLARITIES", "MIN_ADAPTIVE_EPOCHS", "INTERPOLATION_ORIGIN",
    "DEFAULT_SUBJECT_PATTERN", "FLAG_LEVELS", "MAX_CHANNEL_NAME", "MAD_TO_SD",
]

# --------------------------------------------------------------------------- statistics
#: Scale of the median absolute deviation to a normal standard deviation, 1 / Phi^-1(3/4)
#: (Leys et al. 2013, docs/REFERENCES.md F41); every robust z and robust amplitude uses it.
MAD_TO_SD = 1.4826

# --------------------------------------------------------------------------- paradigms
#: Paradigm designs: epochs around markers (event-related, steady-state) or segments (resting).
DESIGNS = ("event-related", "steady-state", "resting")

#: Ways to remove line noise: FIR notches, mne's sinusoid fitting, or nothing.
LINE_NOISE_METHODS = ("notch", "fit", "none")

#: Ways to correct ocular artefacts (:class:`heschl.ocular.OcularCorrection`).
OCULAR_METHODS = ("regression", "ica", "none")

#: What a paradigm's ``cleaning.ocular`` may ask for: a method, or "auto" (ICA: components
#: chosen by correlation with the EOG where recorded, by their properties where not).
OCULAR_POLICIES = ("auto",) + OCULAR_METHODS

#: ``cleaning.bad_channels``: detect bad channels, or keep every channel.
BAD_CHANNEL_POLICIES = ("detect", "keep")

#: Reference words of ``cleaning.reference``; any other text is a channel name.
REFERENCE_WORDS = ("average", "as-recorded", "linked-mastoids")

#: Words a site's ``recording_reference`` may be instead of the name of the channel the
#: site recorded against.
RECORDING_REFERENCE_WORDS = ("average", "linked-mastoids", "unknown")

#: ``rejection.method``.
REJECTION_METHODS = ("adaptive", "fixed", "none")

#: Fewest epochs for which adaptive (cross-validated) thresholds are attempted; fewer are
#: left unrejected, with the reason recorded.
MIN_ADAPTIVE_EPOCHS = 10

# --------------------------------------------------------------------------- feature sets
#: Which band edges belong to a band: "left" = [lo, hi), "right" = (lo, hi],
#: "both" = [lo, hi], "neither" = (lo, hi).
BAND_CLOSURES = ("left", "right", "both", "neither")

#: The closure of a band given as a plain [lo, hi] pair.
DEFAULT_BAND_CLOSURE = "left"

#: How a waveform measure joins its region's channels: their mean, or their root mean square.
COMBINES = ("mean", "rms")

#: The sign of a peak a measure looks for.
POLARITIES = ("negative", "positive")

# --------------------------------------------------------------------------- sites and sensors
#: BIDS datatypes heschl reads and writes (``datatype`` of a site).
DATATYPES = ("eeg", "meg")

#: Channel types that carry brain signal, in the order stages report them.
SENSOR_TYPES = ("eeg", "mag", "grad")

#: The sensor types of a MEG system: magnetometers and planar gradiometers.
MEG_SENSOR_TYPES = ("mag", "grad")

#: Sensor type -> SI unit of its data inside heschl (mne's units).
SI_UNITS = {"eeg": "V", "mag": "T", "grad": "T/m"}

#: Sensor type -> (unit shown to people, factor from the SI value to it).
DISPLAY_UNITS = {"eeg": ("uV", 1e6), "mag": ("fT", 1e15), "grad": ("fT/cm", 1e13)}

#: Sensor type -> units a measure may report an amplitude, a power or a log power density in.
AMPLITUDE_UNITS = {"eeg": ("uV", "V"), "mag": ("fT", "T"), "grad": ("fT/cm", "T/m")}
POWER_UNITS = {"eeg": ("uV^2", "V^2"), "mag": ("fT^2", "T^2"), "grad": ("(fT/cm)^2", "(T/m)^2")}
LOG_POWER_UNITS = {"eeg": ("log10(uV^2/Hz)",), "mag": ("log10(fT^2/Hz)",), "grad": ("log10((fT/cm)^2/Hz)",)}

#: Sphere centre, m, head frame, for interpolating bad channels (spherical splines for EEG,
#: field mapping for MEG), used by bad-channel repair and by adaptive rejection alike.
INTERPOLATION_ORIGIN = (0.0, 0.0, 0.04)

#: How a file name gives its participant id when a site does not say (BIDS ``sub-<label>``).
DEFAULT_SUBJECT_PATTERN = r"sub-([A-Za-z0-9]+)"

#: Longest channel name a recording reference may be (heschl's own bound: channel names of
#: the readers heschl uses are short, a longer text is a sentence, not a channel).
MAX_CHANNEL_NAME = 16

# --------------------------------------------------------------------------- quality
#: Levels of a QC flag, mildest first; the verdict is the worst, or "clear" without flags.
FLAG_LEVELS = ("note", "caution", "unusable")
