"""Scan every pair of rungs (y rung x x rung) with its checks, best first."""
from __future__ import annotations

import numpy as np
import pandas as pd


from ._validation import UnbendError, as_matrix, as_vector, check_number, check_power, check_varies, usable_rows
from .diagnostics import ALPHA, Check, chi2_sf, make_check, normality_test, pattern_bins, pattern_test, t_two_sided
from .express import LADDER, Reexpression, propose_start, rung_label
from .wording import no_likelihood_words, scan_words
from .power import _rungs
from ._likelihood import dot
from .fitting import fit as _fit, gaussian_loglik_with_jacobian

__all__ = ["scan", "best_pair"]

COLUMNS = ["rank", "y_power", "x_power", "y_rung", "x_rung", "loglik", "curvature_p", "pattern_p", "spread_p",
           "normality_p", "r2", "r2_original", "verdict", "n"]


def _no_likelihood(ty, yu, rss) -> str:
    """Why a pair has no likelihood to rank it by, in a clause (see :func:`unbend.wording.no_likelihood_words`)."""
    with np.errstate(over="ignore"):
        v = yu + ty.start
    has_zero = bool(np.any(v == 0))
    hint = None
    if has_zero:
        try:
            hint = propose_start(v, 0.0) + ty.start
        except UnbendError:
            hint = None
    return no_likelihood_words(has_zero, not rss > 0, hint, ty.start)


