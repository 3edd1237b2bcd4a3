"""Write one full-size synthetic participant (oddball, click train, rest) and its study file.

Not a test: a generator for the benchmarks, run by hand from the repository root,

    python benchmarks/fullsize.py OUT_FOLDER [--minutes-scale 1.0] [--channels 64]
                                             [--oddball-minutes 15] [--subjects 1] [--seed 20261204]

``--minutes-scale 0.1`` shrinks every duration for a quick check. It writes, under
``OUT_FOLDER``:

- ``raw/sub-F01/sub-F01_task-<paradigm>_raw.fif`` for the oddball, the click train and
  rest: 32, 64 or 128 EEG channels (10-05 names, mne's template 10-05 positions stored in
  the file), VEOG and HEOG, a stimulus channel ``STI 014`` carrying the trigger codes,
  1000 Hz, volts;
- ``participants.tsv``, ``study.toml`` (the built-in ``oddball``, ``clicktrain`` and
  ``rest`` paradigms and their ``*-core`` feature sets, i.e. the repository's
  ``paradigms/`` and ``features/`` files, named as heschl's study format allows) and
  ``truth.json`` (what was planted, the schedules and the array sizes).

The model is our own and shares nothing with ``heschl.synth``: background activity is
1/f-like noise (a pole-zero "staircase" filter) mixed over the scalp through a
distance-based covariance (exponential kernel of the electrode distance), plus
independent sensor noise; posterior alpha from two smooth occipito-parietal
topographies, stronger with eyes closed; auditory responses with a fronto-central
topography that inverts at the mastoids (N1 and P2 to every tone; a mismatch-like
negativity and a small P3a added to deviants; a 40 Hz steady-state response during each
click train); blinks (VEOG and frontal channels), a few horizontal eye movements (HEOG
and lateral frontal channels), occasional muscle bursts over a temporal electrode and 50
Hz line noise with two harmonics. Every random number comes from a stream keyed by the
seed, the subject, the paradigm and the purpose: the same arguments write the same files.

Stimulus onsets lie on the 4 ms grid of the paradigms' 250 Hz analysis rate, so that
a script that rounds epochs to the nearest sample and heschl's sub-sample cutting see
the same trials.
"""
from __future__ import annotations

import argparse
import datetime
import json
import math
import sys
import zlib
from pathlib import Path

import numpy as np
import scipy.signal

__all__ = ["write_subject", "write_study", "channel_names", "PARADIGMS", "SFREQ", "CODES"]

#: Sampling rate of the files, Hz.
SFREQ = 1000.0
#: Onset grid, s: one sample at the paradigms' 250 Hz analysis rate.
GRID_S = 0.004
#: The paradigms written, in order.
PARADIGMS = ("oddball", "clicktrain", "rest")
#: Trigger codes on the stimulus channel, per paradigm and marker.
CODES = {"oddball": {"standard": 1, "deviant": 2}, "clicktrain": {"train": 3},
         "rest": {"eyes-open": 10, "eyes-closed": 20}}
STIM_CHANNEL = "STI 014"
EOG_CHANNELS = ("VEOG", "HEOG")
LINE_FREQUENCY = 50.0
SITE = "bench"

#: Full-size lengths: oddball tones per 15 min, click trains, rest seconds.
ODDBALL_TONES_PER_15_MIN = 2100
CLICK_TRAINS = 150
REST_SECONDS = 600.0
#: Mean onset asynchrony of the tones (15 min / 2100 tones), its uniform jitter, s.
TONE_SOA_S = 15 * 60 / ODDBALL_TONES_PER_15_MIN
TONE_JITTER_S = 0.02
DEVIANT_SHARE = 0.15
LEADING_STANDARDS = 5
#: Click trains: onset asynchrony, jitter and train length, s. The length is that of
#: paradigms/clicktrain.toml (stimulation.duration = 0.5 s, whose epochs and feature
#: windows are laid out for it).
TRAIN_SOA_S = 2.0
TRAIN_JITTER_S = 0.1
TRAIN_S = 0.5
ASSR_HZ = 40.0
#: Rest: blocks of about this length, alternating eyes open and eyes closed.
REST_BLOCK_S = 60.0

_PULSE_SAMPLES = 5
_CHUNK = 10_000          # samples per chunk of streamed noise
_START = datetime.datetime(2026, 12, 4, 9, 0, 0, tzinfo=datetime.timezone.utc)

#: A 32-channel 10-20 cap.
CHANNELS_32 = ("Fp1", "Fp2", "F7", "F3", "Fz", "F4", "F8", "FC5", "FC1", "FCz", "FC2", "FC6",
               "T7", "C3", "Cz", "C4", "T8", "TP9", "CP5", "CP1", "CP2", "CP6", "TP10",
               "P7", "P3", "Pz", "P4", "P8", "O1", "Oz", "O2", "POz")
