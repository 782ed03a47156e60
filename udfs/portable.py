"""The portable sheet: a fitted re-expression model written entirely as built-in spreadsheet formulas.

A colleague with no add-in and no Python can open the sheet in any program
that reads .xlsx and it recalculates: change a power, a start, the level, a
data value or a new x, and every number follows.

What is on the sheet
--------------------
* Settings a colleague can change: y power, y start, x power, x start and
  the interval level (yellow cells).
* The data as a spreadsheet table (y, x) with working columns driven by the
  settings: x of the rows used, re-expressed y and x, the line at each row and
  the residual. Blank rows are ignored, so the table carries empty rows with
  formulas ready for more data, and every statistic looks at a long fixed
  block of rows (``capacity``) so that rows added below are included.
* The line on the re-expressed scale: SLOPE, INTERCEPT, COUNT, STEYX, RSQ,
  AVERAGE and DEVSQ of the re-expressed x, the t multiplier (TINV) and, for
  the log, Duan's smearing factor.
* A second table of new x values with, for each: the typical y (the line taken
  back to original units: a median), the average y (Duan's smearing estimate,
  a SUMPRODUCT over the residual column), the interval for the line and the
  interval for one new observation (found on the re-expressed scale and taken
  back end by end), and whether the new x is outside the observed x range.

The re-expression of a value ``v = value + start`` at power ``p`` is ``v^p``
for ``p > 0``, ``LN(v)`` for ``p = 0`` and ``-(v^p)`` for ``p < 0`` (common
practice: the ladder of powers, Tukey 1977), so that order is kept. Its
inverse is ``MAX(z,0)^(1/p)`` for ``p > 0`` (``SIGN(z)*ABS(z)^(1/p)`` for odd
whole powers, which accept negative values), ``EXP(z)`` for ``p = 0`` and
``(-z)^(1/p)`` for ``p < 0`` while ``z < 0``; beyond that the reciprocal-type
scale has no finite value and the sheet shows ``unbounded``.

Only functions found in both LibreOffice Calc and the common desktop
spreadsheet programs are used (no dynamic arrays, no structured references,
no functions newer than IFERROR; TINV rather than T.INV.2T).

References
----------
Duan, N. (1983). Smearing estimate: a nonparametric retransformation method.
*Journal of the American Statistical Association* 78(383), 605-610.
Tukey, J. W. (1977). *Exploratory Data Analysis*. Addison-Wesley, ch. 5-6.
"""
from __future__ import annotations

import math
import numbers
import os
import re
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd

import unbend
from unbend import UnbendError
from unbend._validation import check_level, check_power
from unbend.predicting import MEAN_FAR, MEAN_FEW_MIN, MEAN_FEW_SHARE
from unbend.wording import MEAN_FAR_WORDS, MEAN_FEW_WORDS, MEAN_UNBOUNDED, MEAN_UNTRUSTED

from .xlsx import Column, Style, clean_text

__all__ = ["add_portable_sheet", "write_portable_workbook", "append_portable_rows", "read_portable",
           "read_portable_inverse", "CELL", "DATA_COLUMNS", "NEW_COLUMNS", "INV_COLUMNS", "PRED_HEADER",
           "DATA_CAPTION", "INV_CAPTION"]

# ----------------------------------------------------------------------------- layout
#: Cells of the settings and of the line. Settings are the ones a colleague may change.
CELL = {
    "y_power": "B8", "y_start": "B9", "x_power": "B10", "x_start": "B11", "level": "B12",
    "y_name": "B13", "x_name": "B14",
    "slope": "B17", "intercept": "B18", "n": "B19", "resid_sd": "B20", "r2": "B21",
    "x_mean": "B22", "sxx": "B23", "t": "B24", "smear": "B25", "x_min": "B26", "x_max": "B27",
    "check": "B28",
}
#: Header row of the predictions table; new x values start on the next row. The data table follows below it.
PRED_HEADER = 40
#: New-x table columns (key, letter): results first, working columns on the re-expressed scale after.
NEW_COLUMNS = {"new_x": "A", "median": "B", "mean": "C", "line_low": "D", "line_high": "E", "low": "F",
               "high": "G", "outside": "H", "note": "I", "x_re": "J", "fitted": "K", "line_low_re": "L",
               "line_high_re": "M", "low_re": "N", "high_re": "O"}
#: Data table columns (key, letter).
DATA_COLUMNS = {"y": "A", "x": "B", "x_used": "C", "y_re": "D", "x_re": "E", "line": "F", "residual": "G"}
#: First words of the caption above the data table (how a reader finds it again).
DATA_CAPTION = "Data: type y and x below"
#: Block "x from a measured y" (between the predictions and the data): columns (key, letter).
INV_COLUMNS = {"reading": "A", "replicates": "B", "x": "C", "low": "D", "high": "E", "outside": "F",
               "reading_re": "G", "g": "H", "note": "I", "x_re": "J", "low_re": "K", "high_re": "L"}
#: First words of that block's caption.
INV_CAPTION = "x from a measured y"
#: What the x columns show instead of a number when the slope is not significant (no closed interval).
INV_NOT_BOUNDED = "not bounded"

_DATA_HEAD = {
    "x_used": "x of rows used (blank = row skipped)",
    "y_re": "y re-expressed",
    "x_re": "x re-expressed",
    "line": "line at this x (re-expressed scale)",
    "residual": "residual (blank = row not used)",
}
_NEW_HEAD = {
    "new_x": "new x",
    "median": "typical y (median)",
    "mean": "average y (smearing mean)",
    "line_low": "typical y: low",
    "line_high": "typical y: high",
    "low": "one new y: low",
    "high": "one new y: high",
    "outside": "outside the data's x range?",
    "note": "note",
    "x_re": "new x re-expressed",
    "fitted": "line (re-expressed scale)",
    "line_low_re": "typical y: low (re-expressed)",
    "line_high_re": "typical y: high (re-expressed)",
    "low_re": "one new y: low (re-expressed)",
    "high_re": "one new y: high (re-expressed)",
}

#: Rows on a sheet (the limit of the .xlsx format).
SHEET_ROWS = 1_048_576
#: Rows the statistics look at when the data are fewer.
DEFAULT_CAPACITY = 5000

_INV_HEAD = {
    "reading": "measured y (one reading, or the average of m)",
    "replicates": "m: readings averaged (blank = 1)",
    "x": "x estimate",
    "low": "x: low",
    "high": "x: high",
    "outside": "outside the standards' x range?",
    "reading_re": "reading re-expressed",
    "g": "g (below 1: the interval closes)",
    "note": "note on this reading",
    "x_re": "x estimate re-expressed",
    "low_re": "x: low (re-expressed)",
    "high_re": "x: high (re-expressed)",
}

_RIGHT = ("median", "mean", "line_low", "line_high", "low", "high", "x_re", "fitted", "line_low_re",
          "line_high_re", "low_re", "high_re")
