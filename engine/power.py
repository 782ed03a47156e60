"""Choosing a power: Box–Cox for y, profile likelihood (Box–Tidwell) for x,
spread against level for grouped data, and symmetry for one column."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize

from . import _dist as stats

from ._validation import (FEW_ROWS, DomainError, UnbendError, as_matrix, as_vector, check_level,
                          check_number, check_power, check_varies, usable_rows)
from .express import LADDER, Reexpression, rung_label
from . import _likelihood as lik
from . import wording as words

__all__ = ["PowerSuggestion", "suggest_power", "suggest_x_power", "spread_power",
           "symmetry_power", "choose_rung"]


@dataclass(frozen=True)
class PowerSuggestion:
    """A suggested power with its interval and the ladder rung to use.

    Attributes
    ----------
    estimate : float
        Maximum-likelihood (or least-squares) estimate of the power.
    low, high : float
        Interval for the power at ``level``; may be -inf / inf when the data
        do not bound it.
    rung : float
        The ladder rung to use (see :func:`choose_rung`).
    label : str
        Plain name of the rung ('log', 'square root', ...).
    note : str
        Plain-language reading of the result and any caution.
    """

    estimate: float
    low: float
    high: float
    rung: float
    label: str
    note: str
    level: float = 0.95
    what: str = "y"
    method: str = ""
    n: int = 0
    skipped: int = 0
    loglik: float = float("nan")
    detail: pd.DataFrame | None = field(default=None, compare=False, repr=False)
    n_censored: int = 0

    def rows(self) -> list[tuple[str, object]]:
        """Labelled rows (label, value) for a two-column table."""
        pct = f"{self.level * 100:g}%"
        return [
            ("power for", self.what),
            ("estimate", self.estimate),
            (f"{pct} low", self.low),
            (f"{pct} high", self.high),
            ("rung to use", self.rung),
            ("rung name", self.label),
            ("method", self.method),
            ("rows used", self.n),
            ("rows skipped", self.skipped),
            ("note", self.note),
        ] + ([("values below a limit (censored)", self.n_censored)] if self.n_censored else [])


def choose_rung(estimate: float, low: float, high: float, rungs=None, *, what: str = "y"):
    """Pick the ladder rung from an estimate and its interval.

    If 1 lies inside the interval, 1: the data give no clear reason to
    re-express (which is not the same as showing that no re-expression is
    needed). Otherwise the rung inside the interval nearest the estimate; if
    no rung is inside, the nearest rung, with a note that says so.

    Returns
    -------
    (rung, note) : (float, str)
    """
    rungs = _rungs(rungs)
    try:
        estimate, low, high = float(estimate), float(low), float(high)
    except (TypeError, ValueError, OverflowError):
        raise UnbendError("the estimate and both interval ends must be numbers (ends may be -inf or inf).") from None
    if np.isnan(estimate) or np.isnan(low) or np.isnan(high) or not np.isfinite(estimate):
        raise UnbendError("the estimate must be a finite number and both interval ends numbers (ends may be -inf "
                          "or inf).")
    if low <= 1.0 <= high:
        return 1.0, words.rung_choice_words("one inside", what)
    inside = [r for r in rungs if low <= r <= high]
    if inside:
        r = min(inside, key=lambda r: (abs(r - estimate), -r))
        return r, words.rung_choice_words("inside", what, rung=r)
    r = min(rungs, key=lambda r: (abs(r - estimate), -r))
    return r, words.rung_choice_words("none inside", what, rung=r, low=low, high=high, estimate=estimate)


interval_words = words.interval_words


def _rungs(rungs) -> tuple:
    """Validated rungs: a non-empty list of powers between -100 and 100 (default the six of the ladder)."""
    if rungs is None:
        return tuple(LADDER)
    if np.isscalar(rungs):
        rungs = [rungs]
    out = tuple(check_power(r, "a rung") for r in rungs)
    if not out:
        raise UnbendError("rungs is empty; give at least one power, such as 1, 0.5 and 0.")
    return out


#: An interval that covers this many of the six rungs or more is called wide: the data cannot choose.
WIDE_RUNGS = 4


def _cautions(n: int, low: float, high: float) -> str:
    out = []
    if n < FEW_ROWS:
        out.append(words.few_rows_words(n))
    covered = sum(1 for r in LADDER if low <= r <= high)
    if covered >= WIDE_RUNGS:
        out.append(words.wide_words(covered, len(LADDER), low, high))
    return " ".join(out)


def _suggestion(est, lo, hi, *, level, what, method, n, skipped, loglik, rungs, extra="", detail=None):
    rung, note = choose_rung(est, lo, hi, rungs, what=what)
    parts = [note[0].upper() + note[1:]]
    c = _cautions(n, lo, hi)
    if c:
        parts.append(c)
    if abs(est) >= lik.SEARCH_LIMIT * 0.999:
        parts.append(words.search_edge_words(est))
    if extra:
        parts.append(extra)
    return PowerSuggestion(estimate=float(est), low=float(lo), high=float(hi), rung=float(rung),
                           label=rung_label(rung), note=" ".join(parts), level=level, what=what,
                           method=method, n=int(n), skipped=int(skipped), loglik=float(loglik),
                           detail=detail)


def _any_censored(y, censored) -> bool:
    """True when a censoring mask is given and marks at least one row (checked against y's length)."""
    if censored is None:
        return False
    from ._validation import as_censored
    return bool(as_censored(censored, as_vector(y, "y").size).any())


def _prepare(y, x, y_name="y", x_name="x"):
    yv = as_vector(y, y_name)
    X = None if x is None else as_matrix(x, x_name)
    rows = usable_rows(yv, X, y_name=y_name, x_name=x_name)
    yu = yv[rows.used]
    Xu = None if X is None else X[rows.used]
    check_varies(yu, y_name)
    return yu, Xu, rows


def suggest_power(y, x=None, *, level=0.95, y_start=0.0, x_power=1.0, x_start=0.0,
                  family="ladder", rungs=None, censored=None) -> PowerSuggestion:
    """Suggest a power for y: the Box–Cox profile likelihood of the line of y on x.

    Parameters
    ----------
    y : array_like
        Response values; non-numbers are skipped and counted.
    x : array_like, optional
        Predictor column, or a block with one column per predictor. Without x
        the power that makes y most nearly normal is found (as
        :func:`symmetry_power`).
    level : float
        Confidence level of the likelihood-ratio interval.
    y_start : float
        Added to y before re-expressing (y + start must be above 0).
    x_power, x_start : float
        How x is re-expressed in the line.
    family : {'ladder', 'yeo-johnson'}
        'yeo-johnson' allows y of either sign.
    rungs : sequence of float, optional
        Rungs to choose from (default the six of the ladder).
    censored : array_like of bool, optional
        True where y is an upper limit (reported as below it); with any True
        the profile uses the censored likelihood (see :mod:`unbend.censored`).

    Returns
    -------
    PowerSuggestion

    Notes
    -----
    For each power the likelihood of the normal linear model of the
    re-expressed y on x is maximised over the coefficients; the Jacobian of
    the re-expression is included so that powers are comparable. With
    ``g`` the geometric mean of y this is, up to a constant,
    ``-n/2 log(RSS(lambda) / n)`` where RSS is the residual sum of squares of
    ``(y**lambda - 1) / (lambda g**(lambda-1))`` (Box and Cox 1964). The
    interval holds the powers whose likelihood ratio to the maximum is below
    the chi-square(1) quantile at ``level``.

    References
    ----------
    Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations.
    *Journal of the Royal Statistical Society B* 26(2), 211-252.
    Yeo, I.-K. and Johnson, R. A. (2000). *Biometrika* 87(4), 954-959.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> rng = np.random.default_rng(1)
    >>> x = np.linspace(1, 10, 200)
    >>> y = np.exp(0.3 * x + rng.normal(0, 0.2, x.size))
    >>> unbend.suggest_power(y, x).label
    'log'
    """
    if _any_censored(y, censored):
        from .censored import suggest_power_censored
        return suggest_power_censored(y, x, censored, level=level, y_start=y_start, x_power=x_power,
                                      x_start=x_start, family=family, rungs=rungs)
    level = check_level(level)
    rungs = _rungs(rungs)
    yu, Xu, rows = _prepare(y, x)
    t_y = Reexpression(0.0, y_start, family=family)
    if family == "ladder":
        t_y.check(yu, "y")
    design = None
    if Xu is not None:
        t_x = Reexpression(x_power, x_start)
        t_x.check(Xu.ravel(), "x")
        design = lik.Design(t_x.apply(Xu))
    with np.errstate(over="ignore"):
        v = yu + (t_y.start if family == "ladder" else 0.0)
    if not np.all(np.isfinite(v)):
        raise UnbendError("y plus the start is too large for floating point; rescale y (change its units) or use a "
                          "smaller start.")
    prof = lik.BoxCoxProfile(v, design, family=family)
    est, lo, hi, top = lik.profile_max(prof, level)
    top += prof.offset
    given = "" if Xu is None else f" given x at power {x_power:g}"
    method = f"Box-Cox profile likelihood{given}" if family == "ladder" else f"Yeo-Johnson profile likelihood{given}"
    return _suggestion(est, lo, hi, level=level, what="y", method=method, n=yu.size,
                       skipped=rows.n_skipped, loglik=top, rungs=rungs, extra=rows.skipped_text())


def suggest_x_power(y, x, *, level=0.95, y_power=1.0, y_start=0.0, x_start=0.0,
                    rungs=None, censored=None) -> PowerSuggestion:
    """Suggest a power for x: the profile likelihood of the line over the x power.

    With y fixed at ``y_power``, the line of re-expressed y on ``x**alpha``
    is fitted for each alpha; the estimate maximises
    ``-n/2 log(RSS(alpha)/n)`` and the interval is the likelihood-ratio
    interval at ``level``. With several x columns they share one power.
    ``censored`` (True where y is an upper limit) switches to the censored
    likelihood (see :mod:`unbend.censored`).

    Returns
    -------
    PowerSuggestion

    Notes
    -----
    This is the maximum-likelihood estimate that the iteration of Box and
    Tidwell (1962) approaches; here it is found directly by maximising the
    profile likelihood, which also gives the interval.

    References
    ----------
    Box, G. E. P. and Tidwell, P. W. (1962). Transformation of the
    independent variables. *Technometrics* 4(4), 531-550.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> x = np.linspace(1, 50, 100)
    >>> y = 3 + 2 * np.log(x) + np.random.default_rng(2).normal(0, 0.05, 100)
    >>> unbend.suggest_x_power(y, x).label
    'log'
    """
    level = check_level(level)
    rungs = _rungs(rungs)
    if x is None:
        raise UnbendError("suggest_x_power needs x: give the x column (or block) as the second argument.")
    if _any_censored(y, censored):
        from .censored import suggest_x_power_censored
        return suggest_x_power_censored(y, x, censored, level=level, y_power=y_power, y_start=y_start,
                                        x_start=x_start, rungs=rungs)
    yu, Xu, rows = _prepare(y, x)
    t_y = Reexpression(y_power, y_start)
    t_y.check(yu, "y")
    t_x = Reexpression(0.0, x_start)
    t_x.check(Xu.ravel(), "x")
    with np.errstate(over="ignore"):
        xv = Xu + t_x.start
    if not np.all(np.isfinite(xv)):
        raise UnbendError("x plus the start is too large for floating point; rescale x (change its units) or use a "
                          "smaller start.")
    prof = lik.XPowerProfile(t_y.apply(yu), xv)
    est, lo, hi, top = lik.profile_max(prof, level)
    top += prof.offset
    cols = "" if Xu.shape[1] == 1 else f" (one power shared by {Xu.shape[1]} x columns)"
    return _suggestion(est, lo, hi, level=level, what="x",
                       method=f"profile likelihood over the x power (Box-Tidwell), y at power {y_power:g}{cols}",
                       n=yu.size, skipped=rows.n_skipped, loglik=top, rungs=rungs,
                       extra=rows.skipped_text())


def symmetry_power(values, *, level=0.95, start=0.0, family="ladder", rungs=None, censored=None) -> PowerSuggestion:
    """The power that makes one column most nearly normal (Box–Cox with no predictor).

    ``censored`` (True where a value is a detection limit it lies below) switches to the censored likelihood,
    as in :func:`suggest_power`.

    Returns
    -------
    PowerSuggestion

    References
    ----------
    Box, G. E. P. and Cox, D. R. (1964). *JRSS B* 26(2), 211-252.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> v = np.random.default_rng(3).lognormal(1.0, 0.8, 400)
    >>> unbend.symmetry_power(v).label
    'log'
    """
    s = suggest_power(values, None, level=level, y_start=start, family=family, rungs=rungs, censored=censored)
    return PowerSuggestion(**{**s.__dict__, "what": "values",
                              "method": s.method.replace("profile likelihood", "profile likelihood, no predictor")})


def _missing(label) -> bool:
    if label is None:
        return True
    try:
        if pd.isna(label):
            return True
    except (TypeError, ValueError):
        pass
    return str(label).strip() == ""


def spread_power(values, groups, *, level=0.95, start=0.0, rungs=None) -> PowerSuggestion:
    """Power that evens out spread across groups: log spread against log level.

    For each group the level is the median and the spread the interquartile
    range. The straight line ``log(spread) = a + b log(level)`` is fitted by
    least squares across groups; the power is ``1 - b`` and its interval
    comes from the t interval of ``b``.

    Parameters
    ----------
    values : array_like
    groups : array_like
        Group label for each value (numbers or text).

    Returns
    -------
    PowerSuggestion
        ``detail`` holds one row per group: group, n, level, spread.

    Notes
    -----
    Groups with fewer than 3 values, or with a level or spread that is not
    above 0, cannot enter the log-log line and are listed as skipped.

    References
    ----------
    Tukey, J. W. (1977). *Exploratory Data Analysis*, ch. 5 (spread versus level).
    Emerson, J. D. and Stoto, M. A. (1983). Transforming data. In Hoaglin,
    Mosteller and Tukey (eds.), *Understanding Robust and Exploratory Data
    Analysis*. Wiley.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> rng = np.random.default_rng(4)
    >>> g = np.repeat([1, 2, 3, 4, 5], 40)
    >>> v = g * 10 * rng.lognormal(0, 0.2, g.size)   # spread grows with level
    >>> unbend.spread_power(v, g).label
    'log'
    """
    level = check_level(level)
    rungs = _rungs(rungs)
    with np.errstate(over="ignore"):
        v = as_vector(values, "values") + check_number(start, "start")
    g = np.asarray(groups, dtype=object).reshape(-1)
    if g.size != v.size:
        raise UnbendError(f"values has {v.size} rows but groups has {g.size}; give ranges of the same length.")
    ok = np.isfinite(v) & np.array([not _missing(x) for x in g], dtype=bool)
    rows_skipped = int((~ok).sum())
    keys = np.array([str(k) for k in g[ok]], dtype=object)  # labels as text, whatever their type
    vv = v[ok]
    table = []
    for key in pd.unique(keys):
        sel = vv[keys == key]
        q1, med, q3 = np.percentile(sel, [25, 50, 75]) if sel.size else (np.nan,) * 3
        table.append((key, int(sel.size), float(med), float(q3 - q1)))
    detail = pd.DataFrame(table, columns=["group", "n", "level", "spread"])
    use = (detail["n"] >= 3) & (detail["level"] > 0) & (detail["spread"] > 0)
    detail["used"] = use
    if int(use.sum()) < 3:
        raise UnbendError(
            f"need at least 3 groups with 3 or more values and a level and spread above 0; found {int(use.sum())}. "
            "Check the group column, or add a start if values are 0 or below.")
    lx = np.log(detail.loc[use, "level"].to_numpy())
    ly = np.log(detail.loc[use, "spread"].to_numpy())
    if (lx.max() == lx.min()):
        raise UnbendError("every group has the same level (median), so spread cannot be related to level; "
                          "spread against level needs groups at different levels.")
    res = stats.linregress(lx, ly)
    gcount = lx.size
    if gcount > 2 and np.isfinite(res.stderr):
        tq = stats.t.ppf(0.5 + level / 2, gcount - 2)
        b_lo, b_hi = res.slope - tq * res.stderr, res.slope + tq * res.stderr
    else:
        b_lo, b_hi = -np.inf, np.inf
    est = 1.0 - res.slope
    extra = f"Slope of log spread on log level {res.slope:.3g} across {gcount} groups."
    if (~use).any():
        extra += f" {int((~use).sum())} group(s) could not be used (fewer than 3 values, or level or spread not above 0)."
    if rows_skipped:
        extra += f" {rows_skipped} row(s) skipped (value or group missing)."
    if gcount < 5:
        extra += " With so few groups the interval is wide."
    return _suggestion(est, 1.0 - b_hi, 1.0 - b_lo, level=level, what="values (spread)",
                       method="spread against level (log IQR on log median)", n=int(vv.size),
                       skipped=rows_skipped, loglik=np.nan, rungs=rungs, extra=extra, detail=detail)


#: Step either side of the current power when reading which way a profile likelihood rises.
_DIRECTION_STEP = 0.01


def likelihood_direction(yu: np.ndarray, Xu: np.ndarray, y_expr: Reexpression, x_expr: Reexpression,
                         which: str) -> int:
    """Which way the profile likelihood of y's power (``which='y'``) or x's power rises at the current power.

    The profiles are those of :func:`suggest_power` and :func:`suggest_x_power`
    (Box-Cox for y with x as fitted; the x-power profile with y as fitted),
    read on either side of the current power. +1 towards higher powers, -1
    towards lower, 0 when flat or when it cannot be computed (values at or
    below 0 after the start, Yeo-Johnson y, overflow).
    """
    h = _DIRECTION_STEP
    try:
        with np.errstate(all="ignore"):
            if which == "y":
                if y_expr.family != "ladder":
                    return 0
                v = yu + y_expr.start
                if not (np.all(np.isfinite(v)) and np.all(v > 0)):
                    return 0
                prof = lik.BoxCoxProfile(v, lik.Design(x_expr.apply(Xu)))
                p = y_expr.power
            else:
                xv = Xu + x_expr.start
                yt = y_expr.apply(yu)
                if not (np.all(np.isfinite(xv)) and np.all(xv > 0) and np.all(np.isfinite(yt))):
                    return 0
                prof = lik.XPowerProfile(yt, xv)
                p = x_expr.power
            d = prof.loglik(p + h) - prof.loglik(p - h)
    except (UnbendError, np.linalg.LinAlgError, FloatingPointError, ValueError):
        return 0
    return int(np.sign(d)) if np.isfinite(d) else 0
