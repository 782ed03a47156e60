"""The `unbend` command (udfs/cli.py): `unbend demo` and `unbend report`.

What is checked against what
----------------------------
* Data written by these tests are invented, from seeded random numbers, in
  made-up scenarios (a discharge/load/depth survey, assay batches); they only
  prove properties with a known truth: numbers written to a file are the
  numbers read back, files exist, messages are one line, inputs are untouched.
* The report's line is checked against statsmodels OLS (an outside reference
  library) fitted to the re-expressed columns the report itself shows, and the
  re-expression against the textbook ladder of powers in ``conftest.ref``
  (common practice, Tukey 1977).
* PNG files are checked against the PNG signature and IHDR chunk layout of the
  PNG specification (W3C PNG recommendation / ISO/IEC 15948; signature bytes
  from memory: 89 50 4E 47 0D 0A 1A 0A).
* The "billion laughs" entity bomb is the textbook XML entity-expansion attack
  (common practice in XML security; nested entities, 10 x 10 x ... expansion).

Each report run costs a few seconds, so the runs are module fixtures shared by
the checks that read them.
"""
from __future__ import annotations

import contextlib
import csv
import errno
import hashlib
import io
import os
import re
import shutil
import struct
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest
import statsmodels.api as sm

from unbend.udfs import cli
from unbend.udfs import readers

MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification, section 5.2 (from memory)
REPORT_SHEETS = ["Summary", "Scan", "Fit", "Residuals"]
PORTABLE_SHEET = "Model in formulas"


# ----------------------------------------------------------------------------- helpers
def run_main(argv):
    """Run the command in this process; returns (exit code, stdout, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def assert_one_line_failure(code, out, err, *, exit_code=cli.EXIT_BAD_INPUT):
    """Bad input: one plain line on stderr starting 'unbend:', the given non-zero exit, no traceback."""
    assert code != 0
    assert "Traceback" not in out and "Traceback" not in err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("unbend:"), lines[0]
    assert code == exit_code, f"exit code {code}: {lines[0]}"
    return lines[0]


def console_script() -> str:
    """The installed `unbend` console script of the interpreter running the tests."""
    exe = shutil.which("unbend", path=str(Path(sys.executable).parent)) or shutil.which("unbend")
    assert exe is not None, "the `unbend` console script is not installed"
    return exe


def invented_survey(n=48, seed=20240917):
    """Invented survey (no real measurements): load = 0.8 * discharge^1.5 * depth^0.4 * lognormal noise.

    Logs of load and discharge straighten it (known truth of the construction).
    """
    rng = np.random.default_rng(seed)
    q = np.round(np.exp(rng.uniform(np.log(2.0), np.log(300.0), n)), 3)
    depth = np.round(rng.uniform(0.5, 4.0, n), 3)
    load = np.round(0.8 * q ** 1.5 * depth ** 0.4 * rng.lognormal(0.0, 0.25, n), 4)
    site = np.array(["north", "east", "south", "west"])[np.arange(n) % 4]
    return {"site": list(site), "discharge": list(q), "depth": list(depth), "load": list(load)}


def write_csv(path, data, *, delimiter=",", encoding="utf-8", decimal="."):
    cols = list(data)
    with open(path, "w", newline="", encoding=encoding) as fh:
        w = csv.writer(fh, delimiter=delimiter)
        w.writerow(cols)
        for i in range(len(data[cols[0]])):
            row = []
            for c in cols:
                v = data[c][i]
                row.append(repr(float(v)).replace(".", decimal) if isinstance(v, (float, np.floating)) else v)
            w.writerow(row)
    return path


def write_xlsx(path, data, sheet="Measurements"):
    """A workbook with a notes sheet first and the data on ``sheet`` (so --sheet matters)."""
    wb = openpyxl.Workbook()
    wb.active.title = "About"
    wb.active["A1"] = "Invented survey for tests; not measurements."
    ws = wb.create_sheet(sheet)
    cols = list(data)
    ws.append(cols)
    for i in range(len(data[cols[0]])):
        ws.append([float(data[c][i]) if isinstance(data[c][i], (float, np.floating)) else data[c][i] for c in cols])
    wb.save(path)
    return path


def hand_xlsx(path, header, rows, *, sst_xml: bytes | None = None, sst_stream=None):
    """A minimal workbook written part by part, with its header in a shared-strings part.

    ``sst_xml`` replaces the shared-strings part; ``sst_stream(fileobj)`` streams it
    instead (for a very large part without holding it in memory).
    """
    def col(j):
        return "ABCDEFGHIJ"[j]
    sheet = [f'<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="{MAIN_NS}"><sheetData>',
             '<row r="1">' + "".join(f'<c r="{col(j)}1" t="s"><v>{j}</v></c>' for j in range(len(header))) + "</row>"]
    for i, r in enumerate(rows, start=2):
        sheet.append(f'<row r="{i}">' + "".join(f'<c r="{col(j)}{i}"><v>{float(v)!r}</v></c>'
                                                for j, v in enumerate(r)) + "</row>")
    sheet.append("</sheetData></worksheet>")
    if sst_xml is None and sst_stream is None:
        sst_xml = (f'<?xml version="1.0" encoding="UTF-8"?><sst xmlns="{MAIN_NS}" count="{len(header)}" '
                   f'uniqueCount="{len(header)}">' + "".join(f"<si><t>{h}</t></si>" for h in header)
                   + "</sst>").encode()
    ct = "application/vnd.openxmlformats-officedocument.spreadsheetml"
    parts = {
        "[Content_Types].xml": (
            '<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.openxmlformats.org/package/2006/'
            'content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-package.'
            'relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
            f'<Override PartName="/xl/workbook.xml" ContentType="{ct}.sheet.main+xml"/>'
            f'<Override PartName="/xl/worksheets/sheet1.xml" ContentType="{ct}.worksheet+xml"/>'
            f'<Override PartName="/xl/sharedStrings.xml" ContentType="{ct}.sharedStrings+xml"/></Types>'),
        "_rels/.rels": (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/package/'
            f'2006/relationships"><Relationship Id="rId1" Type="{REL_NS}/officeDocument" Target="xl/workbook.xml"/>'
            '</Relationships>'),
        "xl/workbook.xml": (f'<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="{MAIN_NS}" xmlns:r="{REL_NS}">'
                            '<sheets><sheet name="Data" sheetId="1" r:id="rId1"/></sheets></workbook>'),
        "xl/_rels/workbook.xml.rels": (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/package/'
            f'2006/relationships"><Relationship Id="rId1" Type="{REL_NS}/worksheet" Target="worksheets/sheet1.xml"/>'
            f'<Relationship Id="rId2" Type="{REL_NS}/sharedStrings" Target="sharedStrings.xml"/></Relationships>'),
        "xl/worksheets/sheet1.xml": "".join(sheet),
    }
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            z.writestr(name, text)
        if sst_stream is not None:
            with z.open("xl/sharedStrings.xml", "w", force_zip64=True) as fh:
                sst_stream(fh)
        else:
            z.writestr("xl/sharedStrings.xml", sst_xml)
    return path


def sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def tree_snapshot(folder):
    """{relative path: sha256} of every file below ``folder``."""
    folder = Path(folder)
    return {str(p.relative_to(folder)): sha256(p) for p in sorted(folder.rglob("*")) if p.is_file()}


def check_png(path):
    """A real PNG: signature, IHDR first, sensible size in pixels and on disk."""
    raw = Path(path).read_bytes()
    assert raw[:8] == PNG_SIGNATURE, path
    assert raw[12:16] == b"IHDR", path  # the first chunk is IHDR (PNG specification)
    width, height = struct.unpack(">II", raw[16:24])
    assert 300 <= width <= 5000 and 200 <= height <= 5000, (width, height)
    assert len(raw) > 10_000, f"{path} is only {len(raw)} bytes"
    assert raw[-12:-4] == b"\x00\x00\x00\x00IEND", "PNG does not end with an empty IEND chunk"


def sheet_table(ws, header_row=1):
    """Rows below a header row as {header: [values]} (stops at the first empty row)."""
    header = [c.value for c in ws[header_row]]
    out = {h: [] for h in header if h is not None}
    for row in ws.iter_rows(min_row=header_row + 1, values_only=True):
        if all(v is None for v in row):
            break
        for h, v in zip(header, row):
            if h is not None:
                out[h].append(v)
    return out


def fit_items(ws):
    """The Fit sheet's (item, value) rows as a dict."""
    return {r[0]: r[1] for r in ws.iter_rows(min_row=4, max_col=2, values_only=True) if r[0] is not None}


