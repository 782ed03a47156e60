"""Property tests for every cell function over arbitrary cell values (hypothesis).

Whatever a worksheet hands over, a cell function must come back with a cell
value: a float, one line of text, or a rectangular 2-D list of plain scalars
(float/int/str/bool) with no NaN or inf, and must leave its arguments as they
were.  Anticipated problems come back as "unbend: ..." text; a message saying
"unexpected problem" means an error the code did not foresee, and fails here.

How cells arrive is described in unbend.udfs.cells (from memory: xlwings passes a
blank or an error cell as None, or errors as text such as "#N/A"; a row or column
as a flat list, a block as a list of rows).  The cell values are generated: these
tests prove properties with a known truth, not numbers.

Profiles: quick by default (40 examples per function, derandomized so a run is
repeatable); ``UNBEND_FUZZ=long`` runs 10,000 random examples per function, and
``UNBEND_FUZZ=500`` (any number) that many:

    UNBEND_FUZZ=long /work/venv/bin/pytest -q tests/test_udfs_properties.py
"""
from __future__ import annotations

import copy
import datetime as dt
import inspect
import math
import os
import re

import numpy as np
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

import unbend.udfs as U

_QUICK = "unbend-udfs-quick"
_LONG = "unbend-udfs-long"
_COMMON = dict(deadline=None, print_blob=True,
               suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                      HealthCheck.filter_too_much])
settings.register_profile(_QUICK, max_examples=40, derandomize=True, **_COMMON)
settings.register_profile(_LONG, max_examples=10_000, **_COMMON)
_FUZZ = os.environ.get("UNBEND_FUZZ", "").strip().lower()
if _FUZZ.isdigit():  # UNBEND_FUZZ=500: that many random examples per function
    PROFILE = settings(max_examples=int(_FUZZ), **_COMMON)
else:
    # applied per test (not with settings.load_profile) so other test modules keep their own settings
    PROFILE = settings.get_profile(_LONG if _FUZZ == "long" else _QUICK)

ALLOWED = (float, int, str, bool)
_NUM_WORD = re.compile(r"(?i)(?<![A-Za-z])(nan|inf|infinity)(?![A-Za-z])")

# ------------------------------------------------------------------------ cell values

texts = st.one_of(
    st.sampled_from(["#N/A", "#DIV/0!", "#VALUE!", "#REF!", "", " ", " 12 ", "=1+1", "n/a", "NaN", "inf",
                     "1e308", "median", "x", "y", "B2", "$B$2", "A1:B2", "0.5", "log", "\n", "é", "TRUE"]),
    st.text(max_size=6),
)
special_floats = st.sampled_from([0.0, -0.0, 1e308, -1e308, 1e-308, -1e-308, 5e-324, float("nan"),
                                  float("inf"), float("-inf"), 1.0, -1.0, 0.5, 2.0, 1e15, -3.0])
floats = st.one_of(special_floats, st.floats(allow_nan=True, allow_infinity=True),
                   st.floats(min_value=-1e6, max_value=1e6))
ints = st.one_of(st.integers(min_value=-10**6, max_value=10**6), st.sampled_from([0, 1, -1, 2**63, -(2**70), 10**400]))
dates = st.one_of(st.datetimes(min_value=dt.datetime(1900, 1, 1), max_value=dt.datetime(2100, 1, 1)),
                  st.dates(min_value=dt.date(1900, 1, 1), max_value=dt.date(2100, 1, 1)),
                  st.times(), st.timedeltas(min_value=dt.timedelta(days=-400), max_value=dt.timedelta(days=400)))
any_cell = st.one_of(st.none(), texts, st.booleans(), floats, ints, dates)
# usable numbers, so that fits really run: mostly positive, some of any sign, a few extreme
positive = st.floats(min_value=0.01, max_value=1e4)
number = st.one_of(positive, st.floats(min_value=-100, max_value=100), st.sampled_from([1e300, 1e-300, 0.0]))
numeric_cell = st.one_of(number, any_cell)


