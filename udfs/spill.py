"""Formulas that spill: the dynamic-array marks a workbook needs, for files written with openpyxl.

A formula that returns a table (``=UNBEND_FIT(...)``, ``=UNBEND_PREDICT(y, x, F2:F6)``) fills the
cells below and to its right ("spills") in spreadsheet versions with dynamic arrays. In the file,
such a cell is an array formula whose range is its own cell and which carries a cell-metadata
index (``<c r="A11" cm="1"><f t="array" ref="A11">...``) pointing at a metadata part
(``xl/metadata.xml``) that declares the dynamic-array property (``XLDAPR``,
``fDynamic="1"``). Without these marks a version with dynamic arrays opens the formula as an
implicit intersection (``=@UNBEND_FIT(...)``) and shows one value. XlsxWriter writes them
(``write_dynamic_array_formula``); openpyxl does not, so :func:`mark_spilling` adds them to a file
openpyxl has saved. A version without dynamic arrays reads the same cell as a one-cell array
formula and shows the table's top-left value.

Use :func:`put_spilling` to write the formula and record the cell, then save with
:func:`save_spilling` (or call :func:`mark_spilling` on the saved file).
"""
from __future__ import annotations

import os
import re
import tempfile
import zipfile
from xml.etree import ElementTree

from openpyxl.worksheet.formula import ArrayFormula

__all__ = ["put_spilling", "spilling_cells", "save_spilling", "mark_spilling", "METADATA_XML"]

_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_METADATA_TYPE = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheetMetadata+xml"
_METADATA_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/sheetMetadata"

#: The metadata part: one metadata type (XLDAPR, the dynamic-array properties) and one cell-metadata
#: record that every spilling cell points at (cm="1"). Same content as XlsxWriter writes.
METADATA_XML = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<metadata xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
    'xmlns:xda="http://schemas.microsoft.com/office/spreadsheetml/2017/dynamicarray">'
    '<metadataTypes count="1"><metadataType name="XLDAPR" minSupportedVersion="120000" copy="1" pasteAll="1" '
    'pasteValues="1" merge="1" splitFirst="1" rowColShift="1" clearFormats="1" clearComments="1" assign="1" '
    'coerce="1" cellMeta="1"/></metadataTypes>'
    '<futureMetadata name="XLDAPR" count="1"><bk><extLst><ext uri="{bdbb8cdc-fa1e-496e-a857-3c3f30c029c3}">'
    '<xda:dynamicArrayProperties fDynamic="1" fCollapsed="0"/></ext></extLst></bk></futureMetadata>'
    '<cellMetadata count="1"><bk><rc t="1" v="0"/></bk></cellMetadata>'
    '</metadata>'
)


def put_spilling(ws, coordinate: str, formula: str):
    """Write a formula that returns a table so that it spills; the cell is recorded on the workbook."""
    if not formula.startswith("="):
        raise ValueError("a formula starts with '='")
    ws[coordinate] = ArrayFormula(coordinate, formula)
    spilling_cells(ws.parent).append((ws.title, coordinate))
    return ws[coordinate]


def spilling_cells(wb) -> list:
    """The (sheet title, coordinate) of every formula written with :func:`put_spilling`."""
    cells = getattr(wb, "_unbend_spilling", None)
    if cells is None:
        cells = wb._unbend_spilling = []
    return cells


def save_spilling(wb, path) -> None:
    """``wb.save(path)``, then the dynamic-array marks for the cells :func:`put_spilling` wrote."""
    wb.save(path)
    cells = spilling_cells(wb)
    if cells:
        mark_spilling(path, cells)


def _sheet_parts(z: zipfile.ZipFile) -> dict:
    """Sheet name -> its part name in the archive (from the workbook and its relationships)."""
    wb = ElementTree.fromstring(z.read("xl/workbook.xml"))
    rels = ElementTree.fromstring(z.read("xl/_rels/workbook.xml.rels"))
    target = {r.get("Id"): r.get("Target") for r in rels.iter(f"{{{_PKG_REL}}}Relationship")}
    out = {}
    for s in wb.iter(f"{{{_MAIN}}}sheet"):
        t = target[s.get(f"{{{_REL}}}id")]
        out[s.get("name")] = t.lstrip("/") if t.startswith("/") else "xl/" + t
    return out


def _mark_cell(xml: str, coordinate: str) -> str:
    tag = re.compile(rf'<c r="{coordinate}"(?P<attrs>[^>]*?)>(?P<body><f t="array" ref="{coordinate}"[^>]*>)')
    m = tag.search(xml)
    if m is None:
        raise ValueError(f"{coordinate}: no one-cell array formula there to mark as spilling")
    if ' cm="' in m.group("attrs"):
        return xml
    return xml[:m.start()] + f'<c r="{coordinate}"{m.group("attrs")} cm="1">{m.group("body")}' + xml[m.end():]


def mark_spilling(path, cells) -> None:
    """Add the dynamic-array marks to a saved workbook, in place (atomically).

    Parameters
    ----------
    path : str or path-like
        An .xlsx or .xlsm file written by openpyxl.
    cells : iterable of (sheet title, coordinate)
        Cells holding one-cell array formulas (openpyxl's ``ArrayFormula`` with ``ref`` equal to
        the cell) that should spill.
    """
    path = os.fspath(path)
    by_sheet = {}
    for title, coord in cells:
        by_sheet.setdefault(title, []).append(coord)
    with zipfile.ZipFile(path) as z:
        parts = _sheet_parts(z)
        items = [(info, z.read(info.filename)) for info in z.infolist()]
    content = {info.filename: data for info, data in items}
    edits = {}
    for title, coords in by_sheet.items():
        xml = content[parts[title]].decode("utf-8")
        for coord in coords:
            xml = _mark_cell(xml, coord)
        edits[parts[title]] = xml.encode("utf-8")
    new_part = "xl/metadata.xml" not in content
    if new_part:
        types = content["[Content_Types].xml"].decode("utf-8")
        types = types.replace("</Types>", f'<Override PartName="/xl/metadata.xml" ContentType="{_METADATA_TYPE}"/></Types>')
        edits["[Content_Types].xml"] = types.encode("utf-8")
        rels = content["xl/_rels/workbook.xml.rels"].decode("utf-8")
        used = set(re.findall(r'Id="([^"]+)"', rels))
        k = 1
        while f"rId{k}" in used:
            k += 1
        rels = rels.replace("</Relationships>",
                            f'<Relationship Id="rId{k}" Type="{_METADATA_REL}" Target="metadata.xml"/></Relationships>')
        edits["xl/_rels/workbook.xml.rels"] = rels.encode("utf-8")
    fd, tmp = tempfile.mkstemp(prefix=".unbend-", suffix=os.path.splitext(path)[1], dir=os.path.dirname(os.path.abspath(path)))
    os.close(fd)
    try:
        with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as out:
            for info, data in items:
                out.writestr(info, edits.get(info.filename, data))
            if new_part:
                out.writestr("xl/metadata.xml", METADATA_XML)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
