"""Calibration: x read back from a measured y (inverse prediction) and detection limits from the line.

A calibration line is fitted to standards (known x, measured y) and then used
backwards: from the reading of an unknown sample to its x. When the line is
fitted after a re-expression, everything here happens on the re-expressed
scale, where the line is straight and the scatter even, and the answers are
taken back to original units end by end (every re-expression is increasing,
so the ends stay ends).

* :func:`fieller` is the closed form on the re-expressed scale: the estimate
  and the set of re-expressed x whose prediction interval (for the mean of m
  readings) contains the reading. It takes the line's summary numbers only
  (intercept, slope, residual SD, n, mean and sum of squares of re-expressed
  x, the t multiplier), so a sheet written in built-in formulas can mirror it
  cell for cell.
* :func:`inverse` turns readings into x in original units with that interval,
  flags estimates outside the standards, and says open ends in words.
* :func:`calibration_limits` gives the critical level, the detection limit and
  the quantification limit from the prediction band (Hubaux and Vos 1970;
  Currie 1968) and the 3.3·s/slope and 10·s/slope rules (ICH Q2(R1)).

References
----------
Fieller, E. C. (1954). Some problems in interval estimation. *Journal of the
Royal Statistical Society B* 16(2), 175-185.
Draper, N. R. and Smith, H. (1998). *Applied Regression Analysis*, 3rd ed.,
Wiley, section 3.2 (inverse regression).
Hubaux, A. and Vos, G. (1970). Decision and detection limits for linear
calibration curves. *Analytical Chemistry* 42(8), 849-855.
Currie, L. A. (1968). Limits for qualitative detection and quantitative
determination. *Analytical Chemistry* 40(3), 586-593.
ICH (2005). Q2(R1) Validation of analytical procedures: text and methodology,
section on detection and quantitation limits "based on the standard deviation
of the response and the slope".
"""
from __future__ import annotations

import functools
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from . import _dist as stats

from ._validation import FEW_ROWS, UnbendError, as_matrix, as_vector, check_level

__all__ = ["FiellerEnds", "fieller", "inverse", "inverse_columns", "CalibrationLimits", "calibration_limits",
           "CALIBRATION_CAUTION"]

#: Printed with every calibration result.
CALIBRATION_CAUTION = ("x read back from a reading is only as good as the calibration: check the residual plot of "
                       "the standards, treat readings outside the standards' range as extrapolation, and follow "
                       "your laboratory's validated method and local regulation for reporting limits.")

#: ICH Q2(R1) multipliers of s/slope (common practice).
ICH_DETECTION = 3.3
ICH_QUANTIFICATION = 10.0
#: Currie (1968): the quantification level is 10 standard deviations of the net signal.
CURRIE_QUANTIFICATION = 10.0


@functools.lru_cache(maxsize=256)
def _t(p: float, df: int) -> float:
    return float(stats.t.ppf(p, df))


# ----------------------------------------------------------------------------- closed form

@dataclass(frozen=True)
class FiellerEnds:
    """Inverse prediction on the re-expressed scale (arrays, one value per reading).

    Attributes
    ----------
    estimate : ndarray
        Re-expressed x where the line equals the reading.
    low, high : ndarray
        Ends of the set of re-expressed x whose prediction interval contains
        the reading; ``-inf`` / ``+inf`` when the set has no end that side
        (always so when ``g >= 1``).
    g : ndarray
        Fieller's ``g = (t s / (|slope| sqrt(sxx)))**2``; ``g < 1`` exactly when
        the slope differs from 0 at the level of ``t`` (then the set is the
        closed interval ``[low, high]``).
    gap_low, gap_high : ndarray
        For ``g > 1``: the set is everything except the open stretch
        ``(gap_low, gap_high)``; NaN when there is no such stretch (the set is
        then every x).
    """

    estimate: np.ndarray
    low: np.ndarray
    high: np.ndarray
    g: np.ndarray
    gap_low: np.ndarray
    gap_high: np.ndarray


