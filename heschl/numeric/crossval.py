"""Cross-validated rejection: per-channel peak-to-peak thresholds, then how many bad
channels an epoch may have repaired and how many drop it (Jas et al. 2017,
docs/REFERENCES.md F34), on arrays.

The method, as published:

1. Each channel's threshold is chosen among its epochs' peak-to-peak values by K-fold
   cross-validation: average the training epochs whose peak-to-peak is under the
   candidate, compare with the median of the validation epochs (root mean square over
   time), keep the candidate with the smallest mean error. The epochs are augmented with
   the channel interpolated from all the others (the published augmentation), so a
   channel's own artefacts do not set its validation median.
2. With those thresholds, a cell (epoch, channel) is bad when its peak-to-peak exceeds
   the channel's threshold. For each candidate pair (rho, kappa): an epoch with at least
   ``kappa`` x n_channels bad channels is dropped; in the others, the ``rho`` worst bad
   channels (largest peak-to-peak) are interpolated, all of them if there are fewer. The
   pair whose repaired training mean is closest to the validation median wins. Each
   sensor type gets its own pair.

What differs from the reference implementation, and why: the thresholds are found by an
exact search over every candidate (the prefix means of the sorted training epochs give
every candidate's error at once) instead of Bayesian optimisation over a subset; each
epoch and its interpolated copy fall in the same fold (a copy in the training set would
leak its original into the validation median); interpolation matrices are built once per
set of bad channels and applied to all epochs sharing it. And one rule of ours on top
(``fence``): no threshold lies below its channel's upper outlier fence (Tukey 1977,
docs/REFERENCES.md F45), because on clean recordings the cross-validated error is flat
and its minimum falls near the median epoch, which would repair nearly every epoch.

Arrays are in SI units; shapes are documented per method. The repair itself is passed in
(``repair``): an object with ``types`` (sensor type per channel), ``apply(x, mask)``
(interpolate ``mask``-ed cells of ``x`` in place and return ``x``) and
``leave_one_out(x, channels)`` (those channels of every epoch interpolated from the others);
`heschl.repair.ChannelRepair` builds one from mne's info.
"""
from __future__ import annotations

import numpy as np

from heschl.errors import InputDataError, problem

__all__ = ["LearntRejection", "interpolation_candidates", "CONSENSUS_CANDIDATES", "tukey_fence",
           "interpolation_mask"]

#: Fractions of a sensor type's channels that, bad together in one epoch, drop it; 10-50 %
#: spans lenient to strict for 16-128 channels.
CONSENSUS_CANDIDATES = (0.1, 0.2, 0.3, 0.4, 0.5)


