"""One set of reading rules: cell values -> numbers, and every other value's reason.

The command (``unbend report``) and the cell functions both read data through
this module, so the same cells give the same numbers everywhere, and every
value is either used or skipped with its reason counted and shown.

Two functions do the work:

:func:`read_column`
    One row or one column of cell values -> :class:`ColumnReading`: float
    values (NaN where not used), a reason code per cell, how many values were
    read from text, the unit found, the decimal separator decided, the date
    origin and unit when the column holds dates or times, and for values below
    a detection limit the limit and a ``censored`` mask.
:func:`combine`
    The y reading and the x readings (plus row-level reasons a file gives:
    summary rows, rows hidden by a filter) -> :class:`RowsReading`: which rows
    are used, counts of skipped rows by reason, a few examples (row number and
    value), and sentences for messages and tables.

Rules (our own decisions, in one place)
---------------------------------------
Values arrive as None or "" (blank), float, int, bool, str,
datetime/date/time/timedelta (subclasses included), ``decimal.Decimal``,
numpy scalars and arrays, pandas Series.

* Numbers: int, float, Decimal and numpy numbers are used as they are.  NaN
  counts as blank (numpy's and pandas' missing value); +-inf is "not a finite
  number".  True/False are never numbers.
* Text that is a number is read: surrounding spaces (also non-breaking and
  thin spaces), thousands separators (``,`` ``.`` space or apostrophe, in
  groups of three), a decimal point or comma, an exponent, a sign, a leading
  currency sign or code (``$``, ``EUR`` ...), a trailing percent sign (read as a
  fraction: ``45%`` is 0.45, as a spreadsheet stores it) and a trailing unit
  (``12 mg/L``).  The unit most values carry is the column's unit label;
  a value with another unit is skipped ("another unit").
* The decimal separator is decided per column from its own texts: ``1,234.50``,
  ``0,5``, ``12.25`` or ``1.234.567`` settle it; ``1.234`` alone does not.
  When nothing in the column settles it, the file's delimiter does (a
  semicolon-separated file uses decimal commas, a comma-separated one decimal
  points: common practice of spreadsheet exports); otherwise the column is
  refused with a message that says how to settle it (``--decimal``).  Texts
  that point both ways also refuse the column.
* Cell errors (``#N/A``, ``#DIV/0!``, ``Err:502`` ...) are "error value".
* Values below a detection limit (``<0.5``, ``< 0,5``, ``ND``, ``n.d.``,
  ``<LOD`` ...) are their own category, with the limit when one is written;
  they are skipped, except where a censored fit reads y (:func:`censor_column`): there a value whose limit
  is known (written in the cell, or given by a limit column) is used at its limit and marked ``censored``.
  ``>2000`` is "above a reporting limit".
* Summary labels (total, subtotal, sum, mean, average, count, min, max and
  their common European equivalents: Summe, Gesamt, Mittelwert, moyenne,
  totale, promedio, gemiddelde ...) mark their row as a "summary row".  So do
  trailing rows whose every value equals the sum (or, exactly, the mean) of
  the rows above: a totals row without a label.
* Dates and times: a column whose date-like values outnumber its numbers is a
  date column; dates become days since the earliest date (hours when they all
  fall within two days and carry a time of day), times of day become hours
  since midnight, durations hours.  The origin and unit go into the label.
  A date among numbers (or a number among dates) is skipped and counted.
* A text cell at the very top of a range that holds numbers below is its
  "header" (so ``A:A`` works); a unit-like text right under it is a units row.
"""
from __future__ import annotations

import array as _array
import datetime as _dt
import decimal as _decimal
import itertools
import math
import numbers
import re
from collections import Counter
from dataclasses import dataclass, field

import numpy as np

from unbend import UnbendError

__all__ = [
    "ColumnReading", "RowsReading", "ReadingRefused", "DecimalLeftOpen", "read_column", "read_flat", "combine",
    "censor_column",
    "is_summary_label", "looks_like_unit", "reason_word",
    "USED", "BLANK", "ERROR", "TEXT", "BOOL", "LIMIT", "ABOVE", "SUMMARY", "FILTERED", "HIDDEN",
    "NO_VALUE", "NOT_FINITE", "DATE_AMONG_NUMBERS", "NUMBER_AMONG_DATES", "OTHER_UNIT", "HEADER",
]

# ----------------------------------------------------------------------------- reason codes
USED = 0
BLANK = 1
ERROR = 2
TEXT = 3
BOOL = 4
LIMIT = 5
ABOVE = 6
SUMMARY = 7
FILTERED = 8
HIDDEN = 9
NO_VALUE = 10
NOT_FINITE = 11
DATE_AMONG_NUMBERS = 12
NUMBER_AMONG_DATES = 13
OTHER_UNIT = 14
HEADER = 15

#: code -> key in :data:`unbend.udfs.wording.REASONS`
REASON_KEYS = ("used", "blank", "error value", "not a number", "true/false value", "below a detection limit",
               "above a reporting limit", "summary row", "hidden by a filter", "hidden row",
               "formula without a saved value", "not a finite number", "date among numbers",
               "number among dates", "another unit", "header")

#: Order in which a row's reason is chosen when several columns give one (row-level reasons first).
_PRECEDENCE = (SUMMARY, FILTERED, HIDDEN, HEADER, NO_VALUE, LIMIT, ABOVE, ERROR, TEXT, OTHER_UNIT,
               DATE_AMONG_NUMBERS, NUMBER_AMONG_DATES, BOOL, NOT_FINITE, BLANK)

_NAN = float("nan")
_EXAMPLES = 3

CELL_ERRORS = frozenset({
    "#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!", "#DATA!",
    "#SPILL!", "#CALC!", "#FIELD!", "#BLOCKED!", "#CONNECT!", "#BUSY!", "#UNKNOWN!",
    "#GETTING_DATA", "#PYTHON!", "#EXTERNAL!",
})


def reason_word(code: int) -> str:
    """The words users read for a reason code."""
    from .wording import REASONS
    return REASONS[REASON_KEYS[int(code)]]


class ReadingRefused(UnbendError):
    """A column cannot be read without a decision the user must make; the message says which."""


class DecimalLeftOpen(ReadingRefused):
    """Nothing in a column settles its decimal separator (every text such as 1.234); another column of the same
    file may (see :func:`unbend.udfs.files.read_data`)."""


# ----------------------------------------------------------------------------- words and patterns
_SPACES = dict.fromkeys(map(ord, "\u00a0\u202f\u2007\u2009\u2008\u200a\u3000"), " ")
_SPACES[ord("\u2212")] = "-"  # the minus sign
_SPACES[ord("\u2013")] = "-"

