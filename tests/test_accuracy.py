"""Numerical accuracy: extreme scales, row order, near-collinear designs, NIST StRD Norris, degenerate data.

Each check names its outside source (scipy, statsmodels, NIST StRD) or the known property it rests on.
The data are invented for these tests unless a source is named, and say so.

Tolerances. A maximum-likelihood power sits on the flat top of its profile: a change of 1e-8 in
the power moves the log-likelihood by about 1e-16 of itself, below rounding, so every optimizer
(scipy's included, see test_box_cox_estimate_is_scale_invariant) fixes the estimate only to about
the square root of machine precision. Estimates of a power are compared to 1e-6 (absolute), and
interval ends, where the profile is steep, to 1e-9 (relative). Least-squares numbers are compared
to 1e-9 (relative) or better.
"""
from __future__ import annotations

import math
import re
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats

import unbend
from unbend import UnbendError

EST_ATOL = 1e-6   # power estimates (flat top of the profile; see the module docstring)
END_RTOL = 1e-9   # interval ends and everything least squares

_ACTION = re.compile(r"(?i)\b(give|add|choose|remove|check|use|need|needs|must|try|rescale|consider|make|drop)\b")


def _plain(err: Exception) -> None:
    """An UnbendError message is one line and says what to do."""
    msg = str(err)
    assert msg and "\n" not in msg, msg
    assert _ACTION.search(msg), f"message does not say what to do: {msg!r}"


def _same_suggestion(a, b, *, est_atol=EST_ATOL, end_rtol=END_RTOL):
    assert a.estimate == pytest.approx(b.estimate, abs=est_atol)
    for end in ("low", "high"):
        u, v = getattr(a, end), getattr(b, end)
        if math.isinf(u) or math.isinf(v):
            assert u == v, end
        else:
            assert u == pytest.approx(v, rel=end_rtol, abs=1e-12), end
    assert a.rung == b.rung and a.n == b.n


def _curved(n=80, seed=11):
    """Invented data: y = 2 x^0.6 times lognormal noise, x in 1..50 (a log-log truth)."""
    rng = np.random.default_rng(seed)
    x = rng.uniform(1.0, 50.0, n)
    y = 2.0 * x ** 0.6 * rng.lognormal(0.0, 0.15, n)
    return y, x


# ============================================================================ extreme scales
@pytest.mark.parametrize("with_x", [False, True])
@pytest.mark.parametrize("scale", [1e300, 1e200, 1e-200, 1e-300])
def test_box_cox_estimate_is_scale_invariant(scale, with_x):
    # Known property (Box and Cox 1964, from memory): with the Jacobian included, y -> c*y shifts the
    # profile log-likelihood by the same constant at every power, so the estimate and the interval
    # do not move. The engine must keep this when c*y is near the ends of the float range.
    y, x = _curved()
    base = unbend.suggest_power(y, x if with_x else None)
    big = unbend.suggest_power(y * scale, x if with_x else None)
    _same_suggestion(big, base)
    if not with_x:
        # source: scipy.stats.boxcox_normmax(method="mle") on the same scaled data (scipy's own answers
        # at the different scales differ by ~5e-8: the flat top of the profile)
        assert big.estimate == pytest.approx(stats.boxcox_normmax(y * scale, method="mle"), abs=EST_ATOL)


def test_box_cox_on_data_spanning_1e_minus_200_to_1e200():
    # invented: 60 values spread evenly in log from 1e-200 to 1e200, lognormal noise (a log truth)
    rng = np.random.default_rng(12)
    y = np.geomspace(1e-200, 1e200, 60) * rng.lognormal(0.0, 2.0, 60)
    s = unbend.suggest_power(y)
    # source: scipy.stats.boxcox_normmax(method="mle")
    assert s.estimate == pytest.approx(stats.boxcox_normmax(y, method="mle"), abs=EST_ATOL)
    # source: scipy.stats.boxcox(y, alpha=0.05) likelihood-ratio interval
    _, _, (lo, hi) = stats.boxcox(y, alpha=0.05)
    assert s.low == pytest.approx(lo, abs=1e-5) and s.high == pytest.approx(hi, abs=1e-5)
    assert s.label == "log"
    # scale invariance (Box and Cox 1964) at the ends of the float range
    for c in (1e100, 1e-100):
        _same_suggestion(unbend.suggest_power(y * c), s)
    # with a predictor the same holds (x: the row number, an invented straight predictor)
    x = np.arange(60.0)
    sx = unbend.suggest_power(y, x)
    for c in (1e100, 1e-100):
        _same_suggestion(unbend.suggest_power(y * c, x), sx)