def sheet_text(ws) -> str:
    return "\n".join(str(v) for row in ws.iter_rows(values_only=True) for v in row if v is not None)


# ----------------------------------------------------------------------------- unbend demo
@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """`unbend demo` in process, then the installed console script into the same --out (must not reuse it)."""
    base = tmp_path_factory.mktemp("demo")
    code, out, err = run_main(["demo", "--out", base / "d", "--quiet"])
    first = tree_snapshot(base / "d") if (base / "d").is_dir() else {}
    t0 = time.monotonic()
    proc = subprocess.run([console_script(), "demo", "--out", str(base / "d"), "--quiet"], cwd=base,
                          capture_output=True, text=True, timeout=300)
    return dict(base=base, code=code, out=out, err=err, first=first, proc=proc, seconds=time.monotonic() - t0)


DEMO_BOOKS = [f"{n}.{ext}" for ext in ("xlsx", "xlsm")  # each with its macro-enabled copy
              for n in ("river_sediment", "tool_life", "fleet_fuel", "batch_defects", "detector_calibration",
                        "assay_batches", "gauging_network")]
DEMO_PNGS = ["before_after.png", "residuals.png", "scan.png"]


def test_demo_writes_the_workbooks_report_and_pngs(demo):
    assert demo["code"] == 0, demo["err"]
    assert "Traceback" not in demo["out"] + demo["err"]
    assert demo["err"] == ""  # --quiet: no progress lines
    d = demo["base"] / "d"
    names = sorted(p.name for p in d.iterdir() if p.is_file())
    assert names == sorted(DEMO_BOOKS + ["report_river_sediment.xlsx"])
    pngs = sorted(p.name for p in (d / "plots_river_sediment").iterdir())
    assert pngs == sorted(DEMO_PNGS)
    for p in DEMO_PNGS:
        check_png(d / "plots_river_sediment" / p)
    for b in DEMO_BOOKS + ["report_river_sediment.xlsx"]:
        assert zipfile.is_zipfile(d / b) and "xl/workbook.xml" in zipfile.ZipFile(d / b).namelist()
    # no temporary files left behind by the atomic writes
    assert not [p for p in d.rglob(".unbend-*")]