_SUMMARY_WORDS = (
    # English
    "total", "totals", "subtotal", "sub-total", "sub total", "grand total", "sum", "sums", "mean", "means",
    "average", "averages", "avg", "count", "min", "max", "minimum", "maximum", "overall",
    # German
    "summe", "gesamt", "gesamtsumme", "zwischensumme", "insgesamt", "mittelwert", "durchschnitt", "mittel",
    "anzahl", "gesamtergebnis", "ergebnis",
    # French
    "somme", "sous-total", "moyenne", "nombre", "compte", "total général", "total general",
    # Italian
    "totale", "subtotale", "somma", "media", "conteggio", "minimo", "massimo", "totale generale",
    # Spanish / Portuguese
    "suma", "promedio", "cuenta", "recuento", "mínimo", "máximo", "total general", "soma", "média",
    "contagem",
    # Dutch
    "totaal", "subtotaal", "som", "gemiddelde", "aantal", "eindtotaal",
    # Nordic
    "summa", "totalt", "medel", "medelvärde", "antal", "i alt", "gennemsnit", "gjennomsnitt", "antall",
    "keskiarvo", "yhteensä",
    # Polish / Czech
    "razem", "łącznie", "średnia", "součet", "celkem", "průměr",
    "\u03a3",
)
_SUMMARY_RE = re.compile(
    r"^(?:(?:grand|sub)\s*)?(?:" + "|".join(sorted(map(re.escape, _SUMMARY_WORDS), key=len, reverse=True))
    + r")(?:\s*[:=])?(?:\s*(?:\(.*\)|\[.*\])|\s+(?:(?:of|der|des|de|du|di|del|van|aller)\b.*|\d[\d\s/.\-]*|all))?"
    r"\s*[:.]?$",
    re.IGNORECASE)

_ND_RE = re.compile(
    r"^(?:n\.?\s?d\.?|nd|n/d|not\s+detected|non\s+d[ée]tect[ée]|nicht\s+nachweisbar|n\.?\s?n\.?|bdl|b\.d\.l\.|"
    r"<\s*(?:lod|loq|dl|mdl|rl|lor|bg|ng|nwg|bestimmungsgrenze|nachweisgrenze)|"
    r"below\s+(?:the\s+)?(?:detection|reporting|quantification)\s+limit)$", re.IGNORECASE)

_CURRENCY = r"(?:[$€£¥₹₩₽₺₪₫₴₦₱฿]|(?:USD|EUR|GBP|CHF|JPY|CAD|AUD|NZD|SEK|NOK|DKK|PLN|CZK|HUF|INR|CNY|ZAR|BRL|MXN)\b)"
_NUMBER_RE = re.compile(
    r"^(?P<lt>(?:<=?|≤|&lt;|>=?|≥|&gt;)\s*)?(?P<s1>[-+]\s*)?(?P<cur>" + _CURRENCY + r"\s*)?(?P<s2>[-+]\s*)?"
    r"(?P<num>\d(?:[\d.,'’ ]*\d)?|[.,]\d+|\d[.,])"
    r"(?P<exp>[eE][-+]?\d{1,3})?\s*(?P<tail>\S.*?)?$")
_UNIT_RE = re.compile(r"^(?=.{1,24}$)(?!.*\s[\d.,])(?=.*[^\W\d_]|.*[°µ%‰Ω$€£¥])[^\d\s<>=#\"+\-:;,.][^<>=#\"]*$")
_ISO_RE = re.compile(r"^(\d{4})-(\d{1,2})-(\d{1,2})(?:[ T](\d{1,2}):(\d{2})(?::(\d{2})(?:[.,](\d+))?)?)?$")
_DMY_RE = re.compile(r"^(\d{1,2})([./])(\d{1,2})\2(\d{4})(?:,?\s+(\d{1,2}):(\d{2})(?::(\d{2}))?)?$")
_TIME_RE = re.compile(r"^(\d{1,2}):(\d{2})(?::(\d{2})(?:[.,](\d+))?)?$")
_ERR_RE = re.compile(r"^(?:#[A-Z0-9/_]+[!?]|#N/A|Err:\d{3}|#NV)$", re.IGNORECASE)


def is_summary_label(text) -> bool:
    """True for a cell text that labels a summary row ("Total", "Mittelwert:", "Sum of load", "Average (n=12)")."""
    if not isinstance(text, str):
        return False
    s = " ".join(text.translate(_SPACES).split())
    return bool(s) and len(s) <= 60 and _SUMMARY_RE.match(s) is not None


def looks_like_unit(text) -> str:
    """The unit a header-row companion cell names ("mg/L", "(m³/s)", "[°C]", "%"), or "" when it is not one."""
    if not isinstance(text, str):
        return ""
    s = " ".join(text.translate(_SPACES).split())
    if len(s) >= 2 and s[0] + s[-1] in ("()", "[]", "{}"):
        s = s[1:-1].strip()
    if not s or len(s) > 16 or s.count(" ") > 1 or is_summary_label(s) or _ND_RE.match(s) or _ERR_RE.match(s):
        return ""
    if s.lower() in ("n/a", "na", "none", "-", "x", "y", "yes", "no"):
        return ""
    if re.fullmatch(r"[A-Za-zµμ°%‰Ωℓ$€£/·*^.\-²³⁻¹0-9 ]+", s) and re.search(r"[A-Za-zµμ°%‰Ωℓ$€£]", s) \
            and not re.search(r"[A-Za-z]{7,}", s) and not s[0].isdigit():
        return s
    return ""


# ----------------------------------------------------------------------------- result types
@dataclass(frozen=True)
class ColumnReading:
    """One column of cells read by the rules.

    Attributes
    ----------
    name : str
        What the column is called in messages.
    values : numpy.ndarray
        Floats; NaN where the cell is not used.
    reasons : numpy.ndarray
        uint8 reason code per cell (``USED`` = 0 where used).
    from_text : int
        Values used that were read from text.
    unit : str
        The unit most unit-carrying texts named (or a currency sign), "" if none.
    decimal : str
        "." or "," when texts needed the decision, else "".
    decimal_how : str
        "values", "delimiter" or "given" (how the decimal separator was decided), or "".
    percent : int
        Values read from text with a percent sign (as fractions).
    date_origin : datetime.datetime or None
        The earliest date when the column holds dates; ``None`` otherwise.
    date_unit : str
        "days", "hours" (since the origin), "hours since midnight", "hours (duration)" or "".
    limits : numpy.ndarray
        The detection limit where a value is below one (NaN where unknown or not censored).
    censored : numpy.ndarray
        True where the value is below a detection limit.
    examples : tuple
        ``(code, index, shown text)`` for a few cells of each reason (index counted from 0).
    text_examples : tuple
        ``(index, shown text, value)`` for a few values read from text.
    for_censored_fit : bool
        True after :func:`censor_column`: cells below a known limit are used, at their limit, and ``censored``.
    """

    name: str
    values: np.ndarray
    reasons: np.ndarray
    from_text: int = 0
    unit: str = ""
    decimal: str = ""
    decimal_how: str = ""
    percent: int = 0
    date_origin: object = None
    date_unit: str = ""
    limits: np.ndarray = field(default=None, repr=False)
    censored: np.ndarray = field(default=None, repr=False)
    examples: tuple = ()
    text_examples: tuple = ()
    for_censored_fit: bool = False

    def __len__(self) -> int:
        return int(self.values.shape[0])

    @property
    def n_used(self) -> int:
        return int((self.reasons == USED).sum())

    def counts(self) -> dict:
        """{reason code: cells} for every reason other than used."""
        c = np.bincount(self.reasons, minlength=len(REASON_KEYS))
        return {k: int(c[k]) for k in range(1, len(REASON_KEYS)) if c[k]}

    @property
    def label(self) -> str:
        """The name with its unit or date origin, for axis labels: "load (mg/L)", "day (days since 2024-01-03)"."""
        if self.date_unit:
            if self.date_origin is not None:
                o = self.date_origin
                when = o.strftime("%Y-%m-%d %H:%M") if (o.hour or o.minute) else o.strftime("%Y-%m-%d")
                return f"{self.name} ({self.date_unit} since {when})"
            return f"{self.name} ({self.date_unit})"
        if self.unit and self.unit.casefold() not in self.name.casefold():
            return f"{self.name} ({self.unit})"
        return self.name