@pytest.mark.parametrize("y_scale, x_scale", [(1e300, 1.0), (1e-300, 1.0), (1.0, 1e300), (1.0, 1e-300),
                                              (1e-300, 1e300)])
def test_x_power_estimate_is_scale_invariant(y_scale, x_scale):
    # Known property (Box and Tidwell 1962 model, y = a + b x^alpha): c*y rescales a and b, and
    # x -> c*x multiplies x^alpha by c^alpha, absorbed by b; the profile over alpha only shifts.
    y, x = _curved()
    y = np.log(y)  # a straight line in log x: alpha near 0 (log)
    base = unbend.suggest_x_power(y + 10.0, x)
    moved = unbend.suggest_x_power((y + 10.0) * y_scale, x * x_scale)
    _same_suggestion(moved, base)


@pytest.mark.parametrize("scale", [1e300, 1e-300])
def test_spread_power_is_scale_invariant(scale):
    # log spread on log level: c*values adds log c to both, so the slope (and the power 1 - slope)
    # does not move (Tukey 1977, spread versus level; common practice)
    rng = np.random.default_rng(13)
    g = np.repeat(np.arange(1, 7), 25)
    v = g * 10.0 * rng.lognormal(0.0, 0.25, g.size)  # invented: spread proportional to level
    a, b = unbend.spread_power(v, g), unbend.spread_power(v * scale, g)
    assert b.estimate == pytest.approx(a.estimate, rel=END_RTOL, abs=1e-12)
    assert b.low == pytest.approx(a.low, rel=END_RTOL) and b.high == pytest.approx(a.high, rel=END_RTOL)


@pytest.mark.parametrize("scale", [1e300, 1e-300])
def test_log_line_slope_does_not_see_the_scale_of_y(scale):
    # log(c*y) = log c + log y: the slope, its standard error and R^2 are unchanged and the intercept
    # moves by log c exactly (an identity); predictions in original units scale by c.
    y, x = _curved()
    a = unbend.fit(y, x, y_power=0, x_power=0)
    b = unbend.fit(y * scale, x, y_power=0, x_power=0)
    assert b.coef[1] == pytest.approx(a.coef[1], rel=1e-12)
    assert b.se[1] == pytest.approx(a.se[1], rel=1e-10)
    assert b.coef[0] == pytest.approx(a.coef[0] + math.log(scale), rel=1e-12)
    assert b.r2 == pytest.approx(a.r2, rel=1e-12)
    new = [2.0, 20.0, 45.0]
    pa, pb = a.predict(new), b.predict(new)
    for col in ("median", "mean", "line_low", "line_high", "low", "high"):
        np.testing.assert_allclose(pb[col], pa[col] * scale, rtol=1e-10, err_msg=col)
    # source: statsmodels OLS on log y, log x
    m = sm.OLS(np.log(y * scale), sm.add_constant(np.log(x))).fit()
    np.testing.assert_allclose(b.coef, m.params, rtol=1e-10)
    np.testing.assert_allclose(b.se, m.bse, rtol=1e-9)


