"""Least-squares line on the re-expressed scale (QR, never the normal equations)."""
from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd
from scipy import linalg

from . import _dist as stats

from ._validation import FEW_ROWS, UnbendError, as_matrix, as_vector, check_level, usable_rows
from .diagnostics import Check, curvature_test, normality_test, pattern_bins, pattern_test, spread_test, verdict
from .express import Reexpression
from .wording import Bend, r2_original_words

__all__ = ["LineFit", "fit", "CAUTION"]

#: Printed with every result that could feed a decision.
CAUTION = ("Check the residual plot before using these numbers. Predictions outside the observed x range are "
           "extrapolation. Where results feed safety, compliance or money decisions, defer to local codes and "
           "licensed practice.")

#: Variance inflation above this flags near-collinear x columns (common practice).
VIF_WARN = 10.0


@dataclass(frozen=True)
class LineFit:
    """A straight line fitted on the re-expressed scale; knows how to predict and summarise itself.

    Attributes
    ----------
    coef, se, tvalues, pvalues, ci_low, ci_high : ndarray
        Intercept first, then one slope per x column, on the re-expressed scale.
    r2, adj_r2 : float
        On the re-expressed scale.
    r2_original : float
        R² of the back-transformed line against y in original units.
    resid_sd : float
        Residual standard deviation on the re-expressed scale.
    n : int
        Rows used. ``skipped`` lists ((row, reason), ...) for the others.
    residuals : pandas.DataFrame
        Per used row: row, y, x, y_re, fitted, residual, standardized,
        studentized, leverage, cooks_distance.
    curvature, pattern, spread, normality : Check
        Tukey's one-degree-of-freedom curvature test, Kruskal–Wallis across
        fitted-value bins, Breusch–Pagan, and Shapiro–Wilk (or
        D'Agostino–Pearson above 5,000 rows).
    verdict : str
    warnings : tuple of str
    """

    y_expr: Reexpression
    x_expr: Reexpression
    coef: np.ndarray
    se: np.ndarray
    tvalues: np.ndarray
    pvalues: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray
    level: float
    r2: float
    adj_r2: float
    r2_original: float
    resid_sd: float
    df_resid: int
    n: int
    skipped: tuple
    x_names: tuple
    x_min: np.ndarray
    x_max: np.ndarray
    curvature: Check
    pattern: Check
    spread: Check
    normality: Check
    verdict: str
    warnings: tuple
    loglik: float
    y_name: str
    residuals: pd.DataFrame = field(repr=False, compare=False)
    _resid: np.ndarray = field(repr=False, compare=False)
    _mu: np.ndarray = field(repr=False, compare=False)
    _sc: np.ndarray = field(repr=False, compare=False)
    _Rinv: np.ndarray = field(repr=False, compare=False)
    _memo: dict = field(default_factory=dict, repr=False, compare=False)  # values computed once on demand

    @property
    def y_power(self) -> float:
        return self.y_expr.power

    @property
    def x_power(self) -> float:
        return self.x_expr.power

    @property
    def n_skipped(self) -> int:
        return len(self.skipped)

    @property
    def n_censored(self) -> int:
        """Values below a limit (0: a least-squares fit; see :class:`unbend.censored.CensoredFit`)."""
        return 0

    @property
    def names(self) -> tuple:
        return ("intercept",) + tuple(f"slope {nm}" for nm in self.x_names)

    # ---------------------------------------------------------------- predict
    def predict(self, new_x, level: float = 0.95) -> pd.DataFrame:
        """Predictions in original units, one row per new x; see :func:`unbend.predicting.predict`."""
        from .predicting import predict
        return predict(self, new_x, level=level)

    def inverse(self, new_y, level: float = 0.95, replicates: int = 1) -> pd.DataFrame:
        """x read back from measured y, with an interval; see :func:`unbend.calibration.inverse`."""
        from .calibration import inverse
        return inverse(self, new_y, level=level, replicates=replicates)

    def detection_limits(self, level: float = 0.95, replicates: int = 1):
        """Critical level, detection and quantification limits; see :func:`unbend.calibration.calibration_limits`."""
        from .calibration import calibration_limits
        return calibration_limits(self, level=level, replicates=replicates)

    def slope_reading(self) -> str:
        """What the slope means in original units, in words."""
        from .predicting import slope_reading
        return slope_reading(self)

    def explain(self) -> str:
        """Two or three plain sentences: the re-expression, the slope, the checks, and cautions."""
        from .predicting import explain
        return explain(self)

    def coef_table(self) -> pd.DataFrame:
        pct = f"{self.level * 100:g}%"
        return pd.DataFrame({"term": self.names, "estimate": self.coef, "std_error": self.se,
                             "t": self.tvalues, "p": self.pvalues, f"low {pct}": self.ci_low,
                             f"high {pct}": self.ci_high})

    def rows(self) -> list[tuple[str, object]]:
        """Labelled rows (label, value) summarising the fit, for a two-column table."""
        pct = f"{self.level * 100:g}%"
        out: list[tuple[str, object]] = [
            ("y re-expressed as", self.y_expr.label),
            ("y power", self.y_power),
            ("y start", self.y_expr.start),
            ("x re-expressed as", self.x_expr.label),
            ("x power", self.x_power),
            ("x start", self.x_expr.start),
        ]
        for i, nm in enumerate(self.names):
            out += [(f"{nm}", self.coef[i]), (f"{nm}: std error", self.se[i]),
                    (f"{nm}: t", self.tvalues[i]), (f"{nm}: p", self.pvalues[i]),
                    (f"{nm}: {pct} low", self.ci_low[i]), (f"{nm}: {pct} high", self.ci_high[i])]
        out += [
            ("R\u00b2 (re-expressed scale)", self.r2),
            ("adjusted R\u00b2 (re-expressed scale)", self.adj_r2),
            ("R\u00b2 in original units (back-transformed line)", self.r2_original),
        ]
        why = r2_original_words(self)
        if why:
            out.append(("R\u00b2 in original units: why", why))
        out += [
            ("residual SD (re-expressed scale)", self.resid_sd),
            ("rows used", self.n),
            ("rows skipped", self.n_skipped),
            ("curvature check p (Tukey 1 df)", self.curvature.pvalue),
            ("curvature check", _word(self.curvature, "no clear sign of curvature", "residuals curve")),
            ("pattern check p (Kruskal-Wallis across bins of x)", self.pattern.pvalue),
            ("pattern check", _word(self.pattern, "no clear sign of drift with level", "residuals drift with level")),
            ("spread check p (Breusch-Pagan)", self.spread.pvalue),
            ("spread check", _word(self.spread, "no clear sign of a change of spread", "spread changes")),
            (f"normality check p ({self.normality.name})", self.normality.pvalue),
            ("normality check", _word(self.normality, "no clear departure from normal", "not normal (see verdict)")),
            ("verdict", self.verdict),
            ("slope in original units", self.slope_reading()),
        ]
        for w in self.warnings:
            out.append(("warning", w))
        out.append(("caution", CAUTION))
        return out

    def summary(self) -> str:
        """A plain-text summary."""
        width = max(len(k) for k, _ in self.rows())
        lines = []
        for k, v in self.rows():
            if isinstance(v, float):
                v = f"{v:.6g}"
            lines.append(f"{k:<{width}}  {v}")
        return "\n".join(lines)


