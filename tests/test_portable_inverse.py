"""The portable sheet's block "x from a measured y": built-in formulas, recalculated by LibreOffice.

Outside program: LibreOffice Calc (headless) computes every formula of the block
itself after readings are typed into the written workbook (cell values set with
openpyxl, as a user types them); its results are compared with the engine's
``LineFit.inverse`` to 1e-9 relative. The engine's inverse is itself checked
against Fieller's closed form (Draper and Smith 1998, section 3.2) and against a
root search over statsmodels' prediction intervals in tests/test_calibration.py,
so agreement here means the sheet mirrors those references. Data are invented
(seeded), in made-up scenarios.
"""
from __future__ import annotations

import math
import shutil

import numpy as np
import openpyxl
import pytest

import unbend
from unbend.demo_data import detector_calibration
from unbend.udfs.portable import (INV_COLUMNS, INV_NOT_BOUNDED, read_portable, read_portable_inverse,
                                  write_portable_workbook)
from unbend.udfs.recalc import recalculate_many

SOFFICE = shutil.which("soffice")
pytestmark = pytest.mark.skipif(SOFFICE is None, reason="LibreOffice (soffice) is not installed")
RTOL = 1e-9


def _detector():
    d = detector_calibration()
    return d["signal_counts"].to_numpy(float), d["conc_ug_per_l"].to_numpy(float)


def _case(name):
    """(y, x, options, [(reading, m), ...]) for each invented scenario."""
    if name == "log_log_detector":  # the demo detector: signal ~ conc^0.78, log-log straight
        y, x = _detector()
        # 40 000 counts is above the top standard (100 ug/L reads about 31 000): extrapolation
        return y, x, dict(y_power=0, x_power=0), [(900.0, 1), (5200.0, 3), (18000.0, 2), (40000.0, 1),
                                                  (300.0, 1)]
    if name == "raw_raw":  # invented straight gauge: reading against load
        rng = np.random.default_rng(201)
        x = np.repeat([0.0, 2, 4, 6, 8, 10], 2)
        y = 1.5 + 0.9 * x + rng.normal(0, 0.2, x.size)
        return y, x, dict(y_power=1, x_power=1), [(1.0, 1), (5.0, 1), (9.5, 4), (14.0, 1)]
    if name == "sqrt_y_raw_x":  # invented count rate growing as a square
        rng = np.random.default_rng(202)
        x = np.repeat([1.0, 2, 4, 8, 12, 16], 3)
        y = (1.0 + 0.6 * x + rng.normal(0, 0.15, x.size)) ** 2
        return y, x, dict(y_power=0.5, x_power=1), [(3.0, 1), (40.0, 2), (120.0, 1)]
    if name == "raw_y_sqrt_x":  # invented; standards from 0, a reading near the blank cuts the interval at x = 0
        rng = np.random.default_rng(203)
        x = np.repeat([0.0, 1, 4, 9, 16, 25], 2)
        y = 0.3 + 2.0 * np.sqrt(x) + rng.normal(0, 0.15, x.size)
        return y, x, dict(y_power=1, x_power=0.5), [(0.35, 1), (4.0, 1), (9.0, 2), (12.0, 1), (-1.0, 1)]
    if name == "recip_y_start_x":  # invented decay-like response, reciprocal y, x with a start
        rng = np.random.default_rng(204)
        x = np.repeat([0.0, 1, 2, 4, 6, 8], 2)
        y = 1.0 / (0.2 + 0.1 * (x + 1.0)) * np.exp(rng.normal(0, 0.02, x.size))
        return y, x, dict(y_power=-1, x_power=0, x_start=1.0), [(2.5, 1), (1.2, 3), (0.8, 1)]
    if name == "raw_y_recip_x":  # invented response that levels off: 1/x; a reading beyond the plateau
        rng = np.random.default_rng(205)
        x = np.repeat([0.5, 1, 2, 4, 8, 16], 2)
        y = 10.0 - 4.0 / x + rng.normal(0, 0.1, x.size)
        return y, x, dict(y_power=1, x_power=-1), [(4.0, 1), (9.0, 1), (9.9, 1), (11.0, 1)]
    if name == "sqrt_y_start":  # invented counts below a background of about 3, so y needs a start
        rng = np.random.default_rng(207)
        x = np.repeat([1.0, 3, 6, 10, 15, 21], 2)
        y = (0.8 + 0.25 * x + rng.normal(0, 0.05, x.size)) ** 2 - 3.0
        return y, x, dict(y_power=0.5, x_power=1, y_start=3.0), [(-1.0, 1), (8.0, 2), (-5.0, 1)]
    if name == "weak_slope":  # invented: hardly any trend, so no closed interval at 95%
        rng = np.random.default_rng(206)
        x = np.linspace(1.0, 10.0, 10)
        y = 5.0 + 0.02 * x + rng.normal(0, 1.0, x.size)
        return y, x, dict(y_power=1, x_power=1), [(5.0, 1), (7.0, 2)]
    if name.startswith("weak_"):  # invented, hardly any trend; the x power cuts the open set of x
        px, seed = {"weak_sqrt_x": (0.5, 211), "weak_log_x": (0.0, 212), "weak_recip_x": (-1.0, 213)}[name]
        rng = np.random.default_rng(seed)
        x = np.linspace(1.0, 10.0, 10)
        xp = np.log(x) if px == 0 else np.sign(px) * x ** px
        y = 5.0 + 0.3 * xp + rng.normal(0, 1.0, x.size)
        reads = {"weak_sqrt_x": [(-4.0, 1), (5.0, 1), (9.5, 1)], "weak_log_x": [(5.0, 1), (9.5, 2)],
                 "weak_recip_x": [(2.0, 1), (5.0, 1), (9.5, 1)]}[name]
        return y, x, dict(y_power=1, x_power=px), reads
    raise KeyError(name)


