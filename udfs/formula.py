"""A fitted line written as a formula in the spreadsheet's own built-in functions.

The text uses only LN, EXP, POWER, MAX and arithmetic, so a colleague without
the add-in can paste it next to the data and it recalculates.
"""
from __future__ import annotations

import math
import re

from unbend import UnbendError
from unbend.predicting import smearing_terms

__all__ = ["model_formula", "num", "reexpress_text", "invert_text"]

_CELL = re.compile(r"^\$?[A-Za-z]{1,3}\$?[0-9]{1,7}$|^[A-Za-z_][A-Za-z0-9_.]*$")


def num(v: float) -> str:
    """A number written with all its digits, as a formula literal."""
    v = float(v)
    if not math.isfinite(v):
        raise UnbendError("the fitted line has a value that is not a finite number; check the data.")
    s = format(v, ".17g")
    return f"({s})" if s.startswith("-") else s


def reexpress_text(arg: str, power: float, start: float, log10: bool = False) -> str:
    """Formula text for the ladder re-expression of ``arg``."""
    v = arg if start == 0 else f"({arg}+{num(start)})"
    if power == 1.0:
        return v
    if power == 0.0:
        return f"LOG10({v})" if log10 else f"LN({v})"
    if power == 0.5:
        return f"SQRT({v})"
    if power > 0:
        return f"POWER({v},{num(power)})"
    return f"(-POWER({v},{num(power)}))"


def invert_text(z: str, power: float, start: float, log10: bool = False) -> str:
    """Formula text for the inverse re-expression of ``z`` (back to original units)."""
    if power == 1.0:
        out = z
    elif power == 0.0:
        out = f"POWER(10,{z})" if log10 else f"EXP({z})"
    elif power > 0:
        p = float(power)
        odd = p.is_integer() and int(p) % 2 == 1
        out = f"SIGN({z})*POWER(ABS({z}),{num(1 / p)})" if odd else f"POWER(MAX({z},0),{num(1 / p)})"
    else:
        out = f"POWER(MAX(-({z}),0),{num(1 / power)})"  # past the reachable end: #DIV/0!, like the engine's inf
    return out if start == 0 else f"{out}-{num(start)}"


def model_formula(fit, x_cell: str = "A2", what: str = "median") -> str:
    """The fitted line as a native formula of one x cell.

    Parameters
    ----------
    fit : unbend.LineFit
        A fit with one x column.
    x_cell : str
        Cell reference (``B7``, ``$B$7``) or a defined name for the x input.
    what : {'median', 'mean'}
        'median' is the back-transformed line; 'mean' adds Duan's smearing
        correction (a factor for log y; the residual moments for square root,
        cube root and 1/4 power; nothing is needed for raw y).

    Returns
    -------
    str
        Text beginning with '='.
    """
    if len(fit.x_names) != 1:
        raise UnbendError("a formula can be written for one x column only; fit one x at a time.")
    ref = str(x_cell).strip().lstrip("=")
    if not _CELL.match(ref):
        raise UnbendError(f"x_cell must be a cell reference such as B2 or $B$2 (as text); got {x_cell!r}.")
    xt = fit.x_expr
    yt = fit.y_expr
    if yt.family != "ladder":
        raise UnbendError("a formula can be written for ladder powers only, not Yeo-Johnson.")
    a, b = fit.coef
    eta = f"{num(a)}+{num(b)}*{reexpress_text(ref, xt.power, xt.start, xt.log10)}"
    if what == "median":
        return "=" + invert_text(eta, yt.power, yt.start, yt.log10)
    if what != "mean":
        raise UnbendError("what must be median or mean.")
    if getattr(fit, "n_censored", 0):
        return _censored_mean_formula(fit, eta)
    terms = smearing_terms(fit)
    if terms is None:
        raise UnbendError(f"the mean has no short formula for y at {yt.label}; use what=median, or the portable "
                          "prediction sheet, whose smearing sum runs over the residual column.")
    kind, val = terms
    if kind == "factor":
        body = invert_text(eta, yt.power, 0.0, yt.log10)
        return f"={body}*{num(val)}" + (f"-{num(yt.start)}" if yt.start else "")
    k = len(val) - 1
    if k == 1:
        return f"={eta}" + (f"-{num(yt.start)}" if yt.start else "")
    parts = []
    for j in range(k + 1):
        if j == 1:
            continue  # the residuals of a line with an intercept average exactly 0
        coef = math.comb(k, j) * val[j]
        if k - j == 0:
            parts.append(num(coef))
        else:
            parts.append(("" if coef == 1.0 else f"{num(coef)}*") + f"POWER({eta},{k - j})")
    body = "+".join(parts)
    return f"={body}" + (f"-{num(yt.start)}" if yt.start else "")


def _censored_mean_formula(fit, eta: str) -> str:
    """The mean of a censored fit in built-in functions: the normal-theory expression where one is short.

    Smearing needs every row's residual, and censored rows have none, so the mean is that of
    :func:`unbend.censored.normal_mean`: raw y the line itself, log y the median times ``exp(s^2/2)``
    (``s`` the SD the intervals use; base 10: ``exp((s ln 10)^2/2)``). Other powers have no short
    formula (the back-transform is integrated numerically), so they are refused in words.
    """
    yt = fit.y_expr
    s = float(fit.resid_sd)
    if yt.power == 1.0:
        return f"={eta}" + (f"-{num(yt.start)}" if yt.start else "")
    if yt.power == 0.0:
        factor = math.exp(0.5 * (s * math.log(10.0)) ** 2) if yt.log10 else math.exp(0.5 * s * s)
        body = invert_text(eta, yt.power, 0.0, yt.log10)
        return f"={body}*{num(factor)}" + (f"-{num(yt.start)}" if yt.start else "")
    raise UnbendError(f"the mean of a fit with values below a limit has no short formula for y at {yt.label} (it is "
                      "found by numerical integration); use what=median here, or UNBEND_PREDICT with what=mean.")
