"""The XlsxWriter-based writer (udfs/xlsx.py) and the report workbook it writes.

What is checked against what
----------------------------
* Files are read back with openpyxl (an outside reader) and recalculated in LibreOffice Calc, headless
  (an outside spreadsheet program, through ``unbend.udfs.recalc``).
* Shared formulas are the form ECMA-376 Part 1, 18.3.1.40 (``<f t="shared" ref=... si=...>``) gives a
  formula filled down a column (from memory); openpyxl and LibreOffice must both read every cell's own
  formula from it.
* The report's model sheet is compared with scipy.stats.linregress on the textbook ladder re-expression
  (``conftest.ref``; common practice, Tukey 1977) and its predictions with the engine's, to 1e-9.
* Data are invented (seeded); counts with zeros need a start (known truth of the construction).
"""
from __future__ import annotations

import math
import re
import shutil
import zipfile

import numpy as np
import openpyxl
import pandas as pd
import pytest
from scipy import stats

from unbend.udfs.xlsx import Book, Column, Style

needs_soffice = pytest.mark.skipif(shutil.which("soffice") is None, reason="LibreOffice (soffice) is not installed")


def sheet_xml(path, name):
    with zipfile.ZipFile(path) as z:
        wbx = z.read("xl/workbook.xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
        rid = re.search(rf'<sheet name="{re.escape(name)}" sheetId="\d+" r:id="(rId\d+)"', wbx).group(1)
        target = re.search(rf'Id="{rid}"[^>]*Target="([^"]+)"', rels) or re.search(rf'Target="([^"]+)"[^>]*Id="{rid}"',
                                                                                  rels)
        return z.read("xl/" + target.group(1).lstrip("/").replace("xl/", "")).decode()


def small_book(path):
    b = Book(path)
    s = b.sheet("Block")
    s.text(1, 1, "=1+1 is text here")
    n = 6
    y = np.array([1.5, np.nan, 3.0, np.inf, 5.25, 6.0])
    mixed = [2.0, "=SUM(A1)", True, None, "+A1", 7.0]
    s.block(2, 1, [Column("number", y, styles=[Style(num_format="0.0"), Style(num_format="0.000")],
                          style_index=[0, 1, 0, 1, 0, 1]),
                   Column("value", mixed, Style(num_format="0.00")),
                   Column("text", ["a", "@x", "", None, "-b", " c "]),
                   Column("formula", None, Style(num_format="0.00"),
                          formula_at=lambda r: f'=IF(ISNUMBER(A{r}),A{r}*2+$A$1*0,"none")' if False else
                          f'=IF(ISNUMBER(A{r}),A{r}*2,"none")')], n)
    s.text(2 + n, 1, "below the block")
    b.close()
    return path


def test_block_cells_read_back_as_written(tmp_path):
    p = small_book(tmp_path / "b.xlsx")
    ws = openpyxl.load_workbook(p)["Block"]
    assert ws["A1"].value == "=1+1 is text here" and ws["A1"].data_type == "s"
    assert [ws.cell(r, 1).value for r in range(2, 8)] == [1.5, None, 3.0, None, 5.25, 6.0]
    assert [ws.cell(r, 1).number_format for r in (2, 3, 4)] == ["0.0", "0.000", "0.0"]
    assert [ws.cell(r, 2).value for r in range(2, 8)] == [2.0, "=SUM(A1)", True, None, "+A1", 7.0]
    assert ws["B3"].data_type == "s" and ws["B6"].data_type == "s"  # text that looks like a formula stays text
    assert [ws.cell(r, 3).value for r in range(2, 8)] == ["a", "@x", None, None, "-b", " c "]
    assert [ws.cell(r, 4).value for r in range(2, 8)] == [f'=IF(ISNUMBER(A{r}),A{r}*2,"none")' for r in range(2, 8)]
    assert ws["A8"].value == "below the block"
    xml = sheet_xml(p, "Block")
    assert xml.count('t="shared"') == 6 and 'ref="D2:D7"' in xml
    for f in re.findall(r"<c [^>]*>(<f[^>]*(?:/>|>[^<]*</f>))(<v>[^<]*</v>)?</c>", xml):
        assert f[1] in ("", "<v></v>")  # formulas carry no cached value: spreadsheet programs compute them


@needs_soffice
def test_block_formulas_compute_in_libreoffice(recalculated):
    ws = openpyxl.load_workbook(recalculated["small"], data_only=True)["Block"]
    assert [ws.cell(r, 4).value for r in range(2, 8)] == [3.0, "none", 6.0, "none", 10.5, 12.0]


# ----------------------------------------------------------------------------- the report's model sheet
@pytest.fixture(scope="module")
def big_report(tmp_path_factory):
    """5,000 invented counts (more than the 4,980 rows the model sheet used to hold) with zeros and a start."""
    from unbend.udfs.report import analyse, write_report

    d = tmp_path_factory.mktemp("big")
    rng = np.random.default_rng(42)
    n = 5000
    size = np.round(rng.uniform(5, 500, n), 2)
    count = rng.poisson(0.02 * size).astype(float)
    assert (count == 0).any()
    df = pd.DataFrame({"size": size, "count": count})
    a = analyse(df, "count", ["size"], source="invented counts", invented=True, y_start=0.5, y_power=0.5,
                x_power=1.0, level=0.9)
    p = write_report(a, d / "r.xlsx")
    return dict(d=d, a=a, path=p, size=size, count=count, n=n)


@pytest.fixture(scope="module")
def recalculated(big_report, tmp_path_factory):
    """The small block workbook and the big report, recalculated in one LibreOffice run."""
    from unbend.udfs.recalc import recalculate_many

    d = tmp_path_factory.mktemp("lo")
    small = small_book(d / "b.xlsx")
    out = recalculate_many([small, big_report["path"]], d / "out", timeout=600)
    return {"small": out[0], "big": out[1]}


def test_model_sheet_holds_every_row(big_report):
    with zipfile.ZipFile(big_report["path"]) as z:
        refs = [re.search(r'ref="([A-Z0-9:]+)"', z.read(n).decode()).group(1) for n in z.namelist()
                if n.startswith("xl/tables/") and 'displayName="UnbendData' in z.read(n).decode()]
    assert len(refs) == 1
    first, last = (int(re.sub(r"[A-Z$]", "", part)) for part in refs[0].split(":"))
    ws = openpyxl.load_workbook(big_report["path"], read_only=True)["Model in formulas"]
    n = big_report["n"]
    assert last - first == n + 20  # header, every data row, 20 spare rows
    slope = next(ws.iter_rows(min_row=17, max_row=17, min_col=2, max_col=2, values_only=True))[0]
    assert f"$D${first + 1}:$D${last}" in slope  # the statistics look at every row
    tail = list(ws.iter_rows(min_row=first + n, max_row=first + n + 1, max_col=1, values_only=True))
    assert tail[0][0] == big_report["count"][-1] and tail[1][0] is None


@needs_soffice
def test_model_sheet_recalculates_to_the_engine(big_report, recalculated, ref):
    from unbend.udfs.portable import read_portable

    summary, rows = read_portable(openpyxl.load_workbook(recalculated["big"], data_only=True)["Model in formulas"])
    assert summary["n"] == big_report["n"] and summary["check"] == "ok"
    assert (summary["y_power"], summary["y_start"], summary["level"]) == (0.5, 0.5, 0.9)
    lr = stats.linregress(ref.ladder(big_report["size"], 1.0), ref.ladder(big_report["count"] + 0.5, 0.5))
    assert summary["slope"] == pytest.approx(lr.slope, rel=1e-9)  # source: scipy.stats.linregress
    assert summary["intercept"] == pytest.approx(lr.intercept, rel=1e-9)
    a = big_report["a"]
    engine = a.predictions
    assert len(rows) == len(engine)
    for (_, s), (_, e) in zip(rows.iterrows(), engine.iterrows()):
        for col in ("median", "mean", "low", "high", "line_low", "line_high"):
            ev, sv = float(e[col]), s[col]
            if math.isfinite(ev):
                assert sv == pytest.approx(ev, rel=1e-9), (col, sv, ev)
        assert s["outside"] == ("yes" if e["outside_range"] else "no")


def test_report_sheets_print_landscape_one_page_wide(big_report):
    wb = openpyxl.load_workbook(big_report["path"], read_only=False)
    assert wb.sheetnames == ["Summary", "Scan", "Fit", "Residuals", "Model in formulas"]
    for ws in wb.worksheets:
        assert ws.page_setup.orientation == "landscape", ws.title
        assert ws.sheet_properties.pageSetUpPr.fitToPage, ws.title
        # fitToWidth left out means 1 (ECMA-376 Part 1, 18.3.1.63, default 1; from memory)
        assert (ws.page_setup.fitToWidth or 1, ws.page_setup.fitToHeight) == (1, 0), ws.title
    assert "$A$1:$I$" in str(wb["Model in formulas"].print_area)
    assert len(wb["Residuals"]._charts) == 3
    # number formats survive: p-values, and four-significant-digit formats chosen by size
    scan = wb["Scan"]
    head = [c.value for c in scan[4]]
    j = head.index("curvature p") + 1
    assert scan.cell(5, j).number_format == '[<0.0001]"<0.0001";0.0000'
    res = wb["Residuals"]
    assert res.cell(3, 2).number_format in ("#,##0", "0.0", "0.000", "0.00000", "0.00E+00")


@pytest.mark.parametrize("row", [2, 4, 7])
def test_a_single_cell_inside_a_block_is_refused(tmp_path, row):
    """A block owns its rows: a single cell written into one (first, middle or last row) is an error, not a
    silently duplicated row."""
    b = Book(tmp_path / "clash.xlsx")
    s = b.sheet("S")
    s.block(2, 1, [Column("number", np.arange(6.0))], 6)
    s.text(row, 1, "clash")
    with pytest.raises(RuntimeError, match="inside a row block"):
        b.close()