@dataclass(frozen=True)
class RowsReading:
    """The y and x readings combined into rows.

    Attributes
    ----------
    y : numpy.ndarray
        y where the row is used, NaN elsewhere.
    X : numpy.ndarray
        One column per x, NaN where the row is not used.
    used : numpy.ndarray
        True for rows used.
    reasons : numpy.ndarray
        uint8 reason per row (``USED`` where used): the first that applies in a fixed order.
    row_numbers : numpy.ndarray
        The row number shown to users for each row (a sheet row, or the position in a range from 1).
    columns : tuple
        The :class:`ColumnReading` of y, then each x.
    by_column : dict
        {(reason code, column name): rows} for skipped rows.
    examples : tuple
        ``(reason code, row number, column name, shown value)``, a few per reason.
    censored : numpy.ndarray
        True for rows skipped only because y is below a detection limit (x usable).
    summary_note : tuple
        ``(row number, what)`` for summary rows found by their values ("equals the sum of the rows above").
    y_censored : numpy.ndarray or None
        When y was read for a censored fit (:func:`censor_column`): True for rows used whose y is an upper
        limit (``y`` holds the limit). ``None`` when values below a limit are skipped.
    """

    y: np.ndarray
    X: np.ndarray
    used: np.ndarray
    reasons: np.ndarray
    row_numbers: np.ndarray
    columns: tuple
    by_column: dict
    examples: tuple
    censored: np.ndarray
    summary_note: tuple = ()
    y_censored: np.ndarray = field(default=None, repr=False)

    @property
    def n_used(self) -> int:
        return int(self.used.sum())

    @property
    def n_skipped(self) -> int:
        return int(self.used.size - self.used.sum())

    def counts(self) -> dict:
        """{reason code: rows skipped} in a fixed order."""
        c = np.bincount(self.reasons, minlength=len(REASON_KEYS))
        return {k: int(c[k]) for k in _PRECEDENCE if c[k]}

    @property
    def from_text(self) -> dict:
        """{column name: values used that were read from text}, columns with any."""
        return {c.name: c.from_text for c in self.columns if c.from_text}

    def skipped_words(self) -> str:
        """"2 summary rows, 1 blank" style text, or "none"."""
        parts = [f"{n} {reason_word(k)}" for k, n in self.counts().items()]
        return ", ".join(parts) if parts else "none"

    @property
    def n_censored(self) -> int:
        """Rows used whose y is below a detection limit (fitted as censored); 0 when none or not asked for."""
        return 0 if self.y_censored is None else int(self.y_censored.sum())

    def table_rows(self) -> list:
        """(label, value) pairs for a cell table: values read from text, values below a limit fitted as censored
        (when any), and rows skipped by reason."""
        out = [("values read from text", sum(c.from_text for c in self.columns))]
        if self.n_censored:
            from .wording import CENSORED_ROW
            out.append((CENSORED_ROW, self.n_censored))
        for k, n in self.counts().items():
            out.append((f"skipped: {reason_word(k)}", n))
        return out

    def into_rows(self, pairs) -> list:
        """Label/value rows (an engine result's ``rows()``) with its "rows skipped" replaced by this reading's
        count, followed by the values read from text, the values below a limit and the rows skipped by reason
        (the engine's own count of values below a limit is then left out: the same number, said once)."""
        out = []
        for k, v in pairs:
            if k == "values below a limit (censored)" and self.n_censored:
                continue
            out.append((k, self.n_skipped if k == "rows skipped" else v))
            if k == "rows skipped":
                out.extend(self.table_rows())
        return out

    def lines(self, where: str = "row", text_file: bool = False) -> list:
        """Sentences for messages and summaries: skipped rows by reason with examples, text read, units, dates.

        ``text_file``: the cells came from a text file, where every number is text; values read from text are
        then mentioned only when some were not plainly the number they hold."""
        from .wording import LIMIT_ACTION, LIMIT_ACTION_CENSORED, reading_lines
        return reading_lines(self, where, LIMIT_ACTION if self.y_censored is None else LIMIT_ACTION_CENSORED,
                             text_file=text_file)


# ----------------------------------------------------------------------------- flattening
def _flat(cells, name: str) -> list:
    """One row or one column of cells as a flat list (trailing blanks dropped)."""
    from . import cells as _cells  # the shape rules live with the cell layer
    kind, data = _cells._parse(cells, False, name)
    return _cells._trim_cells(_cells._one_dim(kind, data, name))


_FAST = frozenset({float, int, type(None), np.float64})
_KIND = {float: 1, int: 1, np.float64: 1, np.int64: 1, np.int32: 1, np.float32: 1, type(None): 0, str: 2,
         bool: 3, np.bool_: 3, _decimal.Decimal: 1, _dt.datetime: 4, _dt.date: 4, _dt.time: 5, _dt.timedelta: 6}


def _kind_of(v) -> int:
    """0 blank, 1 number, 2 text, 3 bool, 4 date, 5 time of day, 6 duration, 7 other (not a number), 8 a list."""
    if isinstance(v, (_dt.date, _dt.time, _dt.timedelta, np.generic)):
        try:
            if v != v:  # NaT
                return 0
        except Exception:
            pass
    if isinstance(v, (bool, np.bool_)):
        return 3
    if isinstance(v, str):
        return 2
    if isinstance(v, _dt.datetime) or isinstance(v, _dt.date):
        return 4
    if isinstance(v, _dt.time):
        return 5
    if isinstance(v, (_dt.timedelta, np.timedelta64)):
        return 6
    if isinstance(v, np.datetime64):
        return 0 if np.isnat(v) else 4
    if isinstance(v, (list, tuple, dict, set)):
        return 8
    if isinstance(v, np.ndarray):
        return 8 if v.ndim else _kind_of(v.item())
    if isinstance(v, numbers.Real) or isinstance(v, _decimal.Decimal):
        return 1
    try:
        if v != v:  # NaT, pd.NA
            return 0
    except Exception:
        return 0
    return 7


def _as_float(v) -> float:
    try:
        f = float(v)
    except (OverflowError, TypeError, ValueError, _decimal.InvalidOperation):
        return _NAN if isinstance(v, _decimal.Decimal) and v.is_nan() else float("inf")
    return f


def _as_float_or_nan(t: str) -> float:
    try:
        return float(t) if t.isascii() else _NAN
    except ValueError:
        return _NAN


def _as_datetime(v):
    if isinstance(v, np.datetime64):
        import pandas as pd
        return pd.Timestamp(v).to_pydatetime()
    if isinstance(v, _dt.datetime):
        try:
            return _dt.datetime(v.year, v.month, v.day, v.hour, v.minute, v.second, v.microsecond)
        except Exception:
            return None
    return _dt.datetime(v.year, v.month, v.day)


def _shown(v) -> str:
    if isinstance(v, (float, np.floating)) and not np.isfinite(v):  # words, never "nan" or "inf" in a sentence
        return "blank" if np.isnan(v) else ("an infinite value" if v > 0 else "a minus infinite value")
    if isinstance(v, str):
        s = " ".join(v.split())
        return repr(s if len(s) <= 30 else s[:29] + "\u2026")
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return repr(int(v))
    if isinstance(v, (_dt.datetime, _dt.date, _dt.time)):
        return v.isoformat(sep=" ") if isinstance(v, _dt.datetime) else v.isoformat()
    s = str(v)
    return s if len(s) <= 30 else s[:29] + "\u2026"


