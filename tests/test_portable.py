"""The portable sheet: every number a built-in spreadsheet formula, recalculated by LibreOffice.

Outside program: LibreOffice Calc (headless) opens each workbook, computes
every formula itself and saves its results; those are compared with the
engine (which is itself checked against statsmodels in the engine tests) and
the t quantile with scipy.stats. All data here are invented, from seeded
random numbers, in made-up scenarios; they only prove that two independent
computations of the same textbook formulas agree.

All LibreOffice work happens in one run (module fixture) to keep the test
time modest.
"""
from __future__ import annotations

import math
import re
import shutil
import zipfile

import numpy as np
import openpyxl
import pytest
from scipy import stats

import unbend
from unbend import UnbendError
from unbend.udfs.portable import (CELL, add_portable_sheet, append_portable_rows, read_portable,
                                  write_portable_workbook)
from unbend.udfs.recalc import RecalcError, recalculate, recalculate_many

SOFFICE = shutil.which("soffice")
needs_soffice = pytest.mark.skipif(SOFFICE is None, reason="LibreOffice (soffice) is not installed")

RTOL = 1e-9
RESULTS = ["median", "mean", "line_low", "line_high", "low", "high"]


# ----------------------------------------------------------------------------- invented data
def _invented(name):
    """Invented, seeded data for each scenario (no real measurements)."""
    if name == "log_log_start":  # an invented growth curve with a zero in x and some y below 0
        rng = np.random.default_rng(101)
        x = np.r_[0.0, np.linspace(0.5, 20.0, 29)]
        y = np.exp(0.4 + 0.6 * np.log(x + 0.5) + rng.normal(0, 0.08, x.size)) - 1.5
        opts = dict(y_power=0, x_power=0, y_start=1.5, x_start=0.5)
        new_x = [0.0, 3.0, 10.0, 25.0, -1.0, "n/a"]  # 25 is outside; -1 + 0.5 cannot be logged; text
        return list(y), list(x), new_x, opts
    if name == "sqrt_raw":  # invented; a blank and a text row that both must be skipped
        rng = np.random.default_rng(102)
        x = np.linspace(1.0, 15.0, 24)
        y = list((2.0 + 0.8 * x + rng.normal(0, 0.3, x.size)) ** 2)
        y[5], y[11] = None, "n/a"
        return y, list(x), [1.0, 7.5, 15.0, 18.0], dict(y_power=0.5, x_power=1)
    if name == "recip_raw":  # invented rates that fall off as 1/(a + b x)
        rng = np.random.default_rng(103)
        x = np.linspace(1.0, 10.0, 20)
        y = 1.0 / (0.1 + 0.05 * x) * np.exp(rng.normal(0, 0.03, x.size))
        return list(y), list(x), [2.0, 5.0, 9.5, 11.0], dict(y_power=-1, x_power=1)
    if name == "raw_log":  # invented diminishing returns
        rng = np.random.default_rng(104)
        x = np.linspace(1.0, 50.0, 25)
        y = 3.0 + 2.0 * np.log(x) + rng.normal(0, 0.2, x.size)
        return list(y), list(x), [1.0, 10.0, 50.0, 80.0], dict(y_power=1, x_power=0)
    if name == "square_raw":  # invented
        rng = np.random.default_rng(105)
        x = np.linspace(1.0, 20.0, 22)
        y = np.sqrt(5.0 + 3.0 * x + rng.normal(0, 1.0, x.size))
        return list(y), list(x), [2.0, 10.0, 25.0], dict(y_power=2, x_power=1)
    if name == "raw_with_start":  # invented; a start on raw y changes nothing but must be taken off again
        rng = np.random.default_rng(111)
        x = np.linspace(0.0, 12.0, 18)
        y = 20.0 - 1.2 * x + rng.normal(0, 0.5, x.size)
        return list(y), list(x), [1.0, 6.0, 14.0], dict(y_power=1, x_power=1, y_start=5.0)
    if name == "recip_root_unbounded":  # invented; far new x reach the edge of the reciprocal-root scale
        rng = np.random.default_rng(106)
        x = np.linspace(1.0, 10.0, 20)
        z = -1.0 + 0.08 * x + rng.normal(0, 0.03, x.size)
        y = (-z) ** -2.0
        return list(y), list(x), [2.0, 6.0, 12.0, 14.0], dict(y_power=-0.5, x_power=1)
    raise KeyError(name)


