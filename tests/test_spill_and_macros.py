"""Workbooks unbend writes: table formulas that spill, and macro-enabled copies in which Import Functions works.

What is checked against what
----------------------------
* Spilling, read from the saved XML: every cell that calls an unbend function (the tables
  UNBEND_SCAN, UNBEND_FIT, UNBEND_PREDICT over a range ... and the single values alike) is a one-cell
  array formula with the dynamic-array cell-metadata mark, and the workbook has the metadata part, its content type and its
  relationship. The expected form is what XlsxWriter (outside library) writes for
  ``write_dynamic_array_formula``: the same cell attributes and the same metadata part.
* Macro-enabled copies (.xlsm): the VBA project is byte for byte the one in the installed xlwings'
  ``quickstart_standalone.xlsm`` (outside source); the workbook part has the macro-enabled content
  type and the VBA relationship; the code names match the project's document modules; the file
  name passes the test the xlwings add-in's ribbon makes before Import Functions (read from the
  installed add-in source, ``addin/RibbonXlwings.bas``); the config sheet names the UDF module
  under the key the standalone module reads (``xlwings.bas``: ``GetConfig("UDF MODULES")`` over
  the ``xlwings.conf`` sheet).
"""
from __future__ import annotations

import re
import zipfile
from pathlib import Path

import openpyxl
import pytest

from unbend.udfs.demo import SCENARIOS, build_demo_workbook, standalone_template
from unbend.udfs.spill import METADATA_XML, mark_spilling, put_spilling, save_spilling

ROOT = Path(__file__).resolve().parents[1]
COMMITTED = ROOT / "workbooks_demo"
TABLE_FUNCTIONS = ("UNBEND_SUGGEST", "UNBEND_SCAN", "UNBEND_FIT", "UNBEND_PREDICT", "UNBEND_RESIDUALS", "UNBEND_GROUPS",
                   "UNBEND_GROUP_PREDICT",
                   "UNBEND_SPREAD", "UNBEND_SYMMETRY")
XLWINGS = Path(standalone_template()).parent


def _parts(path):
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist()}


def _sheet_xml(parts, title):
    wb = parts["xl/workbook.xml"].decode()
    rid = re.search(rf'<sheet name="{re.escape(title)}"[^>]*r:id="(rId\d+)"', wb).group(1)
    rels = parts["xl/_rels/workbook.xml.rels"].decode()
    target = re.search(rf'<Relationship[^>]*Target="([^"]+)"[^>]*Id="{rid}"|<Relationship[^>]*Id="{rid}"[^>]*Target="([^"]+)"',
                       rels)
    t = next(g for g in target.groups() if g)
    return parts[t.lstrip("/") if t.startswith("/") else "xl/" + t].decode()


@pytest.fixture(scope="module")
def xlsxwriter_reference(tmp_path_factory):
    """What XlsxWriter writes for two dynamic-array formulas (the outside reference)."""
    xlsxwriter = pytest.importorskip("xlsxwriter")
    path = tmp_path_factory.mktemp("ref") / "reference.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("S")
    ws.write_dynamic_array_formula("B3:B3", "=UNBEND_FIT(A1:A5,B1:B5)")
    ws.write_dynamic_array_formula("D7:D7", "=UNBEND_SCAN(A1:A5,B1:B5)")
    wb.close()
    return _parts(path)


def _spill_cells(xml):
    """coordinate -> (attributes of <c>, the <f> element) for every array formula cell."""
    out = {}
    for m in re.finditer(r'<c r="([A-Z]+\d+)"([^>]*)>(<f t="array"[^>]*>)([^<]*)</f>', xml):
        out[m.group(1)] = (m.group(2), m.group(3), m.group(4))
    return out


def test_our_marks_are_the_ones_xlsxwriter_writes(tmp_path, xlsxwriter_reference):
    ref = xlsxwriter_reference
    # the metadata part, its content type and its relationship
    assert ref["xl/metadata.xml"].decode() == METADATA_XML
    # our own: openpyxl writes the formula, mark_spilling adds the marks
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "S"
    put_spilling(ws, "B3", "=UNBEND_FIT(A1:A5,B1:B5)")
    put_spilling(ws, "D7", "=UNBEND_SCAN(A1:A5,B1:B5)")
    ws["F1"] = "=SUM(A1:A5)"  # an ordinary formula stays ordinary
    path = tmp_path / "ours.xlsx"
    save_spilling(wb, path)
    ours = _parts(path)
    assert ours["xl/metadata.xml"].decode() == METADATA_XML
    for parts in (ref, ours):
        types = parts["[Content_Types].xml"].decode()
        assert re.search(r'PartName="/xl/metadata.xml" ContentType="application/vnd.openxmlformats-officedocument'
                         r'\.spreadsheetml\.sheetMetadata\+xml"', types)
        rels = parts["xl/_rels/workbook.xml.rels"].decode()
        rel = re.search(r'<Relationship[^>]*relationships/sheetMetadata"[^>]*>', rels).group(0)
        assert 'Target="metadata.xml"' in rel
    want = _spill_cells(_sheet_xml(ref, "S"))
    got = _spill_cells(_sheet_xml(ours, "S"))
    assert set(got) == set(want) == {"B3", "D7"}
    for coord in want:
        assert ' cm="1"' in want[coord][0] and ' cm="1"' in got[coord][0]
        assert got[coord][1] == want[coord][1] == f'<f t="array" ref="{coord}">'
        assert got[coord][2] == want[coord][2]
    assert 'cm="' not in re.search(r'<c r="F1"[^>]*>', _sheet_xml(ours, "S")).group(0)
    # marking twice changes nothing
    mark_spilling(path, [("S", "B3")])
    assert _parts(path)["xl/worksheets/sheet1.xml"] == ours["xl/worksheets/sheet1.xml"]


