"""Values below a detection limit read as censored values (issue 12): the reading rules, the cell functions
and `unbend report` on files written as spreadsheet programs and their exports write them.

Data are invented here (seeded; a made-up residue-against-dose survey, not measurements), proving properties
with a known truth: each number the fit reports equals an independent maximum-likelihood fit of the censored
normal line written in this file and maximised with scipy.optimize, the counts equal the cells written, and
the sentences repeat the fit's own numbers.
"""
from __future__ import annotations

import math
import re

import numpy as np
import openpyxl
import pytest
from scipy import optimize, stats

import unbend
from unbend.udfs import cli, intake
from unbend.udfs import functions as U

from cli_helpers import run


# ----------------------------------------------------------------------------- an independent reference
def ml_line(z, x, cens):
    """Censored normal line z = a + b x + e by maximum likelihood, written here from the definition
    (Tobin 1958): measured rows contribute the normal log-density, censored rows log Phi((z_L - mu) / s).

    source: scipy.stats.norm (logpdf, logcdf) and scipy.optimize.minimize (BFGS, then Nelder-Mead polish).
    """
    z, x, cens = map(np.asarray, (z, x, cens))

    def nll(th):
        a, b, ls = th
        mu = a + b * x
        s = math.exp(ls)
        return -(stats.norm.logpdf(z[~cens], mu[~cens], s).sum() + stats.norm.logcdf((z[cens] - mu[cens]) / s).sum())

    A = np.column_stack([np.ones(x.size), x])
    a0, b0 = np.linalg.lstsq(A, z, rcond=None)[0]
    th = optimize.minimize(nll, [a0, b0, math.log(np.std(z))], method="BFGS", options={"gtol": 1e-10}).x
    th = optimize.minimize(nll, th, method="Nelder-Mead", options={"xatol": 1e-12, "fatol": 1e-14,
                                                                   "maxiter": 20000}).x
    return th[0], th[1], math.exp(th[2])


def survey(n=40, limit=1.5, seed=12):
    """Invented: residue against dose, log-linear with log-normal scatter; values under `limit` reported as below it."""
    rng = np.random.default_rng(seed)
    x = np.round(rng.uniform(1, 120, n), 1)
    y = np.round(np.exp(-1.0 + 0.6 * np.log(x) + rng.normal(0, 0.35, n)), 3)
    return x, y, y < limit


def flat(text):
    return " ".join(text.split())


def fit_sheet(path):
    ws = openpyxl.load_workbook(path, read_only=True)["Fit"]
    return {r[0]: r[1] for r in ws.iter_rows(min_row=4, values_only=True) if r and r[0]}


# ----------------------------------------------------------------------------- reading rules
def test_censor_column_keeps_limits_written_or_given_and_skips_the_rest_with_reasons():
    y = intake.read_column(["<0.5", "< 0.5", "ND", "not detected", "ND", 2.0, 3.0, 4.0], "y", header=False)
    c = intake.censor_column(y, limits=[np.nan, np.nan, 0.25, 0.3, np.nan, np.nan, np.nan, np.nan])
    assert list(c.censored) == [True, True, True, True, False, False, False, False]
    assert c.values[:4].tolist() == [0.5, 0.5, 0.25, 0.3]
    assert c.reasons[4] == intake.LIMIT  # ND without a limit: still skipped, with its reason
    x = intake.read_column([1.0, 2.0, 3.0, 4.0, 5.0, "<1", 7.0, 8.0], "x", header=False)
    rows = intake.combine(c, [x])
    assert rows.n_censored == 4 and rows.n_used == 6
    assert rows.counts() == {intake.LIMIT: 2}  # the ND without a limit, and x below a limit
    words = flat(" ".join(rows.lines()))
    assert "4 values of y below a detection limit" in words and "fitted as censored" in words
    assert "censoring applies to y only" in words and "2 rows below a detection limit" in words
    assert ("values below a limit, fitted as censored", 4) in rows.table_rows()


def test_decimal_comma_limits_follow_the_column():
    y = intake.read_column(["<0,5", "1,25", "2,5"], "y", header=False)  # the column's texts settle the comma
    c = intake.censor_column(y)
    assert c.values.tolist() == [0.5, 1.25, 2.5] and c.censored.tolist() == [True, False, False]


