"""x read back from measured y (inverse prediction) and limits from a calibration line.

Outside references: Fieller's closed form as printed in Draper and Smith, Applied Regression
Analysis (inverse-prediction section), written here from memory; a root search over x on
statsmodels' OLS ``get_prediction`` intervals; a worked example from Miller and Miller,
Statistics and Chemometrics for Analytical Chemistry (from memory); the definitions of Hubaux
and Vos (1970), Currie (1968) and ICH Q2(R1) computed with statsmodels. Coverage is checked by
our own seeded simulation (a property with a known truth). Data are invented unless a source
is named.
"""
from __future__ import annotations

import os

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import optimize, stats

import unbend
from unbend.calibration import fieller, samples


def _calibration(seed=1, py=0.0, px=0.0, noise=0.04, levels=(1.0, 2.0, 5.0, 10.0, 20.0, 50.0), reps=2):
    """Invented calibration: a bending detector response, y = 3 x^0.8 (log-normal scatter), standards in duplicate."""
    rng = np.random.default_rng(seed)
    x = np.repeat(np.asarray(levels, float), reps)
    y = 3.0 * x ** 0.8 * np.exp(rng.normal(0.0, noise, x.size))
    return y, x


def _draper_smith(y0, x, y, m, level):
    """Inverse prediction for a straight line, written from the text (from memory: Draper and Smith,
    Applied Regression Analysis, section 3.2, inverse regression).

    X0 = Xbar + (Y0 - Ybar)/b; with g = t^2 s^2 / (b^2 Sxx) the limits are
    Xbar + [(X0 - Xbar) +/- (t s / b) * sqrt((X0 - Xbar)^2 / Sxx + (1 - g)(1/m + 1/n))] / (1 - g).
    """
    n = x.size
    xbar, ybar = x.mean(), y.mean()
    sxx = ((x - xbar) ** 2).sum()
    b = ((x - xbar) * (y - ybar)).sum() / sxx
    a = ybar - b * xbar
    s = np.sqrt(((y - a - b * x) ** 2).sum() / (n - 2))
    t = stats.t.ppf(0.5 + level / 2, n - 2)
    g = t ** 2 * s ** 2 / (b ** 2 * sxx)
    x0 = xbar + (y0 - ybar) / b
    half = (t * s / b) * np.sqrt((x0 - xbar) ** 2 / sxx + (1 - g) * (1.0 / m + 1.0 / n))
    ends = np.sort([xbar + ((x0 - xbar) - half) / (1 - g), xbar + ((x0 - xbar) + half) / (1 - g)])
    return x0, ends[0], ends[1], g


# ------------------------------------------------------------------ straight line: closed form

@pytest.mark.parametrize("level", [0.95, 0.9])
@pytest.mark.parametrize("m", [1, 3])
def test_straight_line_equals_fiellers_closed_form(m, level):
    rng = np.random.default_rng(7)
    x = np.repeat([0.0, 1, 2, 4, 6, 8, 10], 2)
    y = 0.4 + 1.7 * x + rng.normal(0, 0.3, x.size)
    f = unbend.fit(y, x)
    readings = np.array([0.5, 3.0, 9.0, 16.0, 25.0])  # the last is beyond the top standard
    if m == 1:
        got = f.inverse(readings, level=level)
    else:
        block = readings[:, None] + np.array([-0.1, 0.0, 0.1])  # mean is the reading itself
        got = f.inverse(block, level=level, replicates=m)
    for i, y0 in enumerate(readings):
        # source: Draper and Smith, inverse regression (from memory)
        x0, lo, hi, g = _draper_smith(y0, x, y, m, level)
        assert g < 1
        assert got["x"].iloc[i] == pytest.approx(x0, rel=1e-9, abs=1e-12)
        assert got["low"].iloc[i] == pytest.approx(lo, rel=1e-9, abs=1e-12)
        assert got["high"].iloc[i] == pytest.approx(hi, rel=1e-9, abs=1e-12)
    assert list(got["outside_range"]) == [False, False, False, False, True]
    assert "extrapolation" in got["note"].iloc[4]


def test_fieller_function_mirrors_the_closed_form():
    # the engine's summary-number form (the one a sheet of built-in formulas can mirror)
    rng = np.random.default_rng(8)
    x = np.linspace(1, 10, 9)
    y = 2.0 - 0.8 * x + rng.normal(0, 0.4, x.size)  # a falling line
    n = x.size
    b, a = np.polyfit(x, y, 1)
    s = np.sqrt(((y - a - b * x) ** 2).sum() / (n - 2))
    t = stats.t.ppf(0.975, n - 2)
    e = fieller([-1.0, -5.0], intercept=a, slope=b, resid_sd=s, n=n, x_mean=x.mean(),
                sxx=((x - x.mean()) ** 2).sum(), t=t, replicates=2)
    for i, y0 in enumerate([-1.0, -5.0]):
        # source: Draper and Smith, inverse regression (from memory)
        x0, lo, hi, g = _draper_smith(y0, x, y, 2, 0.95)
        np.testing.assert_allclose([e.estimate[i], e.low[i], e.high[i], e.g[i]], [x0, lo, hi, g], rtol=1e-9)


