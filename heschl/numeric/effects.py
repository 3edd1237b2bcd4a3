"""Group effect sizes on plain arrays: means with t intervals and Hedges' g.

The table layer (:mod:`heschl.group`) calls these on one feature's values per group.
"""
from __future__ import annotations

import math

import numpy as np

from heschl.errors import DefinitionError, InputDataError, problem

__all__ = ["hedges_g", "g_and_se", "mean_interval", "check_level"]

_NAN_G = (math.nan, math.nan, (math.nan, math.nan))


def check_level(level, where):
    try:
        ok = 0.0 < float(level) < 1.0
    except (TypeError, ValueError):
        ok = False
    if not ok:
        raise DefinitionError(problem(where, f"level = {level!r} is not between 0 and 1",
                                      "pass a coverage such as 0.95", key="level"))
    return float(level)


def _values(x, where, key):
    """A 1-D float array of finite values."""
    x = np.asarray(x, dtype=float)
    if x.ndim != 1:
        raise InputDataError(problem(where, f"{key} has shape {x.shape}, not (n,)",
                                     "pass one value per recording in a 1-D array", key=key))
    if not np.all(np.isfinite(x)):
        raise InputDataError(problem(
            where, f"{key} holds {int(np.sum(~np.isfinite(x)))} non-finite value(s)",
            "drop NaN and infinite values before calling", key=key))
    return x


def mean_interval(x, *, level=0.95):
    """Mean and its t-based confidence interval.

    Parameters
    ----------
    x : array-like, shape (n,)
        Finite values, any unit.
    level : float, default=0.95
        Coverage of the interval.

    Returns
    -------
    mean : float
        In the unit of ``x``; NaN when ``n = 0``.
    interval : tuple of float
        ``mean +/- t_{(1+level)/2, n-1} * sd / sqrt(n)`` with ``sd`` at ddof=1;
        ``(nan, nan)`` when ``n < 2``.
    """
    from scipy import stats

    level = check_level(level, "mean_interval")
    x = _values(x, "mean_interval", "x")
    if x.size == 0:
        return math.nan, (math.nan, math.nan)
    mean = float(x.mean())
    if x.size < 2:
        return mean, (math.nan, math.nan)
    half = float(stats.t.ppf((1 + level) / 2, x.size - 1)) * float(x.std(ddof=1)) / math.sqrt(x.size)
    return mean, (mean - half, mean + half)


def hedges_g(a, b, *, level=0.95):
    """Hedges' g of ``a`` relative to ``b``, its standard error and a normal interval.

    ``d = (mean(a) - mean(b)) / s_p`` with the pooled SD
    ``s_p = sqrt(((n1 - 1) s1^2 + (n2 - 1) s2^2) / (n1 + n2 - 2))`` (ddof=1), and
    ``g = d * J`` with ``J = 1 - 3 / (4 (n1 + n2) - 9)`` (small-sample correction, as in
    Thune et al. 2016). ``SE = sqrt((n1 + n2) / (n1 n2) + g^2 / (2 (n1 + n2)))``, the
    large-sample formula of Hedges & Olkin (1985); the interval is ``g +/- z SE`` with
    ``z`` the normal ``(1 + level) / 2`` quantile.

    Parameters
    ----------
    a, b : array-like, shape (n1,) and (n2,)
        Finite values of the two groups, same unit; ``a`` is the comparison group and
        ``b`` the reference, so ``g > 0`` means ``a`` is larger.
    level : float, default=0.95
        Coverage of the interval.

    Returns
    -------
    g : float
        Unitless; NaN with fewer than 2 values in either group or a pooled SD of 0.
    se : float
        NaN where ``g`` is.
    interval : tuple of float
        ``(low, high)``; NaN where ``g`` is.
    """
    from scipy import stats

    level = check_level(level, "hedges_g")
    a = _values(a, "hedges_g", "a")
    b = _values(b, "hedges_g", "b")
    g, se = g_and_se(a, b, spent=0)
    if math.isnan(g):
        return _NAN_G
    z = float(stats.norm.ppf((1 + level) / 2))
    return g, se, (g - z * se, g + z * se)


def g_and_se(a, b, spent):
    """Hedges' g and its SE with ``spent`` degrees of freedom taken beyond the two means.

    ``df = n1 + n2 - 2 - spent`` sets the pooled variance and ``J = 1 - 3 / (4 df - 1)``;
    ``spent=0`` is the textbook `hedges_g`. NaN with < 2 values in a group, df < 2 or no spread.
    """
    n1, n2 = a.size, b.size
    df = n1 + n2 - 2 - spent
    if n1 < 2 or n2 < 2 or df < 2:
        return math.nan, math.nan
    pooled_var = (((a - a.mean()) ** 2).sum() + ((b - b.mean()) ** 2).sum()) / df
    if not pooled_var > 0:
        return math.nan, math.nan
    g = float((a.mean() - b.mean()) / math.sqrt(pooled_var) * (1 - 3 / (4 * df - 1)))
    return g, math.sqrt((n1 + n2) / (n1 * n2) + g * g / (2 * (n1 + n2)))