_S_TITLE = Style(bold=True, size=15)
_S_BOLD = Style(bold=True)
_S_SECTION = Style(bold=True, size=12, color="1F3A5F")
_S_NOTE = Style(italic=True, color="444444")
_S_CAUTION = Style(bold=True, color="9C2A00")
_S_INPUT = Style(fill="FFF2B3", border="999999")
_S_RESULT = Style(fill="E6F0E6")
_S_HEAD = Style(bold=True, wrap=True, valign="top")
_SHEET_BAD = re.compile(r"[\[\]:*?/\\]")


# ----------------------------------------------------------------------------- cell writing
def _text(ws, coord: str, text, *, font=None, wrap: bool = False):
    """Write text that must stay text (never a live formula), whatever it starts with."""
    c = ws[coord]
    c.value = _clean(str(text))
    c.data_type = "s"  # openpyxl reads a leading '=' as a formula; force a plain string
    if font is not None:
        c.font = font
    if wrap:
        from openpyxl.styles import Alignment

        c.alignment = Alignment(wrap_text=True, vertical="top")
    return c


def _formula(ws, coord: str, text: str, *, font=None, fill=None, number_format: str | None = None):
    if not text.startswith("="):
        raise AssertionError("formula text must start with '='")
    c = ws[coord]
    c.value = text
    if number_format:
        c.number_format = number_format
    if font is not None:
        c.font = font
    if fill is not None:
        c.fill = fill
    return c


def _clean(s: str) -> str:
    return clean_text(s)


def _data_value(v):
    """What a data value becomes in a cell, read the way the engine reads it.

    Finite numbers (and text that reads as a finite number, as the engine
    reads it) become numbers; None, NaN and infinity become blank; booleans
    stay booleans (not numbers, so skipped, like the engine); any other value
    becomes text.
    """
    if isinstance(v, np.generic):
        v = v.item()
    if v is None:
        return None
    if isinstance(v, bool):
        return v
    if isinstance(v, numbers.Real):
        f = float(v)
        return f if math.isfinite(f) else None
    if isinstance(v, str):
        try:
            f = float(v)
        except ValueError:
            return v
        return f if math.isfinite(f) else None
    return str(v)


def _data_values(values, name: str):
    """:func:`_data_value` of every value; a float array stays a float array (NaN and infinity: blank)."""
    if isinstance(values, np.ndarray) and values.ndim == 1 and values.dtype.kind == "f":
        return np.where(np.isfinite(values), values, np.nan)
    return [_data_value(v) for v in _column(values, name)]


def _engine_numbers(vals):
    if isinstance(vals, np.ndarray):
        return vals
    return [_engine_number(v) for v in vals]


def _padded(vals, k: int):
    if isinstance(vals, np.ndarray):
        return np.concatenate([vals, np.full(k, np.nan)])
    return list(vals) + [None] * k


def _put_data(ws, coord: str, v):
    val = _data_value(v)
    c = ws[coord]
    if isinstance(val, str):
        _text(ws, coord, val)
    else:
        c.value = val
    return c


def _digits(typical: float, sig: int = 6) -> str:
    """A fixed-decimals number format showing about ``sig`` significant digits at the size ``typical``.

    Formats change only what is displayed; the cells keep every digit.
    """
    if not math.isfinite(typical) or typical <= 0:
        return "General"
    dec = int(min(9, max(0, sig - 1 - math.floor(math.log10(typical)))))
    return "#,##0" + ("." + "0" * dec if dec else "")


def _typical(values) -> float:
    v = np.abs(np.asarray(values, dtype=float))
    v = v[np.isfinite(v) & (v > 0)]
    return float(np.median(v)) if v.size else float("nan")


def _engine_number(val) -> float:
    return float(val) if isinstance(val, float) else float("nan")


# ----------------------------------------------------------------------------- formula text
def _reexpress(v: str, p: str) -> str:
    """Re-expression of value ``v`` (already including the start) at power cell ``p``; #N/A outside its domain.

    p > 0: v^p (v >= 0, or any v for an odd whole power); p = 0: LN(v) (v > 0);
    p < 0: -(v^p) (v > 0). The sign for p < 0 keeps order (common practice).
    """
    ok = f"IF({p}>0,OR({v}>=0,AND({p}=INT({p}),MOD({p},2)=1)),{v}>0)"
    val = f"IF({p}>0,({v})^{p},IF({p}=0,LN({v}),-(({v})^{p})))"
    return f"IF({ok},{val},NA())"


def _invert(z: str, p: str, s: str) -> str:
    """Inverse re-expression of ``z`` at power cell ``p``, minus the start cell ``s``."""
    odd = f"AND({p}=INT({p}),MOD({p},2)=1)"
    return (f"IF({p}>0,IF({odd},SIGN({z})*ABS({z})^(1/{p}),MAX({z},0)^(1/{p}))-{s},"
            f"IF({p}=0,EXP({z})-{s},IF({z}<0,(-{z})^(1/{p})-{s},\"unbounded\")))")


def _smeared(z: str, p: str, s: str, mask: str, res: str, n: str, factor: str) -> str:
    """Duan's smearing mean at fitted value ``z``: (1/n) * sum over used rows of g(z + e_i), minus the start.

    ``mask`` is --ISNUMBER(x used) over the whole block, ``res`` the residual
    block (0 or blank on rows not used, so every term is a number).
    """
    zz = f"({z}+{res})"
    odd = f"AND({p}=INT({p}),MOD({p},2)=1)"
    pos = (f"IF({odd},SUMPRODUCT({mask},SIGN{zz}*ABS{zz}^(1/{p})),"
           f"SUMPRODUCT({mask},(({zz}+ABS{zz})/2)^(1/{p})))/{n}-{s}")
    neg = (f"IF(SUMPRODUCT({mask}*({zz}>=0))>0,\"unbounded\","
           f"SUMPRODUCT({mask},(-{zz})^(1/{p}))/{n}-{s})")
    return f"IF({p}=0,EXP({z})*{factor}-{s},IF({p}>0,{pos},{neg}))"


def _mean_caution(median: str, mean: str, z: str, p: str, mask: str, res: str, n: str) -> str:
    """The engine's note for a smearing mean that cannot be trusted, in formulas (see
    :func:`unbend.predicting.mean_cautions`): unbounded, more than MEAN_FAR times the median, or resting on a
    few residuals (Kish's effective number of terms below MEAN_FEW_SHARE of the rows or MEAN_FEW_MIN)."""
    zz = f"({z}+{res})"
    odd = f"AND({p}=INT({p}),MOD({p},2)=1)"
    term = (f"IF({p}=0,EXP({res}),IF({p}>0,IF({odd},SIGN{zz}*ABS{zz}^(1/{p}),(({zz}+ABS{zz})/2)^(1/{p})),"
            f"(-{zz})^(1/{p})))")
    neff = f"SUMPRODUCT({mask},{term})^2/SUMPRODUCT({mask},{term}^2)"
    few = f"IFERROR({neff}<MAX({MEAN_FEW_MIN},{MEAN_FEW_SHARE}*{n}),FALSE)"
    far = f"AND(ISNUMBER({mean}),{median}>0,IFERROR({mean}/{median}>{MEAN_FAR},FALSE))"
    far_w = MEAN_FAR_WORDS.format(far=MEAN_FAR)
    few_w = MEAN_FEW_WORDS.replace("{n}", '"&' + n + '&"')
    untrusted = MEAN_UNTRUSTED.replace("{why}", f'"&IF({far},"{far_w}","")&IF(AND({far},{few}),"; ","")'
                                                f'&IF({few},"{few_w}","")&"')
    return (f'IF(OR({p}=1,NOT(ISNUMBER({median}))),"",IF({mean}="unbounded","{MEAN_UNBOUNDED}",'
            f'IF(OR({far},{few}),"{untrusted}","")))')