def test_worked_example_from_miller_and_miller():
    # source: Miller, J. N. and Miller, J. C., Statistics and Chemometrics for Analytical Chemistry,
    # the fluorescein calibration (concentration pg/ml, fluorescence intensity) and its worked
    # inverse predictions; values from memory, printed to 2-4 digits.
    x = np.array([0.0, 2, 4, 6, 8, 10, 12])
    y = np.array([2.1, 5.0, 9.0, 12.6, 17.3, 21.0, 24.7])
    f = unbend.fit(y, x)
    assert f.coef[0] == pytest.approx(1.52, abs=0.005) and f.coef[1] == pytest.approx(1.93, abs=0.005)
    assert f.resid_sd == pytest.approx(0.4329, abs=1e-4)
    r = f.inverse([2.9, 13.5, 23.0])
    # the book prints x0 +/- t s_x0 (a symmetric approximation): 0.72 +/- 0.68, 6.21 +/- 0.62, 11.13 +/- 0.68;
    # Fieller's interval is slightly lopsided (g is about 0.003 here), within 0.03 of those ends
    for i, (x0, half) in enumerate([(0.72, 0.68), (6.21, 0.62), (11.13, 0.68)]):
        assert r["x"].iloc[i] == pytest.approx(x0, abs=0.005)
        assert r["low"].iloc[i] == pytest.approx(x0 - half, abs=0.03)
        assert r["high"].iloc[i] == pytest.approx(x0 + half, abs=0.03)
    # the book's detection limit y_B + 3 s_B (blank from the intercept, s_B = s_y/x) is 0.67 pg/ml;
    # the ICH rule uses 3.3 in place of 3
    lim = f.detection_limits()
    assert lim.ich_detection_x == pytest.approx(0.67 * 3.3 / 3.0, abs=0.006)


# -------------------------------------------------------- every pair: statsmodels root search

def _ladder_pairs():
    return [(py, px) for py in unbend.LADDER for px in unbend.LADDER]


def _band(model, px, ref, xs, m, level):
    """statsmodels' prediction band for the mean of m readings at x (re-expressed scale)."""
    An = sm.add_constant(ref.ladder(np.atleast_1d(xs), px), has_constant="add")
    fr = model.get_prediction(An).summary_frame(alpha=1 - level)
    if m == 1:
        return fr["obs_ci_lower"].to_numpy(), fr["obs_ci_upper"].to_numpy()
    t = stats.t.ppf(0.5 + level / 2, model.df_resid)
    half = t * np.sqrt(fr["mean_se"].to_numpy() ** 2 + model.scale / m)
    return fr["mean"].to_numpy() - half, fr["mean"].to_numpy() + half


def _grid(px):
    """x values to bracket roots on, across everything the x power can take."""
    up = np.geomspace(1e-4, 1e7, 700)
    if px == 1.0:
        return np.concatenate([-up[::-1], [0.0], up])
    return np.concatenate([[0.0], up]) if px > 0 else up


def _root_search(model, px, ref, z0, m, level):
    """The ends of the set of x whose band holds the reading: brentq between sign changes on a grid.

    Where the set runs to the grid's first point x = 0 (a root or a square of x), that edge is its end;
    where it runs past the last point, it has no upper end."""
    grid = _grid(px)
    lo_b, hi_b = _band(model, px, ref, grid, m, level)
    inside = (lo_b <= z0) & (z0 <= hi_b)
    roots = []
    for edge, vals in ((0, lo_b), (1, hi_b)):
        d = vals - z0
        for j in np.flatnonzero(np.sign(d[:-1]) != np.sign(d[1:])):
            fn = lambda v, e=edge: _band(model, px, ref, v, m, level)[e][0] - z0  # noqa: E731
            roots.append(optimize.brentq(fn, grid[j], grid[j + 1], xtol=1e-300, rtol=1e-15, maxiter=200))
    low = grid[0] if inside[0] and grid[0] == 0.0 else min(roots)
    high = np.inf if inside[-1] else max(roots)
    return low, high


