"""The plain mne + autoreject script a researcher would write for the three paradigms.

Not a test: the hand-written baseline of ``benchmarks/versus.py``, run by hand from the
repository root on a study written by ``benchmarks/fullsize.py``,

    python benchmarks/handwritten.py STUDY_FOLDER [--subject F01] [--paradigms oddball,clicktrain,rest]
                                                  [--filter-first] [--json out.json]

It reads ``STUDY_FOLDER/raw/sub-<subject>/sub-<subject>_task-<paradigm>_raw.fif`` and,
for each paradigm, does what heschl does in the plainest way: resample to the paradigm's
analysis rate, notch the mains and its harmonics, band-pass, average reference, epoch
(or cut rest into segments), reject (autoreject's local method for the oddball, the
paradigm's fixed peak-to-peak limit for the click train and rest), and measures the
features of the paradigm's ``*-core`` feature set under heschl's feature names. The
settings come from the repository's ``paradigms/*.toml`` and ``features/*.toml`` (the
files heschl's built-in names refer to), read with tomllib; the trigger codes from
``fullsize.CODES``.

What it deliberately does not do, unlike heschl: no bad-channel detection and
interpolation, no ocular correction (ICA), no muscle or saturation marks, no reliability
columns, no QC record, no pages. Every stage is timed (``time.perf_counter``).

Order: resample before filtering, as heschl does, so that the comparison measures what
heschl adds rather than a choice of order. ``--filter-first`` notches and band-passes at
the file's rate, then resamples, as many scripts do: the filters then cost several times
as much, and the features move slightly (by 0.04 uV for the mismatch amplitude on a
short test recording), because the FIR filters and the resampler's anti-alias filter meet
the data in another order.
"""
from __future__ import annotations

import argparse
import json
import re
import sys
import time
import tomllib
from pathlib import Path

import numpy as np
import scipy.signal

from fullsize import CODES, LINE_FREQUENCY, STIM_CHANNEL

REPOSITORY = Path(__file__).resolve().parent.parent
PARADIGMS = ("oddball", "clicktrain", "rest")
N_CYCLES = 7.0          # Morlet cycles, as in heschl's features
UV, UV2 = 1e6, 1e12     # V -> uV, V^2 -> uV^2


class Stopwatch:
    """Seconds spent in each named stage, in order."""

    def __init__(self):
        self.times = {}
        self._last = time.perf_counter()

    def lap(self, stage):
        """Close the stage that just ended."""
        now = time.perf_counter()
        self.times[stage] = round(self.times.get(stage, 0.0) + now - self._last, 4)
        self._last = now


def definitions(paradigm):
    """The paradigm file and its core feature set, as plain dicts."""
    with open(REPOSITORY / "paradigms" / f"{paradigm}.toml", "rb") as fh:
        design = tomllib.load(fh)
    with open(REPOSITORY / "features" / f"{paradigm}-core.toml", "rb") as fh:
        features = tomllib.load(fh)
    return design, features


# ----------------------------------------------------------------------------- continuous data
def read_and_clean(path, cleaning, clock, filter_first=False):
    """Read a FIF file and clean it as the paradigm's [cleaning] table says.

    Returns
    -------
    raw : mne.io.Raw
        EEG and EOG at the analysis rate, notched, band-passed, average reference.
    events : ndarray, shape (n_events, 3)
        Trigger events, samples at the analysis rate.
    """
    import mne

    raw = mne.io.read_raw_fif(path, preload=True, verbose="error")
    events = mne.find_events(raw, stim_channel=STIM_CHANNEL, shortest_event=1, verbose="error")
    raw.pick(["eeg", "eog"])
    clock.lap("read")
    if filter_first:
        _filter(raw, cleaning, clock)
    raw, events = raw.resample(cleaning["sampling_rate"], events=events, verbose="error")
    clock.lap("resample")
    if not filter_first:
        _filter(raw, cleaning, clock)
    raw.set_eeg_reference("average", projection=False, verbose="error")
    clock.lap("reference")
    return raw, events


