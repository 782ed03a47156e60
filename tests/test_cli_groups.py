"""`unbend groups` on files made the way spreadsheet programs and exports make them: a CSV written by the csv
module as an export writes it, an .xlsx with a title row and a table with a totals row (openpyxl, as a
spreadsheet program saves it), and a Parquet file written by pandas through pyarrow.

Data are invented (unbend's seeded gauging network, where one station is made to bend another way): the
workbook's numbers are checked against ``unbend.fit_groups`` on the same rows, each series' line against
numpy's least squares on its rows and the equal-slopes test against statsmodels, and every number in the
printed sentences is read back against the fit.
"""
from __future__ import annotations

import csv
import math
import re
import sys
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest

import unbend
from unbend.demo_data import ODD_STATION, gauging_network
from unbend.udfs import cli
from unbend.udfs import groups_report as G

from cli_helpers import run, one_line

Y, X, BY = "sediment_t_per_day", "discharge_m3s", "station"


def flat(text: str) -> str:
    return " ".join(text.split())


@pytest.fixture(scope="module")
def network():
    """The invented network, 18 stations (the odd one among them), with its blank readings."""
    return gauging_network(stations=18, readings=16)


# ----------------------------------------------------------------------------- files as programs write them
@pytest.fixture(scope="module")
def files(network, tmp_path_factory):
    folder = tmp_path_factory.mktemp("groups")
    df = network
    # CSV as an export writes it: quoted where needed, blanks as empty fields, plus a reading written "n/a"
    # and a row whose station is blank
    path_csv = folder / "network.csv"
    with open(path_csv, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow([BY, X, Y])
        for i, r in enumerate(df.itertuples(index=False)):
            load = "" if math.isnan(r[2]) else repr(float(r[2]))
            if i == 5:
                load = "n/a"
            w.writerow([r[0], repr(float(r[1])), load])
        w.writerow(["", "12.5", "40.1"])
    # xlsx: a title row, a blank row, the header, the data in a table with a totals row
    path_xlsx = folder / "network.xlsx"
    from openpyxl.worksheet.table import Table
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Readings"
    ws.append(["Gauging network, invented readings (not measurements)"])
    ws.append([])
    ws.append([BY, X, Y])
    for r in df.itertuples(index=False):
        ws.append([r[0], float(r[1]), None if math.isnan(r[2]) else float(r[2])])
    n = len(df)
    ws.append(["Total", float(df[X].sum()), float(df[Y].sum())])
    t = Table(displayName="Net", ref=f"A3:C{n + 4}")
    t.totalsRowCount = 1
    ws.add_table(t)
    wb.save(path_xlsx)
    # Parquet through pandas and pyarrow: NaN readings, a missing station, a text column
    pq = df.copy()
    pq.loc[3, BY] = None
    pq["note"] = "invented"
    path_pq = folder / "network.parquet"
    pq.to_parquet(path_pq, engine="pyarrow", index=False)
    return {"csv": path_csv, "xlsx": path_xlsx, "parquet": path_pq, "folder": folder}


def _expected_rows(network, kind):
    """The rows the command must use: (y, x, station) and the counts it must report, from the frame itself."""
    df = network.copy()
    skipped_reading, blank_label = {}, 0
    if kind == "csv":
        df.loc[5, Y] = np.nan  # "n/a": text that is not a number
        skipped_reading["text that is not a number"] = 1
        skipped_reading["blank"] = int(network[Y].isna().sum()) - int(np.isnan(network.loc[5, Y]))
        blank_label = 1  # the last row, station blank, numbers present
        extra = pd.DataFrame({BY: [None], X: [12.5], Y: [40.1]})
        df = pd.concat([df, extra], ignore_index=True)
    elif kind == "xlsx":
        skipped_reading["blank"] = int(network[Y].isna().sum())
        skipped_reading["summary row"] = 1
    else:
        skipped_reading["blank"] = int(network[Y].isna().sum())
        df.loc[3, BY] = None
        blank_label = int(not np.isnan(network.loc[3, Y]))
    ok = df[Y].notna() & df[X].notna()
    return df[ok], skipped_reading, blank_label


@pytest.fixture(scope="module")
def runs(files):
    out = {}
    for kind in ("csv", "xlsx", "parquet"):
        target = files["folder"] / f"out_{kind}.xlsx"
        code, text, err = run(["groups", files[kind], "--y", Y, "--x", X, "--by", BY, "--out", target, "--quiet"])
        assert code == 0, err
        out[kind] = (target, text)
    return out


# ----------------------------------------------------------------------------- the rows and the numbers
@pytest.mark.parametrize("kind", ["csv", "xlsx", "parquet"])
def test_rows_used_and_skipped_by_reason(network, files, runs, kind):
    rows, skipped, blank_label = _expected_rows(network, kind)
    target, text = runs[kind]
    t = flat(text)
    n_used = int(rows[BY].notna().sum())
    n_skip = sum(skipped.values()) + blank_label
    assert f"rows used: {n_used}; rows skipped: {n_skip}" in t
    for reason, k in skipped.items():
        assert f"{reason}: {k}" in t, reason
    if blank_label:
        assert f"Skipped {blank_label} row whose {BY} is blank" in t
    if kind == "csv":  # the blank-station row is the file's last: header on row 1, then every reading
        assert f"whose {BY} is blank (such as row {len(network) + 2})." in t
    if kind == "parquet" and blank_label:
        assert f"whose {BY} is blank (such as row {3 + 2})." in t
    if kind == "xlsx":
        assert "The header is on row 3" in t  # the title row was not read as data
    if kind == "parquet":  # record i (from 0) is row i + 2: the column names are row 1
        assert "the first record is row 2" in t
        first_blank = int(np.flatnonzero(network[Y].isna().to_numpy())[0])
        assert f"row {first_blank + 2}, {Y}: blank" in t
    # the workbook says the same
    items = dict(_items(openpyxl.load_workbook(target)["Summary"]))
    assert items["rows used"] == n_used
    assert items["rows skipped, in all"] == n_skip
    assert items["rows skipped: blank series label"] == blank_label


def _items(ws):
    """(item, value) rows of the Summary sheet's item table."""
    rows = list(ws.iter_rows(values_only=True))
    i = next(k for k, r in enumerate(rows) if r[0] == "item" and r[1] == "value")
    return [(r[0], r[1]) for r in rows[i + 1:] if r[0] is not None]


def _fit_of(network, kind):
    rows, _, _ = _expected_rows(network, kind)
    rows = rows[rows[BY].notna()]
    return unbend.fit_groups(rows[Y].to_numpy(float), rows[X].to_numpy(float), rows[BY].to_numpy(object)), rows


@pytest.mark.parametrize("kind", ["csv", "xlsx", "parquet"])
def test_workbook_numbers_equal_fit_groups_on_the_same_rows(network, runs, kind):
    gf, rows = _fit_of(network, kind)
    target, _ = runs[kind]
    wb = openpyxl.load_workbook(target)
    # the series table: worst residual checks first, every number as fit_groups gives it
    ws = wb["Series"]
    values = list(ws.iter_rows(min_row=4, values_only=True))
    header = list(values[0])
    body = [r for r in values[1:] if r[0] is not None]
    assert header == [G.group_headers(gf.level)[c] if c != "note" else "left out because" for c in G.TABLE_COLS]
    order = G.series_order(gf)
    assert [r[0] for r in body] == order["group"].tolist()
    assert order["group"].iloc[0] == ODD_STATION  # known truth: the invented network bends there
    for r, (_, e) in zip(body, order.iterrows()):
        for c, v in zip(G.TABLE_COLS, r):
            want = e["reason"] if c == "note" else e[c] if c in e.index else None
            if c in ("own_y_differs", "own_x_differs"):
                assert v == ("yes" if want else "no"), (e["group"], c)
            elif isinstance(want, (float, np.floating)):
                if np.isfinite(want):
                    assert v == pytest.approx(float(want), rel=1e-12, abs=1e-300), (e["group"], c)
                else:
                    assert v is None
            elif c == "note":
                assert (v or "") == ("" if e["used"] else want)
            else:
                assert v == want, (e["group"], c)
    # the common powers and the equal-slopes test
    items = dict(_items(wb["Summary"]))
    for k, v in gf.rows():
        if k in ("rows skipped", "rows skipped, by reason"):
            continue
        if isinstance(v, float):
            assert items[k] == pytest.approx(v, rel=1e-12), k
        else:
            assert str(items[k]) == str(v), k


def test_lines_equal_least_squares_and_the_slope_test_equals_statsmodels(network, runs):
    """Each series' line from the CSV run against numpy least squares on its rows at the common powers, and
    the equal-slopes F test against statsmodels' nested-model comparison."""
    import statsmodels.formula.api as smf
    from statsmodels.stats.anova import anova_lm

    gf, rows = _fit_of(network, "csv")
    target, _ = runs["csv"]
    body = {r[0]: r for r in openpyxl.load_workbook(target)["Series"].iter_rows(min_row=5, values_only=True)
            if r[0] is not None}
    col = {c: i for i, c in enumerate(G.TABLE_COLS)}
    assert gf.y_power == 0 and gf.x_power == 0  # logs of both, as the invented network was made
    d = pd.DataFrame({"ly": np.log(rows[Y].to_numpy(float)), "lx": np.log(rows[X].to_numpy(float)),
                      "g": rows[BY].astype(str).to_numpy()})
    for g, part in d.groupby("g"):
        slope, intercept = np.polyfit(part["lx"], part["ly"], 1)  # source: numpy.polyfit (least squares)
        assert body[g][col["slope"]] == pytest.approx(slope, rel=1e-9)
        assert body[g][col["intercept"]] == pytest.approx(intercept, rel=1e-9, abs=1e-9)
    small = smf.ols("ly ~ C(g) + lx", d).fit()
    big = smf.ols("ly ~ C(g) * lx", d).fit()
    table = anova_lm(small, big)  # source: statsmodels anova_lm, nested models
    items = dict(_items(openpyxl.load_workbook(target)["Summary"]))
    assert items["equal slopes: F"] == pytest.approx(table["F"].iloc[1], rel=1e-9)
    assert items["equal slopes: p"] == pytest.approx(table["Pr(>F)"].iloc[1], rel=1e-6, abs=1e-300)


# ----------------------------------------------------------------------------- sentences are claims
def _num(s):
    return float(s)


def test_every_number_in_the_sentences_comes_from_the_fit(network, runs):
    gf, rows = _fit_of(network, "parquet")
    _, text = runs["parquet"]
    t = flat(text)
    c = gf.common
    for what, name, s, used in (("y", Y, c.y, c.y_power), ("x", X, c.x, c.x_power)):
        m = re.search(rf"Power for {name} \({what}\), all series together \(a line per series\): estimate (\S+), "
                      rf"95% interval (\S+) to (\S+); used: (\S+) \(", t)
        assert m, what
        est, lo, hi, u = map(_num, [m.group(1), m.group(2), m.group(3).rstrip(";"), m.group(4)])
        assert est == pytest.approx(s.estimate, rel=1e-3, abs=1e-6)
        assert lo == pytest.approx(s.low, rel=1e-3, abs=1e-6) and hi == pytest.approx(s.high, rel=1e-3, abs=1e-6)
        assert u == used
        assert s.note in t  # the rung rule in words (inside the interval, or the nearest rung when none is)
        if not s.low <= used <= s.high:
            assert "nearest" in s.note
    m = re.search(r"Equal slopes: F = (\S+) on (\d+) and (\d+) degrees of freedom, p = (\S+); the one slope every "
                  r"series would share is (\S+)\.", t)
    assert m
    assert _num(m.group(1)) == pytest.approx(gf.equal_slopes_f, rel=1e-3)
    assert (int(m.group(2)), int(m.group(3))) == tuple(gf.equal_slopes_df)
    assert _num(m.group(4).rstrip(";")) == pytest.approx(gf.equal_slopes_p, rel=1e-2)
    assert _num(m.group(5)) == pytest.approx(gf.common_slope, rel=1e-3)
    # the worst series, named in order with their p-values
    m = re.search(r"Worst residual checks first: (.*?)(?:; and (\d+) more series)?\. ", t)
    assert m
    named = re.findall(r"(?:^|; )(.+?) \(((?:\w+ p = [^,;)]+(?:, )?)+)\)", m.group(1))
    failing = gf._failing().tolist()
    worst = gf.worst(len(failing))
    assert len(named) == min(3, len(failing)) and len(failing) >= 1
    for (g, ps), (_, r) in zip(named, worst.iterrows()):
        assert g == str(r["group"])
        said = dict(re.findall(r"(\w+) p = ([^,]+)", ps))
        for word in ("curvature", "pattern", "spread"):
            want = r[f"{word}_p"]
            if np.isfinite(want):  # a check that could not run is not named
                assert _num(said.pop(word)) == pytest.approx(want, rel=2e-3)
        assert not said
    assert int(m.group(2) or 0) == len(failing) - len(named)
    # the engine's own paragraph, and the cautions
    assert gf.explain("series") in t
    for words in ("Check the residual plot", "extrapolation", "local codes and licensed practice"):
        assert words in t


def test_the_workbook_holds_the_sentences_the_chart_and_the_plots(runs):
    target, text = runs["csv"]
    wb = openpyxl.load_workbook(target)
    assert wb.sheetnames == ["Summary", "Series", "Slopes"]
    cells = [str(v) for v in wb["Summary"]["A"] if v is not None for v in [v.value] if v is not None]
    lines = [ln for ln in cells if ln.startswith(("Power for", "Equal slopes", "CAUTION", "Worst"))]
    assert len(lines) == 5
    for ln in lines:
        assert flat(ln) in flat(text)
    # a native chart of every slope with its interval: custom error bars read from the sheet's cells
    with zipfile.ZipFile(target) as z:
        charts = [n for n in z.namelist() if n.startswith("xl/charts/chart")]
        assert len(charts) == 1
        xml = z.read(charts[0]).decode()
    assert '<c:errValType val="cust"/>' in xml and "<c:f>'Slopes'!$E$5:$E$" in xml
    s = wb["Slopes"]
    slopes = [r[:7] for r in s.iter_rows(min_row=5, values_only=True) if r[0] is not None]
    for g, slope, lo, hi, up, down, common in slopes:
        assert lo <= slope <= hi and up == pytest.approx(hi - slope) and down == pytest.approx(slope - lo)
    assert [r[1] for r in slopes] == sorted(r[1] for r in slopes)
    plots = target.parent / (target.stem + "_plots")
    for name in G.PLOT_FILES:
        assert (plots / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert str(plots / name) in text


# ----------------------------------------------------------------------------- refusals and safety
def test_never_over_the_input_and_never_over_an_earlier_workbook(files, runs):
    code, out, err = run(["groups", files["csv"], "--y", Y, "--x", X, "--by", BY, "--out", files["csv"]])
    assert code == cli.EXIT_BAD_INPUT and "must name a .xlsx" in err
    code, out, err = run(["groups", files["xlsx"], "--y", Y, "--x", X, "--by", BY, "--out", files["xlsx"]])
    assert "never writes over its input" in one_line(code, out, err)
    target, _ = runs["csv"]
    before = target.read_bytes()
    code, out, err = run(["groups", files["csv"], "--y", Y, "--x", X, "--by", BY, "--out", target])
    assert "--overwrite" in one_line(code, out, err)
    assert target.read_bytes() == before
    code, out, err = run(["groups", files["csv"], "--y", Y, "--x", X, "--by", BY, "--out", target, "--overwrite",
                          "--quiet", "--y-power", "0.5", "--x-power", "0"])
    assert code == 0, err
    assert "Power for sediment_t_per_day (y), every series: 0.5 (square root), as given." in flat(out)
    assert openpyxl.load_workbook(target)["Series"].cell(5, 1).value is not None


def test_parquet_refusals(files, monkeypatch, tmp_path):
    code, out, err = run(["groups", files["parquet"], "--y", Y, "--x", X, "--by", BY, "--sheet", "Data",
                          "--out", tmp_path / "a.xlsx"])
    assert "this is a Parquet file" in one_line(code, out, err)
    code, out, err = run(["groups", files["parquet"], "--y", "note", "--x", X, "--by", BY, "--out",
                          tmp_path / "b.xlsx"])
    line = one_line(code, out, err)
    assert "note" in line
    bad = tmp_path / "broken.parquet"
    bad.write_bytes(b"PAR1 not really")
    assert "could not be read as a Parquet file" in one_line(*run(["groups", bad, "--y", Y, "--x", X, "--by", BY,
                                                                   "--out", tmp_path / "c.xlsx"]))
    monkeypatch.setitem(sys.modules, "pyarrow", None)  # as if pyarrow were not installed
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    line = one_line(*run(["groups", files["parquet"], "--y", Y, "--x", X, "--by", BY, "--out", tmp_path / "d.xlsx"]))
    assert "pyarrow" in line and "unbend[parquet]" in line
    assert not (tmp_path / "d.xlsx").exists()


def test_help_names_the_options():
    code, out, _ = run(["groups", "--help"])
    assert code == 0
    for opt in ("--y", "--x", "--by", "--sheet", "--out", "--y-power", "--x-power", "--y-start", "--x-start",
                "--level", "--overwrite", "--quiet", "--header-row", "--decimal", "--hidden", ".parquet"):
        assert opt in out


def test_a_series_with_too_few_rows_is_left_out_and_named(tmp_path):
    """Invented: three lines y = a * x**1.5 with small noise, and a series of two rows."""
    rng = np.random.default_rng(8)
    path = tmp_path / "few.csv"
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["machine", "load", "wear"])
        for name, a in (("M1", 1.0), ("M2", 2.0), ("M3", 0.5)):
            for x in np.linspace(1, 40, 12):
                w.writerow([name, f"{x:.3f}", f"{a * x ** 1.5 * math.exp(rng.normal(0, 0.05)):.5f}"])
        w.writerow(["M4", "3.0", "5.2"])
        w.writerow(["M4", "9.0", "27.0"])
    target = tmp_path / "few.xlsx"
    code, out, err = run(["groups", path, "--y", "wear", "--x", "load", "--by", "machine", "--out", target, "--quiet"])
    assert code == 0, err
    t = flat(out)
    gf = G.analyse_groups(__import__("unbend.udfs.files", fromlist=["read_data"]).read_data(
        path, "wear", ["load"], groups="machine")).fit
    reason = gf.left_out.set_index("group").loc["M4", "reason"]
    assert f"Left out: M4: {reason}." in t
    assert f"{gf.n_groups} series ({gf.n_groups_used} with a line)" in t and gf.n_groups_used == 3
    body = [r for r in openpyxl.load_workbook(target)["Series"].iter_rows(min_row=5, values_only=True) if r[0]]
    assert body[-1][0] == "M4" and body[-1][G.TABLE_COLS.index("note")] == reason  # left out: last, with why
    assert body[-1][G.TABLE_COLS.index("slope")] is None


def test_many_series_chart_the_worst_hundred_and_list_them_all(tmp_path):
    """Invented: 130 series of 6 rows on one line with noise; the chart holds the 100 worst, the table all."""
    rng = np.random.default_rng(9)
    g = np.repeat([f"B{i:03d}" for i in range(130)], 6)
    x = np.tile(np.linspace(2, 30, 6), 130)
    y = 3 * x * np.exp(rng.normal(0, 0.1, x.size))
    path = tmp_path / "many.parquet"
    pd.DataFrame({"batch": g, "dose": x, "response": y}).to_parquet(path, engine="pyarrow", index=False)
    target = tmp_path / "many.xlsx"
    code, out, err = run(["groups", path, "--y", "response", "--x", "dose", "--by", "batch", "--out", target,
                          "--quiet"])
    assert code == 0, err
    wb = openpyxl.load_workbook(target)
    charted = [r[0] for r in wb["Slopes"].iter_rows(min_row=5, values_only=True) if r[0] is not None]
    assert len(charted) == G.CHART_MAX
    gf = unbend.fit_groups(y, x, g)
    assert set(charted) == set(gf.worst(G.CHART_MAX)["group"])
    assert "The chart shows the 100 series with the worst residual checks of 130" in wb["Slopes"]["A2"].value
    listed = [r[0] for r in wb["Series"].iter_rows(min_row=5, values_only=True) if r[0] is not None]
    assert listed == G.series_order(gf)["group"].tolist() and len(listed) == 130


def test_zeros_ask_for_a_start_and_the_level_reaches_every_header(tmp_path):
    """Invented counts with a zero: the power cannot be chosen without a start; with --y-start 0.5 the run goes
    through, at the level asked for."""
    # Box-Cox and Box-Tidwell profiles need every value above 0 (common practice)
    path = tmp_path / "counts.csv"
    path.write_text("site,x,y\nA,1,0\nA,2,3\nA,3,5\nA,4,8\nB,1,1\nB,2,2\nB,3,4\nB,5,9\n", encoding="utf-8")
    line = one_line(*run(["groups", path, "--y", "y", "--x", "x", "--by", "site", "--out", tmp_path / "a.xlsx"]))
    assert "--y-start (such as 0.5)" in line and "smallest 0" in line
    assert not (tmp_path / "a.xlsx").exists()
    # the start named is the one `unbend report` names for the same column (unbend.propose_start, 0.025 here:
    # half the smallest gap, 0.05; as the shortest decimal that still works); half the step above the lowest value
    # would have said 0.1
    path2 = tmp_path / "fine.csv"
    path2.write_text("site,x,y\nA,1,0\nA,2,0.2\nA,3,0.5\nA,4,0.55\nB,1,0.3\nB,2,0.6\nB,3,0.8\nB,5,1.2\n",
                     encoding="utf-8")
    import unbend
    assert unbend.propose_start([0, 0.2, 0.5, 0.55, 0.3, 0.6, 0.8, 1.2]) == pytest.approx(0.025)
    code, out, err = run(["report", path2, "--y", "y", "--x", "x", "--quiet", "--out", tmp_path / "r.xlsx"])
    assert code == 0, err
    named = re.search(r"add a start: --y-start ([0-9.]+)", flat(out)).group(1)
    assert 0 < float(named) <= 0.025
    line = one_line(*run(["groups", path2, "--y", "y", "--x", "x", "--by", "site", "--out", tmp_path / "c.xlsx"]))
    assert f"--y-start (such as {named})" in line, line
    code, out, err = run(["groups", path2, "--y", "y", "--x", "x", "--by", "site", "--out", tmp_path / "c.xlsx",
                          "--y-start", named, "--quiet"])
    assert code == 0, err
    code, out, err = run(["groups", path, "--y", "y", "--x", "x", "--by", "site", "--out", tmp_path / "b.xlsx",
                          "--y-start", "0.5", "--level", "90", "--quiet"])
    assert code == 0, err
    assert "90% interval" in flat(out)
    header = [c.value for c in openpyxl.load_workbook(tmp_path / "b.xlsx")["Series"][4]]
    assert "slope low 90%" in header and "slope high 90%" in header