CASES = ["log_log_start", "sqrt_raw", "recip_raw", "raw_log", "square_raw", "recip_root_unbounded"]
#: Engine comparisons skip these (see test_smeared_mean_from_its_definition).
TEXTBOOK_ONLY = ["raw_with_start"]


def _append_data():
    """Invented: 15 starting rows, then 8 more (one with text in y, skipped by both sides)."""
    rng = np.random.default_rng(107)
    x = np.linspace(1.0, 23.0, 23)
    y = list((1.5 + 0.6 * x + rng.normal(0, 0.25, x.size)) ** 2)
    y[19] = "n/a"
    return y[:15], list(x[:15]), y[15:], list(x[15:])


def _edit_data():
    """Invented power-law data, written at powers (1, 1) and then re-set in the cells by a 'colleague'."""
    rng = np.random.default_rng(108)
    x = np.linspace(2.0, 30.0, 26)
    y = np.exp(1.0 + 0.5 * np.log(x) + rng.normal(0, 0.05, x.size))
    return list(y), list(x), [3.0, 15.0, 30.0, 40.0]


EDIT = dict(y_power=0.0, x_power=0.5, y_start=2.0, x_start=1.0, level=0.9)

TEXTY = ["=1+1", "+A1", "-x", "@SUM(A1)"]


def _texty_data():
    """Invented: formula-like text in labels, data and new x must stay text."""
    rng = np.random.default_rng(109)
    x = list(np.linspace(1.0, 12.0, 12))
    y = list(4.0 + 1.5 * np.asarray(x) + rng.normal(0, 0.4, 12))
    y[2], y[4] = "-x", "@SUM(A1)"
    x[6] = "=1+1"
    return y, x, [2.0, "=2*3", "+A1", 6.0]


# ----------------------------------------------------------------------------- one LibreOffice run
@pytest.fixture(scope="module")
def lo(tmp_path_factory):
    if SOFFICE is None:
        pytest.skip("LibreOffice (soffice) is not installed")
    src = tmp_path_factory.mktemp("portable_src")
    out = tmp_path_factory.mktemp("portable_out")
    files = {}
    for name in CASES + TEXTBOOK_ONLY:
        y, x, nx, opts = _invented(name)
        files[name] = write_portable_workbook(src / f"{name}.xlsx", y, x, nx, invented_data=True, **opts)

    y0, x0, y1, x1 = _append_data()
    base = write_portable_workbook(src / "append_base.xlsx", y0, x0, [3.0, 12.0, 22.0, 26.0], y_power=0.5,
                                   x_power=1, spare_rows=3, invented_data=True)
    wb = openpyxl.load_workbook(base)
    ws = wb.active
    ref_before = _data_table(ws).ref
    end = append_portable_rows(ws, y1, x1)
    wb.save(src / "append_more.xlsx")
    files["append_base"] = base
    files["append_more"] = src / "append_more.xlsx"

    ye, xe, nxe = _edit_data()
    p = write_portable_workbook(src / "edited.xlsx", ye, xe, nxe, y_power=1, x_power=1, invented_data=True)
    wb = openpyxl.load_workbook(p)
    ws = wb.active
    for key, value in EDIT.items():
        ws[CELL[key]].value = value
    wb.save(p)
    files["edited"] = p

    yt, xt, nxt = _texty_data()
    files["texty"] = write_portable_workbook(src / "texty.xlsx", yt, xt, nxt, y_name="=1+1", x_name="+A1",
                                             title="@SUM(A1) check", invented_data=True)

    files["stale"] = _stale_file(src / "stale.xlsx")

    names = list(files)
    done = recalculate_many([files[k] for k in names], out)
    return {"src": files, "out": dict(zip(names, done)), "append": (ref_before, end)}


def _data_table(ws):
    return next(t for t in ws.tables.values() if t.displayName.startswith("UnbendData"))


