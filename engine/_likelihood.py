"""Profile likelihoods over a power and their maximum with a likelihood-ratio interval.

Numerics: powers are evaluated on logs centred by their mean,
``expm1(p * (log v - mean log v)) / p``, which is an affine change of
``v**p`` (so the residual sum of squares of a line with an intercept changes
only by a known factor) and neither overflows for large ``|p|`` nor loses
digits as ``p`` nears 0.
"""
from __future__ import annotations

import numpy as np
from scipy import optimize

from . import _dist as stats

from ._validation import UnbendError

_LOG2PI1 = np.log(2.0 * np.pi) + 1.0
_TINY = 1e-300


def dot(a: np.ndarray, b: np.ndarray) -> float:
    """Dot product of two vectors without BLAS threads (they cost more than they save at this size,
    and thrash on a busy two-core machine)."""
    return float(np.einsum("i,i->", a, b))


def centred_power(d: np.ndarray, p: float) -> np.ndarray:
    """``expm1(p * d) / p`` with its limit ``d`` at p = 0 (d: centred logs)."""
    if abs(p) < 1e-12:
        return d.copy() if d.ndim else d
    with np.errstate(over="ignore", invalid="ignore"):
        return np.expm1(p * d) / p


class Design:
    """Orthonormal basis of [1, X] for residual sums of squares."""

    def __init__(self, X: np.ndarray | None):
        self.X = X
        self.q = None
        if X is None:
            self.Q = None
            return
        if not np.isfinite(X).all():
            raise UnbendError("x has values that cannot be re-expressed at this power; add a start or choose another power.")
        big = np.max(np.abs(X), axis=0)
        big[(big == 0) | ~np.isfinite(big)] = 1.0
        X = X / big  # columns scaled to at most 1: no overflow in the mean or spread
        mu = X.mean(axis=0)
        sc = X.std(axis=0)
        if np.any(sc == 0):
            raise UnbendError("x does not vary (every x value is the same); a line needs at least two different x values.")
        if X.shape[1] == 1:  # one column: the basis is the centred column, scaled to length 1
            c = (X[:, 0] - mu[0]) / sc[0]
            self.q = c / np.sqrt(dot(c, c))
            self.Q = None
            return
        A = np.column_stack([np.ones(X.shape[0]), (X - mu) / sc])
        Q, R = np.linalg.qr(A)
        d = np.abs(np.diag(R))
        if d.min() <= d.max() * 1e-12:
            raise UnbendError("the x columns are collinear (one is a combination of the others); remove one.")
        self.Q = Q

    def subset(self, idx: np.ndarray) -> "Design":
        return Design(None if self.X is None else self.X[idx])

    def residuals(self, u: np.ndarray) -> np.ndarray:
        if self.Q is None:
            r = u - u.mean()
            return r if self.q is None else r - dot(self.q, r) * self.q
        return u - self.Q @ (self.Q.T @ u)

    def rss(self, u: np.ndarray) -> float:
        with np.errstate(all="ignore"):  # overflow gives inf: that power is then simply not chosen
            if self.Q is None:  # three passes, no temporary arrays; exact fallback if digits are lost
                n = u.size
                s1 = float(u.sum())
                s2 = dot(u, u)
                out = s2 - s1 * s1 / n
                if self.q is not None:
                    c = dot(self.q, u)
                    out -= c * c
                if np.isfinite(out) and out > 1e-8 * s2:
                    return out
                if not np.isfinite(s2):
                    return float("inf")
            r = self.residuals(u)
            return dot(r, r)


def gaussian_loglik(rss: float, n: int) -> float:
    """Maximised normal log-likelihood of a linear model with residual sum of squares ``rss``."""
    if not rss < np.inf:  # inf or NaN: this power cannot be evaluated
        return -np.inf
    return -0.5 * n * (_LOG2PI1 + np.log(max(rss, _TINY) / n))