# ----------------------------------------------------------------------------- text
@dataclass
class _Parsed:
    """One distinct text, parsed once per column."""

    kind: int             # USED (a number), LIMIT, ABOVE, TEXT, BLANK, ERROR, SUMMARY, _DATE or _TIME
    num: str = ""         # digits and separators, as written
    sign: float = 1.0
    exp: str = ""
    unit: str = ""        # trailing unit text or leading currency
    percent: bool = False
    value: object = None  # a date (datetime), a time of day (hours), or a date written with slashes (parts)


_DATE, _TIME = 100, 101
_MISSING_WORDS = re.compile(r"^(?:n/?a|na|none|missing|null|nan|-+|\?+|\.)$", re.IGNORECASE)


def _parse_text(t: str) -> _Parsed:
    s = " ".join(t.translate(_SPACES).split())
    if not s:
        return _Parsed(BLANK)
    if s.upper() in CELL_ERRORS or _ERR_RE.match(s):
        return _Parsed(ERROR)
    if _ND_RE.match(s):
        return _Parsed(LIMIT)
    d = _text_date(s)
    if d is not None:
        return d
    m = _NUMBER_RE.match(s)
    if m and not (m.group("s1") and m.group("s2")):
        tail = (m.group("tail") or "").strip()
        if not tail or tail == "%" or _UNIT_RE.match(tail):
            lt = (m.group("lt") or "").strip()
            sign = -1.0 if "-" in ((m.group("s1") or "") + (m.group("s2") or "")) else 1.0
            kind = USED if not lt else (ABOVE if lt[0] in ">≥" or lt.startswith("&g") else LIMIT)
            cur = (m.group("cur") or "").strip()
            unit = tail if tail and tail != "%" else cur
            return _Parsed(kind, m.group("num"), sign, m.group("exp") or "", unit, tail == "%")
    if is_summary_label(s):
        return _Parsed(SUMMARY)
    return _Parsed(TEXT)


def _text_date(s: str):
    """A date, date and time, or time of day written as text; None when the text is not one."""
    try:
        m = _ISO_RE.match(s)
        if m:
            y, mo, d, hh, mi, ss, frac = m.groups()
            return _Parsed(_DATE, value=_dt.datetime(int(y), int(mo), int(d), int(hh or 0), int(mi or 0),
                                                      int(ss or 0), int(((frac or "") + "000000")[:6])))
        m = _DMY_RE.match(s)
        if m:
            a, sep, b, y, hh, mi, ss = m.groups()
            parts = (int(a), int(b), int(y), int(hh or 0), int(mi or 0), int(ss or 0))
            if sep == ".":  # day first with dots (common practice where dots separate dates)
                return _Parsed(_DATE, value=_dt.datetime(parts[2], parts[1], parts[0], *parts[3:]))
            return _Parsed(_DATE, num="/", value=parts)  # settled per column
        m = _TIME_RE.match(s)
        if m:
            hh, mi, ss, frac = m.groups()
            if int(hh) < 24 and int(mi) < 60 and int(ss or 0) < 60:
                return _Parsed(_TIME, value=int(hh) + int(mi) / 60 + (int(ss or 0) + float("0." + (frac or "0"))) / 3600)
    except ValueError:
        return None
    return None


def _separator_vote(num: str) -> str:
    """"." or "," when the digits settle the decimal separator, "?" when they could be either, "" with no separator."""
    core = num.replace(" ", "").replace("'", "").replace("\u2019", "")
    dots, commas = core.count("."), core.count(",")
    if not dots and not commas:
        return ""
    if dots and commas:
        return "." if core.rfind(".") > core.rfind(",") else ","
    c = "." if dots else ","
    if dots + commas > 1:
        return "," if c == "." else "."
    a, b = core.split(c)
    if len(b) != 3 or not a or a.startswith("0") or len(a) > 3 or core != num:
        return c
    return "?"


_DIGITS = re.compile(r"[0-9]+")
_GROUP_SPLIT = {".": re.compile(r"[ '\u2019,]"), ",": re.compile(r"[ '\u2019.]"), "": re.compile(r"[ '\u2019]")}


def _to_value(p: _Parsed, dec: str) -> float:
    """The number a parsed text holds when ``dec`` is the decimal separator ("" when it has none); NaN if invalid."""
    num = p.num
    if dec:
        if num.count(dec) > 1:
            return _NAN
        int_part, _, frac = num.partition(dec)
    else:
        if "." in num or "," in num:
            return _NAN
        int_part, frac = num, ""
    groups = _GROUP_SPLIT[dec].split(int_part)
    if len(groups) > 1 and (not 1 <= len(groups[0]) <= 3 or any(len(g) != 3 for g in groups[1:])):
        return _NAN
    digits = "".join(groups)
    if not _DIGITS.fullmatch(digits + frac):
        return _NAN
    try:
        return p.sign * float(f"{digits or '0'}.{frac or '0'}{p.exp}") / (100.0 if p.percent else 1.0)
    except (ValueError, OverflowError):
        return _NAN


def _decide_decimal(votes: dict, uniq, name: str, decimal, delimiter, settle) -> tuple:
    """(separator, how) for a column's texts; ReadingRefused when they do not settle it.

    ``votes`` maps a distinct text's position in ``uniq`` to its vote ("." "," or "?").
    """
    if decimal in (".", ","):
        return decimal, "given"
    if decimal in ("file.", "file,"):  # settled by the other columns of the same file
        return decimal[-1], "file"
    first = {}
    for j, v in votes.items():
        if v and v not in first:
            first[v] = " ".join(str(uniq[j]).split())
    if "." in first and "," in first:
        raise ReadingRefused(
            f"{name}: some values are written with a decimal point (such as {first['.']!r}) and some with a decimal "
            f"comma (such as {first[',']!r}), so the column cannot be read one way; "
            + (settle or "make them consistent, or type them as numbers") + ".")
    if "." in first or "," in first:
        return ("." if "." in first else ","), "values"
    if "?" in first:
        if delimiter == ";":
            return ",", "delimiter"
        if delimiter == ",":
            return ".", "delimiter"
        raise DecimalLeftOpen(
            f"{name}: values such as {first['?']!r} could have a decimal point or a decimal comma (a thousands "
            "separator), and nothing in the column settles which; "
            + (settle or "type these cells as numbers, or write one with both separators (such as 1,234.0)") + ".")
    return "", ""


def _slash_order(parts: list, name: str) -> str:
    """"dmy" or "mdy" for dates written with slashes, decided by the column's own values."""
    a_big = any(p[0] > 12 for p in parts)
    b_big = any(p[1] > 12 for p in parts)
    if a_big != b_big:
        return "dmy" if a_big else "mdy"
    if a_big:  # both orders fail somewhere: those dates are not read
        return ""
    p = parts[0]
    raise ReadingRefused(f"{name}: dates such as {p[0]}/{p[1]}/{p[2]} could be day/month or month/day and no value in "
                         "the column settles it; write the dates as year-month-day (such as 2024-03-01).")


