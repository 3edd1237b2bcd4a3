"""Reliability and data quality of scores: Spearman-Brown, split-half, bootstrap, SME.

A *score* is one number (or one array of numbers, e.g. one per channel) computed from
the trials of one recording, such as the mean amplitude of the average in a window.
Results are in the unit of the score (V for amplitudes, s for latencies) or unitless
for correlations. Trials are on axis 0 unless stated otherwise.

Two questions are kept apart (the cohort-level functions live in
:mod:`heschl.numeric.cohort`):

- Cohort-level reliability (`split_half`, `split_half_cohort`, `spearman_brown`): how
  consistently a score orders subjects. It is a correlation across subjects, so it
  exists only for a cohort, never for one recording (Clayson & Miller 2017).
- Subject-level precision (`sme_mean_amplitude`, `sme_difference`, `bootstrap_sme`,
  `bootstrap_interval`, `split_half_recording`): the standard error of one recording's
  score (Luck, Stewart, Simmons & Rhemtulla 2021; Clayson, Brush & Hajcak 2021).

``score_fn`` conventions
------------------------
``score_fn(trials)`` receives a subset of trials, shape (n_subset, ...), and returns a
float or an ndarray of fixed shape. With ``batched=True`` it instead receives a stack of
subsets, shape (n_subset, n_batch, ...), and must return shape (n_batch, ...), one score
per subset; ``lambda t: t.mean(axis=0)`` works both ways. Batching gives the same
numbers as calling one subset at a time (the random draws do not depend on it) and is
much faster for cheap scores.
"""
from __future__ import annotations

import numpy as np

from heschl.errors import DefinitionError, InputDataError, ProcessingError, did_you_mean, problem

__all__ = [
    "split_half_recording",
    "bootstrap_interval",
    "bootstrap_sme",
    "sme_mean_amplitude",
    "sme_difference",
    "METHODS",
]

METHODS = ("odd-even", "random")

#: Batched scoring is split into chunks of at most this many gathered values
#: (2**22 float64 values = 32 MiB), so long bootstraps of whole epochs fit in memory.
MAX_BATCH_ELEMENTS = 2 ** 22

#: A resample whose score is undefined (NaN: a subset lacks what the score needs) is left
#: out; an interval or SD from fewer valid resamples than this is NaN.
MIN_VALID_RESAMPLES = 10


# -- small helpers -------------------------------------------------------------------------


def _plain(x):
    """A 0-d result as a Python float, anything else as an ndarray."""
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def _first_bad(values, bad):
    return f"{np.asarray(values, dtype=float)[bad].flat[0]:g}"


def _whole(value, where, key, minimum):
    """Check a count option and return it as int."""
    try:
        ok = int(value) == value and value >= minimum
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise DefinitionError(problem(where, f"{key} = {value!r} is not a whole number "
                                      f">= {minimum}", f"pass a whole number >= {minimum}",
                                      key=key))
    return int(value)


def _check_method(method, where):
    if method not in METHODS:
        raise DefinitionError(problem(
            where, f'method = "{method}" is not one of {", ".join(METHODS)}'
            + did_you_mean(method, METHODS),
            'use "odd-even" for the classic split or "random" for many random splits',
            key="method"))


def _trial_array(x, where, key="trials", minimum=2):
    """Trials as a float array with trials on axis 0 and at least ``minimum`` of them."""
    x = np.asarray(x, dtype=float)
    if x.ndim == 0 or x.shape[0] < minimum:
        raise InputDataError(problem(
            where, f"{key} has shape {x.shape}, fewer than {minimum} trials on axis 0",
            f"pass at least {minimum} trials along axis 0", key=key))
    return x


