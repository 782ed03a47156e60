"""engine/_dist.py against scipy.stats (source: scipy.stats, a general-purpose reference library).

The engine takes t, chi-squared and F tail areas and quantiles from scipy.special so that a short
command need not import scipy.stats; these checks hold every one to scipy.stats' own value.
"""
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats as ref

from unbend import _dist


@pytest.fixture(scope="module")
def grid():
    rng = np.random.default_rng(2026)
    x = np.concatenate([rng.normal(0, 3, 200), [-40.0, -1e-9, 0.0, 1e-9, 40.0]])
    df = np.concatenate([rng.uniform(1, 300, 200), [1.0, 2.0, 3.0, 1e4, 7.5]])
    q = np.concatenate([rng.uniform(0.001, 0.999, 200), [0.5, 0.9, 0.95, 0.975, 0.999]])
    return x, df, q


def test_tail_areas_and_quantiles_equal_scipy_stats(grid):
    x, df, q = grid
    np.testing.assert_allclose(_dist.t.sf(x, df), ref.t.sf(x, df), rtol=1e-13, atol=0)
    np.testing.assert_allclose(_dist.t.ppf(q, df), ref.t.ppf(q, df), rtol=1e-13, atol=1e-300)
    ax = np.abs(x) * 3
    np.testing.assert_allclose(_dist.chi2.sf(ax, df), ref.chi2.sf(ax, df), rtol=1e-13, atol=0)
    np.testing.assert_allclose(_dist.chi2.sf(-1.0, 3), ref.chi2.sf(-1.0, 3))  # below the support: 1
    np.testing.assert_allclose(_dist.chi2.ppf(q, df), ref.chi2.ppf(q, df), rtol=1e-13)
    np.testing.assert_allclose(_dist.f.sf(ax, df, df[::-1]), ref.f.sf(ax, df, df[::-1]), rtol=1e-13, atol=0)
    assert _dist.chi2.ppf(0.95, 1) == pytest.approx(3.841458820694124, rel=1e-12)  # common practice: 3.84


@pytest.mark.parametrize("method", ["average", "min"])
def test_ranks_equal_scipy_stats(method):
    rng = np.random.default_rng(7)
    for a in (rng.integers(0, 6, 50).astype(float), rng.normal(size=31), np.array([2.0]), np.array([]),
              np.array([1.0, 1.0, 1.0])):
        np.testing.assert_array_equal(_dist.rankdata(a, method=method), ref.rankdata(a, method=method))


def test_a_large_fit_does_not_import_scipy_stats():
    # above 5,000 rows normality is D'Agostino-Pearson (no Shapiro-Wilk), so nothing needs scipy.stats
    code = ("import sys, numpy as np, unbend\n"
            "x = np.linspace(1, 100, 6000); y = 2 + 0.5 * x + np.sin(np.arange(6000))\n"
            "f = unbend.fit(y, x, y_power=1, x_power=1); f.predict([5.0, 50.0])\n"
            "unbend.scan(y, x)\n"
            "print('scipy.stats' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "False"