def _filter(raw, cleaning, clock):
    """Mains notches below Nyquist, then the pass band (mne's default FIR filters)."""
    nyquist = raw.info["sfreq"] / 2
    mains = np.arange(LINE_FREQUENCY, nyquist, LINE_FREQUENCY)
    raw.notch_filter(mains, picks=["eeg", "eog"], verbose="error")
    clock.lap("notch")
    low, high = cleaning["pass_band"]
    raw.filter(low, high, picks=["eeg", "eog"], verbose="error")
    clock.lap("band-pass")


def _epochs(raw, events, event_id, window, baseline, reject=None):
    """mne.Epochs of the EEG channels, loaded."""
    import mne

    return mne.Epochs(raw, events, event_id=event_id, tmin=window[0], tmax=window[1], baseline=baseline,
                      picks="eeg", reject=reject, reject_by_annotation=False, preload=True, verbose="error")


# ----------------------------------------------------------------------------- small measures
def _mask(times, window):
    """Samples inside a window, both ends included (to a millionth of a sample)."""
    tol = 1e-6 * (times[1] - times[0])
    return (times >= window[0] - tol) & (times <= window[1] + tol)


def _region(ch_names, channels):
    """Indices of a region's channels."""
    return [ch_names.index(c) for c in channels]


def _closed_mask(freqs, band, closed):
    """Frequency bins of a band with the feature set's edge convention."""
    low, high = band
    above = freqs >= low if closed in ("left", "both") else freqs > low
    below = freqs <= high if closed in ("right", "both") else freqs < high
    return above & below


def negative_area_latency(wave, times, window, fraction=0.5):
    """Time at which the negative area in the window reaches ``fraction`` of its total."""
    inside = _mask(times, window)
    t, part = times[inside], np.clip(-wave[inside], 0.0, None)
    area = np.concatenate([[0.0], np.cumsum((part[1:] + part[:-1]) / 2 * np.diff(t))])
    return float(np.interp(fraction * area[-1], area, t)) if area[-1] > 0 else float("nan")


# ----------------------------------------------------------------------------- oddball
def oddball(path, filter_first=False):
    """Mismatch features: autoreject (local), averages, difference wave, window measures.

    Returns
    -------
    dict
        ``features`` (heschl's names, heschl's units), ``n_trials``, ``times_s``.
    """
    from autoreject import AutoReject

    design, feature_set = definitions("oddball")
    clock = Stopwatch()
    raw, events = read_and_clean(path, design["cleaning"], clock, filter_first)
    codes = CODES["oddball"]
    planned = {c: int((events[:, 2] == v).sum()) for c, v in codes.items()}   # before the skip rule
    after_deviant = np.r_[False, events[:-1, 2] == codes["deviant"]]
    events = events[~((events[:, 2] == codes["standard"]) & after_deviant)]  # skip rule of the paradigm
    epochs = _epochs(raw, events, codes, design["epochs"]["window"], tuple(design["epochs"]["baseline"]))
    clock.lap("epoch")
    cleaned = AutoReject(random_state=0, n_jobs=1, verbose=False).fit_transform(epochs)
    clock.lap("reject")
    averages = {c: cleaned[c].average().get_data() for c in codes}
    averages["mismatch"] = averages["deviant"] - averages["standard"]
    clock.lap("average")
    features = oddball_features(averages, cleaned.times, cleaned.ch_names, feature_set)
    clock.lap("features")
    return {"features": features, "n_trials": {c: len(cleaned[c]) for c in codes},
            "planned": planned, "times_s": clock.times}


