"""The reading rules (udfs/intake.py) on their own, and the cell functions that use them.

What is checked against what
----------------------------
* Numbers written as text are checked against the number the text spells, written out by hand beside each
  case (a fact of how such numbers are written: common practice in English and continental European
  locales, where "1,234.5" and "1.234,5" both mean one thousand two hundred and thirty-four and a half).
* Dates are checked against Python's own date arithmetic (datetime subtraction).
* Cell-function results on cells holding text are checked against the same functions on the clean numbers,
  and the line against numpy least squares (source: numpy.linalg.lstsq).
* Data here are invented (seeded) and only prove properties with a known truth.
"""
from __future__ import annotations

import datetime as dt
import decimal
import time

import numpy as np
import pandas as pd
import pytest

import unbend
from unbend import UnbendError
from unbend.udfs import cells, intake
from unbend.udfs import functions as U
from unbend.udfs.intake import (ABOVE, BLANK, BOOL, DATE_AMONG_NUMBERS, ERROR, HEADER, LIMIT, NOT_FINITE,
                                OTHER_UNIT, SUMMARY, TEXT, USED, combine, read_column)

NAN = float("nan")


def values(cells_, **kw):
    return read_column(cells_, "v", **kw).values


# ----------------------------------------------------------------------------- numbers as text
@pytest.mark.parametrize("texts, expected, dec", [
    # common practice: the last separator of two kinds is the decimal one
    (["1,234.50", "12.5"], [1234.5, 12.5], "."),
    (["1.234,56", "12,5"], [1234.56, 12.5], ","),
    # several of one kind are thousands separators
    (["1.234.567", "2,5"], [1234567.0, 2.5], ","),
    (["1,234,567", "2.5"], [1234567.0, 2.5], "."),
    # one separator followed by other than three digits is the decimal one
    (["12,5", "3,25", "1.234"], [12.5, 3.25, 1234.0], ","),
    (["0,125", "7"], [0.125, 7.0], ","),
    (["1234.567"], [1234.567], "."),
    # spaces, non-breaking and thin spaces, apostrophes group thousands
    (["1 234,5", "12\u00a0345,25", "1\u202f000"], [1234.5, 12345.25, 1000.0], ","),
    (["1'234.5", "12'345.25"], [1234.5, 12345.25], "."),
])
def test_separators_settled_by_the_column(texts, expected, dec):
    r = read_column(texts, "flow", header=False)
    np.testing.assert_array_equal(r.values, expected)
    assert r.decimal == dec and r.decimal_how == "values"
    assert r.from_text == len(texts)


def test_separator_left_open_is_refused_naming_how_to_settle():
    with pytest.raises(intake.ReadingRefused) as e:
        read_column(["1.234", "2.500", "12.750"], "flow", header=False, settle="add --decimal , or --decimal .")
    msg = str(e.value)
    assert "flow" in msg and "'1.234'" in msg and "--decimal" in msg
    # the file's delimiter settles it: semicolon files use decimal commas, comma files decimal points
    np.testing.assert_array_equal(values(["1.234", "2.500"], delimiter=";", header=False), [1234.0, 2500.0])
    np.testing.assert_array_equal(values(["1,234", "2,500"], delimiter=",", header=False), [1234.0, 2500.0])
    np.testing.assert_array_equal(values(["1.234", "2.500"], decimal=".", header=False), [1.234, 2.5])


def test_points_and_commas_mixed_are_refused():
    with pytest.raises(intake.ReadingRefused) as e:
        read_column(["1.5", "2,5", "3.25"], "flow", header=False)
    assert "'1.5'" in str(e.value) and "'2,5'" in str(e.value)


