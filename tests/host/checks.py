"""Checks shared by the host tests: what COM can carry, and the shape COM hands a result to a cell."""
from __future__ import annotations

import datetime as dt
import math

COM_TYPES = (float, int, str, bool, type(None), dt.datetime)


def check_com(out):
    """A result COM can carry: a scalar, one row, or a rectangle of rows; plain types; no NaN or inf."""
    if isinstance(out, list):
        rows = out if out and isinstance(out[0], list) else [out]
        assert rows and len({len(r) for r in rows}) == 1, "not rectangular"
        cells = [v for r in rows for v in r]
    else:
        cells = [out]
    for v in cells:
        assert type(v) in COM_TYPES, (type(v), v)
        if type(v) is float:
            assert math.isfinite(v), v
        if isinstance(v, str) and v.startswith("unbend:"):
            assert "\n" not in v and "unexpected problem" not in v, v
    return out


def as_com(direct):
    """The direct result in the shape XLPython.CallUDF hands to COM (a 1 x 1 table is one value)."""
    rows = direct if isinstance(direct, list) else [[direct]]
    if len(rows) == 1 and len(rows[0]) == 1:
        return rows[0][0]
    if len(rows) == 1:
        return rows[0]
    return rows
