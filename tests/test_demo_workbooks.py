"""The committed demo workbooks (workbooks_demo/*.xlsx, *.xlsm) and what LibreOffice computes from them.

What is checked against what
----------------------------
* The committed files are the output of ``workbooks_demo/build.py``; rebuilding
  them with ``unbend.udfs.demo.build_demo_workbooks`` must give the same cells
  (formulas as text, numbers, strings) on every sheet. This is a consistency
  check of the repository, not of the method.
* Table formulas are stored so that they spill: the cell marks and the metadata
  part are compared with what XlsxWriter writes for a dynamic-array formula
  (outside library). The macro-enabled copies carry xlwings' own standalone VBA
  project byte for byte (outside source: the installed xlwings template), and
  their file type passes the check xlwings' ribbon makes before Import Functions
  (read from the installed add-in's source).
* Outside program: LibreOffice Calc (headless, through
  ``unbend.udfs.recalc.recalculate_many``) opens the committed workbooks,
  computes every built-in formula of the model sheet itself and saves its
  results. Those are compared with ``unbend.fit(...).predict(...)`` to a
  relative 1e-9. Then rows are appended to the Data sheet's table (as a person
  adding measurements would), LibreOffice recalculates again, and the model
  sheet must follow the engine refitted on the longer data.
* All data in the demo workbooks are invented by ``unbend.demo_data`` (seeded
  random numbers, scenarios of our own); the rows appended here are invented
  too. They prove only that two independent computations of the same
  textbook formulas agree.

All LibreOffice work is one run (a module fixture) to keep the time modest.
"""
from __future__ import annotations

import math
import re
import shutil
from pathlib import Path

import numpy as np
import openpyxl
from openpyxl.utils import get_column_letter
import pytest
from openpyxl.worksheet.formula import ArrayFormula

import unbend
import unbend.udfs
from unbend.udfs.demo import SCENARIOS, build_demo_workbooks
from unbend.udfs.portable import read_portable, read_portable_inverse

ROOT = Path(__file__).resolve().parents[1]
COMMITTED = ROOT / "workbooks_demo"
NAMES = list(SCENARIOS)
REGRESSION = [n for n in NAMES if "groups" not in SCENARIOS[n]]
MODEL_SHEET = "Model (no add-in)"
RESULTS = ["median", "mean", "line_low", "line_high", "low", "high"]
RTOL = 1e-9

SOFFICE = shutil.which("soffice")
needs_soffice = pytest.mark.skipif(SOFFICE is None, reason="LibreOffice (soffice) is not installed")


# ----------------------------------------------------------------------------- rebuild and compare
@pytest.fixture(scope="module")
def rebuilt(tmp_path_factory):
    folder = tmp_path_factory.mktemp("rebuilt")
    paths = build_demo_workbooks(folder)
    return {Path(p).name: Path(p) for p in paths}


FILES = [f"{n}.xlsx" for n in NAMES] + [f"{n}.xlsm" for n in NAMES]


def _cell_key(v):
    """A comparable form of a cell value: array formulas by their range and text."""
    if isinstance(v, ArrayFormula):
        return ("array formula", v.ref, v.text)
    return v


def _same(a, b) -> bool:
    a, b = _cell_key(a), _cell_key(b)
    if isinstance(a, float) and isinstance(b, float):
        return math.isclose(a, b, rel_tol=1e-12, abs_tol=0.0) or (math.isnan(a) and math.isnan(b))
    return type(a) is type(b) and a == b


def _where(a, b) -> str:
    """Where two cell values part, for the failure message."""
    sa, sb = repr(_cell_key(a)), repr(_cell_key(b))
    k = next((i for i, (p, q) in enumerate(zip(sa, sb)) if p != q), min(len(sa), len(sb)))
    lo = max(0, k - 30)
    return f"committed ...{sa[lo:k + 50]}... rebuilt ...{sb[lo:k + 50]}..."


