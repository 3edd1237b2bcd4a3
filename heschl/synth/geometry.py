"""Electrode positions and the spatial patterns (topographies) of the generators.

Potentials are those of current dipoles in an infinite homogeneous medium. Brain
dipoles are seen from electrodes pushed outward from the head centre, which blurs them
the way skull and scalp do; the eye dipoles, outside the skull, are seen directly.
Topographies are unitless; the generator scales them to volts.
"""
from __future__ import annotations

import functools
import warnings

import numpy as np

from .sites import CHANNELS_64, COMMON_CHANNELS

__all__ = [
    "POINTS",
    "standard_montage",
    "EOG_POINTS",
    "point_positions",
    "auditory_topography",
    "alpha_topography",
    "mu_topography",
    "blink_topography",
    "focal_topography",
    "random_dipole_topographies",
    "average_reference",
]

#: Virtual electrodes around the right eye: above, below, left and right outer canthus.
EOG_POINTS = ("EOG_sup", "EOG_inf", "EOG_left", "EOG_right")

#: Every point at which the generator computes a potential, in row order.
POINTS = CHANNELS_64 + ("M1", "M2") + EOG_POINTS

# Head-model constants (metres, in the montage's frame: x right, y front, z up).
_HEAD_CENTRE = np.array([0.0008, -0.0162, -0.0012])
_BLUR = 1.3  # brain dipoles are seen from electrodes 30 % further out: skull blurring
_EOG_POSITIONS = {
    "EOG_sup": (0.032, 0.085, -0.020),
    "EOG_inf": (0.032, 0.075, -0.065),
    "EOG_left": (-0.055, 0.068, -0.045),
    "EOG_right": (0.055, 0.068, -0.045),
}
_MASTOID_FALLBACK_DROP = 0.02  # m below TP9/TP10 when a montage lacks M1/M2


def standard_montage():
    """Return mne's 10-05 template montage without letting a deprecation escape.

    Returns
    -------
    mne.channels.DigMontage
        ``colin27_1005`` where mne offers it (mne >= 1.13), else ``standard_1005``.
    """
    import mne

    for name in ("colin27_1005", "standard_1005"):
        if name in mne.channels.get_builtin_montages():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", FutureWarning)
                warnings.simplefilter("ignore", DeprecationWarning)
                return mne.channels.make_standard_montage(name)
    raise RuntimeError("mne offers neither 'colin27_1005' nor 'standard_1005'; "
                       "install mne >= 1.6.")


@functools.lru_cache(maxsize=1)
def point_positions():
    """Return the 3-D positions of every generator point.

    Returns
    -------
    positions : ndarray, shape (n_points, 3)
        Positions in metres, rows in the order of :data:`POINTS`. M1/M2 come from the
        template montage, or 2 cm below TP9/TP10 if it has none.
    """
    ch_pos = standard_montage().get_positions()["ch_pos"]
    rows = []
    for name in POINTS:
        if name in _EOG_POSITIONS:
            rows.append(_EOG_POSITIONS[name])
        elif name in ch_pos:
            rows.append(ch_pos[name])
        else:
            neighbour = {"M1": "TP9", "M2": "TP10"}[name]
            rows.append(np.asarray(ch_pos[neighbour]) - [0.0, 0.0, _MASTOID_FALLBACK_DROP])
    positions = np.array(rows, dtype=float)
    positions.setflags(write=False)
    return positions


def average_reference(topography, channels=COMMON_CHANNELS):
    """Subtract the mean over ``channels`` from a topography over :data:`POINTS`.

    Parameters
    ----------
    topography : ndarray, shape (n_points,) or (n_points, n)
        Values at :data:`POINTS`.
    channels : sequence of str, default=COMMON_CHANNELS
        Channels whose mean is subtracted.

    Returns
    -------
    ndarray, same shape as ``topography``
    """
    rows = [POINTS.index(name) for name in channels]
    return topography - topography[rows].mean(axis=0)


def _dipole_potential(position, moment, *, blur=_BLUR):
    """Potential of a unit current dipole at every point, unitless, shape (n_points,)."""
    points = point_positions()
    seen_from = _HEAD_CENTRE + (points - _HEAD_CENTRE) * blur
    offset = seen_from - np.asarray(position, dtype=float)
    distance = np.linalg.norm(offset, axis=1)
    moment = np.asarray(moment, dtype=float) / np.linalg.norm(moment)
    return offset @ moment / distance**3


