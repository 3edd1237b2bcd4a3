"""Which ICA components are eye blinks or horizontal eye movements, without an EOG channel.

Each component is described by five properties of its topography (the mixing pattern,
one value per EEG channel) and of its time course, all documented features of ocular
components (docs/REFERENCES.md F47):

``frontal``
    How concentrated the pattern is at the frontal pole: the mean absolute weight over
    the frontal-pole channels (10-10/10-05 names beginning ``Fp``, ``AFp`` or ``AF`` but
    not ``AFF``) over the mean absolute weight of all channels. Blinks and eye movements
    are largest at the electrodes nearest the eyes and fall off quickly behind them.
``lateral``
    The same for the lateral frontal channels (``F``, ``AF``, ``FT`` and ``FFT`` at
    positions 7-10: F7, AF8, FT9, ...), where horizontal eye movements are largest.
``mirror``
    Left-right symmetry of the pattern: the cosine between the weights of the left
    channels and those of their mirror channels on the right (Fp1 with Fp2, FT7 with FT8,
    AFp3h with AFp4h, ...). Near +1 for blinks (both eyes, same polarity), near -1 for
    horizontal movements (the corneo-retinal dipoles turn together: positive on one side,
    negative on the other).
``veog`` / ``heog``
    Absolute correlation (both sides winsorised at `CLIP_SD` robust SDs) of the
    component's time course with a virtual vertical EOG (the
    mean of the frontal-pole channels) and a virtual horizontal EOG (the mean of the
    right lateral frontal channels minus that of the left ones), both made from the EEG.
``low``
    Share of the component's power between the fit's high-pass edge and 4 Hz, of its power
    up to 30 Hz (Welch): blinks (200-400 ms) and eye movements are slow.
``kurtosis``
    Excess kurtosis (Fisher) of the time course: rare large deflections on a quiet
    background make ocular components heavy-tailed, where ongoing brain activity is
    close to Gaussian.

A component is a blink when all of its blink properties pass their limits, and a
horizontal eye movement when all of its movement properties do (`LIMITS`). Requiring every
property, rather than a score, is deliberate: a component that carries a fronto-central
brain response (e.g. the mismatch response, symmetric and frontal but neither pole-heavy
nor heavy-tailed) must not be removed because one property happens to be high.
"""
from __future__ import annotations

import re

import numpy as np

__all__ = ["LIMITS", "TIME_COURSE", "component_properties", "ocular_course", "ocular_kind", "mirror_pairs", "channel_groups", "virtual_eog"]

#: Limits of each property, per kind of ocular component: ("min", x) means at least x,
#: ("max", x) at most x. Chosen on tests/gen2, which makes blinks and horizontal movements,
#: about halfway between its ocular components and the largest value any other component
#: reached there (its 64-channel oddball: blink frontal 5.1-5.3 against at most 1.9, low
#: 0.95 against at most 0.75, kurtosis 28-37 against at most 0.5; movement lateral 3.5
#: against at most 2.4, mirror -0.98 to -0.99); measured on heschl.synth by
#: benchmarks/ocular_eval.py (DEVELOPERS.md, "Ocular correction on two generators").
LIMITS = {
    "blink": {"frontal": ("min", 2.5), "mirror": ("min", 0.6), "veog": ("min", 0.5), "low": ("min", 0.8),
              "kurtosis": ("min", 5.0)},
    "saccade": {"lateral": ("min", 2.5), "mirror": ("max", -0.6), "heog": ("min", 0.5), "low": ("min", 0.8),
                "kurtosis": ("min", 5.0)},
}

#: Robust SDs at which both sides of a virtual-EOG correlation are clipped (winsorised), so
#: that one large transient (a pop, a saturated stretch) in the virtual EOG cannot hide the
#: blinks; heschl's choice, added after a transient on a frontal channel of a heschl.synth
#: recording took the blink component's plain correlation from 0.85 to 0.32.
CLIP_SD = 10.0

#: Upper edge, Hz, of the slow band of ``low``, and of the band it is a share of.
LOW_HZ, TOP_HZ = 4.0, 30.0

_NAME = re.compile(r"^([A-Za-z]+?)(\d+|z)(h?)$")
_POLE = ("Fp", "AFp", "AF")
_LATERAL_ROWS = ("Fp", "AF", "F", "FFT", "FT")
_LATERAL_NUMBERS = (7, 8, 9, 10)


def _parse(name):
    """(row letters, number or 0 for the midline, half-position flag) or None."""
    m = _NAME.match(name)
    if not m:
        return None
    row, pos, half = m.groups()
    return row, (0 if pos == "z" else int(pos)), half


def channel_groups(names):
    """Indices of the frontal-pole, left lateral frontal and right lateral frontal channels.

    Parameters
    ----------
    names : sequence of str
        10-10 / 10-05 channel names (case as in the standard: ``Fp1``, ``AFz``, ``FT8``).

    Returns
    -------
    groups : dict
        ``{"pole": [...], "left": [...], "right": [...]}``, indices into ``names``.
    """
    out = {"pole": [], "left": [], "right": []}
    for i, name in enumerate(names):
        p = _parse(name)
        if p is None:
            continue
        row, num, _ = p
        if row in _POLE:
            out["pole"].append(i)
        if row in _LATERAL_ROWS and num in _LATERAL_NUMBERS:
            out["left" if num % 2 else "right"].append(i)
    return out