def _abs(coord: str) -> str:
    m = re.fullmatch(r"([A-Z]+)([0-9]+)", coord)
    return f"${m.group(1)}${m.group(2)}"


def _block(col: str, first: int, last: int) -> str:
    return f"${col}${first}:${col}${last}"


def _data_formulas(r: int) -> dict:
    """Formulas of the working columns of data row ``r`` (they refer only to their own row and the line cells)."""
    C = {k: _abs(v) for k, v in CELL.items()}
    D = {k: f"{c}{r}" for k, c in DATA_COLUMNS.items()}
    used = f"ISNUMBER({D['x_used']})"
    y_re = _reexpress(D["y"] + "+" + C["y_start"], C["y_power"])
    x_re = _reexpress(D["x"] + "+" + C["x_start"], C["x_power"])
    a, b = C["intercept"], C["slope"]
    return {
        "x_used": f'=IF(AND(ISNUMBER({D["y"]}),ISNUMBER({D["x"]})),{D["x"]},"")',
        "y_re": f'=IF({used},{y_re},"")',
        "x_re": f'=IF({used},{x_re},"")',
        "line": f'=IF({used},{a}+{b}*{D["x_re"]},"")',
        "residual": f'=IF({used},{D["y_re"]}-{D["line"]},0)',
    }


def _new_formulas(r: int, first: int, last: int) -> dict:
    """Formulas of new-x row ``r``; the statistics look at data rows ``first`` to ``last``."""
    C = {k: _abs(v) for k, v in CELL.items()}
    N = {k: f"{c}{r}" for k, c in NEW_COLUMNS.items()}
    nx, xr, z = N["new_x"], N["x_re"], N["fitted"]
    yp, ys = C["y_power"], C["y_start"]
    n, s, t, xm, sxx = C["n"], C["resid_sd"], C["t"], C["x_mean"], C["sxx"]
    mask = f"--ISNUMBER({_block(DATA_COLUMNS['x_used'], first, last)})"
    res = _block(DATA_COLUMNS["residual"], first, last)
    se_line = f"{s}*SQRT(1/{n}+({xr}-{xm})^2/{sxx})"
    se_new = f"{s}*SQRT(1+1/{n}+({xr}-{xm})^2/{sxx})"
    x_re = _reexpress(nx + "+" + C["x_start"], C["x_power"])
    a, b, smear, xmin, xmax = C["intercept"], C["slope"], C["smear"], C["x_min"], C["x_max"]

    def back(key):
        zz = N[key]
        return f'=IF(ISNUMBER({zz}),{_invert(zz, yp, ys)},"")'

    o_txt = f'IF({N["outside"]}="yes","outside the observed x range: extrapolation","")'
    b_txt = (f'IF({N["median"]}="unbounded","no finite value: the line is past the end this y power can reach",'
             f'IF({N["high"]}="unbounded","the interval has no upper end at this y power",""))')
    m_txt = _mean_caution(N["median"], N["mean"], z, yp, mask, res, n)
    ob = f'{o_txt}&IF(AND({o_txt}<>"",{b_txt}<>""),"; ","")&{b_txt}'
    parts = f'{ob}&IF(AND(({ob})<>"",{m_txt}<>""),"; ","")&{m_txt}'
    return {
        "x_re": f'=IF({nx}="","",IF(ISNUMBER({nx}),IFERROR({x_re},"cannot re-express"),"not a number"))',
        "fitted": f'=IF(ISNUMBER({xr}),{a}+{b}*{xr},"")',
        "line_low_re": f'=IF(ISNUMBER({z}),{z}-{t}*{se_line},"")',
        "line_high_re": f'=IF(ISNUMBER({z}),{z}+{t}*{se_line},"")',
        "low_re": f'=IF(ISNUMBER({z}),{z}-{t}*{se_new},"")',
        "high_re": f'=IF(ISNUMBER({z}),{z}+{t}*{se_new},"")',
        "median": back("fitted"),
        "mean": f'=IF(ISNUMBER({z}),{_smeared(z, yp, ys, mask, res, n, smear)},"")',
        # the inverse is increasing, so the lower re-expressed end gives the lower end in original units
        "line_low": back("line_low_re"),
        "line_high": back("line_high_re"),
        "low": back("low_re"),
        "high": back("high_re"),
        "outside": f'=IF(ISNUMBER({nx}),IF(OR({nx}<{xmin},{nx}>{xmax}),"yes","no"),"")',
        "note": (f'=IF({nx}="","",IF(NOT(ISNUMBER({nx})),"x is not a number",'
                 f'IF(NOT(ISNUMBER({xr})),"x cannot be re-expressed at this power",'
                 f'{parts})))'),
    }


