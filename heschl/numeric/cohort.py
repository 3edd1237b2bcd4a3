"""Cohort-level reliability: Spearman-Brown and the split-half correlation across subjects.

How consistently a score orders subjects: a correlation across subjects, so it exists
only for a cohort, never for one recording (Clayson & Miller 2017). Subject-level
precision (bootstrap, SME, split halves of one recording) is in
:mod:`heschl.numeric.reliability`, whose small helpers these functions share.
"""
from __future__ import annotations

import numpy as np

from heschl.errors import DefinitionError, InputDataError, ProcessingError, problem
from heschl.numeric.reliability import _check_method, _first_bad, _pearson, _plain, _trial_array, _whole

__all__ = ["spearman_brown", "lengthening_factor", "split_half", "split_half_cohort"]


# -- Spearman-Brown ------------------------------------------------------------------------


def spearman_brown(r, factor=2.0):
    """Reliability of a test lengthened by ``factor`` (Spearman-Brown prophecy).

    ``r* = n r / (1 + (n - 1) r)`` with ``n = factor`` (Spearman 1910; Brown 1910). The
    split-half step-up is ``factor=2``: ``2 r / (1 + r)``.

    Parameters
    ----------
    r : float or ndarray, unitless
        Reliability (or half-test correlation) of the original length, in [-1, 1].
        Negative values are stepped up as computed, which is not meaningful; report them
        as "no reliability" rather than trusting the number.
    factor : float, default=2.0
        Ratio of the new to the original length (number of trials), > 0.

    Returns
    -------
    r_new : float or ndarray, unitless
        Same shape as ``r``; NaN stays NaN.
    """
    where = "spearman_brown"
    r = np.asarray(r, dtype=float)
    if np.any(np.abs(r) > 1):
        bad = np.abs(r) > 1
        raise InputDataError(problem(where, f"r = {_first_bad(r, bad)} is outside [-1, 1]",
                                     "pass a correlation", key="r"))
    if not float(factor) > 0:
        raise DefinitionError(problem(where, f"factor = {factor!r} is not > 0",
                                      "pass the ratio of new to original length, e.g. 2",
                                      key="factor"))
    n = float(factor)
    with np.errstate(divide="ignore", invalid="ignore"):
        return _plain(n * r / (1 + (n - 1) * r))


def lengthening_factor(r, target):
    """How many times longer a test must be to reach a target reliability.

    ``n = target (1 - r) / (r (1 - target))``, the Spearman-Brown formula solved for
    ``n``; ``spearman_brown(r, lengthening_factor(r, target)) == target``. Multiply the
    trial count by ``n`` to estimate the trials needed.

    Parameters
    ----------
    r : float or ndarray, unitless
        Current reliability, in (0, 1].
    target : float or ndarray, unitless
        Wanted reliability, in [0, 1), e.g. 0.8.

    Returns
    -------
    n : float or ndarray, unitless
        Broadcast shape of ``r`` and ``target``; below 1 when ``r`` already exceeds
        ``target``.
    """
    where = "lengthening_factor"
    r = np.asarray(r, dtype=float)
    target = np.asarray(target, dtype=float)
    bad = ~((r > 0) & (r <= 1))
    if np.any(bad):
        raise InputDataError(problem(
            where, f"r = {_first_bad(r, bad)} is outside (0, 1]",
            "a score without positive reliability cannot be lengthened to a target", key="r"))
    bad = ~((target >= 0) & (target < 1))
    if np.any(bad):
        raise DefinitionError(problem(
            where, f"target = {_first_bad(target, bad)} is outside [0, 1)",
            "choose a reliability below 1, e.g. 0.8", key="target"))
    return _plain(target * (1 - r) / (r * (1 - target)))


# -- split-half reliability across a cohort --------------------------------------------------


def split_half_cohort(scores_a, scores_b):
    """Spearman-Brown-corrected split-half reliability of a score across subjects.

    The Pearson correlation across subjects of the scores from the two halves of each
    subject's trials, stepped up to the full trial count with ``2 r / (1 + r)``
    (Clayson & Miller 2017; Spearman 1910; Brown 1910). Thresholds in common use:
    >= 0.70 acceptable, >= 0.80 preferred.

    Parameters
    ----------
    scores_a, scores_b : ndarray, shape (n_subjects, ...), unit of the score
        Half scores, one row per subject in the same order; at least 3 subjects.

    Returns
    -------
    r_sb : float or ndarray, shape (...), unitless
        NaN where a half has the same score for every subject.
    """
    where = "split_half_cohort"
    a = np.asarray(scores_a, dtype=float)
    b = np.asarray(scores_b, dtype=float)
    if a.shape != b.shape or a.ndim == 0:
        raise InputDataError(problem(
            where, f"scores_a has shape {a.shape} but scores_b has shape {b.shape}",
            "pass one half score per subject on axis 0 of each, in the same order",
            key="scores_b"))
    if a.shape[0] < 3:
        raise InputDataError(problem(
            where, f"{a.shape[0]} subjects cannot give a meaningful correlation",
            "pass at least 3 subjects (many more for a usable estimate)", key="scores_a"))
    return spearman_brown(np.clip(_pearson(a, b), -1.0, 1.0))


def _subject_list(trials, axis, where):
    """Each subject's trials as a float array with trials on axis 0."""
    subjects = []
    for s, x in enumerate(trials):
        x = np.asarray(x, dtype=float)
        if not -x.ndim <= axis < x.ndim:
            raise InputDataError(problem(
                where, f"subject {s} has trials of shape {x.shape} with no axis {axis}",
                "pass each subject's trials as an array with trials along `axis`",
                key="trials"))
        subjects.append(_trial_array(np.moveaxis(x, axis, 0), where, key=f"trials[{s}]"))
    if len(subjects) < 3:
        raise InputDataError(problem(
            where, f"{len(subjects)} subjects cannot give a meaningful correlation",
            "pass the trials of at least 3 subjects", key="trials"))
    return subjects