def interpolation_candidates(n_channels):
    """Candidate numbers of channels that may be interpolated per epoch.

    Rule: with ``top = n_channels // 4`` (interpolating more than a quarter of the
    channels leaves too few to interpolate from), the candidates are
    ``1, top // 4, top // 2, top``, kept when at least 1, without repeats.
    8 channels -> (1, 2); 32 -> (1, 2, 4, 8); 64 -> (1, 4, 8, 16); 128 -> (1, 8, 16, 32).
    Below 4 channels nothing may be interpolated and the only candidate is 0.

    Parameters
    ----------
    n_channels : int

    Returns
    -------
    candidates : tuple of int
    """
    if isinstance(n_channels, bool) or not isinstance(n_channels, (int, np.integer)) or n_channels < 1:
        raise InputDataError(problem("interpolation_candidates", f"n_channels = {n_channels!r}",
                                     "pass the number of channels, a positive integer", key="n_channels"))
    top = int(n_channels) // 4
    if top < 1:
        return (0,)
    return tuple(sorted({c for c in (1, top // 4, top // 2, top) if c >= 1}))


def tukey_fence(values, k):
    """Upper Tukey fence ``Q3 + k IQR`` of each column (docs/REFERENCES.md F45)."""
    q1, q3 = np.percentile(values, [25, 75], axis=0)
    return q3 + k * (q3 - q1)


def interpolation_mask(bad, ptp, rho):
    """Cells to interpolate: in each epoch the ``rho`` bad cells with the largest peak-to-peak.

    Parameters
    ----------
    bad : ndarray of bool, shape (n_epochs, n_channels)
    ptp : ndarray, shape (n_epochs, n_channels)
    rho : int

    Returns
    -------
    mask : ndarray of bool, shape (n_epochs, n_channels)
    """
    bad = np.asarray(bad, dtype=bool)
    if rho <= 0:
        return np.zeros_like(bad)
    mask = bad.copy()
    over = bad.sum(axis=1) > rho
    if over.any():
        ranked = np.where(bad[over], ptp[over], -np.inf)
        worst = np.argsort(-ranked, axis=1, kind="stable")[:, :rho]
        rows = np.zeros_like(bad[over])
        np.put_along_axis(rows, worst, True, axis=1)
        mask[over] = rows & bad[over]
    return mask


def _fold_ids(n_epochs, cv, random_state):
    order = np.random.default_rng(random_state).permutation(n_epochs)
    folds = np.empty(n_epochs, dtype=int)
    folds[order] = np.arange(n_epochs) % cv
    return folds


def _channel_threshold(data, folds, cv):
    """Exact cross-validated threshold of one channel; data (n, T), folds (n,)."""
    ptp = np.ptp(data, axis=1)
    candidates = np.unique(ptp)
    loss = np.zeros(len(candidates))
    for f in range(cv):
        test, train = folds == f, folds != f
        median = np.median(data[test], axis=0)
        train_ptp = ptp[train]
        order = np.argsort(train_ptp, kind="stable")
        prefix = np.cumsum(data[train][order], axis=0)
        sorted_ptp = train_ptp[order]
        # Training epochs under each candidate; at least the smallest one (as published).
        k = np.maximum(np.searchsorted(sorted_ptp, candidates, side="right"), 1)
        means = prefix[k - 1] / k[:, None]
        loss += np.sqrt(np.mean((means - median) ** 2, axis=1))
    return float(candidates[np.argmin(loss)])


class LearntRejection:
    """Per-channel thresholds, repair counts and consensus learnt by cross-validation.

    Parameters
    ----------
    n_interpolate : sequence of int or None, default=None
        Candidate numbers of channels repaired per epoch (rho); None: the rule of
        `interpolation_candidates` for the smallest sensor type.
    consensus : sequence of float, default=CONSENSUS_CANDIDATES
        Candidate fractions of a type's channels that drop an epoch (kappa).
    cv : int, default=5
        Folds.
    random_state : int, default=0
        Seed of the fold assignment.
    fence : float or None, default=3.0
        No threshold below its channel's ``Q3 + fence IQR`` of peak-to-peak values
        (Tukey's "far out" fence); None learns thresholds without a floor.
    augment : bool, default=True
        Add each channel interpolated from the others to its threshold search.

    Attributes
    ----------
    thresholds_ : ndarray, shape (n_channels,)
        Peak-to-peak limits after the fence, in the data's unit.
    learnt_thresholds_ : ndarray, shape (n_channels,)
        The cross-validated limits before the fence.
    types_ : ndarray of str
    n_interpolate_ : dict
        Sensor type -> chosen rho.
    consensus_ : dict
        Sensor type -> chosen kappa.
    loss_ : dict
        Sensor type -> ndarray (n_consensus, n_interpolate, cv) of validation errors.
    n_interpolate_candidates_ : tuple of int
    """

    def __init__(self, *, n_interpolate=None, consensus=CONSENSUS_CANDIDATES, cv=5, random_state=0, fence=3.0,
                 augment=True):
        self.n_interpolate = n_interpolate
        self.consensus = consensus
        self.cv = cv
        self.random_state = random_state
        self.fence = fence
        self.augment = augment

    def get_params(self, deep=True):
        """Constructor parameters, as given (scikit-learn's estimator convention)."""
        return {name: getattr(self, name) for name in
                ("n_interpolate", "consensus", "cv", "random_state", "fence", "augment")}

    def set_params(self, **params):
        """Set constructor parameters; returns self."""
        for name, value in params.items():
            if name not in self.get_params():
                raise InputDataError(problem("LearntRejection.set_params", f"unknown parameter {name!r}",
                                             f"use one of {sorted(self.get_params())}", key=name))
            setattr(self, name, value)
        return self

    def _check(self, x, repair):
        x = np.asarray(x, dtype=float)
        if x.ndim != 3 or x.shape[0] < 1 or x.shape[2] < 2:
            raise InputDataError(problem("LearntRejection", f"x has shape {x.shape}",
                                         "pass epochs shaped (n_epochs, n_channels, n_times)", key="x"))
        if not np.all(np.isfinite(x)):
            raise InputDataError(problem("LearntRejection", "x holds NaN or infinite values",
                                         "drop or repair those samples first", key="x"))
        types = np.asarray(repair.types)
        if len(types) != x.shape[1]:
            raise InputDataError(problem("LearntRejection", f"x has {x.shape[1]} channels and the repair "
                                         f"{len(types)}", "build the repair from the same channels", key="repair"))
        cv = self.cv
        if isinstance(cv, bool) or not isinstance(cv, (int, np.integer)) or cv < 2 or cv > x.shape[0]:
            raise InputDataError(problem("LearntRejection", f"cv = {cv!r} for {x.shape[0]} epochs",
                                         "pass an integer number of folds between 2 and the number of epochs",
                                         key="cv"))
        return x, types

    def fit(self, x, repair):
        """Learn thresholds, rho and kappa on the epochs ``x`` (n_epochs, n_channels, n_times).

        Returns
        -------
        self
        """
        x, types = self._check(x, repair)
        cv = int(self.cv)
        folds = _fold_ids(len(x), cv, self.random_state)
        ptp = np.ptp(x, axis=2)
        learnt = np.empty(x.shape[1])
        both = np.concatenate([folds, folds])
        block = 16  # channels interpolated at once: a copy of all of them would double the memory
        for start in range(0, x.shape[1], block):
            chunk = list(range(start, min(start + block, x.shape[1])))
            others = repair.leave_one_out(x, chunk) if self.augment else None
            for i, c in enumerate(chunk):
                learnt[c] = (_channel_threshold(x[:, c], folds, cv) if others is None else
                             _channel_threshold(np.concatenate([x[:, c], others[:, i]]), both, cv))
            del others
        self.learnt_thresholds_ = learnt
        self.thresholds_ = learnt.copy() if self.fence is None else np.maximum(learnt, tukey_fence(ptp, self.fence))
        self.types_ = types
        counts = [int(np.sum(types == kind)) for kind in dict.fromkeys(types)]
        rhos = tuple(int(r) for r in (self.n_interpolate if self.n_interpolate is not None
                                      else interpolation_candidates(min(counts))))
        self.n_interpolate_candidates_ = rhos
        kappas = tuple(float(k) for k in self.consensus)
        bad = ptp > self.thresholds_
        self.n_interpolate_, self.consensus_, self.loss_ = {}, {}, {}
        for kind in dict.fromkeys(types):
            cols = np.flatnonzero(types == kind)
            loss = self._type_loss(x, repair, bad, ptp, cols, folds, cv, rhos, kappas)
            i, j = np.unravel_index(np.argmin(loss.mean(axis=2)), loss.shape[:2])
            self.consensus_[str(kind)], self.n_interpolate_[str(kind)] = kappas[i], rhos[j]
            self.loss_[str(kind)] = loss
        return self

    @staticmethod
    def _type_loss(x, repair, bad, ptp, cols, folds, cv, rhos, kappas):
        """Validation errors (n_kappa, n_rho, cv) of one sensor type.

        The training means need, per fold and per count of bad channels, the sum of the
        (repaired) epochs: the sums of the original epochs are taken once, and each rho
        only adds what its repairs change, computed on the epochs it repairs.
        """
        from scipy import sparse

        n, width = len(cols), x.shape[2]
        counts = bad[:, cols].sum(axis=1)
        medians = [np.median(x[folds == f][:, cols], axis=0).ravel() for f in range(cv)]
        cells = folds * (n + 1) + counts
        tally = np.bincount(cells, minlength=cv * (n + 1)).reshape(cv, n + 1)
        group = sparse.csr_array((np.ones(len(x)), (cells, np.arange(len(x)))), shape=(cv * (n + 1), len(x)))
        plain = group @ (x if len(cols) == x.shape[1] else x[:, cols]).reshape(len(x), -1)
        loss = np.full((len(kappas), len(rhos), cv), np.inf)
        for j, rho in enumerate(rhos):
            mask = interpolation_mask(bad[:, cols], ptp[:, cols], rho)
            rows = np.flatnonzero(mask.any(axis=1))
            sums = plain
            if len(rows):
                full = np.zeros((len(rows), x.shape[1]), dtype=bool)
                full[:, cols] = mask[rows]
                fixed = repair.apply(x[rows], full)[:, cols]
                change = (fixed - x[rows][:, cols]).reshape(len(rows), -1)
                sums = plain + group[:, rows] @ change
                del fixed, change
            sums = sums.reshape(cv, n + 1, n * width)
            for i, kappa in enumerate(kappas):
                if kappa * n <= rho:
                    continue
                good = np.arange(n + 1) < kappa * n
                total, number = sums[:, good].sum(axis=(0, 1)), tally[:, good].sum()
                for f in range(cv):
                    k = number - tally[f, good].sum()
                    if k == 0:
                        continue
                    mean = (total - sums[f, good].sum(axis=0)) / k
                    loss[i, j, f] = np.sqrt(np.mean((medians[f] - mean) ** 2))
        return loss

    def decide(self, x):
        """Labels and drops for epochs ``x`` with the learnt values.

        Returns
        -------
        labels : ndarray of int8, shape (n_epochs, n_channels)
            0 good, 1 beyond its threshold, 2 beyond its threshold and interpolated.
        bad_epochs : ndarray of bool, shape (n_epochs,)
            Dropped because some sensor type reached its consensus.
        """
        x = np.asarray(x, dtype=float)
        ptp = np.ptp(x, axis=2)
        bad = ptp > self.thresholds_
        labels = bad.astype(np.int8)
        bad_epochs = np.zeros(len(x), dtype=bool)
        for kind in dict.fromkeys(self.types_):
            cols = np.flatnonzero(self.types_ == kind)
            labels[:, cols] += interpolation_mask(bad[:, cols], ptp[:, cols], self.n_interpolate_[str(kind)])
            bad_epochs |= bad[:, cols].sum(axis=1) >= self.consensus_[str(kind)] * len(cols)
        return labels, bad_epochs