def gaussian_loglik_with_jacobian(rss: float, n: int, jac: float, log_scale: float = 0.0) -> float:
    """Normal log-likelihood in the original units of y; NaN when it is not comparable.

    ``jac`` is the sum of log |d re-expressed y / d y|; ``rss`` may be given in
    scaled units with ``log_scale`` the log of the scale squared. At y = 0 a power below
    1 has an infinite derivative, so the likelihood is unbounded and says
    nothing; such fits get NaN (a start such as 0.5 makes them comparable).
    """
    if not np.isfinite(jac) or rss <= 0:
        return float("nan")
    return float(-0.5 * n * (np.log(2 * np.pi) + 1 + np.log(rss / n) + log_scale) + jac)


def _bend(y_t, x_t, coef, pvalues, r2, n, df, names, y_name, y_low, x_low) -> Bend:
    """What the verdict needs to turn a bend into advice: the powers, the slope's sign and whether there is a trend."""
    k = len(names)
    if k == 1:
        sign, trend_p = float(np.sign(coef[1])), float(pvalues[1])
    else:  # F test of all slopes together; the bend is then measured against the fitted value
        with np.errstate(divide="ignore", invalid="ignore"):
            F = (r2 / k) / ((1.0 - r2) / df) if r2 < 1 else np.inf
        sign, trend_p = 0.0, (float(stats.f.sf(F, k, df)) if not np.isnan(F) else float("nan"))
    return Bend(y_power=y_t.power, x_power=x_t.power, slope_sign=sign, trend_p=trend_p, n_x=k, y_name=y_name,
                x_name=names[0] if k == 1 else _join(names), y_family=y_t.family, y_low=y_low, x_low=x_low)