def mirror_pairs(names):
    """(left, right) index pairs of channels mirrored across the midline (Fp1-Fp2, ...).

    Odd numbers lie left and even ones right; the mirror of ``n`` (odd) is ``n + 1``, with
    the same row letters and half-position flag.
    """
    index = {n: i for i, n in enumerate(names)}
    pairs = []
    for name, i in index.items():
        p = _parse(name)
        if p is None or not p[1] or p[1] % 2 == 0:
            continue
        twin = f"{p[0]}{p[1] + 1}{p[2]}"
        if twin in index:
            pairs.append((i, index[twin]))
    return pairs


def virtual_eog(x, names):
    """Virtual vertical and horizontal EOG made from EEG channels.

    Parameters
    ----------
    x : ndarray, shape (n_channels, n_times)
    names : sequence of str

    Returns
    -------
    veog, heog : ndarray, shape (n_times,), or None where the channels are missing
        ``veog`` is the mean of the frontal-pole channels minus the mean of all channels
        (so that what every channel shares, such as amplifier saturation, cancels);
        ``heog`` is the mean of the right lateral frontal channels minus the mean of the
        left ones.
    """
    g = channel_groups(names)
    veog = x[g["pole"]].mean(axis=0) - x.mean(axis=0) if g["pole"] else None
    heog = x[g["right"]].mean(axis=0) - x[g["left"]].mean(axis=0) if g["left"] and g["right"] else None
    return veog, heog


def _clipped(a):
    """``a`` clipped at its median +- `CLIP_SD` robust SDs (1.4826 x MAD)."""
    from .vocabulary import MAD_TO_SD

    med = np.median(a)
    sd = MAD_TO_SD * np.median(np.abs(a - med))
    return np.clip(a, med - CLIP_SD * sd, med + CLIP_SD * sd) if sd > 0 else a


def _abs_corr(a, b):
    """|Pearson correlation| of the winsorised series (NaN when ``b`` is None)."""
    if b is None:
        return float("nan")
    a, b = _clipped(a), _clipped(b)
    a, b = a - a.mean(), b - b.mean()
    d = np.linalg.norm(a) * np.linalg.norm(b)
    return float(abs(a @ b) / d) if d > 0 else 0.0


def component_properties(patterns, sources, names, sfreq, data=None, high_pass=1.0):
    """The properties of every component (see the module's description).

    Parameters
    ----------
    patterns : ndarray, shape (n_channels, n_components)
        Mixing patterns (mne's ``ICA.get_components()``), one column per component.
    sources : ndarray, shape (n_components, n_times)
        Component time courses on the data ICA was fitted on.
    names : sequence of str
        Channel names of the rows of ``patterns``.
    sfreq : float, Hz
    data : ndarray, shape (n_channels, n_times), or None
        The EEG the virtual EOG is made from (the fitted data); None gives NaN for
        ``veog`` and ``heog``.
    high_pass : float, Hz
        High-pass edge of the fitted data: the lower edge of ``low``.

    Returns
    -------
    properties : list of dict
        One dict per component with the keys ``frontal``, ``lateral``, ``mirror``,
        ``veog``, ``heog``, ``low``, ``kurtosis`` (floats; NaN where the channels a property
        needs are missing).
    """
    from scipy.signal import welch
    from scipy.stats import kurtosis

    g = channel_groups(names)
    pairs = mirror_pairs(names)
    veog, heog = virtual_eog(data, names) if data is not None else (None, None)
    nperseg = int(min(sources.shape[1], round(4 * sfreq)))   # 0.25 Hz resolution
    freqs, power = welch(sources, sfreq, nperseg=nperseg, axis=-1)
    slow = (freqs >= high_pass) & (freqs < LOW_HZ)
    band = (freqs >= high_pass) & (freqs < TOP_HZ)
    low = power[:, slow].sum(axis=1) / np.maximum(power[:, band].sum(axis=1), np.finfo(float).tiny)
    kurt = kurtosis(sources, axis=1, fisher=True)
    lateral = g["left"] + g["right"]
    out = []
    for k in range(patterns.shape[1]):
        w = np.abs(patterns[:, k])
        mean = w.mean() if w.mean() > 0 else np.nan
        if pairs:
            left, right = patterns[[p[0] for p in pairs], k], patterns[[p[1] for p in pairs], k]
            d = np.linalg.norm(left) * np.linalg.norm(right)
            mirror = float(left @ right / d) if d > 0 else 0.0
        else:
            mirror = float("nan")
        out.append({
            "frontal": float(w[g["pole"]].mean() / mean) if g["pole"] else float("nan"),
            "lateral": float(w[lateral].mean() / mean) if lateral else float("nan"),
            "mirror": mirror,
            "veog": _abs_corr(sources[k], veog),
            "heog": _abs_corr(sources[k], heog),
            "low": float(low[k]),
            "kurtosis": float(kurt[k]),
        })
    return out


#: The properties of a component's time course (used with a recorded EOG too).
TIME_COURSE = ("low", "kurtosis")


def ocular_course(props, limits=LIMITS):
    """True when the time course alone is ocular for some kind: slow and heavy-tailed.

    With a recorded EOG, a component correlated with it is removed only if this holds
    too: an EOG channel also records brain activity, and a brain component can correlate
    with it (on heschl.synth's Cedar, without any eye artefact, one correlated -0.69 with
    the HEOG).
    """
    return any(all(_meets(props[key], *rules[key]) for key in TIME_COURSE if key in rules)
               for rules in limits.values())


def ocular_kind(props, limits=LIMITS):
    """"blink", "saccade" or None: the first kind all of whose limits ``props`` meet.

    A NaN property (its channels are missing) never meets a limit.
    """
    for kind, rules in limits.items():
        if all(_meets(props[key], side, value) for key, (side, value) in rules.items()):
            return kind
    return None


def _meets(x, side, value):
    if x is None or not np.isfinite(x):
        return False
    return x >= value if side == "min" else x <= value