@pytest.mark.parametrize("text, value, unit", [
    ("12 mg/L", 12.0, "mg/L"), ("3.5kg", 3.5, "kg"), ("20 °C", 20.0, "°C"), ("$1,200.50", 1200.5, "$"),
    ("€ 12,50", 12.5, "€"), ("EUR 99", 99.0, "EUR"), ("-4.5", -4.5, ""), ("+7", 7.0, ""), ("\u22123.5", -3.5, ""),
    ("1.5E-3", 0.0015, ""), (".5", 0.5, ""), ("  42  ", 42.0, ""), ("45%", 0.45, ""), ("12,5 %", 0.125, ""),
])
def test_one_text_read_as_a_number(text, value, unit):
    r = read_column([text, 1.0], "v", header=False)
    assert r.reasons[0] == USED and r.values[0] == pytest.approx(value, rel=1e-15)
    assert r.unit == unit


def test_percent_read_as_fractions_and_said():
    r = read_column(["45%", "50%", "12.5%"], "share", header=False)
    np.testing.assert_allclose(r.values, [0.45, 0.5, 0.125], rtol=1e-15)
    assert r.percent == 3
    rows = combine(r)
    assert any("45% as 0.45" in s for s in rows.lines())


def test_unit_label_and_values_in_another_unit():
    r = read_column(["12 mg/L", "13 mg/L", "14 mg/l", "900 µg/L", 15.0], "solids", header=False)
    assert r.unit == "mg/L" and r.label == "solids (mg/L)"
    assert list(r.reasons) == [USED, USED, USED, OTHER_UNIT, USED]


def test_text_that_is_not_a_number():
    for t in ("abc", "12 apples 3", "1.2.3", "n/a", "--", "12-14", "1,23,456", "0:"):
        r = read_column([1.0, t, 2.0], "v")
        assert r.reasons[1] in (TEXT, DATE_AMONG_NUMBERS), (t, r.reasons)


# ----------------------------------------------------------------------------- other categories
def test_detection_limits_have_their_own_category_with_the_limit():
    r = read_column([1.0, "<0.5", "< 0.5", "<0,5", "ND", "n.d.", "<LOD", "≤ 2", ">2000", 3.0], "residue",
                    header=False, decimal=".")
    assert list(r.reasons) == [USED, LIMIT, LIMIT, LIMIT, LIMIT, LIMIT, LIMIT, LIMIT, ABOVE, USED]
    # "<0,5" in a column of decimal points: still below a limit, its value not read; "ND" has none
    assert r.limits[1] == 0.5 and r.limits[2] == 0.5 and np.isnan(r.limits[3]) and np.isnan(r.limits[4])
    assert r.limits[7] == 2.0
    assert r.censored.sum() == 7 and not r.censored[8]
    rows = combine(r)
    words = " ".join(rows.lines())
    assert "below a detection limit: 7" in words and "leaves them out" in words and "not a number" not in words


def test_errors_booleans_blanks_infinity():
    r = read_column([1.0, "#N/A", "#DIV/0!", "#SPILL!", "Err:502", True, None, "", float("inf"), NAN, 2.0],
                    "v", header=False)
    assert list(r.reasons) == [USED, ERROR, ERROR, ERROR, ERROR, BOOL, BLANK, BLANK, NOT_FINITE, BLANK, USED]


@pytest.mark.parametrize("label", ["Total", "TOTAL:", "Grand total", "Subtotal", "Sum", "sum of load", "Mean",
                                   "Average (n=12)", "Count", "Min", "max", "Summe", "Gesamt", "Mittelwert",
                                   "Durchschnitt", "somme", "moyenne", "totale", "media", "somma", "suma",
                                   "promedio", "totaal", "gemiddelde", "Total 2024", "Σ"])
def test_summary_labels(label):
    assert intake.is_summary_label(label)
    r = read_column([1.0, 2.0, label], "v", header=False)
    assert r.reasons[2] == SUMMARY


@pytest.mark.parametrize("label", ["Total nitrogen", "north", "minimal dose", "Summer", "meander", "countless"])
def test_not_summary_labels(label):
    assert not intake.is_summary_label(label)