def _scaled_to(topography, channel, value):
    """Scale so that the average-referenced value at ``channel`` equals ``value``."""
    referenced = average_reference(topography)
    return topography * (value / referenced[POINTS.index(channel)])


def _mirrored_pair(position, direction):
    """Potential of a left dipole plus its mirror image across the midline (x -> -x).

    Parameters
    ----------
    position : tuple of float
        Left dipole position, head coordinates, m.
    direction : tuple of float
        Left dipole moment direction; the right one has the x component negated.

    Returns
    -------
    ndarray, shape (n_points,)
        Sum of both potentials, unscaled.
    """
    x, y, z = position
    dx, dy, dz = direction
    left = _dipole_potential((x, y, z), (dx, dy, dz))
    right = _dipole_potential((-x, y, z), (-dx, dy, dz))
    return left + right


@functools.lru_cache(maxsize=1)
def auditory_topography():
    """Bilateral auditory-cortex generator, fronto-central negative.

    Returns
    -------
    ndarray, shape (n_points,)
        Scaled so that, after average reference over the common channels, Fz is -1.
        It reverses polarity at the mastoids and inferior temporal sites (TP9, TP10).
    """
    return _scaled_to(_mirrored_pair((-0.045, -0.02, 0.008), (0.6, 1.0, 1.0)), "Fz", -1.0)


@functools.lru_cache(maxsize=1)
def alpha_topography():
    """Posterior (parieto-occipital) alpha generator.

    Returns
    -------
    ndarray, shape (n_points,)
        Scaled so that, after average reference over the common channels, Oz is 1.
    """
    return _scaled_to(_mirrored_pair((-0.02, -0.075, 0.02), (0.2, -1.0, 0.8)), "Oz", 1.0)


@functools.lru_cache(maxsize=1)
def mu_topography():
    """Fronto-central (sensorimotor) mu generator.

    Returns
    -------
    ndarray, shape (n_points,)
        Scaled so that, after average reference over the common channels, Cz is 1.
    """
    return _scaled_to(_dipole_potential((0.0, 0.01, 0.03), (0.0, 0.3, 1.0)), "Cz", 1.0)


@functools.lru_cache(maxsize=1)
def blink_topography():
    """Blink potential of both eyes, largest at the eyes and decaying backwards.

    Returns
    -------
    ndarray, shape (n_points,)
        Reference-free, scaled so that Fp1 is 1.
    """
    total = sum(
        _dipole_potential((side * 0.032, 0.06, -0.04), (0.0, 0.6, 0.8), blur=1.0)
        for side in (-1.0, 1.0)
    )
    return total / total[POINTS.index("Fp1")]


def focal_topography(channel, width):
    """Gaussian fall-off with distance from one electrode (a superficial source).

    Parameters
    ----------
    channel : str
        Electrode at the centre, 10-10 name.
    width : float
        Standard deviation of the fall-off, m.

    Returns
    -------
    ndarray, shape (n_points,)
        1 at ``channel``.
    """
    points = point_positions()
    centre = points[POINTS.index(channel)]
    distance = np.linalg.norm(points - centre, axis=1)
    return np.exp(-0.5 * (distance / width) ** 2)


def random_dipole_topographies(rng, n_sources, *, max_radius=0.055):
    """Topographies of randomly placed and oriented brain dipoles.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of the positions and orientations.
    n_sources : int
        Number of dipoles.
    max_radius : float, default=0.055
        Largest distance of a dipole from the head centre, m (head radius about 0.1 m).

    Returns
    -------
    ndarray, shape (n_points, n_sources)
        Each column has unit root-mean-square over the 64 cap electrodes after
        average reference over them.
    """
    directions = rng.standard_normal((n_sources, 3))
    directions /= np.linalg.norm(directions, axis=1, keepdims=True)
    radii = max_radius * rng.uniform(0.3, 1.0, n_sources) ** (1 / 3)
    positions = _HEAD_CENTRE + directions * radii[:, None]
    positions[:, 2] = np.abs(positions[:, 2] - _HEAD_CENTRE[2]) + _HEAD_CENTRE[2]
    moments = rng.standard_normal((n_sources, 3))
    columns = np.stack(
        [_dipole_potential(p, m) for p, m in zip(positions, moments)], axis=1
    )
    referenced = average_reference(columns, CHANNELS_64)[: len(CHANNELS_64)]
    return columns / np.sqrt((referenced**2).mean(axis=0))