@pytest.mark.parametrize("scale", [1.0, 1e300, 1e-300])
def test_box_cox_far_from_zero_at_extreme_scales(scale):
    # invented: y = N(100, 10)^(1/7) on 5,000 rows, so the power is near 8, far from 0 (interval about
    # 6.8 to 9.9); y^8 of values near 1e300 does not exist as a float, so the profile must be computed
    # without it. With a standard error near 0.8 the flat top fixes the estimate to about 1e-6 (scipy
    # and the engine on the unscaled data agree to 8e-7), hence the 2e-6 below.
    y = np.random.default_rng(30).normal(100.0, 10.0, 5000) ** (1.0 / 7.0)
    s = unbend.suggest_power(y * scale)
    # source: scipy.stats.boxcox_normmax(method="mle") and scipy.stats.boxcox(alpha=0.05) on the unscaled
    # data, with the scale invariance above (scipy itself overflows on the 1e300-scaled data)
    assert s.estimate == pytest.approx(stats.boxcox_normmax(y, method="mle"), abs=2e-6)
    _, _, (lo, hi) = stats.boxcox(y, alpha=0.05)
    assert s.low == pytest.approx(lo, rel=END_RTOL) and s.high == pytest.approx(hi, rel=END_RTOL)


@pytest.mark.parametrize("power", [50.0, 100.0, -50.0, -100.0])
def test_fit_at_large_powers_matches_statsmodels(power, ref):
    # invented: y in about 10..16. y**100 reaches 1e120 and y**-100 falls to 1e-120: their squares
    # overflow or underflow, but the line, its standard errors and R^2 all exist as floats.
    rng = np.random.default_rng(31)
    x = np.linspace(1.0, 10.0, 40)
    y = (5.0 + x + rng.normal(0.0, 0.3, x.size)) ** (1.0 / 15.0) * 10.0
    yt = ref.ladder(y, power)
    c = float(np.max(np.abs(yt)))
    # source: statsmodels OLS on the re-expressed y divided by its largest size, scaled back (a line is
    # equivariant under rescaling of y)
    m = sm.OLS(yt / c, sm.add_constant(x)).fit()
    f = unbend.fit(y, x, y_power=power)
    np.testing.assert_allclose(f.coef, m.params * c, rtol=1e-8)
    np.testing.assert_allclose(f.se, m.bse * c, rtol=1e-8)
    assert f.r2 == pytest.approx(m.rsquared, abs=1e-10)


# ============================================================================ row order
def _shuffled(*cols, seed=99):
    p = np.random.default_rng(seed).permutation(len(cols[0]))
    return [np.asarray(c)[p] for c in cols]


@pytest.mark.parametrize("family", ["ladder", "yeo-johnson"])
@pytest.mark.parametrize("with_x", [False, True])
def test_suggest_power_does_not_depend_on_row_order(with_x, family):
    y, x = _curved()
    ys, xs = _shuffled(y, x)
    a = unbend.suggest_power(y, x if with_x else None, family=family)
    b = unbend.suggest_power(ys, xs if with_x else None, family=family)
    _same_suggestion(a, b)
    assert b.loglik == pytest.approx(a.loglik, rel=1e-12)


def test_suggest_power_on_many_rows_does_not_depend_on_row_order():
    # above 40,000 rows a seeded subsample picks where to look; the answer must still be the full-data one
    rng = np.random.default_rng(14)
    x = rng.uniform(1, 50, 50_000)
    y = 2.0 * x ** 0.6 * rng.lognormal(0.0, 0.15, x.size)  # invented
    ys, xs = _shuffled(y, x)
    _same_suggestion(unbend.suggest_power(y, x), unbend.suggest_power(ys, xs))
    _same_suggestion(unbend.suggest_x_power(np.log(y), x), unbend.suggest_x_power(np.log(ys), xs))


def test_suggest_x_power_does_not_depend_on_row_order():
    y, x = _curved()
    ys, xs = _shuffled(y, x)
    _same_suggestion(unbend.suggest_x_power(y, x, y_power=0), unbend.suggest_x_power(ys, xs, y_power=0))
    X = np.column_stack([x, np.random.default_rng(15).uniform(1, 9, x.size)])
    Xs = _shuffled(X)[0]
    ys2 = _shuffled(y)[0]
    _same_suggestion(unbend.suggest_x_power(y, X, y_power=0), unbend.suggest_x_power(ys2, Xs, y_power=0))


