"""Predictions in original units: back-transformed median, bias-corrected mean,
intervals for the line and for a new observation, and the slope in words."""
from __future__ import annotations

import functools
import math

import numpy as np
import pandas as pd
from . import _dist as stats

from ._validation import FEW_ROWS, as_matrix, check_level

__all__ = ["predict", "prediction_columns", "smeared_mean", "smearing_terms", "smearing_effective_terms",
           "normal_theory_mean", "mean_cautions", "slope_reading", "explain", "MEAN_FAR", "MEAN_FEW_SHARE",
           "MEAN_FEW_MIN"]

_CHUNK = 2_000_000  # residual x new-x products per block in the smearing sum

#: "Far above the median": a smearing mean more than this many times the median is flagged.
MEAN_FAR = 3.0
#: "Resting on a few residuals": a smearing mean whose effective number of terms (Kish) is below
#: this share of the rows, or below :data:`MEAN_FEW_MIN`, is flagged.
MEAN_FEW_SHARE = 0.1
MEAN_FEW_MIN = 5


def smeared_mean(fit, eta: np.ndarray) -> np.ndarray:
    """Duan's smearing estimate of the mean in original units at re-expressed fitted values ``eta``.

    ``mean(x) = (1/n) * sum_i g(eta + e_i)`` with ``g`` the inverse
    re-expression and ``e_i`` the residuals of the fit. It needs no
    assumption about the shape of the error distribution.

    References
    ----------
    Duan, N. (1983). Smearing estimate: a nonparametric retransformation
    method. *Journal of the American Statistical Association* 78(383), 605-610.
    """
    t = fit.y_expr
    e = fit._resid
    eta = np.asarray(eta, dtype=float)
    out = np.full(eta.shape, np.nan)
    ok = np.isfinite(eta)
    if t.family == "ladder" and t.power == 0.0:
        base = 10.0 if t.log10 else math.e
        factor = fit._memo.get("smear")
        with np.errstate(over="ignore"):
            if factor is None:
                factor = fit._memo.setdefault("smear", float(np.mean(np.power(base, e))))
            out[ok] = np.power(base, eta[ok]) * factor - t.start
        return out
    if t.family == "ladder" and t.power == 1.0:
        out[ok] = eta[ok] + float(e.mean()) - t.start
        return out
    idx = np.flatnonzero(ok)
    step = max(1, _CHUNK // max(e.size, 1))
    for a in range(0, idx.size, step):
        sel = idx[a:a + step]
        vals = t.invert(eta[sel, None] + e[None, :])  # includes -start
        with np.errstate(invalid="ignore", over="ignore"):
            out[sel] = vals.mean(axis=1)
    return out


def smearing_effective_terms(fit, eta: np.ndarray) -> np.ndarray:
    """How many residuals Duan's smearing mean effectively rests on, at each fitted value ``eta``.

    With ``t_i = g(eta + e_i) + start`` (the terms of the smearing sum, each
    0 or above), this is Kish's effective number ``(sum t_i)^2 / sum t_i^2``:
    ``n`` when every term weighs the same, near 1 when one term carries the
    sum. NaN where it does not apply (raw y, whose mean is the median, and
    Yeo-Johnson, whose terms may be negative) or cannot be computed.

    References
    ----------
    Kish, L. (1965). *Survey Sampling*. Wiley, section 11.7 (effective sample size).
    Duan, N. (1983). *JASA* 78(383), 605-610.
    """
    t = fit.y_expr
    e = fit._resid
    eta = np.asarray(eta, dtype=float)
    out = np.full(eta.shape, np.nan)
    if t.family != "ladder" or t.power == 1.0:
        return out
    ok = np.isfinite(eta)
    with np.errstate(all="ignore"):
        if t.power == 0.0:  # terms proportional to base ** e_i, whatever eta is
            k = fit._memo.get("neff")
            if k is None:
                w = np.power(10.0 if t.log10 else math.e, e - e.max())
                k = fit._memo.setdefault("neff", float(w.sum() ** 2 / (w @ w)))
            out[ok] = k
            return out
        idx = np.flatnonzero(ok)
        step = max(1, _CHUNK // max(e.size, 1))
        for a in range(0, idx.size, step):
            sel = idx[a:a + step]
            v = t.invert(eta[sel, None] + e[None, :]) + t.start
            top = v.max(axis=1, keepdims=True)
            w = v / np.where(top > 0, top, 1.0)
            out[sel] = w.sum(axis=1) ** 2 / np.einsum("ij,ij->i", w, w)
    out[~np.isfinite(out)] = np.nan
    return out


def mean_cautions(fit, eta: np.ndarray, median: np.ndarray, mean: np.ndarray) -> list:
    """For each fitted value, the note for a smearing mean that cannot be trusted ('' when it can).

    Flagged: a mean that is not finite where the median is; a mean more than
    :data:`MEAN_FAR` times the median; a mean resting on a few residuals (an
    effective number of terms below :data:`MEAN_FEW_SHARE` of the rows or
    below :data:`MEAN_FEW_MIN`). Raw y is never flagged: its mean is its median.
    """
    from .wording import mean_caution
    t = fit.y_expr
    n = fit.n
    out = [""] * len(median)
    if t.family == "ladder" and t.power == 1.0:
        return out
    neff = np.asarray(smearing_effective_terms(fit, eta), dtype=float)
    few_below = max(MEAN_FEW_MIN, MEAN_FEW_SHARE * n)
    med = np.asarray(median, dtype=float)
    avg = np.asarray(mean, dtype=float)
    with np.errstate(all="ignore"):
        ratio = np.where(med > 0, avg / np.where(med > 0, med, 1.0), np.nan)
    # the three flags as one code per row; each distinct code is worded once (a spilled table has thousands of rows)
    code = ((~np.isfinite(avg)).astype(np.int8) * 4 + (np.isfinite(ratio) & (ratio > MEAN_FAR)).astype(np.int8) * 2
            + (np.isfinite(neff) & (neff < few_below)).astype(np.int8))
    past_end = t.family == "ladder" and t.power < 0
    words = {int(c): mean_caution(unbounded=bool(c & 4), n=n, far=bool(c & 2), few=bool(c & 1), past_end=past_end)
             for c in np.unique(code)}
    for i in np.flatnonzero(np.isfinite(med)):
        out[i] = words[int(code[i])]
    return out


def smearing_terms(fit):
    """Duan's smearing mean as a short closed form, where one exists.

    Returns
    -------
    ("factor", c)
        for log y: mean = back-transformed median * c (less the start), with
        ``c = mean(base**e_i)``.
    ("moments", (m_0, m_1, ..., m_k))
        for y powers 1/k (raw, square root, cube root, ...): mean =
        sum_j C(k, j) eta**(k-j) m_j - start, with ``m_j = mean(e_i**j)``.
    None
        otherwise (the smearing sum has no short form; use :func:`predict`).
    """
    t = fit.y_expr
    e = fit._resid
    if t.family != "ladder":
        return None
    if t.power == 0.0:
        base = 10.0 if t.log10 else math.e
        return ("factor", float(np.mean(np.power(base, e))))
    p = t.power
    if p > 0 and abs(1.0 / p - round(1.0 / p)) < 1e-9 and round(1.0 / p) <= 4:
        k = int(round(1.0 / p))
        return ("moments", tuple(float(np.mean(e ** j)) for j in range(k + 1)))
    return None


def normal_theory_mean(fit, eta: np.ndarray) -> np.ndarray:
    """Mean in original units assuming normal errors on the re-expressed scale, where it has a closed form.

    log: ``exp(eta + s^2/2)``; powers 1/k (square root, cube root, ...):
    the k-th moment of a normal variable; otherwise NaN (no closed form, or
    the mean does not exist, as for the reciprocal).
    """
    t = fit.y_expr
    with np.errstate(over="ignore"):
        s2 = np.float64(fit.resid_sd) ** 2
    eta = np.asarray(eta, dtype=float)
    if t.family != "ladder":
        return np.full(eta.shape, np.nan)
    p = t.power
    if p == 0.0:
        if t.log10:
            ln10 = math.log(10.0)
            return np.exp(ln10 * eta + 0.5 * ln10 ** 2 * s2) - t.start
        return np.exp(eta + 0.5 * s2) - t.start
    if p > 0 and abs(1.0 / p - round(1.0 / p)) < 1e-9:
        k = int(round(1.0 / p))
        total = np.zeros_like(eta)
        for j in range(0, k + 1, 2):
            dfact = 1.0
            for m in range(j - 1, 0, -2):
                dfact *= m
            total = total + math.comb(k, j) * eta ** (k - j) * s2 ** (j / 2) * dfact
        return total - t.start
    return np.full(eta.shape, np.nan)


@functools.lru_cache(maxsize=256)
def _t_quantile(level: float, df: int) -> float:
    return float(stats.t.ppf(0.5 + level / 2, df))


#: The note for a median below 0 from a line whose y were all 0 or above.
NEGATIVE_MEDIAN = ("the median is below 0, though no y observed is: the line crosses 0 here, which a line on the log "
                   "or a root of y cannot do; this is no usable value")


def _lowest_y(fit) -> float:
    """The smallest y the line was fitted to (a limit for a value below one), or NaN when the fit does not say."""
    res = getattr(fit, "residuals", None)
    if res is None or "y" not in res:
        return np.nan
    y = res["y"].to_numpy(dtype=float)
    y = y[np.isfinite(y)]
    return float(y.min()) if y.size else np.nan


def prediction_columns(fit, new_x, level: float = 0.95) -> dict:
    """The columns of :func:`predict` as a dict of arrays, without building a DataFrame (for speed)."""
    with np.errstate(all="ignore"):  # extreme new x give inf or blank cells with a note, never a warning
        return _prediction_columns(fit, new_x, level)


def _prediction_columns(fit, new_x, level):
    level = check_level(level)
    k = len(fit.x_names)
    X = as_matrix(new_x, "new x")
    if k > 1 and X.shape[1] != k:
        if X.shape[0] == k and X.shape[1] == 1:
            X = X.T
        else:
            from ._validation import UnbendError
            raise UnbendError(f"new x needs {k} columns (one per x in the fit); got {X.shape[1]}.")
    if k == 1 and X.shape[1] != 1:
        X = X.reshape(-1, 1)
    m = X.shape[0]
    with np.errstate(all="ignore"):  # new x far outside the data may overflow: their rows become inf or blank
        Xt = fit.x_expr.apply(X)
        ok = np.isfinite(Xt).all(axis=1)
        Ac = np.column_stack([np.ones(m), (np.where(np.isfinite(Xt), Xt, 0.0) - fit._mu) / fit._sc])
        eta = Ac @ np.concatenate([[fit.coef[0] + fit.coef[1:] @ fit._mu], fit.coef[1:] * fit._sc])
        g = Ac @ fit._Rinv  # se of the line = s * ||row of g||
        se_line = fit.resid_sd * np.sqrt(np.einsum("ij,ij->i", g, g))
        se_new = np.hypot(fit.resid_sd, se_line)
    ok &= np.isfinite(eta) & np.isfinite(X).all(axis=1)  # an infinite x is not a number, even where x**p is
    tq = _t_quantile(level, fit.df_resid)
    eta[~ok] = np.nan
    inv = fit.y_expr.invert

    def ends(half):
        with np.errstate(all="ignore"):
            a, b = inv(eta - tq * half), inv(eta + tq * half)
        return np.fmin(a, b), np.fmax(a, b)

    line_lo, line_hi = ends(se_line)
    lo, hi = ends(se_new)
    outside = ((X < fit.x_min) | (X > fit.x_max)).any(axis=1) & np.isfinite(X).all(axis=1)
    median = inv(eta)
    mean = smeared_mean(fit, eta)
    trust = mean_cautions(fit, eta, median, mean)
    notes = []
    # flags worked out for all rows at once; the loop below only reads plain booleans
    x_ok, med_ok, hi_ok = np.isfinite(X).all(axis=1).tolist(), np.isfinite(median).tolist(), np.isfinite(hi).tolist()
    with np.errstate(invalid="ignore"):
        negative = (median < 0).tolist() if (median < 0).any() and _lowest_y(fit) >= 0 else [False] * m
    for i, (row_ok, out) in enumerate(zip(ok.tolist(), outside.tolist())):
        if not x_ok[i]:
            notes.append("x is not a number")
            continue
        if not row_ok:
            notes.append("x cannot be re-expressed at this power")
            continue
        parts = []
        if out:
            parts.append("outside the observed x range: extrapolation")
        if not med_ok[i]:
            parts.append("no finite value: the line is past the end this y power can reach")
        elif not hi_ok[i]:
            parts.append("the interval has no upper end at this y power")
        if negative[i]:
            parts.append(NEGATIVE_MEDIAN)
        if trust[i]:
            parts.append(trust[i])
        if fit.n < FEW_ROWS:
            parts.append(f"only {fit.n} rows were used: treat with caution")
        notes.append("; ".join(parts))
    cols = {nm: X[:, j] for j, nm in enumerate(fit.x_names)}
    cols.update(fitted=eta, median=median, mean=mean, mean_normal=normal_theory_mean(fit, eta),
                line_low=line_lo, line_high=line_hi, low=lo, high=hi, outside_range=outside, note=notes)
    return cols


def predict(fit, new_x, level: float = 0.95) -> pd.DataFrame:
    """Predict y in original units at new x.

    Parameters
    ----------
    fit : LineFit
    new_x : array_like
        One value, a column, or (for several x columns) a block with one row
        per new point. Non-numbers give a row of blanks with a note.
    level : float
        Level of both intervals.

    Returns
    -------
    pandas.DataFrame
        One row per new x, with columns: the x value(s); ``fitted`` (on the
        re-expressed scale); ``median`` (the back-transformed line); ``mean``
        (Duan's smearing estimate); ``mean_normal`` (normal-theory mean where
        a closed form exists); ``line_low``, ``line_high`` (interval for the
        median); ``low``, ``high`` (prediction interval for one new
        observation); ``outside_range`` (True when a new x is outside the
        observed x range: extrapolation); ``note``.

    Notes
    -----
    Intervals are found on the re-expressed scale with Student's t and
    transformed back end by end; because the re-expression is monotone the
    ends stay exact, and they are put in increasing order. The median is the
    back-transformed line; the mean needs the bias correction because the
    back-transform is not linear (Jensen's inequality).

    References
    ----------
    Duan, N. (1983). *JASA* 78(383), 605-610.
    Miller, D. M. (1984). Reducing transformation bias in curve fitting.
    *The American Statistician* 38(2), 124-126.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> x = np.arange(1.0, 21.0)
    >>> y = np.exp(0.5 + 0.1 * x + np.random.default_rng(5).normal(0, 0.1, 20))
    >>> p = unbend.fit(y, x, y_power=0).predict([5.0, 30.0])
    >>> bool(p["outside_range"].iloc[1])
    True
    """
    return pd.DataFrame(prediction_columns(fit, new_x, level))


def slope_reading(fit) -> str:
    """What each slope means in original units, in plain words (see :func:`unbend.wording.slope_reading`)."""
    from .wording import slope_reading as words
    return words(fit)


def explain(fit) -> str:
    """A few plain sentences about a fit, with cautions (see :func:`unbend.wording.explain`)."""
    from .wording import explain as words
    return words(fit)