def _pearson(a, b):
    """Pearson correlation along axis 0; NaN where either side has no variance."""
    a = a - a.mean(axis=0)
    b = b - b.mean(axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (a * b).sum(axis=0) / np.sqrt((a * a).sum(axis=0) * (b * b).sum(axis=0))


def _score_subsets(arrays, indices, score_fn, batched, where):
    """Scores of trial subsets, shape (n_batch, ...).

    ``arrays[g]`` has trials on axis 0; column ``j`` of ``indices[g]`` (shape
    (n_subset_g, n_batch)) picks the trials of subset ``j`` of condition ``g``; the score
    of subset ``j`` is ``score_fn(*(arrays[g][indices[g][:, j]] for g))``.
    """
    n_batch = indices[0].shape[1]
    if not batched:
        return np.stack([np.asarray(score_fn(*(x[i[:, j]] for x, i in zip(arrays, indices))),
                                    dtype=float) for j in range(n_batch)])
    per_subset = sum(i.shape[0] * (x.size // x.shape[0]) for x, i in zip(arrays, indices))
    step = max(1, MAX_BATCH_ELEMENTS // max(1, per_subset))
    parts = []
    for start in range(0, n_batch, step):
        stop = min(start + step, n_batch)
        out = np.asarray(score_fn(*(x[i[:, start:stop]] for x, i in zip(arrays, indices))),
                         dtype=float)
        if out.ndim == 0 or out.shape[0] != stop - start:
            raise ProcessingError(problem(
                where, f"with batched=True score_fn returned shape {out.shape} for "
                f"{stop - start} subsets", "reduce axis 0 (trials) only and return the "
                "subsets first, e.g. lambda t: t.mean(axis=0)", key="score_fn"))
        parts.append(out)
    return np.concatenate(parts)


# -- subject-level precision -----------------------------------------------------------------


def _recording_halves(n, method, n_splits, rng):
    """Index arrays of half A and half B, each shape (n // 2, n_splits)."""
    h = n // 2
    if method == "odd-even":
        return np.arange(0, 2 * h, 2)[:, np.newaxis], np.arange(1, 2 * h, 2)[:, np.newaxis]
    order = rng.random((n_splits, n)).argsort(axis=1)
    return np.sort(order[:, :h], axis=1).T, np.sort(order[:, h:2 * h], axis=1).T


def split_half_recording(trials, score_fn, *, method="random", n_splits=200, seed=0,
                         batched=False, between_var=None, groups=None, full_score=None):
    """Subject-level precision of one recording's score from split halves of its trials.

    What it is: an estimate of the standard error of the full-trial score, ``se``, from
    how much the score differs between two halves of the same recording. Each half
    score has about twice the error variance of the full score, so
    ``Var(A - B) = 2 * 2 * se**2`` and ``se = difference_sd / 2``, where
    ``difference_sd`` is the root mean square of ``A - B`` over the splits (taken about
    zero: the half labels are arbitrary, so the difference is symmetric about 0). For
    the mean amplitude over many random splits, ``se**2`` equals ``s**2 / n`` with the
    ddof=1 trial SD ``s`` in expectation over splits, i.e. the analytic SME
    (`sme_mean_amplitude`, Luck et al. 2021) up to ``sqrt(n / (n - 1))``; for other
    scores (peaks, latencies) it plays the role of the bootstrapped SME.

    ``reliability`` follows the idea of subject-level reliability of Clayson, Brush &
    Hajcak (2021): true-score variance over true-score plus *this subject's* error
    variance, ``t / (t + se**2)``. With ``between_var`` given (the between-subject
    true-score variance of the score in a reference cohort, in units of the score
    squared) ``t = between_var``, which is their definition and ranges like a cohort
    reliability. Without it no cohort is known and ``t = max(score**2 - se**2, 0)``
    (an unbiased estimate of the squared true score), so ``reliability = 1 -
    se**2 / score**2``, clipped at 0: how well the score is told apart from zero.

    What it is not: a correlation across subjects. Without ``between_var`` it is a
    signal-to-error ratio on a 0-1 scale, not comparable with the cohort split-half of
    `split_half` or with the 0.70 / 0.80 thresholds, and it is noisy when ``|score|``
    is near ``se``. "odd-even" gives one split, so its ``se`` rests on a single
    difference (unbiased for ``se**2`` across recordings, but a rough value for any one
    recording); prefer "random".

    Parameters
    ----------
    trials : ndarray, shape (n_trials, ...) or None
        One recording's trials, e.g. single-trial window means in V, at least 2 (None
        when ``groups`` is given).
    score_fn : callable
        ``score_fn(subset) -> float or ndarray``, or ``score_fn(*conditions)`` with
        ``groups`` (see the module notes on ``batched``).
    method : {"random", "odd-even"}, default="random"
        Random halves repeated ``n_splits`` times, or one odd/even split.
    n_splits : int, default=200
        Random splits; ignored (1) for "odd-even".
    seed : None, int or numpy.random.Generator, default=0
    batched : bool, default=False
        Call ``score_fn`` on stacks of subsets.
    between_var : float or None, default=None
        Between-subject true-score variance, unit of the score squared (V**2 for V).
    groups : sequence of ndarray or None, default=None
        One trial array per condition (e.g. deviants and standards of a difference
        wave); each is split into halves independently, and half A of the score is
        ``score_fn(*(half A of each condition))``. Splits whose half score is NaN are
        left out of ``difference_sd``.
    full_score : float, ndarray or None, default=None
        The score of all trials when the caller has it already (shape (...)); None
        scores all trials once more.

    Returns
    -------
    result : dict
        ``halves`` (ndarray, shape (n_splits, 2, ...)): score of half A and half B per
        split; ``score``: full-trial score; ``difference_sd``: RMS of ``A - B``; ``se``:
        ``difference_sd / 2``, unit of the score; ``reliability``: unitless, NaN when
        both ``t`` and ``se`` are 0; ``n_splits`` (int). Arrays of shape (...) or floats.
    """
    where = "split_half_recording"
    _check_method(method, where)
    n_splits = 1 if method == "odd-even" else _whole(n_splits, where, "n_splits", 1)
    arrays = _conditions(trials, groups, where)
    if between_var is not None and not (np.isfinite(between_var) and between_var >= 0):
        raise DefinitionError(problem(
            where, f"between_var = {between_var!r} is not a finite value >= 0",
            "pass the between-subject true-score variance (unit of the score squared) or "
            "None", key="between_var"))
    rng = np.random.default_rng(seed)
    halves = [_recording_halves(x.shape[0], method, n_splits, rng) for x in arrays]
    a = _score_subsets(arrays, [h[0] for h in halves], score_fn, batched, where)
    b = _score_subsets(arrays, [h[1] for h in halves], score_fn, batched, where)
    if full_score is None:
        everything = [np.arange(x.shape[0])[:, np.newaxis] for x in arrays]
        score = _score_subsets(arrays, everything, score_fn, batched, where)[0]
    else:
        score = np.asarray(full_score, dtype=float)
        if score.shape != a.shape[1:]:
            raise DefinitionError(problem(
                where, f"full_score has shape {score.shape}, the half scores {a.shape[1:]}",
                "pass the score of all trials, as score_fn returns it, or None", key="full_score"))
    # A split whose half score is undefined (NaN) is left out of the difference SD.
    diff = a - b
    valid = np.isfinite(diff)
    n_valid = valid.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        squares = (np.where(valid, diff, 0.0) ** 2).sum(axis=0)
        difference_sd = np.where(n_valid > 0, np.sqrt(squares / np.maximum(n_valid, 1)), np.nan)
        se = difference_sd / 2
        true = np.maximum(score ** 2 - se ** 2, 0.0) if between_var is None else float(between_var)
        reliability = true / (true + se ** 2)
    return {"halves": np.stack([a, b], axis=1), "score": _plain(score),
            "difference_sd": _plain(difference_sd), "se": _plain(se),
            "reliability": _plain(reliability), "n_splits": n_splits}


def _conditions(trials, groups, where):
    """The trial arrays to resample: ``[trials]`` or the conditions of ``groups``."""
    if groups is None:
        if trials is None:
            raise DefinitionError(problem(where, "neither trials nor groups was given",
                                          "pass the trials of the recording", key="trials"))
        return [_trial_array(trials, where)]
    if trials is not None:
        raise DefinitionError(problem(
            where, "both trials and groups were given", "pass trials=None with "
            "groups=[deviants, standards] for a score of several conditions", key="groups"))
    groups = list(groups)
    if not groups:
        raise DefinitionError(problem(where, "groups is empty",
                                      "pass one trial array per condition", key="groups"))
    return [_trial_array(x, where, key=f"groups[{g}]") for g, x in enumerate(groups)]


def _bootstrap_scores(trials, score_fn, n_boot, seed, groups, batched, where):
    """Scores of ``n_boot`` resamples, shape (n_boot, ...).

    Every condition is resampled with replacement to its own size, independently of the
    others; all indices are drawn before scoring, so ``batched`` does not change them.
    """
    arrays = _conditions(trials, groups, where)
    n_boot = _whole(n_boot, where, "n_boot", 2)
    rng = np.random.default_rng(seed)
    indices = [rng.integers(0, x.shape[0], size=(n_boot, x.shape[0])).T for x in arrays]
    return _score_subsets(arrays, indices, score_fn, batched, where)


def bootstrap_interval(trials, score_fn, *, n_boot=1000, level=0.95, seed=0, groups=None,
                       batched=False):
    """Percentile bootstrap interval and bootstrap SD of a recording's score.

    Trials are resampled with replacement (Efron & Tibshirani 1993, common practice);
    for a score of several conditions (e.g. deviant minus standard) pass
    ``trials=None`` and ``groups``: each condition is resampled independently within
    itself and the score is ``score_fn(*resampled)``.

    Parameters
    ----------
    trials : ndarray, shape (n_trials, ...) or None
        The recording's trials (None when ``groups`` is given).
    score_fn : callable
        ``score_fn(trials) -> float or ndarray``, or ``score_fn(*conditions)`` with
        ``groups``; see the module notes for ``batched``.
    n_boot : int, default=1000
        Resamples, >= 2.
    level : float, default=0.95
        Coverage of the interval, in (0, 1).
    seed : None, int or numpy.random.Generator, default=0
    groups : sequence of ndarray or None, default=None
        One trial array per condition, each shape (n_trials_g, ...).
    batched : bool, default=False

    Returns
    -------
    low, high : float or ndarray, shape (...), unit of the score
        The (1 - level)/2 and (1 + level)/2 quantiles of the bootstrap scores (linear
        interpolation). Resamples with an undefined (NaN) score are left out; with fewer
        than :data:`MIN_VALID_RESAMPLES` valid ones the result is NaN.
    boot_sd : float or ndarray, shape (...), unit of the score
        SD (ddof=1) of the bootstrap scores: the bootstrap standard error.
    """
    return _bootstrap_summary(trials, score_fn, n_boot, level, seed, groups, batched, "bootstrap_interval")


def _bootstrap_summary(trials, score_fn, n_boot, level, seed, groups, batched, where):
    """Interval and SD of the bootstrap scores, leaving undefined (NaN) resamples out."""
    if not 0 < float(level) < 1:
        raise DefinitionError(problem(where, f"level = {level!r} is outside (0, 1)",
                                      "pass a coverage such as 0.95", key="level"))
    scores = _bootstrap_scores(trials, score_fn, n_boot, seed, groups, batched, where)
    valid = np.isfinite(scores)
    enough = valid.sum(axis=0) >= min(MIN_VALID_RESAMPLES, scores.shape[0])
    with np.errstate(invalid="ignore"):
        filled = np.where(valid, scores, np.nan)
        low, high = (np.where(enough, q, np.nan) for q in _nan_quantiles(filled, level))
        sd = np.where(enough, _nan_sd(filled), np.nan)
    return _plain(low), _plain(high), _plain(sd)


def _nan_quantiles(scores, level):
    """The (1 - level)/2 and (1 + level)/2 quantiles over axis 0, leaving NaN out."""
    out = []
    for q in ((1 - level) / 2, (1 + level) / 2):
        columns = [np.quantile(c[np.isfinite(c)], q) if np.isfinite(c).any() else np.nan
                   for c in scores.reshape(scores.shape[0], -1).T]
        out.append(np.asarray(columns, dtype=float).reshape(scores.shape[1:]))
    return out


def _nan_sd(scores):
    """SD (ddof=1) over axis 0 of the finite values; NaN with fewer than 2."""
    n = np.isfinite(scores).sum(axis=0)
    mean = np.nansum(scores, axis=0) / np.maximum(n, 1)
    ss = np.nansum((scores - mean) ** 2, axis=0)
    return np.where(n >= 2, np.sqrt(ss / np.maximum(n - 1, 1)), np.nan)


def bootstrap_sme(trials, score_fn, *, n_boot=1000, seed=0, groups=None, batched=False):
    """Bootstrapped standardized measurement error (SME) of a score.

    The SD (ddof=1) of the score over resamples of the trials: the SME for scores with no
    analytic formula, such as peak amplitude or latency (Luck et al. 2021). Same
    parameters and resampling as `bootstrap_interval`.

    Returns
    -------
    sme : float or ndarray, shape (...), unit of the score
    """
    return _bootstrap_summary(trials, score_fn, n_boot, 0.95, seed, groups, batched, "bootstrap_sme")[2]


def sme_mean_amplitude(window_means, ddof=0):
    """Analytic standardized measurement error of a mean-amplitude score.

    ``SME = SD(single-trial window means) / sqrt(N)`` (Luck, Stewart, Simmons &
    Rhemtulla 2021): the standard error of the mean amplitude of the average of N
    trials. With the default ``ddof=0`` it equals ``mne.stats.erp.compute_sme``, which
    uses numpy's default SD; ``ddof=1`` is larger by ``sqrt(N / (N - 1))``.

    Parameters
    ----------
    window_means : ndarray, shape (n_trials, ...), V
        Mean amplitude of each trial in the window, e.g. from
        ``heschl.numeric.erp.mean_amplitude(trials, times, window)``.
    ddof : int, default=0
        Delta degrees of freedom of the SD.

    Returns
    -------
    sme : float or ndarray, shape (...), V
    """
    where = "sme_mean_amplitude"
    x = np.asarray(window_means, dtype=float)
    ddof = _whole(ddof, where, "ddof", 0)
    if x.ndim == 0 or x.shape[0] <= ddof:
        raise InputDataError(problem(
            where, f"window_means has shape {x.shape}, too few trials for ddof = {ddof}",
            f"pass more than {ddof} trials along axis 0", key="window_means"))
    return _plain(x.std(axis=0, ddof=ddof) / np.sqrt(x.shape[0]))


def sme_difference(sme_a, sme_b):
    """SME of a difference of scores from independent trial sets.

    ``sqrt(sme_a**2 + sme_b**2)`` (propagation of independent errors), e.g. deviant minus
    standard mean amplitude.

    Parameters
    ----------
    sme_a, sme_b : float or ndarray, V (unit of the scores), >= 0

    Returns
    -------
    sme : float or ndarray, broadcast shape, V
    """
    a = np.asarray(sme_a, dtype=float)
    b = np.asarray(sme_b, dtype=float)
    for key, x in (("sme_a", a), ("sme_b", b)):
        if np.any(x < 0):
            raise InputDataError(problem("sme_difference", f"{key} = {_first_bad(x, x < 0)} "
                                         "is negative", "pass standard errors (>= 0)", key=key))
    return _plain(np.hypot(a, b))