@pytest.mark.parametrize("py,px", _ladder_pairs())
def test_interval_ends_equal_a_root_search_on_statsmodels_bands(py, px, ref):
    y, x = _calibration(seed=3, levels=(2.0, 3.0, 5.0, 8.0, 12.0, 20.0))  # bends little: every pair has a slope
    f = unbend.fit(y, x, y_power=py, x_power=px)
    assert f.pvalues[1] < 0.05, (py, px)
    # source: statsmodels OLS get_prediction (obs_ci for one reading; mean_se and scale for the mean of 3)
    model = sm.OLS(ref.ladder(y, py), sm.add_constant(ref.ladder(x, px))).fit()
    targets = np.array([4.0, 8.0, 16.0])  # x of the unknowns: low, middle and high in the standards' range
    z0 = model.params[0] + model.params[1] * ref.ladder(targets, px) + 0.01  # readings near the line
    readings = ref.ladder_inv(z0, py)
    usable = (readings > 0) & np.isfinite(readings) & np.isclose(ref.ladder(readings, py), z0, rtol=1e-12, atol=1e-12)
    assert usable.all(), (py, px)
    tried = 0
    for m in (1, 3):
        got = f.inverse(readings, replicates=1) if m == 1 else f.inverse(
            np.repeat(readings[:, None], 3, axis=1), replicates=3)
        for i in np.flatnonzero(usable):
            lo, hi = _root_search(model, px, ref, z0[i], m, 0.95)
            assert got["low"].iloc[i] == pytest.approx(lo, rel=1e-7, abs=1e-300), (py, px, m, i)
            assert got["high"].iloc[i] == pytest.approx(hi, rel=1e-7), (py, px, m, i)
            if lo == 0.0:
                assert "the interval reaches down to x = 0" in got["note"].iloc[i]
            if hi == np.inf:
                assert "the interval has no upper end" in got["note"].iloc[i]
            x0 = ref.ladder_inv((z0[i] - model.params[0]) / model.params[1], px)  # the line inverted
            assert got["x"].iloc[i] == pytest.approx(x0, rel=1e-9)
            tried += 1
    assert tried == 6


# ------------------------------------------------------------------------ coverage

# 100,000 runs by default (a fraction of a second each); UNBEND_COVERAGE_RUNS=1000000 for the long run
_RUNS = int(os.environ.get("UNBEND_COVERAGE_RUNS", "100000"))


def _simulate_coverage(kind, m, runs, seed):
    """Share of runs whose interval covers the true x: fresh standards and a fresh unknown each run.

    Vectorised over runs: each run's line by least squares in closed form on the re-expressed scale,
    then the engine's own :func:`unbend.calibration.fieller` (the function ``LineFit.inverse`` calls;
    ``test_vectorised_simulation_is_the_engine_path`` checks they agree).
    """
    rng = np.random.default_rng(seed)
    if kind == "log-log":
        xs = np.repeat([1.0, 2, 5, 10, 20, 50], 2)
        u = np.log(xs)
        a, b, sd = 1.1, 0.8, 0.05          # log y = a + b log x + e
        u_true = np.log(rng.uniform(1.0, 50.0, runs))
    else:                                   # square root of y on raw x
        xs = np.repeat([0.0, 2, 4, 8, 12, 16, 20], 2)
        u = xs
        a, b, sd = 2.0, 0.5, 0.2            # sqrt y = a + b x + e
        u_true = rng.uniform(0.0, 20.0, runs)
    n = xs.size
    z = a + b * u + rng.normal(0, sd, (runs, n))
    ubar = u.mean()
    sxx = ((u - ubar) ** 2).sum()
    slope = ((u - ubar) * (z - z.mean(axis=1, keepdims=True))).sum(axis=1) / sxx
    icpt = z.mean(axis=1) - slope * ubar
    s = np.sqrt(((z - icpt[:, None] - slope[:, None] * u) ** 2).sum(axis=1) / (n - 2))
    reading = a + b * u_true + rng.normal(0, sd, (runs, m)).mean(axis=1)
    t = stats.t.ppf(0.975, n - 2)
    e = fieller(reading, intercept=icpt, slope=slope, resid_sd=s, n=n, x_mean=ubar, sxx=sxx, t=t, replicates=m)
    inside = (e.low <= u_true) & (u_true <= e.high)
    inside &= ~((e.gap_low < u_true) & (u_true < e.gap_high))  # g > 1: everything except the gap
    return inside.mean()


@pytest.mark.parametrize("m", [1, 3])
@pytest.mark.parametrize("kind", ["log-log", "square root"])
def test_coverage_of_the_interval_is_its_level(kind, m):
    cov = _simulate_coverage(kind, m, _RUNS, seed=1000 + m + (0 if kind == "log-log" else 10))
    se = np.sqrt(0.95 * 0.05 / _RUNS)  # 0.0007 at 100,000 runs: the 1.5% band is 22 standard errors wide
    print(f"coverage {kind}, {m} reading(s): {cov:.4f} over {_RUNS} runs (se {se:.4f})")
    assert abs(cov - 0.95) <= 0.015
    # the interval is exact under normal scatter on the re-expressed scale, so it should also sit
    # within 5 standard errors of 95% (a false alarm about once in two million runs of this test)
    assert abs(cov - 0.95) <= 5 * se