def test_spread_power_does_not_depend_on_row_order():
    rng = np.random.default_rng(16)
    g = np.repeat(np.array(["north", "south", "east", "west", "centre"]), 20)
    v = np.repeat([5.0, 10, 20, 40, 80], 20) * rng.lognormal(0, 0.3, g.size)  # invented
    vs, gs = _shuffled(v, g)
    a, b = unbend.spread_power(v, g), unbend.spread_power(vs, gs)
    assert b.estimate == pytest.approx(a.estimate, rel=END_RTOL)
    assert b.low == pytest.approx(a.low, rel=END_RTOL) and b.high == pytest.approx(a.high, rel=END_RTOL)
    da = a.detail.sort_values("group").reset_index(drop=True)
    db = b.detail.sort_values("group").reset_index(drop=True)
    pd.testing.assert_frame_equal(da, db, rtol=1e-12)


@pytest.mark.parametrize("py, px", [(1.0, 1.0), (0.0, 0.0), (0.5, -1.0)])
@pytest.mark.parametrize("k", [1, 2])
def test_fit_does_not_depend_on_row_order(py, px, k):
    y, x = _curved()
    X = x if k == 1 else np.column_stack([x, np.random.default_rng(17).uniform(1, 9, x.size)])
    p = np.random.default_rng(99).permutation(y.size)
    a = unbend.fit(y, X, y_power=py, x_power=px)
    b = unbend.fit(y[p], X[p], y_power=py, x_power=px)
    for name in ("coef", "se", "pvalues", "ci_low", "ci_high"):
        np.testing.assert_allclose(getattr(b, name), getattr(a, name), rtol=END_RTOL, atol=1e-300, err_msg=name)
    for name in ("r2", "adj_r2", "r2_original", "resid_sd", "loglik"):
        assert getattr(b, name) == pytest.approx(getattr(a, name), rel=END_RTOL), name
    for name in ("curvature", "pattern", "spread", "normality"):
        assert getattr(b, name).pvalue == pytest.approx(getattr(a, name).pvalue, rel=1e-7, abs=1e-14), name
        assert getattr(b, name).passed == getattr(a, name).passed, name
    assert b.verdict == a.verdict
    # the residual table follows the rows: put b's back in a's order by row number
    rb = b.residuals.assign(row=p[b.residuals["row"].to_numpy() - 1] + 1).sort_values("row")
    num = ["y", "fitted", "residual", "standardized", "studentized", "leverage", "cooks_distance"]
    np.testing.assert_allclose(rb[num].to_numpy(), a.residuals[num].to_numpy(), rtol=1e-8, atol=1e-12)


SCAN_NUMBERS = ["loglik", "curvature_p", "pattern_p", "spread_p", "normality_p", "r2", "r2_original"]


def _scan_by_pair(t):
    return t.sort_values(["y_power", "x_power"]).reset_index(drop=True)


@pytest.mark.parametrize("k", [1, 2])
def test_scan_does_not_depend_on_row_order(k):
    y, x = _curved()
    X = x if k == 1 else np.column_stack([x, np.random.default_rng(18).uniform(1, 9, x.size)])
    p = np.random.default_rng(99).permutation(y.size)
    a, b = unbend.scan(y, X), unbend.scan(y[p], X[p])
    np.testing.assert_allclose(_scan_by_pair(b)[SCAN_NUMBERS].to_numpy(float),
                               _scan_by_pair(a)[SCAN_NUMBERS].to_numpy(float), rtol=1e-8, atol=1e-14)
    assert list(b["verdict"]) == list(a["verdict"]) and list(b["y_power"]) == list(a["y_power"])
    assert unbend.best_pair(y[p], X[p]) == unbend.best_pair(y, X)