#: A 64-channel 10-10 cap.
CHANNELS_64 = ("Fp1", "Fpz", "Fp2", "AF7", "AF3", "AFz", "AF4", "AF8",
               "F7", "F5", "F3", "F1", "Fz", "F2", "F4", "F6", "F8",
               "FT7", "FC5", "FC3", "FC1", "FCz", "FC2", "FC4", "FC6", "FT8",
               "T7", "C5", "C3", "C1", "Cz", "C2", "C4", "C6", "T8",
               "TP7", "CP5", "CP3", "CP1", "CPz", "CP2", "CP4", "CP6", "TP8",
               "P7", "P5", "P3", "P1", "Pz", "P2", "P4", "P6", "P8",
               "PO7", "PO3", "POz", "PO4", "PO8", "O1", "Oz", "O2", "TP9", "TP10", "Iz")
#: Old 10-20 aliases and ear/mastoid points of the montage, never chosen as electrodes.
_NOT_ELECTRODES = {"T3", "T4", "T5", "T6", "M1", "M2", "A1", "A2"}
#: Lowest electrode height (z, m, head frame) considered for the 128-channel cap.
_LOWEST_Z = -0.05


def _stream(seed, *keys):
    """Random generator for one purpose, from the seed and text keys."""
    entropy = [int(seed)] + [zlib.crc32(str(key).encode("utf-8")) for key in keys]
    return np.random.default_rng(np.random.SeedSequence(entropy))


def template_montage():
    """mne's template 10-05 montage (``colin27_1005``; ``standard_1005`` in mne < 1.13)."""
    import mne

    try:
        return mne.channels.make_standard_montage("colin27_1005")
    except ValueError:
        return mne.channels.make_standard_montage("standard_1005")


def _positions(montage):
    """Name -> position (m, head frame) of every point of the montage."""
    return {name: np.asarray(p, dtype=float) for name, p in montage.get_positions()["ch_pos"].items()}


def channel_names(n_channels):
    """The EEG channel names of a cap of 32, 64 or 128 electrodes.

    The 128-electrode cap is the 64-electrode cap plus 64 more 10-05 positions, chosen
    greedily (farthest from those already chosen, ties by name) among the montage's
    electrodes at least ``_LOWEST_Z`` high, which spreads them evenly.

    Parameters
    ----------
    n_channels : {32, 64, 128}

    Returns
    -------
    list of str
    """
    if n_channels == 32:
        return list(CHANNELS_32)
    if n_channels == 64:
        return list(CHANNELS_64)
    if n_channels != 128:
        raise ValueError(f"fullsize: channels: {n_channels} is not 32, 64 or 128.")
    pos = _positions(template_montage())
    chosen = list(CHANNELS_64)
    candidates = sorted(n for n, p in pos.items()
                        if n not in chosen and n not in _NOT_ELECTRODES and p[2] >= _LOWEST_Z)
    cand_pos = np.array([pos[n] for n in candidates])
    nearest = np.min(np.linalg.norm(cand_pos[:, None] - np.array([pos[n] for n in chosen])[None], axis=2), axis=1)
    while len(chosen) < 128:
        best = int(np.argmax(nearest))
        chosen.append(candidates[best])
        nearest = np.minimum(nearest, np.linalg.norm(cand_pos - cand_pos[best], axis=1))
        nearest[best] = -1.0
    return chosen


# ----------------------------------------------------------------------------- schedules
def _on_grid(times):
    """Round times (s) to the onset grid."""
    return np.round(np.asarray(times, dtype=float) / GRID_S) * GRID_S


def _deviant_sequence(rng, n_tones):
    """Deviant flags: none among the first tones, never two in a row, about 15 % overall.

    After a standard the next tone is a deviant with probability q; after a deviant it
    is a standard. The stationary share of deviants is q / (1 + q), so q = p / (1 - p).
    """
    q = DEVIANT_SHARE / (1.0 - DEVIANT_SHARE)
    draws = rng.random(n_tones)
    flags = np.zeros(n_tones, dtype=bool)
    for i in range(LEADING_STANDARDS, n_tones):
        flags[i] = (not flags[i - 1]) and draws[i] < q
    return flags


def oddball_schedule(rng, minutes, scale):
    """Tone onsets and conditions of an oddball of ``minutes`` x ``scale`` minutes.

    Returns
    -------
    onsets : dict of str -> ndarray, s
    duration : float, s
    """
    n_tones = max(20, int(round(ODDBALL_TONES_PER_15_MIN * minutes / 15.0 * scale)))
    steps = TONE_SOA_S + rng.uniform(-TONE_JITTER_S, TONE_JITTER_S, n_tones - 1)
    onsets = _on_grid(1.0 + np.concatenate([[0.0], np.cumsum(steps)]))
    deviant = _deviant_sequence(rng, n_tones)
    duration = math.ceil(onsets[-1] + 1.0)
    return {"standard": onsets[~deviant], "deviant": onsets[deviant]}, float(duration)