def test_vectorised_simulation_is_the_engine_path():
    # a few runs of the simulation through fit(...).inverse(...), readings in original units
    rng = np.random.default_rng(99)
    xs = np.repeat([1.0, 2, 5, 10, 20, 50], 2)
    for _ in range(5):
        y = np.exp(1.1 + 0.8 * np.log(xs) + rng.normal(0, 0.05, xs.size))
        readings = np.exp(1.1 + 0.8 * np.log(7.0) + rng.normal(0, 0.05, 3))
        f = unbend.fit(y, xs, y_power=0, x_power=0)
        got = f.inverse(readings, replicates=3)
        u, z = np.log(xs), np.log(y)
        sxx = ((u - u.mean()) ** 2).sum()
        b = ((u - u.mean()) * (z - z.mean())).sum() / sxx
        a = z.mean() - b * u.mean()
        s = np.sqrt(((z - a - b * u) ** 2).sum() / (xs.size - 2))
        e = fieller(np.log(readings).mean(), intercept=a, slope=b, resid_sd=s, n=xs.size, x_mean=u.mean(),
                    sxx=sxx, t=stats.t.ppf(0.975, xs.size - 2), replicates=3)
        np.testing.assert_allclose([got["x"][0], got["low"][0], got["high"][0]],
                                   np.exp([e.estimate[0], e.low[0], e.high[0]]), rtol=1e-9)


# ------------------------------------------------------------------ open ends, in words

def test_a_slope_that_is_not_significant_gives_open_ends_in_words():
    rng = np.random.default_rng(4)
    x = np.repeat([1.0, 2, 3, 4, 5], 2)
    y = 10.0 + 0.05 * x + rng.normal(0, 1.0, x.size)
    f = unbend.fit(y, x)
    tq = stats.t.ppf(0.975, f.df_resid)
    assert abs(f.tvalues[1]) < tq  # not significant at 95%: the premise of this test
    r = f.inverse([10.1, 10.2, 30.0])
    assert np.all(r["low"] == -np.inf) and np.all(r["high"] == np.inf)
    for note in r["note"]:
        assert "no closed interval: the slope is not significant at the 95% level" in note
        assert f"its t is {abs(f.tvalues[1]):.3g}, below the {tq:.3g} needed" in note
    # where the set of x is every x except a stretch, the note gives that stretch
    e = fieller(r["y"].to_numpy(), intercept=f.coef[0], slope=f.coef[1], resid_sd=f.resid_sd, n=f.n,
                x_mean=x.mean(), sxx=((x - x.mean()) ** 2).sum(), t=tq)
    for i in range(3):
        if np.isfinite(e.gap_low[i]):
            assert f"(every x except those between {e.gap_low[i]:.4g} and {e.gap_high[i]:.4g})" in r["note"][i]
        else:
            assert "every x except" not in r["note"][i]
    assert any(np.isfinite(e.gap_low)) and not all(np.isfinite(e.gap_low))  # both kinds were tried


def test_a_band_that_never_closes_has_no_upper_end(ref):
    # a response that levels off: y on reciprocal x; a reading near the plateau is consistent with
    # every larger x (the band does not close as x grows)
    rng = np.random.default_rng(5)
    x = np.repeat([1.0, 2, 4, 8, 16], 2)
    y = 10.0 - 8.0 / x + rng.normal(0, 0.2, x.size)
    f = unbend.fit(y, x, x_power=-1)
    top = f.coef[0]  # the plateau on the re-expressed scale: x at a negative power tends to 0
    r = f.inverse([6.0, top - 0.05, top + 5.0])
    assert np.isfinite(r["high"][0]) and r["high"][0] > r["x"][0] > r["low"][0]
    assert r["high"][1] == np.inf and np.isfinite(r["low"][1]) and np.isfinite(r["x"][1])
    assert "the interval has no upper end: the band does not close as x grows" in r["note"][1]
    # source: statsmodels OLS get_prediction, root search over x (as in the every-pair test)
    model = sm.OLS(y, sm.add_constant(ref.ladder(x, -1.0))).fit()
    for i in (0, 1):
        lo, hi = _root_search(model, -1.0, ref, r["y"][i], 1, 0.95)
        assert r["low"][i] == pytest.approx(lo, rel=1e-7) and r["high"][i] == pytest.approx(hi, rel=1e-7)
    # a reading far above the plateau: no x gives it and none is consistent with it
    assert np.isnan(r["x"][2]) and np.isnan(r["low"][2]) and np.isnan(r["high"][2])
    assert "the line levels off before this reading" in r["note"][2]
    assert "no x that reciprocal of x allows is consistent with this reading" in r["note"][2]