def _cohort_halves(counts, method, rng):
    """Trial indices of half A and half B for each subject: two lists of index arrays.

    Both halves have ``n // 2`` trials (an odd last trial is left out, so the halves are
    parallel as Spearman-Brown assumes) and are sorted in time.
    """
    if method == "odd-even":
        return ([np.arange(0, n - n % 2, 2) for n in counts],
                [np.arange(1, n - n % 2, 2) for n in counts])
    keys = rng.random(sum(counts))
    if len(set(counts)) == 1:
        orders = [keys.reshape(len(counts), counts[0]).argsort(axis=1)]
    else:
        orders = [k.argsort() for k in np.split(keys, np.cumsum(counts)[:-1])]
    halves_a, halves_b = [], []
    for order in orders:
        h = order.shape[-1] // 2
        halves_a.extend(np.sort(order[..., :h], axis=-1).reshape(-1, h))
        halves_b.extend(np.sort(order[..., h:2 * h], axis=-1).reshape(-1, h))
    return halves_a, halves_b


def _cohort_scores(subjects, stack, halves, score_fn, where):
    """Score of one half for every subject, shape (n_subjects, ...)."""
    if stack is None:
        return np.stack([np.asarray(score_fn(x[i]), dtype=float)
                         for x, i in zip(subjects, halves)])
    index = np.stack(halves, axis=1)  # (n_half, n_subjects)
    index = index.reshape(index.shape + (1,) * (stack.ndim - 2))
    out = np.asarray(score_fn(np.take_along_axis(stack, index, axis=0)), dtype=float)
    if out.ndim == 0 or out.shape[0] != len(subjects):
        raise ProcessingError(problem(
            where, f"with batched=True score_fn returned shape {out.shape} for "
            f"{len(subjects)} subjects", "reduce axis 0 (trials) only and return the "
            "subjects first, e.g. lambda t: t.mean(axis=0)", key="score_fn"))
    return out


def split_half(score_fn, trials, *, method="odd-even", n_splits=100, rng=None, axis=0,
               batched=False):
    """Split-half reliability of a score across a cohort, from each subject's trials.

    Each subject's trials are split into two halves, the score is computed on each half,
    and the halves are correlated across subjects (`split_half_cohort`). With
    ``method="random"`` this is repeated for ``n_splits`` random splits (a fresh split
    for every subject each time) and the estimates are averaged (the permutation
    approach, common practice), which removes the dependence on one arbitrary split.

    Parameters
    ----------
    score_fn : callable
        ``score_fn(half)`` with ``half`` of shape (n_half, ...) (trials on axis 0)
        returns the subject's score, a float or an ndarray of fixed shape. With
        ``batched=True`` it receives shape (n_half, n_subjects, ...) and returns shape
        (n_subjects, ...).
    trials : sequence of ndarray, length n_subjects
        Each subject's trials with trials along ``axis``, e.g. shape (n_trials,) of
        single-trial window means in V; trial counts may differ unless ``batched``. An
        ndarray of shape (n_subjects, ...) is read as such a sequence.
    method : {"odd-even", "random"}, default="odd-even"
        "odd-even" puts trials 0, 2, 4, ... in one half and 1, 3, 5, ... in the other
        (one split, deterministic); "random" draws ``n_splits`` random splits.
    n_splits : int, default=100
        Random splits; ignored (1) for "odd-even".
    rng : None, int or numpy.random.Generator, default=None
        Seed for "random" (anything `numpy.random.default_rng` accepts; None draws fresh
        entropy, so pass an int for reproducible results).
    axis : int, default=0
        Trial axis of each subject's array.
    batched : bool, default=False
        Score all subjects' halves in one call (needs equal trial shapes).

    Returns
    -------
    result : dict
        ``r_half`` (float or ndarray, shape (...)): mean half-test correlation;
        ``r_sb`` (same shape): mean of the Spearman-Brown-corrected correlations of the
        splits; ``r_sb_splits`` (ndarray, shape (n_splits, ...)): the corrected value of
        each split; ``n_splits`` (int). Odd trial counts leave one trial out of each
        split so both halves have n_trials // 2 trials.
    """
    where = "split_half"
    _check_method(method, where)
    n_splits = 1 if method == "odd-even" else _whole(n_splits, where, "n_splits", 1)
    subjects = _subject_list(trials, axis, where)
    stack = None
    if batched:
        shapes = {x.shape for x in subjects}
        if len(shapes) != 1:
            raise InputDataError(problem(
                where, f"batched=True needs equal trial shapes but found {len(shapes)} "
                "different ones", "pass batched=False for unequal trial counts",
                key="batched"))
        stack = np.stack(subjects, axis=1)  # (n_trials, n_subjects, ...)
    generator = np.random.default_rng(rng)
    counts = [x.shape[0] for x in subjects]
    r_half = []
    for _ in range(n_splits):
        halves_a, halves_b = _cohort_halves(counts, method, generator)
        a = _cohort_scores(subjects, stack, halves_a, score_fn, where)
        b = _cohort_scores(subjects, stack, halves_b, score_fn, where)
        r_half.append(np.clip(_pearson(a, b), -1.0, 1.0))
    r_half = np.stack(r_half)
    r_sb = np.asarray(spearman_brown(r_half))
    return {"r_half": _plain(r_half.mean(axis=0)), "r_sb": _plain(r_sb.mean(axis=0)),
            "r_sb_splits": r_sb, "n_splits": n_splits}