def test_qualifier_marks():
    y = intake.read_column([0.5, 0.5, 2.0, 3.0, 9.0, 4.0], "y", header=False)
    c = intake.censor_column(y, qualifiers=["<", " < ", None, "=", ">", "J"], qualifier_name="flag")
    assert c.censored.tolist() == [True, True, False, False, False, False]
    assert c.reasons.tolist() == [intake.USED] * 4 + [intake.ABOVE, intake.TEXT]
    rows = intake.combine(c)
    assert "flag 'J'" in " ".join(rows.lines())  # an unknown mark is skipped and shown, never guessed


# ----------------------------------------------------------------------------- cell functions
@pytest.fixture(scope="module")
def cells_data():
    x, y, cens = survey()
    ycells = [f"<{1.5}" if c else float(v) for v, c in zip(y, cens)]
    return x, y, cens, ycells


def test_fit_in_cells_equals_an_independent_censored_likelihood(cells_data):
    x, y, cens, ycells = cells_data
    out = U.UNBEND_FIT(ycells, list(x), 0, 0)
    d = {r[0]: r[1] for r in out[1:]}
    z = np.log(np.where(cens, 1.5, y))
    a, b, s = ml_line(z, np.log(x), cens)  # source: scipy.optimize on the likelihood written above
    assert d["intercept"] == pytest.approx(a, rel=1e-4, abs=1e-6)
    assert d["slope x"] == pytest.approx(b, rel=1e-4)
    assert d["SD of the errors, maximum likelihood (re-expressed scale)"] == pytest.approx(s, rel=1e-4)
    assert d["values below a limit, fitted as censored"] == int(cens.sum())
    assert "values below a limit (censored)" not in d  # the same count, said once
    assert d["rows used"] == len(y) and d["rows skipped"] == 0


@pytest.mark.parametrize("name", ["UNBEND_SCAN", "UNBEND_PREDICT", "UNBEND_RESIDUALS", "UNBEND_SUGGEST"])
def test_every_table_counts_the_censored_values(cells_data, name):
    x, y, cens, ycells = cells_data
    args = {"UNBEND_SCAN": (ycells, list(x)), "UNBEND_PREDICT": (ycells, list(x), [10.0, 1.0], 0, 0),
            "UNBEND_RESIDUALS": (ycells, list(x), 0, 0), "UNBEND_SUGGEST": (ycells, list(x))}[name]
    out = getattr(U, name)(*args)
    assert isinstance(out, list), out
    j = out[0].index("values below a limit, fitted as censored")
    assert all(r[j] == int(cens.sum()) for r in out[1:] if r[j] != "")


def test_predict_mean_and_formula_from_the_censored_fit(cells_data):
    x, y, cens, ycells = cells_data
    out = U.UNBEND_PREDICT(ycells, list(x), [[10.0], [1.0]], 0, 0)
    h = out[0]
    f = unbend.fit(np.where(cens, 1.5, y), x, y_power=0, x_power=0, censored=cens)
    for r in out[1:]:
        med, mean = r[h.index("median (typical y)")], r[h.index("mean (average y, normal theory)")]
        # common practice: the mean of a log-normal value is the median times exp(s^2 / 2)
        assert mean == pytest.approx(med * math.exp(f.resid_sd ** 2 / 2), rel=1e-10)
        assert "the mean cannot be computed" not in r[h.index("note")]
        below = med < 1.5
        assert r[h.index("median below the lowest limit")] == ("yes" if below else "no")
    assert out[2][h.index("median below the lowest limit")] == "yes"  # x = 1 lies where only limits were reported
    for what, col in (("median", "median (typical y)"), ("mean", "mean (average y, normal theory)")):
        text = U.UNBEND_FORMULA(ycells, list(x), 0, 0, "B2", what)
        assert "NaN" not in text.upper() and text.startswith("=")
        expr = text[1:].replace("EXP", "math.exp").replace("LN", "math.log").replace("B2", "10.0")
        assert eval(expr, {"math": math}) == pytest.approx(out[1][h.index(col)], rel=1e-9)
    refused = U.UNBEND_FORMULA(ycells, list(x), 0.5, 0, "B2", "mean")
    assert refused.startswith("unbend:") and "no short formula" in refused


