"""Scan every pair of rungs (y rung x x rung) with its checks, best first."""
from __future__ import annotations

import numpy as np
import pandas as pd

from ._validation import UnbendError, as_matrix, as_vector, usable_rows
from .express import LADDER, Reexpression, rung_label
from .fitting import fit as _fit

__all__ = ["scan", "best_pair"]

COLUMNS = ["rank", "y_power", "x_power", "y_rung", "x_rung", "loglik", "curvature_p", "pattern_p", "spread_p",
           "normality_p", "r2", "r2_original", "verdict", "n"]


def _short(f) -> str:
    bad = []
    if f.curvature.ran and not f.curvature.passed:
        bad.append("curves")
    elif f.pattern.ran and not f.pattern.passed:
        bad.append("drifts with level")
    if f.spread.ran and not f.spread.passed:
        bad.append("fans out")
    if not f.curvature.ran:
        return "too few rows to check"
    if bad:
        return "residuals " + " and ".join(bad).replace("curves", "curve").replace("fans", "fan").replace("drifts", "drift")
    return "holds: no clear curvature, even spread"


def scan(y, x, *, y_start=0.0, x_start=0.0, rungs=None) -> pd.DataFrame:
    """Fit the line for every pair of rungs and rank them, best first.

    Parameters
    ----------
    y, x : array_like
        x may have several columns; the x rung applies to every column.
    y_start, x_start : float
        Added before re-expressing.
    rungs : sequence of float, optional
        Rungs to try for both y and x (default the six of the ladder).

    Returns
    -------
    pandas.DataFrame
        One row per pair, best first, with columns rank, y_power, x_power,
        y_rung, x_rung, loglik (log-likelihood in the original units of y,
        Jacobian included, so rows with different y powers compare),
        curvature_p (Tukey's one-degree-of-freedom test), pattern_p
        (Kruskal-Wallis across fitted-value bins), spread_p
        (Breusch-Pagan), normality_p, r2 (re-expressed scale), r2_original
        (back-transformed line against y), verdict and n. Pairs whose
        re-expression is not possible (log of 0, say) come last with the
        reason as their verdict.

    Notes
    -----
    Ranking: pairs whose residuals show no curvature and no pattern at the
    5% level come first, each group ordered by log-likelihood. R² is shown but never used
    to rank: it cannot be compared across y scales and a high R² can hide a
    bend.

    References
    ----------
    Box, G. E. P. and Cox, D. R. (1964). *JRSS B* 26(2), 211-252.
    Tukey, J. W. (1949). *Biometrics* 5(3), 232-242.
    Breusch, T. S. and Pagan, A. R. (1979). *Econometrica* 47(5), 1287-1294.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> rng = np.random.default_rng(6)
    >>> x = rng.uniform(1, 100, 300)
    >>> y = 2 * x ** 0.7 * rng.lognormal(0, 0.1, 300)
    >>> t = unbend.scan(y, x)
    >>> (t.loc[0, "y_rung"], t.loc[0, "x_rung"])
    ('log', 'log')
    """
    yv = as_vector(y, "y")
    X = as_matrix(x, "x")
    rows = usable_rows(yv, X, need=max(3, X.shape[1] + 2))
    yu, Xu = yv[rows.used], X[rows.used]
    rungs = tuple(float(r) for r in (rungs if rungs is not None else LADDER))
    out = []
    for py in rungs:
        y_err = _domain(Reexpression(py, y_start), yu, "y")
        for px in rungs:
            rec = {"y_power": py, "x_power": px, "y_rung": rung_label(py), "x_rung": rung_label(px),
                   "n": int(yu.size)}
            err = y_err or _domain(Reexpression(px, x_start), Xu.ravel(), "x")
            if err:
                rec.update(loglik=np.nan, curvature_p=np.nan, pattern_p=np.nan, spread_p=np.nan, normality_p=np.nan,
                           r2=np.nan, r2_original=np.nan, verdict=f"not possible: {err}", _ok=False, _curv=False)
                out.append(rec)
                continue
            try:
                f = _fit(yu, Xu, y_power=py, x_power=px, y_start=y_start, x_start=x_start)
            except UnbendError as e:
                rec.update(loglik=np.nan, curvature_p=np.nan, pattern_p=np.nan, spread_p=np.nan, normality_p=np.nan,
                           r2=np.nan, r2_original=np.nan, verdict=f"not possible: {e}", _ok=False, _curv=False)
                out.append(rec)
                continue
            rec.update(loglik=f.loglik, curvature_p=f.curvature.pvalue, pattern_p=f.pattern.pvalue,
                       spread_p=f.spread.pvalue,
                       normality_p=f.normality.pvalue, r2=f.r2, r2_original=f.r2_original,
                       verdict=_short(f), _ok=True,
                       _curv=f.curvature.passed is not False and f.pattern.passed is not False)
            out.append(rec)
    t = pd.DataFrame(out)
    t = t.sort_values(by=["_ok", "_curv", "loglik"], ascending=[False, False, False], kind="mergesort")
    t = t.reset_index(drop=True)
    if t["_ok"].any():
        best = t.index[0]
        t.loc[best, "verdict"] = "best: " + t.loc[best, "verdict"]
    t["rank"] = np.arange(1, len(t) + 1)
    if rows.skipped:
        t.attrs["skipped"] = rows.skipped
    return t[COLUMNS]


def _domain(t: Reexpression, v: np.ndarray, name: str) -> str:
    try:
        t.check(v, name)
    except UnbendError as e:
        msg = str(e)
        return msg.split(";")[0] + f"; a start of {getattr(e, 'proposed_start', 0):g} would allow it"
    return ""


def best_pair(y, x, *, y_start=0.0, x_start=0.0, rungs=None, y_power=None, x_power=None):
    """The pair of rungs to use when the user has not pinned them.

    With neither power given, the pair the scan ranks first. With one of
    them pinned, the best-ranked scan row that has the pinned power.

    Returns
    -------
    (y_power, x_power) : tuple of float
    """
    t = scan(y, x, y_start=y_start, x_start=x_start, rungs=rungs if rungs is not None else _with(y_power, x_power))
    ok = ~t["verdict"].str.startswith("not possible")
    if y_power is not None:
        ok &= t["y_power"] == float(y_power)
    if x_power is not None:
        ok &= t["x_power"] == float(x_power)
    if not ok.any():
        raise UnbendError("no pair of rungs can be fitted to these data; add a start for values of 0 or below.")
    row = t[ok].iloc[0]
    return float(row["y_power"]), float(row["x_power"])


def _with(*pinned):
    extra = [float(p) for p in pinned if p is not None and float(p) not in LADDER]
    return tuple(LADDER) + tuple(extra) if extra else None
