"""Spatial models: how sources reach the electrodes.

Two models, each giving the background's spatial covariance and the patterns of the
evoked responses, the alpha rhythm and the eyes:

- ``"exponential"``: background covariance ``c * exp(-d / length) + (1 - c) * I`` between
  electrodes at distance ``d`` (m, from the montage positions); responses are smooth
  patterns around chosen electrodes.
- ``"dipoles"``: current dipoles in a three-shell spherical head fitted to the cap,
  through mne's forward model (``mne.make_sphere_model``, ``mne.setup_volume_source_space``,
  ``mne.make_forward_solution``, ``mne.make_forward_dipole``). The background is every
  source of a volume grid in the outer part of the brain sphere, each with independent
  activity in three orientations; the auditory response is a bilateral pair of fixed
  dipoles in the superior temporal planes, the alpha rhythm an occipital pair.

Patterns are average-referenced over the cap.
"""
from __future__ import annotations

import functools

import numpy as np

from .caps import montage, positions

__all__ = ["exponential_covariance", "symmetric_sqrt", "SpatialModel", "spatial_model", "dipole_forward",
           "FRONTOCENTRAL", "MASTOIDS", "POSTERIOR"]

FRONTOCENTRAL = ("Fz", "FC1", "FC2", "FCz", "Cz")   # the region whose mean carries the response's unit
MASTOIDS = ("TP9", "TP10")
POSTERIOR = ("O1", "Oz", "O2")

#: Dipole positions relative to the fitted sphere's centre (m) and orientations (unit
#: after normalising): our own choice of a plausible auditory and occipital geometry.
AUDITORY = {"rr": ((-0.050, -0.004, 0.030), (0.050, -0.004, 0.030)),
            "nn": ((-0.15, 0.5, 0.95), (0.15, 0.5, 0.95))}
OCCIPITAL = {"rr": ((-0.022, -0.068, 0.004), (0.022, -0.068, 0.004)),
             "nn": ((-0.2, -0.9, 0.35), (0.2, -0.9, 0.35))}
EXPONENTIAL_LENGTH = 0.06   # m, default length constant of the exponential model


def exponential_covariance(pos, coupling=0.85, length=EXPONENTIAL_LENGTH):
    """``coupling * exp(-d / length) + (1 - coupling) * I``.

    Parameters
    ----------
    pos : ndarray, shape (n_channels, 3), m
    coupling : float, default=0.85
        Share of each channel's variance that is spatially coupled.
    length : float, default=0.06
        Length constant, m.

    Returns
    -------
    cov : ndarray, shape (n_channels, n_channels), unit diagonal
    """
    d = np.linalg.norm(pos[:, None, :] - pos[None, :, :], axis=-1)
    return coupling * np.exp(-d / length) + (1.0 - coupling) * np.eye(len(pos))


def symmetric_sqrt(cov):
    """The symmetric square root ``M`` with ``M @ M.T == cov`` (eigenvalues clipped at 0)."""
    w, v = np.linalg.eigh(cov)
    return (v * np.sqrt(np.clip(w, 0.0, None))) @ v.T


def _average_reference(p):
    return p - p.mean(axis=0, keepdims=True)


def _region_mean(p, names, region):
    idx = [names.index(n) for n in region if n in names]
    return p[idx].mean(axis=0)


class SpatialModel:
    """Everything a recording needs from a spatial model.

    Attributes
    ----------
    names : list of str
    cov : ndarray, shape (n_channels, n_channels)
        Background covariance (reference-free potentials), mean diagonal 1.
    mixing : ndarray, shape (n_channels, n_channels)
        Its symmetric square root.
    response : ndarray, shape (n_channels,)
        Auditory response pattern, average reference, mean over FRONTOCENTRAL = +1.
    alpha : ndarray, shape (n_alpha, n_channels)
        Alpha source patterns, average reference, largest absolute value 1.
    truth : dict
        Parameters of the model, JSON-ready.
    """

    def __init__(self, names, cov, response, alpha, truth):
        self.names = list(names)
        self.cov = cov
        self.mixing = symmetric_sqrt(cov)
        self.response = response
        self.alpha = alpha
        self.truth = truth


def spatial_model(names, kind="dipoles", coupling=0.85, length=EXPONENTIAL_LENGTH):
    """Build the spatial model ``kind`` ("dipoles" or "exponential") for a cap."""
    if kind == "exponential":
        return _exponential_model(tuple(names), coupling, length)
    if kind == "dipoles":
        return _dipole_model(tuple(names))
    raise ValueError(f'gen2: spatial: "{kind}" is not a spatial model; use "dipoles" or "exponential".')


def _blob(pos, centre, width):
    return np.exp(-np.sum((pos - centre) ** 2, axis=1) / (2 * width ** 2))