class BoxCoxProfile:
    """Profile log-likelihood of y's power, Jacobian included (values must be > 0 for the ladder)."""

    def __init__(self, v: np.ndarray, design: Design | None, family: str = "ladder"):
        self.family = family
        self.design = design if design is not None else Design(None)
        self.n = v.size
        self._v = v
        if family == "ladder":
            logv = np.log(v)
            self.m = float(logv.mean())
            self.d = logv - self.m
            self._buf = np.empty_like(self.d)
            #: added to the profile to give the log-likelihood in the units of y (kept out of the
            #: maximisation so that huge or tiny scales lose no digits there)
            self.offset = -self.n * self.m
        else:
            self.offset = 0.0
            self.v = v
            self.jac = float(np.sum(np.sign(v) * np.log1p(np.abs(v))))

    def subset(self, idx: np.ndarray) -> "BoxCoxProfile":
        return BoxCoxProfile(self._v[idx], self.design.subset(idx), self.family)

    def loglik(self, lam: float) -> float:
        """Log-likelihood in the original units of y at power ``lam``."""
        if self.family == "ladder":
            # RSS of (v**lam - 1)/lam is exp(2 lam m) * RSS(u), u = expm1(lam d)/lam, and the Jacobian
            # is (lam-1) n m: together a constant (self.offset) plus the Gaussian term of RSS(u).
            u = self._buf
            with np.errstate(over="ignore", invalid="ignore"):
                if abs(lam) < 1e-12:
                    rss = self.design.rss(self.d)
                else:
                    np.multiply(self.d, lam, out=u)
                    np.expm1(u, out=u)
                    rss = self.design.rss(u) / (lam * lam)
            if not np.isfinite(rss):
                return -np.inf
            return gaussian_loglik(rss, self.n)
        from .express import _yj
        with np.errstate(all="ignore"):
            t = _yj(self.v, lam)
            if not np.all(np.isfinite(t)):
                return -np.inf
            out = gaussian_loglik(self.design.rss(t), self.n) + (lam - 1.0) * self.jac
        return out if np.isfinite(out) else -np.inf


class XPowerProfile:
    """Profile log-likelihood over a power shared by the x columns (x must be > 0)."""

    def __init__(self, yt: np.ndarray, xpos: np.ndarray):
        self._yt, self._x = yt, xpos
        if not np.all(np.isfinite(yt)):
            raise UnbendError("y has values that cannot be re-expressed at this power; add a start or choose another power.")
        yc = yt - yt.mean()
        scale = float(np.max(np.abs(yc))) if yc.size else 1.0
        scale = scale if scale > 0 and np.isfinite(scale) else 1.0
        self.y = yc / scale  # sums in scaled units: no overflow or underflow at extreme scales
        #: added to the profile to give the log-likelihood in the units of y
        self.offset = -yt.size * np.log(scale)
        L = np.log(xpos)
        self.D = L - L.mean(axis=0)
        if np.any(self.D.std(axis=0) == 0):
            raise UnbendError("x does not vary (every x value is the same); a line needs at least two different x values.")
        self.n = yt.size

    def subset(self, idx: np.ndarray) -> "XPowerProfile":
        return XPowerProfile(self._yt[idx], self._x[idx])

    def loglik(self, alpha: float) -> float:
        U = centred_power(self.D, alpha)
        if not np.all(np.isfinite(U)):
            return -np.inf
        U = U - U.mean(axis=0)
        if U.shape[1] == 1:
            u = U[:, 0]
            suu = dot(u, u)
            if suu <= 0:
                return -np.inf
            suy = dot(u, self.y)
            rss = dot(self.y, self.y) - suy * suy / suu
            # guard against cancellation when the fit is nearly exact
            if rss < 1e-8 * dot(self.y, self.y):
                r = self.y - u * (suy / suu)
                rss = dot(r, r)
        else:
            if not np.all(np.isfinite(U)):
                return -np.inf
            try:
                coef, *_ = np.linalg.lstsq(U, self.y, rcond=None)
            except np.linalg.LinAlgError:
                return -np.inf
            r = self.y - U @ coef
            rss = dot(r, r)
        return gaussian_loglik(rss, self.n)


#: Powers beyond +-this are not searched.
SEARCH_LIMIT = 20.0
#: Above this many rows a subsample finds the neighbourhood first.
SUBSAMPLE_ABOVE = 40_000
SUBSAMPLE_SIZE = 5_000


class _NoShortcut(Exception):
    pass