def test_residual_checks_with_tied_x_do_not_depend_on_row_order():
    # Duplicated x values are common (repeat measurements). The pattern check bins rows in order of x;
    # rows with the same x must not land in different bins depending on where they sit in the input.
    rng = np.random.default_rng(19)
    x = np.repeat(np.arange(1.0, 8.0), 3)  # invented: 7 settings, 3 repeats each, 21 rows -> 3 bins of 7
    y = np.exp(0.2 * x + rng.normal(0, 0.3, x.size))
    a = unbend.fit(y, x)
    seen = {round(a.pattern.pvalue, 12)}
    for seed in range(10):
        p = np.random.default_rng(seed).permutation(x.size)
        seen.add(round(unbend.fit(y[p], x[p]).pattern.pvalue, 12))
    assert len(seen) == 1, f"pattern check p-value changes with row order: {sorted(seen)}"


# ============================================================================ near-collinear columns
def _near_collinear(r=0.999999, n=80, seed=20):
    """Invented: x2 = x1 + a little noise, built so that corr(x1, x2) = r exactly."""
    rng = np.random.default_rng(seed)
    x1 = rng.uniform(0.0, 10.0, n)
    e = rng.normal(0.0, 1.0, n)
    e -= np.polyval(np.polyfit(x1, e, 1), x1)  # orthogonal to 1 and x1
    x2 = x1 + e * (np.std(x1) / np.std(e)) * math.sqrt(1.0 / r ** 2 - 1.0)
    y = 1.0 + 0.5 * x1 + 0.3 * x2 + rng.normal(0.0, 0.5, n)
    return y, np.column_stack([x1, x2]) + 1.0  # + 1: positive, so that log y and log x are defined


@pytest.mark.parametrize("py", [1.0, 0.0])
def test_near_collinear_columns_warn_and_still_predict_like_statsmodels(py):
    y, X = _near_collinear()
    assert np.corrcoef(X, rowvar=False)[0, 1] == pytest.approx(0.999999, abs=1e-12)
    f = unbend.fit(y, X, y_power=py)
    assert any("strongly related" in w or "collinear" in w for w in f.warnings), f.warnings
    assert np.all(np.isfinite(f.coef)) and np.all(np.isfinite(f.se))
    new = X[::7] * 0.999 + X.mean(axis=0) * 0.001  # points inside the data
    p = f.predict(new)
    yt = np.log(y) if py == 0 else y
    m = sm.OLS(yt, sm.add_constant(X)).fit()
    # source: statsmodels OLS params and get_prediction summary_frame (alpha=0.05)
    np.testing.assert_allclose(f.coef, m.params, rtol=1e-6)
    sf = m.get_prediction(sm.add_constant(new, has_constant="add")).summary_frame(alpha=0.05)
    back = np.exp if py == 0 else (lambda v: v)
    for mine, theirs in [("median", "mean"), ("line_low", "mean_ci_lower"), ("line_high", "mean_ci_upper"),
                         ("low", "obs_ci_lower"), ("high", "obs_ci_upper")]:
        np.testing.assert_allclose(p[mine].to_numpy(), back(sf[theirs].to_numpy()), rtol=1e-6, err_msg=mine)


@pytest.mark.parametrize("how", ["multiple", "sum of two", "copy"])
def test_exactly_collinear_columns_are_refused_plainly(how):
    rng = np.random.default_rng(21)
    x1, x2 = rng.uniform(1, 10, 30), rng.uniform(1, 10, 30)
    y = 2 + x1 + rng.normal(0, 0.3, 30)  # invented
    X = {"multiple": np.column_stack([x1, 2.0 * x1 + 3.0]),
         "sum of two": np.column_stack([x1, x2, x1 + x2]),
         "copy": np.column_stack([x1, x1])}[how]
    with pytest.raises(UnbendError) as info:
        unbend.fit(y, X)
    _plain(info.value)
    assert "collinear" in str(info.value) or "combination" in str(info.value)


