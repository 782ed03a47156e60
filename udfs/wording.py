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
             "residuals curve or drift pushed down; R\u00b2 is shown but never used to rank. R\u00b2 in original "
             "units compares the back-transformed line with y: it can fall below 0 when that line misses badly, "
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