def profile_max(profile, level: float, *, limit: float = 20.0):
    """Maximum and likelihood-ratio interval of a profile object (with ``n``, ``loglik``, ``subset``).

    For large data a seeded random subsample locates the maximum and the
    interval ends; the full data then refine them inside narrow brackets, so
    only a few dozen passes over the full data are made. The answer is the
    full-data answer (the subsample only chooses where to look); if the
    brackets do not hold, the full search runs instead.
    """
    with np.errstate(all="ignore"):  # powers where the likelihood is -inf are simply not chosen
        return _profile_max(profile, level, limit)


def _profile_max(profile, level, limit):
    n = profile.n
    if n > SUBSAMPLE_ABOVE:
        idx = np.sort(np.random.default_rng(20240611).choice(n, SUBSAMPLE_SIZE, replace=False))
        try:
            sub = profile.subset(idx)
            est_s, lo_s, hi_s, _ = maximise_with_interval(sub.loglik, level, limit=limit)
            return _refine(profile.loglik, level, est_s, lo_s, hi_s, np.sqrt(SUBSAMPLE_SIZE / n), limit)
        except (_NoShortcut, UnbendError, np.linalg.LinAlgError):
            pass
    try:
        return _grid_then_refine(profile.loglik, level, limit)
    except (_NoShortcut, np.linalg.LinAlgError):
        return maximise_with_interval(profile.loglik, level, limit=limit)


def _grid_then_refine(f, level, limit):
    """A coarse grid finds the peak and its curvature; parabolic steps and narrow brackets finish."""
    step = 0.5
    grid = np.arange(-4.0, 4.0 + step / 2, step)
    vals = np.array([f(g) for g in grid])
    i = int(np.argmax(np.where(np.isfinite(vals), vals, -np.inf)))
    if not (0 < i < grid.size - 1) or not np.all(np.isfinite(vals[i - 1:i + 2])):
        raise _NoShortcut
    curv = (vals[i - 1] - 2 * vals[i] + vals[i + 1]) / step ** 2
    if not curv < 0:
        raise _NoShortcut
    z = np.sqrt(stats.chi2.ppf(level, 1))
    half = z / np.sqrt(-curv)
    # the three grid points also place the top of the parabola
    shift = 0.5 * step * (vals[i - 1] - vals[i + 1]) / (vals[i - 1] - 2 * vals[i] + vals[i + 1])
    est0 = float(grid[i] + np.clip(shift, -step, step))
    return _refine(f, level, est0, est0 - half, est0 + half, 1.0, limit)


def _parabolic_max(f, x0: float, d: float, tol: float = 1e-10, maxit: int = 40):
    """Maximum of a smooth, locally concave f near x0 by successive parabolic interpolation."""
    xs = [x0 - d, x0, x0 + d]
    fs = [f(x) for x in xs]
    for _ in range(12):  # walk until the middle point is the highest of three
        if not all(np.isfinite(fs)):
            raise _NoShortcut
        if fs[1] >= fs[0] and fs[1] >= fs[2]:
            break
        if fs[2] > fs[1]:
            xs, fs = [xs[1], xs[2], xs[2] + d], [fs[1], fs[2], f(xs[2] + d)]
        else:
            xs, fs = [xs[0] - d, xs[0], xs[1]], [f(xs[0] - d), fs[0], fs[1]]
    else:
        raise _NoShortcut
    a, b, c = xs
    fa, fb, fc = fs
    for _ in range(maxit):
        den = (b - a) * (fb - fc) - (b - c) * (fb - fa)
        if den == 0:
            break
        v = b - 0.5 * ((b - a) ** 2 * (fb - fc) - (b - c) ** 2 * (fb - fa)) / den
        if not (a < v < c) or abs(v - b) < 1e-3 * tol:
            # fall back to a golden step into the larger side
            v = b + 0.381966 * ((c - b) if (c - b) > (b - a) else (a - b))
        fv = f(v)
        if not np.isfinite(fv):
            raise _NoShortcut
        step = abs(v - b)
        if v < b:
            if fv >= fb:
                c, fc, b, fb = b, fb, v, fv
            else:
                a, fa = v, fv
        else:
            if fv >= fb:
                a, fa, b, fb = b, fb, v, fv
            else:
                c, fc = v, fv
        if step < tol * max(1.0, abs(b)) or c - a < 4 * tol * max(1.0, abs(b)):
            break
    return float(b), float(fb)