def test_explain_says_the_method_and_the_count(cells_data):
    x, y, cens, ycells = cells_data
    text = U.UNBEND_EXPLAIN(ycells, list(x), 0, 0)
    assert f"{int(cens.sum())} of {len(y)} values below a limit treated as censored" in text
    assert f"{int(cens.sum())} values of y below a detection limit" in text


def test_calibration_functions_still_leave_limits_out(cells_data):
    x, y, cens, ycells = cells_data
    out = U.UNBEND_INVERSE(ycells, list(x), [[3.0]], 0, 0)
    h = out[0]
    assert out[1][h.index("rows used")] == int((~cens).sum())
    assert f"{int(cens.sum())} below a detection limit" in out[1][h.index("skipped, by reason")]


# ----------------------------------------------------------------------------- the command
@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """The survey as a semicolon CSV with decimal commas (a European spreadsheet's export) and as a workbook
    with ND cells, a limit column (two different limits) and one dose written as below a limit."""
    x, y, cens = survey()
    d = tmp_path_factory.mktemp("censored")
    csv = d / "residue.csv"
    with open(csv, "w", encoding="utf-8", newline="") as fh:
        fh.write("dose;residue\r\n")
        for a, b, c in zip(x, y, cens):
            yv = "<1,5" if c else f"{b:.3f}".replace(".", ",")
            fh.write(f"{a:.1f}".replace(".", ",") + f";{yv}\r\n")
    limits = np.where(np.arange(x.size) % 2 == 0, 1.5, 1.2)  # two limits, as two lab batches might report
    cens2 = y < limits
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Results"
    ws.append(["Invented survey, not measurements"])
    ws.append(["dose", "residue", "LOD", "flag"])
    for i, (a, b, lim, c) in enumerate(zip(x, y, limits, cens2)):
        ws.append([float(a) if i != 3 else "<1", "ND" if c else float(b), float(lim), "<" if c else None])
    wb.save(d / "residue.xlsx")
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(["dose", "residue", "flag"])
    for a, b, c in zip(x, y, cens):
        ws.append([float(a), 1.5 if c else float(b), "<" if c else None])
    wb.save(d / "qualified.xlsx")
    return d, x, y, cens, limits, cens2


def test_report_on_a_decimal_comma_csv_uses_the_censored_fit(files, tmp_path):
    d, x, y, cens, _, _ = files
    out = tmp_path / "r.xlsx"
    code, text, err = run(["report", d / "residue.csv", "--y", "residue", "--x", "dose", "--y-power", "0",
                           "--x-power", "0", "--out", out, "--quiet"])
    assert code == 0, err
    words = flat(text)
    z = np.log(np.where(cens, 1.5, y))
    a, b, s = ml_line(z, np.log(x), cens)  # source: scipy.optimize on the likelihood written above
    sheet = fit_sheet(out)
    assert sheet["intercept"] == pytest.approx(a, rel=1e-4, abs=1e-6)
    assert sheet["slope dose"] == pytest.approx(b, rel=1e-4)
    nc, n = int(cens.sum()), len(y)
    assert sheet["values below a limit, fitted as censored"] == nc
    assert (f"Method: maximum likelihood with censored values. {nc} of {n} values of residue ({nc / n:.0%}) are "
            "below a detection limit 1.5") in words
    half = unbend.half_limit(np.where(cens, 1.5, y), x, cens, y_power=0, x_power=0)
    assert (f"a slope for dose of {half.coef[1]:.4g} (censored fit: {b:.4g})") in words
    assert (f"an intercept of {half.coef[0]:.4g} (censored fit: {a:.4g})") in words
    # common practice (Helsel 2005): half-limit substitution biases the line; here it flattens the slope
    assert half.coef[1] != pytest.approx(b, rel=1e-3)
    assert "Model in formulas" not in openpyxl.load_workbook(out, read_only=True).sheetnames
    summary = " ".join(str(v) for r in openpyxl.load_workbook(out, read_only=True)["Summary"].iter_rows(values_only=True)
                       for v in r if isinstance(v, str))
    assert "normal-theory mean of the censored fit" in summary and "smearing estimate" not in summary
    assert "not written for a censored fit" in words
    assert "normal-theory mean" in text