def scan(y, x, *, y_start=0.0, x_start=0.0, rungs=None, x_rungs=None, censored=None) -> pd.DataFrame:
    """Fit the line for every pair of rungs and rank them, best first.

    Parameters
    ----------
    y, x : array_like
        x may have several columns; the x rung applies to every column.
    y_start, x_start : float
        Added before re-expressing.
    rungs : sequence of float, optional
        Rungs to try for y, and for x unless ``x_rungs`` is given (default
        the six of the ladder).
    x_rungs : sequence of float, optional
        Rungs to try for x.
    censored : array_like of bool, optional
        True where y is an upper limit; with any True every pair is fitted by
        maximum likelihood with those values censored (R² blank; checks as in
        :func:`unbend.censored.fit_censored`), and ``attrs["n_censored"]`` and
        ``attrs["warnings"]`` say how many and what that means.

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
    Ranking: pairs that could be fitted and have a likelihood come first;
    among them, pairs whose residuals show no curvature (at
    :data:`unbend.diagnostics.ALPHA`, 5%) and no pattern (at
    :data:`unbend.diagnostics.PATTERN_ALPHA`, 1%) come before those that do,
    each group ordered by log-likelihood. Pairs whose likelihood cannot be
    computed (y with a zero at a power below 1, say) follow, with the reason
    in their verdict, and pairs that cannot be fitted come last. R² is shown
    but never used to rank: it cannot be compared across y scales and a high
    R² can hide a bend.

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
    check_varies(yu, "y")
    y_start = check_number(y_start, "y_start")
    x_start = check_number(x_start, "x_start")
    y_rungs = _rungs(rungs)
    x_rungs = _rungs(x_rungs) if x_rungs is not None else y_rungs
    cens = None
    if censored is not None:
        from ._validation import as_censored
        cens = as_censored(censored, yv.size)[rows.used]
        cens = cens if cens.any() else None
    with np.errstate(all="ignore"):  # overflow at extreme powers becomes "not possible", never a crash
        if cens is not None:
            from .censored import censoring_cautions, scan_censored, _limits
            cautions = censoring_cautions(yu.size, int(cens.sum()), _limits(yu, cens))
            out = scan_censored(yu, Xu, cens, y_rungs, x_rungs, y_start, x_start)
        elif Xu.shape[1] == 1:
            out = _scan_one_x(yu, Xu[:, 0], y_rungs, x_rungs, y_start, x_start)
        else:
            out = _scan_general(yu, Xu, y_rungs, x_rungs, y_start, x_start)
    t = pd.DataFrame(out)
    t["_ll"] = t["loglik"].where(np.isfinite(t["loglik"]), -np.inf)
    t["_lik"] = t["_ok"] & np.isfinite(t["_ll"])  # a pair with no likelihood never ranks above one with
    t = t.sort_values(by=["_ok", "_lik", "_curv", "_ll"], ascending=[False, False, False, False], kind="mergesort")
    t = t.reset_index(drop=True)
    if t["_ok"].any():
        best = t.index[0]
        t.loc[best, "verdict"] = "best: " + t.loc[best, "verdict"]
    t["rank"] = np.arange(1, len(t) + 1)
    t["loglik"] = t["loglik"].where(np.isfinite(t["loglik"]), np.nan)
    if rows.skipped:
        t.attrs["skipped"] = rows.skipped
    if cens is not None:
        t.attrs["n_censored"] = int(cens.sum())
        t.attrs["warnings"] = tuple(cautions)
    return t[COLUMNS]


def _impossible(rec, why):
    rec.update(loglik=np.nan, curvature_p=np.nan, pattern_p=np.nan, spread_p=np.nan, normality_p=np.nan,
               r2=np.nan, r2_original=np.nan, verdict=f"not possible: {why}", _ok=False, _curv=False)
    return rec


def _record(rec, *, loglik, curvature, pattern, spread, normality, r2, r2_original, no_lik=""):
    words = scan_words(curvature, pattern, spread, likelihood_why="" if np.isfinite(loglik) else no_lik,
                       r2_original=r2_original)
    rec.update(loglik=loglik, curvature_p=curvature.pvalue, pattern_p=pattern.pvalue, spread_p=spread.pvalue,
               normality_p=normality.pvalue, r2=r2, r2_original=r2_original, verdict=words, _ok=True,
               _curv=curvature.passed is not False and pattern.passed is not False)
    return rec


def _scan_one_x(yu, xu, y_rungs, x_rungs, y_start, x_start):
    """One x column: each rung's columns once, then each pair by a few passes over the data.

    Gives the same numbers as :func:`unbend.fit` (the tests hold it to that):
    with one x, the squared fitted value in Tukey's test spans the same
    column as the squared re-expressed x, and the pattern bins follow x.
    """
    n = yu.size
    bins = pattern_bins(xu)
    xs = {}
    for px in x_rungs:
        t = Reexpression(px, x_start)
        err = _domain(t, xu, "x")
        if err:
            xs[px] = err
            continue
        xt = t.apply(xu)
        c = xt - xt.mean()
        sxx = dot(c, c)
        if not np.isfinite(sxx) or sxx <= 0 or (xt.max() == xt.min()):
            xs[px] = "x does not vary at this power"
            continue
        q2 = c / np.sqrt(sxx)
        w = (c / c.std()) ** 2
        w = w - w.mean()
        w = w - dot(w, q2) * q2
        nw = float(np.sqrt(dot(w, w)))
        q3 = w / nw if nw > 1e-10 * np.sqrt(n) else None
        xs[px] = (xt, q2, q3)
    out = []
    for py in y_rungs:
        ty = Reexpression(py, y_start)
        y_err = _domain(ty, yu, "y")
        if not y_err:
            yt_raw = ty.apply(yu)
            ybig = float(np.max(np.abs(yt_raw)))
            ybig = ybig if ybig > 0 and np.isfinite(ybig) else 1.0
            yt = yt_raw / ybig  # sums in scaled units, as fit() does
            ybar = yt.mean()
            yc = yt - ybar
            tss = dot(yc, yc)
            with np.errstate(divide="ignore"):
                jac = float(np.sum(np.log(np.abs(ty.derivative(yu)))))
            ub = float(np.max(np.abs(yu)))
            ub = ub if ub > 0 and np.isfinite(ub) else 1.0
            dy = (yu - yu.mean()) / ub  # scaled: no overflow at extreme scales
            tss_orig = dot(dy, dy)
        for px in x_rungs:
            rec = {"y_power": py, "x_power": px, "y_rung": rung_label(py), "x_rung": rung_label(px), "n": int(n)}
            xi = xs[px]
            if y_err or isinstance(xi, str):
                out.append(_impossible(rec, y_err or xi))
                continue
            if not np.all(np.isfinite(yt)):
                out.append(_impossible(rec, "y overflows at this power"))
                continue
            xt, q2, q3 = xi
            with np.errstate(all="ignore"):
                b = dot(q2, yc)
                resid = yc - b * q2
                rss = dot(resid, resid)
            if not (np.isfinite(rss) and np.isfinite(tss)):
                out.append(_impossible(rec, "values too large at this power; rescale the data"))
                continue
            _pair_checks(out, rec, n, ty, yu, yt, resid, rss, tss, tss_orig, jac, q2, q3, bins, ybig)
    return out


def _pair_checks(out, rec, n, ty, yu, yt, resid, rss, tss, tss_orig, jac, q2, q3, bins, ybig):
    """The checks of one pair of rungs (one x column), appended to ``out``; yt, resid, rss, tss are
    in units of ``ybig``."""
    with np.errstate(all="ignore"):
        fitted = yt - resid
        # Tukey's one degree of freedom: the squared column, orthogonal to the line
        if q3 is None or n < 5:
            curv = Check("Tukey one-degree-of-freedom", np.nan, np.nan, None, 0.0)
        else:
            c3 = dot(q3, resid)
            df3 = n - 3
            rss3 = rss - c3 * c3
            if rss3 <= 0:
                tv, pv = (np.inf if c3 else 0.0), (0.0 if c3 else 1.0)
            else:
                tv = c3 / np.sqrt(rss3 / df3)
                pv = t_two_sided(tv, df3)
            curv = make_check("Tukey one-degree-of-freedom", tv, pv, ALPHA, np.sign(c3))
        pat = pattern_test(resid, bins)
        # Breusch-Pagan, Koenker's form, one x column
        if n < 4:
            spr = Check("Breusch-Pagan (Koenker)", np.nan, np.nan, None, 0.0)
        else:
            top = float(np.max(np.abs(resid)))
            e2 = (resid / top) ** 2 if top > 0 and np.isfinite(top) else resid * resid  # scaled: no underflow
            d = e2 - e2.mean()
            dd = dot(d, d)
            if not np.isfinite(dd):
                spr = Check("Breusch-Pagan (Koenker)", np.nan, np.nan, None, 0.0)
            elif dd == 0:
                spr = Check("Breusch-Pagan (Koenker)", 0.0, 1.0, True, 0.0)
            else:
                lm = n * np.float64(dot(q2, d)) ** 2 / dd
                pv = chi2_sf(lm, 1)
                ar = np.abs(resid)
                cc = dot(ar - ar.mean(), q2)  # fitted = mean + b q2: its sign follows b
                spr = make_check("Breusch-Pagan (Koenker)", lm, pv, ALPHA, np.sign(cc * dot(q2, yt)))
        nor = normality_test(resid)
        with np.errstate(invalid="ignore", over="ignore"):
            back = ty.invert(fitted * ybig)
            ub = float(np.max(np.abs(yu)))
            ub = ub if ub > 0 and np.isfinite(ub) else 1.0
            r2o = 1.0 - float((((yu - back) / ub) ** 2).sum()) / tss_orig if tss_orig > 0 else np.nan
            if not np.isfinite(r2o):
                r2o = np.nan
        r2 = 1.0 - rss / tss if tss > 0 else np.nan
        ll = gaussian_loglik_with_jacobian(rss, n, jac, log_scale=2.0 * np.log(ybig))
        out.append(_record(rec, loglik=ll, curvature=curv, pattern=pat, spread=spr, normality=nor,
                           r2=r2, r2_original=r2o, no_lik="" if np.isfinite(ll) else _no_likelihood(ty, yu, rss)))


def _scan_general(yu, Xu, y_rungs, x_rungs, y_start, x_start):
    out = []
    for py in y_rungs:
        y_err = _domain(Reexpression(py, y_start), yu, "y")
        for px in x_rungs:
            rec = {"y_power": py, "x_power": px, "y_rung": rung_label(py), "x_rung": rung_label(px),
                   "n": int(yu.size)}
            err = y_err or _domain(Reexpression(px, x_start), Xu.ravel(), "x")
            if err:
                out.append(_impossible(rec, err))
                continue
            try:
                f = _fit(yu, Xu, y_power=py, x_power=px, y_start=y_start, x_start=x_start)
            except UnbendError as e:
                out.append(_impossible(rec, str(e)))
                continue
            no_lik = "" if np.isfinite(f.loglik) else _no_likelihood(f.y_expr, yu, f.resid_sd)
            out.append(_record(rec, loglik=f.loglik, curvature=f.curvature, pattern=f.pattern, spread=f.spread,
                               normality=f.normality, r2=f.r2, r2_original=f.r2_original, no_lik=no_lik))
    return out


def _domain(t: Reexpression, v: np.ndarray, name: str) -> str:
    try:
        t.check(v, name)
    except UnbendError as e:
        msg = str(e)
        return msg.split(";")[0] + f"; a start of {getattr(e, 'proposed_start', 0):g} would allow it"
    return ""


def best_pair(y, x, *, y_start=0.0, x_start=0.0, rungs=None, y_power=None, x_power=None, table=None,
              censored=None):
    """The pair of rungs to use when the user has not pinned them.

    With neither power given, the pair the scan ranks first. With one of
    them pinned, the best-ranked scan row that has the pinned power.

    ``table`` may be a scan already made of the same data and starts;
    ``censored`` is passed to :func:`scan`.

    Returns
    -------
    (y_power, x_power) : tuple of float
    """
    y_power = None if y_power is None else check_power(y_power, "y_power")
    x_power = None if x_power is None else check_power(x_power, "x_power")
    base = _rungs(rungs)
    y_r = base + ((y_power,) if y_power is not None and y_power not in base else ())
    x_r = base + ((x_power,) if x_power is not None and x_power not in base else ())
    t = table if table is not None else scan(y, x, y_start=y_start, x_start=x_start, rungs=y_r, x_rungs=x_r,
                                             censored=censored)
    pinned = np.ones(len(t), dtype=bool)
    if y_power is not None:
        pinned &= (t["y_power"] == y_power).to_numpy()
    if x_power is not None:
        pinned &= (t["x_power"] == x_power).to_numpy()
    ok = pinned & ~t["verdict"].str.startswith("not possible").to_numpy()
    if not ok.any():
        cand = t[pinned] if pinned.any() else t
        why = cand["verdict"].iloc[0].replace("not possible: ", "") if len(cand) else "no rows"
        raise UnbendError(f"no pair of rungs can be fitted to these data ({why.rstrip('.')}); "
                          "pin other powers, add a start, or check the data.")

    row = t[ok].iloc[0]
    return float(row["y_power"]), float(row["x_power"])