def test_an_interval_cut_at_the_smallest_x_a_root_allows_says_so(ref):
    rng = np.random.default_rng(6)
    x = np.repeat([0.0, 1, 4, 9, 16, 25], 2)
    y = 1.0 + 2.0 * np.sqrt(x) + rng.normal(0, 0.3, x.size)
    f = unbend.fit(y, x, x_power=0.5)
    r = f.inverse([1.0, 0.2])
    assert r["low"][0] == 0.0 and "the interval reaches down to x = 0, the smallest x that square root of x" \
        in r["note"][0]
    # source: statsmodels OLS get_prediction, root search over x: the band holds the reading down to x = 0
    model = sm.OLS(y, sm.add_constant(np.sqrt(x))).fit()
    lo, hi = _root_search(model, 0.5, ref, 1.0, 1, 0.95)
    assert lo == 0.0 and r["high"][0] == pytest.approx(hi, rel=1e-7)
    # 0.2 is below the line's value at x = 0: no estimate, and the note says why
    assert np.isnan(r["x"][1]) and r["outside_range"][1]
    assert "the line reaches this reading only below x = 0" in r["note"][1]


# ------------------------------------------------------------------------ input rules

def test_replicates_one_sample_or_one_row_per_sample():
    y, x = _calibration(seed=2)
    f = unbend.fit(y, x, y_power=0, x_power=0)
    one = f.inverse([9.0, 10.0, 11.0], replicates=3)
    assert len(one) == 1 and one["readings"][0] == 3
    assert one.equals(f.inverse([[9.0, 10.0, 11.0]], replicates=3))
    # the mean is taken on the re-expressed scale (here the geometric mean)
    single = f.inverse([np.exp(np.log([9.0, 10.0, 11.0]).mean())])
    assert one["x"][0] == pytest.approx(single["x"][0], rel=1e-12)
    assert one["high"][0] - one["low"][0] < single["high"][0] - single["low"][0]  # 1/3 in place of 1
    block = f.inverse([[9.0, 10.0, 11.0], [30.0, np.nan, 32.0]], replicates=3)
    assert list(block["readings"]) == [3, 2]
    assert "2 of 3 readings are numbers; the interval uses 2" in block["note"][1]
    assert block["x"][1] == pytest.approx(f.inverse([[30.0, 32.0]], replicates=2)["x"][0], rel=1e-12)
    with pytest.raises(unbend.UnbendError, match="replicates=3 but new_y holds 4 reading"):
        f.inverse([9.0, 10.0, 11.0, 12.0], replicates=3)
    with pytest.raises(unbend.UnbendError, match="set replicates=3 \\(got 1\\)"):
        f.inverse([[9.0, 10.0, 11.0]])
    for bad in (0, 2.5, True, "3", -1):
        with pytest.raises(unbend.UnbendError, match="replicates must be a whole number"):
            f.inverse([9.0], replicates=bad)
    assert samples([1.0, 2.0]).shape == (2, 1) and samples([[1.0], [2.0]]).shape == (2, 1)


def test_readings_that_cannot_be_used_are_said_in_words():
    y, x = _calibration(seed=2)
    f = unbend.fit(y, x, y_power=0, x_power=0)
    r = f.inverse([10.0, "n/a", 0.0, -3.0])
    assert np.isfinite(r["x"][0]) and r["note"][0] == ""
    assert r["note"][1] == "the reading is not a number" and r["readings"][1] == 0
    for i in (2, 3):
        assert np.isnan(r["x"][i]) and np.isnan(r["low"][i])
        assert "a reading cannot be re-expressed as log of y" in r["note"][i]
    with pytest.raises(unbend.UnbendError, match="needs a line with one x"):
        unbend.fit(y, np.column_stack([x, np.random.default_rng(0).uniform(1, 9, x.size)]), x_power=0).inverse([10.0])


def test_few_standards_carry_a_caution():
    f = unbend.fit([1.0, 2.1, 2.9, 4.2, 5.0], [1.0, 2, 3, 4, 5])
    assert "only 5 rows were used: treat with caution" in f.inverse([3.0])["note"][0]


# ------------------------------------------------------------------------ limits

def _sm_limits(zy, u, u0, m, level):
    """Hubaux-Vos, Currie and ICH limits on the re-expressed scale, from statsmodels' band (source:
    Hubaux and Vos 1970, Analytical Chemistry 42(8) 849-855, one-sided limits at the blank and at the
    detection limit; Currie 1968, Analytical Chemistry 40(3) 586-593, 10 sigma; ICH Q2(R1), 3.3 and
    10 times s/slope). statsmodels OLS get_prediction supplies the band."""
    model = sm.OLS(zy, sm.add_constant(u)).fit()
    a, b = model.params
    s = np.sqrt(model.scale)
    t1 = stats.t.ppf(level, model.df_resid)

    def band(v):
        fr = model.get_prediction(np.array([[1.0, v]])).summary_frame()
        mse = fr["mean_se"].iloc[0]
        return fr["mean"].iloc[0], np.sqrt(mse ** 2 + model.scale / m)

    mid0, se0 = band(u0)
    sg = np.sign(b)
    zc = mid0 + sg * t1 * se0
    uc = (zc - a) / b
    # detection: the far side of the band (towards the blank) meets zc
    ud = optimize.brentq(lambda v: band(v)[0] - sg * t1 * band(v)[1] - zc if sg > 0
                         else band(v)[0] + t1 * band(v)[1] - zc, uc, uc + 100 * abs(uc - u0) + 100,
                         xtol=1e-14, rtol=1e-15)
    uq = u0 + 10 * se0 / abs(b)
    return dict(blank=mid0, zc=zc, uc=uc, ud=ud, uq=uq, u_ich_d=u0 + 3.3 * s / abs(b), u_ich_q=u0 + 10 * s / abs(b))


