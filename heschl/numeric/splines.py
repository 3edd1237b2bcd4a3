"""Spherical-spline interpolation of scalp potentials (Perrin et al. 1989), as matrices.

An interpolation matrix maps the signals of the good channels to the positions of the
bad ones: ``bad = matrix @ good``. It depends only on the positions, so one matrix per
set of bad channels serves every epoch that shares that set.

The spline (docs/REFERENCES.md F49): positions are projected on the unit sphere, the
Green's function is ``g(x) = 1/(4 pi) sum_{n=1}^{N} (2n + 1) / (n (n + 1))^m P_n(x)``
with ``x`` the cosine of the angle between two positions, stiffness ``m = 4`` and
``N = 50`` Legendre terms, and the system ``[[G + alpha I, 1], [1', 0]]`` is solved by
the pseudo-inverse with ``alpha = 1e-5`` (the constants mne's interpolation uses, so that
the two agree; tests/test_splines.py checks it against mne as a reference).
"""
from __future__ import annotations

import numpy as np

from heschl.errors import InputDataError, problem

__all__ = ["spline_g", "spline_matrix", "leave_one_out_matrix"]

#: Spline stiffness m and number of Legendre terms (Perrin et al. 1989; mne's values).
STIFFNESS = 4
LEGENDRE_TERMS = 50
#: Tikhonov term added to the diagonal of G before inversion (mne's value).
ALPHA = 1e-5


def _unit(pos, name):
    pos = np.asarray(pos, dtype=float)
    if pos.ndim != 2 or pos.shape[1] != 3 or not np.all(np.isfinite(pos)):
        raise InputDataError(problem("spline_matrix", f"{name} has shape {pos.shape} or holds NaN",
                                     "pass finite positions shaped (n_channels, 3), m, relative to "
                                     "the sphere's centre", key=name))
    norms = np.linalg.norm(pos, axis=1, keepdims=True)
    if np.any(norms == 0):
        raise InputDataError(problem("spline_matrix", f"{name} holds a position at the sphere's centre",
                                     "give every channel its position on the head", key=name))
    return pos / norms


def spline_g(cosang, stiffness=STIFFNESS, n_terms=LEGENDRE_TERMS):
    """Green's function of the spherical spline at the cosines ``cosang``.

    Parameters
    ----------
    cosang : array_like
        Cosines of the angles between pairs of points on the sphere, in [-1, 1].
    stiffness : int, default=4
    n_terms : int, default=50

    Returns
    -------
    g : ndarray, the shape of ``cosang``
    """
    n = np.arange(1, n_terms + 1, dtype=float)
    coefficients = np.concatenate([[0.0], (2 * n + 1) / ((n * (n + 1)) ** stiffness * 4 * np.pi)])
    return np.polynomial.legendre.legval(np.clip(cosang, -1.0, 1.0), coefficients)


def _system_inverse(unit_from):
    g = spline_g(unit_from @ unit_from.T)
    g.flat[::len(g) + 1] += ALPHA
    n = len(g)
    system = np.zeros((n + 1, n + 1))
    system[:n, :n] = g
    system[:n, n] = 1.0
    system[n, :n] = 1.0
    return np.linalg.pinv(system)


def spline_matrix(pos_from, pos_to):
    """Matrix that interpolates the channels at ``pos_to`` from those at ``pos_from``.

    Parameters
    ----------
    pos_from : array_like, shape (n_from, 3)
        Positions of the channels to interpolate from, relative to the sphere's centre.
    pos_to : array_like, shape (n_to, 3)
        Positions to interpolate to, in the same frame.

    Returns
    -------
    matrix : ndarray, shape (n_to, n_from)
        ``values_to = matrix @ values_from`` (for each time sample).
    """
    unit_from, unit_to = _unit(pos_from, "pos_from"), _unit(pos_to, "pos_to")
    inverse = _system_inverse(unit_from)
    to = np.hstack([spline_g(unit_to @ unit_from.T), np.ones((len(unit_to), 1))])
    return to @ inverse[:, :-1]


def leave_one_out_matrix(pos):
    """Each channel interpolated from all the others, as one square matrix.

    Parameters
    ----------
    pos : array_like, shape (n_channels, 3)

    Returns
    -------
    matrix : ndarray, shape (n_channels, n_channels)
        Row ``c`` holds channel ``c``'s interpolation from the others (zero at ``c``).
    """
    pos = np.asarray(pos, dtype=float)
    n = len(pos)
    out = np.zeros((n, n))
    for c in range(n):
        others = np.r_[0:c, c + 1:n]
        out[c, others] = spline_matrix(pos[others], pos[c:c + 1])[0]
    return out