# ----------------------------------------------------------------------------- read_column
def _fast_numbers(flat: list):
    """All plain numbers (and blanks): a float array in one C-speed pass, else None."""
    try:
        arr = np.frombuffer(_array.array("d", flat), dtype=float).copy()
    except (TypeError, OverflowError, ValueError):
        arr = None
    if arr is not None:  # array('d') accepts bools, which can only hide where a value is 0 or 1
        hits = np.flatnonzero((arr == 1.0) | (arr == 0.0))
        if not any(type(flat[i]) not in _FAST for i in hits.tolist()):
            return arr
        return None
    if set(map(type, flat)) <= _FAST:
        try:
            try:
                return np.fromiter(flat, dtype=float, count=len(flat))
            except TypeError:  # blanks (None): numpy's array() reads them as NaN
                return np.array(flat, dtype=float)
        except (OverflowError, TypeError, ValueError):
            return None
    return None


def _examples_of(reasons, shown) -> tuple:
    out = []
    if not reasons.any():
        return ()
    for k in np.unique(reasons[reasons > 0]).tolist():
        for i in np.flatnonzero(reasons == k)[:_EXAMPLES].tolist():
            out.append((int(k), int(i), shown(i)))
    return tuple(out)


def _plain(name, arr) -> ColumnReading:
    n = arr.shape[0]
    reasons = np.zeros(n, dtype=np.uint8)
    bad = ~np.isfinite(arr)
    if bad.any():
        reasons[np.isnan(arr)] = BLANK
        reasons[np.isinf(arr)] = NOT_FINITE
        shown = {int(i): _shown(float(arr[i])) for i in np.flatnonzero(np.isinf(arr))[:_EXAMPLES]}
        arr[bad] = np.nan
    else:
        shown = {}
    return ColumnReading(name=name, values=arr, reasons=reasons, limits=np.full(n, np.nan),
                         censored=np.zeros(n, dtype=bool),
                         examples=_examples_of(reasons, lambda i: shown.get(i, "blank")))


def read_column(cells, name: str = "values", *, decimal: str | None = None, delimiter: str | None = None,
                forced=None, settle: str = "", header: bool = True) -> ColumnReading:
    """Read one row or one column of cell values by the rules of this module.

    Parameters
    ----------
    cells : scalar, list, list of one-cell rows, numpy array or pandas Series
        As a spreadsheet host or a file reader hands them over.  Trailing
        blank cells are dropped (so a whole column costs its filled part).
    name : str
        The column's name, used in messages and labels.
    decimal : {".", ",", None}
        Force the decimal separator for numbers written as text.
    delimiter : str, optional
        The delimiter of the text file the cells came from; settles a column
        whose texts could be read either way (";" -> decimal comma, "," ->
        decimal point).
    forced : mapping of int to int, optional
        Reason codes a file reader knows for some cells (index -> code), such
        as ``NO_VALUE`` for a formula saved without its value, ``ERROR`` or
        ``SUMMARY`` for a cell whose formula aggregates its own column.
    settle : str
        What to tell the user to type when the decimal separator stays open
        (the command names ``--decimal``).
    header : bool
        Treat a text cell at the top of the range (and a unit-like text under
        it) as the column's header rather than as a value.

    Returns
    -------
    ColumnReading

    Raises
    ------
    ReadingRefused
        When the decimal separator (or the day/month order of dates written
        with slashes) of the column's texts cannot be decided.
    """
    return read_flat(_flat(cells, name), name, decimal=decimal, delimiter=delimiter, forced=forced, settle=settle,
                     header=header)


def read_flat(flat, name: str = "values", *, decimal: str | None = None, delimiter: str | None = None,
              forced=None, settle: str = "", header: bool = True, date_origin=None,
              date_unit: str = "") -> ColumnReading:
    """:func:`read_column` for cells already flattened into one list (or a 1-D numeric array).

    ``date_origin`` and ``date_unit`` (from another reading) make dates count from that origin, in that unit:
    new x values for a fitted date column use the origin of the column the line was fitted to.
    """
    if isinstance(flat, np.ndarray) and flat.dtype.kind in "fiu" and not forced:
        return _plain(name, flat.astype(float).reshape(-1))
    if not forced and date_unit == "":
        arr = _fast_numbers(flat)
        if arr is not None:
            return _plain(name, arr)
        if header and len(flat) > 1 and isinstance(flat[0], str) and not isinstance(flat, np.ndarray):
            got = _header_and_numbers(flat, name)
            if got is not None:
                return got
    if isinstance(flat, np.ndarray):
        flat = flat.tolist()
    return _read_mixed(flat, name, decimal, delimiter, forced or {}, settle, header, date_origin, date_unit)


def _header_and_numbers(flat, name):
    """A header text on top of plain numbers (the common whole-column case): the same reading as the full rules,
    with the numbers in one C-speed pass; None when the cells are anything else.

    The top text is read by the full rules beside one number: it is the header exactly when that reading says so
    (a text that is a number, a limit, a date or a missing-value word is not), and numbers below a header are
    read as in a column of numbers alone.
    """
    rest = _fast_numbers(flat[1:])
    if rest is None or not np.isfinite(rest).any():
        return None
    top = _read_mixed([flat[0], 1.0], name, None, None, {}, "", True)
    if top.reasons[0] != HEADER:
        return None
    body = _plain(name, rest)
    n = len(flat)
    reasons = np.concatenate([np.array([HEADER], dtype=np.uint8), body.reasons])
    values = np.concatenate([[np.nan], body.values])
    ex = _examples_of(reasons, lambda i: "blank" if flat[i] is None else _shown(flat[i]))
    return ColumnReading(name=name, values=values, reasons=reasons, limits=np.full(n, np.nan),
                         censored=np.zeros(n, dtype=bool), examples=ex)


def _read_mixed(flat, name, decimal, delimiter, forced, settle, header, date_origin=None, date_unit="") -> ColumnReading:
    n = len(flat)
    kinds = np.fromiter(map(_KIND.get, map(type, flat), itertools.repeat(-1)), dtype=np.int8, count=n)
    for i in np.flatnonzero(kinds < 0).tolist():
        kinds[i] = _kind_of(flat[i])
    if (kinds == 8).any():
        from .cells import CellError
        raise CellError("a cell holds a list or array; give a range of cells (rows x columns).")
    values = np.full(n, np.nan)
    reasons = np.full(n, BLANK, dtype=np.uint8)
    limits = np.full(n, np.nan)
    censored = np.zeros(n, dtype=bool)

    idx = np.flatnonzero(kinds == 1)  # numbers
    if idx.size:
        nums = np.fromiter(map(_as_float, (flat[i] for i in idx.tolist())), dtype=float, count=idx.size)
        values[idx] = nums
        reasons[idx] = np.where(np.isfinite(nums), USED, np.where(np.isnan(nums), BLANK, NOT_FINITE))
    reasons[kinds == 3] = BOOL
    reasons[kinds == 7] = TEXT

    text = _read_texts(flat, kinds, name, decimal, delimiter, settle, header, values, reasons, limits, censored)
    didx = np.flatnonzero((kinds == 4) | (kinds == 5) | (kinds == 6))
    if didx.size or text["dates"] or date_unit:
        date_origin, date_unit = _read_dates(flat, kinds, didx, text["dates"], values, reasons, date_origin, date_unit)
    for i, code in forced.items():
        if 0 <= i < n:
            reasons[i] = code
    values[reasons != USED] = np.nan
    censored &= reasons == LIMIT
    from_text = int(((reasons == USED) & (kinds == 2)).sum())
    ex = _examples_of(reasons, lambda i: "blank" if flat[i] is None else _shown(flat[i]))
    return ColumnReading(name=name, values=values, reasons=reasons, from_text=from_text,
                         unit=text["unit"], decimal=text["decimal"] if from_text else "",
                         decimal_how=text["how"] if from_text else "", percent=text["percent"],
                         date_origin=date_origin, date_unit=date_unit, limits=limits, censored=censored,
                         examples=ex, text_examples=tuple(e for e in text["examples"] if reasons[e[0]] == USED))