def test_rebuild_makes_the_same_set_of_files(rebuilt):
    committed = sorted(p.name for p in COMMITTED.glob("*.xls[xm]"))
    assert committed == sorted(rebuilt) == sorted(FILES)


@pytest.mark.parametrize("name", FILES)
def test_rebuilt_cells_equal_committed(rebuilt, name):
    old = openpyxl.load_workbook(COMMITTED / name)
    new = openpyxl.load_workbook(rebuilt[name])
    assert old.sheetnames == new.sheetnames
    diffs = []
    for title in old.sheetnames:
        a, b = old[title], new[title]
        rows = max(a.max_row, b.max_row)
        cols = max(a.max_column, b.max_column)
        for r in range(1, rows + 1):
            for c in range(1, cols + 1):
                va, vb = a.cell(r, c).value, b.cell(r, c).value
                if not _same(va, vb):
                    diffs.append(f"{title}!{a.cell(r, c).coordinate}: {_where(va, vb)}")
        assert sorted((t.displayName, t.ref) for t in a.tables.values()) == \
            sorted((t.displayName, t.ref) for t in b.tables.values()), title
        assert sorted(map(str, a.merged_cells.ranges)) == sorted(map(str, b.merged_cells.ranges)), title
        assert len(a._charts) == len(b._charts), title
    assert not diffs, f"{len(diffs)} cells differ; first ones:\n" + "\n".join(diffs[:15])


# ----------------------------------------------------------------------------- what each workbook holds
def _text_of(ws) -> str:
    return "\n".join(str(v) for row in ws.iter_rows(values_only=True) for v in row if v is not None)


def _formulas(wb):
    """(sheet, coordinate, formula text) of every formula cell."""
    out = []
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                v = c.value
                if isinstance(v, ArrayFormula):
                    out.append((ws.title, c.coordinate, v.text))
                elif c.data_type == "f" and isinstance(v, str):
                    out.append((ws.title, c.coordinate, v))
    return out


def _call_args(formula: str, name: str) -> list:
    """Top-level arguments of the first call of ``name`` in a formula (quotes, parentheses, brackets kept)."""
    i = formula.index(name + "(") + len(name) + 1
    depth, quote, args, cur = 0, False, [], ""
    while i < len(formula):
        ch = formula[i]
        if quote:
            cur += ch
            if ch == '"':
                quote = False
        elif ch == '"':
            quote, cur = True, cur + ch
        elif ch in "([":
            depth, cur = depth + 1, cur + ch
        elif ch in ")]":
            if depth == 0:
                args.append(cur)
                return args
            depth, cur = depth - 1, cur + ch
        elif ch == "," and depth == 0:
            args.append(cur)
            cur = ""
        else:
            cur += ch
        i += 1
    raise AssertionError(f"unbalanced call in {formula}")