def clicktrain_schedule(rng, scale):
    """Onsets of the click trains (``CLICK_TRAINS`` x ``scale`` of them)."""
    n_trains = max(10, int(round(CLICK_TRAINS * scale)))
    steps = TRAIN_SOA_S + rng.uniform(-TRAIN_JITTER_S, TRAIN_JITTER_S, n_trains - 1)
    onsets = _on_grid(2.0 + np.concatenate([[0.0], np.cumsum(steps)]))
    duration = math.ceil(onsets[-1] + TRAIN_S + 1.5)
    return {"train": onsets}, float(duration)


def rest_schedule(scale):
    """Block markers of rest: an even number of blocks, eyes open first, then alternating.

    Returns
    -------
    onsets : dict of str -> ndarray, s
    duration : float, s
    blocks : list of (start_s, end_s, condition)
    """
    total = REST_SECONDS * scale
    n_blocks = max(2, 2 * int(round(total / (2 * REST_BLOCK_S))))
    block = _on_grid(total / n_blocks)[()]
    starts = 1.0 + block * np.arange(n_blocks)
    names = ["eyes-open" if k % 2 == 0 else "eyes-closed" for k in range(n_blocks)]
    duration = float(math.ceil(starts[-1] + block + 1.0))
    ends = list(starts[1:]) + [duration]
    onsets = {c: np.array([s for s, n in zip(starts, names) if n == c]) for c in ("eyes-open", "eyes-closed")}
    return onsets, duration, [(float(s), float(e), n) for s, e, n in zip(starts, ends, names)]


# ----------------------------------------------------------------------------- geometry
class Head:
    """Electrode positions and the smooth topographies the generator uses.

    Parameters
    ----------
    names : list of str
        EEG channel names (10-05).
    """

    #: Length of the exponential distance kernel of the background, m.
    KERNEL_LENGTH_M = 0.04

    def __init__(self, names):
        self.names = list(names)
        self.all_positions = _positions(template_montage())
        self.pos = np.array([self.all_positions[n] for n in self.names])

    def bump(self, centre, width):
        """Gaussian of the distance to a montage point (or a position), peak 1."""
        centre = self.all_positions[centre] if isinstance(centre, str) else np.asarray(centre)
        distance = np.linalg.norm(self.pos - centre, axis=1)
        return np.exp(-0.5 * (distance / width) ** 2)

    def auditory(self):
        """Fronto-central topography that inverts at the mastoids (peak 1 near FCz)."""
        topo = self.bump("FCz", 0.05) - 0.5 * (self.bump("TP9", 0.035) + self.bump("TP10", 0.035))
        return topo / topo.max()

    def p3a(self):
        """Central topography of the P3a (peak 1 near Cz)."""
        return self.bump("Cz", 0.055)

    def alpha(self):
        """Two posterior topographies (left and right parieto-occipital), shape (2, n)."""
        return np.vstack([self.bump("PO3", 0.045), self.bump("PO4", 0.045)])

    def eye_weights(self):
        """Spread of blink (vertical) and horizontal eye potentials over the electrodes.

        Returns
        -------
        vertical : ndarray, shape (n,)
            Share of the VEOG blink amplitude at each electrode (about 0.8 at Fp1/Fp2,
            falling off over a few centimetres).
        horizontal : ndarray, shape (n,)
            Share of the HEOG step (positive on the right, negative on the left).
        """
        eyes = [np.array([-0.032, 0.09, -0.035]), np.array([0.032, 0.09, -0.035])]
        distance = np.min([np.linalg.norm(self.pos - e, axis=1) for e in eyes], axis=0)
        vertical = 1.4 * np.exp(-distance / 0.03)
        left, right = np.array([-0.065, 0.07, -0.04]), np.array([0.065, 0.07, -0.04])
        horizontal = 0.5 * (np.exp(-np.linalg.norm(self.pos - right, axis=1) / 0.03)
                            - np.exp(-np.linalg.norm(self.pos - left, axis=1) / 0.03))
        return vertical, horizontal

    def mixing(self):
        """Lower Cholesky factor of the background covariance, exp(-distance / length)."""
        distance = np.linalg.norm(self.pos[:, None] - self.pos[None], axis=2)
        cov = np.exp(-distance / self.KERNEL_LENGTH_M) + 1e-6 * np.eye(len(self.names))
        return np.linalg.cholesky(cov)


