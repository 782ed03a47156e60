"""Residual checks: curvature, change of spread, normality, and a verdict in words."""
from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import special

from . import _dist as stats

__all__ = ["Check", "curvature_test", "pattern_bins", "pattern_test", "spread_test", "normality_test", "verdict"]

#: Significance level the curvature and spread checks use to call a problem (common practice).
ALPHA = 0.05
#: The pattern check is a second, broader look at the same question as the
#: curvature check; a stricter level keeps the two from doubling false alarms.
PATTERN_ALPHA = 0.01
#: The normality check calls a problem at this stricter level: intervals for the line
#: lean little on normal residuals, so only a clear departure is reported.
NORMALITY_ALPHA = ALPHA / 5
#: From this many rows on, the verdict adds that a normality test flags even small
#: departures (common practice: the power of the test grows with n while the harm does not).
NORMALITY_LARGE_N = 200


def chi2_sf(x: float, k) -> float:
    """Upper tail of the chi-square distribution with ``k`` degrees of freedom.

    The same numbers as ``scipy.stats.chi2.sf`` (which computes them with ``scipy.special.chdtrc``),
    without its per-call overhead; a negative statistic (rounding) gives 1, as there.
    """
    return 1.0 if x < 0 else float(special.chdtrc(k, x))


def t_two_sided(t: float, df) -> float:
    """Two-sided p-value of Student's t: ``2 * scipy.stats.t.sf(|t|, df)``, via ``scipy.special.stdtr``."""
    return float(2 * special.stdtr(df, -abs(t)))


@dataclass(frozen=True)
class Check:
    """One residual check.

    Attributes
    ----------
    name : str
        Test used.
    statistic, pvalue : float
        NaN when the test could not be run (too few rows).
    passed : bool or None
        True when the check finds no problem at its level (:data:`ALPHA`,
        :data:`PATTERN_ALPHA` or :data:`NORMALITY_ALPHA`); None when not run.
    direction : float
        Sign of the departure: for curvature, the sign of the squared-term
        coefficient (+1 residuals bow up at both ends, -1 bow down); for
        spread, +1 when spread grows with the fitted value, -1 when it shrinks.
    """

    name: str
    statistic: float
    pvalue: float
    passed: bool | None
    direction: float = 0.0

    @property
    def ran(self) -> bool:
        return self.passed is not None


def _not_run(name: str) -> Check:
    return Check(name, float("nan"), float("nan"), None, 0.0)


def make_check(name: str, statistic, pvalue, alpha: float, direction: float = 0.0) -> Check:
    """A Check, or 'not run' when the statistic or p-value could not be computed (overflow, say)."""
    statistic, pvalue = float(statistic), float(pvalue)
    if not np.isfinite(pvalue) or np.isnan(statistic):
        return _not_run(name)
    return Check(name, statistic, pvalue, bool(pvalue >= alpha), float(direction) if np.isfinite(direction) else 0.0)


def curvature_test(A: np.ndarray, y: np.ndarray, fitted: np.ndarray) -> Check:
    """Tukey's one-degree-of-freedom test for curvature.

    The squared, centred fitted value is added to the line as one extra
    column; its t test asks whether the residuals still bend.

    Parameters
    ----------
    A : ndarray (n, p)
        Design of the line, intercept included.
    y : ndarray (n,)
        Re-expressed response.
    fitted : ndarray (n,)
        Fitted values of the line.

    References
    ----------
    Tukey, J. W. (1949). One degree of freedom for non-additivity.
    *Biometrics* 5(3), 232-242.
    """
    n, p = A.shape
    if n < p + 3:
        return _not_run("Tukey one-degree-of-freedom")
    f = fitted - fitted.mean()
    sd = f.std()
    if sd == 0 or not np.isfinite(sd):
        return _not_run("Tukey one-degree-of-freedom")
    q = (f / sd) ** 2
    B = np.column_stack([A, q - q.mean()])
    Q, R = np.linalg.qr(B)
    if abs(R[-1, -1]) <= 1e-10 * np.abs(np.diag(R)).max():
        return _not_run("Tukey one-degree-of-freedom")
    coef = np.linalg.solve(R, Q.T @ y)
    r = y - B @ coef
    df = n - p - 1
    s2 = float(r @ r) / df
    Rinv = np.linalg.inv(R)
    se = np.sqrt(s2 * float(Rinv[-1] @ Rinv[-1]))
    if se == 0:
        t = np.inf if coef[-1] else 0.0
        pv = 0.0 if coef[-1] else 1.0
    else:
        t = float(coef[-1] / se)
        pv = t_two_sided(t, df)
    return make_check("Tukey one-degree-of-freedom", t, pv, ALPHA, np.sign(coef[-1]))


