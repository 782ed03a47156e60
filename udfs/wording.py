"""Words shown to spreadsheet users, kept in one place so every table says the same thing."""

#: Prediction columns: engine name -> header shown in cells and reports ({pct} is the level, e.g. 95%).
PREDICTION_HEADERS = {
    "median": "median (typical y)",
    "mean": "mean (average y, smearing)",
    "low": "low: one new y, {pct}",
    "high": "high: one new y, {pct}",
    "line_low": "low: median, {pct}",
    "line_high": "high: median, {pct}",
    "outside_range": "outside x range",
    "note": "note",
}

PREDICTION_HELP = ("median = the line taken back to original units (about half of new values fall below it); "
                   "mean = the expected average in original units (Duan's smearing estimate); "
                   "low/high: one new y = the interval for a single new measurement; "
                   "low/high: median = the interval for the median itself.")

#: Scan columns: engine name -> header.
SCAN_HEADERS = {
    "rank": "rank", "y_power": "y power", "x_power": "x power", "y_rung": "y rung", "x_rung": "x rung",
    "loglik": "log-likelihood (y units)", "curvature_p": "curvature p", "pattern_p": "pattern p",
    "spread_p": "spread p", "normality_p": "normality p", "r2": "R\u00b2 re-expressed",
    "r2_original": "R\u00b2 original units", "verdict": "verdict", "n": "rows used",
}

SCAN_HELP = ("Ranked on the log-likelihood in the units of y (comparable across y powers), with pairs whose "
             "residuals curve or drift pushed down, then pairs with no likelihood to rank them by (the verdict "
             "says why), then pairs that cannot be fitted; R\u00b2 is shown but never used to rank. "
             "\"No clear sign\" means the check found nothing at its level, not that the line is right. "
             "R\u00b2 in original units compares the back-transformed line with y: it falls below 0 when that "
             "line misses y badly (often near the end of a reciprocal scale, where small steps become huge), "
             "and is blank when it cannot be computed.")


def prediction_headers(level: float) -> dict:
    pct = f"{level * 100:g}%"
    return {k: v.format(pct=pct) for k, v in PREDICTION_HEADERS.items()}

#: Columns of UNBEND_GROUPS: engine name -> header ({pct} is the level, e.g. 95%).
GROUP_HEADERS = {
    "group": "group", "n": "rows used", "skipped": "rows skipped", "y_power": "y power", "x_power": "x power",
    "intercept": "intercept", "slope": "slope", "slope_low": "slope low {pct}", "slope_high": "slope high {pct}",
    "resid_sd": "residual SD", "r2": "R\u00b2 re-expressed", "curvature_p": "curvature p",
    "pattern_p": "pattern p", "spread_p": "spread p", "normality_p": "normality p",
    "own_y_power": "y power estimate", "own_y_low": "y power low {pct}", "own_y_high": "y power high {pct}",
    "own_y_differs": "wants another y power", "own_x_power": "x power estimate", "own_x_low": "x power low {pct}",
    "own_x_high": "x power high {pct}", "own_x_differs": "wants another x power",
    "equal_slopes_f": "equal slopes F", "equal_slopes_p": "equal slopes p", "verdict": "verdict", "note": "note",
}

#: The first row of UNBEND_GROUPS, for every group together.
ALL_GROUPS = "all groups"


def group_headers(level: float) -> dict:
    pct = f"{level * 100:g}%"
    return {k: v.format(pct=pct) for k, v in GROUP_HEADERS.items()}


#: Columns of x read back from measured y: engine name -> header ({pct} is the level, e.g. 95%).
INVERSE_HEADERS = {
    "y": "measured y",
    "y_mean": "measured y (mean of the readings on the re-expressed scale, taken back)",
    "readings": "readings used",
    "x": "x (estimate)",
    "low": "low: x, {pct}",
    "high": "high: x, {pct}",
    "outside_range": "outside the standards' x range",
    "note": "note",
}


def inverse_headers(level: float) -> dict:
    pct = f"{level * 100:g}%"
    return {k: v.format(pct=pct) for k, v in INVERSE_HEADERS.items()}


# ----------------------------------------------------------------------------- reading data (issue 9)
#: Why a value or a row is not used: reason key (unbend.udfs.intake.REASON_KEYS) -> words users read.
REASONS = {
    "used": "used",
    "blank": "blank",
    "error value": "error value",
    "not a number": "text that is not a number",
    "true/false value": "true/false value",
    "below a detection limit": "below a detection limit",
    "above a reporting limit": "above a reporting limit",
    "summary row": "summary row",
    "hidden by a filter": "hidden by a filter",
    "hidden row": "hidden row",
    "formula without a saved value": "formula without a saved value",
    "not a finite number": "not a finite number",
    "date among numbers": "a date among numbers",
    "number among dates": "a number among dates",
    "another unit": "another unit than the column's",
    "header": "header or units cell",
}

#: What a calculation that does not fit censored values does with values below a detection limit.
LIMIT_ACTION = ("this calculation leaves them out (it does not replace them by zero, by the limit or by half of it); "
                "the line itself (UNBEND_FIT, UNBEND_PREDICT and the other functions that fit it, and unbend "
                "report) uses them as values somewhere below their limit")