# ----------------------------------------------------------------------------- background
#: Poles and zeros (Hz) of the 1/f-like filter: one pole and one zero per decade make the
#: power fall by 10 dB per decade (1/f) from 0.3 Hz to 95 Hz; flat outside.
_PINK_POLES_HZ = (0.3, 3.0, 30.0)
_PINK_ZEROS_HZ = (0.95, 9.5, 95.0)
#: Broadband RMS (V) of the background at every electrode, of the independent sensor
#: noise, and of the EOG channels' own noise.
BACKGROUND_V = 10e-6
SENSOR_NOISE_V = 1.5e-6
EOG_NOISE_V = 4e-6
#: Alpha: centre frequency (Hz), band of the narrowband source, RMS at the topography's
#: peak with eyes closed (V), and the share left with eyes open (amplitude).
ALPHA_HZ = 10.0
ALPHA_BAND_HZ = (9.0, 11.0)
ALPHA_CLOSED_V = 12e-6
ALPHA_OPEN_SHARE = 0.4


def _pink_sos(sfreq):
    """Second-order sections of the 1/f-like filter with unit RMS gain for white noise."""
    poles = np.exp(-2 * np.pi * np.asarray(_PINK_POLES_HZ) / sfreq)
    zeros = np.exp(-2 * np.pi * np.asarray(_PINK_ZEROS_HZ) / sfreq)
    sos = scipy.signal.zpk2sos(zeros, poles, 1.0)
    _, response = scipy.signal.sosfreqz(sos, worN=2 ** 16)
    sos[0, :3] /= np.sqrt(np.mean(np.abs(response) ** 2))
    return sos


class NoiseStream:
    """Chunks of filtered noise that continue across chunk boundaries (filter state kept).

    Parameters
    ----------
    sos : ndarray
        Second-order sections of the filter.
    n_rows : int
        Independent noise rows.
    rng : numpy.random.Generator
    """

    def __init__(self, sos, n_rows, rng):
        self.sos, self.rng = sos, rng
        self.state = np.zeros((sos.shape[0], n_rows, 2))

    def next(self, n_times):
        """The next ``n_times`` samples, shape (n_rows, n_times)."""
        white = self.rng.standard_normal((self.state.shape[1], n_times))
        out, self.state = scipy.signal.sosfilt(self.sos, white, axis=1, zi=self.state)
        return out


def alpha_gain(times, blocks):
    """Alpha amplitude factor over time: 1 with eyes closed, ``ALPHA_OPEN_SHARE`` otherwise.

    Changes between blocks take about a second (a raised-cosine ramp).

    Parameters
    ----------
    times : ndarray, s
    blocks : list of (start_s, end_s, condition) or None
        Rest blocks; None means eyes open throughout.
    """
    gain = np.full(times.shape, ALPHA_OPEN_SHARE)
    for start, end, condition in blocks or ():
        if condition != "eyes-closed":
            continue
        rise = np.clip((times - start) / 1.0, 0.0, 1.0)
        fall = np.clip((end - times) / 1.0, 0.0, 1.0)
        ramp = 0.5 - 0.5 * np.cos(np.pi * np.minimum(rise, fall))
        gain = np.maximum(gain, ALPHA_OPEN_SHARE + (1.0 - ALPHA_OPEN_SHARE) * ramp)
    return gain


def add_background(data, head, n_eeg, rng, blocks=None):
    """Add the spatially correlated 1/f-like background, alpha and sensor noise, in place.

    Parameters
    ----------
    data : ndarray, shape (n_eeg + 2, n_times), V
        EEG rows, then VEOG and HEOG.
    head : Head
    n_eeg : int
    rng : numpy.random.Generator
    blocks : list of (start_s, end_s, condition) or None
        Rest blocks (eyes closed raises alpha).
    """
    mixing = head.mixing()
    alpha_topo = head.alpha() * ALPHA_CLOSED_V
    pink = NoiseStream(_pink_sos(SFREQ), n_eeg, rng)
    eog = NoiseStream(_pink_sos(SFREQ), 2, rng)
    band = scipy.signal.butter(2, ALPHA_BAND_HZ, btype="bandpass", fs=SFREQ, output="sos")
    _, response = scipy.signal.sosfreqz(band, worN=2 ** 16)
    alpha = NoiseStream(band, 2, rng)
    alpha_scale = 1.0 / np.sqrt(np.mean(np.abs(response) ** 2))   # unit-RMS narrowband sources
    n_times = data.shape[1]
    for first in range(0, n_times, _CHUNK):
        n = min(_CHUNK, n_times - first)
        part = data[:, first:first + n]
        part[:n_eeg] += BACKGROUND_V * (mixing @ pink.next(n))
        gain = alpha_gain((first + np.arange(n)) / SFREQ, blocks)
        part[:n_eeg] += alpha_topo.T @ (alpha.next(n) * alpha_scale * gain)
        part[:n_eeg] += SENSOR_NOISE_V * rng.standard_normal((n_eeg, n))
        # EOG: bipolar, so the brain signal cancels; its own noise only (eye artefacts later).
        part[n_eeg:n_eeg + 2] += EOG_NOISE_V * eog.next(n)