def oddball_features(averages, times, ch_names, feature_set):
    """The oddball-core measures from the condition averages and the difference wave (uV, ms)."""
    out = {}
    for m in feature_set["measures"]:
        channels = feature_set["regions"][m["region"]]
        wave = averages[m["signal"]][_region(ch_names, channels)].mean(axis=0)
        inside = _mask(times, m["window"])
        if m["kind"] == "mean-amplitude":
            out[m["name"]] = float(wave[inside].mean() * UV)
            for c in channels if m.get("per_channel") else ():
                out[f"{m['name']}.{c}"] = float(averages[m["signal"]][ch_names.index(c)][inside].mean() * UV)
        elif m["kind"] in ("peak-amplitude", "peak-latency"):
            at = np.flatnonzero(inside)[np.argmin(wave[inside])]    # polarity "negative"
            out[m["name"]] = float(wave[at] * UV) if m["kind"] == "peak-amplitude" else float(times[at] * 1e3)
        elif m["kind"] == "fractional-area-latency":
            out[m["name"]] = negative_area_latency(wave, times, m["window"], m.get("fraction", 0.5)) * 1e3
    return out


# ----------------------------------------------------------------------------- click train
def clicktrain(path, filter_first=False):
    """40 Hz features: fixed peak-to-peak rejection, Morlet coefficients, ITPC and power."""
    from mne.time_frequency import tfr_array_morlet

    design, feature_set = definitions("clicktrain")
    clock = Stopwatch()
    raw, events = read_and_clean(path, design["cleaning"], clock, filter_first)
    epochs = _epochs(raw, events, CODES["clicktrain"], design["epochs"]["window"],
                     tuple(design["epochs"]["baseline"]), reject={"eeg": design["rejection"]["peak_to_peak_uv"] / UV})
    clock.lap("epoch and reject")
    data, sfreq = epochs.get_data(), epochs.info["sfreq"]
    coefs = tfr_array_morlet(data, sfreq, [40.0], n_cycles=N_CYCLES, zero_mean=True, output="complex",
                             verbose="error")[:, :, 0] * morlet_scale(sfreq, 40.0)
    clock.lap("wavelets")
    features = clicktrain_features(coefs, data, epochs.times, epochs.ch_names, sfreq, feature_set)
    clock.lap("features")
    return {"features": features, "n_trials": {"train": len(epochs)},
            "planned": {"train": int((events[:, 2] == CODES["clicktrain"]["train"]).sum())}, "times_s": clock.times}


def morlet_scale(sfreq, frequency):
    """Factor that makes mne's Morlet coefficients of a sinusoid its RMS amplitude.

    mne scales each wavelet to an L2 norm of sqrt(2), so a sinusoid's coefficient grows
    with the wavelet's length; heschl reports |coef|^2 as the sinusoid's mean power
    (V^2). For a sinusoid of amplitude A the coefficient is (A / 2) sum |w|, its RMS is
    A / sqrt(2): the factor is sqrt(2) / sum |w|.
    """
    from mne.time_frequency import morlet

    wavelet = morlet(sfreq, [frequency], n_cycles=N_CYCLES, zero_mean=True)[0]
    return np.sqrt(2.0) / np.abs(wavelet).sum()


def clicktrain_features(coefs, data, times, ch_names, sfreq, feature_set):
    """The clicktrain-core measures from the 40 Hz coefficients (n_trials, n_channels, n_times)."""
    n = len(coefs)
    phasors = coefs / np.abs(coefs)

    def evoked(c):
        return np.abs(coefs[:, c].mean(axis=0)) ** 2 * UV2

    per_kind = {
        "itpc": lambda c: np.abs(phasors[:, c].mean(axis=0)),
        "evoked-power": evoked,
        "induced-power": lambda c: (np.abs(coefs[:, c]) ** 2).mean(axis=0) * UV2 - evoked(c),
        "ppc": lambda c: (n * np.abs(phasors[:, c].mean(axis=0)) ** 2 - 1) / (n - 1),
    }
    out = {}
    for m in feature_set["measures"]:
        channels = feature_set["regions"][m["region"]]
        picks, inside = _region(ch_names, channels), _mask(times, m["window"])
        if m["kind"] in per_kind:
            out[m["name"]] = float(per_kind[m["kind"]](picks)[:, inside].mean())
            for c in channels if m.get("per_channel") else ():
                out[f"{m['name']}.{c}"] = float(per_kind[m["kind"]]([ch_names.index(c)])[:, inside].mean())
        elif m["kind"] == "rayleigh-p":
            r = float(per_kind["itpc"](picks)[:, inside].mean())
            out[m["name"]] = float(min(1.0, np.exp(np.sqrt(1 + 4 * n + 4 * (n * n - (n * r) ** 2)) - (1 + 2 * n))))
        elif m["kind"] == "snr":
            wave = data[:, picks].mean(axis=(0, 1))[inside]
            power, freqs = np.abs(np.fft.rfft(wave)) ** 2, np.fft.rfftfreq(wave.size, 1 / sfreq)
            k = int(np.argmin(np.abs(freqs - m["frequency"])))
            out[m["name"]] = float(power[k] / power[[k - 4, k - 3, k - 2, k + 2, k + 3, k + 4]].mean())
    return out


