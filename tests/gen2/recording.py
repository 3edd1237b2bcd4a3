"""One synthetic recording: brain, responses, artefacts, reference, bad channels, file."""
from __future__ import annotations

import json
import zlib
from pathlib import Path

import numpy as np
from scipy.special import expit

from . import artefacts as art
from .bad import choose_bad, plant
from .caps import cap_names, montage
from .events import CODES, SIZES, clicktrain, oddball, rest
from .signals import background, mismatch, narrowband, steady_state, tone_response, von_mises_kappa
from .spatial import FRONTOCENTRAL, MASTOIDS, spatial_model

__all__ = ["make_recording", "stream", "BACKGROUND_UV", "ALPHA_UV", "DEFAULT_EXPONENT"]

BACKGROUND_UV = 4.0        # rms in 1-30 Hz of the background per electrode (mean over channels)
ALPHA_UV = 1.8             # rms of the alpha rhythm, eyes open, at the posterior maximum
ALPHA_CLOSED_GAIN = (2.2, 3.0)   # amplitude ratio eyes closed / open (power ratio squared)
DEFAULT_EXPONENT = {"exponential": 1.3, "dipoles": 1.6}
PARADIGMS = ("oddball", "clicktrain", "rest")


def stream(seed, *keys):
    """A generator keyed by the seed and text/int keys (one stream per purpose)."""
    words = [k if isinstance(k, int) else zlib.crc32(str(k).encode()) for k in keys]
    return np.random.default_rng(np.random.SeedSequence([int(seed), *words]))


def _schedule(paradigm, size, duration_s, rng):
    if paradigm == "oddball":
        return oddball(rng, duration_s or SIZES[size]["oddball"])
    if paradigm == "clicktrain":
        n = SIZES[size]["clicktrain"] if duration_s is None else max(5, int((duration_s - 3.0) / 1.25))
        return clicktrain(rng, n)
    if paradigm == "rest":
        return rest(SIZES[size]["rest"] if duration_s is None else max(10.0, (duration_s - 2.5) / 2))
    raise ValueError(f'gen2: paradigm: "{paradigm}" is not one of {", ".join(PARADIGMS)}.')


def _add_at(x, pattern, course, onset, sfreq, offset):
    """Add ``pattern ⊗ course`` with course sample 0 at ``onset + offset`` s."""
    i0 = int(round((onset + offset) * sfreq))
    a, b = max(0, i0), min(x.shape[1], i0 + len(course))
    if b > a:
        x[:, a:b] += np.outer(pattern, course[a - i0:b - i0]).astype(x.dtype)


def _responses(rng, x, model, paradigm, onsets, labels, sfreq, subject):
    """Add the evoked responses; returns their truth."""
    t = np.arange(int(0.9 * sfreq)) / sfreq - 0.1
    names = model.names
    mastoid = float(np.mean([model.response[names.index(m)] for m in MASTOIDS]))
    gain = subject["tone_gain"]
    if paradigm == "oddball":
        amp, lat = subject["mismatch_uv"], subject["mismatch_latency_s"]
        std, dev = tone_response(t, gain), tone_response(t, gain) + mismatch(t, amp, lat)
        for onset, label in zip(onsets, labels):
            _add_at(x, model.response, dev if label == "deviant" else std, onset, sfreq, -0.1)
        return {"unit": "µV, mean over Fz FC1 FC2 FCz Cz, average reference",
                "tone_gain": gain, "mismatch_amplitude_uv": amp, "mismatch_latency_s": lat,
                "mismatch_sd_s": 0.028, "mastoid_over_frontocentral": round(mastoid, 4),
                "mismatch_at_mastoids_uv": round(amp * mastoid, 4)}
    if paradigm == "clicktrain":
        itpc = subject["itpc_40"]
        kappa = von_mises_kappa(itpc)
        phases = rng.vonmises(0.0, kappa, len(onsets)) if kappa > 0 else rng.uniform(-np.pi, np.pi, len(onsets))
        tt = np.arange(int(1.0 * sfreq)) / sfreq
        onset_wave = 0.6 * tone_response(t, gain)
        for onset, phase in zip(onsets, phases):
            _add_at(x, model.response, steady_state(tt, subject["assr_uv"], phase), onset, sfreq, 0.0)
            _add_at(x, model.response, onset_wave, onset, sfreq, -0.1)
        return {"unit": "µV, mean over Fz FC1 FC2 FCz Cz, average reference",
                "assr_amplitude_uv": subject["assr_uv"], "itpc_40": itpc, "von_mises_kappa": round(kappa, 4),
                "itpc_40_drawn": round(float(np.abs(np.mean(np.exp(1j * phases)))), 4),
                "rise_s": 0.045, "decay_s": 0.025, "onset_response_gain": 0.6 * gain}
    return {}