def _inverse_formulas(r: int, first: int, last: int) -> dict:
    """Formulas of row ``r`` of the block "x from a measured y" (Fieller's interval, as :func:`unbend.calibration.fieller`).

    On the re-expressed scale, with ``D = estimate - mean x'``, ``g = (t s / slope)**2 / Sxx`` and
    ``q = 1/m + 1/n`` the ends are ``mean x' + (D -/+ (t s / |slope|) sqrt(D**2 / Sxx + (1 - g) q)) / (1 - g)``
    (Draper and Smith 1998, section 3.2); for ``g >= 1`` there is no closed interval and the cells say so in
    words. The ends are taken back end by end, cut where the x re-expression ends, as the engine does.
    """
    C = {k: _abs(v) for k, v in CELL.items()}
    V = {k: f"{c}{r}" for k, c in INV_COLUMNS.items()}
    rd, mc, z, g, xr, klo, khi = (V[k] for k in ("reading", "replicates", "reading_re", "g", "x_re", "low_re",
                                                 "high_re"))
    a, b, s, n, t, xm, sxx = (C[k] for k in ("intercept", "slope", "resid_sd", "n", "t", "x_mean", "sxx"))
    yp, ys, xp, xs = C["y_power"], C["y_start"], C["x_power"], C["x_start"]
    xre = _block(DATA_COLUMNS["x_re"], first, last)
    m_ok = f'OR({mc}="",AND(ISNUMBER({mc}),{mc}>=1,{mc}=INT({mc})))'
    mm = f'IF({mc}="",1,{mc})'
    odd = f"AND({xp}=INT({xp}),MOD({xp},2)=1)"
    floor0 = f"AND({xp}>0,NOT({odd}))"        # x' cannot go below 0 (x + start = 0)
    ceil0 = f"{xp}<0"                          # x' stays below 0 (x growing without end)
    live = f"ISNUMBER({xr})"
    closed = f"{g}<1"
    empty = f"AND({closed},OR(AND({floor0},{khi}<0),AND({ceil0},{klo}>=0)))"
    below = f"AND({floor0},{xr}<0)"
    above = f"AND({ceil0},{xr}>=0)"
    half = f"{t}*{s}/ABS({b})*SQRT(({xr}-{xm})^2/{sxx}+(1-{g})*(1/{mm}+1/{n}))"
    # g >= 1: every x' but (when the discriminant is not negative) the stretch between the two roots; where the x
    # power cuts one of the two pieces off, what is left has one end (as the engine: unbend.calibration)
    disc = f"(({xr}-{xm})^2/{sxx}+(1-{g})*(1/{mm}+1/{n}))>=0"
    r1 = f"{xm}+(({xr}-{xm})-{half})/(1-{g})"
    r2 = f"{xm}+(({xr}-{xm})+{half})/(1-{g})"
    one_piece = f"AND(MIN({r1},{r2})<0,MAX({r1},{r2})>=0)"
    nb = f'"{INV_NOT_BOUNDED}"'

    def kept(cut, end, otherwise=nb):
        """The end left where the x power (``cut``) cuts one piece of the open set off, else ``otherwise``."""
        return f"IF({disc},IF(AND({cut},{one_piece}),{end},{otherwise}),{otherwise})"

    # the low end of an open set in x: x's own edge (-start) where x' = -inf or 0 is one (log, roots, even and
    # negative powers), none where x runs without end (raw and odd powers)
    x_edge = f"IF(OR({xp}=1,AND({xp}>0,{odd})),{nb},-{xs})"
    low_end, high_end = f"MAX({r1},{r2})", f"MIN({r1},{r2})"
    rises, falls = kept(floor0, low_end), kept(ceil0, high_end)
    open_low = kept(floor0, _invert(low_end, xp, xs), x_edge)
    open_high = kept(ceil0, _invert(high_end, xp, xs))
    level = f"ROUND({C['level']}*100,4)"
    notes = [
        (f'{V["outside"]}="yes"', "\"outside the calibration standards' x range: extrapolation\""),
        (below, f'"the line reaches this reading only below x = "&(-{xs})&", the smallest x that this x power '
                f'allows, so there is no estimate"'),
        (above, '"the line levels off before this reading (at this x power), so no finite x gives it and there is '
                'no estimate"'),
        (f"NOT({closed})", f'"no closed interval: the slope is not significant at the "&{level}&"% level (g is '
                           f'not below 1), so the x values consistent with this reading run without end"'),
        (empty, '"no x that this x power allows is consistent with this reading"'),
        (f"AND({closed},NOT({empty}),{floor0},{klo}<0)",
         f'"the interval reaches down to x = "&(-{xs})&", the smallest x that this x power allows"'),
        (f"AND({closed},NOT({empty}),{ceil0},{khi}>=0)",
         '"the interval has no upper end: the band does not close as x grows"'),
        (f"{n}<8", f'"only "&{n}&" rows were used: treat with caution"'),
    ]
    joined = "&".join(f'IF({cond},"; "&{text},"")' for cond, text in notes)
    return {
        "reading_re": (f'=IF({rd}="","",IF(NOT(ISNUMBER({rd})),"not a number",'
                       f'IFERROR({_reexpress(rd + "+" + ys, yp)},"cannot re-express")))'),
        "g": f'=IF(ISNUMBER({z}),IFERROR(({t}*{s}/{b})^2/{sxx},""),"")',
        "x_re": f'=IF(AND(ISNUMBER({z}),ISNUMBER({g}),{m_ok}),{xm}+({z}-{a}-{b}*{xm})/{b},"")',
        "low_re": (f'=IF({live},IF({closed},{xm}+(({xr}-{xm})-{half})/(1-{g}),{rises}),"")'),
        "high_re": (f'=IF({live},IF({closed},{xm}+(({xr}-{xm})+{half})/(1-{g}),{falls}),"")'),
        "x": f'=IF({live},IF(OR({below},{above}),"none",{_invert(xr, xp, xs)}),"")',
        "low": (f'=IF({live},IF(NOT({closed}),{open_low},IF({empty},"none",'
                f'{_invert(klo, xp, xs)})),"")'),
        "high": (f'=IF({live},IF(NOT({closed}),{open_high},IF({empty},"none",'
                 f'IF(AND({ceil0},{khi}>=0),"no upper end",{_invert(khi, xp, xs)}))),"")'),
        "outside": f'=IF({live},IF(OR({xr}<MIN({xre}),{xr}>MAX({xre})),"yes","no"),"")',
        "note": (f'=IF({rd}="","",IF(NOT(ISNUMBER({rd})),"the reading is not a number",'
                 f'IF({C["check"]}<>"ok","no line: "&{C["check"]},'
                 f'IF(NOT(ISNUMBER({z})),"the reading cannot be re-expressed at this y power",'
                 f'IF(NOT({m_ok}),"m (readings averaged) must be a whole number, 1 or more",'
                 f'MID({joined},3,2000))))))'),
    }


def _summary_formulas(first: int, last: int) -> dict:
    C = {k: _abs(v) for k, v in CELL.items()}
    yre, xre = _block(DATA_COLUMNS["y_re"], first, last), _block(DATA_COLUMNS["x_re"], first, last)
    xu, res = _block(DATA_COLUMNS["x_used"], first, last), _block(DATA_COLUMNS["residual"], first, last)
    bad = f"SUMPRODUCT(--ISERROR({yre}))+SUMPRODUCT(--ISERROR({xre}))"
    return {
        "slope": f"=SLOPE({yre},{xre})",
        "intercept": f"=INTERCEPT({yre},{xre})",
        "n": f"=COUNT({xu})",
        "resid_sd": f"=STEYX({yre},{xre})",
        "r2": f"=RSQ({yre},{xre})",
        "x_mean": f"=AVERAGE({xre})",
        "sxx": f"=DEVSQ({xre})",
        "t": f"=TINV(1-{C['level']},{C['n']}-2)",
        "smear": (f'=IF({C["y_power"]}=0,SUMPRODUCT(--ISNUMBER({xu}),EXP({res}))/{C["n"]},'
                  f'"not used")'),
        "x_min": f"=MIN({xu})",
        "x_max": f"=MAX({xu})",
        "check": (f'=IF({bad}>0,({bad})&" value(s) cannot be re-expressed at these powers: add a start or '
                  f'choose another power",IF({C["n"]}<3,"need at least 3 rows where both y and x are numbers",'
                  f'IF({C["sxx"]}=0,"x does not vary, so no line can be fitted","ok")))'),
    }


