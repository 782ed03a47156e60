"""`unbend report --readings COLUMN|FILE` (issue 13): x read back from measured y, and the limits.

Files are written the way spreadsheet programs and their exports write them: a workbook with a title row
above the header (openpyxl, as in tests/test_cli_reading.py), a CSV export with a byte-order mark and CRLF
line ends, numbers in it as text. Data are invented (seeded; a made-up detector check), so they prove
properties with a known truth; the outside check is a straight calibration line whose interval ends are
recomputed here from statsmodels' OLS and the quadratic of Fieller's interval.
"""
from __future__ import annotations

import math

import numpy as np
import openpyxl
import pytest
import statsmodels.api as sm
from scipy import stats

import unbend
from unbend.udfs.portable import read_portable_inverse  # noqa: F401  (the block is checked by tests/test_portable_inverse.py)

from cli_helpers import run, one_line


READINGS = [16670.0, 1323.0, "n/a", 5580.0, None, 2895.0, 722.0, 41000.0, 300.0]  # 41000: above the standards


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Invented detector standards (signal ~ conc^0.78) with a column of sample readings beside them."""
    d = tmp_path_factory.mktemp("readings")
    rng = np.random.default_rng(1313)
    conc = np.repeat([0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0], 3)
    signal = np.round(850.0 * conc ** 0.78 * rng.lognormal(0, 0.04, conc.size), 0)
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Check"
    ws.append(["Detector check, invented numbers (not measurements)"])
    ws.append(["conc", "signal", "sample signal"])
    for i in range(conc.size):
        ws.append([float(conc[i]), float(signal[i]), READINGS[i] if i < len(READINGS) else None])
    ws.append([200.0, "n/a", None])  # a standard without a reading: skipped, and counted
    book = d / "check.xlsx"
    wb.save(book)
    # a CSV export: an id column first, then a column of another name, then one headed like y
    csv = d / "samples.csv"
    rows = ["id,dilution,signal"] + [f"S{i + 1},{2 + i},{v}" for i, v in enumerate([900.0, 5200.0, 18000.0])]
    csv.write_bytes(("\ufeff" + "\r\n".join(rows) + "\r\n").encode("utf-8"))
    other = d / "counts.csv"
    other.write_bytes(("\ufeff" + "\r\n".join(["id,counts", "S1,1500", "S2,n/a", "S3,7000"]) + "\r\n").encode())
    bare = d / "bare.csv"
    bare.write_bytes(b"1500\r\n7000\r\n")
    return dict(dir=d, book=book, csv=csv, other=other, bare=bare, conc=conc, signal=signal)


def _readings_sheet(path):
    ws = openpyxl.load_workbook(path)["Readings"]
    rows = list(ws.iter_rows(values_only=True))
    h = next(i for i, r in enumerate(rows) if r[0] == "row")
    table = []
    for r in rows[h + 1:]:
        if r[0] is None:
            break
        table.append(r)
    lim_h = next(i for i, r in enumerate(rows) if r[0] == "item")
    limits = {r[0]: r[1] for r in rows[lim_h + 1:] if r[0] is not None}
    return rows[h], table, limits


@pytest.fixture(scope="module")
def column_run(files):
    out = files["dir"] / "col.xlsx"
    res = run(["report", files["book"], "--y", "signal", "--x", "conc", "--y-power", "0", "--x-power", "0",
               "--readings", "sample signal", "--out", out, "--quiet"])
    return res, out


def test_readings_column_matches_the_engine(files, column_run):
    (code, out, err), path = column_run
    assert code == 0, err
    f = unbend.fit(files["signal"], files["conc"], y_power=0, x_power=0)
    used = [v for v in READINGS if isinstance(v, float)]
    e = f.inverse(used)
    header, table, limits = _readings_sheet(path)
    assert len(table) == len(used)
    assert [r[0] for r in table] == [3 + i for i, v in enumerate(READINGS) if isinstance(v, float)]  # sheet rows
    for r, (_, er) in zip(table, e.iterrows()):
        assert r[1] == er["y"]
        for j, c in ((2, "x"), (3, "low"), (4, "high")):
            assert math.isclose(r[j], er[c], rel_tol=1e-12), (c, r[j], er[c])
        assert r[5] == ("yes" if er["outside_range"] else "no")
        assert r[6] == er["note"]
    assert table[used.index(41000.0)][5] == "yes"  # above the top standard: extrapolation, flagged
    lim = f.detection_limits()
    assert limits["rows used"] == f.n
    assert limits["rows skipped"] == 1  # the standards' row 27 ('n/a'), counted from the file's reading
    for label, value, _ in lim.rows():
        if isinstance(value, float) and math.isfinite(value):
            assert math.isclose(limits[label], value, rel_tol=1e-12), label
    # the printed summary: every reading counted, the skipped ones by reason with their rows
    assert f"Readings used: {len(used)}; rows skipped: 2." in " ".join(out.split())
    flat = " ".join(out.split())
    assert "row 5, sample signal: 'n/a'" in flat and "row 7, sample signal: blank" in flat
    assert f"{int(e['outside_range'].sum())} outside the standards' conc range" in flat
    closed = int((np.isfinite(e["low"]) & np.isfinite(e["high"])).sum())
    assert f"{closed} closed, {len(used) - closed} with an end that does not exist" in flat
    assert "Detection limit (Hubaux-Vos): not defined: the blank (x = 0) cannot be re-expressed" in flat
    assert int(e["outside_range"].sum()) == 2  # 41000 above the top standard, 300 below the lowest


def test_readings_column_fills_the_model_sheet_block(column_run):
    (code, _, err), path = column_run
    assert code == 0, err
    ws = openpyxl.load_workbook(path)["Model in formulas"]
    tbl = next(t for t in ws.tables.values() if t.displayName.startswith("UnbendReadings"))
    first = int("".join(ch for ch in tbl.ref.split(":")[0] if ch.isdigit())) + 1
    typed = [ws[f"A{first + i}"].value for i in range(7)]
    assert typed == [v for v in READINGS if isinstance(v, float)]


def test_straight_line_interval_from_statsmodels_and_the_quadratic(files):
    """Raw y on raw x: each interval end solves (y0 - a - b x)^2 = t^2 s^2 (1 + 1/n + (x - xbar)^2 / Sxx)."""
    # source: Draper and Smith (1998), Applied Regression Analysis, section 3.2 (inverse prediction), from memory;
    # the line itself from statsmodels OLS
    code, out, err = run(["report", files["book"], "--y", "signal", "--x", "conc", "--y-power", "1", "--x-power",
                          "1", "--readings", "sample signal", "--out", files["dir"] / "raw.xlsx", "--quiet"])
    assert code == 0, err
    # the printed limits are the line's own (read back from the fit, not from the sentence's maker)
    lim = unbend.fit(files["signal"], files["conc"]).detection_limits()
    flat = " ".join(out.split())
    assert (f"Detection limit (Hubaux-Vos, one-sided 0.95): {lim.detection_x:.4g} conc; critical level "
            f"{lim.critical_x:.4g} conc; quantification limit (Currie, 10 sigma) {lim.quantification_x:.4g} conc."
            ) in flat
    _, table, _ = _readings_sheet(files["dir"] / "raw.xlsx")
    x, y = files["conc"], files["signal"]
    ols = sm.OLS(y, sm.add_constant(x)).fit()
    a, b = ols.params
    s2, n = ols.scale, x.size
    xbar, sxx = x.mean(), np.sum((x - x.mean()) ** 2)
    t = stats.t.ppf(0.975, n - 2)
    for r in table:
        y0 = r[1]
        # (y0 - a - b x)^2 - t^2 s^2 (1 + 1/n + (x - xbar)^2 / sxx) = 0 as c2 x^2 + c1 x + c0
        k = t * t * s2
        c2 = b * b - k / sxx
        c1 = -2 * b * (y0 - a) + 2 * k * xbar / sxx
        c0 = (y0 - a) ** 2 - k * (1 + 1 / n) - k * xbar ** 2 / sxx
        lo_, hi_ = sorted(np.roots([c2, c1, c0]).real)
        assert math.isclose(r[3], lo_, rel_tol=1e-7, abs_tol=1e-9) and math.isclose(r[4], hi_, rel_tol=1e-7)
        assert math.isclose(r[2], (y0 - a) / b, rel_tol=1e-9)


def test_readings_file_column_headed_like_y(files):
    out_path = files["dir"] / "file.xlsx"
    code, out, err = run(["report", files["book"], "--y", "signal", "--x", "conc", "--y-power", "0", "--x-power",
                          "0", "--readings", files["csv"], "--out", out_path, "--quiet"])
    assert code == 0, err
    assert "column 'signal' (headed like the y column) of samples.csv" in " ".join(out.split())
    _, table, _ = _readings_sheet(out_path)
    assert [r[1] for r in table] == [900.0, 5200.0, 18000.0]  # not the dilution column before it
    e = unbend.fit(files["signal"], files["conc"], y_power=0, x_power=0).inverse([900.0, 5200.0, 18000.0])
    assert np.allclose([r[2] for r in table], e["x"], rtol=1e-12)
    assert [r[0] for r in table] == [2, 3, 4]


def test_readings_file_first_numeric_column(files):
    out_path = files["dir"] / "other.xlsx"
    code, out, err = run(["report", files["book"], "--y", "signal", "--x", "conc", "--readings", files["other"],
                          "--out", out_path, "--quiet"])
    assert code == 0, err
    flat = " ".join(out.split())
    assert "column 'counts' (the first column with a number)" in flat
    assert "Readings used: 2; rows skipped: 1." in flat and "row 3, counts: 'n/a'" in flat
    _, table, _ = _readings_sheet(out_path)
    assert [r[1] for r in table] == [1500.0, 7000.0]


def test_readings_refusals(files):
    base = ["report", files["book"], "--y", "signal", "--x", "conc", "--quiet", "--out", files["dir"] / "no.xlsx"]
    line = one_line(*run(base + ["--readings", files["bare"]]))
    assert "--readings" in line and "header" in line  # never takes the first reading for a header
    line = one_line(*run(base + ["--readings", "no such column"]))
    assert "--readings" in line and "'no such column'" in line
    line = one_line(*run(base + ["--x", "sample signal", "--readings", files["csv"]]))
    assert "one x" in line
    assert not (files["dir"] / "no.xlsx").exists()


def test_help_names_the_option():
    code, out, _ = run(["report", "--help"])
    assert code == 0 and "--readings" in out


def test_readings_refused_for_censored_standards(tmp_path):
    # invented standards, two of them reported below a limit ("<900"): the censored line has no
    # least-squares inverse interval, so --readings is refused in one line instead of giving one
    rng = np.random.default_rng(77)
    conc = np.repeat([0.5, 1.0, 2.0, 5.0, 10.0, 20.0], 3)
    signal = np.round(850.0 * conc ** 0.78 * rng.lognormal(0, 0.04, conc.size), 0)
    rows = ["conc,signal,sample"] + [f"{c},{'<900' if i < 2 else s},{1200.0 if i == 0 else ''}"
                                     for i, (c, s) in enumerate(zip(conc, signal))]
    path = tmp_path / "censored_standards.csv"
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    msg = one_line(*run(["report", path, "--y", "signal", "--x", "conc", "--readings", "sample",
                         "--out", tmp_path / "r.xlsx", "--quiet"]))
    assert "2 standards are below a limit" in msg and "--readings" in msg
    code, out, err = run(["report", path, "--y", "signal", "--x", "conc", "--out", tmp_path / "r2.xlsx", "--quiet"])
    assert code == 0, err  # the same file without --readings is fitted (censored)