def _alpha(rng, x, model, paradigm, onsets, sfreq, subject):
    """Add the posterior alpha rhythm (eyes-closed gain at rest); returns its truth."""
    n = x.shape[1]
    time = np.arange(n) / sfreq
    envelope = np.ones(n)
    gain = subject["alpha_closed_gain"]
    if paradigm == "rest":
        switch = onsets[1] + 0.6
        envelope += (gain - 1.0) * expit((time - switch) / 0.08)
    for pattern in model.alpha:
        course = narrowband(rng, n, sfreq, subject["alpha_hz"], 0.7) * envelope * ALPHA_UV / np.sqrt(len(model.alpha))
        x += np.outer(pattern, course).astype(x.dtype)
    truth = {"peak_hz": subject["alpha_hz"], "eyes_open_rms_uv_at_max": ALPHA_UV}
    if paradigm == "rest":
        truth.update(closed_amplitude_gain=gain, closed_power_gain=round(gain ** 2, 4),
                     switch_s=round(float(onsets[1] + 0.6), 3))
    return truth


def subject_parameters(seed, subject):
    """Per-subject response parameters (the same for every paradigm of that subject)."""
    rng = stream(seed, "subject", subject)
    return {"tone_gain": round(float(rng.uniform(0.85, 1.15)), 4),
            "mismatch_uv": round(float(-rng.uniform(1.4, 2.2)), 4),
            "mismatch_latency_s": round(float(rng.uniform(0.14, 0.16)), 4),
            "assr_uv": round(float(rng.uniform(0.9, 1.3)), 4),
            "itpc_40": round(float(rng.uniform(0.55, 0.85)), 4),
            "alpha_hz": round(float(rng.uniform(8.8, 11.2)), 3),
            "alpha_closed_gain": round(float(rng.uniform(*ALPHA_CLOSED_GAIN)), 4)}


def _artefacts(seed, key, x, names, sfreq, paradigm, windows, duration, line, switches):
    """Scalp artefacts (reference-free); ``switches`` maps kind -> on/off. Returns truth."""
    truth = {}
    if switches.get("blink"):
        rate = art.RATES["blink"][paradigm]
        times = art.event_times(stream(seed, *key, "blink-times"), rate, windows, min_gap=1.2)
        truth["blinks"] = art.blinks(stream(seed, *key, "blink"), x, names, sfreq, times)
    if switches.get("saccade"):
        times = art.event_times(stream(seed, *key, "saccade-times"), art.RATES["saccade"][paradigm], windows, 2.0)
        truth["saccades"] = art.saccades(stream(seed, *key, "saccade"), x, names, sfreq, times)
    if switches.get("muscle"):
        times = art.event_times(stream(seed, *key, "muscle-times"), art.RATES["muscle"][paradigm],
                                [(0, duration)], 5.0)
        truth["muscle"] = art.muscle(stream(seed, *key, "muscle"), x, names, sfreq, times)
    if switches.get("drift"):
        x += art.drift(stream(seed, *key, "drift"), len(names), x.shape[1], sfreq)
        truth["drift_rms_uv"] = art.DRIFT_UV
    if switches.get("mains"):
        x += art.mains(stream(seed, *key, "mains"), len(names), x.shape[1], sfreq, line)
        truth["mains_uv"] = art.MAINS_UV
    return truth


ARTEFACT_KINDS = ("blink", "saccade", "muscle", "pop", "drift", "mains")


def _switches(artefacts):
    if artefacts is True:
        return dict.fromkeys(ARTEFACT_KINDS, True)
    if artefacts is False or artefacts is None:
        return dict.fromkeys(ARTEFACT_KINDS, False)
    unknown = set(artefacts) - set(ARTEFACT_KINDS)
    if unknown:
        raise ValueError(f"gen2: artefacts: unknown kind {sorted(unknown)[0]!r}; use {', '.join(ARTEFACT_KINDS)}.")
    return {k: bool(artefacts.get(k, False)) for k in ARTEFACT_KINDS}