def test_demo_prints_powers_scan_verdict_and_predictions(demo):
    out = demo["out"]
    # the river data are built as load = 0.8 * q^1.6 * lognormal (engine/demo_data.py): logs of both
    # straighten it, a known truth of the construction
    flat = out.replace("\n", " ")
    assert re.search(r"Power for sediment_t_per_day alone, with discharge_m3s at log: estimate .*?Log is the ladder "
                     r"rung inside the interval nearest the estimate\. This is the rung the fit uses\.", flat)
    assert re.search(r"Power for discharge_m3s alone, with sediment_t_per_day at log: estimate .*?Log is the ladder "
                     r"rung inside the interval nearest the estimate\. This is the rung the fit uses\.", flat)
    assert "invented" in out
    lines = out.splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith("Scan, top 5 of"))
    head = lines[i + 1].split()
    assert head[:3] == ["rank", "y_rung", "x_rung"] and "verdict" in head
    top = lines[i + 2].split()
    assert top[:3] == ["1", "log", "log"] and "best" in lines[i + 2]
    assert [ln.split()[0] for ln in lines[i + 2:i + 7]] == ["1", "2", "3", "4", "5"]
    assert re.search(r"^Fit: a straight line of the log of sediment_t_per_day on the log of discharge_m3s\. ", out,
                     re.M)
    j = next(k for k, ln in enumerate(lines) if ln.startswith("Predictions in original units"))
    assert lines[j + 1].split() == ["discharge_m3s", "median", "mean", "low", "high", "outside_range"]
    preds = []
    for ln in lines[j + 2:]:
        if not ln.strip():
            break
        preds.append(ln.split())
    assert len(preds) >= 3
    for p in preds:
        median, mean, low, high = map(float, p[1:5])
        assert low < median < high and mean > median  # log scale: smeared mean above the median (Jensen)
    assert preds[-1][-1] == "True" and preds[0][-1] == "False"  # the last point is past the data: extrapolation
    assert "extrapolation" in out and "licensed practice" in out
    k = lines.index("Files written:")
    listed = [ln.strip() for ln in lines[k + 1:] if ln.strip()]
    assert len(listed) == len(DEMO_BOOKS) + 1 + len(DEMO_PNGS)  # workbooks, the report, the plots


def test_demo_summary_keeps_source_and_columns_on_separate_lines(demo):
    """The first two summary lines are two statements; printed run together they read as one."""
    lines = demo["out"].splitlines()
    assert "Data: river_sediment.xlsx, sheet Data" in lines
    assert not any("sheet Data y = " in ln for ln in lines)


def test_demo_report_workbook(demo):
    wb = openpyxl.load_workbook(demo["base"] / "d" / "report_river_sediment.xlsx")
    assert wb.sheetnames == REPORT_SHEETS + [PORTABLE_SHEET]
    assert len(wb["Residuals"]._charts) == 3
    text = sheet_text(wb["Summary"])
    assert "invented" in text and "extrapolation" in text and "licensed practice" in text


def test_demo_console_script_second_run_makes_a_new_folder(demo):
    proc = demo["proc"]
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stdout + proc.stderr
    assert "unbend summary" in proc.stdout and "Predictions in original units" in proc.stdout
    base = demo["base"]
    assert (base / "d-2").is_dir()
    assert sorted(p.name for p in (base / "d-2").iterdir() if p.is_file()) == sorted(
        DEMO_BOOKS + ["report_river_sediment.xlsx"])
    # the first folder is exactly as the first run left it
    assert demo["first"] and tree_snapshot(base / "d") == demo["first"]
    assert "d-2" in proc.stdout  # the files listed are in the new folder


# ----------------------------------------------------------------------------- unbend report
@pytest.fixture(scope="module")
def survey():
    return invented_survey()


@pytest.fixture(scope="module")
def csv_run(tmp_path_factory, survey):
    """Report on an invented CSV, one x, with --groups."""
    d = tmp_path_factory.mktemp("csv_run")
    src = write_csv(d / "survey.csv", survey)
    before = sha256(src)
    code, out, err = run_main(["report", src, "--y", "load", "--x", "discharge", "--groups", "site",
                               "--out", d / "rep.xlsx", "--quiet"])
    return dict(dir=d, src=src, before=before, code=code, out=out, err=err, rep=d / "rep.xlsx")


@pytest.fixture(scope="module")
def xlsx_run(tmp_path_factory, survey):
    """Report on an invented .xlsx (data on the second sheet), one x, no groups, default --out."""
    d = tmp_path_factory.mktemp("xlsx_run")
    src = write_xlsx(d / "survey.xlsx", survey)
    before = sha256(src)
    code, out, err = run_main(["report", src, "--sheet", "Measurements", "--y", "load", "--x", "discharge",
                               "--quiet"])
    return dict(dir=d, src=src, before=before, code=code, out=out, err=err, rep=d / "survey_unbend_report.xlsx")


