"""Cleaning of continuous data: pass band, bad channels, interpolation, re-reference.

Each step returns what it decided as plain data, so the QC page can show the record
instead of recomputing it.
"""
from __future__ import annotations

import logging

import numpy as np

from .errors import InputDataError, UnusableRecording, problem
from .sensors import DATA_TYPES, by_type, data_picks, show, types_of
from .vocabulary import INTERPOLATION_ORIGIN, MAD_TO_SD

__all__ = ["BadChannelDetector", "filter_pass_band", "rereference", "clean"]

log = logging.getLogger(__name__)


class BadChannelDetector:
    """Flag flat, noisy, unpredictable and bridged channels, each judged against the
    recording's own channels of the same sensor type.

    Every rule compares a channel with the other channels of its recording (robust z over
    channels, or a window's median channel), so that what is flagged does not depend on
    the cap's density or on the share of independent sensor noise; the one absolute
    limit is the physical floor of a flat EEG channel. Flat channels are found on the data
    as recorded; the other rules on a median-referenced copy, so a bad channel cannot hide
    behind (or spoil) the reference.

    Parameters
    ----------
    flat_ratio : float, default=0.1
        A channel whose robust amplitude is below this fraction of the median channel's
        is flat (heschl's choice).
    flat_floor : float or None, default=None
        Robust amplitude (SI) below which a channel is flat whatever the others do, so a
        recording whose channels are all dead is not judged normal; None uses
        :data:`FLAT_FLOOR` of the type (EEG 0.5 uV: band-passed scalp EEG with electrode
        and amplifier noise stays above it, common practice; no floor for MEG).
    noisy_z : float, default=4.0
        Robust z-score (median/MAD over channels) of log robust amplitude above which a
        channel is noisy; robust z limits of 3-5 are common practice.
    noisy_ratio : float, default=2.0
        A noisy channel must also be this many times the median channel's robust
        amplitude, so that a tight spread over channels cannot flag ordinary ones.
    poor_z : float, default=3.0
        In each window, the correlation of every channel with its least-squares
        prediction from the other channels is Fisher-transformed and compared with the
        window's median channel (robust z over channels); a window is poor for a channel
        below ``-poor_z`` (the predict-from-others idea of RANSAC-style detection,
        Jas et al. 2017, judged relative to the recording as heschl's choice).
    poor_margin : float, default=0.25
        A poor window must also be at least this much below the window's median
        correlation (in correlation units), so that on a dense, quiet cap a channel at
        0.85 among channels at 0.97 is not poor (a channel far from the strongest sources
        is predicted less well and is not broken).
    max_unpredictable : float, default=0.2
        A channel poor in more than this fraction of windows is bad (pops, loose contact).
    pickup_z : float, default=3.0
        With the channels' mains amplitudes (``line_amplitude`` of :meth:`fit`, measured
        before line-noise removal), a channel whose log amplitude lies more than this many
        robust SD above the median channel's, and at least ``pickup_ratio`` times it,
        picks up mains the others do not: a poor or drying electrode contact (common
        practice; limits heschl's choice). Removal of the mains frequency does not
        mend the contact, so the channel is bad.
    pickup_ratio : float, default=3.0
    bridge_ratio : float, default=0.05
        Two channels are bridged when the variance of their difference (their
        "electrical distance", Tenke & Kayser 2001, docs/REFERENCES.md F44) is below this
        fraction of the median over channels of each channel's distance to its nearest
        other channel: a gel bridge makes two electrodes one.
    window : float, default=1.0
        Window length, s.
    kind : {"eeg", "mag", "grad"}, default="eeg"
        Sensor type of the channels (one type per detector); sets the unit of the reasons
        and the flat floor.

    Attributes
    ----------
    amplitude_ : ndarray, shape (n_channels,), SI unit of the type (V, T or T/m)
        Robust amplitude (1.4826 * median absolute deviation) as recorded.
    unpredictable_ : ndarray, shape (n_channels,)
        Fraction of poor windows.
    statistics_ : dict
        Channel name -> the statistics every rule read (for the QC page).
    bads_ : dict
        Channel name -> reason, for every flagged channel.
    """

    def __init__(self, *, flat_ratio=0.1, flat_floor=None, noisy_z=4.0, noisy_ratio=2.0, poor_z=3.0,
                 poor_margin=0.25, max_unpredictable=0.2, pickup_z=3.0, pickup_ratio=3.0, bridge_ratio=0.05,
                 window=1.0, kind="eeg"):
        self.kind = kind
        self.flat_ratio = flat_ratio
        self.flat_floor = flat_floor
        self.noisy_z = noisy_z
        self.noisy_ratio = noisy_ratio
        self.poor_z = poor_z
        self.poor_margin = poor_margin
        self.max_unpredictable = max_unpredictable
        self.pickup_z = pickup_z
        self.pickup_ratio = pickup_ratio
        self.bridge_ratio = bridge_ratio
        self.window = window

    def fit(self, x, ch_names, sfreq, exclude=(), line_amplitude=None):
        """Learn which channels are bad.

        Parameters
        ----------
        x : ndarray, shape (n_channels, n_times), SI unit of the type
            Band-passed continuous data of one sensor type, as referenced at recording.
        ch_names : list of str
        sfreq : float, Hz
        exclude : sequence of str
            Channels not judged flat, bridged or for mains pickup (a restored recording
            reference is zero by design).
        line_amplitude : ndarray, shape (n_channels,), or None
            Each channel's mains amplitude before line-noise removal, SI
            (:func:`heschl.linenoise.channel_line_amplitudes`); None skips the pickup rule.
        """
        x = np.asarray(x, dtype=float)
        bads = {}
        self.amplitude_ = _robust_amplitude(x)
        typical = np.median(self.amplitude_)
        floor = FLAT_FLOOR.get(self.kind, 0.0) if self.flat_floor is None else self.flat_floor
        for name, a in zip(ch_names, self.amplitude_):
            if name in exclude:
                continue
            if a < self.flat_ratio * typical:
                bads[name] = (f"flat: robust amplitude {show(a, self.kind, 2)} < {self.flat_ratio:g} x median "
                              f"{show(typical, self.kind, 2)}")
            elif a < floor:
                bads[name] = f"flat: robust amplitude {show(a, self.kind, 2)} below {show(floor, self.kind, 2)}"
        y = x - np.median(x, axis=0, keepdims=True)
        amp = _robust_amplitude(y)
        live = np.array([n not in bads for n in ch_names])
        pred = _predict(y, live)
        # A noisy channel is large *and* unexplained by the others: a strong physiological
        # rhythm (eyes-closed alpha at Oz) is large but its neighbours predict it.
        unexplained = np.concatenate([_robust_amplitude(y[i:i + BLOCK] - pred[i:i + BLOCK])
                                      for i in range(0, len(y), BLOCK)])  # no full-size residual
        z_amp, median = _robust_z(amp, live)
        z_res, _ = _robust_z(unexplained, live)
        self.unexplained_ = unexplained
        for name, a, z, zr in zip(ch_names, amp, z_amp, z_res):
            if name not in bads and z > self.noisy_z and a > self.noisy_ratio * median and zr > self.noisy_z:
                bads[name] = (f"noisy: robust amplitude {show(a, self.kind)}, {a / median:.1f} x median "
                              f"{show(median, self.kind)}, robust z {z:.1f} > {self.noisy_z:g}, and not explained "
                              f"by the other channels (robust z {zr:.1f})")
        live = np.array([n not in bads for n in ch_names])
        r = _window_correlations(y, pred, int(round(self.window * sfreq)))
        poor, typical_r = _poor_windows(r, live, self.poor_z, self.poor_margin)
        self.unpredictable_ = poor.mean(axis=1)
        for name, frac in zip(ch_names, self.unpredictable_):
            if name not in bads and frac > self.max_unpredictable:
                bads[name] = (f"unpredictable: in {frac:.0%} of {self.window:g} s windows its correlation with the "
                              f"other channels' prediction is more than {self.poor_z:g} robust SD below the "
                              f"window's median channel (limit {self.max_unpredictable:.0%})")
        if line_amplitude is not None:
            mains = np.asarray(line_amplitude, dtype=float)
            judged = live & np.isfinite(mains) & np.array([n not in exclude for n in ch_names])
            if judged.sum() > 2 and np.median(mains[judged]) > 0:
                z_line, typical_mains = _robust_z(np.where(np.isfinite(mains), mains, 0.0), judged)
                for i, name in enumerate(ch_names):
                    if (judged[i] and name not in bads and z_line[i] > self.pickup_z
                            and mains[i] > self.pickup_ratio * typical_mains):
                        bads[name] = (f"mains pickup: {show(mains[i], self.kind)} at the line frequency, "
                                      f"{mains[i] / typical_mains:.1f} x the median channel's "
                                      f"{show(typical_mains, self.kind)} (robust z {z_line[i]:.1f} > "
                                      f"{self.pickup_z:g}): poor electrode contact")
        distance = _nearest_distance(y)
        usable = [i for i, n in enumerate(ch_names) if n not in bads and n not in exclude]
        reference = np.median(distance[usable, 1]) if len(usable) > 2 else np.nan
        for i, name in enumerate(ch_names):
            j = int(distance[i, 0])
            if (name in bads or name in exclude or ch_names[j] in exclude or not np.isfinite(reference)
                    or distance[i, 1] >= self.bridge_ratio * reference):
                continue
            bads[name] = (f"bridged with {ch_names[j]}: the variance of their difference is "
                          f"{distance[i, 1] / reference:.3f} x the typical nearest-channel distance "
                          f"(limit {self.bridge_ratio:g})")
        self.statistics_ = {
            name: {"amplitude": float(self.amplitude_[i]), "amplitude_z": float(z_amp[i]),
                   "unexplained_z": float(z_res[i]), "poor_fraction": float(self.unpredictable_[i]),
                   "median_correlation": float(np.median(r[i])), "window_median_correlation": float(typical_r),
                   "nearest": ch_names[int(distance[i, 0])],
                   "nearest_distance_ratio": float(distance[i, 1] / reference) if np.isfinite(reference) else None,
                   "line_amplitude": (float(line_amplitude[i]) if line_amplitude is not None
                                      and np.isfinite(line_amplitude[i]) else None)}
            for i, name in enumerate(ch_names)}
        self.bads_ = bads
        return self


    def limits(self):
        """The rules' limits by name, as set (for the record and the page)."""
        return {"flat_ratio": self.flat_ratio, "noisy_z": self.noisy_z, "noisy_ratio": self.noisy_ratio,
                "poor_z": self.poor_z, "max_unpredictable": self.max_unpredictable, "pickup_z": self.pickup_z,
                "pickup_ratio": self.pickup_ratio, "bridge_ratio": self.bridge_ratio, "window_s": self.window}