# ============================================================================ NIST StRD Norris
# from memory (NIST StRD, dataset "Norris", simple linear regression, lower difficulty): the 36
# observations and the certified values. Memory is cross-checked below against statsmodels on the
# same data: a wrong digit in the data would not reproduce 15-digit certified values.
NORRIS_Y = [0.1, 338.8, 118.1, 888.0, 9.2, 228.1, 668.5, 998.5, 449.1, 778.9, 559.2, 0.3, 0.1, 778.1, 668.8,
            339.3, 448.9, 10.8, 557.7, 228.3, 998.0, 888.8, 119.6, 0.3, 0.6, 557.6, 339.3, 888.0, 998.5, 778.9,
            10.2, 117.6, 228.9, 668.4, 449.2, 0.2]
NORRIS_X = [0.2, 337.4, 118.2, 884.6, 10.1, 226.5, 666.3, 996.3, 448.6, 777.0, 558.2, 0.4, 0.6, 775.5, 666.9,
            338.0, 447.5, 11.6, 556.0, 228.1, 995.8, 887.6, 120.2, 0.3, 0.3, 556.8, 339.1, 887.2, 999.0, 779.0,
            11.1, 118.3, 229.2, 669.1, 448.9, 0.5]
NORRIS_CERTIFIED = dict(b0=-0.262323073774029, b1=1.00211681802045, sd_b0=0.232818234301152,
                        sd_b1=0.429796848199937e-3, resid_sd=0.884796396144373, r2=0.999993745883712,
                        rss=26.6173985294224)


def test_norris_against_nist_certified_values():
    c = NORRIS_CERTIFIED
    # cross-check of the remembered data and values: statsmodels OLS on the same numbers
    m = sm.OLS(NORRIS_Y, sm.add_constant(NORRIS_X)).fit()
    np.testing.assert_allclose(m.params, [c["b0"], c["b1"]], rtol=1e-11)
    np.testing.assert_allclose(m.bse, [c["sd_b0"], c["sd_b1"]], rtol=1e-11)
    # source: NIST StRD Norris certified values (from memory, checked above)
    f = unbend.fit(NORRIS_Y, NORRIS_X)
    np.testing.assert_allclose(f.coef, [c["b0"], c["b1"]], rtol=1e-11)
    np.testing.assert_allclose(f.se, [c["sd_b0"], c["sd_b1"]], rtol=1e-11)
    assert f.resid_sd == pytest.approx(c["resid_sd"], rel=1e-12)
    assert f.r2 == pytest.approx(c["r2"], abs=1e-13)
    assert float((f.residuals["residual"] ** 2).sum()) == pytest.approx(c["rss"], rel=1e-11)
    assert f.df_resid == 34
    # the scan's raw-raw row is the same line (same residual sum of squares, so the same R^2)
    t = unbend.scan(NORRIS_Y, NORRIS_X, rungs=[1.0])
    assert t.loc[0, "r2"] == pytest.approx(c["r2"], abs=1e-13)


# ============================================================================ extreme but valid data
def _tiny_huge(seed=22, n=30):
    """Invented: y in [1e-300, 1e-290], x in [1e290, 1e300], log y straight in log x with noise."""
    rng = np.random.default_rng(seed)
    x = np.geomspace(1e290, 1e300, n)
    y = np.geomspace(1e-300, 1e-290, n) * rng.lognormal(0.0, 0.05, n)
    y = np.clip(y, 1e-300, 1e-290)
    return y, x


def test_log_log_fit_of_tiny_y_on_huge_x_matches_statsmodels():
    y, x = _tiny_huge()
    f = unbend.fit(y, x, y_power=0, x_power=0)
    # source: statsmodels OLS on log y and log x (moderate numbers, about -690 and 670)
    m = sm.OLS(np.log(y), sm.add_constant(np.log(x))).fit()
    np.testing.assert_allclose(f.coef, m.params, rtol=1e-9)
    np.testing.assert_allclose(f.se, m.bse, rtol=1e-8)
    assert f.r2 == pytest.approx(m.rsquared, abs=1e-12)
    p = f.predict(x[[3, 15, 27]])
    sf = m.get_prediction(sm.add_constant(np.log(x[[3, 15, 27]]))).summary_frame(alpha=0.05)
    np.testing.assert_allclose(p["median"], np.exp(sf["mean"]), rtol=1e-9)
    np.testing.assert_allclose(p["low"], np.exp(sf["obs_ci_lower"]), rtol=1e-9)