def test_marking_a_cell_without_an_array_formula_is_refused(tmp_path):
    wb = openpyxl.Workbook()
    wb.active["A1"] = "=1+1"
    path = tmp_path / "plain.xlsx"
    wb.save(path)
    with pytest.raises(ValueError, match="A1"):
        mark_spilling(path, [(wb.active.title, "A1")])


@pytest.mark.parametrize("suffix", ["xlsx", "xlsm"])
@pytest.mark.parametrize("name", list(SCENARIOS))
def test_every_table_formula_in_the_demo_workbooks_spills(name, suffix):
    path = COMMITTED / f"{name}.{suffix}"
    parts = _parts(path)
    assert parts["xl/metadata.xml"].decode() == METADATA_XML
    wb = openpyxl.load_workbook(path)
    seen = 0
    for ws in wb.worksheets:
        xml = _sheet_xml(parts, ws.title)
        spills = _spill_cells(xml)
        for row in ws.iter_rows():
            for c in row:
                if c.data_type != "f":  # formulas only (the sheets also show formulas as text beside them)
                    continue
                text = getattr(c.value, "text", c.value)
                if not (isinstance(text, str) and text.startswith("=UNBEND_")):
                    continue
                # every call of the functions, tables and single values alike: a version with dynamic
                # arrays shows no implicit-intersection @ in front of any of them
                fn = re.match(r"=(UNBEND_[A-Z_]+)\(", text).group(1)
                seen += fn in TABLE_FUNCTIONS
                assert c.coordinate in spills, f"{ws.title}!{c.coordinate}: {text}"
                attrs, f, body = spills[c.coordinate]
                assert ' cm="1"' in attrs and f == f'<f t="array" ref="{c.coordinate}">'
    assert seen >= (2 if "groups" in SCENARIOS[name] else 5)


# ----------------------------------------------------------------------------- macro-enabled copies

def _ribbon_extensions():
    """The file endings the xlwings add-in's Import Functions button accepts (read from its source)."""
    src = (XLWINGS / "addin" / "RibbonXlwings.bas").read_text(encoding="utf-8", errors="replace")
    block = src[src.index("Sub ImportFunctions"):src.index("End Sub", src.index("Sub ImportFunctions"))]
    return set(re.findall(r'<> "(\.xl\w+)"', block))


def test_the_ribbon_check_is_read_from_xlwings():
    assert _ribbon_extensions() == {".xlsm", ".xlsb", ".xlam"}


@pytest.mark.parametrize("name", list(SCENARIOS))
def test_macro_enabled_copy_carries_xlwings_standalone_project(name):
    path = COMMITTED / f"{name}.xlsm"
    assert path.suffix in _ribbon_extensions()  # Import Functions does not ask to save in another format
    assert (COMMITTED / f"{name}.xlsx").suffix not in _ribbon_extensions()  # the add-in-free copy for colleagues
    parts = _parts(path)
    template = _parts(standalone_template())
    assert parts["xl/vbaProject.bin"] == template["xl/vbaProject.bin"]
    types = parts["[Content_Types].xml"].decode()
    assert re.search(r'PartName="/xl/workbook.xml" ContentType="application/vnd.ms-excel.sheet.macroEnabled.main\+xml"',
                     types)
    assert 'ContentType="application/vnd.ms-office.vbaProject"' in types
    assert "relationships/vbaProject" in parts["xl/_rels/workbook.xml.rels"].decode()
    # the document modules of the template's project are ThisWorkbook, Sheet1 and Sheet2
    project = template["xl/vbaProject.bin"]
    for module in (b"Document=ThisWorkbook", b"Document=Sheet1", b"Document=Sheet2", b"Module=xlwings"):
        assert module in project
    assert re.search(r'<workbookPr[^>]*codeName="ThisWorkbook"', parts["xl/workbook.xml"].decode())
    wb = openpyxl.load_workbook(path, keep_vba=True)
    assert [ws.sheet_properties.codeName for ws in wb.worksheets][:2] == ["Sheet1", "Sheet2"]
    # the standalone module reads the UDF module from the sheet named xlwings.conf, key "UDF MODULES"
    bas = (XLWINGS / "xlwings.bas").read_text(encoding="utf-8", errors="replace")
    assert 'Public Const PROJECT_NAME As String = "xlwings"' in bas and 'GetConfig("UDF MODULES")' in bas
    assert 'Set sht = wb.Sheets(PROJECT_NAME & ".conf")' in bas and "d.Add UCase(cell.Value)" in bas
    conf = wb["xlwings.conf"]
    assert conf["A1"].value.upper() == "UDF MODULES" and conf["B1"].value == "unbend.udfs"
    assert "Sub ImportPythonUDFs()" in bas  # the macro the Notes tell the user to run
    notes = "\n".join(str(c.value) for c in wb["Notes"]["A"] if c.value)
    assert "ImportPythonUDFs" in notes and "Trust access to the VBA project object model" in notes


def test_the_xlsm_and_xlsx_hold_the_same_cells_apart_from_the_notes(tmp_path):
    a = openpyxl.load_workbook(build_demo_workbook("tool_life", tmp_path))
    b = openpyxl.load_workbook(build_demo_workbook("tool_life", tmp_path, macro_enabled=True))
    assert a.sheetnames == b.sheetnames
    for title in a.sheetnames:
        if title == "Notes":
            continue
        va = [[getattr(c.value, "text", c.value) for c in r] for r in a[title].iter_rows()]
        vb = [[getattr(c.value, "text", c.value) for c in r] for r in b[title].iter_rows()]
        assert va == vb, title