CASES = ["log_log_detector", "raw_raw", "sqrt_y_raw_x", "raw_y_sqrt_x", "recip_y_start_x", "raw_y_recip_x",
         "sqrt_y_start", "weak_slope", "weak_sqrt_x", "weak_log_x", "weak_recip_x"]


def _reading_rows(ws):
    tbl = next(t for t in ws.tables.values() if t.displayName.startswith("UnbendReadings"))
    a, b = tbl.ref.split(":")
    return int("".join(c for c in a if c.isdigit())) + 1, int("".join(c for c in b if c.isdigit()))


@pytest.fixture(scope="module")
def lo(tmp_path_factory):
    src, out = tmp_path_factory.mktemp("inv_src"), tmp_path_factory.mktemp("inv_out")
    files = {}
    for name in CASES:
        y, x, opts, reads = _case(name)
        p = write_portable_workbook(src / f"{name}.xlsx", list(y), list(x), [], invented_data=True,
                                    spare_readings=6, **opts)
        wb = openpyxl.load_workbook(p)
        ws = wb.active
        r0, r1 = _reading_rows(ws)
        assert r1 - r0 + 1 >= len(reads)
        for i, (v, m) in enumerate(reads):  # typed the way a user types them
            ws[f"{INV_COLUMNS['reading']}{r0 + i}"] = v
            if m != 1:
                ws[f"{INV_COLUMNS['replicates']}{r0 + i}"] = m
        wb.save(p)
        files[name] = p
    # the detector again with readings written by the writer itself, and a non-number and a bad m typed
    y, x = _detector()
    p = write_portable_workbook(src / "written.xlsx", list(y), list(x), [], readings=[900.0, "n/a", 5200.0],
                                y_power=0, x_power=0, invented_data=True)
    wb = openpyxl.load_workbook(p)
    ws = wb.active
    r0, _ = _reading_rows(ws)
    ws[f"{INV_COLUMNS['replicates']}{r0 + 2}"] = 2.5
    wb.save(p)
    files["written"] = p
    names = list(files)
    done = recalculate_many([files[k] for k in names], out)
    return dict(zip(names, done))


def _close(sheet_value, engine_value, what):
    assert isinstance(sheet_value, (int, float)) and not isinstance(sheet_value, bool), (what, sheet_value)
    assert math.isclose(sheet_value, engine_value, rel_tol=RTOL, abs_tol=1e-12), (what, sheet_value, engine_value)


