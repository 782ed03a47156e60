"""Values below a limit ("<0.5"): the line by maximum likelihood with those values censored.

A value reported as below a limit ``L`` tells us only that the true value is
somewhere below ``L``. On the re-expressed scale ``z = g(y)`` the line is
``z = b0 + b1 x + e`` with ``e ~ N(0, sigma^2)``; a measured row contributes
its density (with the Jacobian ``|g'(y)|``, so that likelihoods at different
powers of y compare), a censored row the probability ``Phi((g(L) - mu) / sigma)``
of lying below its limit. Dropping censored rows biases the line upward and
moves the chosen power; substituting half the limit biases slopes and spreads
(Helsel 2005). This module holds the likelihood, its maximisation, the checks
that still make sense with censored values, the censored versions of the
power profiles and the scan, and predictions from a censored fit.

References
----------
Tobin, J. (1958). Estimation of relationships for limited dependent
variables. *Econometrica* 26(1), 24-36.
Amemiya, T. (1973). Regression analysis when the dependent variable is
truncated normal. *Econometrica* 41(6), 997-1016.
Olsen, R. J. (1978). Note on the uniqueness of the maximum likelihood
estimator for the Tobit model. *Econometrica* 46(5), 1211-1215.
Helsel, D. R. (2005). *Nondetects and Data Analysis: Statistics for
Censored Environmental Data*. Wiley.
Chesher, A. and Irish, M. (1987). Residual analysis in the grouped and
censored normal linear model. *Journal of Econometrics* 34(1-2), 33-61.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
from scipy import linalg, special

from . import _dist as stats

from ._validation import FEW_ROWS, UnbendError, as_censored, as_matrix, as_vector, check_level, usable_rows
from .diagnostics import ALPHA, PATTERN_ALPHA, Check, make_check, normality_test, pattern_bins, verdict
from .express import Reexpression
from .fitting import CAUTION, VIF_WARN, LineFit, _design, _names, _word

__all__ = ["CensoredFit", "CensoredMean", "fit_censored", "censored_mean", "half_limit", "censoring_cautions",
           "predict_censored", "normal_mean", "suggest_power_censored", "suggest_x_power_censored",
           "MOSTLY_CENSORED", "TOO_CENSORED"]

#: Above this share of censored values the line rests mostly on the limits (common practice).
MOSTLY_CENSORED = 0.5
#: Above this share the line is refused (common practice: too little is measured to fit a line).
TOO_CENSORED = 0.8

_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)


# ============================================================================ the likelihood
class _Split:
    """A design split once into its measured (u) and censored (c) rows; reused across powers of y."""

    def __init__(self, A: np.ndarray, cens: np.ndarray):
        self.A, self.cens = A, cens
        self.Au, self.Ac = A[~cens], A[cens]
        self.nu = self.Au.shape[0]
        self.p = A.shape[1]
        self.AuAu = self.Au.T @ self.Au


class _Problem:
    """The censored normal line on a standardised scale: measured rows (u) and censored rows (c).

    Parameters are ``theta = (b, tau)`` with ``b`` the coefficients of the
    columns of ``A`` and ``tau = log sigma``. ``z`` holds the value of a
    measured row and the (re-expressed) limit of a censored row.
    """

    def __init__(self, A, z: np.ndarray, cens: np.ndarray | None = None):
        sp = A if isinstance(A, _Split) else _Split(A, cens)
        self.split = sp
        self.A, self.cens, self.Au, self.Ac, self.nu, self.p, self.AuAu = (
            sp.A, sp.cens, sp.Au, sp.Ac, sp.nu, sp.p, sp.AuAu)
        self.z, self.zu, self.zc = z, z[~sp.cens], z[sp.cens]

    def derivs(self, theta: np.ndarray, hessian: bool = True):
        """Log-likelihood, gradient and Hessian (analytic) at ``theta``."""
        b, tau = theta[:-1], theta[-1]
        s = math.exp(-tau)
        ru = (self.zu - self.Au @ b) * s
        c = (self.zc - self.Ac @ b) * s
        lphi = special.log_ndtr(c)
        sru2 = float(np.einsum("i,i->", ru, ru))
        ll = float(-self.nu * (_HALF_LOG_2PI + tau) - 0.5 * sru2 + lphi.sum())
        if not hessian:
            return ll, None, None
        h = np.exp(-0.5 * c * c - _HALF_LOG_2PI - lphi)  # inverse Mills ratio phi(c) / Phi(c), stable in the tail
        k = h * (c + h)  # minus the second derivative of log Phi(c)
        p = self.p
        g = np.empty(p + 1)
        g[:p] = (self.Au.T @ ru - self.Ac.T @ h) * s
        g[p] = -self.nu + sru2 - float(h @ c)
        H = np.empty((p + 1, p + 1))
        H[:p, :p] = -(self.AuAu + (self.Ac.T * k) @ self.Ac) * (s * s)
        H[:p, p] = H[p, :p] = (self.Au.T @ (-2.0 * ru) + self.Ac.T @ (h - k * c)) * s
        H[p, p] = -2.0 * sru2 + float(c @ (h - k * c))
        return ll, g, H

    def loglik(self, theta: np.ndarray) -> float:
        return self.derivs(theta, hessian=False)[0]

    def start(self) -> np.ndarray:
        """Least squares on the measured rows (all rows, limits as values, when they are too few)."""
        A, z = (self.Au, self.zu) if self.nu >= self.p + 1 else (self.A, self.z)
        b, *_ = np.linalg.lstsq(A, z, rcond=None)
        r = z - A @ b
        sd = math.sqrt(float(r @ r) / max(z.size - self.p, 1))
        return np.concatenate([b, [math.log(sd if sd > 1e-3 else 1e-3)]])


class _NoMaximum(Exception):
    """The likelihood has no finite maximum (or it could not be found)."""


class _Unbounded(_NoMaximum):
    """The measured values lie on the line (to rounding) and the limits allow it: the likelihood rises
    without bound as sigma shrinks. ``theta`` is where the search stopped (log sigma at the floor)."""

    def __init__(self, theta):
        super().__init__()
        self.theta = theta


#: log sigma (standardised units) below which the likelihood is taken as unbounded: sigma below 1.4e-11 of
#: the spread of the data, a line exact to about 11 digits (near that floor the maximum, if any, sits at
#: the rounding of the values and Newton's steps crawl)
_TAU_FLOOR = -25.0


def _maximise(prob: _Problem, theta0: np.ndarray, maxit: int = 200):
    """Newton's method with Levenberg-Marquardt damping: (theta, loglik, Hessian, iterations).

    The damping only acts far from the maximum (where the Hessian in
    ``(b, log sigma)`` need not be negative definite); every accepted step
    raises the likelihood, and near the maximum the steps are plain Newton
    steps (quadratic convergence). Each trial point is evaluated with its
    gradient and Hessian at once, since nearly every step is accepted.
    """
    theta = np.array(theta0, dtype=float)
    with np.errstate(all="ignore"):
        ll, g, H = prob.derivs(theta)
    if not (np.isfinite(ll) and np.all(np.isfinite(g)) and np.all(np.isfinite(H))):
        raise _NoMaximum
    lam = 0.0
    for it in range(1, maxit + 1):
        negH = -H
        dg = np.abs(np.diag(negH))
        dg = np.maximum(dg, max(float(dg.max()), 1e-300) * 1e-12)  # Marquardt: damp each coordinate by its scale
        for _ in range(60):
            M = negH + np.diag(lam * dg) if lam else negH
            try:
                step = linalg.cho_solve(linalg.cho_factor(M, lower=True, check_finite=False), g,
                                        check_finite=False)
            except (linalg.LinAlgError, ValueError):
                lam = max(lam * 10.0, 1e-8)
                continue
            if abs(step[-1]) > 5.0:  # never move log sigma by more than 5 at once
                step = step * (5.0 / abs(step[-1]))
            new = theta + step
            with np.errstate(all="ignore"):
                out = prob.derivs(new)
            if (np.isfinite(out[0]) and out[0] >= ll - 1e-12 * max(1.0, abs(ll)) and np.all(np.isfinite(out[1]))
                    and np.all(np.isfinite(out[2]))):
                break
            lam = max(lam * 10.0, 1e-8)
        else:
            raise _NoMaximum
        small = float(np.max(np.abs(step))) < 1e-8 and lam == 0.0  # the point just reached is then ~1e-16 off
        theta = new
        ll, g, H = out
        if theta[-1] < _TAU_FLOOR:
            raise _Unbounded(theta)
        lam = lam / 10.0 if lam > 1e-7 else 0.0
        if small:
            break
    else:
        raise _NoMaximum
    return theta, ll, H, it


def _solve(prob: _Problem, warm: np.ndarray | None = None):
    """Maximise from a warm start (the previous power's answer) if given, else from least squares."""
    if warm is not None:
        try:
            return _maximise(prob, warm)
        except _Unbounded:
            raise
        except _NoMaximum:
            pass
    return _maximise(prob, prob.start())


def _information_inverse(H: np.ndarray) -> np.ndarray:
    """Inverse of the observed information -H; UnbendError if it is not positive definite."""
    try:
        c = linalg.cho_factor(-H, lower=True)
        return linalg.cho_solve(c, np.eye(H.shape[0]))
    except (linalg.LinAlgError, ValueError):
        raise UnbendError("the censored likelihood has no clear maximum (its curvature is not negative at the "
                          "top); there are too few measured values or the x values of the measured rows barely "
                          "vary. Check the data or the limits.") from None


def _standardise(z: np.ndarray):
    """(z - centre) / scale with the centre and scale; UnbendError when z does not vary or overflows."""
    with np.errstate(all="ignore"):
        big = float(np.max(np.abs(z)))
        if not np.isfinite(big):
            raise UnbendError("some values overflow at this power (too large to re-express); choose a power "
                              "nearer 1 or rescale the data.")
        big = big if big > 0 else 1.0
        zb = z / big
        z0 = float(zb.mean())
        sd = float(zb.std())
    if not sd > 0:
        raise UnbendError("y does not vary at this power (every re-expressed y and limit is the same); choose "
                          "another power or check the data.")
    return (zb - z0) / sd, z0 * big, sd * big


# ============================================================================ checks
class _RowWeights:
    """Per-row pieces of the gradient and Hessian at the censored maximum, in the original row order.

    For a column ``a`` of the line and ``w`` of log sigma, the extended
    Hessian blocks are ``a' diag(mm) a'``, ``a' diag(ms) w``, ``w' diag(ss) w``
    and the scores ``a' gm`` and ``w' gs``.
    """

    def __init__(self, prob: _Problem, theta: np.ndarray):
        cens = prob.cens
        b, tau = theta[:-1], theta[-1]
        s = math.exp(-tau)
        r = (prob.z - prob.A @ b) * s
        c = r[cens]
        h = np.exp(-0.5 * c * c - _HALF_LOG_2PI - special.log_ndtr(c))
        k = h * (c + h)
        self.mm = np.full(r.size, -s * s)
        self.mm[cens] = -k * (s * s)
        self.ms = -2.0 * r * s
        self.ms[cens] = (h - k * c) * s
        self.ss = -2.0 * r * r
        self.ss[cens] = c * (h - k * c)
        self.gm = r * s
        self.gm[cens] = -h * s
        self.gs = r * r - 1.0
        self.gs[cens] = -h * c


def _wdot(M: np.ndarray, w: np.ndarray, N: np.ndarray) -> np.ndarray:
    """M' diag(w) N."""
    return (M.T * w) @ N


def _score_test(prob: _Problem, H: np.ndarray, wts: _RowWeights, E: np.ndarray | None = None,
                V: np.ndarray | None = None):
    """Score (Lagrange multiplier) test of extra columns at the censored maximum.

    ``E``: columns added to the line (coefficients 0 under the fit);
    ``V``: columns added to log sigma (log sigma = tau + V gamma, gamma 0
    under the fit); one of them. The statistic is ``g' (-H)^-1 g`` over the
    extended parameters, with the score ``g`` of the added parameters and the
    observed information of the extended model, all at the fitted parameters
    (``H`` is the fit's own Hessian in (b, log sigma)).

    Returns
    -------
    (statistic, df, direction) with direction the one-step estimate of the added
    parameters; None when the information is not positive definite.
    """
    A = prob.A
    p1 = H.shape[0]
    if E is not None:  # order: b, tau, e
        cross = np.vstack([_wdot(A, wts.mm, E), (wts.ms @ E)[None, :]])
        corner = _wdot(E, wts.mm, E)
        score = E.T @ wts.gm
    else:  # order: b, tau, gamma
        cross = np.vstack([_wdot(A, wts.ms, V), (wts.ss @ V)[None, :]])
        corner = _wdot(V, wts.ss, V)
        score = V.T @ wts.gs
    q = corner.shape[0]
    Hx = np.empty((p1 + q, p1 + q))
    Hx[:p1, :p1] = H
    Hx[:p1, p1:] = cross
    Hx[p1:, :p1] = cross.T
    Hx[p1:, p1:] = corner
    g = np.zeros(p1 + q)
    g[p1:] = score
    try:
        step = linalg.cho_solve(linalg.cho_factor(-Hx, lower=True), g)
    except (linalg.LinAlgError, ValueError):
        return None
    stat = float(g @ step)
    if not np.isfinite(stat):
        return None
    return max(stat, 0.0), q, step[p1:]


def _checks(prob: _Problem, theta: np.ndarray, H: np.ndarray, key: np.ndarray, k: int,
            single_limit: float | None, z_limit: float | None):
    """Curvature, pattern, spread and normality checks that hold with censored values.

    Curvature (Tukey's squared fitted value), pattern (bins of x, or of the
    fitted value with several x) and spread (log sigma linear in the x
    columns, the model behind Breusch-Pagan) are score tests in the censored
    likelihood, so every row counts and no residual of a censored row is
    needed. Normality: the measured rows, each taken through the normal
    distribution cut off at the limit (with one common limit the measured
    values are those above it), then Shapiro-Wilk (D'Agostino-Pearson above
    5,000 rows); not run when the limits differ (a measured row's own limit
    is then unknown).
    """
    n, p = prob.A.shape
    fitted = prob.A @ theta[:-1]
    wts = _RowWeights(prob, theta)
    name_c = "Tukey one-degree-of-freedom (score test, censored likelihood)"
    curv = Check(name_c, np.nan, np.nan, None, 0.0)
    f = fitted - fitted.mean()
    sd = float(f.std())
    if n >= p + 3 and sd > 0:
        q = (f / sd) ** 2
        res = _score_test(prob, H, wts, E=(q - q.mean())[:, None])
        if res is not None:
            st, df, d = res
            curv = make_check(name_c, st, stats.chi2.sf(st, df), ALPHA, np.sign(d[0]))
    name_p = ("bins of x" if k == 1 else "bins of the fitted value") + " (score test, censored likelihood)"
    pat = Check(name_p, np.nan, np.nan, None, 0.0)
    if n >= 12:
        bins = pattern_bins(key)
        used = np.unique(bins)
        if used.size >= 2:
            E = (bins[:, None] == used[None, 1:]).astype(float)
            res = _score_test(prob, H, wts, E=E)
            if res is not None:
                st, df, _ = res
                pat = make_check(name_p, st, stats.chi2.sf(st, df), PATTERN_ALPHA)
    name_s = "log SD on x (score test, censored likelihood)"
    spr = Check(name_s, np.nan, np.nan, None, 0.0)
    if n >= (p - 1) + 3:
        V = prob.A[:, 1:]
        res = _score_test(prob, H, wts, V=V)
        if res is not None:
            st, df, d = res
            lv = V @ d
            direction = float(np.sign((lv - lv.mean()) @ f))
            spr = make_check(name_s, st, stats.chi2.sf(st, df), ALPHA, direction)
    nor = _normality(prob, theta, fitted, single_limit, z_limit)
    return curv, pat, spr, nor


def _line_checks(core, y_t, yu, Xu, cens, limits):
    """The four checks of a censored line and a sentence on how they were made."""
    k = core.prob.p - 1
    key = Xu[:, 0] if k == 1 else core.prob.A @ core.theta[:-1]
    single = limits[0] if len(limits) == 1 and np.all(yu[~cens] >= limits[0]) else None
    z_lim = None if single is None else (float(y_t.apply(np.array([single]))[0]) - core.z0) / core.zsc
    curv, pat, spr, nor = _checks(core.prob, core.theta, core.H, key, k, single, z_lim)
    note = ("With censored values the curvature, pattern and spread checks are score tests in the censored "
            "likelihood (all rows count); the normality check uses the measured rows, cut off at the limit"
            + ("." if single is not None else " (not run here: the limits differ, or a measured value is below "
                                              "the limit)."))
    return curv, pat, spr, nor, note


def _normality(prob, theta, fitted, single_limit, z_limit) -> Check:
    cens = prob.cens
    nu = prob.nu
    if single_limit is None or z_limit is None:
        return Check("normality (not run: the limits differ, or a measured value is below the limit, so the "
                     "cut-off of each measured value is unknown)", np.nan, np.nan, None, 0.0)
    sigma = math.exp(theta[-1])
    r = (prob.zu - fitted[~cens]) / sigma
    cl = (z_limit - fitted[~cens]) / sigma
    with np.errstate(all="ignore"):
        ratio = np.exp(special.log_ndtr(-r) - special.log_ndtr(-cl))  # P(above the value | above the limit)
        w = -special.ndtri(np.clip(ratio, 1e-300, 1.0 - 1e-16))
    chk = normality_test(w)
    label = f"{chk.name} on the {nu} measured rows, cut off at the limit"
    return Check(label, chk.statistic, chk.pvalue, chk.passed, chk.direction)


# ============================================================================ the fit result
@dataclass(frozen=True)
class CensoredFit(LineFit):
    """A straight line fitted by maximum likelihood with values below a limit censored.

    Everything a :class:`LineFit` has, read as follows: ``coef`` are the
    maximum-likelihood coefficients; ``se`` the standard errors from the
    observed information, scaled by ``sqrt(n / (n - p))``; ``tvalues``,
    ``pvalues``, ``ci_low`` and ``ci_high`` use Student's t on ``n - p``
    degrees of freedom, as the prediction intervals do; ``resid_sd`` is
    ``sigma * sqrt(n / (n - p))`` (the spread the intervals use); ``r2``,
    ``adj_r2`` and ``r2_original`` are NaN (not defined with censored
    values); ``loglik`` is in the units of y (Jacobian of the measured rows);
    the residual table has NaN residuals for censored rows and a
    ``censored`` column. With nothing censored all of these equal the
    least-squares numbers.

    Attributes
    ----------
    n_censored : int
        Rows whose y is an upper limit.
    sigma : float
        Maximum-likelihood SD of the errors on the re-expressed scale.
    limits : tuple of float
        The distinct limits of the censored rows (original units), lowest first.
    cov : ndarray
        Covariance of ``coef`` used by the intervals (observed information x n/(n-p)).
    cov_information : ndarray
        Inverse observed information of (coef, log sigma), unscaled.
    checks_note : str
        How the checks were made with censored values.
    method : str
    iterations : int
        Newton steps taken.
    """

    n_censored: int = 0
    sigma: float = float("nan")
    limits: tuple = ()
    cov: np.ndarray = field(default=None, repr=False, compare=False)
    cov_information: np.ndarray = field(default=None, repr=False, compare=False)
    checks_note: str = ""
    method: str = ""
    iterations: int = 0

    @property
    def lowest_limit(self) -> float:
        return float(self.limits[0]) if self.limits else float("nan")

    @property
    def share_censored(self) -> float:
        return self.n_censored / self.n if self.n else float("nan")

    def predict(self, new_x, level: float = 0.95) -> pd.DataFrame:
        """Predictions in original units from the censored fit; see :func:`predict_censored`."""
        return predict_censored(self, new_x, level=level)

    def explain(self) -> str:
        """The sentences of :meth:`LineFit.explain`, then how the censored values were used and their cautions."""
        from .predicting import explain
        cautions = [w for w in self.warnings if "below a limit" in w or "different limits" in w]
        return " ".join([explain(self), f"Fitted by maximum likelihood with {self.n_censored} of {self.n} values "
                         "below a limit treated as censored (neither dropped nor replaced by a guess)."] + cautions)

    def rows(self) -> list[tuple[str, object]]:
        """Labelled rows (label, value) summarising the censored fit, for a two-column table."""
        pct = f"{self.level * 100:g}%"
        out: list[tuple[str, object]] = [
            ("method", self.method),
            ("y re-expressed as", self.y_expr.label), ("y power", self.y_power), ("y start", self.y_expr.start),
            ("x re-expressed as", self.x_expr.label), ("x power", self.x_power), ("x start", self.x_expr.start),
        ]
        for i, nm in enumerate(self.names):
            out += [(f"{nm}", self.coef[i]), (f"{nm}: std error", self.se[i]),
                    (f"{nm}: t", self.tvalues[i]), (f"{nm}: p", self.pvalues[i]),
                    (f"{nm}: {pct} low", self.ci_low[i]), (f"{nm}: {pct} high", self.ci_high[i])]
        out += [
            ("SD of the errors, maximum likelihood (re-expressed scale)", self.sigma),
            ("SD used for intervals, x sqrt(n/(n-p)) (re-expressed scale)", self.resid_sd),
            ("rows used", self.n),
            ("values below a limit (censored)", self.n_censored),
            ("measured values", self.n - self.n_censored),
            ("lowest limit", self.lowest_limit),
            ("highest limit", float(self.limits[-1]) if self.limits else float("nan")),
            ("rows skipped", self.n_skipped),
            (f"curvature check p ({self.curvature.name})", self.curvature.pvalue),
            ("curvature check", _word(self.curvature, "no clear curvature", "residuals curve")),
            (f"pattern check p ({self.pattern.name})", self.pattern.pvalue),
            ("pattern check", _word(self.pattern, "no drift with level", "residuals drift with level")),
            (f"spread check p ({self.spread.name})", self.spread.pvalue),
            ("spread check", _word(self.spread, "even spread", "spread changes")),
            (f"normality check p ({self.normality.name})", self.normality.pvalue),
            ("checks with censored values", self.checks_note),
            ("verdict", self.verdict),
            ("slope in original units", self.slope_reading()),
        ]
        for w in self.warnings:
            out.append(("warning", w))
        out.append(("caution", CAUTION))
        return out


def censoring_cautions(n: int, n_censored: int, limits) -> list[str]:
    """Cautions about censoring (common practice); UnbendError above 80% censored.

    Above about half censored the line rests mostly on the limits; above 80%
    it is refused; several different limits are said.
    """
    out = []
    share = n_censored / n if n else 0.0
    if share > TOO_CENSORED:
        raise UnbendError(
            f"{n_censored} of {n} values ({share:.0%}) are below a limit. Above {TOO_CENSORED:.0%} censored, too "
            "little is measured to estimate a line and its spread (common practice); use the count of values "
            "above the limit instead, or check whether a more sensitive method (a lower limit) can measure them.")
    if share > MOSTLY_CENSORED:
        out.append(f"{n_censored} of {n} values ({share:.0%}) are below a limit: the line rests mostly on the "
                   "limits rather than on measured values; treat it as a rough guide.")
    if len(limits) > 1:
        out.append(f"The censored values have {len(limits)} different limits ({limits[0]:.4g} to {limits[-1]:.4g}); "
                   "each censored value is taken as lying anywhere below its own limit. Check that each limit is "
                   "the one reported with its value.")
    return out


def _limits(yu: np.ndarray, cens: np.ndarray) -> tuple:
    return tuple(float(v) for v in np.unique(yu[cens]))


def _need_measured(n_meas: int, p: int):
    need = p + 2
    if n_meas < need:
        raise UnbendError(f"only {n_meas} value(s) are measured (not below a limit); a censored line with {p - 1} "
                          f"x column(s) needs at least {need}.")


@dataclass(frozen=True)
class _Core:
    """The maximised censored likelihood of one line (internal)."""

    prob: _Problem
    theta: np.ndarray
    ll_scaled: float
    H: np.ndarray
    iterations: int
    z0: float
    zsc: float
    mu: np.ndarray
    sc: np.ndarray
    Xt: np.ndarray
    zt: np.ndarray

    @property
    def loglik_z(self) -> float:
        """Log-likelihood in the units of the re-expressed y."""
        return self.ll_scaled - self.prob.nu * math.log(self.zsc)


def _core(zt: np.ndarray, Xt: np.ndarray | None, cens: np.ndarray, warm=None) -> _Core:
    if Xt is None:
        A, mu, sc = np.ones((zt.size, 1)), np.zeros(0), np.zeros(0)
    else:
        A, mu, sc = _design(Xt)
        Q, R = np.linalg.qr(A[~cens])
        d = np.abs(np.diag(R))
        if d.min() <= d.max() * 1e-10:
            raise UnbendError("the x columns are collinear among the measured rows (one is a combination of the "
                              "others, or x barely varies where values were measured); remove a column.")
    zs, z0, zsc = _standardise(zt)
    prob = _Problem(A, zs, cens)
    try:
        with np.errstate(all="ignore"):
            theta, ll, H, it = _solve(prob, warm)
    except _NoMaximum:
        raise UnbendError("the censored likelihood has no maximum: the measured values lie on an exact line and "
                          "the limits allow it, or the values are too extreme. Check the data and the limits.") from None
    return _Core(prob, theta, ll, H, it, z0, zsc, mu, sc, Xt, zt)


def fit_censored(y, x, censored, *, y_power=1.0, x_power=1.0, y_start=0.0, x_start=0.0, level=0.95,
                 log10=False, y_family="ladder", x_names=None, y_name=None) -> CensoredFit:
    """Fit the straight line of re-expressed y on re-expressed x with values below a limit censored.

    The same as :func:`unbend.fit` with ``censored=``; use that.

    Parameters
    ----------
    y : array_like
        Response; where ``censored`` is True, y holds the limit (the value is below it).
    x : array_like
        One column, or a block with one column per predictor.
    censored : array_like of bool
        True where y is an upper limit ("below this value").
    y_power, x_power, y_start, x_start, level, log10, x_names, y_name
        As for :func:`unbend.fit`.

    Returns
    -------
    CensoredFit

    Notes
    -----
    Maximum likelihood with normal errors on the re-expressed scale: a
    measured row contributes ``log phi(r) - log sigma + log|g'(y)|``, a
    censored row ``log Phi((g(L) - mu) / sigma)`` (``scipy.special.log_ndtr``,
    accurate far into the tail). Newton's method with the analytic gradient
    and Hessian in ``(b, log sigma)`` on centred, scaled columns, started from
    least squares on the measured rows; the log-likelihood is concave in
    Olsen's (1978) parameters, so the maximum is unique. Standard errors come
    from the observed information; they and the residual SD are multiplied by
    ``sqrt(n / (n - p))`` and intervals use Student's t on ``n - p`` degrees
    of freedom, which makes every number equal the least-squares one when
    nothing is censored and keeps the small-sample correction when something
    is.

    References
    ----------
    Tobin, J. (1958). *Econometrica* 26(1), 24-36.
    Olsen, R. J. (1978). *Econometrica* 46(5), 1211-1215.
    Helsel, D. R. (2005). *Nondetects and Data Analysis*. Wiley, ch. 11.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> rng = np.random.default_rng(7)
    >>> x = np.linspace(1, 10, 80)
    >>> y = np.exp(0.2 + 0.25 * x + rng.normal(0, 0.3, 80))
    >>> below = y < 2.0
    >>> f = unbend.fit(np.where(below, 2.0, y), x, y_power=0, censored=below)
    >>> f.n_censored == int(below.sum())
    True
    """
    with np.errstate(all="ignore"):
        return _fit_censored(y, x, censored, y_power, x_power, y_start, x_start, level, log10, y_family,
                             x_names, y_name)


def _fit_censored(y, x, censored, y_power, x_power, y_start, x_start, level, log10, y_family, x_names, y_name,
                  least_squares_when_none=True):
    """``least_squares_when_none=False`` runs the censored likelihood even with nothing censored (tests)."""
    level = check_level(level)
    yv = as_vector(y, "y")
    X = as_matrix(x, "x")
    mask = as_censored(censored, yv.size)
    k = X.shape[1]
    p = k + 1
    rows = usable_rows(yv, X, need=max(3, k + 2))
    yu, Xu = yv[rows.used], X[rows.used]
    cens = np.zeros(yu.size, dtype=bool) if mask is None else mask[rows.used]
    if not cens.any() and least_squares_when_none:  # the censored rows were skipped: as without censored=
        from .fitting import fit
        return fit(y, x, y_power=y_power, x_power=x_power, y_start=y_start, x_start=x_start, level=level,
                   log10=log10, y_family=y_family, x_names=x_names, y_name=y_name)
    if y_family != "ladder":
        raise UnbendError("values below a limit can be fitted only on the ladder of powers; use "
                          "y_family='ladder'.")
    y_t = Reexpression(y_power, y_start, log10, y_family)
    x_t = Reexpression(x_power, x_start, log10)
    y_t.check(yu, "y")
    x_t.check(Xu.ravel(), "x")
    n, nc = yu.size, int(cens.sum())
    limits = _limits(yu, cens)
    warnings = censoring_cautions(n, nc, limits)
    _need_measured(n - nc, p)
    zt = y_t.apply(yu)
    Xt = x_t.apply(Xu)
    if not (np.all(np.isfinite(zt)) and np.all(np.isfinite(Xt))):
        raise UnbendError("some values overflow at this power (too large to re-express); choose a power nearer 1 "
                          "or rescale the data.")
    core = _core(zt, Xt, cens)
    names, y_name = _names(x, y, x_names, y_name, k)
    return _build(core, y_t, x_t, yu, Xu, cens, limits, rows, level, warnings, names, y_name)


def _coef_and_cov(core: _Core):
    """Coefficients in the units of the re-expressed x and y; the inverse observed information in the
    standardised units (``cov_s``: coefficients of the centred-scaled columns, then log sigma); the map
    ``T`` from centred-scaled to original coefficients; the inverse information of (coef, log sigma)."""
    p = core.prob.p
    cov_s = _information_inverse(core.H)
    coef_c = core.theta[:p] * core.zsc
    coef_c[0] += core.z0
    T = np.zeros((p, p))
    T[0, 0] = 1.0
    if p > 1:
        T[0, 1:] = -core.mu / core.sc
        T[1:, 1:] = np.diag(1.0 / core.sc)
    J = np.zeros((p + 1, p + 1))
    J[:p, :p] = T * core.zsc
    J[p, p] = 1.0
    with np.errstate(all="ignore"):  # may underflow at extreme scales; the SEs below are computed without it
        cov_info = J @ cov_s @ J.T
    return coef_c, cov_s, T, cov_info


def _build(core, y_t, x_t, yu, Xu, cens, limits, rows, level, warnings, names, y_name) -> CensoredFit:
    n, nc = yu.size, int(cens.sum())
    p = core.prob.p
    k = p - 1
    df = n - p
    coef_c, cov_s, T, cov_info = _coef_and_cov(core)
    infl = n / df  # the least-squares degrees-of-freedom correction
    Vs = cov_s[:p, :p] * infl  # standardised units: the covariance of coef_c is Vs * zsc^2
    coef = T @ coef_c
    se = np.empty(p)
    Ts = T.copy()
    if p > 1:
        Ts[0, 1:] = -core.mu / core.sc  # row 0 in standardised units
    # standard errors without squaring zsc or 1/sc (which under- or overflow at extreme scales)
    se[0] = math.sqrt(max(float(Ts[0] @ Vs @ Ts[0]), 0.0)) * core.zsc
    se[1:] = np.sqrt(np.clip(np.diag(Vs)[1:], 0, None)) * core.zsc / core.sc
    if not (np.all(np.isfinite(coef)) and np.all(np.isfinite(se))) or np.any(se == 0):
        raise UnbendError("at this scale the slope or its standard error is beyond the range of floating-point "
                          "numbers; rescale y or x (change units) and fit again.")
    with np.errstate(all="ignore"):
        cov = (T * core.zsc) @ Vs @ (T * core.zsc).T
    sigma = math.exp(core.theta[-1]) * core.zsc
    s = sigma * math.sqrt(infl)
    with np.errstate(divide="ignore", invalid="ignore"):
        tv = coef / se
    pv = 2 * stats.t.sf(np.abs(tv), df)
    tq = stats.t.ppf(0.5 + level / 2, df)
    fitted = core.z0 + core.zsc * (core.prob.A @ core.theta[:p])
    resid = np.where(cens, np.nan, core.zt - fitted)

    curv, pat, spr, nor, note = _line_checks(core, y_t, yu, Xu, cens, limits)

    if k > 1:
        C = np.corrcoef(core.prob.A[:, 1:], rowvar=False)
        try:
            vif = np.diag(np.linalg.inv(C))
            if np.max(vif) > VIF_WARN:
                warnings.append(f"The x columns are strongly related (variance inflation up to {np.max(vif):.3g}): "
                                "single slopes are unstable and hard to read; predictions inside the data are still fine.")
        except np.linalg.LinAlgError:
            pass
    if n < FEW_ROWS:
        warnings.append(f"Only {n} usable rows: intervals are wide and the checks have little power.")
    if rows.skipped:
        warnings.append(rows.skipped_text())

    with np.errstate(divide="ignore"):
        jac = float(np.sum(np.log(np.abs(y_t.derivative(yu[~cens])))))
    ll = core.loglik_z + jac if np.isfinite(jac) else float("nan")

    cols = {"row": np.flatnonzero(rows.used) + 1, "y": yu}
    cols.update({nm: Xu[:, j] for j, nm in enumerate(names)})
    cols["y_re"] = core.zt
    cols.update({f"{nm}_re": core.Xt[:, j] for j, nm in enumerate(names)})
    blank = np.full(n, np.nan)  # leverage-based measures are not defined for the censored likelihood
    cols.update(fitted=fitted, residual=resid, standardized=resid / s, studentized=blank, leverage=blank,
                cooks_distance=blank, censored=cens)
    table = pd.DataFrame(cols)

    # _Rinv such that resid_sd * ||[1, (x - mu)/sc] _Rinv|| is the SE of the line (as LineFit stores it)
    Lc = np.linalg.cholesky(Vs) / (math.exp(core.theta[-1]) * math.sqrt(infl))  # zsc cancels
    method = (f"maximum likelihood, {nc} of {n} values below a limit censored (normal errors on the re-expressed "
              "scale)")
    return CensoredFit(
        y_expr=y_t, x_expr=x_t, coef=coef, se=se, tvalues=tv, pvalues=pv, ci_low=coef - tq * se,
        ci_high=coef + tq * se, level=level, r2=float("nan"), adj_r2=float("nan"), r2_original=float("nan"),
        resid_sd=float(s), df_resid=int(df), n=int(n), skipped=rows.skipped, x_names=names,
        x_min=Xu.min(axis=0), x_max=Xu.max(axis=0), curvature=curv, pattern=pat, spread=spr, normality=nor,
        verdict=verdict(float("nan"), curv, spr, nor, n, pat), warnings=tuple(warnings), loglik=float(ll),
        y_name=y_name, residuals=table, _resid=np.array([np.nan]), _mu=core.mu, _sc=core.sc, _Rinv=Lc,
        n_censored=nc, sigma=float(sigma), limits=limits, cov=cov, cov_information=cov_info, checks_note=note,
        method=method, iterations=int(core.iterations))


# ============================================================================ predictions
_GL_T, _GL_W = np.polynomial.legendre.leggauss(200)


def normal_mean(fit, eta: np.ndarray) -> np.ndarray:
    """Mean in original units at re-expressed fitted values ``eta``, normal errors with SD ``fit.resid_sd``.

    log: ``exp(eta + s^2/2)`` (base 10: ``10**eta * exp((s ln 10)^2 / 2)``);
    raw: ``eta``; other positive powers: the back-transform integrated
    against the normal density (Gauss-Legendre, 200 points, over the reach
    of the power plus the mass beyond it at the edge); negative powers: NaN
    (the normal errors reach 0 on the re-expressed scale, where the
    back-transform is unbounded, so no mean exists). Smearing is not used:
    it needs the residuals of every row, and censored rows have none.
    """
    t = fit.y_expr
    s = float(fit.resid_sd)
    eta = np.asarray(eta, dtype=float)
    p = t.power
    with np.errstate(all="ignore"):
        if p == 0.0:
            if t.log10:
                ln10 = math.log(10.0)
                return np.exp(ln10 * eta + 0.5 * (ln10 * s) ** 2) - t.start
            return np.exp(eta + 0.5 * s * s) - t.start
        if p == 1.0:
            return eta - t.start
        if p < 0.0:
            return np.full(eta.shape, np.nan)
        return _integrated_mean(t, eta, s)


def _integrated_mean(t: Reexpression, eta: np.ndarray, s: float) -> np.ndarray:
    """E[g^-1(eta + s Z)], Z standard normal, for a positive power.

    The back-transform behaves like a fractional power of z near z = 0 (the
    edge of the reach of an even or fractional power, a cusp inside it for
    an odd one), at t0 = -eta / s. Each side of t0 (within +-12 SD) is
    integrated by 200-point Gauss-Legendre through ``t = t0 +- width w^2``,
    which clusters the nodes at t0 and makes the integrand smooth there; the
    mass below the reach of an even or fractional power sits at its edge.
    """
    from .express import _is_odd_integer
    out = np.full(eta.shape, np.nan)
    ok = np.isfinite(eta)
    e = eta[ok]
    top = 12.0
    a = np.clip(-e / s, -top, top)
    w = 0.5 * (_GL_T + 1.0)
    wts = _GL_W * w  # t = a +- width w^2: dt = 2 width w dw, dw = dT / 2

    def side(width, sign):
        nodes = a[:, None] + sign * width[:, None] * (w * w)[None, :]
        vals = t.invert(e[:, None] + s * nodes) * np.exp(-0.5 * nodes * nodes - _HALF_LOG_2PI)
        return width * (vals @ wts)

    body = side(top - a, 1.0)
    if _is_odd_integer(t.power):
        body = body + side(a + top, -1.0)
    else:
        body = body + t.invert(np.array([0.0]))[0] * special.ndtr(a)
    out[ok] = body
    return out


def predict_censored(fit: CensoredFit, new_x, level: float = 0.95) -> pd.DataFrame:
    """Predict y in original units from a censored fit.

    Returns
    -------
    pandas.DataFrame
        The columns of :func:`unbend.predicting.predict`, read as follows:
        ``median`` the back-transformed line; ``mean`` and ``mean_normal``
        both the normal-theory mean (closed form for log and raw, numerical
        integration of the back-transform for other positive powers, blank
        for negative powers where no mean exists); ``line_low``,
        ``line_high`` and ``low``, ``high`` the intervals for the median and
        for one new value, found on the re-expressed scale and taken back end
        by end; ``outside_range`` (new x outside the observed x: extrapolation);
        ``below_limit`` (the median is below the lowest limit); ``note``,
        which says how many values were censored and flags a median below
        the lowest limit.

    Notes
    -----
    The variance of a new value about the fitted line is ``sigma^2 + a' V a``
    with ``a`` the new row of the design and ``V`` the covariance of the
    coefficients from the observed information (the line's own
    uncertainty, censoring included). Both terms are multiplied by
    ``n / (n - p)`` and the quantile is Student's t on ``n - p`` degrees of
    freedom, as for the coefficient intervals: with nothing censored this is
    exactly the least-squares prediction interval, and with censoring it
    keeps the same small-sample allowance (the ML SD is biased low by about
    that factor). The uncertainty of sigma itself enters only through t.
    """
    from .predicting import prediction_columns
    cols = prediction_columns(fit, new_x, level)  # median and intervals from the stored covariance and resid_sd
    mean = normal_mean(fit, cols["fitted"])
    cols["mean"] = mean
    cols["mean_normal"] = mean.copy()
    low = fit.lowest_limit
    below = np.asarray(cols["median"] < low) if np.isfinite(low) else np.zeros(len(cols["note"]), dtype=bool)
    from .predicting import mean_cautions, smeared_mean
    with np.errstate(all="ignore"):  # the smearing mean's cautions do not apply to this mean: taken out
        smear_words = mean_cautions(fit, cols["fitted"], cols["median"], smeared_mean(fit, cols["fitted"]))
    notes = []
    for i, nt in enumerate(cols["note"]):
        if smear_words[i]:
            nt = "; ".join(p for p in nt.split("; ") if p and p not in smear_words[i].split("; "))
        parts = [nt] if nt else []
        if below[i]:
            parts.append(f"the median is below the lowest limit ({low:.4g}): the data there were reported only as "
                         "below a limit, so this is extrapolation below the limits")
        if fit.y_power < 0 and np.isfinite(cols["fitted"][i]):
            parts.append("no mean at this y power under normal errors (the back-transform is unbounded)")
        parts.append(f"censored fit: {fit.n_censored} of {fit.n} values were below a limit")
        notes.append("; ".join(parts))
    cols["note"] = notes
    out = pd.DataFrame(cols)
    out.insert(out.columns.get_loc("note"), "below_limit", below)
    return out


# ============================================================================ no x: mean and SD
@dataclass(frozen=True)
class CensoredMean:
    """Mean and SD of re-expressed values with some below a limit (maximum likelihood, no predictor).

    Attributes
    ----------
    mean, sigma : float
        Maximum-likelihood mean and SD on the re-expressed scale.
    se_mean : float
        Standard error of ``mean`` from the observed information.
    median, mean_original : float
        Back-transformed mean (the median in original units) and the mean in
        original units under normal errors (NaN where none exists).
    n, n_censored : int
    limits : tuple of float
    warnings : tuple of str
    """

    mean: float
    sigma: float
    se_mean: float
    se_log_sigma: float
    median: float
    mean_original: float
    power: float
    start: float
    n: int
    n_censored: int
    limits: tuple
    skipped: int
    warnings: tuple

    def rows(self) -> list[tuple[str, object]]:
        return [("power", self.power), ("mean (re-expressed scale)", self.mean),
                ("std error of the mean", self.se_mean), ("SD (re-expressed scale)", self.sigma),
                ("median in original units", self.median), ("mean in original units", self.mean_original),
                ("values used", self.n), ("values below a limit (censored)", self.n_censored),
                ("values skipped", self.skipped)] + [("warning", w) for w in self.warnings]


def censored_mean(values, censored, *, power=0.0, start=0.0, log10=False) -> CensoredMean:
    """Mean and SD of re-expressed values, some below a limit, by maximum likelihood (no predictor).

    Parameters
    ----------
    values : array_like
        Values; where ``censored`` is True the value is the limit.
    censored : array_like of bool
    power, start, log10 : float, float, bool
        The re-expression (default natural log, the usual choice for
        concentrations).

    Returns
    -------
    CensoredMean

    References
    ----------
    Cohen, A. C. (1959). Simplified estimators for the normal distribution
    when samples are singly censored or truncated. *Technometrics* 1(3), 217-237.
    Helsel, D. R. (2005). *Nondetects and Data Analysis*. Wiley, ch. 6.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> v = np.array([0.5, 0.5, 0.8, 1.3, 2.2, 0.5, 3.1, 1.0, 4.6, 0.7])
    >>> c = np.array([True, True, False, False, False, True, False, False, False, False])
    >>> r = unbend.censored_mean(v, c)
    >>> r.n_censored
    3
    """
    with np.errstate(all="ignore"):
        yv = as_vector(values, "values")
        mask = as_censored(censored, yv.size, "censored")
        rows = usable_rows(yv, None, need=3, y_name="values")
        yu = yv[rows.used]
        cens = np.zeros(yu.size, dtype=bool) if mask is None else mask[rows.used]
        t = Reexpression(power, start, log10)
        t.check(yu, "values")
        n, nc = yu.size, int(cens.sum())
        limits = _limits(yu, cens)
        warnings = censoring_cautions(n, nc, limits)
        _need_measured(n - nc, 1)
        zt = t.apply(yu)
        if not np.all(np.isfinite(zt)):
            raise UnbendError("some values overflow at this power; choose a power nearer 1 or rescale the data.")
        core = _core(zt, None, cens)
        cov = _information_inverse(core.H)
        mean = core.z0 + core.zsc * float(core.theta[0])
        sigma = math.exp(core.theta[1]) * core.zsc
        se = math.sqrt(cov[0, 0]) * core.zsc

        class _F:  # what normal_mean reads
            y_expr, resid_sd = t, sigma
        med = float(t.invert(np.array([mean]))[0])
        mo = float(normal_mean(_F, np.array([mean]))[0])
    if rows.skipped:
        warnings.append(rows.skipped_text())
    return CensoredMean(mean=float(mean), sigma=float(sigma), se_mean=float(se), se_log_sigma=float(math.sqrt(cov[1, 1])),
                        median=med, mean_original=mo, power=t.power, start=t.start, n=n, n_censored=nc,
                        limits=limits, skipped=rows.n_skipped, warnings=tuple(warnings))


# ============================================================================ substitution, for comparison
def half_limit(y, x, censored, **fit_args) -> LineFit:
    """What substitution at half the limit would have given: the least-squares line with every censored
    value replaced by half its limit (common practice, known to bias slopes and spreads).

    For comparison beside the censored fit only; the result carries a warning
    that says so.

    Parameters
    ----------
    y, x, censored
        As for :func:`unbend.fit` with ``censored=``.
    **fit_args
        Passed to :func:`unbend.fit` (powers, starts, level, names).

    Returns
    -------
    LineFit

    References
    ----------
    Helsel, D. R. (2005). *Nondetects and Data Analysis*. Wiley, ch. 1
    (why substitution is not recommended).
    """
    from .fitting import fit
    yv = as_vector(y, "y")
    mask = as_censored(censored, yv.size)
    if mask is None:
        mask = np.zeros(yv.size, dtype=bool)
    filled = np.where(mask & np.isfinite(yv), yv / 2.0, yv)
    if "y_name" not in fit_args and isinstance(getattr(y, "name", None), str):
        fit_args["y_name"] = y.name
    f = fit(filled, x, **fit_args)
    nc = int((mask & np.isfinite(yv)).sum())
    msg = (f"For comparison only: {nc} value(s) below a limit were replaced by half the limit (common practice, "
           "known to bias slopes and spreads); use the censored fit.")
    return replace(f, warnings=f.warnings + (msg,))


# ============================================================================ powers and the scan
def _line_design(Xt: np.ndarray | None, cens: np.ndarray, n: int) -> np.ndarray:
    """[1, centred and scaled x], checked for rank among the measured rows."""
    if Xt is None:
        return np.ones((n, 1))
    A, _, _ = _design(Xt)
    R = np.linalg.qr(A[~cens], mode="r")
    d = np.abs(np.diag(R))
    if d.min() <= d.max() * 1e-10:
        raise UnbendError("the x columns are collinear among the measured rows (one is a combination of the "
                          "others, or x barely varies where values were measured); remove a column.")
    return A


class _Profile:
    """Shared by the two censored profiles: one maximum-likelihood fit per power, warm-started from the last.

    Values are kept by power, so a power asked for again gets the same number (root finders rely on it).
    Where the measured values lie on the line to rounding and the limits allow it, the likelihood has no
    top; it is then read at sigma = 1.4e-11 of the spread of the data, a very high but finite value, as
    the least-squares profiles do with a residual sum of squares of zero.
    """

    warm = None
    n = 0

    def loglik(self, power: float) -> float:
        memo = self.__dict__.setdefault("_memo", {})
        key = float(power)
        if key not in memo:
            with np.errstate(all="ignore"):
                memo[key] = self._loglik(key)
        return memo[key]

    def _ll(self, A: np.ndarray, u: np.ndarray) -> float:
        """Maximised censored log-likelihood of ``u`` on ``A``, in the units of ``u``; -inf if there is none."""
        if not np.all(np.isfinite(u)):
            return -np.inf
        try:
            zs, _, zsc = _standardise(u)
        except UnbendError:
            return -np.inf
        prob = _Problem(A if isinstance(A, _Split) else _Split(A, self.cens), zs)
        try:
            theta, ll, _, _ = _solve(prob, self.warm)
        except _Unbounded as e:
            th = e.theta.copy()
            th[-1] = _TAU_FLOOR
            ll = prob.loglik(th)
            return ll - prob.nu * math.log(zsc) if np.isfinite(ll) else -np.inf
        except (_NoMaximum, np.linalg.LinAlgError, ValueError):
            return -np.inf
        self.warm = theta
        return ll - prob.nu * math.log(zsc)


class _BoxCoxCensored(_Profile):
    """Profile log-likelihood of y's power with censored rows (ladder; values + start must be > 0).

    ``u = expm1(lam d) / lam`` with ``d`` the centred logs is an increasing
    affine change of the ladder power, so the censoring limits stay limits;
    the Jacobian of the measured rows is ``(lam - 1) sum d_i - n_measured m``,
    whose constant part is kept in ``offset``.
    """

    def __init__(self, v: np.ndarray, Xt: np.ndarray | None, cens: np.ndarray):
        self._v, self._Xt, self.cens = v, Xt, cens
        self.n = v.size
        logv = np.log(v)
        self.m = float(logv.mean())
        self.d = logv - self.m
        self.nu = int((~cens).sum())
        self.sum_d = float(self.d[~cens].sum())
        self.A = _Split(_line_design(Xt, cens, v.size), cens)  # split once for every power
        self.offset = -self.nu * self.m

    def subset(self, idx: np.ndarray) -> "_BoxCoxCensored":
        return _BoxCoxCensored(self._v[idx], None if self._Xt is None else self._Xt[idx], self.cens[idx])

    def _loglik(self, lam: float) -> float:
        from ._likelihood import centred_power
        with np.errstate(all="ignore"):
            u = centred_power(self.d, lam)
            ll = self._ll(self.A, u)
        return ll + (lam - 1.0) * self.sum_d if np.isfinite(ll) else -np.inf


class _XPowerCensored(_Profile):
    """Profile log-likelihood over a power shared by the x columns, with censored rows (x must be > 0)."""

    def __init__(self, zt: np.ndarray, xpos: np.ndarray, cens: np.ndarray):
        self._zt, self._x, self.cens = zt, xpos, cens
        self.n = zt.size
        self.zs, _, zsc = _standardise(zt)
        self.offset = -int((~cens).sum()) * math.log(zsc)
        L = np.log(xpos)
        self.D = L - L.mean(axis=0)
        if np.any(self.D.std(axis=0) == 0):
            raise UnbendError("x does not vary (every x value is the same); a line needs at least two different x "
                              "values.")
        _line_design(xpos, cens, zt.size)  # rank among the measured rows

    def subset(self, idx: np.ndarray) -> "_XPowerCensored":
        return _XPowerCensored(self._zt[idx], self._x[idx], self.cens[idx])

    def _loglik(self, alpha: float) -> float:
        from ._likelihood import centred_power
        with np.errstate(all="ignore"):
            U = centred_power(self.D, alpha)
            if not np.all(np.isfinite(U)):
                return -np.inf
            sd = U.std(axis=0)
            if not np.all(sd > 0) or not np.all(np.isfinite(sd)):
                return -np.inf
            A = np.column_stack([np.ones(self.n), (U - U.mean(axis=0)) / sd])
            return self._ll(A, self.zs)


def _censoring_of(censored, rows, n_rows: int):
    mask = as_censored(censored, n_rows)
    return mask[rows.used]


def suggest_power_censored(y, x, censored, *, level=0.95, y_start=0.0, x_power=1.0, x_start=0.0,
                           family="ladder", rungs=None):
    """Box-Cox power for y with values below a limit censored; use :func:`unbend.suggest_power` with ``censored=``.

    For each power the censored line is fitted by maximum likelihood
    (warm-started from the previous power) and the Jacobian of the measured
    rows is added; the interval is the likelihood-ratio interval.

    References
    ----------
    Box, G. E. P. and Cox, D. R. (1964). *JRSS B* 26(2), 211-252.
    Tobin, J. (1958). *Econometrica* 26(1), 24-36.
    """
    from . import _likelihood as lik
    from .power import _prepare, _rungs, _suggestion
    level = check_level(level)
    rungs = _rungs(rungs)
    if family != "ladder":
        raise UnbendError("values below a limit can be used only on the ladder of powers; use family='ladder'.")
    yu, Xu, rows = _prepare(y, x)
    cens = _censoring_of(censored, rows, as_vector(y, "y").size)
    if not cens.any():  # the censored rows were skipped: as without censored=
        from .power import suggest_power
        return suggest_power(y, x, level=level, y_start=y_start, x_power=x_power, x_start=x_start, family=family,
                             rungs=rungs)
    t_y = Reexpression(0.0, y_start)
    t_y.check(yu, "y")
    Xt = None
    if Xu is not None:
        t_x = Reexpression(x_power, x_start)
        t_x.check(Xu.ravel(), "x")
        Xt = t_x.apply(Xu)
        if not np.all(np.isfinite(Xt)):
            raise UnbendError("x has values that cannot be re-expressed at this power; add a start or choose "
                              "another power.")
    n, nc = yu.size, int(cens.sum())
    limits = _limits(yu, cens)
    cautions = censoring_cautions(n, nc, limits)
    _need_measured(n - nc, 1 if Xu is None else Xu.shape[1] + 1)
    with np.errstate(over="ignore"):
        v = yu + t_y.start
    if not np.all(np.isfinite(v)):
        raise UnbendError("y plus the start is too large for floating point; rescale y (change its units) or use a "
                          "smaller start.")
    prof = _BoxCoxCensored(v, Xt, cens)
    est, lo, hi, top = lik.profile_max(prof, level)
    top += prof.offset
    given = "" if Xu is None else f" given x at power {x_power:g}"
    method = f"Box-Cox profile likelihood{given}, {nc} of {n} values below a limit censored (maximum likelihood)"
    extra = " ".join(cautions + ([rows.skipped_text()] if rows.skipped else []))
    s = _suggestion(est, lo, hi, level=level, what="y", method=method, n=n, skipped=rows.n_skipped, loglik=top,
                    rungs=rungs, extra=extra)
    return replace(s, n_censored=nc)


def suggest_x_power_censored(y, x, censored, *, level=0.95, y_power=1.0, y_start=0.0, x_start=0.0, rungs=None):
    """Power for x with values below a limit censored; use :func:`unbend.suggest_x_power` with ``censored=``.

    References
    ----------
    Box, G. E. P. and Tidwell, P. W. (1962). *Technometrics* 4(4), 531-550.
    Tobin, J. (1958). *Econometrica* 26(1), 24-36.
    """
    from . import _likelihood as lik
    from .power import _prepare, _rungs, _suggestion
    level = check_level(level)
    rungs = _rungs(rungs)
    yu, Xu, rows = _prepare(y, x)
    cens = _censoring_of(censored, rows, as_vector(y, "y").size)
    if not cens.any():  # the censored rows were skipped: as without censored=
        from .power import suggest_x_power
        return suggest_x_power(y, x, level=level, y_power=y_power, y_start=y_start, x_start=x_start, rungs=rungs)
    t_y = Reexpression(y_power, y_start)
    t_y.check(yu, "y")
    t_x = Reexpression(0.0, x_start)
    t_x.check(Xu.ravel(), "x")
    n, nc = yu.size, int(cens.sum())
    limits = _limits(yu, cens)
    cautions = censoring_cautions(n, nc, limits)
    _need_measured(n - nc, Xu.shape[1] + 1)
    with np.errstate(over="ignore"):
        xv = Xu + t_x.start
        zt = t_y.apply(yu)
    if not np.all(np.isfinite(xv)):
        raise UnbendError("x plus the start is too large for floating point; rescale x (change its units) or use a "
                          "smaller start.")
    if not np.all(np.isfinite(zt)):
        raise UnbendError("y has values that cannot be re-expressed at this power; add a start or choose another "
                          "power.")
    prof = _XPowerCensored(zt, xv, cens)
    est, lo, hi, top = lik.profile_max(prof, level)
    top += prof.offset
    cols = "" if Xu.shape[1] == 1 else f" (one power shared by {Xu.shape[1]} x columns)"
    method = (f"profile likelihood over the x power (Box-Tidwell), y at power {y_power:g}{cols}, {nc} of {n} values "
              "below a limit censored (maximum likelihood)")
    extra = " ".join(cautions + ([rows.skipped_text()] if rows.skipped else []))
    s = _suggestion(est, lo, hi, level=level, what="x", method=method, n=n, skipped=rows.n_skipped, loglik=top,
                    rungs=rungs, extra=extra)
    return replace(s, n_censored=nc)


def scan_censored(yu, Xu, cens, y_rungs, x_rungs, y_start, x_start) -> list:
    """The scan's rows with censored values (used rows only; see :func:`unbend.scan` with ``censored=``).

    Each pair is the maximum-likelihood censored line; its log-likelihood is
    in the units of y (Jacobian of the measured rows), so pairs with
    different y powers compare; the checks are those of :func:`fit_censored`;
    R² is blank (not defined with censored values).
    """
    from .scan import _domain, _impossible, _record
    from .express import rung_label
    n = yu.size
    limits = _limits(yu, cens)
    out = []
    xs = {}
    for px in x_rungs:
        t = Reexpression(px, x_start)
        err = _domain(t, Xu.ravel(), "x")
        xs[px] = err or t.apply(Xu)
    for py in y_rungs:
        ty = Reexpression(py, y_start)
        y_err = _domain(ty, yu, "y")
        if not y_err:
            zt = ty.apply(yu)
            with np.errstate(divide="ignore"):
                jac = float(np.sum(np.log(np.abs(ty.derivative(yu[~cens])))))
        for px in x_rungs:
            rec = {"y_power": py, "x_power": px, "y_rung": rung_label(py), "x_rung": rung_label(px), "n": int(n)}
            Xt = xs[px]
            if y_err or isinstance(Xt, str):
                out.append(_impossible(rec, y_err or Xt))
                continue
            if not (np.all(np.isfinite(zt)) and np.all(np.isfinite(Xt))):
                out.append(_impossible(rec, "values overflow at this power; rescale the data"))
                continue
            try:
                core = _core(zt, Xt, cens)
                curv, pat, spr, nor, _ = _line_checks(core, ty, yu, Xu, cens, limits)
            except UnbendError as e:
                out.append(_impossible(rec, str(e)))
                continue
            ll = core.loglik_z + jac if np.isfinite(jac) else float("nan")
            out.append(_record(rec, loglik=ll, curvature=curv, pattern=pat, spread=spr, normality=nor,
                               r2=float("nan"), r2_original=float("nan")))
    return out