def test_summary_label_in_one_column_skips_the_row():
    y = read_column([1.0, 2.0, 3.0, 4.0, 10.0], "y")
    x = read_column([1.0, 2.0, 3.0, 4.0, "Total"], "x")
    rows = combine(y, [x])
    assert list(rows.used) == [True] * 4 + [False] and rows.counts() == {SUMMARY: 1}


def test_trailing_totals_row_without_a_label_is_found_by_its_values():
    rng = np.random.default_rng(5)
    yv = list(np.round(rng.uniform(1, 9, 8), 3))
    xv = list(np.round(rng.uniform(1, 9, 8), 3))
    rows = combine(read_column(yv + [sum(yv)], "y"), [read_column(xv + [sum(xv)], "x")])
    assert rows.n_used == 8 and rows.counts() == {SUMMARY: 1}
    assert rows.summary_note == ((9, "sum"),)
    mean_row = combine(read_column(yv + [float(np.mean(yv))], "y"), [read_column(xv + [float(np.mean(xv))], "x")])
    assert mean_row.n_used == 8 and mean_row.summary_note == ((9, "mean"),)
    # a real row that happens to match only one column's sum stays
    keep = combine(read_column(yv + [sum(yv)], "y"), [read_column(xv + [5.0], "x")])
    assert keep.n_used == 9


def test_header_and_units_cells_on_top_of_a_range():
    r = read_column(["load", "mg/L", 1.0, 2.0, "3"], "load")
    assert list(r.reasons[:2]) == [HEADER, HEADER] and r.values[4] == 3.0
    r = read_column(["n/a", 1.0, 2.0], "v")  # a missing-value word on top is not a header
    assert r.reasons[0] == TEXT


# ----------------------------------------------------------------------------- dates and times
def test_dates_become_days_since_the_earliest():
    class ComDate(dt.datetime):  # the COM layer hands dates over as a datetime subclass
        pass

    cells_ = [dt.date(2024, 3, 10), ComDate(2024, 3, 4), pd.Timestamp("2024-04-01"), np.datetime64("2024-03-05"),
              "2024-03-06", None]
    r = read_column(cells_, "sampled", header=False)
    origin = dt.datetime(2024, 3, 4)
    expected = [(dt.datetime(2024, 3, 10) - origin).days, 0, (dt.datetime(2024, 4, 1) - origin).days, 1, 2]
    np.testing.assert_array_equal(r.values[:5], expected)  # source: Python's datetime subtraction
    assert r.date_origin == origin and r.date_unit == "days" and r.label == "sampled (days since 2024-03-04)"


def test_datetimes_within_two_days_become_hours_and_times_hours_since_midnight():
    r = read_column([dt.datetime(2024, 1, 1, 8), dt.datetime(2024, 1, 1, 14, 30), dt.datetime(2024, 1, 2, 9)], "t")
    np.testing.assert_allclose(r.values, [0.0, 6.5, 25.0])
    assert r.date_unit == "hours"
    r = read_column([dt.time(8, 30), "09:15", "12:00:30"], "t")
    np.testing.assert_allclose(r.values, [8.5, 9.25, 12 + 30 / 3600])
    assert r.label == "t (hours since midnight)"


def test_slash_dates_settled_by_the_column_or_refused():
    r = read_column(["13/02/2024", "01/03/2024"], "d")  # 13 can only be a day
    np.testing.assert_array_equal(r.values, [0.0, 17.0])
    with pytest.raises(intake.ReadingRefused) as e:
        read_column(["01/02/2024", "03/04/2024"], "d")
    assert "year-month-day" in str(e.value)


def test_a_lone_date_among_numbers_and_a_number_among_dates():
    r = read_column([1.0, 2.0, dt.date(2024, 1, 1), 3.0], "v")
    assert r.reasons[2] == DATE_AMONG_NUMBERS and r.date_unit == ""
    r = read_column([dt.date(2024, 1, 1), dt.date(2024, 1, 2), 5.0], "v")
    assert r.reasons[2] == intake.NUMBER_AMONG_DATES and r.date_unit == "days"


