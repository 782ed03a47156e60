"""cells.table_columns gives exactly the cells cells.table gives (the faster path UNBEND_INVERSE uses).

Property with a known truth: two ways of building the same result table must agree cell for cell, types
included; the values are invented.
"""
from __future__ import annotations

import datetime as dt
import decimal

import numpy as np
import pytest

from unbend.udfs import cells


def _columns(rng, k):
    f = rng.normal(size=k)
    if k:
        f[rng.integers(0, k, 3)] = np.nan
        f[rng.integers(0, k, 2)] = np.inf
        f[rng.integers(0, k, 1)] = -np.inf
    mixed = [None, 1.5, float("nan"), np.float64(2.0), np.int64(3), "text", True, dt.date(2026, 1, 2),
             decimal.Decimal("4.25"), float("inf"), 7, ""]
    return [
        f,                                                     # float array with NaN and infinities
        rng.integers(0, 5, k),                                 # integer array
        rng.normal(size=k) > 0,                                # boolean array
        np.where(f > 0, "yes", "no").tolist(),                 # text
        [float(v) for v in f],                                 # a list of Python floats, some not finite
        [mixed[i % len(mixed)] for i in range(k)],             # everything a cell can receive
        [0.5] * k, [12] * k, ["2 rows skipped: blank"] * k,    # constants
    ]


@pytest.mark.parametrize("k", [0, 1, 13, 1000])
@pytest.mark.parametrize("header", [None, [], ["a", "b", "c", "d", "e", "f", "g", "h", "i"],
                                    ["a", float("nan"), np.float64(1.0)], ["a"] * 12])
def test_same_cells_as_table(k, header):
    cols = _columns(np.random.default_rng(k), k)
    want = cells.table(header, zip(*cols))
    got = cells.table_columns(header, cols)
    assert got == want
    assert [[type(v) for v in r] for r in got] == [[type(v) for v in r] for r in want]


def test_columns_of_different_lengths_are_refused():
    with pytest.raises(ValueError):
        cells.table_columns(["a", "b"], [[1.0, 2.0], [1.0]])