@pytest.fixture(scope="module")
def multi_run(tmp_path_factory, survey):
    """Report with two --x columns, from an invented CSV."""
    d = tmp_path_factory.mktemp("multi_run")
    src = write_csv(d / "survey.csv", survey)
    code, out, err = run_main(["report", src, "--y", "load", "--x", "discharge", "--x", "depth",
                               "--out", d / "rep.xlsx", "--quiet"])
    return dict(dir=d, src=src, code=code, out=out, err=err, rep=d / "rep.xlsx")


@pytest.mark.parametrize("run", ["csv_run", "xlsx_run"])
def test_report_one_x_sheets_charts_cautions(request, run, survey):
    r = request.getfixturevalue(run)
    assert r["code"] == 0, r["err"]
    assert "Traceback" not in r["out"] + r["err"]
    assert sha256(r["src"]) == r["before"]  # the input is never touched
    wb = openpyxl.load_workbook(r["rep"])
    spread = ["Spread"] if run == "csv_run" else []
    assert wb.sheetnames == REPORT_SHEETS + spread + [PORTABLE_SHEET]
    assert len(wb["Residuals"]._charts) == 3
    summary = sheet_text(wb["Summary"])
    assert "extrapolation" in summary and "licensed practice" in summary and "residual" in summary
    if run == "xlsx_run":
        assert "survey.xlsx, sheet Measurements" in summary
    # the plots sit next to the report
    plots = Path(str(r["rep"])[:-5] + "_plots")
    assert sorted(p.name for p in plots.iterdir()) == sorted(DEMO_PNGS)
    for p in DEMO_PNGS:
        check_png(plots / p)
    # the numbers in the Residuals sheet are the numbers in the file (known truth), row for row
    res = sheet_table(wb["Residuals"], header_row=2)
    rows = [int(v) for v in res["data row"]]
    assert rows == list(range(2, len(survey["load"]) + 2))  # the file's own rows: the header is row 1
    np.testing.assert_array_equal(np.array(res["load"], float), np.array(survey["load"], float))
    np.testing.assert_array_equal(np.array(res["discharge"], float), np.array(survey["discharge"], float))


@pytest.mark.parametrize("run", ["csv_run", "xlsx_run", "multi_run"])
def test_report_line_matches_statsmodels(request, run, ref):
    """The Fit sheet's coefficients and the fitted column against statsmodels OLS (outside reference library)."""
    r = request.getfixturevalue(run)
    assert r["code"] == 0, r["err"]
    wb = openpyxl.load_workbook(r["rep"])
    items = fit_items(wb["Fit"])
    res = sheet_table(wb["Residuals"], header_row=2)
    xs = ["discharge", "depth"] if run == "multi_run" else ["discharge"]
    yp, xp = float(items["y power"]), float(items["x power"])
    ys, xst = float(items["y start"]), float(items["x start"])
    y = np.array(res["load"], float)
    y_re = np.array(res["load re-expressed"], float)
    # re-expression against the textbook ladder (conftest.ref; common practice, Tukey 1977)
    np.testing.assert_allclose(y_re, ref.ladder(y + ys, yp), rtol=1e-12)
    X = []
    for nm in xs:
        x_re = np.array(res[f"{nm} re-expressed"], float)
        np.testing.assert_allclose(x_re, ref.ladder(np.array(res[nm], float) + xst, xp), rtol=1e-12)
        X.append(x_re)
    ols = sm.OLS(y_re, sm.add_constant(np.column_stack(X))).fit()  # statsmodels: outside reference
    np.testing.assert_allclose(float(items["intercept"]), ols.params[0], rtol=1e-9)
    for j, nm in enumerate(xs, start=1):
        np.testing.assert_allclose(float(items[f"slope {nm}"]), ols.params[j], rtol=1e-9)
        np.testing.assert_allclose(float(items[f"slope {nm}: std error"]), ols.bse[j], rtol=1e-9)
    np.testing.assert_allclose(float(items["R\u00b2 (re-expressed scale)"]), ols.rsquared, rtol=1e-9)
    np.testing.assert_allclose(np.array(res["fitted (re-expressed)"], float), ols.fittedvalues, rtol=1e-9)
    np.testing.assert_allclose(np.array(res["residual"], float), ols.resid, rtol=1e-7, atol=1e-12)


def test_report_several_x_has_no_portable_sheet(multi_run):
    assert multi_run["code"] == 0, multi_run["err"]
    wb = openpyxl.load_workbook(multi_run["rep"])
    assert wb.sheetnames == REPORT_SHEETS  # the portable sheet takes one x column only
    assert len(wb["Residuals"]._charts) == 3
    items = fit_items(wb["Fit"])
    assert "slope discharge" in items and "slope depth" in items
    assert "x = discharge, depth" in sheet_text(wb["Summary"])
    head = multi_run["out"].splitlines()
    j = next(k for k, ln in enumerate(head) if ln.startswith("Predictions in original units"))
    assert head[j + 1].split()[:2] == ["discharge", "depth"]


def test_report_portable_sheet_points_at_the_empty_rows(csv_run, survey):
    """The portable sheet says where to type more data; that row must be empty, and the rows above it the data."""
    ws = openpyxl.load_workbook(csv_run["rep"])[PORTABLE_SHEET]
    note = ws["A5"].value
    m = re.search(r"empty rows at the bottom of the data table \(row (\d+) onwards", note)
    assert m, note
    r = int(m.group(1))
    n = len(survey["load"])
    assert ws.cell(r, 1).value is None and ws.cell(r, 2).value is None, (
        f"row {r} holds data ({ws.cell(r, 1).value}, {ws.cell(r, 2).value}); the note sends a user to overwrite it")
    assert ws.cell(r - 1, 1).value == survey["load"][n - 1]  # the last data row is just above