def shapes(cell, max_len=14):
    """A range in any of the shapes xlwings hands over."""
    flat = st.lists(cell, max_size=max_len)
    return st.one_of(
        cell,                                                          # one cell
        flat,                                                          # one row or one column
        st.lists(st.lists(cell, min_size=1, max_size=1), max_size=max_len),  # a column as [[v], [v]]
        st.lists(st.lists(cell, max_size=3), max_size=max_len),        # ragged rows
        st.lists(st.lists(cell, min_size=2, max_size=2), max_size=max_len),  # a block of 2 columns
    )


def _layout(draw, y, x=None):
    layout = draw(st.sampled_from(["flat", "rows", "block"] if x is not None else ["flat", "rows"]))
    if layout == "rows":
        return [[v] for v in y], (None if x is None else [[v] for v in x])
    if layout == "block":
        x2 = draw(st.lists(numeric_cell, min_size=len(x), max_size=len(x)))
        return y, [[a, b] for a, b in zip(x, x2)]
    return y, x


@st.composite
def numbers_with_junk(draw, n, base=None):
    """n cells: usable numbers with a few awkward cells dropped in at drawn places."""
    cells = list(base) if base is not None else draw(st.lists(number, min_size=n, max_size=n))
    for _ in range(draw(st.integers(min_value=0, max_value=max(1, n // 4)))):
        if cells:
            cells[draw(st.integers(min_value=0, max_value=len(cells) - 1))] = draw(any_cell)
    return cells


@st.composite
def paired(draw):
    """y and x that often make a fit possible, with duplicated or constant x and single rows."""
    kind = draw(st.sampled_from(["free", "numeric", "numeric", "curve", "curve", "curve", "duplicated x",
                                 "constant x", "single row"]))
    if kind == "free":
        return draw(shapes(any_cell)), draw(shapes(any_cell))
    if kind == "curve":
        # an invented bent relation y = a * x**b * noise, so that whole fits run, with awkward cells added
        n = draw(st.integers(min_value=3, max_value=40))
        rng = np.random.default_rng(draw(st.integers(min_value=0, max_value=2**32 - 1)))
        b = draw(st.sampled_from([-1.0, -0.5, 0.5, 1.0, 2.0, 3.0]))
        xs = rng.uniform(draw(st.sampled_from([0.01, 1.0, 100.0])), 1000.0, n)
        ys = 2.0 * xs ** b * rng.lognormal(0.0, draw(st.sampled_from([0.0, 0.01, 0.3, 1.0])), n)
        y = draw(numbers_with_junk(n, [float(v) for v in ys]))
        x = draw(numbers_with_junk(n, [float(v) for v in xs]))
        return _layout(draw, y, x)
    n = 1 if kind == "single row" else draw(st.integers(min_value=2, max_value=30))
    y = draw(numbers_with_junk(n))
    if kind == "duplicated x":
        base = draw(st.lists(positive, min_size=1, max_size=max(1, n // 2)))
        x = [base[i % len(base)] for i in range(n)]
    elif kind == "constant x":
        x = [draw(positive)] * n
    else:
        x = draw(numbers_with_junk(n, draw(st.lists(number, min_size=n, max_size=n, unique=True))))
    return _layout(draw, y, x)


@st.composite
def one_range(draw):
    """One range of values: usually numbers (so the engine runs), sometimes anything."""
    if draw(st.sampled_from([True, True, False])):
        n = draw(st.integers(min_value=0, max_value=30))
        return _layout(draw, draw(numbers_with_junk(n)))[0]
    return draw(shapes(any_cell))


@st.composite
def values_and_groups(draw):
    kind = draw(st.sampled_from(["groups", "groups", "cells", "free"]))
    if kind == "groups":
        # invented groups whose spread grows with their level, with awkward cells added
        rng = np.random.default_rng(draw(st.integers(min_value=0, max_value=2**32 - 1)))
        k = draw(st.integers(min_value=2, max_value=6))
        sizes = rng.integers(2, 12, k)
        g = [lab for lab, m in zip(["north", "south", 3.0, True, "east", "west"], sizes) for _ in range(m)]
        v = [float(v) for i, m in enumerate(sizes) for v in (10.0 * (i + 1)) * rng.lognormal(0, 0.3, m)]
        v = draw(numbers_with_junk(len(v), v))
        g = draw(numbers_with_junk(len(g), g))
    elif kind == "cells":
        n = draw(st.integers(min_value=0, max_value=40))
        v = draw(st.lists(numeric_cell, min_size=n, max_size=n))
        g = draw(st.lists(st.one_of(st.sampled_from(["a", "b", "c", "d", 1.0, 2.0]), any_cell),
                          min_size=n, max_size=n))
    else:
        return draw(shapes(any_cell)), draw(shapes(any_cell))
    if draw(st.booleans()):
        return [[a] for a in v], [[b] for b in g]
    return v, g


def option(usual, wild=None):
    """A cell option: (usual values, anything at all)."""
    return usual, (wild if wild is not None else st.one_of(usual, any_cell, st.lists(any_cell, max_size=2)))


POWER = option(st.sampled_from([None, None, 0.0, 0.5, 1.0, -1.0, 2.0, -0.5, 1 / 3, 3.0, 0.25]))
START = option(st.sampled_from([None, None, 0.0, 0.5, 1.0, 10.0, -1.0]))
LEVEL = option(st.sampled_from([None, 0.95, 0.9, 95.0, 0.5, 99.0]))
WHAT = option(st.sampled_from([None, "median", "mean", "low", "high", " MEAN "]))
WHAT2 = option(st.sampled_from([None, "median", "mean", " Median "]))
WHAT_X = option(st.sampled_from([None, "x", "low", "high", " X "]))
REPLICATES = option(st.sampled_from([None, None, 1.0, 2.0, 3.0, 1, 0.0, 2.5, -1.0]))
WHICH = option(st.sampled_from([None, "y", "x", " X "]))
CELL = option(st.sampled_from([None, "B2", "$B$2", "A2", "b7", "", "x_in"]),
              st.one_of(st.sampled_from(["A1:B2", "=B2", "Sheet1!B2", "B2;C3"]), any_cell))


@st.composite
def with_options(draw, base, options):
    """The ranges from ``base``; the options either all usual (two draws in three) or each anything."""
    args = dict(draw(base))
    usual = draw(st.sampled_from([True, True, False]))
    for name, (good, wild) in options:
        args[name] = draw(good if usual else wild)
    return args


@st.composite
def yx(draw):
    y, x = draw(paired())
    return {"y": y, "x": x}


@st.composite
def yx_new(draw):
    y, x = draw(paired())
    return {"y": y, "x": x, "new_x": draw(st.one_of(one_range(), st.just([10.0, 20.0]), positive))}


@st.composite
def readings(draw):
    """Measured y: a range in any shape, a block of replicate readings, or plain numbers."""
    return draw(st.one_of(one_range(), shapes(numeric_cell, 6), st.just([10.0, 20.0]), positive,
                          st.lists(st.lists(positive, min_size=3, max_size=3), min_size=1, max_size=4)))


@st.composite
def yx_readings(draw):
    y, x = draw(paired())
    return {"y": y, "x": x, "measured_y": draw(readings())}


@st.composite
def y_maybe_x(draw):
    y, x = draw(paired())
    return {"y": y, "x": draw(st.one_of(st.just(x), st.none(), st.just("")))}


def _values(v):
    return {"values": v}


labels = st.one_of(st.sampled_from(["north", "south", "east", 1.0, 2.0, True, " north "]), any_cell)


@st.composite
def yxg(draw):
    """y, x and group labels: often a few groups with enough rows to fit, sometimes anything."""
    y, x = draw(paired())
    n = len(y) if isinstance(y, list) else 1
    kind = draw(st.sampled_from(["groups", "groups", "cells", "free"]))
    if kind == "groups":
        k = draw(st.integers(min_value=1, max_value=4))
        g = [["north", "south", 3.0, True][i % k] for i in range(n)]
        g = draw(numbers_with_junk(n, g))
    elif kind == "cells":
        g = draw(st.lists(labels, min_size=n, max_size=n))
    else:
        g = draw(shapes(any_cell))
    if draw(st.booleans()) and isinstance(g, list):
        g = [[v] for v in g]
    return {"y": y, "x": x, "groups": g}


@st.composite
def yxg_new(draw):
    args = draw(yxg())
    args["group"] = draw(st.one_of(labels, st.lists(labels, max_size=2)))
    args["new_x"] = draw(st.one_of(one_range(), st.just([10.0, 20.0]), positive))
    return args


STRATEGIES = {
    "UNBEND_POWER": with_options(y_maybe_x(), [("which", WHICH)]),
    "UNBEND_SUGGEST": y_maybe_x(),
    "UNBEND_SCAN": with_options(yx(), [("y_start", START), ("x_start", START)]),
    "UNBEND_FIT": with_options(yx(), [("y_power", POWER), ("x_power", POWER), ("y_start", START),
                                      ("x_start", START)]),
    "UNBEND_PREDICT": with_options(yx_new(), [("y_power", POWER), ("x_power", POWER), ("what", WHAT),
                                              ("level", LEVEL), ("y_start", START), ("x_start", START)]),
    "UNBEND_RESIDUALS": with_options(yx(), [("y_power", POWER), ("x_power", POWER), ("y_start", START),
                                            ("x_start", START)]),
    "UNBEND_SPREAD": values_and_groups().map(lambda vg: {"values": vg[0], "groups": vg[1]}),
    "UNBEND_SYMMETRY": with_options(one_range().map(_values), [("start", START)]),
    "UNBEND_APPLY": with_options(one_range().map(_values), [("power", POWER), ("start", START)]),
    "UNBEND_UNDO": with_options(one_range().map(_values), [("power", POWER), ("start", START)]),
    "UNBEND_FORMULA": with_options(yx(), [("y_power", POWER), ("x_power", POWER), ("x_cell", CELL),
                                          ("what", WHAT2)]),
    "UNBEND_EXPLAIN": with_options(yx(), [("y_power", POWER), ("x_power", POWER)]),
    "UNBEND_INVERSE": with_options(yx_readings(), [("y_power", POWER), ("x_power", POWER), ("what", WHAT_X),
                                                   ("level", LEVEL), ("replicates", REPLICATES),
                                                   ("y_start", START), ("x_start", START)]),
    "UNBEND_LIMITS": with_options(yx(), [("y_power", POWER), ("x_power", POWER), ("level", LEVEL),
                                         ("replicates", REPLICATES), ("y_start", START), ("x_start", START)]),
    "UNBEND_GROUPS": with_options(yxg(), [("y_power", POWER), ("x_power", POWER), ("y_start", START),
                                          ("x_start", START)]),
    "UNBEND_GROUP_PREDICT": with_options(yxg_new(), [("y_power", POWER), ("x_power", POWER), ("what", WHAT),
                                                     ("level", LEVEL), ("y_start", START), ("x_start", START)]),
}


def test_every_function_has_a_strategy_for_each_argument():
    assert set(STRATEGIES) == set(U.FUNCTIONS)
    for name in STRATEGIES:
        params = list(inspect.signature(getattr(U, name)).parameters)
        assert params == list(U.FUNCTIONS[name]["args"]), name


# ------------------------------------------------------------------------ the contract

#: Functions whose tables repeat the user's group labels (which may read "nan" or "inf").
_ECHO_LABELS = ("UNBEND_SPREAD", "UNBEND_GROUPS", "UNBEND_GROUP_PREDICT")


def check_cell_value(out, name="", echo=None):
    """The output contract.  Text the code writes shows no 'nan'/'inf' either (group labels in
    UNBEND_SPREAD and the group functions are the user's own text, and ``echo`` is user text a result may
    repeat)."""
    if isinstance(out, str):
        if out.startswith("unbend:"):
            assert "\n" not in out and "\r" not in out, repr(out)
            assert len(out) <= 255, len(out)
            assert "unexpected problem" not in out, out
        else:
            assert not _NUM_WORD.search(out.replace(echo, "") if isinstance(echo, str) and echo else out), out
        return
    if isinstance(out, list):
        assert out, "an empty list is not a cell value"
        width = None
        for row in out:
            assert isinstance(row, list) and row, repr(row)
            width = len(row) if width is None else width
            assert len(row) == width, "rows of different widths"
            for v in row:
                assert type(v) in ALLOWED, (type(v), v)
                if type(v) is float:
                    assert math.isfinite(v), v
                elif type(v) is str:
                    assert not v.startswith("unbend: unexpected"), v
                    if name not in _ECHO_LABELS:
                        assert not _NUM_WORD.search(v), v
        return
    assert type(out) is float, (type(out), out)
    assert math.isfinite(out), out


def run(name, kwargs):
    args = [kwargs[p] for p in inspect.signature(getattr(U, name)).parameters]
    before = copy.deepcopy(args)
    out = getattr(U, name)(*args)  # an exception escaping here fails the test
    # repr compares cell by cell, NaN included (repr(nan) == "nan")
    assert repr(args) == repr(before), f"{name} changed its arguments"
    # UNBEND_FORMULA writes the x cell (or name) it was given into its formula text
    check_cell_value(out, name, echo=kwargs.get("x_cell"))


# Inputs found by the random profile, kept so that the quick run tries them every time.
_HUGE_Y = {"y": [5.106656920250869e+38, 0.007413062863356937, 0.048800586265681574, 0.12093748133799997],
           "x": [636.9653177045811, 269.7940158967327, 40.98311420095533, 16.53747025217381]}
_OVERFLOWING_FIT = {"y": [5033.168532872607, -329809.1191441278, 0.0, 1e300],
                    "x": [0.0, 847984.3499072471, 18.704014056232253, 1e-300], "y_power": 1.0, "x_power": 1 / 3}
_SCANNING = ("UNBEND_POWER", "UNBEND_SUGGEST", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT", "UNBEND_RESIDUALS",
             "UNBEND_FORMULA", "UNBEND_EXPLAIN", "UNBEND_INVERSE", "UNBEND_LIMITS")
EXAMPLES = {name: [_HUGE_Y] for name in _SCANNING}  # blank powers: the scan of rungs runs
for _name in ("UNBEND_FIT", "UNBEND_RESIDUALS", "UNBEND_EXPLAIN", "UNBEND_PREDICT", "UNBEND_FORMULA", "UNBEND_INVERSE",
              "UNBEND_LIMITS"):
    EXAMPLES[_name].insert(0, _OVERFLOWING_FIT)
# three rows: the interval for the x power has no upper end
_OPEN_INTERVAL = {"y": [15.772169249534112, 19.08889456428062, 46.941940719974774],
                  "x": [318.91929581379816, 137.7143033196798, 612.0950410005946]}
EXAMPLES["UNBEND_SUGGEST"].insert(0, _OPEN_INTERVAL)
EXAMPLES["UNBEND_SYMMETRY"] = [{"values": [1e308, 1e-308, 5e-324, 2.0, 3.0], "start": None},
                               {"values": [-1e308, 0.0, 2.0, 3.0], "start": 1e308}]
EXAMPLES["UNBEND_APPLY"] = [{"values": [1e308, -1e308, 0.0], "power": 2.0}, {"values": [1e-308], "power": -1.0}]
EXAMPLES["UNBEND_UNDO"] = [{"values": [1e308, -1e308, 0.0], "power": 0.5}, {"values": [800.0], "power": 0.0}]
EXAMPLES["UNBEND_SPREAD"] = [{"values": [1e308] * 3 + [1.0, 2.0, 3.0] * 2,
                              "groups": ["a"] * 3 + ["b"] * 3 + ["c"] * 3}]


def _full(name, partial):
    """An example with every argument spelled out (blank where not given)."""
    return {p: partial.get(p) for p in inspect.signature(getattr(U, name)).parameters}


def _make(name):
    @PROFILE
    @given(kwargs=STRATEGIES[name])
    def test(kwargs):
        run(name, kwargs)
    for ex in EXAMPLES.get(name, []):
        test = example(kwargs=_full(name, ex))(test)
    test.__name__ = f"test_{name.lower()}_returns_a_clean_cell_value"
    return test


for _name in STRATEGIES:
    globals()[f"test_{_name.lower()}_returns_a_clean_cell_value"] = _make(_name)
del _name