# ----------------------------------------------------------------------------- inputs
def _column(values, name: str) -> list:
    """Raw values of one column, in order (text kept as text)."""
    if values is None:
        return []
    if isinstance(values, pd.DataFrame):
        if values.shape[1] != 1:
            raise UnbendError(f"the portable sheet takes one {name} column; got {values.shape[1]} columns. "
                              "Fit several x columns with the add-in functions instead.")
        values = values.iloc[:, 0]
    if isinstance(values, (str, bytes)) or np.isscalar(values):
        return [values]
    arr = np.asarray(values, dtype=object)
    if arr.ndim == 2:
        if arr.shape[1] == 1:
            arr = arr[:, 0]
        elif arr.shape[0] == 1:
            arr = arr[0, :]
        else:
            raise UnbendError(f"the portable sheet takes one {name} column; got {arr.shape[1]} columns. "
                              "Fit several x columns with the add-in functions instead.")
    elif arr.ndim > 2:
        raise UnbendError(f"{name} must be one column of values; got shape {arr.shape}.")
    return list(arr.ravel())


def _sheet_title(title: str, taken=()) -> str:
    t = (_SHEET_BAD.sub(" ", _clean(str(title))).strip().strip("'").strip() or "Portable prediction")[:31]
    base, k = t, 1
    while t.lower() in {n.lower() for n in taken}:  # XlsxWriter refuses a name twice; openpyxl renames itself
        k += 1
        t = f"{base[:31 - len(str(k)) - 1]} {k}"
    return t


def _label_name(name, default: str) -> str:
    s = re.sub(r"\s+", " ", _clean(str(name))).strip()[:60]
    return s or default


def _unique_table_name(wb, stem: str) -> str:
    if hasattr(wb, "table_names"):  # a workbook being written with XlsxWriter
        taken = wb.table_names()
    else:
        taken = {t.lower() for ws in wb.worksheets for t in ws.tables.keys()}
    k = 1
    while f"{stem}{k}".lower() in taken:
        k += 1
    return f"{stem}{k}"