def test_report_plots_draw_censored_points_apart(files, tmp_path):
    from unbend.udfs.cli import read_report_data, _censored_of
    from unbend.udfs.plots import plot_data
    from unbend.udfs.report import analyse
    d, x, y, cens, _, _ = files
    args = cli.build_parser().parse_args(["report", str(d / "residue.csv"), "--y", "residue", "--x", "dose"])
    reading, df, ycol, xcols, g = read_report_data(args, str(d / "residue.csv"))
    a = analyse(df, ycol, xcols, g, censored=_censored_of(reading), y_power=0, x_power=0)
    p = plot_data(a)
    assert p["censored"].sum() == cens.sum() and np.all(p["y"][p["censored"]] == 1.5)
    h = unbend.half_limit(np.where(cens, 1.5, y), x, cens, y_power=0, x_power=0)
    assert np.allclose(np.sort(p["half_fitted"]), np.sort(h.residuals["fitted"].to_numpy()), rtol=0, atol=1e-9)
    assert np.allclose(p["half_x_re"], np.log(p["x"]))  # drawn on the same axes as the censored fit
    from unbend.udfs.report import summary_lines
    below = a.predictions["below_limit"].to_numpy(dtype=bool)
    med = a.predictions["median"].to_numpy()
    assert below.tolist() == (med < 1.5).tolist() and below.any()
    words = flat(" ".join(summary_lines(a)))
    assert f"{int(below.sum())} of the {below.size} predictions" in words and "median below the lowest limit (1.5)" in words


def test_report_reads_nd_with_a_limit_column(files, tmp_path):
    d, x, y, cens, limits, cens2 = files
    out = tmp_path / "r.xlsx"
    code, text, err = run(["report", d / "residue.xlsx", "--y", "residue", "--x", "dose", "--limit-column", "LOD",
                           "--y-power", "0", "--x-power", "0", "--out", out, "--quiet"])
    assert code == 0, err
    words = flat(text)
    used = np.arange(x.size) != 3  # the dose written as "<1" is skipped: censoring applies to y only
    nc = int((cens2 & used).sum())
    assert f"{nc} values of y below a detection limit" in words
    assert "Skipped 1 row of 40: below a detection limit: 1 (row 6, dose: '<1')" in words
    assert "censoring applies to y only" in words
    assert "2 different limits (1.2 to 1.5)" in words  # the engine's caution about several limits
    z = np.log(np.where(cens2, limits, y))[used]
    a, b, s = ml_line(z, np.log(x[used]), cens2[used])  # source: scipy.optimize on the likelihood above
    sheet = fit_sheet(out)
    assert sheet["slope dose"] == pytest.approx(b, rel=1e-4)
    assert sheet["values below a limit, fitted as censored"] == nc


def test_without_the_limit_column_nd_is_skipped_with_its_reason(files, tmp_path):
    d, x, y, cens, limits, cens2 = files
    code, text, err = run(["report", d / "residue.xlsx", "--y", "residue", "--x", "dose", "--y-power", "0",
                           "--x-power", "0", "--out", tmp_path / "r.xlsx", "--quiet"])
    assert code == 0, err
    words = flat(text)
    k = int(cens2.sum()) + (0 if cens2[3] else 1)
    assert f"Skipped {k} rows of 40: below a detection limit: {k}" in words
    assert "--limit-column" in words and "values of y below a detection limit" not in words
    assert "Method: maximum likelihood with censored values" not in words


def test_qualifier_column(files, tmp_path):
    d, x, y, cens, _, _ = files
    out = tmp_path / "q.xlsx"
    code, text, err = run(["report", d / "qualified.xlsx", "--y", "residue", "--x", "dose", "--qualifier-column",
                           "flag", "--y-power", "0", "--x-power", "0", "--out", out, "--quiet"])
    assert code == 0, err
    sheet = fit_sheet(out)
    a, b, s = ml_line(np.log(np.where(cens, 1.5, y)), np.log(x), cens)  # source: scipy.optimize (above)
    assert sheet["slope dose"] == pytest.approx(b, rel=1e-4)
    assert sheet["values below a limit, fitted as censored"] == int(cens.sum())


def test_more_than_80_percent_censored_is_refused(tmp_path):
    rng = np.random.default_rng(5)
    x = np.arange(1.0, 21.0)
    y = np.exp(rng.normal(0, 0.3, 20))
    path = tmp_path / "mostly.csv"
    path.write_text("x,y\n" + "".join(f"{a:g},{'<5' if i < 17 else f'{b:.3f}'}\n"
                                      for i, (a, b) in enumerate(zip(x, y))), encoding="utf-8")
    code, text, err = run(["report", path, "--y", "y", "--x", "x", "--y-power", "0", "--x-power", "0",
                           "--out", tmp_path / "r.xlsx", "--quiet"])
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert code == cli.EXIT_BAD_INPUT and len(lines) == 1, err
    assert "17 of 20 values (85%) are below a limit" in lines[0] and "Traceback" not in err