_GROUPED = {".": re.compile(r"\d{1,3}(?:,\d{3})+(?:\.\d*)?|\d*\.\d+"),
            ",": re.compile(r"\d{1,3}(?:\.\d{3})+(?:,\d*)?|\d*,\d+")}


def _simple_texts(u: np.ndarray):
    """Vectorised first pass over distinct texts: the common shapes of numbers written as text.

    Returns (shape, sign, percent, body, vote): shape 0 = not simple (parsed one by one later), 1 = digits
    with at most one separator, 2 = digits with several separators; body is the text without sign, percent
    and spaces; vote is "", ".", "," or "?" (see :func:`_separator_vote`) for shapes 1 and 2.
    """
    S = np.strings
    s = S.strip(u)
    neg = S.startswith(s, "-")
    signed = neg | S.startswith(s, "+")
    body = np.where(signed, S.strip(S.slice(s, 1, None)), s)
    pct = S.endswith(body, "%")
    body = np.where(pct, S.strip(S.slice(body, 0, -1)), body)
    nd, nc = S.count(body, "."), S.count(body, ",")
    ok = S.isdecimal(S.replace(S.replace(body, ".", ""), ",", ""))
    shape = np.where(ok, np.where(nd + nc <= 1, 1, 2), 0)
    L = S.str_len(body)
    at = np.maximum(S.find(body, "."), S.find(body, ","))
    before, after = at, L - at - 1
    amb = (shape == 1) & (nd + nc == 1) & (after == 3) & (before >= 1) & (before <= 3) & ~S.startswith(body, "0")
    vote = np.where((shape == 1) & (nd + nc == 1), np.where(amb, "?", np.where(nd == 1, ".", ",")), "")
    multi = np.flatnonzero(shape == 2)
    if multi.size:  # several separators: the last one is the decimal one, or all are thousands separators
        b = body[multi]
        both = (nd[multi] > 0) & (nc[multi] > 0)
        last_dot = S.rfind(b, ".") > S.rfind(b, ",")
        v = np.where(both, np.where(last_dot, ".", ","), np.where(nd[multi] > 0, ",", "."))
        ok = np.fromiter(map(bool, map(_GROUPED["."].fullmatch, b.tolist())), dtype=bool, count=b.size)
        okc = np.fromiter(map(bool, map(_GROUPED[","].fullmatch, b.tolist())), dtype=bool, count=b.size)
        valid = np.where(v == ".", ok, okc)
        shape[multi[~valid]] = 0  # not a number either way (a date such as 01.03.2024): parsed one by one
        vote[multi[valid]] = v[valid]
    return shape, np.where(neg, -1.0, 1.0), pct, body, vote


def _simple_values(shape, sign, pct, body, dec) -> np.ndarray:
    """Values of the simple shapes under decimal separator ``dec`` (NaN where the text is not valid so)."""
    S = np.strings
    out = np.full(shape.shape[0], np.nan)
    one = np.flatnonzero(shape == 1)
    if one.size:
        b = body[one]
        thou = "," if dec == "." else "."
        has_t = S.count(b, thou) > 0
        L = S.str_len(b)
        at = S.find(b, thou)
        good_t = (at >= 1) & (at <= 3) & (L - at - 1 == 3) & ~S.startswith(b, "0")
        if not dec:
            has_t = (S.count(b, ".") + S.count(b, ",")) > 0
            good_t = np.zeros(one.size, dtype=bool)
        txt = np.where(has_t, S.replace(b, thou if dec else ".", ""), S.replace(b, dec or ".", "."))
        valid = ~has_t | good_t
        txt = np.where(valid & (S.str_len(txt) > 0) & (txt != "."), txt, "nan")
        txt = np.where(S.startswith(txt, "."), S.add("0", txt), txt)
        try:
            out[one] = txt.astype(float)
        except ValueError:  # digits of other scripts: one by one
            out[one] = [_as_float_or_nan(t) for t in txt.tolist()]
    two = np.flatnonzero(shape == 2)
    if two.size and dec:
        b = body[two]
        ok = np.fromiter(map(bool, map(_GROUPED[dec].fullmatch, b.tolist())), dtype=bool, count=b.size)
        txt = S.replace(S.replace(b, "," if dec == "." else ".", ""), dec, ".")
        txt = np.where(ok, np.where(S.endswith(txt, "."), S.add(txt, "0"), txt), "nan")
        out[two] = txt.astype(float)
    return out * sign / np.where(pct, 100.0, 1.0)


