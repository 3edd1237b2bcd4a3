"""Cleaning of continuous data: pass band, bad channels, interpolation, re-reference.

Each step returns what it decided as plain data, so the QC page can show the record
instead of recomputing it.
"""
from __future__ import annotations

import logging

import numpy as np

from .errors import InputDataError, problem

__all__ = ["BadChannelDetector", "filter_pass_band", "rereference", "clean"]

log = logging.getLogger(__name__)


class BadChannelDetector:
    """Flag flat, noisy and poorly correlated EEG channels with robust statistics.

    Parameters
    ----------
    flat_ratio : float, default=0.1
        A channel whose robust amplitude is below this fraction of the median channel's
        is flat.
    noisy_z : float, default=4.0
        Robust z-score (median/MAD over channels) of log robust amplitude above which a
        channel is noisy; common practice uses robust z thresholds of 3-5.
    min_correlation : float, default=0.4
        A channel whose 95th-percentile correlation with the other channels falls below
        this is poorly correlated.

    Attributes
    ----------
    amplitude_ : ndarray, shape (n_channels,), V
        Robust amplitude (1.4826 * median absolute deviation) of each channel.
    correlation_ : ndarray, shape (n_channels,)
    bads_ : dict
        Channel name -> reason, for every flagged channel.
    """

    def __init__(self, *, flat_ratio=0.1, noisy_z=4.0, min_correlation=0.4):
        self.flat_ratio = flat_ratio
        self.noisy_z = noisy_z
        self.min_correlation = min_correlation

    def fit(self, x, ch_names):
        """Learn which channels are bad.

        Parameters
        ----------
        x : ndarray, shape (n_channels, n_times), V
            Band-passed continuous data.
        ch_names : list of str
        """
        x = np.asarray(x, dtype=float)
        med = np.median(x, axis=1, keepdims=True)
        amp = 1.4826 * np.median(np.abs(x - med), axis=1)
        self.amplitude_ = amp
        typical = np.median(amp)
        bads = {}
        for name, a in zip(ch_names, amp):
            if a < self.flat_ratio * typical:
                bads[name] = f"flat: robust amplitude {a * 1e6:.2f} uV < {self.flat_ratio:g} x median {typical * 1e6:.2f} uV"
        live = np.array([n not in bads for n in ch_names])
        log_amp = np.log(np.maximum(amp, 1e-15))
        centre = np.median(log_amp[live])
        spread = 1.4826 * np.median(np.abs(log_amp[live] - centre)) or 1e-12
        z = (log_amp - centre) / spread
        for name, zi, a in zip(ch_names, z, amp):
            if name not in bads and zi > self.noisy_z:
                bads[name] = f"noisy: robust amplitude {a * 1e6:.1f} uV, robust z {zi:.1f} > {self.noisy_z:g}"
        self.correlation_ = _neighbour_correlation(x, live)
        for name, c in zip(ch_names, self.correlation_):
            if name not in bads and c < self.min_correlation:
                bads[name] = f"poorly correlated: 95th-percentile correlation {c:.2f} < {self.min_correlation:g}"
        self.bads_ = bads
        return self


def _neighbour_correlation(x, live):
    """95th percentile of each channel's correlation with the live channels."""
    n_times = x.shape[1]
    step = max(1, n_times // 20000)  # a subsample is plenty for a correlation
    corr = np.corrcoef(x[:, ::step])
    corr = np.nan_to_num(corr, nan=0.0)
    np.fill_diagonal(corr, np.nan)
    return np.nanpercentile(np.where(live[None, :], corr, np.nan), 95, axis=1)


def filter_pass_band(raw, band):
    """Zero-phase FIR band-pass with mne's defaults; returns the filter's description.

    The description names what REFERENCES F26 asks a report to state: type, cut-offs with
    their definition, causality, length and the sampling rate.
    """
    low, high = band
    raw.filter(low, high, picks=["eeg", "eog"], phase="zero", fir_design="firwin",
               verbose="error")
    return {"type": "FIR, windowed-sinc (firwin, Hamming), mne defaults", "causality": "zero-phase (non-causal)",
            "low_cutoff_hz": low, "high_cutoff_hz": high,
            "cutoff_definition": "passband edges; -6 dB at edge +/- half the transition band",
            "sampling_rate_hz": float(raw.info["sfreq"])}


def rereference(raw, reference, where="reference"):
    """Apply the paradigm's reference; returns what was done."""
    if reference == "as-recorded":
        return {"reference": "as-recorded"}
    if reference == "average":
        raw.set_eeg_reference("average", projection=False, verbose="error")
        return {"reference": "average", "channels": len(raw.ch_names)}
    missing = [c for c in reference if c not in raw.ch_names]
    if missing:
        raise InputDataError(problem(where, f"reference channels {', '.join(missing)} are not in the recording",
                                     "choose reference channels every site records"))
    raw.set_eeg_reference(list(reference), projection=False, verbose="error")
    return {"reference": list(reference)}


def clean(raw, paradigm, forced_bads=(), where="recording"):
    """Pass band, bad channels (detect + interpolate), re-reference, on ``raw`` in place.

    Returns
    -------
    record : dict
    """
    import mne

    record = {"filter": filter_pass_band(raw, paradigm.cleaning.pass_band)}
    picks = mne.pick_types(raw.info, eeg=True, meg=False)
    names = [raw.ch_names[i] for i in picks]
    bads = {c: "marked bad in the study file" for c in forced_bads if c in names}
    if paradigm.cleaning.bad_channels == "detect":
        detector = BadChannelDetector().fit(raw.get_data(picks=picks), names)
        bads.update({c: r for c, r in detector.bads_.items() if c not in bads})
    record["bad_channels"] = bads
    if len(bads) > len(names) // 4:
        raise InputDataError(problem(where, f"{len(bads)} of {len(names)} channels are bad ({', '.join(sorted(bads)[:6])})",
                                     "check the recording; more than a quarter cannot be interpolated"))
    if bads:
        raw.info["bads"] = sorted(bads)
        raw.interpolate_bads(reset_bads=True, mode="accurate", origin=(0.0, 0.0, 0.04), verbose="error")
    record["interpolated"] = sorted(bads)
    record["reference"] = rereference(raw, paradigm.cleaning.reference, where)
    return record