#: Robust amplitude (SI) below which a channel of the type is flat whatever the others do.
FLAT_FLOOR = {"eeg": 0.5e-6}


#: Channels per block where a step needs whole-recording temporaries (no full-size copies).
BLOCK = 8


def _robust_amplitude(x):
    out = np.empty(len(x))
    for start in range(0, len(x), BLOCK):  # blocks of channels: no full-size temporaries
        part = x[start:start + BLOCK]
        med = np.median(part, axis=1, keepdims=True)
        out[start:start + BLOCK] = MAD_TO_SD * np.median(np.abs(part - med), axis=1)
    return out


def _robust_z(values, live):
    """Robust z of log values (median and MAD over the live channels), and the median value."""
    logs = np.log(np.maximum(values, 1e-30))
    centre = np.median(logs[live])
    spread = MAD_TO_SD * np.median(np.abs(logs[live] - centre)) or 1e-12
    return (logs - centre) / spread, float(np.exp(centre))


def _predict(y, live):
    """Each channel's ridge least-squares prediction from the other live channels."""
    n_ch = y.shape[0]
    cov = y[live] @ y[live].T
    idx = np.flatnonzero(live)
    pred = np.zeros_like(y)
    for i in range(n_ch):
        others = idx[idx != i]
        pos = np.searchsorted(idx, others)
        a = cov[np.ix_(pos, pos)]
        b = y[others] @ y[i]
        ridge = 1e-3 * np.trace(a) / len(others) * np.eye(len(others))
        pred[i] = np.linalg.solve(a + ridge, b) @ y[others]
    return pred