# ----------------------------------------------------------------------------- the sheet
def add_portable_sheet(workbook, y, x, new_x=(), *, y_power=1.0, x_power=1.0, y_start=0.0, x_start=0.0,
                       level=0.95, title: str = "Portable prediction", y_name: str = "y", x_name: str = "x",
                       invented_data: bool = False, spare_rows: int = 20, spare_new_rows: int = 10,
                       capacity: int | None = DEFAULT_CAPACITY, readings=(), spare_readings: int = 5):
    """Add a sheet holding the data, the fitted line and predictions, all as built-in spreadsheet formulas.

    Parameters
    ----------
    workbook : openpyxl.Workbook or unbend.udfs.xlsx.Book
        The workbook to add the sheet to (changed in place): an openpyxl
        workbook, or a new workbook being written with XlsxWriter (the report),
        where the data rows are written as one block with shared formulas.
    y, x : array_like
        One column each, same length. Values that are not numbers are written
        as they are (text stays text) and the row is skipped by the formulas,
        as the engine skips it. More than one x column is refused.
    new_x : array_like, optional
        x values to predict at, one per row of the predictions table.
    y_power, x_power : float
        Ladder powers (0 = log); written to cells a colleague can change.
    y_start, x_start : float
        Added before re-expressing; also cells a colleague can change.
    level : float
        Level of both intervals (0.95 for 95%).
    title : str
        Sheet heading; the tab name is the same, shortened to 31 characters.
    y_name, x_name : str
        What y and x measure, shown in the headings.
    invented_data : bool
        Say on the sheet that the data are invented (for demonstration sheets).
    spare_rows, spare_new_rows : int
        Empty rows with formulas ready at the bottom of the data table and of
        the predictions table.
    capacity : int or None
        How many rows from the first data row the statistics look at. Data
        below that are ignored (the sheet says where the block ends). None:
        the data and spare rows, and at least 5,000, up to the sheet's own
        limit of 1,048,576 rows.
    readings : array_like, optional
        Measured y values for the block "x from a measured y" (the line used
        backwards, as in a calibration), one per row; a colleague types more
        in its empty rows.
    spare_readings : int
        Empty rows with formulas ready in that block. With no readings and
        no spare rows the block is left out.

    Returns
    -------
    openpyxl.worksheet.worksheet.Worksheet or unbend.udfs.xlsx.Sheet

    Raises
    ------
    UnbendError
        For more than one x column, too few usable rows, values that cannot be
        re-expressed at the chosen powers (the message proposes a start), or
        bad settings. The data are fitted once by the engine first, so the
        sheet always opens on a line that can be fitted.

    Notes
    -----
    The line is the ordinary least-squares line of re-expressed y on
    re-expressed x; its intervals use ``s * sqrt(1/n + (x' - mean x')^2 / Sxx)``
    (plus 1 under the root for a new observation) with Student's t on n - 2
    degrees of freedom (common practice). The average y is Duan's (1983)
    smearing estimate, written as one SUMPRODUCT over the residual column.
    x from a measured y is Fieller's interval on the re-expressed scale,
    taken back end by end (the closed form of
    :func:`unbend.calibration.fieller`; Draper and Smith 1998, section 3.2).

    Examples
    --------
    >>> from openpyxl import Workbook
    >>> from unbend.udfs.portable import add_portable_sheet
    >>> wb = Workbook()
    >>> ws = add_portable_sheet(wb, [2.0, 3.1, 4.4, 6.2, 8.9], [1, 2, 3, 4, 5], [2.5, 6],
    ...                         y_power=0, invented_data=True)
    >>> ws["B17"].value
    '=SLOPE($D$66:$D$5065,$E$66:$E$5065)'
    """
    yp = check_power(y_power, "y power")
    xp = check_power(x_power, "x power")
    lv = check_level(level)
    ys_, xs_ = _start(y_start, "y start"), _start(x_start, "x start")
    yv, xv = _data_values(y, "y"), _data_values(x, "x")
    nv = [_data_value(v) for v in _column(new_x, "new x")]
    if len(yv) != len(xv):
        raise UnbendError(f"y has {len(yv)} rows but x has {len(xv)}; give columns of the same length.")
    rv = [_data_value(v) for v in _column(readings, "readings")]
    for nm, k, lo in (("spare_rows", spare_rows, 0), ("spare_new_rows", spare_new_rows, 0),
                      ("spare_readings", spare_readings, 0)):
        if not isinstance(k, numbers.Integral) or isinstance(k, bool) or k < lo:
            raise UnbendError(f"{nm} must be a whole number of at least {lo}; got {k!r}.")
    m_rows = len(nv) + spare_new_rows
    k_inv = len(rv) + spare_readings
    inv_header = PRED_HEADER + m_rows + 5    # caption and a line of help above it
    first = PRED_HEADER + m_rows + 4 + (k_inv + 5 if k_inv else 0)
    room = SHEET_ROWS - first + 1  # the sheet's own limit
    if capacity is None:
        capacity = min(room, max(DEFAULT_CAPACITY, len(yv) + spare_rows))
    if not isinstance(capacity, numbers.Integral) or isinstance(capacity, bool) or capacity < 3:
        raise UnbendError(f"capacity must be a whole number of at least 3; got {capacity!r}.")
    if capacity > room:
        raise UnbendError(f"capacity={capacity} rows do not fit on a sheet: the data start on row {first} and a "
                          f"sheet has {SHEET_ROWS:,} rows, so at most {room:,}.")
    if len(yv) + spare_rows > capacity:
        what = (f"the sheet's {SHEET_ROWS:,} rows" if capacity == room else f"capacity={capacity}; raise capacity")
        raise UnbendError(f"{len(yv)} data rows and {spare_rows} spare rows do not fit in {what}.")
    if len(nv) + spare_new_rows == 0:
        raise UnbendError("give at least one new x or one spare row for new x values.")
    # the engine fits the same numbers first: clear errors now, and a sheet that opens on a valid line
    f = unbend.fit(_engine_numbers(yv), _engine_numbers(xv), y_power=yp, x_power=xp,
                   y_start=ys_, x_start=xs_, level=lv)
    tab = f.residuals
    fy, fyre, fxre = _digits(_typical(tab["y"])), _digits(_typical(tab["y_re"])), _digits(_typical(tab["x_re"]))
    fres = _digits(f.resid_sd)
    fx = _digits(_typical(tab["x"]))
    hide0 = f"{fres};-{fres};;@" if fres != "General" else "General"  # rows not used show blank, not 0
    data_fmt = {"y": fy, "x": fx, "x_used": fx, "y_re": fyre, "x_re": fxre, "line": fyre, "residual": hide0}
    new_fmt = {"new_x": fx, "median": fy, "mean": fy, "line_low": fy, "line_high": fy, "low": fy, "high": fy,
               "x_re": fxre, "fitted": fyre, "line_low_re": fyre, "line_high_re": fyre, "low_re": fyre, "high_re": fyre}
    sum_fmt = {"slope": _digits(abs(float(f.coef[1]))), "intercept": fyre, "n": "0", "resid_sd": fres,
               "r2": "0.0000", "x_mean": fxre, "sxx": _digits(float(np.sum((tab["x_re"] - tab["x_re"].mean()) ** 2))),
               "t": "0.0000", "smear": "0.000000", "x_min": fx, "x_max": fx}

    from .xlsx import Book
    if isinstance(workbook, Book):
        sh = workbook.sheet(_sheet_title(title, workbook.sheet_names()))
        native = sh
    else:
        from .sheets import OpenpyxlSheet
        native = workbook.create_sheet(_sheet_title(title))
        sh = OpenpyxlSheet(native)
    yname, xname = _label_name(y_name, "y"), _label_name(x_name, "x")
    n_rows = len(yv) + spare_rows
    data_header = first - 1
    last = first + capacity - 1

    # heading, what the sheet is, cautions
    sh.text(1, 1, title, _S_TITLE)
    _wide(sh, 2, "A straight line fitted after re-expressing y and x by powers, with predictions taken back to the "
                 "original units. Every number is a spreadsheet formula: change a yellow cell, the data or a new "
                 "x, and everything recalculates. No add-in is needed.")
    _wide(sh, 3, "Caution: " + unbend.CAUTION, style=_S_CAUTION)
    if invented_data:
        _wide(sh, 4, "The data in this sheet are invented for illustration; they describe no real measurements.",
              style=_S_NOTE)
    _wide(sh, 5, f"To add data, type y and x in the empty rows at the bottom of the data table (row {first + len(yv)} "
                 f"onwards; their formulas are ready). For more rows, copy the last table row down. Rows that are "
                 f"blank, or have text in y or x, are skipped. The statistics look at rows {first} to {last}.",
          style=_S_NOTE)

    # settings
    sh.text(7, 1, "Settings you can change (yellow cells)", _S_SECTION)
    settings = [
        ("y_power", "y power", yp, "1 = raw, 0.5 = square root, 0 = log, -0.5 = reciprocal root, "
                                   "-1 = reciprocal, 2 = square"),
        ("y_start", "y start", ys_, "added to every y before re-expressing; use it when y has zeros or negatives"),
        ("x_power", "x power", xp, "the same choices, for x"),
        ("x_start", "x start", xs_, "added to every x before re-expressing"),
        ("level", "interval level", lv, "0.95 gives 95% intervals"),
    ]
    for key, label, value, hint in settings:
        r, c = _rc(CELL[key])
        sh.text(r, 1, label, _S_BOLD)
        sh.number(r, c, float(value), _S_INPUT)
        sh.text(r, 3, hint, _S_NOTE)
    sh.text(13, 1, "y measures", _S_BOLD)
    sh.text(*_rc(CELL["y_name"]), yname)
    sh.text(14, 1, "x measures", _S_BOLD)
    sh.text(*_rc(CELL["x_name"]), xname)
    for key in ("y_power", "x_power"):
        sh.validation(*_rc(CELL[key]), {"validate": "decimal", "criteria": "between", "minimum": -100,
                                        "maximum": 100, "ignore_blank": False, "error_title": "Power",
                                        "error_message": "A power is a number between -100 and 100 (0 means log)."})
    sh.validation(*_rc(CELL["level"]), {"validate": "decimal", "criteria": "between", "minimum": 0.0001,
                                        "maximum": 0.9999, "ignore_blank": False, "error_title": "Level",
                                        "error_message": "The level is a number between 0 and 1, such as 0.95."})

    # the line
    sh.text(16, 1, "The line, on the re-expressed scale:  re-expressed y = intercept + slope \u00d7 re-expressed x",
            _S_SECTION)
    summary = [
        ("slope", "slope", "change in re-expressed y for each 1 more of re-expressed x"),
        ("intercept", "intercept", "re-expressed y where re-expressed x is 0"),
        ("n", "rows used", "rows where both y and x are numbers"),
        ("resid_sd", "residual spread (SD)", "typical distance of the points from the line (re-expressed scale)"),
        ("r2", "R\u00b2 (re-expressed scale)", "share of the variation in re-expressed y that the line follows"),
        ("x_mean", "average re-expressed x", "used by the intervals"),
        ("sxx", "sum of squares of re-expressed x", "squared distances from their average, added up; used by "
                                                    "the intervals"),
        ("t", "t multiplier", "Student's t for the chosen level, with (rows used - 2) degrees of freedom"),
        ("smear", "smearing factor (log only)", "average of EXP(residual): the log case's correction for the mean"),
        ("x_min", "smallest x used", "a new x below this is extrapolation"),
        ("x_max", "largest x used", "a new x above this is extrapolation"),
        ("check", "check", "'ok', or what stops the line from being fitted"),
    ]
    sf = _summary_formulas(first, last)
    for key, label, hint in summary:
        r, c = _rc(CELL[key])
        sh.text(r, 1, label, _S_BOLD)
        sh.formula(r, c, sf[key], _S_RESULT.with_(num_format=sum_fmt.get(key)), value="")
        sh.text(r, 3, hint, _S_NOTE)

    # how to read the predictions
    sh.text(30, 1, "How to read the predictions", _S_SECTION)
    reading = [
        "typical y: the line taken back to original units; about half of new y values are expected below it "
        "(a median).",
        "average y: the expected mean in original units (Duan's smearing over the residuals). It differs from the "
        "typical y because taking values back from the re-expressed scale bends them.",
        "typical y: low / high: the interval for the line, that is, for the typical y at that x.",
        "one new y: low / high: the interval for a single new measurement at that x (always wider).",
        "Both intervals are found on the re-expressed scale and taken back end by end. 'unbounded' means a "
        "reciprocal-type scale has no finite upper end there.",
        "outside the data's x range? 'yes' means extrapolation: the line is being trusted where there are no data.",
        "Columns J to O show the same quantities on the re-expressed scale. Check the residual column (plot it "
        "against x) before relying on any of this.",
    ]
    for i, line in enumerate(reading):
        _wide(sh, 31 + i, "\u2022 " + line)

    # predictions table
    cap = (f'="Predictions at new x ("&ROUND({_abs(CELL["level"])}*100,4)&"% intervals): '
           f'type new x values in column A"')
    sh.formula(PRED_HEADER - 1, 1, cap, _S_SECTION, value="")
    new_keys = list(NEW_COLUMNS)
    for j, key in enumerate(new_keys):
        sh.text(PRED_HEADER, _col(NEW_COLUMNS[key]), _NEW_HEAD[key], _S_HEAD)
    for i in range(m_rows):
        r = PRED_HEADER + 1 + i
        cnew = _col(NEW_COLUMNS["new_x"])
        if i < len(nv):
            sh.value(r, cnew, nv[i], Style(num_format=fx))
        else:
            sh.blank(r, cnew, Style(num_format=fx))
        for key, text in _new_formulas(r, first, last).items():
            st = Style(num_format=new_fmt.get(key), halign="right" if key in _RIGHT else None)
            sh.formula(r, _col(NEW_COLUMNS[key]), text, st, value="")
    pred_last = PRED_HEADER + m_rows
    sh.table(PRED_HEADER, 1, pred_last, _col(NEW_COLUMNS["high_re"]), _unique_table_name(workbook, "UnbendNewX"),
             [_NEW_HEAD[k] for k in new_keys], "TableStyleLight11", header_style=_S_HEAD)
    if k_inv:
        _inverse_block(sh, workbook, inv_header, rv, k_inv, first, last, fx=fx, fy=fy, fxre=fxre, fyre=fyre)

    # data table: y and x as given, then the working formulas, one block of rows
    sh.text(data_header - 1, 1, DATA_CAPTION + " (blank rows are skipped; columns C to G are formulas)", _S_SECTION)
    head = {"y": "y" if yname == "y" else f"y ({yname})", "x": "x" if xname == "x" else f"x ({xname})"}
    head.update(_DATA_HEAD)
    for key, col in DATA_COLUMNS.items():
        sh.text(data_header, _col(col), head[key], _S_HEAD)
    cols = [Column("value", _padded(yv, spare_rows), Style(num_format=fy)),
            Column("value", _padded(xv, spare_rows), Style(num_format=fx))]
    for key in ("x_used", "y_re", "x_re", "line", "residual"):
        cols.append(Column("formula", None, Style(num_format=data_fmt.get(key)),
                           formula_at=lambda r, k=key: _data_formulas(r)[k]))
    sh.block(first, 1, cols, n_rows)
    data_last = first + n_rows - 1
    sh.table(data_header, 1, data_last, _col(DATA_COLUMNS["residual"]), _unique_table_name(workbook, "UnbendData"),
             [head[k] for k in DATA_COLUMNS], "TableStyleLight9", header_style=_S_HEAD)

    _layout(sh, data_header, last)
    return native


