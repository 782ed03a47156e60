"""Tail areas, quantiles and ranks without importing scipy.stats.

``scipy.stats`` takes about 0.7 s to import on the project's machine, most of a
short command's start-up. The engine needs only a few of its numbers, and
scipy.stats itself computes them with these scipy.special routines (its
``t``, ``chi2`` and ``f`` distributions call ``stdtr``, ``stdtrit``, ``chdtrc``,
``gammaincinv`` and ``fdtrc``), so the values are the same; ``tests/test_dist.py``
holds them to scipy.stats. Shapiro-Wilk and ``linregress`` import scipy.stats
when they are used.

Use as ``from . import _dist as stats``: ``stats.t.sf``, ``stats.t.ppf``,
``stats.chi2.sf``, ``stats.chi2.ppf``, ``stats.f.sf``, ``stats.rankdata``,
``stats.shapiro``, ``stats.linregress``.
"""
from __future__ import annotations

from types import SimpleNamespace

import numpy as np
from scipy import special

__all__ = ["t", "chi2", "f", "rankdata", "shapiro", "linregress"]


def _t_sf(x, df):
    return special.stdtr(df, -np.asarray(x, dtype=float))


def _t_ppf(q, df):
    return special.stdtrit(df, q)


def _chi2_sf(x, df):
    return special.chdtrc(df, np.maximum(np.asarray(x, dtype=float), 0.0))


def _chi2_ppf(q, df):
    return 2 * special.gammaincinv(np.asarray(df, dtype=float) / 2, q)


def _f_sf(x, dfn, dfd):
    return special.fdtrc(dfn, dfd, np.maximum(np.asarray(x, dtype=float), 0.0))


#: Student's t: ``t.sf(x, df)``, ``t.ppf(q, df)``.
t = SimpleNamespace(sf=_t_sf, ppf=_t_ppf)
#: chi-squared: ``chi2.sf(x, df)``, ``chi2.ppf(q, df)``.
chi2 = SimpleNamespace(sf=_chi2_sf, ppf=_chi2_ppf)
#: F: ``f.sf(x, dfn, dfd)``.
f = SimpleNamespace(sf=_f_sf)


def rankdata(a, method: str = "average") -> np.ndarray:
    """Ranks from 1, ties given their average rank (``method="average"``) or their lowest (``"min"``).

    The same numbers as :func:`scipy.stats.rankdata` for finite data.
    """
    a = np.asarray(a).ravel()
    n = a.size
    out = np.empty(n, dtype=float)
    if n == 0:
        return out
    order = np.argsort(a, kind="mergesort")
    s = a[order]
    new = np.empty(n, dtype=bool)
    new[0] = True
    np.not_equal(s[1:], s[:-1], out=new[1:])
    group = np.cumsum(new) - 1
    starts = np.flatnonzero(new)
    if method == "min":
        ranks = starts[group] + 1.0
    elif method == "average":
        counts = np.diff(np.append(starts, n))
        ranks = starts[group] + (counts[group] + 1) / 2.0
    else:
        raise ValueError(f"method must be 'average' or 'min', not {method!r}")
    out[order] = ranks
    return out


def shapiro(x):
    """:func:`scipy.stats.shapiro` (imports scipy.stats on first use)."""
    from scipy.stats import shapiro as _shapiro
    return _shapiro(x)


def linregress(x, y):
    """:func:`scipy.stats.linregress` (imports scipy.stats on first use)."""
    from scipy.stats import linregress as _linregress
    return _linregress(x, y)