@pytest.mark.parametrize("level", [0.95, 0.99])
@pytest.mark.parametrize("m", [1, 2])
def test_limits_on_a_straight_line_match_their_definitions(m, level):
    rng = np.random.default_rng(11)
    x = np.repeat([0.0, 0.5, 1, 2, 4, 8], 3)
    y = 0.2 + 1.5 * x + rng.normal(0, 0.15, x.size)
    lim = unbend.fit(y, x).detection_limits(level=level, replicates=m)
    r = _sm_limits(y, x, 0.0, m, level)
    assert lim.blank_y == pytest.approx(r["blank"], rel=1e-9)
    assert lim.critical_y == pytest.approx(r["zc"], rel=1e-9)
    assert lim.critical_x == pytest.approx(r["uc"], rel=1e-9)
    assert lim.detection_x == pytest.approx(r["ud"], rel=1e-9)
    assert lim.quantification_x == pytest.approx(r["uq"], rel=1e-9)
    assert lim.ich_detection_x == pytest.approx(r["u_ich_d"], rel=1e-9)
    assert lim.ich_quantification_x == pytest.approx(r["u_ich_q"], rel=1e-9)
    assert 0 < lim.critical_x < lim.detection_x  # common practice: the detection limit lies beyond the decision level
    labels = dict((k, d) for k, _, d in lim.rows())
    assert any(k.startswith("detection limit, x (Hubaux-Vos 1970)") for k in labels)
    assert any(k.startswith("quantification limit, x (ICH Q2(R1): 10 s/slope)") for k in labels)
    assert labels["level (one-sided)"] == f"alpha = beta = {1 - level:g}"


def test_limits_of_a_falling_line_match_their_definitions():
    rng = np.random.default_rng(12)
    x = np.repeat([0.0, 1, 2, 4, 8], 2)
    y = 20.0 - 1.8 * x + rng.normal(0, 0.3, x.size)
    lim = unbend.fit(y, x).detection_limits()
    r = _sm_limits(y, x, 0.0, 1, 0.95)
    assert lim.critical_y == pytest.approx(r["zc"], rel=1e-9) and lim.critical_y < lim.blank_y
    assert lim.detection_x == pytest.approx(r["ud"], rel=1e-9)
    assert any("falls as x grows" in nt for nt in lim.notes)


@pytest.mark.parametrize("py,px,xs", [(0.5, 0.5, 0.0), (0.0, 1.0, 0.0), (0.5, 0.0, 1.0), (-0.5, -1.0, 2.0)])
def test_limits_after_a_re_expression_are_the_band_taken_back(py, px, xs, ref):
    rng = np.random.default_rng(13)
    x = np.repeat([0.0, 0.5, 1, 2, 4, 8, 16], 2)
    y = (1.0 + 0.8 * np.sqrt(x) + rng.normal(0, 0.05, x.size)) ** 2
    f = unbend.fit(y, x, y_power=py, x_power=px, x_start=xs)
    lim = f.detection_limits()
    u = ref.ladder(x + xs, px)
    r = _sm_limits(ref.ladder(y, py), u, float(ref.ladder(xs, px)), 1, 0.95)  # the blank x = 0 re-expressed

    def back_x(v):
        return ref.ladder_inv(v, px) - xs

    assert lim.blank_y == pytest.approx(ref.ladder_inv(r["blank"], py), rel=1e-9)
    assert lim.critical_y == pytest.approx(ref.ladder_inv(r["zc"], py), rel=1e-9)
    for name, key in [("critical_x", "uc"), ("detection_x", "ud"), ("quantification_x", "uq"),
                      ("ich_detection_x", "u_ich_d"), ("ich_quantification_x", "u_ich_q")]:
        if px < 0 and r[key] >= 0:  # past what a negative power of x reaches: x would have to grow without end
            assert np.isnan(getattr(lim, name)) and lim.why[name].startswith("not reached: the line on the")
        else:
            assert getattr(lim, name) == pytest.approx(back_x(r[key]), rel=1e-8, abs=1e-12), name
    assert any("The band is built on the re-expressed scale" in nt for nt in lim.notes)
    if py == 0:
        assert any("Log of y cannot hold a reading of 0" in nt for nt in lim.notes)