def _inverse_block(sh, workbook, header: int, rv, k: int, first: int, last: int, *, fx, fy, fxre, fyre) -> None:
    """The block "x from a measured y": readings typed in column A (and m in B), x with its interval."""
    lv = _abs(CELL["level"])
    sh.formula(header - 2, 1, f'="{INV_CAPTION} ("&ROUND({lv}*100,4)&"% intervals): type readings in column A"',
               _S_SECTION, value="")
    _wide(sh, header - 1,
          "The line used backwards, as for a calibration: type a measured y in column A (and in column B how many "
          "readings of one sample it averages, m; blank = 1). x estimate: where the line meets the reading. x: "
          "low / high: the x values whose interval for the mean of m new readings contains the reading "
          "(Fieller's interval), found on the re-expressed scale and taken back end by end, so it is lopsided. "
          f"'{INV_NOT_BOUNDED}': the slope is not clearly different from 0 at this level, so no closed interval "
          "exists; where the x power gives x an edge (x = minus the start, for log, roots, squares and negative "
          "powers) or cuts one side off, the end that is left is shown as a number. For m > 1 type the readings' average; the add-in (UNBEND_INVERSE) averages them on the "
          "re-expressed scale, which differs slightly when y is re-expressed. Readings outside the standards are "
          "extrapolation.", style=_S_NOTE)
    fmt = {"reading": fy, "replicates": "0", "x": fx, "low": fx, "high": fx, "reading_re": fyre, "g": "0.000000",
           "x_re": fxre, "low_re": fxre, "high_re": fxre}
    keys = list(INV_COLUMNS)
    for key in keys:
        sh.text(header, _col(INV_COLUMNS[key]), _INV_HEAD[key], _S_HEAD)
    sh.height(header, 46)
    for i in range(k):
        r = header + 1 + i
        c_in = _col(INV_COLUMNS["reading"])
        if i < len(rv) and rv[i] is not None:
            sh.value(r, c_in, rv[i], Style(num_format=fy))
        else:
            sh.blank(r, c_in, Style(num_format=fy))
        sh.blank(r, _col(INV_COLUMNS["replicates"]), Style(num_format="0"))
        for key, text in _inverse_formulas(r, first, last).items():
            st = Style(num_format=fmt.get(key),
                       halign={"note": None, "outside": "center"}.get(key, "right"))
            sh.formula(r, _col(INV_COLUMNS[key]), text, st, value="")
    sh.table(header, 1, header + k, _col(INV_COLUMNS["high_re"]), _unique_table_name(workbook, "UnbendReadings"),
             [_INV_HEAD[kk] for kk in keys], "TableStyleLight11", header_style=_S_HEAD)


def _col(letter: str) -> int:
    n = 0
    for ch in letter:
        n = n * 26 + ord(ch) - 64
    return n


def _rc(coord: str) -> tuple:
    m = re.fullmatch(r"([A-Z]+)([0-9]+)", coord)
    return int(m.group(2)), _col(m.group(1))


def _wide(sh, row: int, text: str, *, style=None) -> None:
    """A line of text across the printed width (columns A to I), wrapped, with room for its lines."""
    st = (style or Style()).with_(wrap=True, valign="top")
    sh.merge(row, 1, 9, text, st)
    sh.height(row, 15 * max(1, math.ceil(len(text) / 185)))


def _start(v, name: str) -> float:
    try:
        s = float(v)
    except (TypeError, ValueError):
        raise UnbendError(f"{name} must be a number; got {v!r}.") from None
    if not math.isfinite(s):
        raise UnbendError(f"{name} must be a finite number; got {v!r}.")
    return s