def make_recording(path, *, paradigm, n_channels=64, sfreq=1000.0, duration_s=None, spatial="dipoles",
                   sensor_noise=0.15, exponent=None, bad=None, artefacts=True, seed=0, fmt="fif",
                   size="test", subject="G01", coupling=0.85, reference="Cz", line=50.0):
    """Write one recording and return its truth.

    Parameters
    ----------
    path : path-like
        Output file (``.fif``; ``.vhdr`` for ``fmt="brainvision"``).
    paradigm : {"oddball", "clicktrain", "rest"}
    n_channels : {32, 64, 128}, default=64
    sfreq : float, default=1000.0
        Hz.
    duration_s : float or None
        Oddball length, s (click trains and rest blocks scale to it); None uses ``size``.
    spatial : {"dipoles", "exponential"}, default="dipoles"
    sensor_noise : float, default=0.15
        Fraction of each channel's background variance that is independent sensor noise (0-0.3).
    exponent : float or None
        ``a`` of the 1/f^a background; None: 1.3 (exponential) or 1.6 (dipoles).
    bad : None, int, list of kinds or dict channel -> kind
        Planted bad channels (see :func:`gen2.bad.choose_bad`).
    artefacts : bool or dict kind -> bool
        Kinds: blink, saccade, muscle, pop, drift, mains.
    seed : int
    fmt : {"fif", "brainvision"}
    size : {"test", "full"}
    subject : str
        Keys the per-subject parameters and the random streams.
    coupling : float, default=0.85
        ``c`` of the exponential model.
    reference : str or None, default="Cz"
        The electrode the amplifier recorded against (not stored in the file); None stores
        average-referenced data.
    line : float, default=50.0
        Mains frequency, Hz.

    Returns
    -------
    truth : dict, JSON-ready
    """
    if not 0.0 <= sensor_noise < 1.0:
        raise ValueError(f"gen2: sensor_noise: {sensor_noise} is outside [0, 1); use a fraction such as 0.15.")
    names = cap_names(n_channels)
    exponent = DEFAULT_EXPONENT[spatial] if exponent is None else float(exponent)
    key = (subject, paradigm)
    onsets, labels, duration = _schedule(paradigm, size, duration_s, stream(seed, *key, "schedule"))
    n_times = int(round(duration * sfreq))
    model = spatial_model(names, spatial, coupling=coupling)
    x = background(stream(seed, *key, "background"), model.mixing, np.diag(model.cov), n_times, sfreq,
                   exponent, sensor_noise)
    x *= BACKGROUND_UV
    params = subject_parameters(seed, subject)
    truth = {"paradigm": paradigm, "subject": subject, "seed": seed, "sfreq": sfreq, "duration_s": duration,
             "n_channels": n_channels, "cap": names, "reference": reference or "average",
             "spatial": dict(model.truth, sensor_noise=sensor_noise, exponent=exponent,
                             background_rms_uv_1_30hz=BACKGROUND_UV),
             "subject_parameters": params}
    truth["alpha"] = _alpha(stream(seed, *key, "alpha"), x, model, paradigm, onsets, sfreq, params)
    truth["responses"] = _responses(stream(seed, *key, "responses"), x, model, paradigm, onsets, labels, sfreq,
                                    params)
    switches = _switches(artefacts)
    eyes_open = [(0.0, onsets[1])] if paradigm == "rest" else [(0.0, duration)]
    truth["artefacts"] = _artefacts(seed, key, x, names, sfreq, paradigm, eyes_open, duration, line, switches)
    stored = [n for n in names if n != reference]
    if reference is None:
        x -= x.mean(axis=0, keepdims=True)
    else:
        x = x[[names.index(n) for n in stored]] - x[names.index(reference)]
    protected = set(FRONTOCENTRAL) | set(MASTOIDS)
    chosen = choose_bad(stream(seed, *key, "bad-choice"), stored, bad, protected)
    truth["bad_channels"] = plant(stream(seed, *key, "bad"), x, stored, sfreq, chosen, line, protected,
                                  typical=BACKGROUND_UV)
    if switches["pop"]:
        times = art.event_times(stream(seed, *key, "pop-times"), art.RATES["pop"][paradigm], [(0, duration)], 3.0)
        truth["artefacts"]["pops"] = art.pops(stream(seed, *key, "pop"), x, stored, sfreq, times,
                                              exclude={r["channel"] for r in truth["bad_channels"]})
    truth["events"] = {"onsets_s": [float(o) for o in onsets], "labels": labels, "codes": CODES[paradigm]}
    truth["stored_channels"] = stored
    truth["file"] = Path(path).name
    _write(Path(path), x, stored, sfreq, onsets, [CODES[paradigm][lab] for lab in labels], fmt)
    return truth


def _raw(x_uv, names, sfreq, onsets, codes):
    import mne

    stim = np.zeros((1, x_uv.shape[1]))
    width = max(1, int(round(0.01 * sfreq)))
    for onset, code in zip(onsets, codes):
        i = int(round(onset * sfreq))
        stim[0, i:i + width] = code
    info = mne.create_info(list(names) + ["STIM"], sfreq, ["eeg"] * len(names) + ["stim"])
    raw = mne.io.RawArray(np.vstack([x_uv.astype(np.float64) * 1e-6, stim]), info, verbose="error")
    raw.set_montage(montage(), on_missing="ignore", verbose="error")
    return raw


def _write(path, x_uv, names, sfreq, onsets, codes, fmt):
    path.parent.mkdir(parents=True, exist_ok=True)
    raw = _raw(x_uv, names, sfreq, onsets, codes)
    if fmt == "fif":
        raw.save(path, overwrite=True, verbose="error")
    elif fmt == "brainvision":
        try:
            import pybv  # noqa: F401  (mne's BrainVision export needs it)
        except ImportError:
            raise ValueError("gen2: fmt: BrainVision export needs pybv, which is not installed; "
                             'use fmt="fif" or install pybv.') from None
        import mne

        raw.set_annotations(mne.annotations_from_events(
            mne.find_events(raw, stim_channel="STIM", verbose="error"), sfreq,
            {c: f"Stimulus/S{c:3d}" for c in set(codes)}, verbose="error"))
        raw.drop_channels(["STIM"])
        mne.export.export_raw(path, raw, fmt="brainvision", overwrite=True, verbose="error")
    else:
        raise ValueError(f'gen2: fmt: "{fmt}" is not a format; use "fif" or "brainvision".')


def write_truth(path, truth):
    Path(path).write_text(json.dumps(truth, indent=1, ensure_ascii=False), encoding="utf-8")