def _names(x, y, x_names, y_name, k):
    """The x column names (given, from a DataFrame or Series, or x / x1, x2 ...) and the y name, checked."""
    if x_names is None and hasattr(x, "columns"):
        x_names = [str(c) for c in x.columns]
    elif x_names is None and hasattr(x, "name") and isinstance(getattr(x, "name"), str) and k == 1:
        x_names = [x.name]
    if y_name is None:
        y_name = y.name if isinstance(getattr(y, "name", None), str) else "y"
    if x_names is not None and (isinstance(x_names, (str, bytes)) or not hasattr(x_names, "__iter__")):
        raise UnbendError("x_names must be a list of names, one per x column, such as ['flow'].")
    names = tuple(str(nm) for nm in x_names) if x_names is not None else (
        ("x",) if k == 1 else tuple(f"x{i + 1}" for i in range(k)))
    if len(names) != k:
        raise UnbendError(f"x_names has {len(names)} name(s) but x has {k} column(s); give one name per x column.")
    return names, str(y_name)


def _join(names) -> str:
    return ", ".join(names[:-1]) + " and " + names[-1]


def _word(c: Check, good: str, bad: str) -> str:
    if not c.ran:
        return "not run (too few rows)"
    return good if c.passed else bad


def _design(Xt: np.ndarray):
    """[1, centred and scaled x]; columns are first divided by their largest size so that
    neither the mean nor the spread overflows or underflows at extreme scales."""
    big = np.max(np.abs(Xt), axis=0)
    big[(big == 0) | ~np.isfinite(big)] = 1.0
    Xs = Xt / big
    mu_s = Xs.mean(axis=0)
    sc_s = Xs.std(axis=0)
    if np.any(sc_s == 0) or not np.all(np.isfinite(sc_s)):
        raise UnbendError("x does not vary (every x value is the same); a line needs at least two different x values.")
    A = np.column_stack([np.ones(Xt.shape[0]), (Xs - mu_s) / sc_s])
    return A, mu_s * big, sc_s * big


def fit(y, x, *, y_power=1.0, x_power=1.0, y_start=0.0, x_start=0.0, level=0.95,
        log10=False, y_family="ladder", x_names=None, y_name=None, censored=None) -> LineFit:
    """Fit the straight line of re-expressed y on re-expressed x by least squares.

    Parameters
    ----------
    y : array_like
        Response; rows where y or any x is not a number are skipped and listed.
    x : array_like
        One column, or a block with one column per predictor.
    y_power, x_power : float
        Ladder powers (0 = log). ``x_power`` applies to every x column.
    y_start, x_start : float
        Added before re-expressing.
    level : float
        Confidence level for the coefficient intervals.
    log10 : bool
        Base-10 logs for power 0.
    y_family : {'ladder', 'yeo-johnson'}
    x_names : sequence of str, optional
        Names of the x columns (default: the DataFrame's column names, or x, x1, x2 ...).
    y_name : str, optional
        Name of y in sentences (default: the Series name, or y).
    censored : array_like of bool, optional
        True where y is an upper limit (a value reported as below it, such as
        "<0.5": y holds 0.5). With any True the line is fitted by maximum
        likelihood with those values censored and a
        :class:`unbend.censored.CensoredFit` is returned; with None or all
        False the result is the least-squares fit.

    Returns
    -------
    LineFit

    Notes
    -----
    x columns are centred and scaled, the design is factored by Householder
    QR, and one step of iterative refinement is applied, so even
    ill-conditioned data (Longley 1967) keep their digits. Leverage is the
    diagonal of the hat matrix, Cook's distance follows Cook (1977).

    References
    ----------
    Golub, G. H. and Van Loan, C. F. (2013). *Matrix Computations*, 4th ed., ch. 5.
    Cook, R. D. (1977). Detection of influential observation in linear
    regression. *Technometrics* 19(1), 15-18.
    Longley, J. W. (1967). An appraisal of least squares programs for the
    electronic computer from the point of view of the user. *JASA* 62, 819-841.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> x = np.array([1., 2, 4, 8, 16, 32])
    >>> y = 3.0 * x ** 0.5
    >>> f = unbend.fit(y, x, y_power=0, x_power=0)
    >>> round(float(f.coef[1]), 6)
    0.5
    """
    if censored is not None:
        from ._validation import as_censored
        if as_censored(censored, as_vector(y, "y").size).any():
            from .censored import fit_censored
            return fit_censored(y, x, censored, y_power=y_power, x_power=x_power, y_start=y_start, x_start=x_start,
                                level=level, log10=log10, y_family=y_family, x_names=x_names, y_name=y_name)
    with np.errstate(all="ignore"):  # every overflow ends in a check below and a plain message
        return _fit(y, x, y_power, x_power, y_start, x_start, level, log10, y_family, x_names, y_name)