#: What a censored fit does with the values below a limit it still cannot use.
LIMIT_ACTION_CENSORED = ("they are left out (not replaced by zero, by the limit or by half of it): a value below a "
                         "limit is fitted as censored only when it is y and its limit is known (written in the cell "
                         "as <0.5, or, in unbend report, by --limit-column); values below a limit in x are not "
                         "used, since censoring applies to y only")

#: PREDICTION_HELP for a censored fit: its mean is the normal-theory mean, and a median under the lowest limit
#: is flagged.
CENSORED_PREDICTION_HELP = PREDICTION_HELP.replace(
    "(Duan's smearing estimate)", "(the normal-theory mean of the censored fit: smearing needs residuals that "
    "values below a limit do not have)") + (" A median below the lowest limit is extrapolation below the limits "
                                            "(flagged in the last column).")

#: The mean column's header for a censored fit (no smearing: censored rows have no residuals).
CENSORED_MEAN_HEADER = "mean (average y, normal theory)"

#: The table row (and column) that counts values fitted as censored.
CENSORED_ROW = "values below a limit, fitted as censored"

#: What to do about a formula saved without its value.
NO_VALUE_ACTION = ("the file was written by a program that does not calculate; open it in a spreadsheet program "
                   "and save it, so the values are stored with the formulas")

DECIMAL_NAMES = {".": "decimal point", ",": "decimal comma"}
DECIMAL_HOW = {"values": "decided from the column's own values", "delimiter": "decided from the file's delimiter",
               "given": "as given", "file": "decided from the other columns of the file"}


def _count(n: int, one: str, many: str | None = None) -> str:
    return f"{n} {one if n == 1 else (many or one + 's')}"


def censored_sentence(rows, where: str = "row") -> str:
    """How many y values below a limit are fitted as censored, with a few examples and their limits."""
    import numpy as np
    idx = np.flatnonzero(rows.y_censored)
    ex = ", ".join(f"{where} {int(rows.row_numbers[i])} below {rows.y[i]:.4g}" for i in idx[:3])
    more = ", ..." if idx.size > 3 else ""
    return (f"{_count(idx.size, 'value')} of y below a detection limit ({ex}{more}) "
            f"{'is' if idx.size == 1 else 'are'} fitted as censored: each counts as lying somewhere below its "
            "limit (maximum likelihood), not as the limit, half of it or zero.")


def example_place(where: str, r, col: str = "", value: str = "") -> str:
    """One skipped value as users read it: "position 1, x: inf", "row 7, flow: 'n/a'", "row 3: blank"."""
    return f"{where} {r}" + (f", {col}" if col else "") + (f": {value}" if value else "")


def reading_lines(rows, where: str = "row", limit_action: str = LIMIT_ACTION, text_file: bool = False) -> list:
    """Sentences about how the cells were read: rows skipped by reason with examples, text read, units, dates.

    ``rows`` is an :class:`unbend.udfs.intake.RowsReading`; ``where`` names what row numbers count
    ("row" for sheet rows, "position" for places in a cell range). ``text_file``: the cells came from a text
    file, where every number is text, so a column's values read from text are said only when some were not
    plainly the number they hold (thousands or decimal separators to decide, units, signs, percent).
    """
    from .intake import LIMIT, NO_VALUE, reason_word

    out = []
    counts = rows.counts()
    if counts:
        parts = []
        for code, k in counts.items():
            ex = [e for e in rows.examples if e[0] == code]
            shown = "; ".join(example_place(where, r, col, v) for _, r, col, v in ex)
            more = "; ..." if k > len(ex) else ""
            parts.append(f"{reason_word(code)}: {k}" + (f" ({shown}{more})" if shown else ""))
        out.append(f"Skipped {_count(rows.n_skipped, 'row')} of {rows.used.size}: " + "; ".join(parts) + ".")
    if getattr(rows, "n_censored", 0):
        out.append(censored_sentence(rows, where))
    if counts.get(LIMIT):
        out.append(f"{_count(counts[LIMIT], 'row')} below a detection limit: {limit_action}.")
    if counts.get(NO_VALUE):
        out.append(f"{_count(counts[NO_VALUE], 'row')} with a formula saved without its value: {NO_VALUE_ACTION}.")
    for c in rows.columns:
        if c.from_text and (c.text_examples or not text_file):  # in a text file, only numbers written unplainly
            ex = "; ".join(f"{s} as {v:.10g}" for _, s, v in c.text_examples)
            plain = c.decimal == "." and c.decimal_how == "values"  # nothing to say about plain decimal points
            dec = (f"; {DECIMAL_NAMES[c.decimal]}, {DECIMAL_HOW.get(c.decimal_how, '')}" if c.decimal and not plain
                   else "")
            out.append(f"{c.name}: {_count(c.from_text, 'value')} read from text"
                       + (f" (such as {ex})" if ex else "") + dec + ".")
        if c.percent:
            out.append(f"{c.name}: {_count(c.percent, 'value')} written with a percent sign, read as fractions "
                       "(45% as 0.45).")
        if c.unit:
            out.append(f"{c.name}: unit {c.unit}, as written beside the values.")
        if c.date_unit:
            out.append(f"{c.name}: dates and times read as {c.label[len(c.name) + 2:-1]}.")
    return out