def fieller(reading, *, intercept, slope, resid_sd, n, x_mean, sxx, t, replicates=1) -> FiellerEnds:
    """Fieller's interval for the x at which a straight line gives a reading.

    Everything is on the scale the line was fitted on (re-expressed y on
    re-expressed x). The interval is the set of x whose prediction interval
    for the mean of ``replicates`` new readings contains the reading:

    ``|reading - intercept - slope*x| <= t * resid_sd * sqrt(1/m + 1/n + (x - x_mean)**2 / sxx)``.

    Parameters
    ----------
    reading : array_like
        Reading (or mean of the ``m`` readings of one sample), re-expressed.
    intercept, slope, resid_sd : float
        The line and its residual standard deviation.
    n : int
        Number of standards the line was fitted to.
    x_mean, sxx : float
        Mean of the re-expressed x of the standards and their sum of squared
        deviations from it.
    t : float
        Student's t multiplier with n - 2 degrees of freedom (for a two-sided
        interval at level L, the quantile (1 + L) / 2).
    replicates : array_like of int
        m, readings averaged per sample.

    Returns
    -------
    FiellerEnds

    Notes
    -----
    With ``d = estimate - x_mean`` and ``g = t**2 s**2 / (slope**2 sxx)`` the
    ends are (Draper and Smith 1998, section 3.2)

    ``x_mean + (d +/- (t s / |slope|) sqrt(d**2 / sxx + (1 - g)(1/m + 1/n))) / (1 - g)``.

    When ``g >= 1`` the slope is not significant at this level: the set is
    every x, or every x outside the stretch between those two roots; it has
    no ends.

    References
    ----------
    Fieller, E. C. (1954). *JRSS B* 16(2), 175-185.
    Draper, N. R. and Smith, H. (1998). *Applied Regression Analysis*, 3rd ed., section 3.2.

    Examples
    --------
    >>> from unbend.calibration import fieller
    >>> e = fieller(5.0, intercept=1.0, slope=2.0, resid_sd=0.1, n=10, x_mean=2.0, sxx=20.0, t=2.306)
    >>> float(e.estimate[0])
    2.0
    >>> bool(e.low[0] < 2.0 < e.high[0])
    True
    """
    with np.errstate(all="ignore"):
        root = np.sqrt(np.asarray(sxx, dtype=float))
    return _fieller(reading, intercept, slope, resid_sd, n, x_mean, root, t, replicates)


def _fieller(reading, intercept, slope, resid_sd, n, x_mean, root, t, replicates) -> FiellerEnds:
    """:func:`fieller` given the square root of sxx (which a fit knows without squaring: no underflow)."""
    with np.errstate(all="ignore"):  # a flat line or overflow ends in non-finite values the caller words
        z = np.atleast_1d(np.asarray(reading, dtype=float))
        a, b, s, xm = (np.asarray(v, dtype=float) for v in (intercept, slope, resid_sd, x_mean))
        q = 1.0 / np.asarray(replicates, dtype=float) + 1.0 / np.asarray(n, dtype=float)
        root = np.asarray(root, dtype=float)
        bsx = b * root                                 # slope per standardised x unit
        d = (z - (a + b * xm)) / bsx                   # the estimate, standardised
        w = np.asarray(t, dtype=float) * s / np.abs(bsx)  # so that g = w**2
        g = np.broadcast_to(w * w, z.shape).astype(float)
        estimate = xm + d * root
        # sqrt(d**2 + (1 - g)(1/m + 1/n)) without squaring d (no overflow far from the standards)
        c = (1.0 - g) * q
        rc = np.sqrt(np.abs(c))
        ad = np.abs(d)
        disc_pos = (c >= 0) | (ad > rc)
        sq = np.where(c >= 0, np.hypot(d, rc), np.sqrt(np.maximum(ad - rc, 0.0)) * np.sqrt(ad + rc))
        half = w * sq
        e1 = xm + root * ((d - half) / (1.0 - g))
        e2 = xm + root * ((d + half) / (1.0 - g))
        lo, hi = np.fmin(e1, e2), np.fmax(e1, e2)
    closed = g < 1.0
    ok = np.isfinite(z) & np.isfinite(d)
    # the estimate always belongs to the set; rounding must not leave it a hair outside
    fin = closed & np.isfinite(estimate)
    lo = np.where(fin, np.fmin(lo, estimate), lo)
    hi = np.where(fin, np.fmax(hi, estimate), hi)
    low = np.where(closed, lo, -np.inf)
    high = np.where(closed, hi, np.inf)
    low[~ok] = np.nan
    high[~ok] = np.nan
    gap = ~closed & ok & disc_pos & np.isfinite(lo) & np.isfinite(hi)
    gap_low = np.where(gap, lo, np.nan)
    gap_high = np.where(gap, hi, np.nan)
    return FiellerEnds(estimate=np.where(ok, estimate, np.nan), low=low, high=high, g=g,
                       gap_low=gap_low, gap_high=gap_high)