# ----------------------------------------------------------------------------- artefacts
BLINKS_PER_MINUTE = 15.0
BLINK_VEOG_V = (120e-6, 220e-6)
MOVEMENTS_PER_MINUTE = 2.0
MOVEMENT_HEOG_V = (30e-6, 80e-6)
MUSCLE_PER_MINUTE = 0.5
MUSCLE_BAND_HZ = (20.0, 100.0)
MUSCLE_V = (10e-6, 25e-6)


def _blink_wave(sfreq, rng):
    """One blink: a skewed pulse (rise 100-150 ms, about 250 ms above half its peak), peak 1."""
    t = np.arange(int(0.8 * sfreq)) / sfreq
    rise = rng.uniform(0.1, 0.15)
    wave = (t / rise) ** 2 * np.exp(2.0 * (1.0 - t / rise))
    return wave / wave.max()


def _event_times(rng, rate_per_minute, duration, gap, spans=None):
    """Poisson times at a rate, at least ``gap`` s apart, inside ``spans`` (or anywhere)."""
    n = rng.poisson(rate_per_minute * duration / 60.0)
    times = np.sort(rng.uniform(0.5, max(0.6, duration - 1.0), n))
    kept = []
    for t in times:
        inside = spans is None or any(a <= t < b for a, b in spans)
        if inside and (not kept or t - kept[-1] >= gap):
            kept.append(float(t))
    return kept


def add_blinks(data, head, n_eeg, rng, duration, blocks=None):
    """Blinks on VEOG and the frontal electrodes (none with eyes closed); returns their times."""
    vertical, _ = head.eye_weights()
    spans = None
    if blocks:
        spans = [(a, b) for a, b, c in blocks if c == "eyes-open"]
    times = _event_times(rng, BLINKS_PER_MINUTE, duration, 1.0, spans)
    for t in times:
        wave = rng.uniform(*BLINK_VEOG_V) * _blink_wave(SFREQ, rng)
        first = int(round(t * SFREQ))
        n = min(wave.size, data.shape[1] - first)
        data[:n_eeg, first:first + n] += vertical[:, None] * wave[None, :n]
        data[n_eeg, first:first + n] += wave[:n]            # VEOG
        data[n_eeg + 1, first:first + n] += 0.05 * wave[:n]  # HEOG sees a little
    return times


def add_movements(data, head, n_eeg, rng, duration, blocks=None):
    """Horizontal eye movements: a step on HEOG and the lateral frontal electrodes, held
    0.3-1.5 s, then back; returns their times."""
    _, horizontal = head.eye_weights()
    spans = [(a, b) for a, b, c in blocks if c == "eyes-open"] if blocks else None
    times = _event_times(rng, MOVEMENTS_PER_MINUTE, duration, 3.0, spans)
    edge = 0.5 - 0.5 * np.cos(np.pi * np.arange(int(0.04 * SFREQ)) / int(0.04 * SFREQ))
    for t in times:
        hold = int(rng.uniform(0.3, 1.5) * SFREQ)
        step = np.concatenate([edge, np.ones(hold), edge[::-1]])
        step *= rng.choice([-1.0, 1.0]) * rng.uniform(*MOVEMENT_HEOG_V)
        first = int(round(t * SFREQ))
        n = min(step.size, data.shape[1] - first)
        data[:n_eeg, first:first + n] += horizontal[:, None] * step[None, :n]
        data[n_eeg + 1, first:first + n] += step[:n]
    return times


def add_muscle(data, head, n_eeg, rng, duration):
    """Bursts of 20-100 Hz activity over T7 or T8 (0.5-2 s); returns (start, end) of each."""
    band = scipy.signal.butter(4, MUSCLE_BAND_HZ, btype="bandpass", fs=SFREQ, output="sos")
    bursts = []
    for t in _event_times(rng, MUSCLE_PER_MINUTE, duration, 5.0):
        length = int(rng.uniform(0.5, 2.0) * SFREQ)
        first = int(round(t * SFREQ))
        length = min(length, data.shape[1] - first)
        if length < 100:
            continue
        noise = scipy.signal.sosfiltfilt(band, rng.standard_normal(length))
        noise *= rng.uniform(*MUSCLE_V) / noise.std() * np.hanning(length)
        topo = head.bump(rng.choice(["T7", "T8"]), 0.03)
        data[:n_eeg, first:first + length] += topo[:, None] * noise[None, :]
        bursts.append([round(t, 3), round(t + length / SFREQ, 3)])
    return bursts


