"""Re-expressions: the ladder of powers, any real power, and Yeo–Johnson.

On the ladder, power ``p`` sends a value ``v = y + start`` to

* ``v**p``            for ``p > 0``
* ``ln(v)``           for ``p == 0`` (``log10(v)`` with ``log10=True``)
* ``-(v**p)``         for ``p < 0``, so that larger ``y`` still gives a larger
  re-expressed value and the direction of a relationship is kept.

Every re-expression here is increasing and has an exact inverse
(:func:`unexpress`).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._validation import DomainError, UnbendError, as_vector, check_power

__all__ = [
    "LADDER",
    "EXTRA_RUNGS",
    "rung_label",
    "Reexpression",
    "express",
    "unexpress",
    "propose_start",
]

#: The six rungs of the ladder of powers, from strongest pull-up to strongest pull-down.
LADDER = (2.0, 1.0, 0.5, 0.0, -0.5, -1.0)
#: Optional rungs beyond the usual six.
EXTRA_RUNGS = (3.0, 1.0 / 3.0, -2.0)

_NAMES = {
    3.0: "cube",
    2.0: "square",
    1.0: "raw",
    0.5: "square root",
    1.0 / 3.0: "cube root",
    0.0: "log",
    -0.5: "reciprocal root",
    -1.0: "reciprocal",
    -2.0: "reciprocal square",
}

FAMILIES = ("ladder", "yeo-johnson")


def rung_label(power: float, *, log10: bool = False, family: str = "ladder") -> str:
    """Plain name of a power: 'square root', 'log', ... or 'power 0.37'."""
    p = float(power)
    if family == "yeo-johnson":
        return f"Yeo-Johnson {_fmt(p)}"
    for k, name in _NAMES.items():
        if abs(p - k) < 1e-12:
            if name == "log" and log10:
                return "log10"
            return name
    return f"power {_fmt(p)}"


def _pow(v: np.ndarray, p: float) -> np.ndarray:
    """v ** p, with the common ladder exponents done by faster exact routes."""
    if p == 2.0:
        return v * v
    if p == 0.5:
        return np.sqrt(v)
    if p == -1.0:
        return 1.0 / v
    if p == -2.0:
        return 1.0 / (v * v)
    if p == -0.5:
        return 1.0 / np.sqrt(v)
    if p == 3.0:
        return v * v * v
    return np.power(v, p)


def _fmt(p: float) -> str:
    return f"{p:.4g}"


def _is_odd_integer(p: float) -> bool:
    """Positive odd whole powers (1, 3, 5 ...) accept values of either sign."""
    return p > 0 and float(p).is_integer() and int(p) % 2 == 1


def _lowest_allowed(power: float, family: str) -> tuple[float, bool]:
    """(bound, strict): values must be > bound (strict) or >= bound."""
    if family == "yeo-johnson" or power == 1.0 or _is_odd_integer(power):
        return -np.inf, False
    if power > 0:
        return 0.0, False
    return 0.0, True


def propose_start(values, power: float = 0.0) -> float:
    """A start that makes every value usable for ``power``.

    The start lifts the smallest value to half the smallest positive gap
    between distinct values (so counts with zeros get a start of 0.5, a
    common practice), or to 1 when all values are equal.

    Examples
    --------
    >>> propose_start([0, 1, 2, 5])
    0.5
    """
    power = check_power(power)
    v = as_vector(values)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return 0.0
    lo = float(v.min())
    bound, strict = _lowest_allowed(power, "ladder")
    if lo > bound or (lo == bound and not strict):
        return 0.0
    u = np.unique(v)
    with np.errstate(over="ignore"):
        gap = float(np.min(np.diff(u))) if u.size > 1 else 2.0
    if not np.isfinite(gap):
        gap = 2.0
    start = -lo + gap / 2.0
    # make sure rounding cannot leave the smallest value on the boundary
    while np.isfinite(start) and not (lo + start > bound):
        start = start * 2.0 if start > 0 else abs(lo) + 1.0
    if not np.isfinite(start):
        raise UnbendError("the values are too large to shift by a start; rescale them (divide by a power of 10) "
                          "first.")
    return float(start)


@dataclass(frozen=True)
class Reexpression:
    """One re-expression: a power (or Yeo–Johnson lambda), a start, and its inverse.

    Parameters
    ----------
    power : float
        Ladder power (2, 1, 1/2, 0, -1/2, -1, ... or any real number), or the
        Yeo–Johnson lambda when ``family='yeo-johnson'``.
    start : float
        Added to every value before re-expressing (ladder only).
    log10 : bool
        Use base-10 logs for power 0.
    family : {'ladder', 'yeo-johnson'}
    """

    power: float = 1.0
    start: float = 0.0
    log10: bool = False
    family: str = "ladder"

    def __post_init__(self):
        object.__setattr__(self, "power", check_power(self.power))
        try:
            s = float(self.start)
        except (TypeError, ValueError):
            raise UnbendError(f"start must be a number; got {self.start!r}.") from None
        if not np.isfinite(s):
            raise UnbendError(f"start must be a finite number; got {self.start!r}.")
        object.__setattr__(self, "start", s)
        if self.family not in FAMILIES:
            raise UnbendError(f"family must be one of {', '.join(FAMILIES)}; got {self.family!r}.")

    @property
    def label(self) -> str:
        lab = rung_label(self.power, log10=self.log10, family=self.family)
        if self.start and self.family == "ladder":
            lab += f" of (value + {self.start:g})"
        return lab

    @property
    def is_identity(self) -> bool:
        return self.family == "ladder" and self.power == 1.0 and self.start == 0.0

    # ------------------------------------------------------------------ checks
    def check(self, values: np.ndarray, name: str = "values") -> None:
        """Raise DomainError, proposing a start, if some finite value cannot be re-expressed."""
        if self.family != "ladder":
            return
        bound, strict = _lowest_allowed(self.power, self.family)
        with np.errstate(over="ignore"):
            v = values[np.isfinite(values)] + self.start
        bad = (v <= bound) if strict else (v < bound)
        nbad = int(bad.sum())
        if nbad == 0:
            return
        need = "above 0" if strict else "0 or above"
        lo = float(v.min() - self.start)
        start = propose_start(values[np.isfinite(values)] + self.start, self.power) + self.start
        cur = f" after adding the start {self.start:g}" if self.start else ""
        what = "value" if name == "values" else f"{name} value"
        raise DomainError(
            f"{rung_label(self.power, log10=self.log10)} needs every {what} {need}{cur}; "
            f"{nbad} of {v.size} {'is' if nbad == 1 else 'are'} not (smallest {lo:g}). Add a start of {start:g} "
            f"(start={start:g}), choose power 1, or use the Yeo-Johnson family for mixed signs.",
            proposed_start=start,
        )

    # --------------------------------------------------------------- transform
    def apply(self, values) -> np.ndarray:
        """Re-express; values outside the domain give NaN (use :meth:`check` first)."""
        y = as_vector(values) if not isinstance(values, np.ndarray) else np.array(values, dtype=float)
        p = self.power
        if self.family == "yeo-johnson":
            return _yj(y, p)
        with np.errstate(over="ignore"):
            v = y + self.start
        with np.errstate(all="ignore"):
            if p == 1.0:
                out = v
            elif p == 0.0:
                out = np.log10(v) if self.log10 else np.log(v)
                out = np.where(v > 0, out, np.nan)
            elif _is_odd_integer(p):
                out = _pow(v, p)
            elif p > 0:
                out = np.where(v >= 0, _pow(v, p), np.nan)
            else:
                out = np.where(v > 0, -_pow(v, p), np.nan)
        return out

    def invert(self, values) -> np.ndarray:
        """Exact inverse of :meth:`apply`.

        Re-expressed values beyond what the re-expression can reach (below 0
        for a square root, 0 or above for a negative power) are taken to the
        edge of the original range: ``-start`` and ``+inf`` respectively.
        This is what a back-transformed interval end needs.
        """
        z = np.asarray(values, dtype=float)  # never written to: every branch makes a new array
        p = self.power
        if self.family == "yeo-johnson":
            return _yj_inv(np.array(z), p)
        with np.errstate(all="ignore"):
            if p == 1.0:
                v = z.copy()
            elif p == 0.0:
                v = np.power(10.0, z) if self.log10 else np.exp(z)
            elif _is_odd_integer(p):
                v = np.sign(z) * np.power(np.abs(z), 1.0 / p)
            elif p > 0:
                v = _pow(np.maximum(z, 0.0), 1.0 / p)  # NaN stays NaN
            else:
                w = -z
                v = np.where(w > 0, _pow(np.where(w > 0, w, 1.0), 1.0 / p), np.inf)
                v[np.isnan(z)] = np.nan
        if self.start:
            v -= self.start
        return v

    def derivative(self, values) -> np.ndarray:
        """d(apply)/dy, used for the Jacobian of the likelihood."""
        y = np.asarray(values, dtype=float)
        p = self.power
        if self.family == "yeo-johnson":
            with np.errstate(invalid="ignore"):
                return np.where(y >= 0, np.power(y + 1.0, p - 1.0), np.power(1.0 - y, 1.0 - p))
        v = y + self.start
        with np.errstate(all="ignore"):
            if p == 0.0:
                d = 1.0 / v / (np.log(10.0) if self.log10 else 1.0)
            else:
                d = abs(p) * np.power(np.abs(v), p - 1.0)
        return d


def _yj(y: np.ndarray, lam: float) -> np.ndarray:
    out = np.full_like(y, np.nan)
    pos = y >= 0
    neg = y < 0
    with np.errstate(all="ignore"):
        if abs(lam) < 1e-12:
            out[pos] = np.log1p(y[pos])
        else:
            out[pos] = np.expm1(lam * np.log1p(y[pos])) / lam
        if abs(lam - 2.0) < 1e-12:
            out[neg] = -np.log1p(-y[neg])
        else:
            out[neg] = -np.expm1((2.0 - lam) * np.log1p(-y[neg])) / (2.0 - lam)
    return out


def _yj_inv(z: np.ndarray, lam: float) -> np.ndarray:
    out = np.full_like(z, np.nan)
    pos = z >= 0
    neg = z < 0
    with np.errstate(all="ignore"):
        if abs(lam) < 1e-12:
            out[pos] = np.expm1(z[pos])
        else:
            base = 1.0 + lam * z[pos]
            out[pos] = np.where(base > 0, np.expm1(np.log1p(lam * z[pos]) / lam), np.inf)
        if abs(lam - 2.0) < 1e-12:
            out[neg] = -np.expm1(-z[neg])
        else:
            q = 2.0 - lam
            base = 1.0 - q * z[neg]
            out[neg] = np.where(base > 0, -np.expm1(np.log1p(-q * z[neg]) / q), -np.inf)
    return out


def express(values, power, start=0.0, *, log10: bool = False, family: str = "ladder") -> np.ndarray:
    """Re-express values by a power on the ladder (or Yeo–Johnson).

    Parameters
    ----------
    values : array_like
        Numbers to re-express. Not changed.
    power : float
        2 (square), 1 (raw), 0.5 (square root), 0 (log), -0.5 (reciprocal
        root), -1 (reciprocal), or any real power. Negative powers are applied
        as ``-(value ** power)`` so order is kept.
    start : float, optional
        Added before re-expressing, for data with zeros or negatives.
    log10 : bool, optional
        Base-10 log for power 0 (natural log by default).
    family : {'ladder', 'yeo-johnson'}, optional
        'yeo-johnson' uses the Yeo–Johnson transformation with lambda
        ``power``; it accepts values of either sign and ignores ``start``.

    Returns
    -------
    numpy.ndarray
        The re-expressed values; non-numbers stay NaN.

    Raises
    ------
    DomainError
        When a value cannot be re-expressed (log of 0, say); the message
        proposes a start, available as ``err.proposed_start``.

    Notes
    -----
    The ladder of powers and its use for straightening is set out by Tukey
    (1977). Yeo–Johnson extends the Box–Cox family to values of any sign.

    References
    ----------
    Tukey, J. W. (1977). *Exploratory Data Analysis*. Addison-Wesley, ch. 5-6.
    Yeo, I.-K. and Johnson, R. A. (2000). A new family of power
    transformations to improve normality or symmetry. *Biometrika* 87(4), 954-959.

    Examples
    --------
    >>> import unbend
    >>> unbend.express([1.0, 4.0, 9.0], 0.5)
    array([1., 2., 3.])
    >>> unbend.express([1.0, 2.0, 4.0], -1)
    array([-1.  , -0.5 , -0.25])
    """
    t = Reexpression(power, start, log10, family)
    v = as_vector(values)
    t.check(v)
    return t.apply(v)


def unexpress(values, power, start=0.0, *, log10: bool = False, family: str = "ladder") -> np.ndarray:
    """Take re-expressed values back to original units (the exact inverse of :func:`express`).

    Examples
    --------
    >>> import unbend
    >>> unbend.unexpress(unbend.express([3.0, 7.5], 0, start=1.0), 0, start=1.0)
    array([3. , 7.5])
    """
    t = Reexpression(power, start, log10, family)
    return t.invert(as_vector(values))