# ----------------------------------------------------------------------------- helpers

def _line(fit):
    """The line's summary numbers for :func:`fieller` (one x only)."""
    if len(fit.x_names) != 1:
        raise UnbendError(f"reading x back from y needs a line with one x; this fit has {len(fit.x_names)} x columns "
                          f"({', '.join(fit.x_names)}). Fit y on the one x you want to read back.")
    mu, sc = float(fit._mu[0]), float(fit._sc[0])
    return dict(intercept=float(fit.coef[0]), slope=float(fit.coef[1]), resid_sd=float(fit.resid_sd), n=fit.n,
                x_mean=mu, root=np.sqrt(fit.n) * sc)  # root = sqrt(sxx), never squared (no underflow)


def _domain(expr) -> tuple[float, float, bool]:
    """(lowest, highest, highest excluded) re-expressed x the x re-expression can reach."""
    p = expr.power
    if p == 1.0 or p == 0.0 or (p > 0 and float(p).is_integer() and int(p) % 2 == 1):
        return -np.inf, np.inf, False
    if p > 0:
        return 0.0, np.inf, False   # a root or an even power: x + start = 0 gives 0
    return -np.inf, 0.0, True       # a negative power, applied as -(v**p): 0 only as x grows without end


def _check_replicates(replicates) -> int:
    if isinstance(replicates, (bool, np.bool_, str, bytes)):
        raise UnbendError(f"replicates must be a whole number of readings, 1 or more; got {replicates!r}.")
    try:
        r = float(replicates)
    except (TypeError, ValueError):
        raise UnbendError(f"replicates must be a whole number of readings, 1 or more; got {replicates!r}.") from None
    if not np.isfinite(r) or r < 1 or r != int(r) or r > 1e6:
        raise UnbendError(f"replicates must be a whole number of readings, 1 or more (such as 1 or 3); "
                          f"got {replicates!r}.")
    return int(r)


def _ndim(values) -> int:
    if hasattr(values, "columns"):
        return 2
    try:
        return int(np.ndim(values))
    except ValueError:  # ragged rows: a block (as_matrix says what is wrong)
        return 2


def samples(new_y, replicates: int = 1, name: str = "new_y") -> np.ndarray:
    """Readings as a block: one row per sample, one column per reading (NaN where not a number).

    How the two ways of giving readings are told apart (nothing is guessed):

    * one column (a 1-D array, list or Series; or a block one column wide):
      with ``replicates=1`` each value is one sample; with ``replicates=m > 1``
      it must hold exactly ``m`` values, the readings of one sample;
    * a block with ``m > 1`` columns: one row per sample, one column per
      reading; ``replicates`` must then equal ``m``.

    Anything else is refused with a message that says which to give.
    """
    m = _check_replicates(replicates)
    if _ndim(new_y) >= 2:
        M = as_matrix(new_y, name)
        if M.shape[1] == 1:
            col = M[:, 0]
        else:
            if m != M.shape[1]:
                raise UnbendError(
                    f"{name} is a block of {M.shape[0]} row(s) x {M.shape[1]} columns, read as one sample per row "
                    f"and one reading per column; set replicates={M.shape[1]} (got {m}), or give one column "
                    "with one reading per sample.")
            return M
    else:
        col = as_vector(new_y, name)
    if m == 1:
        return col[:, None]
    if col.size != m:
        raise UnbendError(
            f"replicates={m} but {name} holds {col.size} reading(s): give exactly {m} readings of one sample, or a "
            f"block with one row per sample and {m} columns (one reading per column).")
    return col[None, :]


def _join(notes: np.ndarray, mask: np.ndarray, text) -> None:
    """Append text (one string, or an array of strings) to the notes where mask holds."""
    if not mask.any():
        return
    add = text if isinstance(text, str) else np.asarray(text, dtype=object)[mask]
    cur = notes[mask]
    notes[mask] = np.where(cur == "", add, cur + "; " + np.asarray(add, dtype=object))