def add_line_noise(data, rng):
    """50 Hz mains with harmonics at 100 and 150 Hz, 2-10 uV per channel, in place."""
    n_rows, n_times = data.shape
    amplitude = np.exp(rng.uniform(np.log(2e-6), np.log(10e-6), n_rows))[:, None]
    phase = rng.uniform(-0.3, 0.3, n_rows)[:, None]
    for first in range(0, n_times, _CHUNK):
        t = (first + np.arange(min(_CHUNK, n_times - first))) / SFREQ
        omega = 2 * np.pi * LINE_FREQUENCY * t[None, :]
        data[:, first:first + t.size] += amplitude * (np.sin(omega + phase) + 0.3 * np.sin(2 * omega + 2 * phase)
                                                      + 0.1 * np.sin(3 * omega + 3 * phase))


# ----------------------------------------------------------------------------- brain responses
#: Auditory components at the topography peak: (amplitude V, latency s, width s).
N1 = (-4e-6, 0.100, 0.018)
P2 = (3e-6, 0.180, 0.028)
MMN = (-3e-6, 0.160, 0.035)
P3A = (2e-6, 0.290, 0.035)
TRAIN_N1 = (-2e-6, 0.100, 0.018)
TRAIN_P2 = (1.5e-6, 0.180, 0.028)
#: 40 Hz steady-state response: amplitude at the topography peak (V), its latency (s) and
#: the SD of its phase over trials (rad; an ITPC near exp(-sd^2 / 2) without noise).
ASSR_V = 2.0e-6
ASSR_LATENCY_S = 0.01
ASSR_PHASE_SD = 0.6


def _component(t, amplitude, latency, width):
    """A Gaussian deflection."""
    return amplitude * np.exp(-0.5 * ((t - latency) / width) ** 2)


def add_responses(data, topography, onsets, rng, components, length_s=0.6):
    """Add one evoked response per onset: the sum of ``components`` with trial-to-trial
    amplitude (20 %) and latency (5 ms) variation, over ``topography``, in place."""
    t = np.arange(int(length_s * SFREQ)) / SFREQ
    n_eeg = topography.size
    for onset in onsets:
        shift = rng.normal(0.0, 0.005)
        wave = sum(_component(t, a * rng.lognormal(0.0, 0.2), lat + shift, w) for a, lat, w in components)
        first = int(round(onset * SFREQ))
        n = min(t.size, data.shape[1] - first)
        data[:n_eeg, first:first + n] += topography[:, None] * wave[None, :n]


def add_assr(data, topography, onsets, rng):
    """Add a 40 Hz steady-state response during each train (40 ms rise, 30 ms fall), in place."""
    t = np.arange(int((TRAIN_S + 0.1) * SFREQ)) / SFREQ - ASSR_LATENCY_S
    rise = np.clip(t / 0.04, 0.0, 1.0)
    fall = np.clip((TRAIN_S - t) / 0.03, 0.0, 1.0)
    envelope = np.minimum(rise, fall) * (t >= 0)
    n_eeg = topography.size
    for onset in onsets:
        phase = rng.normal(0.0, ASSR_PHASE_SD)
        wave = ASSR_V * rng.lognormal(0.0, 0.3) * envelope * np.cos(2 * np.pi * ASSR_HZ * t + phase)
        first = int(round(onset * SFREQ))   # sample 0 of t is the train onset
        n = min(t.size, data.shape[1] - first)
        data[:n_eeg, first:first + n] += topography[:, None] * wave[None, :n]


# ----------------------------------------------------------------------------- one recording
def _stim_row(onsets, codes, n_times):
    """The stimulus channel: a 5-sample pulse of the code at each onset, 0 elsewhere."""
    stim = np.zeros(n_times)
    for condition, times in onsets.items():
        for t in times:
            first = int(round(t * SFREQ))
            stim[first:first + _PULSE_SAMPLES] = codes[condition]
    return stim


def _schedule(paradigm, keys, seed, scale, oddball_minutes):
    """Onsets, duration and rest blocks (None except for rest) of one recording."""
    if paradigm == "oddball":
        onsets, duration = oddball_schedule(_stream(seed, "schedule", *keys), oddball_minutes, scale)
        return onsets, duration, None
    if paradigm == "clicktrain":
        onsets, duration = clicktrain_schedule(_stream(seed, "schedule", *keys), scale)
        return onsets, duration, None
    return rest_schedule(scale)


def _add_brain(data, head, paradigm, onsets, keys, seed):
    """The paradigm's evoked and steady-state responses, in place."""
    rng = _stream(seed, "responses", *keys)
    auditory = head.auditory()
    if paradigm == "oddball":
        add_responses(data, auditory, onsets["standard"], rng, [N1, P2])
        add_responses(data, auditory, onsets["deviant"], rng, [N1, P2, MMN])
        add_responses(data, head.p3a(), onsets["deviant"], rng, [P3A])
    elif paradigm == "clicktrain":
        add_responses(data, auditory, onsets["train"], rng, [TRAIN_N1, TRAIN_P2])
        add_assr(data, auditory, onsets["train"], rng)