# ----------------------------------------------------------------------------- rest
def rest(path, filter_first=False):
    """Band power per condition: segments inside each block, fixed limit, Welch spectra."""
    design, feature_set = definitions("rest")
    clock = Stopwatch()
    raw, events = read_and_clean(path, design["cleaning"], clock, filter_first)
    seg, sfreq = design["segments"], raw.info["sfreq"]
    starts = segment_events(events, raw.n_times, sfreq, seg["length"], seg["overlap"], seg["skip_start"])
    epochs = _epochs(raw, starts, CODES["rest"], (0.0, seg["length"] - 1 / sfreq), None,
                     reject={"eeg": design["rejection"]["peak_to_peak_uv"] / UV})
    clock.lap("epoch and reject")
    spectra = {}
    for condition in CODES["rest"]:
        x = epochs[condition].get_data()
        nperseg = int(round(feature_set["spectrum"]["segment"] * sfreq))
        freqs, psd = scipy.signal.welch(x, fs=sfreq, window="hann", nperseg=nperseg,
                                        noverlap=int(round(feature_set["spectrum"]["overlap"] * nperseg)))
        spectra[condition] = psd.mean(axis=0)
    clock.lap("spectra")
    features = rest_features(freqs, spectra, epochs.ch_names, feature_set)
    clock.lap("features")
    return {"features": features, "n_trials": {c: len(epochs[c]) for c in CODES["rest"]},
            "planned": {c: int((starts[:, 2] == v).sum()) for c, v in CODES["rest"].items()}, "times_s": clock.times}


def segment_events(events, n_times, sfreq, length, overlap, skip_start):
    """Events at the start of every segment of every block (a block runs to the next marker)."""
    step = length * (1 - overlap)
    ends = list(events[1:, 0] / sfreq) + [n_times / sfreq]
    rows = []
    for (sample, _, code), end in zip(events, ends):
        start = sample / sfreq + skip_start
        count = int(np.floor((end - start - length) / step + 1e-9)) + 1
        rows += [[int(round((start + k * step) * sfreq)), 0, code] for k in range(max(count, 0))]
    return np.array(rows, dtype=int)


def rest_features(freqs, spectra, ch_names, feature_set):
    """The rest-core measures from the mean Welch spectra per condition (uV^2, Hz)."""
    df = freqs[1] - freqs[0]
    bands = {name: (b["range"], b.get("closed", "left")) for name, b in feature_set["bands"].items()}

    def power(condition, region, band):
        psd = spectra[condition][_region(ch_names, feature_set["regions"][region])].mean(axis=0)
        return psd[_closed_mask(freqs, *bands[band])].sum() * df

    out = {}
    for m in feature_set["measures"]:
        region, kind = m["region"], m["kind"]
        for signal in _as_list(m.get("signal", [None])):
            for band in _as_list(m.get("band", [None])):
                name = m.get("name") or "_".join(re.sub(r"[^0-9A-Za-z]+", "_", p)
                                                 for p in (kind, band, signal, region) if p)
                if kind == "band-power":
                    out[name] = float(power(signal, region, band) * UV2)
                elif kind == "relative-band-power":
                    out[name] = float(power(signal, region, band) / power(signal, region, m["relative_to"]))
                elif kind == "band-ratio":
                    out[name] = float(power(m["numerator"], region, band) / power(m["denominator"], region, band))
                elif kind == "peak-frequency":
                    out[name] = alpha_peak(freqs, _region_psd(spectra, signal, ch_names, feature_set, region),
                                           bands[band][0])
                elif kind in ("aperiodic-exponent", "aperiodic-offset"):
                    exponent, offset = log_log_line(freqs, _region_psd(spectra, signal, ch_names, feature_set, region))
                    out[name] = exponent if kind == "aperiodic-exponent" else offset + 12.0  # log10(uV^2/Hz)
    return out