def _g(v: float) -> str:
    return f"{v:.4g}"


# ----------------------------------------------------------------------------- inverse

def inverse_columns(fit, new_y, level: float = 0.95, replicates: int = 1, *, name: str = "new_y") -> dict:
    """The columns of :func:`inverse` as a dict of arrays, without building a DataFrame (for speed).

    ``name`` is what the readings are called in messages.
    """
    with np.errstate(all="ignore"):  # unreachable values end in inf or NaN and a note, never a warning
        return _inverse_columns(fit, new_y, level, replicates, name)


def _inverse_columns(fit, new_y, level, replicates, name):
    line = _line(fit)
    level = check_level(level)
    R = samples(new_y, replicates, name)
    k, m = R.shape
    Z = fit.y_expr.apply(R)
    is_num = np.isfinite(R)
    count = is_num.sum(axis=1)
    bad_re = (is_num & ~np.isfinite(Z)).any(axis=1)
    usable = (count > 0) & ~bad_re
    zbar = np.where(usable, np.where(is_num, Z, 0.0).sum(axis=1) / np.maximum(count, 1), np.nan)
    tq = _t(0.5 + level / 2, fit.df_resid)
    e = _fieller(zbar, t=tq, replicates=np.maximum(count, 1), **line)
    dlo, dhi, dhi_open = _domain(fit.x_expr)
    inv = fit.x_expr.invert
    closed = e.g < 1.0

    # the estimate: where the line meets the reading, if the x re-expression reaches it
    est = e.estimate
    below = est < dlo
    above = (est >= dhi) if dhi_open else (est > dhi)
    x = np.where(np.isfinite(est) & ~below & ~above, inv(est), np.nan)
    x[~np.isfinite(x)] = np.nan
    u_min, u_max = (float(v) for v in fit.x_expr.apply(np.array([fit.x_min[0], fit.x_max[0]])))
    outside = usable & np.isfinite(est) & ((est < u_min) | (est > u_max))

    # the interval: the set of re-expressed x consistent with the reading, cut to what x can reach
    lo, hi = e.low.copy(), e.high.copy()
    gl, gh = e.gap_low, e.gap_high
    has_gap = np.isfinite(gl)
    piece1 = has_gap & (gl >= dlo)                           # (-inf, gap_low] meets the domain
    piece2 = has_gap & ((gh < dhi) if dhi_open else (gh <= dhi))  # [gap_high, inf) meets the domain
    lo = np.where(has_gap & ~piece1, gh, lo)
    hi = np.where(has_gap & ~piece2, gl, hi)
    gap = piece1 & piece2
    empty = usable & ((hi < dlo) | ((lo >= dhi) if dhi_open else (lo > dhi)))
    low_edge = usable & ~empty & (lo < dlo)                  # cut at the smallest x the power allows
    high_cut = (hi >= dhi) if dhi_open else (hi > dhi)       # past the largest re-expressed x (x without end)
    # an end at x' = -inf is x's own edge where the x re-expression has one (log or a negative power:
    # x = -start), and -inf only where x itself runs without end (raw, odd powers)
    low = inv(np.maximum(lo, dlo))
    high = np.where(high_cut | (hi == np.inf), np.inf, inv(hi))
    low[~usable | empty] = np.nan
    high[~usable | empty] = np.nan
    # in a closed interval every end is finite unless x grows without end (a negative power) or the
    # numbers overflow (a reading extremely far from the standards): the latter is said in words
    live = usable & ~empty & closed
    overflow = live & (~np.isfinite(low) | (~np.isfinite(high) & ~high_cut))
    low[overflow & ~np.isfinite(low)] = np.nan
    high[overflow & ~np.isfinite(high) & ~high_cut] = np.nan

    # notes, in words
    notes = np.full(k, "", dtype=object)
    nonum = count == 0
    if m == 1:
        _join(notes, nonum, "the reading is not a number")
    else:
        _join(notes, nonum, "no reading is a number")
        part = (count > 0) & (count < m)
        if part.any():
            _join(notes, part, np.array([f"{c} of {m} readings are numbers; the interval uses {c}" for c in count],
                                        dtype=object))
    _join(notes, (count > 0) & bad_re,
          f"a reading cannot be re-expressed as {fit.y_expr.label} of y, so this sample has no result")
    _join(notes, outside, "outside the calibration standards' x range: extrapolation")
    xlab = fit.x_expr.label
    edge = float(inv(np.array([dlo]))[0]) if np.isfinite(dlo) else -np.inf
    _join(notes, usable & np.isfinite(est) & below,
          f"the line reaches this reading only below x = {_g(edge)}, the smallest x that {xlab} of x allows, so there "
          "is no estimate")
    _join(notes, usable & np.isfinite(est) & above,
          f"the line levels off before this reading ({xlab} of x), so no finite x gives it and there is no estimate")
    flat = fit.coef[1] == 0.0
    _join(notes, usable & ~np.isfinite(est),
          "the line is flat, so no x gives this reading" if flat else
          "the estimate is beyond the range of floating-point numbers (the reading is extremely far from the "
          "standards)")
    weak = usable & ~closed & np.isfinite(est)
    if weak.any():
        t_slope = abs(float(fit.tvalues[1]))
        text = (f"no closed interval: the slope is not significant at the {level * 100:g}% level (its t is "
                f"{t_slope:.3g}, below the {tq:.3g} needed), so the x values consistent with this reading run "
                "without end")
        words = np.full(k, text, dtype=object)
        gx_lo, gx_hi = inv(gl), inv(gh)
        for i in np.flatnonzero(weak & gap & np.isfinite(gx_lo) & np.isfinite(gx_hi)):
            words[i] = f"{text} (every x except those between {_g(gx_lo[i])} and {_g(gx_hi[i])})"
        _join(notes, weak, words)
    _join(notes, usable & closed & empty, f"no x that {xlab} of x allows is consistent with this reading")
    _join(notes, usable & closed & ~empty & low_edge & np.isfinite(dlo),
          f"the interval reaches down to x = {_g(edge)}, the smallest x that {xlab} of x allows")
    _join(notes, live & high_cut, "the interval has no upper end: the band does not close as x grows")
    _join(notes, overflow, "an end of the interval is beyond the range of floating-point numbers")
    if fit.n < FEW_ROWS:
        _join(notes, np.ones(k, bool), f"only {fit.n} rows were used: treat with caution")

    y = R[:, 0].copy() if m == 1 else np.where(usable, fit.y_expr.invert(zbar), np.nan)
    return {"y": y, "readings": count, "x": x, "low": low, "high": high, "outside_range": outside,
            "note": notes.tolist()}