@pytest.mark.parametrize("name", CASES)
def test_block_matches_the_engine(lo, name):
    y, x, opts, reads = _case(name)
    f = unbend.fit(y, x, **opts)
    rows = read_portable_inverse(openpyxl.load_workbook(lo[name], data_only=True).active)
    assert len(rows) == len(reads)
    for (_, s), (v, m) in zip(rows.iterrows(), reads):
        e = f.inverse([v] * m, replicates=m).iloc[0]  # the typed value taken as the mean of m readings
        where = f"{name} reading {v} m={m}"
        if "cannot be re-expressed" in e["note"]:  # -5 + 3 has no square root: no result, said in words
            assert (s["x"], s["low"], s["high"]) == ("", "", "") and "cannot be re-expressed" in s["note"], where
            continue
        if math.isnan(e["x"]):
            assert s["x"] == "none", (where, s["x"], e["note"])
        else:
            _close(s["x"], e["x"], where + " x")
        for end in ("low", "high"):
            ev = float(e[end])
            if math.isinf(ev):
                # an open end is said in words, never a number
                assert isinstance(s[end], str) and s[end] in (INV_NOT_BOUNDED, "no upper end"), (where, end, s[end])
            elif math.isnan(ev):
                assert s[end] == "none", (where, end, s[end])
            else:
                _close(s[end], ev, f"{where} {end}")
        assert (s["outside"] == "yes") == bool(e["outside_range"]), (where, s["outside"])
        if "extrapolation" in e["note"]:
            assert "extrapolation" in s["note"], (where, s["note"])


def test_cases_cover_what_they_claim(lo):
    def rows(name):
        return read_portable_inverse(openpyxl.load_workbook(lo[name], data_only=True).active)

    det = rows("log_log_detector")
    assert det["outside"].tolist().count("yes") >= 1  # 40 000 counts: above the top standard
    x = det["x"].astype(float)
    lo_, hi_ = det["low"].astype(float), det["high"].astype(float)
    assert ((lo_ < x) & (x < hi_)).all()
    assert ((hi_ - x) > (x - lo_)).all()  # log x: the interval is lopsided, longer upwards
    cut = rows("raw_y_sqrt_x").iloc[0]
    assert cut["low"] == 0 and "reaches down to x = 0" in cut["note"]
    assert rows("raw_y_sqrt_x").iloc[4]["x"] == "none"  # -1 is below the line at x = 0
    plateau = rows("raw_y_recip_x")
    assert plateau.iloc[3]["x"] == "none" and "levels off" in plateau.iloc[3]["note"]
    assert "no upper end" in plateau["high"].tolist()
    assert "cannot be re-expressed" in rows("sqrt_y_start").iloc[2]["note"]
    weak = rows("weak_slope")
    assert (weak["low"] == INV_NOT_BOUNDED).all() and (weak["high"] == INV_NOT_BOUNDED).all()
    assert weak["note"].str.contains("not significant at the 95% level").all()
    assert all(isinstance(v, float) for v in weak["x"])  # the estimate itself still exists
    # open sets cut by the x power: what is left keeps one end, as the engine says (test_block_matches_the_engine)
    sq = rows("weak_sqrt_x")  # square root of x: x' >= 0
    assert sq.iloc[0]["low"] > 100 and sq.iloc[0]["high"] == INV_NOT_BOUNDED  # only x above a value fits -4
    assert sq.iloc[1]["low"] == 0 and sq.iloc[1]["high"] == INV_NOT_BOUNDED  # every x the root allows
    assert 0 < sq.iloc[2]["low"] < sq.iloc[2]["x"] and isinstance(sq.iloc[2]["low_re"], float)
    lg = rows("weak_log_x")  # log x: every x above 0
    assert (lg["low"] == 0).all() and (lg["high"] == INV_NOT_BOUNDED).all()
    rc = rows("weak_recip_x")  # reciprocal of x: x' < 0; a reading above the plateau keeps an upper end only
    assert rc.iloc[1]["high"] == INV_NOT_BOUNDED and isinstance(rc.iloc[2]["high"], float)
    assert (rc["low"] == 0).all() and rc.iloc[2]["x"] == "none"


def test_written_readings_and_typing_mistakes(lo):
    ws = openpyxl.load_workbook(lo["written"], data_only=True).active
    summary, preds = read_portable(ws)
    assert summary["check"] == "ok" and len(preds) == 0  # the predictions table stops at the block's caption
    rows = read_portable_inverse(ws)
    assert rows["reading"].tolist() == [900.0, "n/a", 5200.0]
    y, x = _detector()
    e = unbend.fit(y, x, y_power=0, x_power=0).inverse([900.0]).iloc[0]
    _close(rows.iloc[0]["x"], e["x"], "written reading")
    assert rows.iloc[1]["note"] == "the reading is not a number" and rows.iloc[1]["x"] == ""
    assert "whole number" in rows.iloc[2]["note"] and rows.iloc[2]["x"] == ""