@pytest.mark.parametrize("name", NAMES)
def test_workbook_contents(name):
    sc = SCENARIOS[name]
    wb = openpyxl.load_workbook(COMMITTED / f"{name}.xlsx")
    assert wb.sheetnames[0] == "Notes"
    notes = _text_of(wb["Notes"])
    assert "INVENTED DATA" in notes and "not measurements" in notes
    assert "extrapolation" in notes and "licensed practice" in notes  # cautions where results could hurt
    # the data as a spreadsheet table covering the header and every data row
    data = wb["Data"]
    tables = list(data.tables.values())
    assert len(tables) == 1 and tables[0].displayName == sc["table"]
    df = sc["make"]()
    assert tables[0].ref == f"A1:{get_column_letter(df.shape[1])}{len(df) + 1}"
    assert [c.value for c in data[1]] == list(df.columns)
    for col in df.columns:
        j = list(df.columns).index(col) + 1
        got = [data.cell(r, j).value for r in range(2, len(df) + 2)]
        want = [None if isinstance(v, float) and math.isnan(v) else v for v in df[col]]  # a missing reading: blank
        assert got == want, col  # the invented data, value for value
    # the xlwings configuration sheet names the UDF module
    conf = wb["xlwings.conf"]
    assert conf["A1"].value == "UDF Modules" and conf["B1"].value == "unbend.udfs"
    # native charts
    assert sum(len(ws._charts) for ws in wb.worksheets) >= (3 if name in REGRESSION else 1)
    # cells that call the add-in's functions, each a function that exists, with no more arguments than it takes
    calls = [(s, c, f) for s, c, f in _formulas(wb) if "UNBEND_" in f]
    assert len(calls) >= (7 if name in REGRESSION else 2)
    for sheet, coord, f in calls:
        for fn in set(re.findall(r"(UNBEND_[A-Z_]+)\(", f)):
            assert fn in unbend.udfs.FUNCTIONS, f"{sheet}!{coord}: {fn} is not an unbend function"
            assert len(_call_args(f, fn)) <= len(unbend.udfs.FUNCTIONS[fn]["args"]), f"{sheet}!{coord}: {f}"
    if name in REGRESSION:
        assert MODEL_SHEET in wb.sheetnames and "With the add-in" in wb.sheetnames
        # the model sheet is built-in formulas only: no add-in function anywhere on it
        assert not [f for s, c, f in _formulas(wb) if s == MODEL_SHEET and "UNBEND_" in f]


# ----------------------------------------------------------------------------- LibreOffice recalculation
def _data_xy(path, name):
    """y and x of the Data sheet's table, read from the file with openpyxl."""
    sc = SCENARIOS[name]
    ws = openpyxl.load_workbook(path)["Data"]
    table = next(iter(ws.tables.values()))
    last = int(re.search(r"(\d+)$", table.ref).group(1))
    head = [c.value for c in ws[1]]
    jy, jx = head.index(sc["y"]) + 1, head.index(sc["x"]) + 1
    y = np.array([ws.cell(r, jy).value for r in range(2, last + 1)], dtype=float)
    x = np.array([ws.cell(r, jx).value for r in range(2, last + 1)], dtype=float)
    return y, x


def _invented_extra_rows():
    """Eight invented river samples (not measurements), two at discharges above every committed one."""
    rng = np.random.default_rng(4242)
    q = np.array([3.3, 12.0, 35.5, 88.0, 150.0, 260.0, 640.0, 700.0])
    load = np.round(0.8 * q ** 1.6 * rng.lognormal(0.0, 0.35, q.size), 1)
    return q, load


@pytest.fixture(scope="module")
def recalculated(tmp_path_factory):
    """One LibreOffice run: the committed regression workbooks, and river_sediment with rows appended."""
    if SOFFICE is None:
        pytest.skip("LibreOffice (soffice) is not installed")
    from unbend.udfs.recalc import recalculate_many

    base = tmp_path_factory.mktemp("lo")
    sc = SCENARIOS["river_sediment"]
    wb = openpyxl.load_workbook(COMMITTED / "river_sediment.xlsx")
    ws = wb["Data"]
    table = ws.tables[sc["table"]]
    head = [c.value for c in ws[1]]
    jy, jx = head.index(sc["y"]) + 1, head.index(sc["x"]) + 1
    last = int(re.search(r"(\d+)$", table.ref).group(1))
    q, load = _invented_extra_rows()
    for k, (qq, ll) in enumerate(zip(q, load), start=1):
        ws.cell(last + k, jx).value = float(qq)
        ws.cell(last + k, jy).value = float(ll)
    new_last = last + len(q)
    table.ref = re.sub(r"\d+$", str(new_last), table.ref)
    if table.autoFilter is not None:
        table.autoFilter.ref = table.ref
    (base / "in").mkdir()
    more = base / "in" / "river_sediment_more.xlsx"
    wb.save(more)
    inputs = [COMMITTED / f"{n}.xlsx" for n in REGRESSION] + [more]
    outs = recalculate_many(inputs, base / "out")
    done = {p.stem: p for p in outs}
    return dict(done=done, more=more, appended=len(q), committed_last=last)