def inverse(fit, new_y, level: float = 0.95, replicates: int = 1) -> pd.DataFrame:
    """Read x back from measured y, with an interval, in original units.

    Parameters
    ----------
    fit : LineFit
        A line with one x (the calibration standards: known x, measured y).
    new_y : array_like
        Readings of unknown samples. One column: one reading per sample
        (``replicates=1``), or the ``replicates`` readings of one sample
        (then it must hold exactly that many). A block with ``m`` columns:
        one sample per row, one reading per column, with ``replicates=m``.
        Anything else is refused in words (see :func:`samples`). Readings
        that are not numbers are skipped and the note says how many were used.
    level : float
        Two-sided level of the interval.
    replicates : int
        m, readings per sample. Their mean on the re-expressed scale is used,
        and the interval allows for the mean of m readings (1/m in place of 1).

    Returns
    -------
    pandas.DataFrame
        One row per sample with columns ``y`` (the reading; for several, their
        re-expressed mean taken back), ``readings`` (how many were used),
        ``x`` (the estimate), ``low`` and ``high`` (the interval),
        ``outside_range`` (the estimate lies outside the standards' x range:
        extrapolation) and ``note``. An end that does not exist is ``-inf`` or
        ``+inf`` and the note says so in words; NaN where there is no answer.

    Notes
    -----
    The estimate inverts the line on the re-expressed scale and takes it back.
    The interval is the set of x whose prediction interval for the mean of m
    readings contains the reading (Fieller's interval, :func:`fieller`), found
    on the re-expressed scale and taken back end by end; it is lopsided in
    original units whenever x is re-expressed, and it is cut where the x
    re-expression ends (x + start = 0 for a root: a closed end said in the
    note; x growing without end for a negative power: no upper end). When the
    slope is not significant at the level the interval has no ends.

    References
    ----------
    Fieller, E. C. (1954). *JRSS B* 16(2), 175-185.
    Draper, N. R. and Smith, H. (1998). *Applied Regression Analysis*, 3rd ed., section 3.2.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> x = np.repeat([1.0, 2, 5, 10, 20, 50], 2)
    >>> y = 3.0 * x ** 0.8 * np.exp(np.random.default_rng(2).normal(0, 0.03, x.size))
    >>> r = unbend.fit(y, x, y_power=0, x_power=0).inverse([10.0, 200.0])
    >>> bool(r["low"].iloc[0] < r["x"].iloc[0] < r["high"].iloc[0])
    True
    >>> bool(r["outside_range"].iloc[1])
    True
    """
    return pd.DataFrame(inverse_columns(fit, new_y, level, replicates))


