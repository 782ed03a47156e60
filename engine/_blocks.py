"""Whole groups in one block of rows, sorted by group: everything per group from segment sums.

A :class:`Block` holds the usable rows of whole groups, sorted so that each
group's rows are contiguous. Every per-group quantity (sums, lines, profile
likelihoods, residual checks) is computed for all groups at once with segment
sums (``np.add.reduceat`` over the group starts), never with a Python loop over
groups. The same block code runs on one machine (one block holding every
group) and on each partition of a Dask DataFrame shuffled by group
(:mod:`unbend.distributed`).

Numerics (as in :mod:`unbend._likelihood`): powers act on logs centred by each
group's own mean, ``expm1(p * d) / p``, so nothing overflows at large ``|p|`` and
no digits are lost as ``p`` nears 0; a group whose sums would cancel (a nearly
exact line) has its residual sum of squares recomputed from its residuals.
"""
from __future__ import annotations

import threading

import numpy as np
from scipy import special

from . import _dist as stats

from .diagnostics import ALPHA, PATTERN_ALPHA, Check, dagostino_pearson

LOG2PI1 = float(np.log(2.0 * np.pi) + 1.0)
_TINY = 1e-300
#: Fewest usable rows a group needs for its line (and to enter the common power).
MIN_GROUP_ROWS = 3