@pytest.mark.parametrize("py, px", [(0.0, 1.0), (1.0, 0.0)])
def test_tiny_y_on_huge_x_matches_statsmodels_on_rescaled_data(py, px):
    # A straight line is equivariant under rescaling: fitting c*y on x/d gives slope b*c*d. statsmodels
    # on data rescaled near 1, with its coefficients and standard errors scaled back, is the reference.
    y, x = _tiny_huge()
    cy, dx = (1.0, 1e295) if py == 0 else (1e295, 1.0)
    ys, xs = y * cy, x / dx
    yt = np.log(ys) if py == 0 else ys
    xt = np.log(xs) if px == 0 else xs
    # source: statsmodels OLS on the rescaled data
    m = sm.OLS(yt, sm.add_constant(xt)).fit()
    want = np.array([m.params[0], m.params[1] / (dx if px == 1 else 1.0)])
    want_se = np.array([m.bse[0], m.bse[1] / (dx if px == 1 else 1.0)])
    if py == 1:
        want, want_se = want / cy, want_se / cy
    f = unbend.fit(y, x, y_power=py, x_power=px)
    np.testing.assert_allclose(f.coef, want, rtol=1e-8)
    np.testing.assert_allclose(f.se, want_se, rtol=1e-8)
    assert f.r2 == pytest.approx(m.rsquared, abs=1e-10)


def test_suggestions_for_tiny_y_on_huge_x_match_the_rescaled_data():
    # Box-Cox (y power) is invariant to c*y and to any rescaling of x at a fixed x power; the x power
    # profile is invariant to c*y and d*x (see the scale-invariance tests above)
    y, x = _tiny_huge()
    _same_suggestion(unbend.suggest_power(y, x, x_power=0), unbend.suggest_power(y * 1e295, x / 1e295, x_power=0))
    _same_suggestion(unbend.suggest_power(y, x), unbend.suggest_power(y * 1e295, x / 1e295))
    _same_suggestion(unbend.suggest_x_power(y, x), unbend.suggest_x_power(y * 1e295, x / 1e295))


@pytest.mark.parametrize("py", [2.0, 1.0, 0.5, 0.0, -0.5, -1.0])
@pytest.mark.parametrize("px", [2.0, 1.0, 0.5, 0.0, -0.5, -1.0])
def test_every_rung_pair_on_tiny_y_and_huge_x_is_an_answer_or_a_plain_error(py, px):
    # y**2 ~ 1e-600 and x**2 ~ 1e600 do not exist as floats: such pairs may be refused, in words;
    # anything returned must be numbers
    y, x = _tiny_huge()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # warning leaks are test_engine_fuzz's business
        try:
            f = unbend.fit(y, x, y_power=py, x_power=px)
        except UnbendError as e:
            _plain(e)
            return
        assert np.all(np.isfinite(f.coef)) and np.all(np.isfinite(f.se)), (f.coef, f.se)
        assert np.all(f.se > 0), f"standard errors of a noisy line cannot be 0: {f.se}"
        p = f.predict(x[[2, 20]])
        assert np.all(np.isfinite(p["fitted"]))


def test_scan_of_tiny_y_on_huge_x_ranks_log_log_first():
    y, x = _tiny_huge()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        t = unbend.scan(y, x)
    # known truth of the invented data: log y is a straight line in log x
    assert (t.loc[0, "y_power"], t.loc[0, "x_power"]) == (0.0, 0.0)
    row = t[(t["y_power"] == 0.0) & (t["x_power"] == 0.0)].iloc[0]
    # source: statsmodels OLS R^2 on log y, log x
    m = sm.OLS(np.log(y), sm.add_constant(np.log(x))).fit()
    assert row["r2"] == pytest.approx(m.rsquared, abs=1e-12)