@functools.lru_cache(maxsize=8)
def _exponential_model(names, coupling, length):
    names = list(names)
    pos = positions(names)
    where = montage().get_positions()["ch_pos"]
    # A fronto-central source with reversal at the mastoids (positions from the template,
    # so the pattern does not depend on which electrodes the cap has).
    p = (_blob(pos, where["FCz"], 0.045)
         - 0.45 * (_blob(pos, where["TP9"], 0.03) + _blob(pos, where["TP10"], 0.03)))
    p = _average_reference(p)
    response = p / _region_mean(p, names, FRONTOCENTRAL)
    a = _average_reference(_blob(pos, where["Oz"], 0.04))
    alpha = (a / np.abs(a).max())[None, :]
    truth = {"kind": "exponential", "coupling": coupling, "length_m": length}
    return SpatialModel(names, exponential_covariance(pos, coupling, length), response, alpha, truth)


def _info(names):
    import mne

    info = mne.create_info(list(names), 1000.0, "eeg")
    info.set_montage(montage(), verbose="error")
    return info


@functools.lru_cache(maxsize=8)
def _sphere(names):
    import mne

    return mne.make_sphere_model("auto", "auto", _info(names), verbose="error")


def dipole_forward(names, rr, nn):
    """Leadfield of fixed dipoles through ``mne.make_forward_dipole`` in the cap's sphere.

    Parameters
    ----------
    names : sequence of str
    rr : ndarray, shape (n_dipoles, 3), m, head frame
    nn : ndarray, shape (n_dipoles, 3), unit orientations

    Returns
    -------
    gain : ndarray, shape (n_channels, n_dipoles), V per A m, reference-free
    """
    import mne

    rr, nn = np.atleast_2d(rr), np.atleast_2d(nn)
    dip = mne.Dipole(np.zeros(len(rr)), rr, np.ones(len(rr)) * 1e-8, nn, np.ones(len(rr)))
    fwd, _ = mne.make_forward_dipole(dip, _sphere(tuple(names)), _info(names), trans=None, verbose="error")
    gain = np.asarray(fwd["sol"]["data"], dtype=float)
    # make_forward_dipole returns one fixed-orientation column per dipole (one time each).
    return gain[:, :len(rr)] if gain.shape[1] >= len(rr) else gain


def _fixed(names, geometry):
    centre = np.asarray(_sphere(tuple(names))["r0"], dtype=float)
    rr = np.asarray(geometry["rr"]) + centre
    nn = np.asarray(geometry["nn"], dtype=float)
    nn /= np.linalg.norm(nn, axis=1, keepdims=True)
    return rr, nn


@functools.lru_cache(maxsize=8)
def _dipole_model(names):
    import mne

    names = list(names)
    sphere = _sphere(tuple(names))
    src = mne.setup_volume_source_space(sphere=sphere, pos=12.0, mindist=5.0, exclude=0.0, verbose="error")
    centre = np.asarray(sphere["r0"], dtype=float)
    brain = sphere["layers"][0]["rad"]
    # Keep the outer shell of the brain sphere, where cortex would be.
    use = np.flatnonzero(src[0]["inuse"])
    depth = np.linalg.norm(src[0]["rr"][use] - centre, axis=1)
    keep = use[(depth > 0.55 * brain) & (depth < 0.92 * brain)]
    src[0]["inuse"][:] = 0
    src[0]["inuse"][keep] = 1
    src[0]["vertno"] = keep
    src[0]["nuse"] = len(keep)
    fwd = mne.make_forward_solution(_info(names), trans=None, src=src, bem=sphere, meg=False, eeg=True,
                                    verbose="error")
    lead = np.asarray(fwd["sol"]["data"], dtype=float)                          # (n_ch, 3 * n_sources), V per A m
    cov = lead @ lead.T
    cov /= np.mean(np.diag(cov))
    rr, nn = _fixed(names, AUDITORY)
    p = _average_reference(dipole_forward(names, rr, nn).sum(axis=1))
    response = p / _region_mean(p, names, FRONTOCENTRAL)
    arr, ann = _fixed(names, OCCIPITAL)
    a = _average_reference(dipole_forward(names, arr, ann)).T
    alpha = a / np.abs(a).max()
    truth = {"kind": "dipoles", "sphere_r0_m": centre.tolist(), "sphere_radius_m": float(sphere.radius),
             "n_background_sources": int(len(keep)), "grid_mm": 12.0,
             "auditory_rr_m": rr.tolist(), "auditory_nn": nn.tolist(),
             "occipital_rr_m": arr.tolist(), "occipital_nn": ann.tolist()}
    return SpatialModel(names, cov, response, alpha, truth)