def seg(a: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Sums over contiguous segments that begin at ``starts`` (every segment non-empty)."""
    return np.add.reduceat(a, starts)


def starts_of(counts: np.ndarray) -> np.ndarray:
    out = np.zeros(counts.size, dtype=np.intp)
    np.cumsum(counts[:-1], out=out[1:])
    return out


def centred(v: np.ndarray, counts: np.ndarray, starts: np.ndarray):
    """(v minus its group mean, the group means), with one correcting pass for the rounding of the mean."""
    mean = seg(v, starts) / counts
    c = v - np.repeat(mean, counts)
    fix = seg(c, starts) / counts
    c -= np.repeat(fix, counts)
    return c, mean + fix


class Block:
    """Usable rows of whole groups, sorted by group.

    Parameters
    ----------
    labels : ndarray of object
        One label per group, in the order the rows are sorted.
    counts : ndarray of int
        Usable rows per group (each at least 1).
    y, x : ndarray
        The usable rows, group after group.
    """

    def __init__(self, labels, counts, y, x):
        self.labels = np.asarray(labels, dtype=object)
        self.counts = np.asarray(counts, dtype=np.int64)
        self.starts = starts_of(self.counts)
        self.y = np.asarray(y, dtype=float)
        self.x = np.asarray(x, dtype=float)
        self.G = int(self.counts.size)
        self.n = int(self.counts.sum())

    def take(self, sel: np.ndarray) -> "Block":
        """The block of the groups at positions ``sel`` (in that order)."""
        rows = self.rows_of(sel)
        return Block(self.labels[sel], self.counts[sel], self.y[rows], self.x[rows])

    def rows_of(self, sel: np.ndarray) -> np.ndarray:
        """Row indices of the groups at positions ``sel``, group after group."""
        c = self.counts[sel]
        if c.size == 0:
            return np.zeros(0, dtype=np.intp)
        first = np.repeat(self.starts[sel] - starts_of(c), c)
        return first + np.arange(int(c.sum()))

    def usable(self):
        """Which groups can have a line: (mask, reason per group; '' when usable)."""
        cnt, st = self.counts, self.starts
        reasons = np.full(self.G, "", dtype=object)
        few = cnt < MIN_GROUP_ROWS
        reasons[few] = [f"fewer than {MIN_GROUP_ROWS} usable rows ({c})" for c in cnt[few]]
        if self.n:
            flat_x = np.maximum.reduceat(self.x, st) == np.minimum.reduceat(self.x, st)
            flat_y = np.maximum.reduceat(self.y, st) == np.minimum.reduceat(self.y, st)
            reasons[~few & flat_x] = "x does not vary (every x value is the same)"
            reasons[~few & ~flat_x & flat_y] = "y does not vary (every y value is the same)"
        return reasons == "", reasons


# ------------------------------------------------------------------------------ profiles

class _PowerTerms:
    """Residual sums of squares of a line per group, at a power applied to centred logs ``d``.

    Subclasses say which column the power acts on and which column stays fixed.
    ``lrss(p, sel)`` returns, for the groups ``sel`` (all when None), the log of
    the residual sum of squares at power ``p`` (one power per group, or one for all).
    """

    def __init__(self, counts, d):
        self.counts = counts
        self.starts = starts_of(counts)
        self.G = counts.size
        self.n = int(counts.sum())
        self.d = d
        self.dmax = np.maximum.reduceat(d, self.starts)
        self.dmin = np.minimum.reduceat(d, self.starts)

    def _view(self, sel, *arrays):
        if sel is None:
            return (self.counts, self.starts) + arrays
        rows = np.repeat(np.isin(np.arange(self.G), sel), self.counts)
        c = self.counts[sel]
        return (c, starts_of(c)) + tuple(a[rows] for a in arrays)

    def _buffers(self, sel, size):
        """Two work arrays: kept for calls over every group (no new memory each time), new for subsets."""
        if sel is None:
            buf = self.__dict__.get("_buf")
            if buf is None or not self._lock.acquire(blocking=False):
                return np.empty(size), np.empty(size), None
            return buf[0], buf[1], self._lock
        return np.empty(size), np.empty(size), None

    @staticmethod
    def _powered(p, d, c, dmax, dmin, t):
        """Fill ``t`` with e, an affine image of ``expm1(p d) / p`` per group, and return (e, log scale) with
        RSS(expm1(p d) / p) = RSS(e) * exp(2 * log scale).

        ``exp(p d) - 1`` keeps about 15 digits of the spread of the values
        once ``|p|`` times the group's range of d is above 1e-3; below that
        ``expm1`` is used; where ``p d`` could overflow when squared, each
        group is first divided by its largest value.
        """
        reach = np.abs(p) * np.maximum(dmax, -dmin)
        big = reach > 300.0
        tiny = np.abs(p) * (dmax - dmin) < 1e-3
        zero = p == 0.0
        if p.size and np.all(p == p[0]):
            np.multiply(d, p[0], out=t)
        else:
            np.multiply(np.repeat(p, c), d, out=t)
        shift = np.where(big, np.maximum(p * dmax, p * dmin), 0.0)
        if big.any():
            t -= np.repeat(shift, c)
        if zero.all():
            t[:] = d
            return t, np.zeros(p.shape)
        if tiny.all():
            np.expm1(t, out=t)
        else:
            tt = t[np.repeat(tiny, c)] if tiny.any() else None
            np.exp(t, out=t)
            if big.any():
                t -= np.repeat((~big).astype(float), c)
            else:
                t -= 1.0
            if tt is not None:
                t[np.repeat(tiny, c)] = np.expm1(tt)
        if zero.any():
            r = np.repeat(zero, c)
            t[r] = d[r]
        logscale = shift - np.log(np.abs(np.where(zero, 1.0, p)))
        return t, logscale

    def lrss(self, p, sel=None):
        c, s, d, fixed = self._view(sel, self.d, self.fixed)
        dmax, dmin = (self.dmax, self.dmin) if sel is None else (self.dmax[sel], self.dmin[sel])
        p = np.broadcast_to(np.asarray(p, dtype=float), c.shape).copy()
        t, w, lock = self._buffers(sel, d.size)
        try:
            with np.errstate(all="ignore"):
                e, logscale = self._powered(p, d, c, dmax, dmin, t)
                rss = self._rss(e, fixed, c, s, sel, w)
                out = np.log(np.maximum(rss, _TINY)) + (2.0 * logscale if self.powered_is_response else 0.0)
        finally:
            if lock is not None:
                lock.release()
        out[~np.isfinite(rss)] = np.inf
        return out + (self.log_fixed_scale if sel is None else self.log_fixed_scale[sel])

    def _keep_buffers(self):
        self._buf = (np.empty(self.d.size), np.empty(self.d.size))
        self._lock = threading.Lock()


class YTerms(_PowerTerms):
    """The power acts on y (centred logs per group); x is fixed (centred, scaled per group)."""

    powered_is_response = True  # the residual sum of squares is in the units of the powered column

    def __init__(self, counts, logy, xt):
        st = starts_of(counts)
        d, self.m = centred(logy, counts, st)
        super().__init__(counts, d)
        xc, _ = centred(xt, counts, st)
        big = np.maximum.reduceat(np.abs(xc), st)
        big[~(big > 0)] = 1.0
        self.fixed = xc / np.repeat(big, counts)
        self.sxx = seg(self.fixed * self.fixed, st)
        self.log_fixed_scale = np.zeros(self.G)
        self._keep_buffers()

    def _rss(self, e, xc, c, s, sel, w):
        sxx = self.sxx if sel is None else self.sxx[sel]
        su = seg(e, s)
        suu = seg(np.multiply(e, e, out=w), s)
        sxu = seg(np.multiply(xc, e, out=w), s)
        var = suu - su * su / c
        rss = var - sxu * sxu / sxx
        redo = np.isfinite(rss) & ~((rss > 1e-8 * var) & (var > 1e-6 * suu))
        if np.any(redo):
            rss[redo] = _exact_rss(e, xc, c, s, redo)
        return rss


class XTerms(_PowerTerms):
    """The power acts on x (centred logs per group); the re-expressed y is fixed."""

    powered_is_response = False  # any scale of the powered column leaves the residual sum of squares alone

    def __init__(self, counts, yt, logx):
        st = starts_of(counts)
        d, _ = centred(logx, counts, st)
        super().__init__(counts, d)
        yc, _ = centred(yt, counts, st)
        big = np.maximum.reduceat(np.abs(yc), st)
        big[~(big > 0)] = 1.0
        self.fixed = yc / np.repeat(big, counts)
        self.syy = seg(self.fixed * self.fixed, st)
        self.sy = seg(self.fixed, st)
        self.log_fixed_scale = 2.0 * np.log(big)
        self._keep_buffers()

    def _rss(self, e, yc, c, s, sel, w):
        syy, sy = (self.syy, self.sy) if sel is None else (self.syy[sel], self.sy[sel])
        sv = seg(e, s)
        svv = seg(np.multiply(e, e, out=w), s)
        svy = seg(np.multiply(e, yc, out=w), s)
        vv = svv - sv * sv / c
        vy = svy - sv * sy / c
        rss = syy - vy * vy / vv
        redo = np.isfinite(rss) & ~((rss > 1e-8 * syy) & (vv > 1e-6 * svv))
        if np.any(redo):
            rss[redo] = _exact_rss(yc, e, c, s, redo)
        return rss


def _exact_rss(u, v, c, s, which):
    """Residual sums of squares of u on v (with an intercept) from the residuals, for groups ``which``."""
    rows = np.repeat(which, c)
    cc = c[which]
    ss = starts_of(cc)
    uu, vv = u[rows], v[rows]
    uc, _ = centred(uu, cc, ss)
    vc, _ = centred(vv, cc, ss)
    svv = seg(vc * vc, ss)
    b = np.where(svv > 0, seg(vc * uc, ss) / np.where(svv > 0, svv, 1.0), 0.0)
    r = uc - np.repeat(b, cc) * vc
    return seg(r * r, ss)


def common_y_lse(terms: YTerms, lam: float, m: float) -> float:
    """log of the summed residual sum of squares over the groups at y power ``lam``, each group's
    re-expressed y carried to the common scale (factor exp(2 lam (m_g - m)))."""
    lr = terms.lrss(lam)
    if not np.all(np.isfinite(lr)):
        return np.inf
    return float(special.logsumexp(lr + 2.0 * lam * (terms.m - m)))


def common_x_lse(terms: XTerms, alpha: float) -> float:
    lr = terms.lrss(alpha)
    if not np.all(np.isfinite(lr)):
        return np.inf
    return float(special.logsumexp(lr))


def gaussian_ll(lse, n):
    """Maximised normal log-likelihood from the log of a residual sum of squares."""
    return np.where(np.isfinite(lse), -0.5 * n * (LOG2PI1 + lse - np.log(n)), -np.inf)


# ------------------------------------------------------------------------------ lines

def lines(counts, yt, xt, x_raw, level):
    """Least-squares line of yt on xt for every group, with its residual checks.

    Returns a dict of per-group arrays (in the units of the re-expressed y and x)
    and the residuals (row order of the block).
    """
    st = starts_of(counts)
    n = counts.astype(float)
    ybig = _big(yt)
    xbig = _big(xt)
    yc, ybar = centred(yt / ybig, counts, st)
    xc, xbar = centred(xt / xbig, counts, st)
    sxx, sxy, syy = seg(xc * xc, st), seg(xc * yc, st), seg(yc * yc, st)
    b = sxy / sxx
    r = yc - np.repeat(b, counts) * xc
    db = seg(xc * r, st) / sxx  # one step of refinement
    b += db
    r -= np.repeat(db, counts) * xc
    dm = seg(r, st) / n
    r -= np.repeat(dm, counts)
    a = ybar + dm - b * xbar
    rss = seg(r * r, st)
    df = n - 2.0
    with np.errstate(divide="ignore", invalid="ignore"):
        s = np.sqrt(rss / df)
        se_b = s / np.sqrt(sxx)
        se_a = s * np.sqrt(1.0 / n + xbar * xbar / sxx)
        r2 = 1.0 - rss / syy
    tq = _t_quantiles(level, df)
    slope, se_slope = b * (ybig / xbig), se_b * (ybig / xbig)
    out = dict(n=counts, intercept=a * ybig, slope=slope, se_intercept=se_a * ybig, se_slope=se_slope,
               slope_low=slope - tq * se_slope, slope_high=slope + tq * se_slope, resid_sd=s * ybig, r2=r2,
               x_min=np.minimum.reduceat(x_raw, st), x_max=np.maximum.reduceat(x_raw, st),
               sxx_s=sxx, rss_s=rss, slope_s=b, log_ybig=np.full(counts.size, np.log(ybig)),
               log_xbig=np.full(counts.size, np.log(xbig)))
    out.update(_checks(counts, st, xc, r, b, x_raw))
    return out, r * ybig


def _big(v):
    with np.errstate(over="ignore"):
        b = float(np.max(np.abs(v))) if v.size else 1.0
    return b if b > 0 and np.isfinite(b) else 1.0


def _t_quantiles(level, df):
    out = np.full(df.shape, np.nan)
    for d in np.unique(df[df >= 1]):
        out[df == d] = stats.t.ppf(0.5 + level / 2.0, d)
    return out


# ------------------------------------------------------------------------------ checks

def _checks(counts, st, xc, r, b, x_raw):
    """Curvature (Tukey 1 df), pattern (Kruskal-Wallis across bins of x), spread (Breusch-Pagan,
    Koenker) and normality p-values per group, with what each Check needs."""
    n = counts.astype(float)
    rmax = np.maximum.reduceat(np.abs(r), st)
    const_r = np.maximum.reduceat(r, st) == np.minimum.reduceat(r, st)
    out = {}
    out.update(_curvature(counts, st, xc, r, n))
    out.update(_spread(counts, st, xc, r, b, n, rmax))
    out.update(_pattern(counts, st, x_raw, r, const_r))
    out.update(_normality(counts, st, sort_within(r, counts, np.inf), const_r))
    return out


def _curvature(counts, st, xc, r, n):
    """Tukey's one-degree-of-freedom test as :func:`unbend.diagnostics.curvature_test` computes it for one x."""
    sd = np.sqrt(seg(xc * xc, st) / n)
    with np.errstate(divide="ignore", invalid="ignore"):
        xs = xc / np.repeat(np.where(sd > 0, sd, 1.0), counts)
        q, _ = centred(xs * xs, counts, st)
        sxx = seg(xs * xs, st)
        q -= np.repeat(seg(q * xs, st) / sxx, counts) * xs
        nz = seg(q * q, st)
        c3 = seg(q * r, st) / np.sqrt(nz)
        rss = seg(r * r, st)
        df3 = n - 3.0
        rss3 = rss - c3 * c3
        t = c3 / np.sqrt(rss3 / df3)
        p = 2.0 * stats.t.sf(np.abs(t), np.maximum(df3, 1.0))
    exact = ~(rss3 > 0)
    t = np.where(exact, np.where(c3 != 0, np.inf, 0.0), t)
    p = np.where(exact, np.where(c3 != 0, 0.0, 1.0), p)
    ran = (counts >= 5) & (sd > 0) & (np.sqrt(nz) > 1e-10 * np.sqrt(n))
    return {"curvature_t": np.where(ran, t, np.nan), "curvature_p": np.where(ran, p, np.nan),
            "curvature_dir": np.where(ran, np.sign(c3), 0.0)}


def _spread(counts, st, xc, r, b, n, rmax):
    """Breusch-Pagan (Koenker's form) with one x, as :func:`unbend.diagnostics.spread_test`."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        e2 = (r / np.repeat(np.where(rmax > 0, rmax, 1.0), counts)) ** 2
        dv, _ = centred(e2, counts, st)
        dd = seg(dv * dv, st)
        sxx = seg(xc * xc, st)
        lm = n * seg(xc * dv, st) ** 2 / (sxx * dd)
        p = stats.chi2.sf(lm, 1)
        ar, _ = centred(np.abs(r), counts, st)
        direction = np.sign(b) * np.sign(seg(ar * xc, st))
    flat = np.maximum.reduceat(e2, st) == np.minimum.reduceat(e2, st)
    ran = (counts >= 4) & (flat | (dd > 0))
    lm = np.where(flat, 0.0, lm)
    p = np.where(flat, 1.0, p)
    direction = np.where(flat | (b == 0), 0.0, direction)
    return {"spread_lm": np.where(ran, lm, np.nan), "spread_p": np.where(ran, p, np.nan),
            "spread_dir": np.where(ran, direction, 0.0)}


def _size_classes(counts):
    """Groups by size class (sizes up to 2, 4, 8, ...): (positions, width) per class."""
    cls = np.ceil(np.log2(np.maximum(counts, 1))).astype(int)
    for k in np.unique(cls):
        sel = np.flatnonzero(cls == k)
        yield sel, int(counts[sel].max())


def sort_within(v, counts, pad):
    """``v`` sorted within each group (groups stay in place).

    Groups are laid out as the rows of padded matrices, one per size class,
    and each matrix is sorted along its rows: a few vectorised sorts, whatever
    the number of groups. ``pad`` must sort after every value.
    """
    st = starts_of(counts)
    out = np.empty_like(v)
    pos = np.arange(v.size) - np.repeat(st, counts)
    for sel, width in _size_classes(counts):
        c = counts[sel]
        rows = np.repeat(np.isin(np.arange(counts.size), sel), counts) if sel.size < counts.size else slice(None)
        mat = np.full((sel.size, width), pad, dtype=v.dtype)
        mat[np.repeat(np.arange(sel.size), c), pos[rows]] = v[rows]
        mat.sort(axis=1)
        out[rows] = mat[np.arange(width)[None, :] < c[:, None]]
    return out


def within_group_order(v, counts):
    """Row indices that sort ``v`` within each group (groups stay in place; ties keep row order)."""
    st = starts_of(counts)
    out = np.empty(v.size, dtype=np.intp)
    pos = np.arange(v.size) - np.repeat(st, counts)
    for sel, width in _size_classes(counts):
        c = counts[sel]
        rows = np.repeat(np.isin(np.arange(counts.size), sel), counts)
        slot = np.repeat(np.arange(sel.size), c) * width + pos[rows]
        mat = np.full(sel.size * width, np.inf)
        mat[slot] = v[rows]
        idx = np.full(sel.size * width, -1, dtype=np.intp)
        idx[slot] = np.flatnonzero(rows)
        o = np.argsort(mat.reshape(sel.size, width), axis=1, kind="stable")
        srt = np.take_along_axis(idx.reshape(sel.size, width), o, axis=1)
        # the padding (inf, index -1) sorts last in each row; keep the first counts[g] of each row
        out[rows] = srt[np.arange(width)[None, :] < c[:, None]]
    return out


def _run_starts(sorted_v, st):
    """For values sorted within groups: where each value's run of equal values begins, and run starts."""
    N = sorted_v.size
    new = np.ones(N, dtype=bool)
    new[1:] = sorted_v[1:] != sorted_v[:-1]
    new[st] = True
    return np.maximum.accumulate(np.where(new, np.arange(N), 0)), new


def x_bins(x, counts, st):
    """Bin (0 .. k-1) of each row, k = n // 8 bins (3 to 10) per group in order of x within the group,
    tied x sharing the bin of their lowest rank (as :func:`unbend.diagnostics.pattern_bins`)."""
    k = np.clip(counts // 8, 3, 10)
    dx = np.diff(x)
    inside = np.ones(dx.size, dtype=bool)
    inside[st[1:] - 1] = False
    order = None if np.all(dx[inside] >= 0) else within_group_order(x, counts)  # rows arrive sorted by x
    xs = x if order is None else x[order]
    rs, _ = _run_starts(xs, st)
    b = (rs - np.repeat(st, counts)) * np.repeat(k, counts) // np.repeat(counts, counts)
    if order is None:
        return b
    out = np.empty_like(b)
    out[order] = b
    return out


_SIGN = np.int64(0x7FFFFFFFFFFFFFFF)


def _pattern(counts, st, x_raw, r, const_r):
    """Kruskal-Wallis across 3 to 10 bins of x per group, as :func:`unbend.diagnostics.pattern_test`.

    Each residual becomes an order-preserving 64-bit key whose lowest 4 bits
    carry its bin; sorting the keys within each group gives every bin's rank
    sum. Groups with (near-)tied residuals are ranked exactly instead.
    """
    G = counts.size
    n = counts.astype(float)
    code = np.repeat(np.arange(G), counts)
    bins = x_bins(x_raw, counts, st)
    bits = (np.ascontiguousarray(r, dtype=float) + 0.0).view(np.int64)
    key = bits ^ ((bits >> 63) & _SIGN)
    key = (key & ~np.int64(15)) | bins
    key = sort_within(key, counts, np.iinfo(np.int64).max)
    high = key >> 4
    tie = np.zeros(r.size, dtype=bool)
    tie[1:] = high[1:] == high[:-1]
    tie[st] = False
    tied = np.bincount(code[tie], minlength=G) > 0
    pos = (np.arange(r.size) - np.repeat(st, counts) + 1).astype(float)
    rsum = np.bincount(code * 10 + (key & 15), weights=pos, minlength=G * 10).reshape(G, 10)
    ties = np.ones(G)
    if tied.any():
        rsum[tied], ties[tied] = _tied_rank_sums(counts, r, bins, tied)
    cnt = np.bincount(code * 10 + bins, minlength=G * 10).reshape(G, 10).astype(float)
    full = cnt > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        h = 12.0 / (n * (n + 1.0)) * np.where(full, rsum ** 2 / np.where(full, cnt, 1.0), 0.0).sum(axis=1) \
            - 3.0 * (n + 1.0)
        h = np.where(ties > 0, h / ties, 0.0)
        nb = full.sum(axis=1)
        p = stats.chi2.sf(h, np.maximum(nb - 1, 1))
    ran = (counts >= 12) & ~const_r & (nb >= 2)
    return {"pattern_h": np.where(ran, h, np.nan), "pattern_p": np.where(ran, p, np.nan)}


def _tied_rank_sums(counts, r, bins, which):
    """Exact average ranks of the residuals within the groups ``which`` (with ties): bin rank sums, tie factor."""
    rows = np.repeat(which, counts)
    c = counts[which]
    st = starts_of(c)
    rr, bb = r[rows], bins[rows]
    code = np.repeat(np.arange(c.size), c)
    order = within_group_order(rr, c)
    srt = rr[order]
    run_start, new = _run_starts(srt, st)
    run_id = np.cumsum(new) - 1
    run_len = np.bincount(run_id)
    avg = run_start + 0.5 * (run_len[run_id] - 1) - np.repeat(st, c) + 1.0
    t = run_len.astype(float)
    nn = c.astype(float)
    ties = 1.0 - np.bincount(code[new], weights=t ** 3 - t, minlength=c.size) / (nn ** 3 - nn)
    rsum = np.bincount(code * 10 + bb[order], weights=avg, minlength=c.size * 10).reshape(c.size, 10)
    return rsum, ties


def _normality(counts, st, r_sorted, const_r):
    """Shapiro-Wilk (D'Agostino-Pearson above 5,000 rows) per group, from each group's sorted residuals.

    The coefficients of Shapiro-Wilk depend on the number of rows only, so they
    are computed once per group size and reused; each group then costs one
    call of the compiled routine behind :func:`scipy.stats.shapiro`.
    """
    G = counts.size
    stat = np.full(G, np.nan)
    p = np.full(G, np.nan)
    name = np.full(G, "Shapiro-Wilk", dtype=object)
    finite = np.add.reduceat(~np.isfinite(r_sorted), st) == 0
    todo = np.flatnonzero((counts >= 8) & ~const_r & finite)
    big = todo[counts[todo] > 5000]
    for g in big.tolist():
        stat[g], p[g] = dagostino_pearson(r_sorted[st[g]:st[g] + counts[g]])
        name[g] = "D'Agostino-Pearson"
    small = todo[counts[todo] <= 5000]
    swilk = _swilk()
    coef = {}
    w_out, p_out = [], []
    for a, n in zip(st[small].tolist(), counts[small].tolist()):
        v = r_sorted[a:a + n]
        y = v - v[n // 2]
        c = coef.get(n)
        if swilk is None:  # pragma: no cover - a scipy without the routine: the public function
            res = stats.shapiro(v)
            w, pw = res.statistic, res.pvalue
        elif c is None:
            c = coef[n] = np.zeros(n // 2)
            w, pw, _ = swilk(y, c, 0)
        else:
            w, pw, _ = swilk(y, c, 1)
        w_out.append(w)
        p_out.append(pw)
    stat[small], p[small] = w_out, p_out
    return {"normality_w": stat, "normality_p": p, "normality_name": name}


def _swilk():
    """The AS R94 routine behind :func:`scipy.stats.shapiro` (None if this scipy does not have it)."""
    try:
        from scipy.stats._morestats import swilk
    except ImportError:  # pragma: no cover
        return None
    return swilk


def _check_list(name, stat, p, alpha, direction=None):
    """One :class:`unbend.diagnostics.Check` per group, as :func:`unbend.diagnostics.make_check` makes it."""
    names = np.broadcast_to(np.asarray(name, dtype=object), p.shape)
    d = np.zeros(p.shape) if direction is None else np.where(np.isfinite(direction), direction, 0.0)
    ran = np.isfinite(p) & ~np.isnan(stat)
    return [Check(nm, float(s), float(q), bool(q >= alpha), float(dd)) if ok else Check(nm, _NAN, _NAN, None, 0.0)
            for nm, s, q, dd, ok in zip(names.tolist(), stat.tolist(), p.tolist(), d.tolist(), ran.tolist())]


_NAN = float("nan")


def checks(out):
    """(r2, curvature, pattern, spread, normality, n) per group, the Checks as :mod:`unbend.diagnostics` makes them."""
    curv = _check_list("Tukey one-degree-of-freedom", out["curvature_t"], out["curvature_p"], ALPHA,
                       out["curvature_dir"])
    pat = _check_list("Kruskal-Wallis across bins of x", out["pattern_h"], out["pattern_p"], PATTERN_ALPHA)
    spr = _check_list("Breusch-Pagan (Koenker)", out["spread_lm"], out["spread_p"], ALPHA, out["spread_dir"])
    nor = _check_list(out["normality_name"], out["normality_w"], out["normality_p"], ALPHA / 5)
    return zip(out["r2"].tolist(), curv, pat, spr, nor, np.asarray(out["n"]).tolist())


# ------------------------------------------------------------------------------ maxima

#: Grid offsets, in steps, around each group's starting power (extended outwards only where needed).
_K = np.array([-64, -48, -32, -24, -16, -12, -8, -6, -4, -3, -2, -1, 0, 1, 2, 3, 4, 6, 8, 12, 16, 24, 32, 48, 64],
              dtype=float)
_MID = int(np.flatnonzero(_K == 0)[0])
#: Half-width of the central differences that locate the maximum (the maximum is then found as the
#: root of the slope, which pins it to about 1e-10 even when the likelihood itself carries rounding).
_H = 1e-4


def profile_maxima(values, G, level, centre, step, limit=20.0, tol=1e-5, xtol=1e-11):
    """Maximum and likelihood-ratio interval of G profile log-likelihoods at once.

    Parameters
    ----------
    values : callable
        ``values(p, sel)`` returns the log-likelihoods of the groups at
        positions ``sel`` (sorted; all when None) at powers ``p`` (one per group).
    G : int
        Number of profiles.
    level : float
    centre, step : float or ndarray
        Where each group's search starts and the grid spacing there.
    limit : float
        Powers beyond +-limit are not searched; an end not reached there is +-inf.
    tol : float
        A Newton step shorter than this (relative to the power, or absolute
        below 1) ends the search for the maximum; the error left is of the
        order of its square.
    xtol : float
        Relative tolerance of the interval ends.

    Returns
    -------
    dict of ndarray
        est, low, high, top (the maximised log-likelihood), edge (True when
        the maximum lies at the search limit) and ok (False when the
        likelihood could not be evaluated).

    Notes
    -----
    Each profile is evaluated on its own grid, ``centre + step * k``, widened
    outwards only for the profiles whose maximum or interval ends are not yet
    inside it. The maximum is then refined by Newton steps on central
    differences kept inside a shrinking bracket, and each end of the interval
    by the false-position method with the Anderson–Björck correction. Every step evaluates
    all unfinished profiles in one pass over the data.

    References
    ----------
    Anderson, N. and Björck, Å. (1973). A new high order method of regula
    falsi type for computing a root of an equation. *BIT* 13, 253-264.
    """
    q = stats.chi2.ppf(level, 1) / 2.0
    centre = np.broadcast_to(np.asarray(centre, dtype=float), (G,))
    step = np.broadcast_to(np.asarray(step, dtype=float), (G,))
    P = np.clip(centre[:, None] + step[:, None] * _K[None, :], -limit, limit)
    # the first grid point at (or beyond) the limit is the last one that may be used on each side
    lo_stop = np.maximum((P[:, :_MID + 1] <= -limit).sum(axis=1) - 1, 0)
    hi_stop = _K.size - 1 - np.maximum((P[:, _MID:] >= limit).sum(axis=1) - 1, 0)
    V = np.full(P.shape, np.nan)
    rows = np.arange(G)
    lo_i = np.maximum(np.full(G, _MID - 1), lo_stop)
    hi_i = np.minimum(np.full(G, _MID + 1), hi_stop)
    for j in (_MID - 1, _MID, _MID + 1):
        jj = np.clip(np.full(G, j), lo_i, hi_i)
        todo = np.flatnonzero(np.isnan(V[rows, jj]))
        if todo.size:
            V[todo, jj[todo]] = values(P[todo, jj[todo]], _sel(todo, G))
    for _ in range(2 * _K.size):
        best, top = _best(V)
        cut = top - q
        need_l = (lo_i > lo_stop) & ((best == lo_i) | (V[rows, lo_i] >= cut)) & np.isfinite(top)
        need_r = (hi_i < hi_stop) & ((best == hi_i) | (V[rows, hi_i] >= cut)) & np.isfinite(top)
        if not (need_l.any() or need_r.any()):
            break
        for need, move in ((need_l, -1), (need_r, +1)):
            sel = np.flatnonzero(need)
            if sel.size:
                ext = (lo_i if move < 0 else hi_i)
                ext[sel] += move
                V[sel, ext[sel]] = values(P[sel, ext[sel]], _sel(sel, G))
    best, top = _best(V)
    ok = np.isfinite(top)
    edge = ok & (((best == lo_i) & (lo_i == lo_stop)) | ((best == hi_i) & (hi_i == hi_stop)))
    est, top, curv = _refine_max(values, G, P, V, best, ok & ~edge, top, tol)
    low = _end(values, G, P, V, best, lo_i, est, top, curv, q, ok, -1, xtol)
    high = _end(values, G, P, V, best, hi_i, est, top, curv, q, ok, +1, xtol)
    return {"est": np.where(ok, est, np.nan), "low": np.where(ok, low, np.nan),
            "high": np.where(ok, high, np.nan), "top": np.where(ok, top, np.nan), "edge": edge, "ok": ok}


def _sel(idx, G):
    return None if idx.size == G else idx


def _best(V):
    W = np.where(np.isnan(V), -np.inf, V)
    best = np.argmax(W, axis=1)
    return best, W[np.arange(V.shape[0]), best]


def _refine_max(values, G, P, V, best, inner, top, tol):
    """Newton steps on central differences, inside a bracket that only shrinks.

    Returns the maxima, the log-likelihood there and the curvature (minus the
    second derivative) at the last step. A step shorter than ``tol`` ends the
    search: Newton's error after it is of the order of its square.
    """
    rows = np.arange(G)
    est = P[rows, best].copy()
    jm, jp = np.maximum(best - 1, 0), np.minimum(best + 1, P.shape[1] - 1)
    a, c = P[rows, jm].copy(), P[rows, jp].copy()
    fa, fb, fc = V[rows, jm], V[rows, best], V[rows, jp]
    with np.errstate(all="ignore"):  # a parabola through the three grid points starts the search
        den = (est - a) * (fb - fc) - (est - c) * (fb - fa)
        v = est - 0.5 * ((est - a) ** 2 * (fb - fc) - (est - c) ** 2 * (fb - fa)) / den
        curv = np.where(den != 0, -2.0 * den / ((est - a) * (c - est) * (c - a)), np.nan)
    good = np.isfinite(v) & (v > a) & (v < c)
    est = np.where(good, v, est)
    active = inner.copy()
    for _ in range(60):
        act = np.flatnonzero(active)
        if act.size == 0:
            break
        e = est[act]
        s = _sel(act, G)
        f0, fp, fm = values(e, s), values(e + _H, s), values(e - _H, s)
        aa, cc = a[act], c[act]
        right, left = fp > f0, (fm > f0) & ~(fp > f0)
        aa = np.where(right, np.maximum(aa, e), np.where(left, aa, np.maximum(aa, e - _H)))
        cc = np.where(left, np.minimum(cc, e), np.where(right, cc, np.minimum(cc, e + _H)))
        with np.errstate(all="ignore"):
            d2 = fp - 2.0 * f0 + fm
            newton = e - _H * 0.5 * (fp - fm) / d2
        use = np.isfinite(newton) & (d2 < 0) & (newton > aa) & (newton < cc)
        new = np.where(use, newton, 0.5 * (aa + cc))
        curv[act] = np.where(d2 < 0, -d2 / (_H * _H), curv[act])
        dead = ~np.isfinite(f0) & ~np.isfinite(fp) & ~np.isfinite(fm)
        done = (use & (np.abs(new - e) <= tol * np.maximum(1.0, np.abs(e)))) | (cc - aa <= 1e-10) | dead
        a[act], c[act], est[act] = aa, cc, np.where(dead, e, new)
        active[act[done]] = False
    ev = np.flatnonzero(np.isfinite(top))
    if ev.size:
        top = top.copy()
        top[ev] = values(est[ev], _sel(ev, G))
    return est, top, curv


def _end(values, G, P, V, best, ext_i, est, top, curv, q, ok, direction, xtol):
    """One end of each likelihood-ratio interval: a probe where the parabola at the top says, then false
    position (Anderson-Bjorck) in the bracket that gives."""
    out = np.full(G, direction * np.inf)
    cut = top - q
    W = np.where(np.isnan(V), np.inf, V)  # not evaluated: never taken as below the cut
    J = np.arange(P.shape[1])[None, :]
    if direction < 0:
        below = (J >= ext_i[:, None]) & (J < best[:, None]) & (W < cut[:, None])
        has = below.any(axis=1) & ok
        j_out = np.where(has, P.shape[1] - 1 - np.argmax(below[:, ::-1], axis=1), 0)
        j_in = j_out + 1
        inner_ok = j_in < best
    else:
        below = (J <= ext_i[:, None]) & (J > best[:, None]) & (W < cut[:, None])
        has = below.any(axis=1) & ok
        j_out = np.where(has, np.argmax(below, axis=1), 0)
        j_in = j_out - 1
        inner_ok = j_in > best
    idx = np.flatnonzero(has)
    if idx.size == 0:
        return out
    jo, ji = j_out[idx], np.clip(j_in[idx], 0, P.shape[1] - 1)
    a, fa = P[idx, jo], V[idx, jo] - cut[idx]
    in_ok = inner_ok[idx] & (direction * (P[idx, ji] - est[idx]) > 0)
    b = np.where(in_ok, P[idx, ji], est[idx])
    fb = np.where(in_ok, V[idx, ji] - cut[idx], q)
    # The search runs in s = (power - estimate)^2, where the profile is nearly a straight line; a first probe
    # goes where the parabola with the curvature at the top crosses the cut.
    e = est[idx]
    sa, sb = (a - e) ** 2, (b - e) ** 2
    with np.errstate(all="ignore"):
        probe = 2.0 * q / curv[idx]
    inside = np.isfinite(probe) & ((probe - sa) * (probe - sb) < 0)
    k = np.flatnonzero(inside)
    if k.size:
        fk = values(e[k] + direction * np.sqrt(probe[k]), idx[k]) - cut[idx[k]]
        neg = np.where(np.isfinite(fk), fk, -np.inf) < 0
        sa[k[neg]], fa[k[neg]] = probe[k[neg]], fk[neg]
        sb[k[~neg]], fb[k[~neg]] = probe[k[~neg]], fk[~neg]
    rows = np.arange(G)

    def f(sq, sel):
        at = e if sel is None or sel.size == idx.size else e[np.searchsorted(idx, sel)]
        return values(at + direction * np.sqrt(sq), sel) - cut[rows if sel is None else sel]

    # a step dp in the power is a step of about 2 |power - estimate| dp in s
    tol = 2.0 * np.sqrt(np.maximum(sa, sb)) * xtol * np.maximum(1.0, np.abs(e))
    root = _illinois(f, G, idx, sa, fa, sb, fb, tol)
    out[idx] = e + direction * np.sqrt(root)
    return out


def _illinois(f, G, idx, a, fa, b, fb, tol):
    """Roots of f in brackets [a, b] with f(a) < 0 <= f(b), for the profiles ``idx`` at once, to the
    absolute tolerances ``tol``: false position with the Anderson-Bjorck correction (a bisection step
    wherever f is not finite)."""
    a, fa, b, fb = a.copy(), fa.copy(), b.copy(), fb.copy()
    root = np.full(a.shape, np.nan)
    last = np.zeros(idx.size, dtype=int)  # which side moved last: -1 the low side, +1 the high side
    active = np.ones(idx.size, dtype=bool)
    for _ in range(100):
        act = np.flatnonzero(active)
        if act.size == 0:
            break
        with np.errstate(all="ignore"):
            c = b[act] - fb[act] * (b[act] - a[act]) / (fb[act] - fa[act])
        lo_, hi_ = np.minimum(a[act], b[act]), np.maximum(a[act], b[act])
        bad = ~np.isfinite(c) | (c <= lo_) | (c >= hi_) | ~np.isfinite(fa[act]) | ~np.isfinite(fb[act])
        c = np.where(bad, 0.5 * (a[act] + b[act]), c)
        sub = idx[act]
        fc = f(c, _sel(sub, G))
        fc = np.where(np.isfinite(fc), fc, -np.inf)
        neg = fc < 0
        old = root[act]
        root[act] = c
        # the low side (f < 0) moves when fc < 0, else the high side; when the same side moves twice
        # running, the other side's f is scaled down (Anderson and Bjorck)
        f_old = np.where(neg, fa[act], fb[act])
        with np.errstate(all="ignore"):
            m = 1.0 - fc / f_old
        m = np.where(np.isfinite(m) & (m > 0), m, 0.5)
        a[act[neg]], fa[act[neg]] = c[neg], fc[neg]
        b[act[~neg]], fb[act[~neg]] = c[~neg], fc[~neg]
        again_lo = neg & (last[act] == -1)
        again_hi = ~neg & (last[act] == +1)
        fb[act[again_lo]] *= m[again_lo]
        fa[act[again_hi]] *= m[again_hi]
        last[act] = np.where(neg, -1, +1)
        with np.errstate(invalid="ignore"):  # old is NaN on the first step
            done = (np.abs(b[act] - a[act]) <= 2 * tol[act]) | (fc == 0) | (np.abs(c - old) <= tol[act])
        active[act[done]] = False
    return root