def _read_texts(flat, kinds, name, decimal, delimiter, settle, header, values, reasons, limits, censored) -> dict:
    """Read the text cells (in place); returns the unit, decimal decision, percent count, dates and examples.

    Distinct texts are read once: the common shapes of numbers by vectorised string functions, the rest
    (units, currency, limits, dates, words) one by one.
    """
    import pandas as pd

    out = {"unit": "", "decimal": "", "how": "", "percent": 0, "dates": {}, "examples": []}
    tidx = np.flatnonzero(kinds == 2)
    if not tidx.size:
        return out
    texts = np.fromiter((flat[i] for i in tidx.tolist()), dtype=object, count=tidx.size)
    codes, uniq = pd.factorize(texts)
    counts = np.bincount(codes, minlength=len(uniq))
    shape, sign, pct, body, vote = _simple_texts(uniq.astype(str))
    slow = {int(j): _parse_text(uniq[j]) for j in np.flatnonzero(shape == 0).tolist()}
    votes = {t: _separator_vote(p.num) for t, p in slow.items() if p.num and p.kind in (USED, LIMIT, ABOVE)}
    for v in (".", ",", "?"):  # the first distinct text of each kind is all the decision needs
        hit = np.flatnonzero(vote == v)
        if hit.size:
            votes.setdefault(int(hit[0]), v)
    dec, how = _decide_decimal(votes, uniq, name, decimal, delimiter, settle)
    m = len(uniq)
    code_u = np.full(m, TEXT, dtype=np.int16)
    val_u = np.full(m, np.nan)
    lim_u = np.full(m, np.nan)
    simple = shape > 0
    if simple.any():
        v = _simple_values(shape, sign, pct, body, dec)
        code_u[simple] = np.where(np.isnan(v[simple]), TEXT, USED)
        val_u[simple] = v[simple]
    unit_u = {}
    order = ""
    slash = [p.value for p in slow.values() if p.kind == _DATE and p.num == "/"]
    if slash:
        order = _slash_order(slash, name)
    dates_u = {}
    for j, p in slow.items():
        if p.kind in (USED, LIMIT, ABOVE) and p.num:
            v = _to_value(p, dec if votes.get(j) else "")
            if math.isnan(v):
                if p.kind != USED:  # "<0,5" in a column of decimal points: still below a limit, its value unread
                    code_u[j] = p.kind
                continue
            if p.kind == USED:
                code_u[j], val_u[j] = USED, v
                if p.unit:
                    unit_u[j] = p.unit
            else:
                code_u[j], lim_u[j] = p.kind, v
        elif p.kind == _DATE:
            d = p.value
            if p.num == "/":
                a, b, y, hh, mi, ss = d
                if order == "mdy":
                    a, b = b, a
                try:
                    d = _dt.datetime(y, b, a, hh, mi, ss) if order else None
                except ValueError:
                    d = None
            if d is not None:
                code_u[j], dates_u[j] = _DATE, d
        elif p.kind == _TIME:
            code_u[j], dates_u[j] = _TIME, ("time", p.value)
        else:
            code_u[j] = p.kind
    unit = ""
    if unit_u:
        tally = Counter()
        for j, u_ in unit_u.items():
            tally[u_] += int(counts[j])
        unit = tally.most_common(1)[0][0]
        for j, u_ in unit_u.items():
            if u_.casefold() != unit.casefold():
                code_u[j] = OTHER_UNIT
    code = code_u[codes]
    if header:  # a header cell on top of the range, and a units cell under it
        first = int(tidx[0])
        t0 = str(texts[0]).strip()
        if not (kinds[:first] != 0).any() and code[0] == TEXT and not _MISSING_WORDS.match(t0) \
                and ((kinds[first + 1:] == 1).any() or (code[1:] == USED).any()):
            code[0] = HEADER
            if len(tidx) > 1 and tidx[1] == first + 1 and code[1] == TEXT and looks_like_unit(texts[1]):
                code[1] = HEADER
    is_num = code == USED
    values[tidx[is_num]] = val_u[codes[is_num]]
    is_lim = code == LIMIT
    limits[tidx[is_lim]] = lim_u[codes[is_lim]]
    censored[tidx[is_lim]] = True
    plain = code < 100
    reasons[tidx[plain]] = code[plain].astype(np.uint8)
    dates = {}
    for j in np.flatnonzero(code >= 100).tolist():
        dates[int(tidx[j])] = dates_u[int(codes[j])]
    pct_used = pct & (code_u == USED)
    # examples worth showing: texts that are not plainly the number they hold (separators, units, signs, percent)
    # ("15.161" read with a decimal point is plainly 15.161; with a decimal comma it is 15161, and "21,000" read
    # with a decimal point is 21000: both worth showing)
    u_str = uniq.astype(str)
    plain_q = (vote == "?") & (dec == ".") & (np.strings.find(u_str, ",") < 0)
    fancy_u = (code_u == USED) & (~simple | pct | (vote == ",") | ((vote == "?") & ~plain_q) | (shape == 2)
                                  | (np.strings.str_len(body) != np.strings.str_len(u_str)))
    shown_ex = []
    for j in np.flatnonzero(fancy_u[codes] & is_num)[:_EXAMPLES].tolist():
        shown_ex.append((int(tidx[j]), _shown(texts[j]), float(val_u[codes[j]])))
    out.update(unit=unit, decimal=dec, how=how, dates=dates, examples=shown_ex,
               percent=int(counts[pct_used].sum()))
    return out


def _read_dates(flat, kinds, didx, date_texts, values, reasons, origin=None, unit=""):
    """Dates become numbers when they outnumber the numbers; otherwise they are dates among numbers.

    With ``unit`` given (and ``origin`` for dates), the dates are read on that scale whatever their number.
    """
    n_num = int((reasons == USED).sum())
    stamps, times, durs = {}, {}, {}
    for i in didx.tolist():
        v = flat[i]
        k = kinds[i]
        if k == 4:
            d = _as_datetime(v)
            if d is None:
                reasons[i] = TEXT
            else:
                stamps[i] = d
        elif k == 5:
            times[i] = v.hour + v.minute / 60 + (v.second + v.microsecond / 1e6) / 3600
        else:
            td = v if isinstance(v, _dt.timedelta) else _dt.timedelta(microseconds=int(v / np.timedelta64(1, "us")))
            durs[i] = td.total_seconds() / 3600.0
    for i, v in date_texts.items():
        if isinstance(v, tuple):
            times[i] = v[1]
        else:
            stamps[i] = v
    groups = {"dates": stamps, "times": times, "durations": durs}
    main_kind, main = max(groups.items(), key=lambda kv: len(kv[1]))
    if unit:
        main_kind = {"hours since midnight": "times", "hours (duration)": "durations"}.get(unit, "dates")
        main = groups[main_kind]
    if len(main) <= n_num and not unit:
        for g in groups.values():
            for i in g:
                reasons[i] = DATE_AMONG_NUMBERS
        return None, ""
    reasons[reasons == USED] = NUMBER_AMONG_DATES  # a date column: its numbers are not used
    for kind, g in groups.items():
        if kind != main_kind:
            for i in g:
                reasons[i] = NUMBER_AMONG_DATES
    idx = np.fromiter(main.keys(), dtype=np.int64, count=len(main))
    reasons[idx] = USED
    if main_kind != "dates":
        values[idx] = np.fromiter(main.values(), dtype=float, count=len(main))
        return None, ("hours since midnight" if main_kind == "times" else "hours (duration)")
    if not main:
        return origin, unit
    if unit:
        secs = np.fromiter(((d - origin).total_seconds() for d in main.values()), dtype=float, count=len(main))
        values[idx] = secs / (3600.0 if unit == "hours" else 86400.0)
        return origin, unit
    origin = min(main.values())
    secs = np.fromiter(((d - origin).total_seconds() for d in main.values()), dtype=float, count=len(main))
    if secs.max() < 2 * 86400 and any(d.hour or d.minute or d.second for d in main.values()):
        values[idx] = secs / 3600.0
        return origin, "hours"
    values[idx] = secs / 86400.0
    return origin, "days"


# ----------------------------------------------------------------------------- combine
def _aggregate_rows(cols, used) -> list:
    """Trailing used rows whose every value equals the sum (or exactly the mean) of the used rows above."""
    with np.errstate(all="ignore"):  # huge values overflow the sums: then no row matches
        return _aggregate_rows_checked(cols, used)


def _aggregate_rows_checked(cols, used) -> list:
    found = []
    idx = np.flatnonzero(used)
    while len(found) < 3 and idx.size >= 5:
        last, above = idx[-1], idx[:-1]
        vals = [float(c[last]) for c in cols]
        sums = [float(np.sum(c[above])) for c in cols]
        means = [float(np.mean(c[above])) for c in cols]
        if not all(map(math.isfinite, sums + means)):
            break
        if all(abs(v - s) <= 5e-5 * abs(s) for v, s in zip(vals, sums)) and any(s != 0 for s in sums):
            found.append((int(last), "sum"))
        elif all(abs(v - m) <= 1e-9 * abs(m) for v, m in zip(vals, means)) \
                and all(float(np.ptp(c[above])) > 0 for c in cols):
            found.append((int(last), "mean"))
        else:
            break
        idx = above
    return found