def simulate(paradigm, names, *, seed, subject, scale=1.0, oddball_minutes=15):
    """Simulate one recording.

    Parameters
    ----------
    paradigm : {"oddball", "clicktrain", "rest"}
    names : list of str
        EEG channel names.
    seed : int
    subject : str
        Subject id (keys the random streams).
    scale : float, default=1.0
        Factor on every duration.
    oddball_minutes : {5, 10, 15}, default=15
        Length of the oddball before ``scale``.

    Returns
    -------
    data : ndarray, shape (n_eeg + 3, n_times), V
        EEG, VEOG, HEOG and the stimulus channel (codes).
    truth : dict
        Schedules, artefact times and planted amplitudes.
    """
    keys = (subject, paradigm)
    onsets, duration, blocks = _schedule(paradigm, keys, seed, scale, oddball_minutes)
    n_eeg, n_times = len(names), int(round(duration * SFREQ))
    head = Head(names)
    data = np.zeros((n_eeg + 3, n_times))
    signals = data[:n_eeg + 2]
    add_background(signals, head, n_eeg, _stream(seed, "background", *keys), blocks)
    _add_brain(signals, head, paradigm, onsets, keys, seed)
    truth = {"blinks_s": add_blinks(signals, head, n_eeg, _stream(seed, "blinks", *keys), duration, blocks),
             "eye_movements_s": add_movements(signals, head, n_eeg, _stream(seed, "movements", *keys),
                                              duration, blocks),
             "muscle_s": add_muscle(signals, head, n_eeg, _stream(seed, "muscle", *keys), duration)}
    add_line_noise(signals, _stream(seed, "line", *keys))
    signals[:n_eeg] -= signals[:n_eeg].mean(axis=0)   # stored against the average of the EEG channels
    data[-1] = _stim_row(onsets, CODES[paradigm], n_times)
    truth.update(duration_s=duration, n_samples=n_times,
                 events={c: len(v) for c, v in onsets.items()},
                 onsets_s={c: [round(float(t), 3) for t in v] for c, v in onsets.items()},
                 rest_blocks=blocks)
    return data, truth


def write_fif(path, data, names, start):
    """Write EEG + VEOG/HEOG + stimulus channel as a FIF file with template positions."""
    import mne

    types = ["eeg"] * len(names) + ["eog", "eog", "stim"]
    info = mne.create_info(list(names) + list(EOG_CHANNELS) + [STIM_CHANNEL], SFREQ, types, verbose=False)
    info["line_freq"] = LINE_FREQUENCY
    info.set_montage(template_montage(), on_missing="ignore", verbose=False)
    raw = mne.io.RawArray(data, info, verbose=False)  # float64 data are not copied
    raw.set_meas_date(start)
    raw.save(path, overwrite=True, verbose=False)


def planted(names):
    """The planted amplitudes, as the feature sets' regions see them (V), for truth.json.

    The average reference of the generator's topography shifts every channel, so the
    region means are given after subtracting the mean over the cap.
    """
    head = Head(names)

    def region(topo, channels):
        ref = topo - topo.mean()
        return float(np.mean([ref[names.index(c)] for c in channels]))

    frontocentral, mastoid = ["Fz", "FC1", "FC2", "FCz", "Cz"], ["TP9", "TP10"]
    return {"mmn_peak_frontocentral_v": MMN[0] * region(head.auditory(), frontocentral),
            "mmn_peak_mastoid_v": MMN[0] * region(head.auditory(), mastoid),
            "assr_amplitude_frontocentral_v": ASSR_V * region(head.auditory(), frontocentral),
            "assr_phase_sd_rad": ASSR_PHASE_SD, "alpha_hz": ALPHA_HZ, "alpha_open_share": ALPHA_OPEN_SHARE}


# ----------------------------------------------------------------------------- study files
def _study_text(names, paradigms):
    """The text of study.toml for the written recordings."""
    quoted = ", ".join(json.dumps(n) for n in names)
    lines = ['name = "heschl full-size benchmark (synthetic)"', 'output = "derivatives/heschl"',
             'participants = "participants.tsv"', f"common_channels = [{quoted}]", ""]
    for paradigm in paradigms:
        lines += ["[[analyses]]", f"paradigm = {json.dumps(paradigm)}",
                  f"feature_sets = [{json.dumps(paradigm + '-core')}]", ""]
    lines += [f"[sites.{SITE}]", 'recording_reference = "average"', f"line_frequency = {LINE_FREQUENCY:.1f}",
              "trigger_delay_ms = 0.0", f"eog_channels = [{', '.join(json.dumps(n) for n in EOG_CHANNELS)}]",
              f"[sites.{SITE}.files]"]
    lines += [f'{p} = "raw/sub-*/sub-*_task-{p}_raw.fif"' for p in paradigms]
    for paradigm in paradigms:
        lines.append(f"[sites.{SITE}.markers.{paradigm}]")
        lines += [f'"{code}" = {json.dumps(marker)}' for marker, code in CODES[paradigm].items()]
    return "\n".join(lines) + "\n"