def _engine_for(summary, y, x):
    return unbend.fit(y, x, y_power=float(summary["y_power"]), x_power=float(summary["x_power"]),
                      y_start=float(summary["y_start"]), x_start=float(summary["x_start"]),
                      level=float(summary["level"]))


def _compare_model(recalc_path, y, x):
    """The recalculated model sheet against the engine fitted to the same y and x (source: LibreOffice Calc)."""
    ws = openpyxl.load_workbook(recalc_path, data_only=True)[MODEL_SHEET]
    summary, preds = read_portable(ws)
    assert summary["check"] == "ok"
    assert summary["n"] == len(y)  # source: LibreOffice Calc's COUNT over the linked rows
    f = _engine_for(summary, y, x)
    # source: LibreOffice Calc's SLOPE, INTERCEPT and STEYX on the re-expressed columns
    np.testing.assert_allclose([summary["intercept"], summary["slope"]], f.coef, rtol=RTOL)
    np.testing.assert_allclose(summary["resid_sd"], f.resid_sd, rtol=RTOL)
    new_x = preds["new_x"].astype(float).to_numpy()
    assert len(new_x) >= 3
    e = f.predict(new_x, level=float(summary["level"]))
    for k in RESULTS:  # typical y (median), average y (smearing mean), both intervals
        # source: LibreOffice Calc (outside spreadsheet program) computing the sheet's built-in formulas
        np.testing.assert_allclose(preds[k].astype(float).to_numpy(), e[k].to_numpy(), rtol=RTOL, err_msg=k)
    assert [v == "yes" for v in preds["outside"]] == list(e["outside_range"])
    return summary, preds, f


@needs_soffice
@pytest.mark.parametrize("name", REGRESSION)
def test_model_sheet_recalculated_by_libreoffice_matches_engine(recalculated, name):
    y, x = _data_xy(COMMITTED / f"{name}.xlsx", name)
    summary, preds, f = _compare_model(recalculated["done"][name], y, x)
    # the powers on the sheet are the pair the engine picks for these data
    assert (float(summary["y_power"]), float(summary["x_power"])) == unbend.best_pair(y, x)
    assert list(preds["new_x"].astype(float)) == SCENARIOS[name]["new_x"]


@needs_soffice
def test_model_follows_rows_appended_to_the_data_table(recalculated):
    y0, x0 = _data_xy(COMMITTED / "river_sediment.xlsx", "river_sediment")
    y, x = _data_xy(recalculated["more"], "river_sediment")
    assert len(y) == len(y0) + recalculated["appended"]
    q, load = _invented_extra_rows()
    np.testing.assert_array_equal(x[-len(q):], q)
    np.testing.assert_array_equal(y[-len(q):], load)
    summary, preds, f = _compare_model(recalculated["done"]["river_sediment_more"], y, x)
    # the longer data moved the line, and the new largest discharge (700) now covers the new x of 600
    f0 = _engine_for(summary, y0, x0)
    assert abs(f.coef[1] - f0.coef[1]) > 1e-6
    assert summary["x_max"] == 700.0
    assert preds["outside"].iloc[-1] == "no" and float(preds["new_x"].iloc[-1]) == 600.0