# ----------------------------------------------------------------------------- limits

_LIMIT_FIELDS = ("blank_y", "critical_y", "critical_x", "detection_x", "quantification_x", "ich_detection_x",
                 "ich_quantification_x")


@dataclass(frozen=True)
class CalibrationLimits:
    """Critical level, detection and quantification limits of a calibration line.

    Values are in original units (x for the limits, y for the blank and the
    critical response); NaN where a definition does not apply, with the reason
    in ``why[name]``.

    Attributes
    ----------
    level : float
        One-sided level of the decisions: alpha = beta = 1 - level.
    replicates : int
        Readings averaged per sample (and per blank).
    blank_y : float
        The line's response at the blank, x = 0.
    critical_y, critical_x : float
        Hubaux and Vos's decision level: the one-sided ``level`` prediction
        limit at the blank, and the x where the line reaches it.
    detection_x : float
        Hubaux and Vos's detection limit: the x whose opposite one-sided
        prediction limit equals the critical level.
    quantification_x : float
        Currie's 10 sigma: the x where the line is 10 standard errors of a
        reading at the blank (from the band) away from the blank.
    ich_detection_x, ich_quantification_x : float
        3.3 s/slope and 10 s/slope from the blank (ICH Q2(R1)).
    resid_sd, slope, slope_t : float
        On the re-expressed scale.
    why : dict
        name -> why that value is not defined.
    notes : tuple of str
    """

    level: float
    replicates: int
    blank_y: float
    critical_y: float
    critical_x: float
    detection_x: float
    quantification_x: float
    ich_detection_x: float
    ich_quantification_x: float
    resid_sd: float
    slope: float
    slope_t: float
    y_label: str
    x_label: str
    n: int
    n_skipped: int
    notes: tuple
    why: dict = field(default_factory=dict, compare=False)

    def rows(self) -> list[tuple[str, object, str]]:
        """Labelled rows (label, value, definition) for a three-column table."""
        a = 1.0 - self.level
        m = self.replicates
        mm = "one reading" if m == 1 else f"the mean of {m} readings"
        defs = {
            "blank_y": ("blank response, y (the line at x = 0)",
                        "the fitted line at the blank x = 0, taken back to y units; not a measured blank"),
            "critical_y": ("critical level, y (Hubaux-Vos 1970)",
                           f"one-sided {self.level * 100:g}% prediction limit for {mm} at the blank: a reading beyond "
                           f"it is declared detected (false-positive risk alpha = {a:g})"),
            "critical_x": ("critical level, x (Hubaux-Vos 1970)", "the x at which the line reaches the critical level"),
            "detection_x": ("detection limit, x (Hubaux-Vos 1970)",
                            f"the x whose one-sided {self.level * 100:g}% prediction limit on the blank's side equals "
                            f"the critical level: a sample there is detected with false-negative risk beta = {a:g}"),
            "quantification_x": ("quantification limit, x (Currie 1968, 10 sigma from the band)",
                                 f"the x at which the line is {CURRIE_QUANTIFICATION:g} standard errors of {mm} at the "
                                 "blank (s times the square root of 1/m + 1/n + leverage) away from the blank"),
            "ich_detection_x": ("detection limit, x (ICH Q2(R1): 3.3 s/slope)",
                                f"x = 0 plus {ICH_DETECTION:g} residual SDs divided by the slope (one reading; "
                                "replicates do not change it)"),
            "ich_quantification_x": ("quantification limit, x (ICH Q2(R1): 10 s/slope)",
                                     f"x = 0 plus {ICH_QUANTIFICATION:g} residual SDs divided by the slope (one "
                                     "reading; replicates do not change it)"),
        }
        out: list[tuple[str, object, str]] = [
            ("y re-expressed as", self.y_label, ""),
            ("x re-expressed as", self.x_label, ""),
            ("level (one-sided)", self.level, f"alpha = beta = {a:g}"),
            ("replicates per sample", m, "readings averaged on the re-expressed scale, per sample and per blank"),
        ]
        for name in _LIMIT_FIELDS:
            label, text = defs[name]
            value = getattr(self, name)
            if name in self.why:
                text = f"not defined: {self.why[name]}"
            out.append((label, value, text))
        out += [
            ("residual SD s (re-expressed scale)", self.resid_sd, "scatter of the standards about the line"),
            ("slope (re-expressed scale)", self.slope, ""),
            ("slope t", self.slope_t, "slope divided by its standard error"),
            ("rows used", self.n, ""),
            ("rows skipped", self.n_skipped, ""),
        ]
        out += [("note", nt, "") for nt in self.notes]
        out.append(("caution", CALIBRATION_CAUTION, ""))
        return out


