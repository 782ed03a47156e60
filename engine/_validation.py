"""All input checking for the engine, in one place.

Every function here copies what it is given (the caller's arrays are never
changed) and raises :class:`UnbendError` with a message that says what is
wrong and what to do about it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "UnbendError",
    "DomainError",
    "as_vector",
    "as_matrix",
    "usable_rows",
    "check_level",
    "check_power",
    "check_number",
    "check_varies",
    "Rows",
    "MIN_ROWS",
    "FEW_ROWS",
    "as_censored",
]

#: Fewest rows a straight line with an interval can be fitted to.
MIN_ROWS = 3
#: Below this many usable rows every result carries a caution (common practice).
FEW_ROWS = 8


class UnbendError(ValueError):
    """Raised when the input cannot be used; the message says what to do."""


class DomainError(UnbendError):
    """A re-expression needs values it was not given (for example log of 0).

    Attributes
    ----------
    proposed_start : float
        A start that, added to every value, makes the re-expression possible.
    """

    def __init__(self, message: str, proposed_start: float):
        super().__init__(message)
        self.proposed_start = float(proposed_start)


def _numeric_array(values, name: str) -> np.ndarray:
    """A new float array of the same shape; every cell that is not a real number becomes NaN.

    One rule for every input type: ints and floats (Python, numpy, pandas)
    are numbers; text (even "12"), booleans, dates, times and missing values
    are not. Infinite values stay infinite here and are skipped later as
    non-finite.
    """
    if not isinstance(values, (list, tuple, np.ndarray)) and not hasattr(values, "dtype") \
            and not hasattr(values, "dtypes") and not hasattr(values, "__len__"):
        values = [values]  # one cell: a date, a timestamp or another lone object
    if hasattr(values, "to_numpy") and not isinstance(values, np.ndarray):  # pandas objects
        kinds = {getattr(d, "kind", "O") for d in (values.dtypes if hasattr(values, "columns") else [values.dtype])}
        if kinds <= set("fiu"):
            values = values.to_numpy(dtype=float, na_value=np.nan)
        else:  # dates, booleans, text or a mix: judged cell by cell
            values = values.to_numpy(dtype=object)
    if isinstance(values, np.ndarray):
        kind = values.dtype.kind
        if kind in "fiu":
            with np.errstate(over="ignore"):
                return values.astype(float)  # a copy
        if kind != "O":  # bool, text, dates, durations, complex: not numbers
            return np.full(values.shape, np.nan)
        obj = values
    else:
        if isinstance(values, (list, tuple)) and values and isinstance(values[0], (list, tuple)):
            widths = {len(r) if isinstance(r, (list, tuple)) else -1 for r in values}
            if len(widths) > 1:
                raise UnbendError(f"the rows of {name} have different numbers of cells; give a rectangular "
                                  "block (one column per predictor).")
        try:  # fast path: numpy infers a numeric type; bools could hide only where a value is 0 or 1
            guess = np.array(values)
        except (TypeError, ValueError, OverflowError):
            guess = None
        if guess is not None and guess.dtype.kind in "fi" and guess.dtype.itemsize == 8:
            hits = np.argwhere((guess == 0) | (guess == 1))
            if not any(isinstance(_at(values, tuple(ix)), (bool, np.bool_)) for ix in hits.tolist()):
                return guess.astype(float, copy=False)
        try:
            obj = np.array(values, dtype=object)
        except (TypeError, ValueError):
            raise UnbendError(f"{name} could not be read as a column or block of numbers.") from None
    if obj.size == 0:
        return np.zeros(obj.shape)
    return np.vectorize(_to_float, otypes=[float])(obj)


def _at(values, index):
    for i in index:
        values = values[i]
    return values


def as_vector(values, name: str = "values") -> np.ndarray:
    """Return a new 1-D float array; text and other non-numbers become NaN."""
    if values is None:
        raise UnbendError(f"{name} is empty; give a column of numbers.")
    if np.isscalar(values) or isinstance(values, (np.generic,)):
        values = [values]
    arr = _numeric_array(values, name)
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1:
        raise UnbendError(f"{name} must be one column of numbers; got a block of shape {arr.shape}.")
    return arr


def as_matrix(x, name: str = "x") -> np.ndarray:
    """Return a new 2-D float array, one column per predictor."""
    if x is None:
        raise UnbendError(f"{name} is empty; give a column of numbers.")
    if np.isscalar(x) or isinstance(x, np.generic):
        x = [x]
    arr = _numeric_array(x, name)
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise UnbendError(f"{name} must be a column, or a block with one column per predictor; got shape {arr.shape}.")
    if arr.shape[1] == 0:
        raise UnbendError(f"{name} has no columns; give at least one column of numbers.")
    return arr


def _to_float(v) -> float:
    if v is None or isinstance(v, (bool, np.bool_, str, bytes)):
        return np.nan
    if isinstance(v, (int, float, np.integer, np.floating)):
        try:
            return float(v)
        except OverflowError:  # an integer beyond the float range
            return np.nan
    return np.nan


def check_number(value, name: str) -> float:
    """A finite number, or UnbendError saying what is expected."""
    if isinstance(value, (bool, np.bool_)) or value is None:
        raise UnbendError(f"{name} must be a number; got {value!r}.")
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        raise UnbendError(f"{name} must be a number; got {value!r}.") from None
    if not np.isfinite(v):
        raise UnbendError(f"{name} must be a finite number; got {value!r}.")
    return v


def check_varies(y: np.ndarray, name: str = "y") -> None:
    """Refuse a column whose usable values are all the same."""
    if y.size and (y.max() == y.min()):
        raise UnbendError(f"{name} does not vary (every {name} value is {y[0]:g}); there is nothing to straighten "
                          f"or fit. Check that the {name} range is the one you meant.")


@dataclass(frozen=True)
class Rows:
    """Which rows were used, and why the others were skipped."""

    used: np.ndarray  # boolean mask over the input rows
    skipped: tuple  # ((row number counted from 1, reason), ...)

    @property
    def n_used(self) -> int:
        return int(self.used.sum())

    @property
    def n_skipped(self) -> int:
        return len(self.skipped)

    def skipped_text(self, limit: int = 5) -> str:
        """A short sentence naming the skipped rows, or '' when none were."""
        if not self.skipped:
            return ""
        shown = "; ".join(f"row {r}: {why}" for r, why in self.skipped[:limit])
        more = f"; and {len(self.skipped) - limit} more" if len(self.skipped) > limit else ""
        return f"{len(self.skipped)} row(s) skipped ({shown}{more})."


def usable_rows(y: np.ndarray, X: np.ndarray | None = None, *, need: int = MIN_ROWS,
                y_name: str = "y", x_name: str = "x") -> Rows:
    """Rows where y and every x are finite numbers; too few raises UnbendError."""
    ok_y = np.isfinite(y)
    ok = ok_y.copy()
    if X is not None:
        if X.shape[0] != y.shape[0]:
            raise UnbendError(
                f"{y_name} has {y.shape[0]} rows but {x_name} has {X.shape[0]}; give ranges of the same length.")
        ok_x = np.isfinite(X).all(axis=1)
        ok &= ok_x
    bad = np.flatnonzero(~ok)
    skipped = []
    for i in bad[:10000]:
        if not ok_y[i] and (X is None or not ok_x[i]):
            why = f"{y_name} and {x_name} are not numbers"
        elif not ok_y[i]:
            why = f"{y_name} is not a number"
        else:
            why = f"{x_name} is not a number"
        skipped.append((int(i) + 1, why))
    if len(bad) > 10000:
        skipped.append((int(bad[10000]) + 1, f"and {len(bad) - 10000} further rows without numbers"))
    rows = Rows(used=ok, skipped=tuple(skipped))
    if rows.n_used < need:
        both = f"both {y_name} and {x_name} are numbers" if X is not None else f"{y_name} is a number"
        raise UnbendError(f"need at least {need} rows where {both}; found {rows.n_used}.")
    return rows


def check_level(level) -> float:
    try:
        lv = float(level)
    except (TypeError, ValueError):
        raise UnbendError("level must be a number between 0 and 1, such as 0.95.") from None
    if not (0.0 < lv < 1.0):
        raise UnbendError(f"level must be between 0 and 1 (such as 0.95); got {level!r}.")
    return lv


def check_power(power, name: str = "power") -> float:
    try:
        p = float(power)
    except (TypeError, ValueError):
        raise UnbendError(f"{name} must be a number such as 1, 0.5, 0 (log) or -1; got {power!r}.") from None
    if not np.isfinite(p) or abs(p) > 100:
        raise UnbendError(f"{name} must be a number between -100 and 100; got {power!r}.")
    return p


def as_censored(censored, n: int, name: str = "censored") -> np.ndarray | None:
    """A new boolean array of length ``n`` (True where y is an upper limit), or None.

    Accepts booleans, and the numbers 0 and 1, as a list, array or Series;
    anything else (text, blanks, other numbers) is refused with a message,
    since a row whose censoring is unknown cannot be used silently either way.
    """
    if censored is None:
        return None
    if isinstance(censored, (bool, np.bool_)) or np.isscalar(censored):
        raise UnbendError(f"{name} must be one True/False per row of y (True where y is an upper limit, such as "
                          "a value reported as '<0.5'); got a single value.")
    if hasattr(censored, "to_numpy") and not isinstance(censored, np.ndarray):
        censored = censored.to_numpy()
    try:  # lists are read cell by cell (numpy would turn [False, "<"] into text throughout)
        arr = censored if isinstance(censored, np.ndarray) else np.array(censored, dtype=object)
    except (TypeError, ValueError):
        raise UnbendError(f"{name} could not be read; give a column of True/False, one per row of y.") from None
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1:
        raise UnbendError(f"{name} must be one column of True/False; got a block of shape {arr.shape}.")
    if arr.size != n:
        raise UnbendError(f"y has {n} rows but {name} has {arr.size}; give one True/False per row of y.")
    if arr.dtype.kind == "b":
        return arr.astype(bool)  # a copy
    out = np.zeros(n, dtype=bool)
    for i, v in enumerate(arr.tolist()):
        if isinstance(v, np.generic):
            v = v.item()
        if isinstance(v, bool) or (isinstance(v, (int, float)) and v in (0, 1)):
            out[i] = bool(v)
        else:
            raise UnbendError(f"{name} row {i + 1} is {v!r}; each row must be True (y is an upper limit) or False "
                              "(y is measured), or 1/0.")
    return out