def _stale_file(path):
    """A formula cell that carries a wrong cached result (999): only a real recalculation replaces it."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws["A1"] = 3
    ws["B1"] = "=A1*2"
    tmp = path.with_name("stale_tmp.xlsx")
    wb.save(tmp)
    with zipfile.ZipFile(tmp) as zin, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            if item.filename == "xl/worksheets/sheet1.xml":
                text = data.decode()
                assert "<f>A1*2</f><v />" in text
                data = text.replace("<f>A1*2</f><v />", "<f>A1*2</f><v>999</v>").encode()
            zout.writestr(item, data)
    tmp.unlink()
    return path


def _sheet(path):
    return openpyxl.load_workbook(path, data_only=True).active


# ----------------------------------------------------------------------------- comparing
def _compare(sheet_rows, engine_rows, worst):
    """Every prediction on the sheet against the engine, to a relative 1e-9; returns the worst relative gap."""
    assert len(sheet_rows) == len(engine_rows)
    for (_, s), (_, e) in zip(sheet_rows.iterrows(), engine_rows.iterrows()):
        for col in RESULTS:
            ev, sv = float(e[col]), s[col]
            if math.isnan(ev):
                assert sv in (None, ""), (col, sv)
            elif math.isinf(ev):
                assert ev > 0 and sv == "unbounded", (col, ev, sv)
            else:
                assert isinstance(sv, (int, float)) and not isinstance(sv, bool), (col, sv)
                gap = abs(sv - ev) / abs(ev)
                worst = max(worst, gap)
                assert gap <= RTOL, (col, sv, ev)
        assert (s["outside"] == "yes") == bool(e["outside_range"])
        assert (s["note"] or "") == e["note"]
    return worst


def _ladder(v, p):
    """Textbook ladder of powers (common practice, Tukey 1977): v^p, ln v at 0, -(v^p) below 0."""
    v = np.asarray(v, dtype=float)
    return np.log(v) if p == 0 else (v ** p if p > 0 else -(v ** p))


def _check_line(summary, f, y, x, y_power, x_power, y_start=0.0, x_start=0.0):
    """The line against scipy.stats.linregress on the textbook re-expression; t against scipy.stats.t."""
    yv = np.array([v if isinstance(v, float) else np.nan for v in y])
    xv = np.array([v if isinstance(v, float) else np.nan for v in x])
    ok = np.isfinite(yv) & np.isfinite(xv)
    yt, xt = _ladder(yv[ok] + y_start, y_power), _ladder(xv[ok] + x_start, x_power)
    lr = stats.linregress(xt, yt)
    sd = np.sqrt(np.sum((yt - lr.intercept - lr.slope * xt) ** 2) / (ok.sum() - 2))
    for key, ev in (("slope", lr.slope), ("intercept", lr.intercept), ("resid_sd", sd), ("r2", lr.rvalue ** 2),
                    ("x_min", xv[ok].min()), ("x_max", xv[ok].max())):
        assert summary[key] == pytest.approx(float(ev), rel=RTOL, abs=0), key
    assert summary["n"] == ok.sum() == f.n
    assert summary["resid_sd"] == pytest.approx(f.resid_sd, rel=RTOL)
    assert summary["t"] == pytest.approx(stats.t.ppf(0.5 + f.level / 2, f.n - 2), rel=RTOL)
    assert summary["check"] == "ok"


def _no_errors(path):
    """LibreOffice computed every formula without an error value (#NAME?, #VALUE!, ...)."""
    ws = _sheet(path)
    bad = [(c.coordinate, c.value) for row in ws.iter_rows() for c in row
           if isinstance(c.value, str) and re.fullmatch(r"#[A-Z0-9/]+[!?]?", c.value)]
    assert bad == []


# ----------------------------------------------------------------------------- (1) powers against the engine
@needs_soffice
@pytest.mark.parametrize("name", CASES)
def test_sheet_matches_engine(lo, name):
    y, x, nx, opts = _invented(name)
    f = unbend.fit([v if isinstance(v, float) else np.nan for v in y], x, **opts)
    summary, rows = read_portable(_sheet(lo["out"][name]))
    assert summary["y_power"] == opts["y_power"] and summary["x_power"] == opts["x_power"]
    _check_line(summary, f, y, x, **opts)
    if opts["y_power"] == 0:
        assert summary["smear"] == pytest.approx(float(np.mean(np.exp(f.residuals["residual"]))), rel=RTOL)
    _compare(rows, f.predict(nx, 0.95), 0.0)
    _no_errors(lo["out"][name])


def _duan_textbook(y, x, new_x, y_power, x_power, y_start=0.0, x_start=0.0):
    """Duan (1983) smearing mean written from its definition: mean over residuals e_i of g(line + e_i) - start."""
    yv = np.array([v if isinstance(v, float) else np.nan for v in y])
    xv = np.array([v if isinstance(v, float) else np.nan for v in x])
    ok = np.isfinite(yv) & np.isfinite(xv)
    yt, xt = _ladder(yv[ok] + y_start, y_power), _ladder(xv[ok] + x_start, x_power)
    lr = stats.linregress(xt, yt)
    e = yt - lr.intercept - lr.slope * xt
    out = []
    for v in new_x:
        z = lr.intercept + lr.slope * _ladder(v + x_start, x_power) + e
        if y_power == 0:
            g = np.exp(z)
        elif y_power == 1:
            g = z
        elif y_power > 0:
            g = np.maximum(z, 0.0) ** (1.0 / y_power)
        else:
            g = np.where(z < 0, np.abs(z) ** (1.0 / y_power), np.inf)
        out.append(float(np.mean(g)) - y_start)
    return out


@needs_soffice
@pytest.mark.parametrize("name", CASES + TEXTBOOK_ONLY)
def test_smeared_mean_from_its_definition(lo, name):
    """The sheet's average y against Duan's estimate computed here with numpy/scipy from the definition.

    raw_with_start is checked only here: at y power 1 the engine's mean does not take the y start off again
    (it returns the median plus the start), which the report mentions.
    """
    y, x, nx, opts = _invented(name)
    _, rows = read_portable(_sheet(lo["out"][name]))
    numeric = [v for v in nx if isinstance(v, float) and (v + opts.get("x_start", 0.0) > 0 or opts["x_power"] > 0)]
    want = _duan_textbook(y, x, numeric, **opts)
    got = [rows.loc[rows["new_x"] == v, "mean"].iloc[0] for v in numeric]
    for g, w in zip(got, want):
        if math.isinf(w):
            assert g == "unbounded"
        else:
            assert g == pytest.approx(w, rel=RTOL)
    if name == "raw_with_start":
        med = [rows.loc[rows["new_x"] == v, "median"].iloc[0] for v in numeric]
        assert got == pytest.approx(med, rel=1e-12)  # residuals average 0: the mean equals the line


@needs_soffice
def test_cases_cover_what_they_claim(lo):
    """The scenarios reach the edges they were built for (so the comparisons above test them)."""
    _, rows = read_portable(_sheet(lo["out"]["recip_root_unbounded"]))
    assert (rows["high"] == "unbounded").any() and (rows["mean"] == "unbounded").any()
    _, rows = read_portable(_sheet(lo["out"]["log_log_start"]))
    assert list(rows["note"].fillna(""))[-2:] == ["x cannot be re-expressed at this power", "x is not a number"]
    summary, _ = read_portable(_sheet(lo["out"]["sqrt_raw"]))
    assert summary["n"] == 22  # 24 rows, one blank and one text


@needs_soffice
def test_colleague_changes_settings(lo):
    """Powers, starts and level typed into the yellow cells drive everything (engine refitted at those settings)."""
    y, x, nx = _edit_data()
    lv = EDIT["level"]
    f = unbend.fit(y, x, y_power=EDIT["y_power"], x_power=EDIT["x_power"], y_start=EDIT["y_start"],
                   x_start=EDIT["x_start"], level=lv)
    summary, rows = read_portable(_sheet(lo["out"]["edited"]))
    _check_line(summary, f, y, x, EDIT["y_power"], EDIT["x_power"], EDIT["y_start"], EDIT["x_start"])
    _compare(rows, f.predict(nx, lv), 0.0)


# ----------------------------------------------------------------------------- (2) rows appended below
@needs_soffice
def test_appended_rows_recalculate(lo):
    y0, x0, y1, x1 = _append_data()
    ref_before, end = lo["append"]
    assert ref_before == "A67:G85" and end == 90  # 15 rows + 3 spare; 8 more fill 3 and add 5
    src = openpyxl.load_workbook(lo["src"]["append_more"])
    assert _data_table(src.active).ref == "A67:G90"
    nx = [3.0, 12.0, 22.0, 26.0]
    before = unbend.fit(y0, x0, y_power=0.5)
    after = unbend.fit([v if isinstance(v, float) else np.nan for v in y0 + y1], x0 + x1, y_power=0.5)
    assert after.n == before.n + 7
    s0, r0 = read_portable(_sheet(lo["out"]["append_base"]))
    s1, r1 = read_portable(_sheet(lo["out"]["append_more"]))
    _check_line(s0, before, y0, x0, 0.5, 1.0)
    _check_line(s1, after, y0 + y1, x0 + x1, 0.5, 1.0)
    _compare(r0, before.predict(nx), 0.0)
    _compare(r1, after.predict(nx), 0.0)
    # the new rows carry working formulas like the first rows
    ws = src.active
    assert ws["D90"].value == ws["D68"].value.replace("68", "90")


def test_append_refuses_beyond_capacity(tmp_path):
    rng = np.random.default_rng(110)  # invented
    x = list(np.linspace(1, 10, 10))
    y = list(2 + 0.5 * np.asarray(x) + rng.normal(0, 0.1, 10))
    p = write_portable_workbook(tmp_path / "small.xlsx", y, x, [5.0], spare_rows=0, capacity=12)
    ws = openpyxl.load_workbook(p).active
    with pytest.raises(UnbendError, match="larger capacity"):
        append_portable_rows(ws, [1.0, 2.0, 3.0], [1.0, 2.0, 3.0])


# ----------------------------------------------------------------------------- (3) formula-like text stays text
def _cell_xml(path, sheet_xml="xl/worksheets/sheet1.xml"):
    with zipfile.ZipFile(path) as z:
        xml = z.read(sheet_xml).decode("utf-8")
    return {m.group(1): m.group(0) for m in re.finditer(r'<c r="([A-Z]+[0-9]+)"[^>]*?(?:/>|>.*?</c>)', xml)}


def test_formula_like_text_is_written_as_text(tmp_path):
    y, x, nx = _texty_data()
    p = write_portable_workbook(tmp_path / "texty.xlsx", y, x, nx, y_name="=1+1", x_name="+A1",
                                title="=HYPERLINK(\"x\")")
    cells = _cell_xml(p)
    ws = openpyxl.load_workbook(p).active
    found = {}
    for coord, xml in cells.items():
        v = ws[coord].value
        if isinstance(v, str) and v in TEXTY + ["=2*3", "=HYPERLINK(\"x\")"]:
            found[coord] = v
            assert "<f>" not in xml and ('t="inlineStr"' in xml or 't="s"' in xml), xml
            assert ws[coord].data_type == "s"
    assert set(found.values()) == set(TEXTY + ["=2*3", "=HYPERLINK(\"x\")"])
    assert found[CELL["y_name"]] == "=1+1" and found[CELL["x_name"]] == "+A1" and found["A1"] == "=HYPERLINK(\"x\")"


@needs_soffice
def test_formula_like_text_stays_text_in_libreoffice(lo):
    y, x, nx = _texty_data()
    ws = _sheet(lo["out"]["texty"])
    assert ws[CELL["y_name"]].value == "=1+1" and ws[CELL["x_name"]].value == "+A1"
    assert ws["A1"].value == "@SUM(A1) check"
    summary, rows = read_portable(ws)
    assert list(rows["new_x"]) == nx
    engine_y = [v if isinstance(v, float) else np.nan for v in y]
    engine_x = [v if isinstance(v, float) else np.nan for v in x]
    f = unbend.fit(engine_y, engine_x)
    assert f.n == 9 and summary["n"] == 9  # the three text rows are skipped, not evaluated
    _check_line(summary, f, y, x, 1.0, 1.0)
    _compare(rows, f.predict(nx), 0.0)


# ----------------------------------------------------------------------------- (4) the file itself
PORTABLE_FUNCTIONS = {  # in both LibreOffice Calc and the common desktop spreadsheet program since 2007 (from memory)
    "IF", "AND", "OR", "NOT", "ISNUMBER", "ISERROR", "IFERROR", "INT", "MOD", "LN", "EXP", "SIGN", "ABS", "MAX",
    "MIN", "SQRT", "NA", "SLOPE", "INTERCEPT", "STEYX", "RSQ", "COUNT", "AVERAGE", "DEVSQ", "TINV", "SUMPRODUCT",
    "COUNTIF", "ROUND", "MID",
}


def test_written_file_is_valid_and_portable(tmp_path):
    y, x, nx, opts = _invented("log_log_start")
    p = write_portable_workbook(tmp_path / "model.xlsx", y, x, nx, **opts)
    assert [q.name for q in tmp_path.iterdir()] == ["model.xlsx"]  # no temporary file left behind
    wb = openpyxl.load_workbook(p)
    assert len(wb.worksheets) == 1
    ws = wb.active
    tables = {t.displayName.rstrip("0123456789"): t.ref for t in ws.tables.values()}
    assert tables == {"UnbendNewX": "A40:O56", "UnbendReadings": "A61:L66", "UnbendData": "A69:G119"}
    assert [c.value for c in ws["A69:G69"][0]] == ["y", "x"] + [
        "x of rows used (blank = row skipped)", "y re-expressed", "x re-expressed",
        "line at this x (re-expressed scale)", "residual (blank = row not used)"]
    used = set()
    n_formulas = 0
    for row in ws.iter_rows():
        for c in row:
            if c.data_type == "f":
                n_formulas += 1
                text = re.sub(r'"[^"]*"', '""', c.value)
                used |= set(re.findall(r"([A-Z][A-Z0-9.]*)\(", text))
    assert n_formulas > 300
    assert used <= PORTABLE_FUNCTIONS, used - PORTABLE_FUNCTIONS
    assert "Caution" in ws["A3"].value and "extrapolation" in ws["A3"].value and "licensed practice" in ws["A3"].value
    assert ws["A4"].value is None  # not invented unless the caller says so
    assert ws[CELL["y_power"]].value == 0 and ws[CELL["x_start"]].value == 0.5


def test_invented_data_note(tmp_path):
    y, x, nx, opts = _invented("raw_log")
    ws = openpyxl.load_workbook(write_portable_workbook(tmp_path / "d.xlsx", y, x, nx, invented_data=True,
                                                        **opts)).active
    assert "invented" in ws["A4"].value


def test_refuses_more_than_one_x_column(tmp_path):
    x2 = np.column_stack([np.arange(1.0, 11.0), np.arange(11.0, 21.0)])
    with pytest.raises(UnbendError, match="one x column"):
        write_portable_workbook(tmp_path / "two.xlsx", np.arange(10.0), x2, [1.0])
    assert list(tmp_path.iterdir()) == []


def test_failed_write_leaves_existing_file_untouched(tmp_path):
    y, x, nx, opts = _invented("raw_log")
    p = write_portable_workbook(tmp_path / "keep.xlsx", y, x, nx, **opts)
    before = p.read_bytes()
    with pytest.raises(UnbendError, match="start"):  # log of values <= 0: the engine proposes a start
        write_portable_workbook(p, [0.0] + y[1:], x, nx, y_power=0)
    assert p.read_bytes() == before
    assert [q.name for q in tmp_path.iterdir()] == ["keep.xlsx"]


def test_add_to_existing_workbook_twice():
    y, x, nx, opts = _invented("square_raw")
    wb = openpyxl.Workbook()
    a = add_portable_sheet(wb, y, x, nx, **opts)
    b = add_portable_sheet(wb, y, x, nx, **opts)
    assert a.title != b.title
    names = [n for ws in wb.worksheets for n in ws.tables]
    assert len(names) == len(set(names)) == 6


# ----------------------------------------------------------------------------- the recalculation harness
@needs_soffice
def test_libreoffice_recalculates_stale_cached_values(lo):
    """A file carrying a wrong cached result (999 for =A1*2) comes back with LibreOffice's own result."""
    ws = _sheet(lo["out"]["stale"])
    assert ws["B1"].value == 6


def test_recalculate_refuses_bad_requests(tmp_path):
    with pytest.raises(RecalcError, match="not found"):
        recalculate(tmp_path / "missing.xlsx", tmp_path / "out")
    p = tmp_path / "a.xlsx"
    openpyxl.Workbook().save(p)
    with pytest.raises(RecalcError, match="overwrite"):
        recalculate(p, tmp_path)