def _window_correlations(y, pred, width):
    """Correlation of each channel with its prediction in consecutive windows, shape (n_channels, n_windows)."""
    n_ch, n_times = y.shape
    n_win = max(1, n_times // width)
    out = np.empty((n_ch, n_win))
    for start in range(0, n_ch, BLOCK):  # blocks of channels: no full-size temporaries
        stop = min(start + BLOCK, n_ch)
        xs = y[start:stop, :n_win * width].reshape(stop - start, n_win, -1)
        ps = pred[start:stop, :n_win * width].reshape(stop - start, n_win, -1)
        xs = xs - xs.mean(axis=-1, keepdims=True)
        ps = ps - ps.mean(axis=-1, keepdims=True)
        denom = np.sqrt((xs ** 2).sum(-1) * (ps ** 2).sum(-1))
        out[start:stop] = np.where(denom > 0, (xs * ps).sum(-1) / np.where(denom > 0, denom, 1.0), 0.0)
    return out


def _poor_windows(r, live, poor_z, margin):
    """Windows where a channel's correlation lies far below the window's median live channel.

    Returns the boolean (n_channels, n_windows) array and the median correlation of the
    median channel over windows.
    """
    f = np.arctanh(np.clip(r, -0.999, 0.999))
    centre = np.median(f[live], axis=0)
    spread = MAD_TO_SD * np.median(np.abs(f[live] - centre), axis=0)
    spread = np.maximum(spread, 1e-6)
    typical = np.median(r[live], axis=0)
    poor = ((f - centre) / spread < -poor_z) & (r < typical - margin)
    return poor, float(np.median(typical))


def _nearest_distance(y):
    """Each channel's nearest other channel by the variance of their difference (electrical
    distance), as (n_channels, 2): index of the nearest and its distance."""
    cov = np.cov(y)
    var = np.diag(cov)
    distance = var[:, None] + var[None, :] - 2 * cov
    np.fill_diagonal(distance, np.inf)
    nearest = np.argmin(distance, axis=1)
    return np.column_stack([nearest, distance[np.arange(len(var)), nearest]])


#: Detector settings that differ by sensor type (none since the rules judge each channel
#: against the recording's own channels of its type).
DETECTOR_SETTINGS = {}

#: Channel types the cleaning filters touch: the data types and EOG (a reference for blinks).
FILTERED = DATA_TYPES + ("eog",)


def filter_pass_band(raw, band):
    """Zero-phase FIR band-pass with mne's defaults; returns the filter's description.

    The description names what docs/REFERENCES.md F26 asks a report to state: type, cut-offs with
    their definition, causality, length and the sampling rate.
    """
    low, high = band
    raw.filter(low, high, picks=[t for t in FILTERED if t in raw], phase="zero", fir_design="firwin",
               verbose="error")
    return {"type": "FIR, windowed-sinc (firwin, Hamming), mne defaults", "causality": "zero-phase (non-causal)",
            "low_cutoff_hz": low, "high_cutoff_hz": high,
            "cutoff_definition": "passband edges; -6 dB at edge +/- half the transition band",
            "sampling_rate_hz": float(raw.info["sfreq"])}


MASTOID_PAIRS = (("M1", "M2"), ("A1", "A2"), ("TP9", "TP10"))  # closest to the mastoids first


def rereference(raw, reference, where="reference"):
    """Apply the paradigm's reference; returns what was done.

    Parameters
    ----------
    raw : mne.io.BaseRaw
    reference : str or tuple of str
        "average", "linked-mastoids" (the first pair of ``MASTOID_PAIRS`` recorded),
        "as-recorded", or channel names whose mean becomes the reference.
    where : str
        The file, for messages.
    """
    import mne

    if reference == "as-recorded":
        return {"reference": "as-recorded"}
    n_eeg = len(mne.pick_types(raw.info, eeg=True, meg=False))
    if not n_eeg:
        # Magnetic fields have no reference; EEG policies do not apply.
        return {"reference": "none: no EEG channels (MEG sensors need no reference)"}
    if reference == "average":
        raw.set_eeg_reference("average", projection=False, verbose="error")
        return {"reference": "average", "channels": n_eeg}
    if reference == "linked-mastoids":
        pair = next((p for p in MASTOID_PAIRS if all(c in raw.ch_names for c in p)), None)
        if pair is None:
            raise InputDataError(problem(where, "no mastoid pair (M1/M2, A1/A2 or TP9/TP10) for a linked-mastoid reference",
                                         "add the mastoid channels to common_channels or choose another reference"))
        raw.set_eeg_reference(list(pair), projection=False, verbose="error")
        return {"reference": "linked-mastoids", "channels": list(pair)}
    missing = [c for c in reference if c not in raw.ch_names]
    if missing:
        raise InputDataError(problem(where, f"reference channels {', '.join(missing)} are not in the recording",
                                     "choose reference channels every site records"))
    raw.set_eeg_reference(list(reference), projection=False, verbose="error")
    return {"reference": list(reference)}


def _detection_copy(raw, picks):
    """Data for detection: a copy high-passed at 1 Hz so slow drifts do not dominate (common practice)."""
    import mne

    x = raw.get_data(picks=picks)  # a copy, filtered in place: one copy of the recording, not two
    return mne.filter.filter_data(x, raw.info["sfreq"], 1.0, None, copy=False, verbose="error")


def ocular_method(raw, policy):
    """The ocular method to use: "auto" is ICA (:class:`heschl.ocular.OcularCorrection`):
    with an EOG channel its components are chosen by their correlation with the EOG,
    without one by the properties of ocular components (:mod:`heschl.eyecomponents`).
    Chosen from benchmarks/ocular_eval.py (DEVELOPERS.md, "Ocular correction on two
    generators"): on both generators ICA left no blink in kept trials and moved the
    mismatch by at most 0.74 of its standard error, where regression on frontal stand-ins
    moved it by up to 4.1 and overcorrected the fronto-central channels. A recording
    without EEG channels (MEG only) is not corrected under "auto": its blinks are left to
    epoch rejection."""
    import mne

    if policy != "auto":
        return policy
    return "ica" if len(mne.pick_types(raw.info, eeg=True, meg=False)) else "none"


def _count(n, noun):
    """"1 bad channel", "3 bad channels"."""
    return f"{n} {noun}{'' if n == 1 else 's'}"


def clean(raw, paradigm, forced_bads=(), where="recording", restored=None, line_frequency=None, watch=None,
          stuck=None):
    """Line noise, pass band, bad channels (detect + interpolate), ocular correction,
    re-reference, on ``raw`` in place.

    Parameters
    ----------
    raw : mne.io.BaseRaw
        Harmonised data; this task's own copy, changed in place.
    paradigm : heschl.config.Paradigm
    forced_bads : sequence of str
        Channels the study file marks bad for this recording.
    where : str
        The file, for messages.
    restored : str or None
        The recording reference channel restored as zeros (never judged flat).
    line_frequency : float or None, Hz
        The site's mains frequency.
    watch : callable or None
        Called as ``watch(stage, raw, ocular)`` just before ("before-ocular", ocular None)
        and after ("after-ocular", the fitted `OcularCorrection`) the ocular step, so
        :mod:`heschl.qc.evidence` can record what the step changed; it must not modify
        ``raw``. Nothing is decided differently with or without it.
    stuck : dict or None
        Runs of identical samples per channel found before resampling
        (:func:`heschl.saturation.stuck_runs`); merged into stretches once the bad
        channels are known (``record["saturation"]``).

    Returns
    -------
    record : dict
    """
    from .linenoise import remove_line_noise
    from .ocular import OcularCorrection

    from .linenoise import channel_line_amplitudes

    record = {}
    picks = data_picks(raw.info)
    # Before removal: a channel picking up mains the others do not has a poor contact.
    mains = channel_line_amplitudes(raw, line_frequency, picks) if line_frequency else None
    if line_frequency:
        # Before the pass band, so that harmonics inside the recording's band are found.
        record["line_noise"] = remove_line_noise(raw, line_frequency, method=paradigm.cleaning.line_noise,
                                                 picks=[t for t in FILTERED if t in raw])
    courses = None
    if paradigm.rejection.muscle_z is not None:
        # After line removal, before the pass band takes the high band away; combined
        # once the bad channels are known.
        from .muscle import muscle_courses

        courses = muscle_courses(raw)
    record["filter"] = filter_pass_band(raw, paradigm.cleaning.pass_band)
    from .memory import give_back

    give_back()  # the filters' freed per-channel temporaries (heschl.memory)
    names = [raw.ch_names[i] for i in picks]
    groups = by_type(types_of(raw.info, picks))
    bads = {c: "marked bad in the study file" for c in forced_bads if c in names}
    if paradigm.cleaning.bad_channels == "detect":
        # One detector per sensor type: robust statistics compare a channel with its own kind.
        for kind, idx in groups.items():
            sub = [names[i] for i in idx]
            detector = BadChannelDetector(kind=kind, **DETECTOR_SETTINGS.get(kind, {})).fit(
                _detection_copy(raw, picks[idx]), sub, raw.info["sfreq"], exclude=[restored] if restored else [],
                line_amplitude=None if mains is None else mains[idx])
            bads.update({c: r for c, r in detector.bads_.items() if c not in bads})
            record.setdefault("detector_limits", {})[kind] = detector.limits()
            record.setdefault("detector", {})[kind] = {
                c: {k: (float(f"{v:.4g}") if isinstance(v, float) else v) for k, v in stats.items()}
                for c, stats in detector.statistics_.items()}
    record["bad_channels"] = bads
    for kind, idx in groups.items():
        sub = [names[i] for i in idx]
        found = [c for c in sub if c in bads]
        if len(found) > len(sub) // 4:
            raise UnusableRecording(problem(where, f"{len(found)} of {len(sub)} {kind.upper()} channels are bad "
                                            f"({', '.join(sorted(found)[:6])}{', ...' if len(found) > 6 else ''})",
                                            "check the recording; more than a quarter cannot be interpolated "
                                            "(its page shows each channel's statistics)"),
                                    stage="clean", record=record)
    if bads:
        raw.info["bads"] = sorted(bads)
        raw.interpolate_bads(reset_bads=True, mode="accurate", origin=INTERPOLATION_ORIGIN, verbose="error")
    record["interpolated"] = sorted(bads)
    if courses is not None:
        from .muscle import find_muscle

        record["muscle"] = find_muscle(courses, paradigm.rejection.muscle_z, exclude=bads)
        del courses
    if stuck is not None:
        from .saturation import find_saturation

        record["saturation"] = find_saturation(stuck, len(picks), exclude=bads, duration=raw.times[-1])
    log.info("%s interpolated%s", _count(len(bads), "bad channel"),
             (": " + ", ".join(f"{c} ({r})" for c, r in sorted(bads.items()))) if bads else "")
    method = ocular_method(raw, paradigm.cleaning.ocular)
    if watch is not None:
        watch("before-ocular", raw, None)
    give_back()  # the detector's and the repairs' freed temporaries (heschl.memory)
    ocular = OcularCorrection(method).fit(raw)
    if method != "none":
        ocular.apply(raw, copy=False)
    if watch is not None:
        watch("after-ocular", raw, ocular)
    record["ocular"] = dict(ocular.record(), policy=paradigm.cleaning.ocular)
    record["reference"] = rereference(raw, paradigm.cleaning.reference, where)
    return record