def _as_list(value):
    return value if isinstance(value, list) else [value]


def _region_psd(spectra, signal, ch_names, feature_set, region):
    return spectra[signal][_region(ch_names, feature_set["regions"][region])].mean(axis=0)


def alpha_peak(freqs, psd, band):
    """Largest bin of the band, placed between bins by a parabola through log10 power."""
    inside = np.flatnonzero((freqs >= band[0]) & (freqs <= band[1]))
    k = inside[np.argmax(psd[inside])]
    a, b, c = np.log10(psd[k - 1:k + 2])
    return float(freqs[k] + 0.5 * (a - c) / (a - 2 * b + c) * (freqs[1] - freqs[0]))


def log_log_line(freqs, psd, fit=(2.0, 40.0), exclude=(7.0, 14.0)):
    """Least-squares line of log10 power on log10 frequency (the alpha band left out).

    Returns the exponent (minus the slope) and the offset (log10 V^2/Hz at 1 Hz).
    """
    keep = (freqs >= fit[0]) & (freqs <= fit[1]) & ~((freqs >= exclude[0]) & (freqs <= exclude[1]))
    slope, intercept = np.polyfit(np.log10(freqs[keep]), np.log10(psd[keep]), 1)
    return float(-slope), float(intercept)


# ----------------------------------------------------------------------------- command line
RUNNERS = {"oddball": oddball, "clicktrain": clicktrain, "rest": rest}


def run(folder, subject="F01", paradigms=PARADIGMS, filter_first=False):
    """Every paradigm of one participant; returns {paradigm: result} and the total seconds."""
    results, start = {}, time.perf_counter()
    for paradigm in paradigms:
        path = Path(folder) / "raw" / f"sub-{subject}" / f"sub-{subject}_task-{paradigm}_raw.fif"
        results[paradigm] = RUNNERS[paradigm](path, filter_first)
    return results, time.perf_counter() - start


def _print(results, total):
    for paradigm, result in results.items():
        stages = ", ".join(f"{k} {v:.2f}" for k, v in result["times_s"].items())
        print(f"{paradigm}: {sum(result['times_s'].values()):.2f} s ({stages}); trials {result['n_trials']}")
        for name, value in result["features"].items():
            print(f"    {name:<48} {value:.6g}")
    print(f"all: {total:.2f} s")


def main(argv=None):
    """Command line: run the paradigms, print features and stage times, write JSON."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folder", help="study folder written by benchmarks/fullsize.py")
    parser.add_argument("--subject", default="F01")
    parser.add_argument("--paradigms", default=",".join(PARADIGMS))
    parser.add_argument("--filter-first", action="store_true", help="notch and band-pass before resampling")
    parser.add_argument("--json", default=None, help="write the results here")
    parser.add_argument("--quiet", action="store_true", help="print nothing")
    args = parser.parse_args(argv)
    paradigms = [p for p in args.paradigms.split(",") if p]
    results, total = run(args.folder, args.subject, paradigms, args.filter_first)
    if not args.quiet:
        _print(results, total)
    if args.json:
        Path(args.json).write_text(json.dumps({"paradigms": results, "total_s": total}, indent=1) + "\n",
                                   encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