def calibration_limits(fit, level: float = 0.95, replicates: int = 1) -> CalibrationLimits:
    """Critical level, detection and quantification limits from a calibration line.

    Parameters
    ----------
    fit : LineFit
        A line with one x (known x of the standards, measured y).
    level : float
        One-sided level of the decisions: alpha (false positive at the blank)
        = beta (false negative at the detection limit) = 1 - level.
    replicates : int
        Readings averaged per sample; the band allows for their mean.

    Returns
    -------
    CalibrationLimits

    Notes
    -----
    The blank is x = 0. Its response is the line at x = 0 on the re-expressed
    scale (not a measured blank, so a log y that cannot hold a zero reading
    still has a blank response). With ``h(u) = sqrt(1/m + 1/n + (u - u_mean)**2 / Suu)``
    on the re-expressed scale (u = re-expressed x, z = re-expressed y):

    * critical level (Hubaux and Vos 1970): ``z_C = line(u_0) + t_1 s h(u_0)``
      (minus for a falling line), ``t_1`` the one-sided quantile; the
      critical x is where the line reaches ``z_C``;
    * detection limit (Hubaux and Vos 1970): the x whose one-sided prediction
      limit towards the blank equals ``z_C`` (the far end of Fieller's
      interval for ``z_C`` with ``t_1``); it exists only when the slope is
      significant at the one-sided level;
    * quantification limit (Currie 1968): ``u_0 + 10 s h(u_0) / |slope|``;
    * ICH Q2(R1): ``u_0 + 3.3 s / |slope|`` and ``u_0 + 10 s / |slope|``.

    Each is taken back to original units. After a re-expression the s/slope
    rules are distances on the re-expressed x scale measured from the blank.
    When x = 0 cannot be re-expressed (a log or a negative power of x with no
    start) none of the x limits is defined, and the reason says so.

    References
    ----------
    Hubaux, A. and Vos, G. (1970). *Analytical Chemistry* 42(8), 849-855.
    Currie, L. A. (1968). *Analytical Chemistry* 40(3), 586-593.
    ICH (2005). Q2(R1) Validation of analytical procedures.

    Examples
    --------
    >>> import numpy as np, unbend
    >>> x = np.repeat([0.0, 1, 2, 4, 8], 2)
    >>> y = 0.5 + 2.0 * x + np.random.default_rng(3).normal(0, 0.1, x.size)
    >>> lim = unbend.fit(y, x).detection_limits()
    >>> bool(0 < lim.critical_x < lim.detection_x)
    True
    """
    with np.errstate(all="ignore"):
        return _limits(fit, level, replicates)