def test_report_groups_spread_sheet(csv_run, survey):
    wb = openpyxl.load_workbook(csv_run["rep"])
    text = sheet_text(wb["Spread"])
    for g in ("north", "east", "south", "west"):
        assert g in text
    assert "Spread against level" in sheet_text(wb["Summary"])


def test_report_prints_summary(csv_run):
    out = csv_run["out"]
    for s in ("unbend summary", "Power for load alone", "Power for discharge alone", "Scan, top 5 of", "Fit: ",
              "Predictions in original units", "Files written:"):
        assert s in out
    assert str(csv_run["rep"]) in out


# ----------------------------------------------------------------------------- bad input
@pytest.fixture(scope="module")
def bad_files(tmp_path_factory, survey):
    d = tmp_path_factory.mktemp("bad")
    rng = np.random.default_rng(404)
    f = {}
    good = write_xlsx(d / "good.xlsx", survey, sheet="Data")
    f["good"] = good
    garbage = rng.integers(0, 256, 6000, dtype=np.uint8).tobytes()
    assert b"\x00" in garbage[:4096]
    (d / "garbage.txt").write_bytes(garbage)
    f["garbage"] = d / "garbage.txt"
    nonul = rng.integers(1, 256, 6000, dtype=np.uint8).tobytes()  # binary, but with no zero byte
    (d / "garbage_nonul.txt").write_bytes(nonul)
    f["garbage_nonul"] = d / "garbage_nonul.txt"
    raw = good.read_bytes()
    (d / "half.xlsx").write_bytes(raw[: len(raw) // 2])
    f["half"] = d / "half.xlsx"
    (d / "plain.xlsx").write_text("load,discharge\n1,2\n3,4\n5,6\n", encoding="utf-8")
    f["plain"] = d / "plain.xlsx"
    with zipfile.ZipFile(d / "notabook.xlsx", "w") as z:
        z.writestr("readme.txt", "a zip archive, not a workbook")
        z.writestr("data/values.csv", "load,discharge\n1,2\n")
    f["notabook"] = d / "notabook.xlsx"
    # a valid zip whose worksheet XML is cut in half (damaged inside, CRCs fine)
    with zipfile.ZipFile(good) as zin, zipfile.ZipFile(d / "cutsheet.xlsx", "w", zipfile.ZIP_DEFLATED) as zo:
        for n in zin.namelist():
            data = zin.read(n)
            if n == "xl/worksheets/sheet2.xml":
                data = data[: len(data) // 2]
            zo.writestr(n, data)
    f["cutsheet"] = d / "cutsheet.xlsx"
    few = {"load": [1.0, 2.0, "n/a", "", "none"], "discharge": [2.0, 3.0, 4.0, 5.0, "x"]}
    f["few"] = write_csv(d / "few.csv", few)
    f["dir"] = d / "a folder.xlsx"
    f["dir"].mkdir()
    return f


def test_bad_input_missing_file(tmp_path):
    line = assert_one_line_failure(*run_main(["report", tmp_path / "nothere.csv", "--y", "a", "--x", "b"]))
    assert "nothere.csv" in line


@pytest.mark.parametrize("key, words", [
    ("dir", "folder"),
    ("garbage", "binary"),
    ("garbage_nonul", ""),
    ("half", "not a workbook"),
    ("plain", "not a workbook"),
    ("notabook", "not a workbook"),
    ("cutsheet", ""),
])
def test_bad_input_files(bad_files, key, words, tmp_path):
    src = bad_files[key]
    argv = ["report", src, "--y", "load", "--x", "discharge", "--out", tmp_path / "r.xlsx", "--quiet"]
    if key == "cutsheet":
        argv += ["--sheet", "Data"]
    line = assert_one_line_failure(*run_main(argv))
    assert words in line
    assert "unexpected problem" not in line  # a damaged input file is bad input, not a program fault
    assert not (tmp_path / "r.xlsx").exists()


def test_bad_input_unknown_sheet(bad_files):
    line = assert_one_line_failure(*run_main(["report", bad_files["good"], "--sheet", "Nope", "--y", "load",
                                              "--x", "discharge"]))
    assert "'Nope'" in line and "About" in line and "Data" in line  # it lists the sheets there are


@pytest.mark.parametrize("which", ["--y", "--x", "--groups"])
def test_bad_input_unknown_column(bad_files, which):
    args = {"--y": "load", "--x": "discharge"}
    args[which] = "flow_rate"
    argv = ["report", bad_files["good"], "--sheet", "Data"] + [a for k, v in args.items() for a in (k, v)]
    line = assert_one_line_failure(*run_main(argv))
    assert "'flow_rate'" in line
    for c in ("site", "discharge", "depth", "load"):  # the message lists the columns
        assert c in line


def test_bad_input_too_few_numeric_rows(bad_files, tmp_path):
    line = assert_one_line_failure(*run_main(["report", bad_files["few"], "--y", "load", "--x", "discharge",
                                              "--out", tmp_path / "r.xlsx"]))
    assert "3" in line and "2" in line
    assert not (tmp_path / "r.xlsx").exists()


@pytest.mark.parametrize("spelling", ["same", "dotdot", "symlink"])
def test_bad_input_out_names_the_input(bad_files, spelling, tmp_path):
    src = tmp_path / "mine.xlsx"
    shutil.copyfile(bad_files["good"], src)
    before = sha256(src)
    files_before = sorted(p.name for p in tmp_path.iterdir())
    if spelling == "same":
        out = src
    elif spelling == "dotdot":
        (tmp_path / "sub").mkdir()
        files_before.append("sub")
        files_before.sort()
        out = tmp_path / "sub" / ".." / "mine.xlsx"
    else:
        out = tmp_path / "link.xlsx"
        os.symlink(src, out)
        files_before.append("link.xlsx")
        files_before.sort()
    line = assert_one_line_failure(*run_main(["report", src, "--sheet", "Data", "--y", "load", "--x", "discharge",
                                              "--out", out]))
    assert "input" in line
    assert sha256(src) == before  # unchanged byte for byte
    assert sorted(p.name for p in tmp_path.iterdir()) == files_before  # and nothing else written


@pytest.mark.parametrize("out", ["rep.csv", "rep.xls", "rep"])
def test_bad_input_out_not_xlsx(bad_files, tmp_path, out):
    line = assert_one_line_failure(*run_main(["report", bad_files["good"], "--sheet", "Data", "--y", "load", "--x",
                                              "discharge", "--out", tmp_path / out]))
    assert ".xlsx" in line
    assert list(tmp_path.iterdir()) == []


def test_bad_input_missing_required_option(bad_files):
    code, out, err = run_main(["report", bad_files["good"], "--x", "discharge"])
    assert code != 0 and "Traceback" not in out + err and "--y" in err


def _billion_laughs() -> bytes:
    """The textbook entity-expansion document: 10 nested levels, each 10 copies of the one below (10^9 'lol')."""
    ents = '<!ENTITY lol0 "lol">' + "".join(
        f'<!ENTITY lol{i} "{("&lol%d;" % (i - 1)) * 10}">' for i in range(1, 10))
    return (f'<?xml version="1.0"?><!DOCTYPE sst [{ents}]><sst xmlns="{MAIN_NS}" count="2" uniqueCount="2">'
            "<si><t>&lol9;</t></si><si><t>discharge</t></si></sst>").encode()


_RSS_WRAPPER = (
    "import resource, sys\n"
    "from unbend.udfs.cli import main\n"
    "code = main(sys.argv[1:])\n"
    "print('MAXRSS_KB', resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, file=sys.stderr)\n"
    "sys.exit(code)\n")


def test_entity_bomb_in_shared_strings_is_refused_quickly(tmp_path, survey):
    """A 'billion laughs' sharedStrings part in an otherwise valid workbook: refused, bounded time and memory."""
    rows = list(zip(survey["load"], survey["discharge"]))
    good = hand_xlsx(tmp_path / "hand.xlsx", ["load", "discharge"], rows)
    df = readers.read_table(good)  # the hand-made workbook is valid: it reads back exactly
    assert list(df.columns) == ["load", "discharge"]
    np.testing.assert_array_equal(df["load"].to_numpy(float), np.array(survey["load"], float))
    bomb = hand_xlsx(tmp_path / "bomb.xlsx", ["load", "discharge"], rows, sst_xml=_billion_laughs())
    t0 = time.monotonic()
    proc = subprocess.run([sys.executable, "-c", _RSS_WRAPPER, "report", str(bomb), "--y", "load", "--x",
                           "discharge", "--out", str(tmp_path / "r.xlsx"), "--quiet"],
                          capture_output=True, text=True, timeout=60)
    seconds = time.monotonic() - t0
    assert seconds < 15, f"took {seconds:.1f} s"
    rss_lines = [ln for ln in proc.stderr.splitlines() if ln.startswith("MAXRSS_KB")]
    err = "\n".join(ln for ln in proc.stderr.splitlines() if not ln.startswith("MAXRSS_KB"))
    maxrss_mb = int(rss_lines[0].split()[1]) / 1024  # Linux reports kilobytes
    assert maxrss_mb < 600, f"peak memory {maxrss_mb:.0f} MB: the entities were expanded"
    if proc.returncode == 0:  # read safely: then the expansion must not have happened anywhere
        wb = openpyxl.load_workbook(tmp_path / "r.xlsx", read_only=True)
        assert all(len(str(v)) < 10_000 for ws in wb.worksheets for row in ws.iter_rows(values_only=True)
                   for v in row if v is not None)
    else:
        assert_one_line_failure(proc.returncode, proc.stdout, err)
        assert not (tmp_path / "r.xlsx").exists()


def test_huge_shared_strings_part_refused_without_unpacking(tmp_path, survey, monkeypatch):
    """A 320 MB, highly compressible sharedStrings part (about 0.5 MB packed) is refused by the ratio check
    before any part is opened. Built with zipfile streaming, so the test holds 1 MB at a time."""
    chunk = (b"<si><t>" + b"a" * 4000 + b"</t></si>") * 256

    def stream(fh):
        fh.write(f'<?xml version="1.0" encoding="UTF-8"?><sst xmlns="{MAIN_NS}">'.encode())
        fh.write(b"<si><t>load</t></si><si><t>discharge</t></si>")
        n = 0
        while n < 320 * 2**20:
            fh.write(chunk)
            n += len(chunk)
        fh.write(b"</sst>")

    rows = list(zip(survey["load"], survey["discharge"]))
    big = hand_xlsx(tmp_path / "big.xlsx", ["load", "discharge"], rows, sst_stream=stream)
    info = zipfile.ZipFile(big).getinfo("xl/sharedStrings.xml")
    assert info.file_size > 300 * 2**20 and info.file_size / info.compress_size > readers.MAX_RATIO
    assert big.stat().st_size < 5 * 2**20

    opened = []
    real_open = zipfile.ZipFile.open

    def spy(self, name, *a, **k):
        opened.append(name.filename if isinstance(name, zipfile.ZipInfo) else name)
        return real_open(self, name, *a, **k)

    monkeypatch.setattr(zipfile.ZipFile, "open", spy)
    t0 = time.monotonic()
    line = assert_one_line_failure(*run_main(["report", big, "--y", "load", "--x", "discharge", "--out",
                                              tmp_path / "r.xlsx", "--quiet"]))
    assert time.monotonic() - t0 < 5
    assert "sharedStrings" in line and "compressed" in line
    assert opened == []  # refused from the archive's directory alone: no part was opened or unpacked


def test_read_error_messages_are_clean_through_read_table(bad_files):
    """The reader itself raises ReadError (an UnbendError) with one line for each bad file."""
    for key in ("garbage", "half", "plain", "notabook", "dir"):
        with pytest.raises(readers.ReadError) as e:
            readers.read_table(bad_files[key])
        assert "\n" not in str(e.value)


# ----------------------------------------------------------------------------- CSV variants
ROWS = [(1.5, 10.25, "a"), (2.0, 20.5, "b"), (3.25, 40.0, "c"), (4.5, 80.75, "d"), (1e-3, 1234.5, "e")]
HEADER = ["débit_m³/s", "coût_€", "remarque"]


def _csv_text(delim=",", dec="."):
    out = [delim.join(HEADER)]
    for a, b, c in ROWS:
        out.append(delim.join([repr(a).replace(".", dec), repr(b).replace(".", dec), c]))
    return "\r\n".join(out) + "\r\n"


CSV_VARIANTS = {
    "utf8_bom.csv": lambda: _csv_text().encode("utf-8-sig"),
    "utf16_tab.txt": lambda: _csv_text("\t").encode("utf-16"),  # BOM + UTF-16, tab-separated text export
    "utf16_comma.csv": lambda: _csv_text().encode("utf-16"),
    "cp1252.csv": lambda: _csv_text().encode("cp1252"),
    "semicolon_decimal_comma.csv": lambda: _csv_text(";", ",").encode("utf-8"),
    "semicolon_decimal_point.csv": lambda: _csv_text(";", ".").encode("cp1252"),
    "tab.tsv": lambda: _csv_text("\t").encode("utf-8"),
}


@pytest.mark.parametrize("name", list(CSV_VARIANTS))
def test_csv_variants_read_correctly(tmp_path, name):
    p = tmp_path / name
    p.write_bytes(CSV_VARIANTS[name]())
    if name == "cp1252.csv":
        with pytest.raises(UnicodeDecodeError):
            p.read_bytes().decode("utf-8")  # really not UTF-8 (é, ³, € are single cp1252 bytes)
    df = readers.read_table(p)
    assert list(df.columns) == HEADER
    assert list(df[HEADER[0]]) == [r[0] for r in ROWS]  # exact: the numbers written are the numbers read
    assert list(df[HEADER[1]]) == [r[1] for r in ROWS]
    assert list(df[HEADER[2]]) == [r[2] for r in ROWS]


def test_csv_quoted_fields_with_newlines_and_delimiters(tmp_path):
    comments = ["first line\nsecond line, with a comma", 'semi; colon and "quotes"', "plain", "tab\there",
                "ends with comma,", "multi\r\nline\r\n"]
    ys = [1.5, 2.0, 3.25, 4.5, 6.0, 7.75]
    xs = [10.25, 20.5, 40.0, 80.75, 100.0, 150.0]
    p = tmp_path / "quoted.csv"
    with open(p, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)  # standard quoting: fields with delimiters, quotes or newlines are quoted
        w.writerow(["y", "note, free text", "x"])
        for y, c, x in zip(ys, comments, xs):
            w.writerow([y, c, x])
    df = readers.read_table(p)
    assert list(df.columns) == ["y", "note, free text", "x"]
    assert list(df["y"]) == ys and list(df["x"]) == xs
    assert list(df["note, free text"]) == [c.strip() for c in comments]


def test_csv_semicolon_decimal_comma_through_the_command(tmp_path, survey):
    """The whole command on a semicolon/decimal-comma file: the report holds the same numbers."""
    src = write_csv(tmp_path / "survey_eu.csv", survey, delimiter=";", decimal=",")
    assert "," in src.read_text().splitlines()[1]
    code, out, err = run_main(["report", src, "--y", "load", "--x", "discharge", "--out", tmp_path / "r.xlsx",
                               "--quiet"])
    assert code == 0, err
    res = sheet_table(openpyxl.load_workbook(tmp_path / "r.xlsx")["Residuals"], header_row=2)
    np.testing.assert_array_equal(np.array(res["load"], float), np.array(survey["load"], float))
    np.testing.assert_array_equal(np.array(res["discharge"], float), np.array(survey["discharge"], float))


# ----------------------------------------------------------------------------- formula-like text
PAYLOADS = ["=1+1", "+A1", "-x", "@SUM(A1)"]


@pytest.fixture(scope="module")
def formula_run(tmp_path_factory):
    """Invented assay batches whose labels (and some y cells, and the headers) look like formulas."""
    d = tmp_path_factory.mktemp("formula")
    rng = np.random.default_rng(909)
    rows = []
    for g, lab in enumerate(PAYLOADS):
        for _ in range(10):
            x = float(np.round(rng.uniform(1, 100), 4))
            y = float(np.round(3 * x ** 0.5 * (1 + 0.3 * g) * rng.lognormal(0, 0.1), 4))
            rows.append([lab, y, x])
    for i, lab in zip([2, 13, 24, 35], PAYLOADS):  # text in the y column too
        rows[i][1] = lab
    src = d / "assays.csv"
    with open(src, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["batch", "@SUM(A1)", "-x"])  # formula-like headers as well
        w.writerows(rows)
    code, out, err = run_main(["report", src, "--y", "@SUM(A1)", "--x=-x", "--groups", "batch",
                               "--out", d / "rep.xlsx", "--quiet"])
    return dict(dir=d, src=src, code=code, out=out, err=err, rep=d / "rep.xlsx")


def test_formula_like_text_is_read_as_text(formula_run):
    df = readers.read_table(formula_run["src"])
    assert list(df.columns) == ["batch", "@SUM(A1)", "-x"]
    assert set(df["batch"]) == set(PAYLOADS)
    assert [v for v in df["@SUM(A1)"] if isinstance(v, str)] == PAYLOADS


def test_formula_like_text_is_written_as_text(formula_run):
    assert formula_run["code"] == 0, formula_run["err"]
    rep = formula_run["rep"]
    bodies = set(PAYLOADS) | {p.lstrip("=+-@") for p in PAYLOADS}  # what <f> would hold: '=1+1' -> '1+1'
    with zipfile.ZipFile(rep) as z:
        sheets = [n for n in z.namelist() if n.startswith("xl/worksheets/") and n.endswith(".xml")]
        assert sheets
        for n in sheets:
            root = ET.fromstring(z.read(n))
            for f in root.iter(f"{{{MAIN_NS}}}f"):
                t = (f.text or "").strip()
                assert t not in bodies, f"{n}: formula {t!r}"
                assert "SUM(A1)" not in t and "+A1" not in t, f"{n}: formula {t!r}"
    wb = openpyxl.load_workbook(rep)
    seen = set()
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if isinstance(c.value, str) and c.value in PAYLOADS:
                    assert c.data_type == "s", f"{ws.title}!{c.coordinate} {c.value!r} is {c.data_type}"
                    seen.add(c.value)
    assert seen == set(PAYLOADS)  # every payload was written somewhere (group labels, headers)
    # the Spread sheet lists the four batches by their labels, as text
    spread = wb["Spread"]
    labels = [spread.cell(r, 1).value for r in range(17, 21)]
    assert sorted(labels) == sorted(PAYLOADS)


def test_formula_like_y_cells_are_skipped_not_computed(formula_run):
    wb = openpyxl.load_workbook(formula_run["rep"])
    items = fit_items(wb["Fit"])
    assert items["rows used"] == 36 and items["rows skipped"] == 4
    summary = sheet_text(wb["Summary"])
    assert "rows skipped: 4" in summary


# ----------------------------------------------------------------------------- atomic write
@pytest.fixture
def broken_save(monkeypatch):
    """Make every report workbook save (XlsxWriter) write half a file and then fail as a full disk would."""
    from unbend.udfs import xlsx

    real = xlsx.Book.close
    calls = []

    def close(self):
        real(self)
        size = os.path.getsize(self.path)
        with open(self.path, "r+b") as fh:
            fh.truncate(size // 2)
        calls.append(self.path)
        raise OSError(errno.ENOSPC, "No space left on device", str(self.path))

    monkeypatch.setattr(xlsx.Book, "close", close)
    return calls


def test_atomic_write_keeps_an_existing_report(tmp_path, survey, broken_save):
    src = write_csv(tmp_path / "survey.csv", survey)
    out = tmp_path / "rep.xlsx"
    out.write_bytes(b"an earlier report, kept as it was")
    before = sha256(out)
    code, o, e = run_main(["report", src, "--y", "load", "--x", "discharge", "--out", out, "--overwrite", "--quiet"])
    line = assert_one_line_failure(code, o, e)
    assert "space" in line
    assert broken_save, "the save was not reached"
    assert sha256(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rep.xlsx", "survey.csv"]  # no temp or partial files


def test_atomic_write_leaves_no_partial_file(tmp_path, survey, broken_save):
    from unbend.udfs.report import analyse, write_report
    import pandas as pd

    df = pd.DataFrame(survey)
    a = analyse(df, "load", ["discharge"], source="invented survey")
    out = tmp_path / "new" / "rep.xlsx"
    with pytest.raises(OSError):
        write_report(a, out)
    assert broken_save
    assert not out.exists()
    assert list((tmp_path / "new").iterdir()) == []
