"""Repair of bad cells (epoch, channel) by interpolation matrices built once per set.

EEG: spherical splines (Perrin et al. 1989, `heschl.numeric.splines`) from the good EEG
channels. MEG: the field is expanded in the internal multipole basis of the sensor
array (Taulu & Kajola 2005, docs/REFERENCES.md F50; the basis from mne's public
``mne.preprocessing.compute_maxwell_basis``), fitted on the good MEG sensors of both
kinds by a truncated pseudo-inverse and evaluated at the bad ones. Either way the repair is a matrix from the good
channels to the bad ones, which depends only on the set of bad channels: it is built
once per set and applied to every epoch that shares the set.
"""
from __future__ import annotations

import logging

import numpy as np

from .errors import InputDataError, problem
from .numeric.splines import spline_matrix
from .vocabulary import INTERPOLATION_ORIGIN, MEG_SENSOR_TYPES

__all__ = ["ChannelRepair"]

log = logging.getLogger(__name__)

#: Internal multipole order for MEG (mne's default for Maxwell filtering: 80 moments);
#: lowered only when fewer good sensors than moments remain.
MEG_ORDER = 8
#: Singular values below this fraction of the largest are cut when the moments are fitted
#: (truncated pseudo-inverse). Chosen on dipole fields of the synthetic helmet: 1e-2 gave
#: 2.7-6.7 % RMS error at the bad sensors against mne's 1.8-6.2 %; no cut gave 2.5-6.6 %
#: but 4.2 % where mne had 1.8 % (tests/test_crossval.py).
RCOND = 1e-2


class ChannelRepair:
    """Interpolation matrices for the data channels of ``info``, cached by set of bad channels.

    Parameters
    ----------
    info : mne.Info
        EEG, magnetometer and gradiometer channels with positions, in the order of the
        arrays to repair.
    origin : tuple of float, default=INTERPOLATION_ORIGIN
        Centre of the sphere, m, head frame.

    Attributes
    ----------
    types : ndarray of str
        Sensor type per channel.
    n_matrices : int
        Matrices built so far.
    """

    def __init__(self, info, origin=INTERPOLATION_ORIGIN):
        self.info = info
        self.origin = np.asarray(origin, dtype=float)
        self.types = np.asarray(info.get_channel_types())
        self._eeg = np.flatnonzero(self.types == "eeg")
        self._meg = np.flatnonzero(np.isin(self.types, MEG_SENSOR_TYPES))
        if len(self._eeg) + len(self._meg) != len(self.types):
            raise InputDataError(problem("ChannelRepair", f"info holds channel types {sorted(set(self.types))}",
                                         "pass only EEG, magnetometer and gradiometer channels", key="info"))
        self._pos = np.array([ch["loc"][:3] for ch in info["chs"]], dtype=float) - self.origin
        self._basis = None
        self._cache = {}
        self.n_matrices = 0

    def _meg_basis(self):
        if self._basis is None:
            import mne

            meg_info = mne.pick_info(self.info, self._meg)
            with mne.utils.use_log_level("error"):
                basis, _, _, n_in = mne.preprocessing.compute_maxwell_basis(
                    meg_info, origin=tuple(self.origin), coord_frame="head", int_order=MEG_ORDER, ext_order=0,
                    regularize=None, bad_condition="ignore")
            basis = basis[:, :n_in]
            self._basis = basis / np.linalg.norm(basis, axis=0)
        return self._basis

    def _meg_matrix(self, bad, good):
        """Matrix from the good MEG sensors to the bad ones (indices within the MEG sensors)."""
        basis = self._meg_basis()
        order = MEG_ORDER
        while order > 1 and order * (order + 2) >= len(good):
            order -= 1
        columns = order * (order + 2)  # internal moments up to this order
        return basis[bad, :columns] @ np.linalg.pinv(basis[good, :columns], rcond=RCOND)

    def matrix(self, bad):
        """(bad channels, good channels, matrix) for a tuple of bad channel indices of one kind."""
        bad = tuple(int(b) for b in bad)
        if bad not in self._cache:
            pool = self._eeg if self.types[bad[0]] == "eeg" else self._meg
            good = np.setdiff1d(pool, bad)
            if len(good) < 3:
                raise InputDataError(problem("ChannelRepair", f"{len(bad)} of {len(pool)} channels of one kind "
                                             "are bad", "interpolation needs at least 3 good ones", key="bad"))
            if pool is self._eeg:
                m = spline_matrix(self._pos[good], self._pos[list(bad)])
            else:
                where = {c: i for i, c in enumerate(pool)}
                m = self._meg_matrix([where[b] for b in bad], [where[g] for g in good])
            self._cache[bad] = (np.array(bad), good, m)
            self.n_matrices += 1
        return self._cache[bad]

    def apply(self, x, mask):
        """Interpolate the cells ``mask`` of ``x`` (n_epochs, n_channels, n_times) in place.

        Epochs that share a set of bad channels of one kind are repaired together, with
        one matrix.
        """
        mask = np.asarray(mask, dtype=bool)
        for pool in (self._eeg, self._meg):
            if not len(pool):
                continue
            part = mask[:, pool]
            rows = np.flatnonzero(part.any(axis=1))
            if not len(rows):
                continue
            keys, groups = np.unique(part[rows], axis=0, return_inverse=True)
            for g, key in enumerate(keys):
                epochs = rows[groups.ravel() == g]
                bad, good, m = self.matrix(pool[key])
                x[np.ix_(epochs, bad)] = np.einsum("bg,egt->ebt", m, x[np.ix_(epochs, good)])
        return x

    def leave_one_out(self, x, channels):
        """Channels ``channels`` of every epoch, each interpolated from the other channels of its kind.

        Parameters
        ----------
        x : ndarray, shape (n_epochs, n_channels, n_times)
        channels : sequence of int

        Returns
        -------
        ndarray, shape (n_epochs, len(channels), n_times)
        """
        weights = np.zeros((len(channels), x.shape[1]))
        for i, c in enumerate(channels):
            _, good, m = self.matrix((c,))
            weights[i, good] = m[0]
        return np.matmul(weights, x)  # one small product per epoch; no copy of the epochs