def combine(y: ColumnReading, xs=(), *, row_reasons=None, row_numbers=None, row_shown=None,
            find_totals: bool = True) -> RowsReading:
    """Combine the y reading and the x readings into rows used and rows skipped by reason.

    Parameters
    ----------
    y : ColumnReading
    xs : sequence of ColumnReading
        One per x column (empty for a y-only analysis).
    row_reasons : array of uint8, optional
        Row-level reasons a file gives (``SUMMARY`` for a table's totals row or
        a row labelled "Total" in another column, ``FILTERED``, ``HIDDEN``); 0 elsewhere.
    row_numbers : array of int, optional
        Row numbers shown to users (default 1, 2, ...: the position in the range).
    row_shown : mapping of int to str, optional
        What to show as the example of a row-level reason (a row's label).
    find_totals : bool
        Also skip trailing rows whose values all equal the sum (or exactly the
        mean) of the rows above, as a "summary row".

    Returns
    -------
    RowsReading
        Columns shorter than the longest are padded with blank cells.  A row's
        reason is the first that applies in the order: summary row, hidden by a
        filter, hidden row, header, formula without a saved value, below a
        detection limit, above a reporting limit, error value, not a number,
        another unit, date among numbers, number among dates, true/false value,
        not a finite number, blank.
    """
    cols = [y] + list(xs)
    n = max(len(c) for c in cols)
    if row_reasons is not None:
        n = max(n, len(row_reasons))
    vals = [_pad(c.values, n, np.nan) for c in cols]
    rs = [_pad(c.reasons, n, BLANK).astype(np.uint8) for c in cols]
    rr = np.zeros(n, dtype=np.uint8) if row_reasons is None else _pad(np.asarray(row_reasons, np.uint8), n, 0)
    rows = np.arange(1, n + 1) if row_numbers is None else _pad(np.asarray(row_numbers, dtype=np.int64), n, 0)
    shown = dict(row_shown or {})
    reasons = np.zeros(n, dtype=np.uint8)
    for code in _PRECEDENCE:
        hit = rr == code
        for r in rs:
            hit |= r == code
        reasons[(reasons == USED) & hit] = code
    used = reasons == USED
    notes = []
    if find_totals and used.sum() >= 5:
        for i, what in _aggregate_rows(vals, used):
            reasons[i] = SUMMARY
            rr[i] = SUMMARY
            notes.append((int(rows[i]), what))
            shown[i] = f"equals the {what} of the rows above"
        used = reasons == USED
    Y = np.where(used, vals[0], np.nan)
    X = np.column_stack([np.where(used, v, np.nan) for v in vals[1:]]) if len(vals) > 1 else np.zeros((n, 0))
    by_column, examples = {}, []
    for code in np.unique(reasons[reasons > 0]).tolist():
        idx = np.flatnonzero(reasons == code)
        left = idx.size
        for c, r in zip(cols, rs):
            k = int((r[idx] == code).sum())
            if k:
                by_column[(code, c.name)] = k
        own = np.zeros(idx.size, dtype=bool)
        for r in rs:
            own |= r[idx] == code
        if (~own).any():
            by_column[(code, "")] = int((~own).sum())
        for i in idx[:_EXAMPLES].tolist():
            examples.append((int(code), int(rows[i]), *_example_cell(i, code, cols, rs, vals, shown)))
        del left
    cens = (reasons == LIMIT) & _pad(y.censored, n, False)
    for c in xs:
        cens &= _pad(c.reasons, n, BLANK) == USED
    y_cens = None
    if y.for_censored_fit:
        y_cens = used & _pad(y.censored, n, False) & (_pad(y.reasons, n, BLANK) == USED)
    return RowsReading(y=Y, X=X, used=used, reasons=reasons, row_numbers=rows, columns=tuple(cols),
                       by_column=by_column, examples=tuple(examples), censored=cens, summary_note=tuple(notes),
                       y_censored=y_cens)


# ----------------------------------------------------------------------------- values below a limit, kept
#: Marks in a qualifier column: the value beside is an upper limit / measured / a lower limit.
_LESS_MARKS = frozenset({"<", "<=", "≤", "&lt;", "&lt;="})
_PLAIN_MARKS = frozenset({"", "="})
_MORE_MARKS = frozenset({">", ">=", "≥", "&gt;", "&gt;="})


def censor_column(y: ColumnReading, *, limits=None, qualifiers=None, qualifier_name: str = "qualifier"
                  ) -> ColumnReading:
    """y read for a censored fit: values below a detection limit are kept as censored values at their limit.

    Parameters
    ----------
    y : ColumnReading
        The y column as :func:`read_column` or :func:`read_flat` read it.
    limits : array of float, optional
        One limit per cell (NaN where none), from a limit column: the limit of a value written without one
        (``ND``, ``not detected``). A limit written in the cell itself (``<0.5``) is kept.
    qualifiers : sequence, optional
        One mark per cell from a qualifier column beside a plain value column: ``<`` (or ``<=``, ``≤``) makes the
        value beside it a limit; blank or ``=`` leaves it measured; ``>`` is above a reporting limit (skipped);
        any other mark skips the row as "not a number", since its meaning is not known (shown as an example).
    qualifier_name : str
        The qualifier column's name, for the examples.

    Returns
    -------
    ColumnReading
        Cells below a limit whose limit is known become used cells with ``values`` = the limit and
        ``censored`` True; cells below a limit without a known limit stay skipped ("below a detection
        limit"). :func:`combine` then gives a :class:`RowsReading` whose ``y_censored`` marks the censored
        rows used. Censoring applies to y only: x values below a limit stay skipped.
    """
    n = len(y)
    values = y.values.copy()
    reasons = y.reasons.copy()
    lim = y.limits.astype(float).copy()
    cens = np.zeros(n, dtype=bool)
    extra = []
    if limits is not None:
        lv = _pad(np.asarray(limits, dtype=float).reshape(-1), n, np.nan)
        fill = (reasons == LIMIT) & np.isnan(lim)
        lim[fill] = lv[fill]
    if qualifiers is not None:
        q = list(qualifiers)[:n] + [None] * max(0, n - len(qualifiers))
        for i, mark in enumerate(q):
            m = "" if mark is None or (isinstance(mark, float) and mark != mark) else " ".join(str(mark).split())
            if reasons[i] != USED or m in _PLAIN_MARKS:
                continue
            if m in _LESS_MARKS:
                cens[i] = True
                lim[i] = values[i]
            else:
                reasons[i] = ABOVE if m in _MORE_MARKS else TEXT
                values[i] = np.nan
                extra.append((int(reasons[i]), i, f"{qualifier_name} {_shown(m)}"))
    take = (reasons == LIMIT) & np.isfinite(lim)
    values[take] = lim[take]
    reasons[take] = USED
    cens |= take
    lim[~cens] = np.nan
    ex = tuple(e for e in y.examples if reasons[e[1]] != USED) + tuple(extra)
    import dataclasses
    return dataclasses.replace(y, values=values, reasons=reasons, limits=lim, censored=cens, examples=ex,
                               for_censored_fit=True)


def _example_cell(i, code, cols, rs, vals, shown):
    """(column name, shown value) for row i's reason."""
    if i in shown:
        return "", shown[i]
    for c, r in zip(cols, rs):
        if i < len(c) and r[i] == code:
            for e in c.examples:
                if e[0] == code and e[1] == i:
                    return c.name, e[2]
            return c.name, ""
    v = vals[0][i]
    return "", ("" if np.isnan(v) else _shown(float(v)))


def _pad(a, n, fill):
    a = np.asarray(a)
    if a.shape[0] >= n:
        return a[:n]
    return np.concatenate([a, np.full(n - a.shape[0], fill, dtype=a.dtype)])