def test_network_lines_sheet_equals_fit_groups_on_its_data_and_the_command_agrees(tmp_path):
    """The gauging network demo: the Lines sheet's slopes are fit_groups on the Data sheet's rows (read back
    from the file), and `unbend groups` on the committed workbook writes the same slopes."""
    import contextlib
    import io

    from unbend.demo_data import ODD_STATION
    from unbend.udfs import cli

    sc = SCENARIOS["gauging_network"]
    wb = openpyxl.load_workbook(COMMITTED / "gauging_network.xlsx")
    data = list(wb["Data"].iter_rows(min_row=2, values_only=True))
    head = [c.value for c in wb["Data"][1]]
    jg, jx, jy = (head.index(sc[k]) for k in ("groups", "x", "y"))
    y = np.array([np.nan if r[jy] is None else r[jy] for r in data], float)
    x = np.array([r[jx] for r in data], float)
    g = np.array([r[jg] for r in data], object)
    gf = unbend.fit_groups(y, x, g)
    lines = {r[0]: r for r in wb["Lines"].iter_rows(min_row=5, values_only=True) if r[0] is not None}
    table = gf.table.set_index("group")
    assert set(lines) == set(table.index)
    for name, r in lines.items():
        assert r[1] == table.loc[name, "n"] and r[2] == pytest.approx(table.loc[name, "slope"], rel=1e-12)
        assert (r[3], r[4]) == pytest.approx((table.loc[name, "slope_low"], table.loc[name, "slope_high"]), rel=1e-12)
    text = " ".join(str(c.value) for c in wb["Notes"]["A"] if c.value)
    assert "INVENTED DATA" in text and f"{gf.n_skipped} readings are blank" in text
    # the story's claims: logs of both for all stations; the odd station's residuals curve and its own power
    # for y leaves the common one out
    assert "here logs of both" in text and (gf.y_power, gf.x_power) == (0.0, 0.0)
    odd = table.loc[ODD_STATION]
    assert odd["curvature_p"] < 0.05 and bool(odd["own_y_differs"]) and not odd["own_y_low"] <= 0 <= odd["own_y_high"]
    out = tmp_path / "net.xlsx"
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        code = cli.main(["groups", str(COMMITTED / "gauging_network.xlsx"), "--y", sc["y"], "--x", sc["x"],
                         "--by", sc["groups"], "--out", str(out), "--quiet"])
    assert code == 0
    got = {r[0]: r[1] for r in openpyxl.load_workbook(out)["Slopes"].iter_rows(min_row=5, values_only=True) if r[0]}
    assert got == pytest.approx({k: r[2] for k, r in lines.items()}, rel=1e-12)


@needs_soffice
def test_calibration_demo_reads_x_back_in_built_in_formulas(recalculated):
    """The detector demo's block 'x from a measured y', computed by LibreOffice, equals LineFit.inverse."""
    name = "detector_calibration"
    y, x = _data_xy(COMMITTED / f"{name}.xlsx", name)
    ws = openpyxl.load_workbook(recalculated["done"][name], data_only=True)[MODEL_SHEET]
    summary, _ = read_portable(ws)
    rows = read_portable_inverse(ws)
    samples = SCENARIOS[name]["samples"]()
    reads = samples["reading_1"].to_numpy(float)
    assert rows["reading"].astype(float).tolist() == reads.tolist()
    e = _engine_for(summary, y, x).inverse(reads, level=float(summary["level"]))
    for k in ("x", "low", "high"):
        # source: LibreOffice Calc (outside spreadsheet program) computing the block's built-in formulas
        np.testing.assert_allclose(rows[k].astype(float).to_numpy(), e[k].to_numpy(), rtol=RTOL, err_msg=k)
    assert [v == "yes" for v in rows["outside"]] == list(e["outside_range"])
    # known truth (invented): the estimates track the concentrations the samples were made up at. Reading
    # scatter is 4% on the log scale and the slope about 0.78, so x is off by about 5% per reading; 20% is
    # over four of those. (Single-reading intervals share one fitted line, so their misses are not independent;
    # coverage itself is checked by simulation in tests/test_calibration.py.)
    truth = samples["made_up_at_ug_per_l"].to_numpy(float)
    assert np.all(np.abs(rows["x"].astype(float).to_numpy() / truth - 1) < 0.2)