@pytest.mark.parametrize("px", [0.0, -0.5, -1.0])
def test_limits_are_refused_in_words_when_the_blank_has_no_place_on_the_scale(px):
    y, x = _calibration(seed=2)
    lim = unbend.fit(y, x, y_power=0, x_power=px).detection_limits()
    for name in ("critical_x", "detection_x", "quantification_x", "ich_detection_x", "ich_quantification_x"):
        assert np.isnan(getattr(lim, name))
        assert "the blank (x = 0) cannot be re-expressed" in lim.why[name]
    rows = {k: (v, d) for k, v, d in lim.rows()}
    assert rows["detection limit, x (Hubaux-Vos 1970)"][1].startswith("not defined: the blank (x = 0)")
    # with a start, x = 0 has a place on the scale and the limits exist
    ok = unbend.fit(y, x, y_power=0, x_power=px, x_start=1.0).detection_limits()
    assert np.isfinite(ok.detection_x) and not any("blank" in w for w in ok.why.values())


def test_detection_limit_is_refused_when_the_slope_is_not_significant():
    rng = np.random.default_rng(4)
    x = np.repeat([0.0, 1, 2, 3, 4], 2)
    y = 10.0 + 0.05 * x + rng.normal(0, 1.0, x.size)
    f = unbend.fit(y, x)
    t1 = stats.t.ppf(0.95, f.df_resid)
    assert abs(f.tvalues[1]) < t1
    lim = f.detection_limits()
    assert np.isnan(lim.detection_x)
    assert lim.why["detection_x"] == (f"the slope is not significant at the one-sided 95% level (its t is "
                                      f"{abs(f.tvalues[1]):.3g}, below the {t1:.3g} needed), so the band never "
                                      "separates from the blank")


def test_limits_note_extrapolation_to_the_blank():
    y, x = _calibration(seed=2)  # lowest standard is 1
    lim = unbend.fit(y, x, y_power=0.5, x_power=0.5).detection_limits()
    assert any("x = 0 lies below the lowest standard (1)" in nt for nt in lim.notes)


# ------------------------------------------------------------------------ hostile inputs
# The engine fuzz helpers (hypothesis profiles, hostile cells, the no-change and no-warning checks);
# only helpers are imported, so no test is collected twice. Generated data prove properties only.
from hypothesis import example, given  # noqa: E402
from hypothesis import strategies as st  # noqa: E402
from test_engine_fuzz import (PROFILE, UNUSUAL, USUAL, _make_fit, fit_args, hostile_cell, mostly,  # noqa: E402
                              new_points, no_leak, numeric_cell, run)

INVERSE_COLUMNS = ["y", "readings", "x", "low", "high", "outside_range", "note"]
# cases the random profile found, kept so that the quick run tries them every time
_X8 = [32.02960352241199, 13.85444233131158, 2.528189434841637, 1.31811795866219, 40.75687684041348,
       45.68140107524722, 30.528470900475405, 36.61007976870792]
_TINY_Y = ([7.104533695751568e-300, 2.5590544181709402e-300, 1.6516166221243137e-300, 1.7756580627582576e-300,
            7.94734322351931e-300, 1.5491813466960275e-299, 5.913520595952857e-300, 8.882211044376695e-300], _X8, 8, 1,
           {"y_power": 2.0, "x_power": 2.0, "level": 0.95, "log10": False, "y_family": "yeo-johnson"})
_EXACT_ROOT = ([2.0 * np.sqrt(v) for v in _X8], _X8, 8, 1,
               {"y_power": 1.0, "x_power": 0.5, "level": 0.95, "log10": False, "y_family": "ladder"})
_UNDERFLOW_X = ([7.104533695751568, 2.5590544181709403, 1.6516166221243138, 1.7756580627582577, 7.94734322351931,
                 15.491813466960275, 5.913520595952857, 8.882211044376694], [v * 1e-150 for v in _X8], 8, 1,
                {"y_power": 2.0, "x_power": 2.0, "level": 0.95, "log10": False, "y_family": "ladder"})
replicates_arg = st.one_of(st.sampled_from([1, 1, 1, 2, 3]), st.sampled_from([0, -1, 2.5, True, "3", None, 1e9]))


@st.composite
def measured(draw):
    """Readings in any of the accepted forms, or a form that must be refused in words."""
    if draw(st.booleans()):
        return draw(new_points(1))[0]
    cells = st.one_of(numeric_cell, hostile_cell, st.floats(min_value=0.1, max_value=100))
    width = draw(st.integers(min_value=1, max_value=4))
    rows = draw(st.lists(st.lists(cells, min_size=width, max_size=width), min_size=0, max_size=5))
    return np.array(rows, dtype=object) if draw(st.booleans()) and rows else rows


@PROFILE
@example(args=_TINY_Y, new_y=[1.0], level=1e-9, replicates=1)
@example(args=_TINY_Y, new_y=[1.0, 1e-299], level=0.95, replicates=1)
@given(args=fit_args(unusual=False), new_y=measured(), level=mostly(USUAL["level"], UNUSUAL["level"]),
       replicates=replicates_arg)
