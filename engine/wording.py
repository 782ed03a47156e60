"""Every sentence the engine writes, in one place: verdicts, advice, notes and slope readings.

The numbers come from the modules that compute them; this module turns them
into short plain sentences. The rules behind the words:

* A test that does not reject says "no clear sign of ..." with its p-value,
  never that the line "holds" or that nothing is "needed": a check that
  finds nothing has not shown the line to be right.
* Advice on which way to move follows the bulging rule of Mosteller and Tukey
  (1977): the shape of the bend (the sign of Tukey's squared term) and the
  sign of the slope say which way y and x should move on the ladder, and the
  advice names the next rung to try, never the rung a variable is already at.
  The rule only applies to a relation that keeps going one way, so no
  direction is given when the slope is not clearly different from 0.
* A slope is read in units the reader knows and every number in the reading
  can be reproduced from the fit's own predictions (the tests do that).

The cut-offs the words rest on live with the code that applies them
(:mod:`unbend.diagnostics`, :mod:`unbend.power`, :mod:`unbend.predicting`,
:mod:`unbend._validation`); the README quotes them and a test holds the two
together.

References
----------
Mosteller, F. and Tukey, J. W. (1977). *Data Analysis and Regression*.
Addison-Wesley, ch. 6 (straightening curves; the bulging rule).
Tukey, J. W. (1977). *Exploratory Data Analysis*. Addison-Wesley, ch. 5-6.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

from .express import LADDER, _lowest_allowed, rung_label

__all__ = ["Bend", "p_words", "next_rung", "bulge_moves", "verdict", "scan_words", "slope_reading", "explain",
           "line_words", "interval_words", "r2_original_words", "mean_caution", "rung_choice_words",
           "fitted_rung_words"]


# ----------------------------------------------------------------------------- small pieces
def p_words(pv: float) -> str:
    """A p-value as printed: 'p < 0.001' or 'p = 0.037'."""
    return "p < 0.001" if pv < 0.001 else f"p = {pv:.3f}"


def num(v: float, digits: int = 4) -> str:
    """A number for a sentence; overflow is said in words."""
    v = float(v)
    if np.isnan(v):
        return "an amount too extreme to compute"
    if np.isinf(v):
        return "more than 1e308 (too large to show)" if v > 0 else "less than -1e308 (too large to show)"
    return f"{v:.{digits}g}"


def _and(names) -> str:
    names = [str(n) for n in names]
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:] if text else text


def of(power: float, name: str, *, start: float = 0.0, log10: bool = False, family: str = "ladder") -> str:
    """'the log of flow', 'flow itself (raw)', 'the square root of (count + 0.5)'."""
    if family != "ladder":
        return f"the {rung_label(power, family=family)} of {name}"
    if power == 1.0 and not start:
        return f"{name} itself (raw)"
    inner = f"({name} + {start:g})" if start else name
    return f"the {rung_label(power, log10=log10)} of {inner}"


def interval_words(low: float, high: float) -> str:
    """An interval in words, saying so when an end is open."""
    if np.isfinite(low) and np.isfinite(high):
        return f"{low:.3g} to {high:.3g}"
    if np.isfinite(low):
        return f"{low:.3g} and above, with no upper end"
    if np.isfinite(high):
        return f"{high:.3g} and below, with no lower end"
    return "no end in either direction"


# ----------------------------------------------------------------------------- the bulging rule
def next_rung(power: float, move: int, rungs=LADDER):
    """The next rung of the ladder above (``move`` = +1) or below (-1) ``power``; None past the end.

    Never the rung ``power`` is already at: a power between rungs moves to
    the nearest rung in that direction.
    """
    if move > 0:
        up = [r for r in rungs if r > power + 1e-12]
        return min(up) if up else None
    if move < 0:
        down = [r for r in rungs if r < power - 1e-12]
        return max(down) if down else None
    return None


def bulge_moves(shape: float, slope_sign: float) -> tuple[int, int]:
    """Which way y and x should move on the ladder, by the bulging rule.

    Parameters
    ----------
    shape : float
        +1 when the residuals bow up at both ends (the curve is convex: the
        sign of the squared term in Tukey's one-degree-of-freedom test), -1
        when they bow down.
    slope_sign : float
        Sign of the slope of the line (0 when there is no single slope).

    Returns
    -------
    (y_move, x_move) : tuple of int
        +1 up the ladder (towards square), -1 down (towards log and
        reciprocal), 0 no advice. A curve that bows up has its bulge on the
        low-y side, so y moves down; its bulge is on the high-x side when the
        line rises and on the low-x side when it falls, so x moves with the
        sign of the slope.

    References
    ----------
    Mosteller, F. and Tukey, J. W. (1977). *Data Analysis and Regression*, ch. 6.
    """
    s = int(np.sign(shape)) if np.isfinite(shape) else 0
    t = int(np.sign(slope_sign)) if np.isfinite(slope_sign) else 0
    return -s, s * t


@dataclass(frozen=True)
class Bend:
    """What the verdict needs to turn a bend into advice.

    Attributes
    ----------
    y_power, x_power : float
        Powers the line was fitted at.
    slope_sign : float
        Sign of the slope with one x column; 0 with several (the advice is
        then for y only, since the bend is measured against the fitted value).
    trend_p : float
        p-value of the line's slope (one x) or of all slopes together (F
        test, several x). The bulging rule needs a relation that keeps going
        one way, so no direction is given when this is not below the
        curvature level.
    n_x : int
        Number of x columns.
    y_name, x_name : str
    y_family : str
    y_lik, x_lik : int
        Which way the profile likelihood of y's power (and of x's) rises at
        the fitted power: +1 up, -1 down, 0 unknown. A rung is advised only
        where the bend and the likelihood agree; otherwise the advice says the
        likelihood points the other way (it also weighs spread and skew).
    y_low, x_low : float
        Smallest value of y (and of x) plus its start, so the advice can say
        when the rung it names needs a start first.
    """

    y_power: float
    x_power: float
    slope_sign: float
    trend_p: float
    n_x: int = 1
    y_name: str = "y"
    x_name: str = "x"
    y_family: str = "ladder"
    y_lik: int = 0
    x_lik: int = 0
    y_low: float = float("nan")
    x_low: float = float("nan")


def _end_words(name: str, power: float, move: int) -> str:
    way = "up" if move > 0 else "down"
    return f"{name} is already at {rung_label(power)}, the end of the ladder {way}"


def _needs_start(power: float, low: float, name: str) -> str:
    """'' when every value can take ``power``; else a clause saying a start is needed first."""
    bound, strict = _lowest_allowed(power, "ladder")
    if not np.isfinite(low) or low > bound or (low == bound and not strict):
        return ""
    return f"{name} has values {'at or below' if strict else 'below'} 0, so add a start first"


def _against_words(name: str) -> str:
    return f"the likelihood for the power of {name} points the other way"


def _y_option(bend: Bend, move: int):
    """(words for the next y rung to try, or None; the reason when None)."""
    if bend.y_lik and bend.y_lik != move:
        return None, _against_words(bend.y_name)
    if bend.y_family != "ladder":
        return f"a {'higher' if move > 0 else 'lower'} Yeo-Johnson power of {bend.y_name}", ""
    r = next_rung(bend.y_power, move)
    if r is None:
        return None, _end_words(bend.y_name, bend.y_power, move)
    return of(r, bend.y_name), _needs_start(r, bend.y_low, bend.y_name)


def bend_advice(shape: float, bend: Bend | None, fan_move: int = 0) -> str:
    """The advice sentence for residuals that curve (the bulging rule, Mosteller and Tukey 1977).

    ``fan_move`` is the way the spread check would move y (-1 when the spread
    grows with the level, +1 when it shrinks, 0 when the spread check found
    nothing). A rung is advised only where the profile likelihood of that
    power rises the same way (``bend.y_lik``, ``bend.x_lik``); the likelihood
    weighs bend and spread together, so it also settles a fan that pulls y the
    other way. Where it cannot be computed and the two pull apart, only x is
    advised.
    """
    return _bend(shape, bend, fan_move)[0]


def _bend(shape: float, bend: Bend | None, fan_move: int = 0):
    """(advice, a rung of y was advised, the bend and the fan pull y opposite ways)."""
    from .diagnostics import ALPHA
    if bend is None:
        return "A power of y or x may straighten it; the scan compares them.", False, False
    if not (np.isfinite(bend.trend_p) and bend.trend_p < ALPHA):
        pw = p_words(bend.trend_p) if np.isfinite(bend.trend_p) else "no test possible"
        return (f"The slope is not clearly different from 0 ({pw}), so the bend gives no direction for a power: "
                "a relation that rises and then falls cannot be straightened by one."), False, False
    y_move, x_move = bulge_moves(shape, bend.slope_sign)
    # a fan that pulls y the other way: the likelihood for y's power weighs both and decides; without it, no y advice
    conflict = fan_move != 0 and y_move != 0 and fan_move != y_move and not bend.y_lik
    why = []
    if conflict:
        y_opt = None
        why.append(f"the fan pulls {bend.y_name} the other way")
    else:
        y_opt, reason = _y_option(bend, y_move)
        why += [reason] if reason else []
    x_opt = None
    if bend.n_x > 1:
        why.append("for the x columns, see the scan")
    elif x_move:
        r = next_rung(bend.x_power, x_move)
        if bend.x_lik and bend.x_lik != x_move:
            why.append(_against_words(bend.x_name))
        elif r is None:
            why.append(_end_words(bend.x_name, bend.x_power, x_move))
        else:
            x_opt = of(r, bend.x_name)
            start = _needs_start(r, bend.x_low, bend.x_name)
            why += [start] if start else []
    opts = [o for o in (y_opt, x_opt) if o]
    tail = f" ({'; '.join(why)})" if why else ""
    if opts:
        return f"To straighten it, try {opts[0]} next{', or ' + opts[1] if len(opts) > 1 else ''}{tail}.", \
            y_opt is not None, conflict
    return f"No rung to try follows from the bend{tail}; look at the residual plot.", False, conflict


def _fan_advice(move: int, bend: Bend | None, said_y: bool) -> str:
    if bend is None:
        return f"Move y {'lower' if move < 0 else 'higher'} on the ladder. "
    if said_y:
        return f"Moving {bend.y_name} {'down' if move < 0 else 'up'} the ladder, as above, also tends to even it out. "
    opt, reason = _y_option(bend, move)
    if opt is None:
        return f"({_cap(reason)}.) "
    return f"Try {opt} next{' (' + reason + ')' if reason else ''}. "


# ----------------------------------------------------------------------------- the verdict
def verdict(r2, curvature, spread, normality, n, pattern=None, *, bend: Bend | None = None) -> str:
    """A few plain sentences on what the residual checks found.

    A check that finds nothing is reported as "no clear sign", with its
    p-value; it does not show the line is right. Advice on which way to move
    follows the bulging rule (:func:`bend_advice`).
    """
    from .diagnostics import NORMALITY_LARGE_N
    from ._validation import FEW_ROWS
    parts = []
    strong = np.isfinite(r2) and r2 >= 0.8
    lead = f"R\u00b2 is {r2:.3f}, yet the residuals" if strong else "The residuals"
    curved = curvature.ran and not curvature.passed
    drifts = not curved and pattern is not None and pattern.ran and not pattern.passed
    fans = spread.ran and not spread.passed
    fan_move = (-1 if spread.direction >= 0 else 1) if fans else 0
    said_y = conflict = False
    if curved:
        advice, said_y, conflict = _bend(curvature.direction, bend, fan_move)
        parts.append(f"{lead} curve (curvature test {p_words(curvature.pvalue)}): the line misses a bend. {advice}")
    elif drifts:
        parts.append(f"{lead} drift up and down with the level (pattern check {p_words(pattern.pvalue)}): the line "
                     "misses a shape such as a kink or a levelling off; the scan compares other rungs.")
    if fans:
        grow = ("the spread grows with the fitted value" if spread.direction >= 0
                else "the spread shrinks as the fitted value grows")
        head = ("The residuals also fan out" if parts else
                (f"R\u00b2 is {r2:.3f}, yet the residuals fan out" if strong else "The residuals fan out"))
        advice = "" if conflict else _fan_advice(fan_move, bend, said_y)
        parts.append(f"{head} (spread test {p_words(spread.pvalue)}): {grow}. {advice}"
                     "Intervals assume an even spread.")
    if not parts:
        bits = []
        if curvature.ran:
            bits.append(f"curvature ({p_words(curvature.pvalue)})")
        if pattern is not None and pattern.ran:
            bits.append(f"drift with level ({p_words(pattern.pvalue)})")
        if spread.ran:
            bits.append(f"change of spread ({p_words(spread.pvalue)})")
        if bits:
            parts.append(f"No clear sign of {_and(bits).replace(' and ', ' or ')} in the residuals. These checks "
                         "cannot show that the line is right; look at the residual plot.")
        else:
            parts.append("Too few rows to check the residuals for curvature or spread.")
    if normality.ran and not normality.passed:
        text = (f"The {normality.name} test rejects normal residuals ({p_words(normality.pvalue)}): intervals for "
                "one new y assume them; look for outliers or skew.")
        if n >= NORMALITY_LARGE_N:
            text += (f" With {n} rows this test flags even small departures, which matter little for the line and "
                     "its median.")
        parts.append(text)
    if n < FEW_ROWS:
        parts.append(f"Only {n} rows: the checks have little power.")
    return " ".join(parts)


# ----------------------------------------------------------------------------- the scan
def scan_words(curvature, pattern, spread, *, likelihood_why: str = "", r2_original: float = 0.0) -> str:
    """The short verdict of one scan row."""
    if not curvature.ran:
        text = "too few rows to check"
    else:
        bad = []
        if not curvature.passed:
            bad.append("curve")
        elif pattern.ran and not pattern.passed:
            bad.append("drift with level")
        if spread.ran and not spread.passed:
            bad.append("fan out")
        text = ("residuals " + " and ".join(bad)) if bad else "no clear curvature, drift or change of spread"
    if likelihood_why:
        text += f"; no likelihood to rank it by ({likelihood_why})"
    if np.isfinite(r2_original) and r2_original < 0:
        text += "; the line taken back to original units misses y badly (R\u00b2 there below 0)"
    return text


def no_likelihood_words(has_zero: bool, exact: bool, start_hint: float | None, y_start: float) -> str:
    """Why a scan row has no likelihood, in a clause."""
    if exact:
        return "the line fits every point exactly"
    if has_zero:
        who = "y plus its start" if y_start else "y"
        hint = f"; add a start such as {start_hint:g}" if start_hint else "; add a start"
        return f"{who} has a zero{hint}"
    return "it cannot be computed at this power"


# ----------------------------------------------------------------------------- choosing a rung
def rung_choice_words(kind: str, what: str, *, rung: float = 1.0, low: float = 0.0, high: float = 0.0,
                      estimate: float = 0.0) -> str:
    """The note of :func:`unbend.choose_rung`."""
    if kind == "one inside":
        return f"1 (raw) lies inside the interval: the data give no clear reason to re-express {what}."
    if kind == "inside":
        return f"{rung_label(rung)} is the ladder rung inside the interval nearest the estimate."
    return (f"no rung lies inside the interval ({interval_words(low, high)}); {rung_label(rung)} is the nearest. "
            f"Consider the power {estimate:.3g} itself, or a start.")


def wide_words(covered: int, total: int, low: float, high: float) -> str:
    return (f"The interval ({interval_words(low, high)}) covers {covered} of the {total} rungs: the data cannot "
            "choose between them.")


def few_rows_words(n: int) -> str:
    return f"Only {n} usable rows: treat the suggestion as weak."


def search_edge_words(estimate: float) -> str:
    return (f"The likelihood keeps rising to the edge of the search (power {estimate:+.0f}): the data do not pin "
            "the power down; look for an outlier, or add a start or more rows.")


def fitted_rung_words(suggestion, fitted_power: float, other_power: float, table, name: str = "") -> str:
    """Whether a one-power suggestion's rung is the rung a fit uses, and if not, why not, from the scan.

    Parameters
    ----------
    suggestion : PowerSuggestion
        For y (``what == 'y'``) or for x.
    fitted_power : float
        The power of the same variable in the fit.
    other_power : float
        The power of the other variable in the fit (the suggestion was made with it).
    table : pandas.DataFrame
        The scan of the same data (:func:`unbend.scan`).
    name : str
        The variable's name in the sentence (default: ``suggestion.what``).
    """
    from .diagnostics import ALPHA, PATTERN_ALPHA
    name = name or suggestion.what
    if suggestion.rung == fitted_power:
        return "This is the rung the fit uses."
    mine, other = ("y_power", "x_power") if suggestion.what == "y" else ("x_power", "y_power")
    pick = lambda p: table[(table[mine] == p) & (table[other] == other_power)]  # noqa: E731
    rs, rf = pick(suggestion.rung), pick(fitted_power)
    lab_s, lab_f = rung_label(suggestion.rung), rung_label(fitted_power)
    head = f"The fit uses {lab_f} for {name} instead"
    if rs.empty or rf.empty:
        return f"{head}: it uses the powers it was given."
    rs, rf = rs.iloc[0], rf.iloc[0]
    if rs["rank"] < rf["rank"]:
        return f"{head}: it uses the powers it was given, not the scan's first pair."
    if str(rs["verdict"]).startswith("not possible"):
        return f"{head}: with {lab_s} for {name} the line cannot be fitted ({rs['verdict'][len('not possible: '):]})."
    if not np.isfinite(rs["loglik"]) and np.isfinite(rf["loglik"]):
        return f"{head}: with {lab_s} for {name} there is no likelihood to rank the pair by."

    def bent(r):
        return (np.isfinite(r["curvature_p"]) and r["curvature_p"] < ALPHA) or (
            np.isfinite(r["pattern_p"]) and r["pattern_p"] < PATTERN_ALPHA)
    if bent(rs) and not bent(rf):
        return f"{head}: with {lab_s} for {name} the residuals curve or drift, so the scan ranks that pair lower."
    text = (f"{head}: the scan ranks that pair higher on the likelihood ({num(rf['loglik'])} against "
            f"{num(rs['loglik'])} with {lab_s})")
    if suggestion.rung == 1.0 and suggestion.low <= 1.0 <= suggestion.high:
        text += "; the one-power rule keeps raw whenever 1 lies inside the interval"
    return text + "."


# ----------------------------------------------------------------------------- predictions
#: The words of a mean that cannot be trusted (the portable sheet writes the same words in formulas).
MEAN_UNBOUNDED = ("the mean is unbounded at this y power (some residuals take the line past the end of the scale): "
                  "use the median")
MEAN_NOT_COMPUTED = "the mean cannot be computed here: use the median"
MEAN_UNTRUSTED = "the mean is not to be trusted ({why}): use the median"
MEAN_FAR_WORDS = "more than {far:g} times the median"
MEAN_FEW_WORDS = "it rests on a few of the {n} residuals"


def mean_caution(*, unbounded: bool, n: int, far: bool, few: bool, past_end: bool = False) -> str:
    """The note for a mean that cannot be trusted; '' when it can."""
    from .predicting import MEAN_FAR
    if unbounded:
        return MEAN_UNBOUNDED if past_end else MEAN_NOT_COMPUTED
    why = ([MEAN_FAR_WORDS.format(far=MEAN_FAR)] if far else []) + ([MEAN_FEW_WORDS.format(n=n)] if few else [])
    return MEAN_UNTRUSTED.format(why="; ".join(why)) if why else ""


# ----------------------------------------------------------------------------- reading the line
def line_words(fit) -> str:
    """'the log of load on the log of flow' (or 'load on flow, with no re-expression')."""
    xs = _and(fit.x_names)
    ty, tx = fit.y_expr, fit.x_expr
    if ty.is_identity and tx.is_identity:
        return f"{fit.y_name} on {xs}, with no re-expression"
    ypart = fit.y_name if ty.is_identity else of(ty.power, fit.y_name, start=ty.start, log10=ty.log10,
                                                 family=ty.family)
    xpart = xs if tx.is_identity else of(tx.power, xs if len(fit.x_names) == 1 else f"each of {xs}",
                                         start=tx.start, log10=tx.log10)
    return f"{ypart} on {xpart}"


def _per_reversed(name: str) -> str:
    """'km_per_litre' -> 'litre per km': the reciprocal of a rate read as the rate the other way round."""
    m = re.fullmatch(r"\s*(.+?)(?:_per_|\s+per\s+|/)(.+?)\s*", name)
    if not m:
        return ""
    a, b = (s.replace("_", " ").strip() for s in m.groups())
    return f"{b} per {a}" if a and b else ""


def _y_quantity(ty, name: str):
    """(words for the quantity the slope changes, sign, multiplicative?) for the y side."""
    s = ty.start
    inner = f"({name} + {s:g})" if s else name
    if ty.family != "ladder":
        return f"the {rung_label(ty.power, family=ty.family)} of {name}", 1.0, False
    p = ty.power
    if p == 1.0:
        return name, 1.0, False  # a start on raw y cancels in a difference
    if p == 0.0:
        return (f"the typical {name}" if not s else f"the typical value of {name} + {s:g}"), 1.0, True
    if p > 0:
        return f"the {rung_label(p)} of {inner}", 1.0, False
    # negative powers are applied as -(v ** p): the quantity the reader knows is v ** p itself (1/v, ...)
    if p == -1.0:
        q = f"1/{inner}"
        other = "" if s else _per_reversed(name)
        q += f" ({other})" if other else ""
    elif p == -0.5:
        q = f"1/\u221a{inner}"
    else:
        q = f"{inner} to the power {p:g}"
    return q, -1.0, False


def _x_step(tx, name: str):
    """(words for one step of x, change of the re-expressed x per step, is the step exact in x?)."""
    if tx.power == 1.0:
        return f"each 1 unit more of {name}", 1.0, True
    if tx.power == 0.0:
        step = math.log(2.0) / (math.log(10.0) if tx.log10 else 1.0)
        what = name if not tx.start else f"{name} + {tx.start:g}"
        return f"each doubling of {what}", step, not tx.start
    p = tx.power
    inner = f"({name} + {tx.start:g})" if tx.start else name
    if p > 0:
        return f"each 1 unit more of the {rung_label(p)} of {inner}", 1.0, False
    q = f"1/{inner}" if p == -1.0 else (f"1/\u221a{inner}" if p == -0.5 else f"{inner} to the power {p:g}")
    return f"each 1 unit more of {q}", -1.0, False


def reading_points(fit, j: int) -> tuple[float, float]:
    """The two x values a slope is read between: the quartiles of x column ``j`` (its ends if they tie)."""
    v = fit.residuals[fit.x_names[j]].to_numpy(dtype=float)
    a, b = np.quantile(v, [0.25, 0.75])
    if not a < b:
        a, b = float(v.min()), float(v.max())
    return float(a), float(b)


def reading_rows(fit, j: int) -> np.ndarray:
    """The two new-x rows of the two-point reading: x column ``j`` at its quartiles, the others at their medians."""
    k = len(fit.x_names)
    base = np.array([float(np.median(fit.residuals[nm].to_numpy(dtype=float))) for nm in fit.x_names])
    a, b = reading_points(fit, j)
    rows = np.tile(base, (2, 1))
    rows[0, j], rows[1, j] = a, b
    return rows if k > 1 else rows[:, :1]


def _one_slope(fit, j: int) -> str:
    nm = fit.x_names[j]
    b = float(fit.coef[1 + j])
    k = len(fit.x_names)
    ty, tx = fit.y_expr, fit.x_expr
    per, step, x_exact = _x_step(tx, nm)
    hold = ", holding the other x fixed" if k > 1 else ""
    yq, ysign, mult = _y_quantity(ty, fit.y_name)
    with np.errstate(over="ignore", invalid="ignore"):
        d = b * step
    if mult:
        base = 10.0 if ty.log10 else math.e
        with np.errstate(over="ignore"):
            m = float(np.power(base, d))
        pct = (m - 1.0) * 100.0
        tail = f" ({num(abs(pct), 3)}% {'more' if pct >= 0 else 'less'})" if np.isfinite(m) else ""
        text = f"With {per}{hold}, {yq} is multiplied by {num(m)}{tail}."
        if tx.power == 0.0 and not tx.start and not ty.start and ty.family == "ladder":
            e = b * (1.0 if ty.log10 == tx.log10 else (math.log(10.0) if ty.log10 else 1.0 / math.log(10.0)))
            with np.errstate(over="ignore"):
                one = float((np.power(1.01, e) - 1.0) * 100.0)
            if np.isfinite(one):
                text += (f" So {fit.y_name} varies as {nm} to the power {num(e, 3)}: 1% more {nm} goes with "
                         f"{num(abs(one), 3)}% {'more' if one >= 0 else 'less'} {fit.y_name}.")
    else:
        c = d * ysign
        if c == 0:
            text = f"With {per}{hold}, {yq} does not change."
        else:
            text = f"With {per}{hold}, {yq} {'rises' if c > 0 else 'falls'} by {num(abs(c))}."
    y_exact = ty.family == "ladder" and (ty.power == 1.0 or (ty.power == 0.0 and not ty.start))
    if not (y_exact and x_exact):
        text += " " + _two_points(fit, j)
    return _cap(text)


def _two_points(fit, j: int) -> str:
    nm = fit.x_names[j]
    rows = reading_rows(fit, j)
    from .predicting import prediction_columns
    med = prediction_columns(fit, rows)["median"]
    a, b = rows[0, j], rows[1, j]
    others = " (other x at their medians)" if len(fit.x_names) > 1 else ""
    if not np.all(np.isfinite(med)):
        return (f"Between {nm} = {num(a)} and {num(b)} the line leaves the range this y power can reach, so the "
                "typical value cannot be read there.")
    return (f"Along the line, the typical {fit.y_name} is {num(med[0])} at {nm} = {num(a)} and {num(med[1])} at "
            f"{nm} = {num(b)}{others}.")


def slope_reading(fit) -> str:
    """What each slope means in original units, in plain words.

    One sentence per x column: the change per step of x (one unit; a
    doubling for log x) in the quantity the reader knows: y itself for raw
    y, the typical y as a ratio for log y, ``1/y`` for the reciprocal (the
    line is on ``-1/y``, so the sign is turned back), the square root of y
    for the square root. With several x columns each reading holds the other
    x fixed. Where the change in y itself depends on where you are (other y
    powers, a start, other x powers), the reading adds the typical y at the
    lower and upper quartiles of x, from the fit's own predictions.
    """
    return " ".join(_one_slope(fit, j) for j in range(len(fit.x_names)))


def explain(fit) -> str:
    """A few plain sentences about a fit, with cautions."""
    from ._validation import FEW_ROWS
    parts = [f"A straight line of {line_words(fit)}.", slope_reading(fit), fit.verdict]
    if fit.n < FEW_ROWS:
        parts.append(f"Only {fit.n} rows were usable, so treat all of this as tentative.")
    lo = ", ".join(f"{a:.4g} to {b:.4g}" for a, b in zip(fit.x_min, fit.x_max))
    parts.append(f"Predictions outside the observed x range ({lo}) are extrapolation.")
    return " ".join(p for p in parts if p)


def r2_original_words(fit) -> str:
    """Why R² in original units is below 0 (or blank); '' when it is 0 or above."""
    r = fit.r2_original
    if np.isfinite(r) and r >= 0:
        return ""
    y = fit.residuals["y"].to_numpy(dtype=float)
    with np.errstate(all="ignore"):
        back = fit.y_expr.invert(fit.residuals["fitted"].to_numpy(dtype=float))
    top = float(np.max(y))
    span = float(np.ptp(y)) if y.size else 0.0
    tail = " Judge the line on the re-expressed scale and by its residual plot."
    if not np.all(np.isfinite(back)):
        return ("blank: somewhere the line is past the end this y power can reach, so it has no value in original "
                "units there." + tail)
    if not np.isfinite(r):
        return "blank: it cannot be computed for these values (the sums overflow)." + tail
    if float(np.max(back)) > top + span:
        return (f"below 0: taken back to original units the line shoots past the data (up to {num(np.max(back))} "
                f"where the largest y is {num(top)}); near the end of the {fit.y_expr.label} scale small steps "
                "become huge." + tail)
    return "below 0: taken back to original units the line misses y by more than y varies about its mean." + tail