def _counts(seed=23, n=120):
    """Invented counts with many zeros: Poisson with mean exp(-1.25 + 0.25 x), x in 1..10."""
    rng = np.random.default_rng(seed)
    x = np.linspace(1.0, 10.0, n)
    y = rng.poisson(np.exp(-1.25 + 0.25 * x)).astype(float)
    return y, x


def test_counts_with_many_zeros_need_a_start_and_half_is_proposed():
    y, x = _counts()
    assert (y == 0).mean() > 0.2
    with pytest.raises(unbend.DomainError) as info:
        unbend.suggest_power(y, x)
    _plain(info.value)
    # common practice: a start of 1/2 for counts (half the gap between whole numbers)
    assert info.value.proposed_start == 0.5


@pytest.mark.parametrize("py", [0.0, 0.5, -0.5, 1.0])
def test_counts_with_a_start_of_half_match_statsmodels(py, ref):
    y, x = _counts()
    f = unbend.fit(y, x, y_power=py, y_start=0.5)
    yt = ref.ladder(y + 0.5, py)
    # source: statsmodels OLS on the re-expressed y + 0.5 (ladder written from its definition in conftest)
    m = sm.OLS(yt, sm.add_constant(x)).fit()
    np.testing.assert_allclose(f.coef, m.params, rtol=1e-10, atol=1e-13)
    np.testing.assert_allclose(f.se, m.bse, rtol=1e-9)
    # log-likelihood in the original units of y: statsmodels llf plus the Jacobian of y -> (y+0.5)**p
    assert f.loglik == pytest.approx(m.llf + ref.log_jacobian(y + 0.5, py), rel=1e-10)
    p = f.predict([1.0, 5.0, 10.0])
    if py < 1:  # below power 1 the back-transform cannot go under -start (the raw line can)
        assert np.all(p["median"] >= -0.5) and np.all(p["low"] >= -0.5)
    # every rung is possible once the start is there, and the likelihoods are comparable (finite)
    t = unbend.scan(y, x, y_start=0.5)
    assert not t["verdict"].str.startswith("not possible").any()
    assert np.isfinite(t["loglik"]).all()
    s = unbend.suggest_power(y, x, y_start=0.5)
    assert np.isfinite(s.estimate) and s.low < s.estimate < s.high


def _says_constant(text: str) -> bool:
    return bool(re.search(r"(?i)(does not vary|do not vary|all (the )?same|constant|every \w+ value is the same|"
                          r"all equal|no spread)", text))


def test_constant_y_is_refused_or_said_in_words():
    # y all equal: no power can straighten or even out anything. Either an UnbendError in words, or a
    # result whose note / warnings / verdict say that y does not vary; never a crash, never a bare number.
    y = np.full(12, 4.2)
    x = np.linspace(1.0, 12.0, 12)
    g = np.repeat([1, 2, 3, 4], 3)
    calls = {
        "suggest_power": lambda: unbend.suggest_power(y, x),
        "suggest_power (no x)": lambda: unbend.suggest_power(y),
        "symmetry_power": lambda: unbend.symmetry_power(y),
        "suggest_x_power": lambda: unbend.suggest_x_power(y, x),
        "spread_power": lambda: unbend.spread_power(y, g),
        "fit": lambda: unbend.fit(y, x),
        "scan": lambda: unbend.scan(y, x),
        "best_pair": lambda: unbend.best_pair(y, x),
    }
    unclear = []
    for name, call in calls.items():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            try:
                out = call()
            except UnbendError as e:
                _plain(e)
                continue
        if isinstance(out, unbend.PowerSuggestion):
            text = out.note
        elif isinstance(out, unbend.LineFit):
            text = " ".join((out.verdict,) + out.warnings)
        elif isinstance(out, pd.DataFrame):
            text = " ".join(out["verdict"])
        else:
            text = ""
        if not _says_constant(text):
            unclear.append(f"{name} -> {out!r}"[:160])
    assert not unclear, "constant y gave a result that does not say y is constant:\n" + "\n".join(unclear)
