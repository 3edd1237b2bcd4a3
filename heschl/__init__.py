"""heschl: declarative multi-site processing of auditory EEG/MEG paradigms."""
__version__ = "0.1.0"