# ----------------------------------------------------------------------------- types and speed
def test_decimal_numpy_pandas_inputs():
    r = read_column([decimal.Decimal("0"), decimal.Decimal("1"), decimal.Decimal("12.50"), np.float32(2.5),
                     np.int64(7)], "v", header=False)
    np.testing.assert_array_equal(r.values, [0.0, 1.0, 12.5, 2.5, 7.0])
    r = read_column(pd.Series(["1,5", "2,5", None]), "v")
    np.testing.assert_array_equal(r.values[:2], [1.5, 2.5])
    assert all(r.reasons[2:] == BLANK)
    np.testing.assert_array_equal(read_column(np.array(["3", "4.5"]), "v").values, [3.0, 4.5])


def test_whole_column_of_numbers_stays_fast():
    """A whole column (1,048,576 cells, 10^4 numbers) read with reasons: the C-speed path."""
    col = [[i * 0.25] for i in range(10_000)] + [[None]] * (1_048_576 - 10_000)
    times = []
    for _ in range(5):
        t0 = time.perf_counter()
        r = cells.read(col, "y")
        times.append(time.perf_counter() - t0)
    assert len(r) == 10_000 and r.n_used == 10_000
    assert sorted(times)[2] < 0.25, times


def test_column_of_texts_is_read_by_distinct_texts():
    rng = np.random.default_rng(9)
    v = np.round(rng.uniform(1000, 9000, 50_000), 2)
    texts = [f"{a:,.2f}".replace(",", "X").replace(".", ",").replace("X", ".") for a in v]
    t0 = time.perf_counter()
    r = read_column(texts, "y", header=False)
    took = time.perf_counter() - t0
    np.testing.assert_allclose(r.values, v, rtol=1e-15)
    assert r.decimal == "," and took < 5.0, took


# ----------------------------------------------------------------------------- cell functions
def _survey(n=30, seed=11):
    """Invented: y = 2 x^0.5 with a little scatter (known truth: square root straightens it)."""
    rng = np.random.default_rng(seed)
    x = np.round(rng.uniform(1, 100, n), 2)
    y = np.round(2.0 * np.sqrt(x) * rng.lognormal(0, 0.03, n), 3)
    return [float(v) for v in y], [float(v) for v in x]


def _label_values(table):
    return {r[0]: r[1] for r in table[1:]}


def test_cell_functions_read_text_cells_like_the_command():
    y, x = _survey()
    messy_y = [f"{v:.3f}".replace(".", ",") if i % 2 else v for i, v in enumerate(y)]  # decimal commas as text
    messy_y[4] = "<0,5"  # below a limit: fitted as censored at 0.5 (its decimal comma also settles the column)
    messy_x = list(x)
    messy_y.append(sum(y))  # a totals row at the bottom
    messy_x.append("Summe")
    out = U.UNBEND_FIT(messy_y, messy_x, 1, 1)
    d = _label_values(out)
    yy = np.array(y, dtype=float)
    yy[4] = 0.5
    mask = np.arange(len(y)) == 4
    ref = unbend.fit(yy, np.array(x, dtype=float), y_power=1, x_power=1, censored=mask)
    assert d["intercept"] == pytest.approx(ref.coef[0], rel=1e-9) and d["slope x"] == pytest.approx(ref.coef[1], rel=1e-9)
    assert d["rows used"] == len(y) and d["rows skipped"] == 1
    assert d["values below a limit, fitted as censored"] == 1 and "values below a limit (censored)" not in d
    assert d["values read from text"] == sum(1 for i in range(len(y)) if i % 2 and i != 4)
    assert d["skipped: summary row"] == 1