def write_subject(root, *, subject="F01", seed=20261204, scale=1.0, channels=64, oddball_minutes=15,
                  paradigms=PARADIGMS):
    """Write one participant's recordings under ``root/raw/sub-<subject>/``.

    Parameters
    ----------
    root : path-like
        Study folder (created if missing).
    subject : str, default="F01"
    seed : int, default=20261204
    scale : float, default=1.0
        Factor on every duration (0.1 for a quick check).
    channels : {32, 64, 128}, default=64
    oddball_minutes : {5, 10, 15}, default=15
    paradigms : sequence of str, default=PARADIGMS

    Returns
    -------
    dict
        Per paradigm: ``file`` (relative to ``root``), ``n_channels`` (every channel of
        the file, stimulus channel included), ``n_samples``, ``sfreq`` and the truth.
    """
    root = Path(root)
    folder = root / "raw" / f"sub-{subject}"
    folder.mkdir(parents=True, exist_ok=True)
    names = channel_names(channels)
    out = {}
    for k, paradigm in enumerate(paradigms):
        data, truth = simulate(paradigm, names, seed=seed, subject=subject, scale=scale,
                               oddball_minutes=oddball_minutes)
        path = folder / f"sub-{subject}_task-{paradigm}_raw.fif"
        write_fif(path, data, names, _START + datetime.timedelta(minutes=20 * k))
        out[paradigm] = dict(truth, file=path.relative_to(root).as_posix(), n_channels=int(data.shape[0]),
                             sfreq=SFREQ)
        del data
    return out


def write_study(root, *, subjects=1, seed=20261204, scale=1.0, channels=64, oddball_minutes=15,
                paradigms=PARADIGMS):
    """Write ``subjects`` participants (F01, F02, ...), participants.tsv, study.toml, truth.json.

    Parameters are those of :func:`write_subject`.

    Returns
    -------
    pathlib.Path
        The study file.
    """
    root = Path(root)
    root.mkdir(parents=True, exist_ok=True)
    names = channel_names(channels)
    recordings = {}
    for number in range(1, subjects + 1):
        subject = f"F{number:02d}"
        recordings[f"sub-{subject}"] = write_subject(root, subject=subject, seed=seed, scale=scale,
                                                     channels=channels, oddball_minutes=oddball_minutes,
                                                     paradigms=paradigms)
    rows = ["participant_id\tsite"] + [f"{pid}\t{SITE}" for pid in recordings]
    (root / "participants.tsv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    truth = {"seed": seed, "scale": scale, "channels": names, "oddball_minutes": oddball_minutes,
             "planted": planted(names), "recordings": recordings}
    (root / "truth.json").write_text(json.dumps(truth, indent=1) + "\n", encoding="utf-8")
    study = root / "study.toml"
    study.write_text(_study_text(names, paradigms), encoding="utf-8")
    return study


def _parser():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folder", help="where to write the study (created if missing)")
    parser.add_argument("--minutes-scale", type=float, default=1.0,
                        help="factor on every duration (default 1: oddball 15 min, click train 5, rest 10)")
    parser.add_argument("--channels", type=int, choices=(32, 64, 128), default=64)
    parser.add_argument("--oddball-minutes", type=int, choices=(5, 10, 15), default=15)
    parser.add_argument("--subjects", type=int, default=1, help="participants to write (default 1)")
    parser.add_argument("--paradigms", default=",".join(PARADIGMS),
                        help="comma-separated paradigms to write (default: all three)")
    parser.add_argument("--seed", type=int, default=20261204)
    return parser


def main(argv=None):
    """Command line: write the study and print where its study file is."""
    args = _parser().parse_args(argv)
    if not args.minutes_scale > 0:
        raise SystemExit("fullsize: --minutes-scale must be positive.")
    paradigms = tuple(p for p in args.paradigms.split(",") if p)
    unknown = [p for p in paradigms if p not in PARADIGMS]
    if unknown:
        raise SystemExit(f"fullsize: --paradigms: {', '.join(unknown)} unknown; use {', '.join(PARADIGMS)}.")
    study = write_study(args.folder, subjects=args.subjects, seed=args.seed, scale=args.minutes_scale,
                        channels=args.channels, oddball_minutes=args.oddball_minutes, paradigms=paradigms)
    print(study)
    return 0


if __name__ == "__main__":
    sys.exit(main())