def test_more_than_half_censored_is_said(tmp_path):
    rng = np.random.default_rng(6)
    x = np.arange(1.0, 21.0)
    y = np.exp(0.1 * x + rng.normal(0, 0.2, 20))
    path = tmp_path / "half.csv"
    path.write_text("x,y\n" + "".join(f"{a:g},{'<3' if i < 12 else f'{b:.3f}'}\n"
                                      for i, (a, b) in enumerate(zip(x, y))), encoding="utf-8")
    code, text, err = run(["report", path, "--y", "y", "--x", "x", "--y-power", "0", "--x-power", "1",
                           "--out", tmp_path / "r.xlsx", "--quiet"])
    assert code == 0, err
    words = flat(text)
    # common practice (Helsel 2005): above about half censored the line rests mostly on the limits
    assert "Warning: 12 of 20 values (60%) are below a limit: the line rests mostly on the limits" in words


def test_help_names_the_limit_options():
    code, out, _ = run(["report", "--help"])
    assert code == 0 and "--limit-column" in out and "--qualifier-column" in out


def _censored_boxcox_loglik(lam, y, c):
    """The Box-Cox log-likelihood with values below a limit censored, written from its definition: the normal
    fitted by scipy.stats.norm.fit to scipy.stats.CensoredData (tight optimizer), plus the Jacobian of the
    measured values; a censored value's probability needs no Jacobian."""
    z = np.log(y) if lam == 0 else (y ** lam - 1.0) / lam

    def tight(func, x0, args=(), disp=0):
        return optimize.fmin(func, x0, args=args, disp=0, xtol=1e-9, ftol=1e-12, maxiter=20000, maxfun=40000)

    loc, scale = stats.norm.fit(stats.CensoredData(uncensored=z[~c], left=z[c]), optimizer=tight)
    return (stats.norm.logpdf(z[~c], loc, scale).sum() + stats.norm.logcdf(z[c], loc, scale).sum()
            + (lam - 1.0) * np.log(y[~c]).sum())


def test_y_alone_cells_fit_values_below_a_limit_as_censored():
    """UNBEND_SYMMETRY, UNBEND_POWER and UNBEND_SUGGEST with y alone on cells written "<1.5": the power is the
    censored Box-Cox maximum (source: scipy.stats.norm.fit on scipy.stats.CensoredData, maximised over the
    power with scipy.optimize.minimize_scalar), and the table counts the censored values once.
    Invented: log-normal values (a log is the true rung), the lowest fifth reported below 1.5."""
    rng = np.random.default_rng(3)
    v = rng.lognormal(1.0, 0.8, 60)
    c = v < 1.5
    y = np.where(c, 1.5, v)
    cells = [["<1.5"] if ci else [float(a)] for a, ci in zip(v, c)]
    res = optimize.minimize_scalar(lambda lam: -_censored_boxcox_loglik(lam, y, c), bounds=(-2.0, 2.0),
                                   method="bounded", options={"xatol": 1e-6})
    table = U.UNBEND_SYMMETRY(cells)
    d = {r[0]: r[1] for r in table[1:]}
    assert d["estimate"] == pytest.approx(res.x, abs=1e-4)
    assert d["values below a limit, fitted as censored"] == int(c.sum()) == 12
    assert "values below a limit (censored)" not in d and "12 of 60 values below a limit censored" in d["method"]
    assert d["rows used"] == 60 and d["rows skipped"] == 0
    assert U.UNBEND_POWER(cells) == d["rung to use"]
    s = U.UNBEND_SUGGEST(cells)
    assert s[1][1] == pytest.approx(d["estimate"], abs=1e-12) and s[1][-1] == 12
    assert s[0][-1] == "values below a limit, fitted as censored"
    # dropping the censored values instead would move the power (the bias censoring avoids)
    dropped = unbend.symmetry_power(v[~c])
    assert abs(dropped.estimate - d["estimate"]) > 0.1