def _refine(f, level, est_s, lo_s, hi_s, shrink, limit):
    if not (np.isfinite(lo_s) and np.isfinite(hi_s)):
        raise _NoShortcut
    z = np.sqrt(stats.chi2.ppf(level, 1))
    se = (hi_s - lo_s) / (2 * z) * shrink  # expected standard error on the full data
    est, top = _parabolic_max(f, est_s, max(se, 1e-6))
    target = top - stats.chi2.ppf(level, 1) / 2.0

    def g(p):
        v = f(p)
        return (v if np.isfinite(v) else -np.inf) - target

    ends = []
    for direction, half in ((-1, (est_s - lo_s) * shrink), (+1, (hi_s - est_s) * shrink)):
        inner, outer = est + direction * 0.97 * half, est + direction * 1.03 * half
        if g(inner) <= 0:
            inner = est
        tries = 0
        while g(outer) > 0:
            inner = outer
            outer = est + direction * (abs(outer - est) * 1.3)
            tries += 1
            if tries > 10 or abs(outer) > limit:
                raise _NoShortcut
        lo_, hi_ = sorted((inner, outer))
        ends.append(float(optimize.brentq(g, lo_, hi_, xtol=1e-12, rtol=4 * np.finfo(float).eps, maxiter=200)))
    return est, ends[0], ends[1], top


def maximise_with_interval(f, level: float, *, span: float = 5.0, limit: float = 20.0):
    """Maximise ``f`` over a power and find the likelihood-ratio interval.

    Returns
    -------
    (estimate, low, high, max loglik); an end the data do not bound within
    +-``limit`` is returned as -inf or inf.
    """
    grid = np.linspace(-span, span, 41)
    vals = np.array([f(g) for g in grid])
    vals[~np.isfinite(vals) & ~(vals == np.inf)] = -np.inf
    while True:
        i = int(np.argmax(vals))
        if not np.isfinite(vals[i]) and vals[i] < 0:
            raise UnbendError("the likelihood could not be evaluated at any power; check the data for extreme values.")
        if 0 < i < grid.size - 1 or abs(grid[i]) >= limit:
            break
        step = grid[1] - grid[0]
        new = grid[-1] + step if i == grid.size - 1 else grid[0] - step
        nv = f(new)
        nv = nv if np.isfinite(nv) else -np.inf
        if i == grid.size - 1:
            grid, vals = np.append(grid, new), np.append(vals, nv)
        else:
            grid, vals = np.insert(grid, 0, new), np.insert(vals, 0, nv)
    i = int(np.argmax(vals))
    a = grid[max(i - 1, 0)]
    b = grid[min(i + 1, grid.size - 1)]
    res = optimize.minimize_scalar(lambda p: -f(p), bounds=(a, b), method="bounded",
                                   options={"xatol": 1e-10})
    est = float(res.x) if -res.fun >= vals[i] else float(grid[i])
    top = float(f(est))
    target = top - stats.chi2.ppf(level, 1) / 2.0

    def g(p):
        v = f(p)
        return (v if np.isfinite(v) else -np.inf) - target

    return est, _end(g, est, -1, limit), _end(g, est, +1, limit), top


def _end(g, est: float, direction: int, limit: float) -> float:
    inner = est
    step = 0.25
    outer = est + direction * step
    while g(outer) > 0:
        inner = outer
        step *= 1.6
        outer = est + direction * step
        if abs(outer) > limit:
            return direction * np.inf
    go = g(outer)
    if not np.isfinite(go):
        # bisect into the finite region first
        lo_, hi_ = inner, outer
        for _ in range(200):
            mid = 0.5 * (lo_ + hi_)
            gm = g(mid)
            if np.isfinite(gm) and gm <= 0:
                outer = mid
                break
            if gm > 0:
                lo_ = mid
                inner = mid
            else:
                hi_ = mid
        else:
            return float(hi_)
    a, b = sorted((inner, outer))
    return float(optimize.brentq(g, a, b, xtol=1e-12, rtol=4 * np.finfo(float).eps, maxiter=200))