def _limits(fit, level, replicates):
    line = _line(fit)
    level = check_level(level)
    m = _check_replicates(replicates)
    a, b, s = (np.float64(line[k]) for k in ("intercept", "slope", "resid_sd"))
    n, mu, root = line["n"], np.float64(line["x_mean"]), np.float64(line["root"])
    t1 = _t(level, fit.df_resid)
    xlab, ylab = fit.x_expr.label, fit.y_expr.label
    dlo, dhi, dhi_open = _domain(fit.x_expr)
    invx, invy = fit.x_expr.invert, fit.y_expr.invert
    why: dict[str, str] = {}
    vals = dict.fromkeys(_LIMIT_FIELDS, np.nan)
    notes = []

    u0 = np.float64(fit.x_expr.apply(np.array([0.0]))[0])
    if not np.isfinite(u0):
        reason = (f"the blank (x = 0) cannot be re-expressed as {xlab} of x (a log or a negative power never "
                  "reaches x = 0); refit with an x start so that x = 0 has a place on the scale, or with x at a "
                  "power above 0")
        for name in _LIMIT_FIELDS:
            why[name] = reason
    else:
        h0 = np.sqrt(1.0 / m + 1.0 / n + ((u0 - mu) / root) ** 2)
        sg = 1.0 if b > 0 else -1.0
        z0 = a + b * u0
        zc = z0 + sg * t1 * s * h0
        vals["blank_y"] = float(invy(np.array([z0]))[0])
        vals["critical_y"] = float(invy(np.array([zc]))[0])

        def back(u, name):
            reach = (u < dhi) if dhi_open else (u <= dhi)
            v = float(invx(np.array([u]))[0]) if np.isfinite(u) and reach else np.inf
            if not np.isfinite(v):
                why[name] = (f"not reached: the line on the {xlab} scale of x levels off before it"
                             if np.isfinite(u) and not reach else "beyond the range of floating-point numbers")
                return np.nan
            return v

        uc = u0 + t1 * s * h0 / abs(b)
        vals["critical_x"] = back(uc, "critical_x")
        # detection: the far end of Fieller's interval for the reading z_C (one-sided t), written as a
        # step beyond u_C so that nothing is lost to rounding when the step is tiny
        w = t1 * s / abs(b * root)
        g = w * w
        if not g < 1.0:
            why["detection_x"] = (f"the slope is not significant at the one-sided {level * 100:g}% level (its t is "
                                  f"{abs(float(fit.tvalues[1])):.3g}, below the {t1:.3g} needed), so the band never "
                                  "separates from the blank")
        else:
            d = (uc - mu) / root
            half = w * np.hypot(d, np.sqrt((1.0 - g) * (1.0 / m + 1.0 / n)))
            vals["detection_x"] = back(uc + root * (half + d * g) / (1.0 - g), "detection_x")
        vals["quantification_x"] = back(u0 + CURRIE_QUANTIFICATION * s * h0 / abs(b), "quantification_x")
        vals["ich_detection_x"] = back(u0 + ICH_DETECTION * s / abs(b), "ich_detection_x")
        vals["ich_quantification_x"] = back(u0 + ICH_QUANTIFICATION * s / abs(b), "ich_quantification_x")
        for name in ("blank_y", "critical_y"):
            if not np.isfinite(vals[name]):
                why[name] = f"beyond what {ylab} of y can reach"
                vals[name] = np.nan
        if fit.x_min[0] > 0:
            notes.append(f"x = 0 lies below the lowest standard ({_g(float(fit.x_min[0]))}): the limits extrapolate "
                         "the line down to the blank; a blank standard in the calibration avoids this.")
        if b < 0:
            notes.append("The line falls as x grows, so the critical level lies below the blank's response.")
    if not (fit.x_expr.is_identity and fit.y_expr.is_identity):
        notes.append(f"The band is built on the re-expressed scale ({ylab} of y on {xlab} of x) and every limit is "
                     "taken back to original units; 3.3 s/slope and 10 s/slope are distances on the re-expressed x "
                     "scale, measured from the blank.")
    if fit.y_expr.family == "ladder" and fit.y_expr.power <= 0 and fit.y_expr.start == 0:
        notes.append(f"{ylab.capitalize()} of y cannot hold a reading of 0: the blank's response is read from the "
                     "line at x = 0, and readings are compared with the critical level in y units.")
    if fit.n < FEW_ROWS:
        notes.append(f"Only {fit.n} rows were used: the limits are rough.")
    return CalibrationLimits(level=level, replicates=m, resid_sd=float(s), slope=float(b), slope_t=float(fit.tvalues[1]),
                             y_label=ylab, x_label=xlab, n=fit.n, n_skipped=fit.n_skipped, notes=tuple(notes),
                             why=why, **vals)