def pattern_bins(key: np.ndarray) -> np.ndarray:
    """Bin number (0 .. k-1) of each row: k = n // 8 bins, 3 to 10, of about equal size in order of ``key``.

    Rows with tied keys share a bin, so shuffling the rows changes nothing.
    """
    n = key.size
    k = int(np.clip(n // 8, 3, 10))  # at most 10 bins: pattern_test keeps the bin in 4 bits
    # tied values share a bin (that of their lowest rank), so the bins do not depend on row order
    rank = stats.rankdata(key, method="min").astype(np.intp) - 1
    return rank * k // n


@functools.lru_cache(maxsize=8)
def _positions(n: int) -> np.ndarray:
    out = np.arange(1.0, n + 1.0)
    out.flags.writeable = False
    return out


def pattern_test(resid: np.ndarray, bins: np.ndarray) -> Check:
    """Residual pattern by level: Kruskal–Wallis test across bins of x (or of the fitted value).

    The rows are cut into 3 to 10 bins of about equal size in order of x
    (with several x columns, of the fitted value; see :func:`pattern_bins`).
    If the residuals in some bins sit systematically above or below the
    others, the line misses a shape that a squared term may not catch (a
    sharp bend, a kink, a levelling off). Ranks make the check robust to a
    few wild residuals. It calls a problem at the 1% level.

    References
    ----------
    Kruskal, W. H. and Wallis, W. A. (1952). Use of ranks in one-criterion
    variance analysis. *JASA* 47(260), 583-621.
    """
    n = resid.size
    name = "Kruskal-Wallis across bins of x"
    if n < 12 or (resid.max() == resid.min()):
        return _not_run(name)
    cnt = np.bincount(bins).astype(float)
    # Rank sums by bin from one integer sort: each residual becomes an order-preserving 64-bit key
    # whose lowest 4 bits carry its bin (a sort is several times cheaper than an argsort).
    bits = (np.ascontiguousarray(resid, dtype=float) + 0.0).view(np.int64)  # + 0.0 turns -0.0 into 0.0
    key = bits ^ ((bits >> 63) & np.int64(0x7FFFFFFFFFFFFFFF))
    key = (key & ~np.int64(15)) | bins
    key.sort()
    high = key >> 4
    if (high[1:] == high[:-1]).any():  # ties (or values equal to 14 digits): exact average ranks
        srt = np.sort(resid)
        same = srt[1:] == srt[:-1]
        t = np.diff(np.flatnonzero(np.concatenate(([True], ~same, [True]))))
        ties = 1.0 - float(np.sum(t.astype(float) ** 3 - t)) / (float(n) ** 3 - n)
        rsum = np.bincount(bins, weights=stats.rankdata(resid), minlength=cnt.size)
    else:
        ties = 1.0
        rsum = np.bincount(key & 15, weights=_positions(n), minlength=cnt.size)
    full = cnt > 0  # tied x can leave a bin empty
    if int(full.sum()) < 2:
        return _not_run(name)
    cnt, rsum = cnt[full], rsum[full]
    h = 12.0 / (n * (n + 1.0)) * float(np.sum(rsum ** 2 / cnt)) - 3.0 * (n + 1.0)
    h = h / ties if ties > 0 else 0.0
    pv = chi2_sf(h, cnt.size - 1)
    return make_check(name, h, pv, PATTERN_ALPHA)


def spread_test(Xt: np.ndarray, resid: np.ndarray, fitted: np.ndarray) -> Check:
    """Breusch–Pagan test (Koenker's studentized form) for spread that changes.

    Squared residuals are regressed on the x columns; ``n R^2`` is compared
    with chi-square on as many degrees of freedom as there are x columns.

    References
    ----------
    Breusch, T. S. and Pagan, A. R. (1979). A simple test for
    heteroscedasticity and random coefficient variation. *Econometrica*
    47(5), 1287-1294.
    Koenker, R. (1981). A note on studentizing a test for heteroscedasticity.
    *Journal of Econometrics* 17(1), 107-112.
    """
    n, k = Xt.shape
    if n < k + 3:
        return _not_run("Breusch-Pagan (Koenker)")
    with np.errstate(all="ignore"):
        top = np.max(np.abs(resid)) if resid.size else 0.0
        e2 = (resid / top) ** 2 if top > 0 and np.isfinite(top) else resid ** 2  # scaled: no underflow
    if not np.all(np.isfinite(e2)):
        return _not_run("Breusch-Pagan (Koenker)")
    if (e2.max() == e2.min()):
        return Check("Breusch-Pagan (Koenker)", 0.0, 1.0, True, 0.0)
    sc = Xt.std(axis=0)
    sc[sc == 0] = 1.0
    B = np.column_stack([np.ones(n), (Xt - Xt.mean(axis=0)) / sc])
    coef, *_ = np.linalg.lstsq(B, e2, rcond=None)
    r = e2 - B @ coef
    d = e2 - e2.mean()
    dd = float(d @ d)
    if dd <= 0 or not np.isfinite(dd):
        return _not_run("Breusch-Pagan (Koenker)")
    r2 = 1.0 - float(r @ r) / dd
    lm = n * r2
    pv = chi2_sf(lm, k)
    c = np.corrcoef(np.abs(resid), fitted)[0, 1] if (fitted.max() > fitted.min()) else 0.0
    return make_check("Breusch-Pagan (Koenker)", lm, pv, ALPHA,
                 float(np.sign(c)) if np.isfinite(c) else 0.0)


def normality_test(resid: np.ndarray) -> Check:
    """Shapiro–Wilk for up to 5,000 residuals, D'Agostino–Pearson above that.

    References
    ----------
    Shapiro, S. S. and Wilk, M. B. (1965). *Biometrika* 52(3/4), 591-611.
    D'Agostino, R. B. and Pearson, E. S. (1973). *Biometrika* 60(3), 613-622.
    """
    n = resid.size
    if n < 8 or (resid.max() == resid.min()):
        return _not_run("Shapiro-Wilk")
    if not np.all(np.isfinite(resid)):
        return _not_run("Shapiro-Wilk")
    if n <= 5000:
        import warnings
        with warnings.catch_warnings():  # a near-constant column warns; the p-value says enough
            warnings.simplefilter("ignore")
            st, pv = stats.shapiro(resid)
        name = "Shapiro-Wilk"
    else:
        st, pv = dagostino_pearson(resid)
        name = "D'Agostino-Pearson"
    return make_check(name, st, pv, NORMALITY_ALPHA)


def dagostino_pearson(a: np.ndarray):
    """D'Agostino–Pearson omnibus test of normality, from the sample moments in one sweep.

    Same statistic as ``scipy.stats.normaltest`` (the tests hold it to that),
    computed from the second, third and fourth central moments at once.

    References
    ----------
    D'Agostino, R. B. (1971). *Biometrika* 58(2), 341-348.
    D'Agostino, R. B. and Pearson, E. S. (1973). *Biometrika* 60(3), 613-622.
    Anscombe, F. J. and Glynn, W. J. (1983). *Biometrika* 70(1), 227-234.
    """
    n = float(a.size)
    r = a - a.mean()
    r2 = r * r
    m2 = float(np.einsum("i->", r2)) / n
    m3 = float(np.einsum("i,i->", r2, r)) / n
    m4 = float(np.einsum("i,i->", r2, r2)) / n
    if m2 <= 0 or not np.isfinite(m4):
        return float("nan"), float("nan")
    # skewness test
    b1 = m3 / m2 ** 1.5
    y = b1 * np.sqrt(((n + 1) * (n + 3)) / (6.0 * (n - 2)))
    beta2 = (3.0 * (n * n + 27 * n - 70) * (n + 1) * (n + 3)) / ((n - 2.0) * (n + 5) * (n + 7) * (n + 9))
    w2 = -1 + np.sqrt(2 * (beta2 - 1))
    delta = 1 / np.sqrt(0.5 * np.log(w2))
    alpha = np.sqrt(2.0 / (w2 - 1))
    y = 1.0 if y == 0 else y
    zs = delta * np.log(y / alpha + np.sqrt((y / alpha) ** 2 + 1))
    # kurtosis test
    b2 = m4 / (m2 * m2)
    e = 3.0 * (n - 1) / (n + 1)
    varb2 = 24.0 * n * (n - 2) * (n - 3) / ((n + 1) * (n + 1.0) * (n + 3) * (n + 5))
    x = (b2 - e) / np.sqrt(varb2)
    sqrtbeta1 = 6.0 * (n * n - 5 * n + 2) / ((n + 7) * (n + 9)) * np.sqrt((6.0 * (n + 3) * (n + 5))
                                                                          / (n * (n - 2) * (n - 3)))
    aa = 6.0 + 8.0 / sqrtbeta1 * (2.0 / sqrtbeta1 + np.sqrt(1 + 4.0 / (sqrtbeta1 ** 2)))
    term1 = 1 - 2 / (9.0 * aa)
    denom = 1 + x * np.sqrt(2 / (aa - 4.0))
    if denom == 0:
        return float("nan"), float("nan")
    term2 = np.sign(denom) * ((1 - 2.0 / aa) / abs(denom)) ** (1 / 3.0)
    zk = (term1 - term2) / np.sqrt(2 / (9.0 * aa))
    k2 = float(zs * zs + zk * zk)
    return k2, chi2_sf(k2, 2)


def verdict(r2: float, curvature: Check, spread: Check, normality: Check, n: int,
            pattern: Check | None = None, *, bend=None) -> str:
    """A few plain sentences on what the residual checks found (see :func:`unbend.wording.verdict`).

    ``bend`` (a :class:`unbend.wording.Bend`) lets the words name the next rung
    to try by the bulging rule of Mosteller and Tukey (1977).
    """
    from .wording import verdict as words
    return words(r2, curvature, spread, normality, n, pattern, bend=bend)