def test_inverse_on_hostile_input(args, new_y, level, replicates):
    f = _make_fit(args)
    if f is None:
        return
    (status, r), leak = run(f.inverse, new_y, level=level, replicates=replicates)
    if status == "ok":
        assert len(f.x_names) == 1
        assert list(r.columns) == INVERSE_COLUMNS and r["outside_range"].dtype == bool
        for i in range(len(r)):
            x, lo, hi, note = r["x"].iloc[i], r["low"].iloc[i], r["high"].iloc[i], r["note"].iloc[i]
            assert isinstance(note, str)
            if np.isnan(x):
                assert note, "a sample without an estimate must say why"
            elif not (np.isnan(lo) or np.isnan(hi)):
                assert lo <= x <= hi, (lo, x, hi)
            if np.isinf(lo) or np.isinf(hi) or (np.isnan(lo) and r["readings"].iloc[i] > 0):
                assert note, "an open or missing end must be said in words"
    no_leak(leak, "LineFit.inverse")


@PROFILE
@example(args=_EXACT_ROOT, level=0.95, replicates=1)
@example(args=_UNDERFLOW_X, level=0.95, replicates=1)
@given(args=fit_args(unusual=False), level=mostly(USUAL["level"], UNUSUAL["level"]), replicates=replicates_arg)
def test_detection_limits_on_hostile_input(args, level, replicates):
    f = _make_fit(args)
    if f is None:
        return
    (status, lim), leak = run(f.detection_limits, level=level, replicates=replicates)
    if status == "ok":
        for name in ("blank_y", "critical_y", "critical_x", "detection_x", "quantification_x",
                     "ich_detection_x", "ich_quantification_x"):
            v = getattr(lim, name)
            assert np.isfinite(v) or (np.isnan(v) and lim.why.get(name)), (name, v)
        if np.isfinite(lim.critical_x) and np.isfinite(lim.detection_x):
            assert lim.critical_x <= lim.detection_x
        for label, value, definition in lim.rows():
            assert isinstance(label, str) and isinstance(definition, str) and "\n" not in definition
    no_leak(leak, "LineFit.detection_limits")


finite_or_odd = st.one_of(st.floats(min_value=-1e6, max_value=1e6), st.sampled_from([0.0, 1e308, -1e308, 1e-308,
                                                                                      np.nan, np.inf]))


@PROFILE
@given(reading=st.lists(finite_or_odd, max_size=5), a=finite_or_odd, b=finite_or_odd, s=finite_or_odd,
       sxx=finite_or_odd, n=st.integers(min_value=3, max_value=10**6), m=st.integers(min_value=1, max_value=50))
def test_fieller_never_warns(reading, a, b, s, sxx, n, m):
    (status, e), leak = run(fieller, reading, intercept=a, slope=b, resid_sd=abs(s), n=n, x_mean=1.0,
                            sxx=abs(sxx), t=2.0, replicates=m)
    assert status == "ok"
    assert e.estimate.shape == e.low.shape == e.high.shape == (len(reading),)
    closed = (e.g < 1) & np.isfinite(e.low)
    assert np.all(e.low[closed] <= e.high[closed])
    no_leak(leak, "fieller")


@pytest.mark.parametrize("px", [0.0, -1.0])
def test_an_open_set_runs_down_to_the_edge_the_x_power_gives(px):
    """Weak slope, x on log or reciprocal with a start of 0.5: x + 0.5 must stay above 0, so the set of x that
    fits a reading runs down to x = -0.5 (x' without end below), not to minus infinity. Checked on statsmodels'
    prediction band: the reading lies inside the band at an x a hair above -0.5."""
    rng = np.random.default_rng(212)  # invented: hardly any trend
    x = np.linspace(1.0, 10.0, 10)
    xre = np.log(x + 0.5) if px == 0 else -1.0 / (x + 0.5)
    y = 5.0 + 0.3 * xre + rng.normal(0, 1.0, x.size)
    f = unbend.fit(y, x, y_power=1, x_power=px, x_start=0.5)
    assert abs(f.tvalues[1]) < stats.t.ppf(0.975, f.df_resid)  # the premise: no closed interval
    r = f.inverse([f.coef[0] + f.coef[1] * float(np.mean(xre))])  # a reading at the standards' mean
    assert r["low"].iloc[0] == -0.5 and np.isfinite(r["x"].iloc[0])
    assert "no closed interval" in r["note"].iloc[0]
    # source: statsmodels OLS get_prediction, the 95% band for one new reading at x = -0.5 + 1e-9
    model = sm.OLS(y, sm.add_constant(xre)).fit()
    near = np.log(1e-9) if px == 0 else -1.0 / 1e-9
    lo, hi = model.get_prediction(np.array([[1.0, near]])).conf_int(obs=True, alpha=0.05)[0]
    assert lo <= r["y"].iloc[0] <= hi