def _fit(y, x, y_power, x_power, y_start, x_start, level, log10, y_family, x_names, y_name) -> LineFit:
    level = check_level(level)
    yv = as_vector(y, "y")
    X = as_matrix(x, "x")
    k = X.shape[1]
    rows = usable_rows(yv, X, need=max(3, k + 2))
    yu, Xu = yv[rows.used], X[rows.used]
    y_t = Reexpression(y_power, y_start, log10, y_family)
    x_t = Reexpression(x_power, x_start, log10)
    y_t.check(yu, "y")
    x_t.check(Xu.ravel(), "x")
    yt = y_t.apply(yu)
    Xt = x_t.apply(Xu)
    if not (np.all(np.isfinite(yt)) and np.all(np.isfinite(Xt))):
        raise UnbendError("some values overflow at this power (too large to re-express); choose a power nearer 1 "
                          "or rescale the data.")
    n = yt.size
    p = k + 1
    A, mu, sc = _design(Xt)
    Q, R = np.linalg.qr(A)
    d = np.abs(np.diag(R))
    if d.min() <= d.max() * 1e-10:
        raise UnbendError("the x columns are collinear (one is a combination of the others, or x barely varies); "
                          "remove a column.")
    # y is divided by its largest size for the sums (no overflow or underflow at extreme scales)
    ybig = float(np.max(np.abs(yt)))
    if ybig == 0 or not np.isfinite(ybig):
        ybig = 1.0
    ys = yt / ybig
    bc = linalg.solve_triangular(R, Q.T @ ys)
    r = ys - A @ bc
    bc = bc + linalg.solve_triangular(R, Q.T @ r)  # one step of iterative refinement
    fitted_s = A @ bc
    resid_s = ys - fitted_s
    df = n - p
    with np.errstate(all="ignore"):
        rss_s = float(resid_s @ resid_s)
        tss_s = float(((ys - ys.mean()) ** 2).sum())
    if not (np.isfinite(rss_s) and np.isfinite(tss_s)) or not np.all(np.isfinite(bc)):
        raise UnbendError("the values are too large to fit at this power (the sums overflow); rescale the data or "
                          "choose a power nearer 1.")
    if tss_s == 0:
        raise UnbendError("y does not vary at this power (every re-expressed y is the same); choose another power "
                          "or check the data.")
    s_s = np.sqrt(rss_s / df)
    Rinv = linalg.solve_triangular(R, np.eye(p))
    cov_c = (s_s * s_s) * (Rinv @ Rinv.T)
    # back to the units of y
    bc = bc * ybig
    fitted = fitted_s * ybig
    resid = resid_s * ybig
    s = s_s * ybig
    rss = rss_s * ybig * ybig  # may underflow at tiny scales; the likelihood below uses logs instead
    # back to the units of the re-expressed x: beta = T beta_c
    T = np.zeros((p, p))
    T[0, 0] = 1.0
    T[0, 1:] = -mu / sc
    T[1:, 1:] = np.diag(1.0 / sc)
    with np.errstate(all="ignore"):
        coef = T @ bc
    # standard errors without squaring 1/sc (which underflows at extreme x scales)
    t0 = T[0]
    se = np.empty(p)
    with np.errstate(all="ignore"):  # beyond floating point: refused just below
        se[0] = np.sqrt(max(float(t0 @ cov_c @ t0), 0.0))
        se[1:] = np.sqrt(np.clip(np.diag(cov_c)[1:], 0, None)) / sc
        se = se * ybig
    if np.any((se == 0) & (np.diag(cov_c) > 0)) or not np.all(np.isfinite(coef)) or not np.all(np.isfinite(se)):
        raise UnbendError("at this scale the slope is beyond the range of floating-point numbers; rescale y or x "
                          "(change units, say from grams to tonnes) and fit again.")
    with np.errstate(divide="ignore", invalid="ignore"):
        tv = coef / se
    pv = 2 * stats.t.sf(np.abs(tv), df)
    tq = stats.t.ppf(0.5 + level / 2, df)
    r2 = 1.0 - rss_s / tss_s
    adj = 1.0 - (1.0 - r2) * (n - 1) / df
    back = y_t.invert(fitted)
    with np.errstate(all="ignore"):
        ub = float(np.max(np.abs(yu)))
        ub = ub if ub > 0 and np.isfinite(ub) else 1.0
        dy = (yu - yu.mean()) / ub
        den = float(dy @ dy)
        r2o = 1.0 - float((((yu - back) / ub) ** 2).sum()) / den if den > 0 else float("nan")
    if not np.isfinite(r2o):
        r2o = float("nan")

    h = np.einsum("ij,ij->i", Q, Q)
    with np.errstate(divide="ignore", invalid="ignore"):  # ratios: computed in the scaled units
        std = resid_s / (s_s * np.sqrt(1.0 - h))
        s_i2 = (rss_s - resid_s ** 2 / (1.0 - h)) / (df - 1) if df > 1 else np.full(n, np.nan)
        stud = resid_s / np.sqrt(s_i2 * (1.0 - h))
        cook = std ** 2 * h / (p * (1.0 - h))

    warnings = []
    if k > 1:
        C = np.corrcoef(A[:, 1:], rowvar=False)
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

    curv = curvature_test(A, ys, fitted_s)
    pat = pattern_test(resid_s, pattern_bins(Xu[:, 0] if k == 1 else fitted_s))
    spr = spread_test(A[:, 1:], resid_s, fitted_s)
    nor = normality_test(resid_s)
    names, y_name = _names(x, y, x_names, y_name, k)

    # log-likelihood in original y units (Jacobian of the y re-expression included)
    with np.errstate(divide="ignore"):
        jac = float(np.sum(np.log(np.abs(y_t.derivative(yu)))))
    ll = gaussian_loglik_with_jacobian(rss_s, n, jac, log_scale=2.0 * np.log(ybig))

    with np.errstate(over="ignore"):
        y_low, x_low = float(np.min(yu) + y_t.start), float(np.min(Xu) + x_t.start)
    bend = _bend(y_t, x_t, coef, pv, r2, n, df, names, str(y_name), y_low, x_low)
    if (curv.ran and not curv.passed) or (spr.ran and not spr.passed):  # advice will be given: read the likelihoods
        from .power import likelihood_direction
        bend = replace(bend, y_lik=likelihood_direction(yu, Xu, y_t, x_t, "y"),
                       x_lik=likelihood_direction(yu, Xu, y_t, x_t, "x") if k == 1 else 0)

    # built from one dict (a repeated name keeps its first place and takes the later column, as assignment would)
    cols = {"row": np.flatnonzero(rows.used) + 1, "y": yu}
    for j, nm in enumerate(names):
        cols[nm] = Xu[:, j]
    cols["y_re"] = yt
    for j, nm in enumerate(names):
        cols[f"{nm}_re"] = Xt[:, j]
    cols.update(fitted=fitted, residual=resid, standardized=std, studentized=stud, leverage=h, cooks_distance=cook)
    table = pd.DataFrame(cols)

    return LineFit(
        y_expr=y_t, x_expr=x_t, coef=coef, se=se, tvalues=tv, pvalues=pv,
        ci_low=coef - tq * se, ci_high=coef + tq * se, level=level, r2=r2, adj_r2=adj,
        r2_original=r2o, resid_sd=float(s), df_resid=int(df), n=int(n), skipped=rows.skipped,
        x_names=names, x_min=Xu.min(axis=0), x_max=Xu.max(axis=0), curvature=curv, pattern=pat,
        spread=spr, normality=nor, verdict=verdict(r2, curv, spr, nor, n, pat, bend=bend), warnings=tuple(warnings),
        loglik=float(ll), y_name=str(y_name), residuals=table, _resid=resid, _mu=mu, _sc=sc, _Rinv=Rinv,
    )