def _layout(sh, data_header: int, last: int) -> None:
    widths = {"A": 30, "B": 14, "C": 14, "D": 14, "E": 14, "F": 14, "G": 14, "H": 12, "I": 44,
              "J": 14, "K": 14, "L": 15, "M": 15, "N": 15, "O": 15}
    for col, w in widths.items():
        sh.width(_col(col), w)
    sh.height(PRED_HEADER, 46)
    sh.height(data_header, 46)
    sh.printable(print_area=f"A1:I{last}")  # the whole data block, so added rows print too; J to O are working


# ----------------------------------------------------------------------------- whole workbook
def write_portable_workbook(path, y, x, new_x=(), **options) -> Path:
    """Write a standalone .xlsx holding one portable sheet; see :func:`add_portable_sheet` for the options.

    The file is written to a temporary file in the same folder and then moved
    into place in one step, so a reader never sees half a file and an
    existing file is untouched if anything fails.

    Returns
    -------
    pathlib.Path
        The path written.
    """
    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise UnbendError(f"the portable workbook is an .xlsx file; got {path.name!r}.")
    from openpyxl import Workbook

    wb = Workbook()
    default = wb.active
    add_portable_sheet(wb, y, x, new_x, **options)
    wb.remove(default)
    wb.active = 0
    folder = path.resolve().parent
    folder.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".unbend-", suffix=".xlsx", dir=folder)
    os.close(fd)
    try:
        wb.save(tmp)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


# ----------------------------------------------------------------------------- growing and reading
def _find_table(ws, stem: str):
    for tbl in ws.tables.values():  # (TableList.items() gives ranges, not tables)
        if tbl.displayName.startswith(stem):
            return tbl
    raise UnbendError(f"this sheet has no {stem} table; is it a portable sheet written by unbend?")


def _capacity_last(ws) -> int:
    m = re.search(r"\$D\$\d+:\$D\$(\d+)", str(ws[CELL["slope"]].value))
    if m is None:
        raise UnbendError("cannot read the data block of this portable sheet (the slope formula was changed).")
    return int(m.group(1))


def append_portable_rows(ws, y, x) -> int:
    """Add data rows to a portable sheet: fill the empty table rows first, then extend the table below.

    New rows get the same working formulas as the other data rows, and the
    table's range grows to include them. Returns the last row of the table.

    Raises
    ------
    UnbendError
        For more than one x column, unequal lengths, or rows beyond the block
        the statistics look at.
    """
    yv = [_data_value(v) for v in _column(y, "y")]
    xv = [_data_value(v) for v in _column(x, "x")]
    if len(yv) != len(xv):
        raise UnbendError(f"y has {len(yv)} rows but x has {len(xv)}; give columns of the same length.")
    tbl = _find_table(ws, "UnbendData")
    last_col = DATA_COLUMNS["residual"]
    m = re.fullmatch(r"\$?A\$?(\d+):\$?([A-Z]+)\$?(\d+)", tbl.ref)
    if m is None or m.group(2) != last_col:
        raise UnbendError(f"the data table range {tbl.ref} is not where a portable sheet keeps it.")
    header, end = int(m.group(1)), int(m.group(3))
    cap = _capacity_last(ws)
    ycol, xcol = DATA_COLUMNS["y"], DATA_COLUMNS["x"]
    free = [r for r in range(header + 1, end + 1)
            if ws[f"{ycol}{r}"].value is None and ws[f"{xcol}{r}"].value is None]
    k = 0
    for r in free:
        if k >= len(yv):
            break
        _put_data(ws, f"{ycol}{r}", yv[k])
        _put_data(ws, f"{xcol}{r}", xv[k])
        k += 1
    r = end
    while k < len(yv):
        r += 1
        if r > cap:
            raise UnbendError(f"row {r} is below the block the statistics look at (rows {header + 1} to {cap}); "
                              "write a new sheet with a larger capacity.")
        _put_data(ws, f"{ycol}{r}", yv[k])
        _put_data(ws, f"{xcol}{r}", xv[k])
        for col in (ycol, xcol):
            ws[f"{col}{r}"].number_format = ws[f"{col}{header + 1}"].number_format
        for key, text in _data_formulas(r).items():
            col = DATA_COLUMNS[key]
            _formula(ws, f"{col}{r}", text, number_format=ws[f"{col}{header + 1}"].number_format)
        k += 1
    new_end = max(end, r)
    tbl.ref = f"A{header}:{last_col}{new_end}"
    if tbl.autoFilter is not None:
        tbl.autoFilter.ref = tbl.ref
    return new_end


def read_portable(ws) -> tuple[dict, pd.DataFrame]:
    """Read the line and the predictions from a recalculated portable sheet.

    Parameters
    ----------
    ws : openpyxl worksheet
        From a workbook loaded with ``data_only=True`` after a spreadsheet
        program (or :func:`unbend.udfs.recalc.recalculate`) computed it.

    Returns
    -------
    (dict, pandas.DataFrame)
        The settings and line cells by name (see :data:`CELL`), and one row
        per filled new x with the columns of :data:`NEW_COLUMNS`; empty
        results read as "".
    """
    summary = {k: ws[c].value for k, c in CELL.items()}
    rows = []
    col = NEW_COLUMNS["new_x"]
    r = PRED_HEADER + 1
    while r <= ws.max_row:
        v = ws[f"{col}{r}"].value
        if isinstance(v, str) and v.startswith((DATA_CAPTION, INV_CAPTION)):
            break
        if v is not None and v != "":
            rows.append({k: _blank(ws[f"{c}{r}"].value) for k, c in NEW_COLUMNS.items()})
        r += 1
    else:
        raise UnbendError("this sheet has no data caption below the predictions; is it a portable sheet?")
    return summary, pd.DataFrame(rows, columns=list(NEW_COLUMNS), dtype=object)


def _blank(v):
    """An empty result cell ("" from a formula, saved as an empty cell) reads back as ""."""
    return "" if v is None else v


def read_portable_inverse(ws) -> pd.DataFrame:
    """Read the block "x from a measured y" from a recalculated portable sheet.

    Returns one row per filled reading with the columns of :data:`INV_COLUMNS`
    (empty results read as ""); an empty frame when the sheet has no such block.
    """
    col = INV_COLUMNS["reading"]
    r, start = PRED_HEADER + 1, None
    while r <= ws.max_row:
        v = ws[f"{col}{r}"].value
        if isinstance(v, str) and v.startswith(DATA_CAPTION):
            break
        if isinstance(v, str) and v.startswith(INV_CAPTION):
            start = r + 3  # caption, help line, header
            break
        r += 1
    rows = []
    if start is not None:
        r = start
        while r <= ws.max_row:
            v = ws[f"{col}{r}"].value
            if isinstance(v, str) and v.startswith(DATA_CAPTION):
                break
            if v is not None and v != "":
                rows.append({k: _blank(ws[f"{c}{r}"].value) for k, c in INV_COLUMNS.items()})
            r += 1
    return pd.DataFrame(rows, columns=list(INV_COLUMNS), dtype=object)