@pytest.mark.parametrize("name", ["UNBEND_SCAN", "UNBEND_PREDICT", "UNBEND_RESIDUALS", "UNBEND_SUGGEST"])
def test_every_table_says_text_read_and_skipped_by_reason(name):
    y, x = _survey()
    my = [str(v) for v in y]
    my[3] = "ND"
    args = {"UNBEND_SCAN": (my, x), "UNBEND_PREDICT": (my, x, [10.0, 20.0]), "UNBEND_RESIDUALS": (my, x),
            "UNBEND_SUGGEST": (my, x)}[name]
    out = getattr(U, name)(*args)
    assert isinstance(out, list), out
    head = out[0]
    j, k = head.index("read from text"), head.index("skipped, by reason")
    assert out[1][j] == len(y) - 1 and out[1][k] == "1 below a detection limit"


def test_predict_at_new_dates_uses_the_fitted_origin():
    d0 = dt.datetime(2024, 1, 1)
    days = [0, 3, 7, 10, 15, 21, 30, 41, 50, 62]
    xs = [d0 + dt.timedelta(days=k) for k in days]
    ys = [float(5 + 0.5 * k) for k in days]
    out = U.UNBEND_PREDICT(ys, xs, [d0 + dt.timedelta(days=20)], 1, 1, "median")
    assert out == pytest.approx(5 + 0.5 * 20, rel=1e-9)  # exact line: known truth


def test_ambiguous_text_in_cells_gives_a_message():
    out = U.UNBEND_FIT(["1.234", "2.345", "3.456", "4.567"], [1.0, 2.0, 3.0, 4.0])
    assert isinstance(out, str) and out.startswith("unbend: y: values such as '1.234'")


def test_too_few_rows_message_gives_the_reasons():
    out = U.UNBEND_FIT(["ND", "ND", 3.0, "#N/A"], [1.0, 2.0, 3.0, 4.0])
    assert isinstance(out, str) and "found 1" in out and "below a detection limit" in out


def test_engine_and_rules_agree_on_clean_numbers():
    y, x = _survey()
    f = unbend.fit(np.array(y), np.array(x), y_power=0.5, x_power=1)
    d = _label_values(U.UNBEND_FIT(y, x, 0.5, 1))
    assert d["slope x"] == f.coef[1] and d["rows skipped"] == 0 and d["values read from text"] == 0


def test_header_above_numbers_fast_pass_reads_as_the_full_rules():
    """A text on top of plain numbers takes a one-pass route; it must give exactly the full rules' reading
    (the top text is a header only when the full rules say so: not a number, limit, date or missing word)."""
    import dataclasses
    import itertools

    from unbend.udfs import intake

    heads = ["y", "load (kg)", "n/a", "NA", "12.5", "<0.5", "2024-03-01", "Total", "mg/L", "", " ", "-", "#N/A",
             "1,5", "45%", "ND", "TRUE", "€"]
    bodies = [[1.5, 2.0, 3.25], [1.0, None, 2.0, float("inf"), 3.0], [0.0, 1.0, 2.0], [1, 2, 3], [None, None, 1.0],
              [float("nan"), 2.0, 3.0], [None], [float("inf")], [True, 2.0], [1.0, "mg/L", 2.0],
              [np.float64(2.5), 3]]
    for h, b in itertools.product(heads, bodies):
        flat = [h] + b
        fast = intake.read_flat(list(flat), "v")
        full = intake._read_mixed(list(flat), "v", None, None, {}, "", True)
        for f in dataclasses.fields(full):
            a, c = getattr(fast, f.name), getattr(full, f.name)
            if isinstance(a, np.ndarray):
                assert np.array_equal(a, c, equal_nan=True) and a.dtype == c.dtype, (flat, f.name)
            else:
                assert a == c, (flat, f.name, a, c)
    # and the route is taken: a header above 10^4 numbers is read as header + numbers
    r = intake.read_flat(["flow"] + [float(v) for v in range(1, 10_001)], "flow")
    assert r.reasons[0] == intake.HEADER and (r.reasons[1:] == intake.USED).all() and r.values[-1] == 10_000.0
