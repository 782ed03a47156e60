"""Speed at spreadsheet scale: each target timed against its reference in the same run.

Run:  python tests/benchmarks/bench.py            (all rows, medians of 5 runs)
      python tests/benchmarks/bench.py --quick    (fewer repeats, n = 10^6 rows skipped)

Prints a table of medians, the ratio to the reference, the target and whether
it was met, and checks that the numbers equal the reference's (the engine is
tested against the same references in tests/). Data are invented, seeded.
Kept out of the default test run (pytest does not collect this folder).

The "through xlwings" rows drive the cell functions the way the Windows
spreadsheet program does (tests/host: xlwings' own call_udf, conversion and COM
server code with stand-ins for pywin32 and a fake workbook). They include
everything Python does for a cell: xlwings' argument handling, reading the
references (used-range cut, values normalised), the engine, and handing the
result back. They cannot include the COM transfer itself (the program packing
the cells into a VARIANT array, the cross-process calls, pywin32 building the
tuples): the fake workbook hands over tuples it built beforehand. The number of
round trips to the program per cell is printed beside them.
"""
from __future__ import annotations

import argparse
import gc
import statistics
import sys
import time
import tracemalloc

from pathlib import Path

import numpy as np
import scipy.stats as st
from scipy import optimize

import unbend
from unbend.udfs import UNBEND_INVERSE, UNBEND_PREDICT, cells
from unbend.udfs.functions import _cache

try:
    import statsmodels.api as sm
    from statsmodels.stats.diagnostic import het_breuschpagan
except ImportError:  # pragma: no cover
    sys.exit("the benchmark needs statsmodels: pip install -e '.[test]'")


def timed(fn, repeats):
    out = []
    for _ in range(repeats):
        gc.collect()
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return statistics.median(out)


def timed_cpu(fn, repeats):
    """Median wall time and median processor time of this process (the second is less disturbed by
    other work on a shared machine; it is not the figure the targets are judged on)."""
    wall, cpu = [], []
    for _ in range(repeats):
        gc.collect()
        t0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return statistics.median(wall), statistics.median(cpu)


def data(n, seed=1):
    rng = np.random.default_rng(seed)
    x = rng.uniform(1.0, 100.0, n)
    y = 2.0 * x ** 0.7 * rng.lognormal(0.0, 0.25, n)
    return y, x


ROWS = []


def row(work, ours, ref, target, ok_numbers, note=""):
    ratio = ref / ours if ref else None
    if target == "none":  # shown for what it includes, with no target
        met = True
    elif target.startswith("\u2265"):
        met = ratio is not None and ratio >= float(target[1:].split("\u00d7")[0].strip())
    else:
        met = ours <= float(target.split()[1]) / 1000.0
    ROWS.append((work, ours, ref, ratio, target, met and ok_numbers, note))
    print(f"{work:<58} ours {ours * 1000:9.1f} ms  ref {ref * 1000 if ref else float('nan'):9.1f} ms  "
          f"ratio {ratio if ratio else float('nan'):7.1f}  target {target:<10} {'met' if met and ok_numbers else 'NOT met'}"
          f"{'  ' + note if note else ''}", flush=True)


# 1. power for y, no predictor --------------------------------------------------------
def bench_boxcox(n, repeats):
    y, _ = data(n)
    ours = timed(lambda: unbend.suggest_power(y), repeats)
    ref = timed(lambda: st.boxcox(y, alpha=0.05), max(1, repeats // 2))
    s = unbend.suggest_power(y)
    lm = st.boxcox_normmax(y, method="mle")
    _, _, ci = st.boxcox(y, alpha=0.05)
    ok = abs(s.estimate - lm) <= 1e-6 and abs(s.low - ci[0]) <= 1e-5 and abs(s.high - ci[1]) <= 1e-5
    row(f"power for y, no predictor, n = {n:,}", ours, ref, "\u2265 30\u00d7", ok,
        f"d_est {abs(s.estimate - lm):.1e} d_ci {max(abs(s.low - ci[0]), abs(s.high - ci[1])):.1e}")


# 2. power for y given one x, statsmodels inside minimize_scalar / brentq ----------------
def sm_boxcox_given_x(y, x, level=0.95):
    X = sm.add_constant(x)
    gm = np.mean(np.log(y))

    def llf(lam):
        z = np.log(y) if abs(lam) < 1e-12 else (y ** lam - 1.0) / lam
        return sm.OLS(z, X).fit().llf + (lam - 1.0) * gm * y.size

    res = optimize.minimize_scalar(lambda l: -llf(l), bounds=(-3, 3), method="bounded", options={"xatol": 1e-10})
    est, top = res.x, -res.fun
    cut = top - st.chi2.ppf(level, 1) / 2
    lo = optimize.brentq(lambda l: llf(l) - cut, est - 3, est, xtol=1e-12)
    hi = optimize.brentq(lambda l: llf(l) - cut, est, est + 3, xtol=1e-12)
    return est, lo, hi


def bench_boxcox_x(n, repeats):
    y, x = data(n, 2)
    ours = timed(lambda: unbend.suggest_power(y, x), repeats)
    ref = timed(lambda: sm_boxcox_given_x(y, x), 1)
    s = unbend.suggest_power(y, x)
    e, lo, hi = sm_boxcox_given_x(y, x)
    d = max(abs(s.estimate - e), abs(s.low - lo), abs(s.high - hi))
    row(f"power for y given one x, n = {n:,}", ours, ref, "\u2265 10\u00d7", d <= 1e-6, f"max diff {d:.1e}")


# 3. full scan ------------------------------------------------------------------------
def _ladder(v, p):
    return np.log(v) if p == 0 else (v ** p if p > 0 else -(v ** p))


def sm_scan(y, x):
    out = []
    k = int(np.clip(y.size // 8, 3, 10))
    order = np.argsort(x, kind="stable")
    g = np.empty(y.size, dtype=int)
    g[order] = np.arange(y.size) * k // y.size
    for py in unbend.LADDER:
        for px in unbend.LADDER:
            yt, xt = _ladder(y, py), _ladder(x, px)
            X = sm.add_constant(xt)
            m = sm.OLS(yt, X).fit()
            c = xt - xt.mean()
            q = (c / c.std()) ** 2
            m2 = sm.OLS(yt, np.column_stack([X, q - q.mean()])).fit()
            bp = het_breuschpagan(m.resid, X)
            nt = st.normaltest(m.resid)
            kw = st.kruskal(*[m.resid[g == i] for i in range(k)])
            out.append((py, px, m.llf, m2.pvalues[-1], bp[1], nt.pvalue, kw.pvalue, m.rsquared))
    return out


def bench_scan(n, repeats):
    y, x = data(n, 3)
    ours = timed(lambda: unbend.scan(y, x), repeats)
    ref = timed(lambda: sm_scan(y, x), 1)
    t = unbend.scan(y, x).set_index(["y_power", "x_power"])
    ok = True
    for py, px, llf, pc, pb, pn, pk, r2 in sm_scan(y, x):
        r = t.loc[(py, px)]
        jac = np.sum(np.log(np.abs(py if py else 1.0) * y ** (py - 1.0)))
        ok &= bool(np.isclose(r["loglik"], llf + jac, rtol=1e-9) and np.isclose(r["r2"], r2, rtol=1e-9)
                   and np.isclose(r["curvature_p"], pc, rtol=1e-6, atol=1e-300)
                   and np.isclose(r["spread_p"], pb, rtol=1e-6, atol=1e-300)
                   and np.isclose(r["normality_p"], pn, rtol=1e-6, atol=1e-300)
                   and np.isclose(r["pattern_p"], pk, rtol=1e-6, atol=1e-300))
    row(f"full scan 6 x 6 rungs with checks, n = {n:,}", ours, ref, "\u2265 10\u00d7", ok)


# 4./5. prediction cells ----------------------------------------------------------------
def sm_predict_cell(y, x, x0):
    X = sm.add_constant(np.log(x))
    m = sm.OLS(np.log(y), X).fit()
    fr = m.get_prediction(np.array([[1.0, np.log(x0)]])).summary_frame(alpha=0.05)
    return float(np.exp(fr["mean"].iloc[0]))


def bench_cells(repeats):
    y, x = data(10_000, 4)
    # xlwings hands a one-column range over as a flat list; each cell gets lists of its own,
    # made here beforehand (making them is the spreadsheet's work, not ours)
    copies = [(y.tolist(), x.tolist()) for _ in range(25)]
    ylist, xlist = copies[0]
    new = np.linspace(2, 98, 1000)
    ref_one = timed(lambda: [sm_predict_cell(y, x, v) for v in new[:100]], 3) / 100

    def thousand_cells():
        for i, v in enumerate(new):
            yl, xl = copies[i % len(copies)]
            UNBEND_PREDICT(yl, xl, float(v), 0, 0, "median")

    _cache.clear()
    UNBEND_PREDICT(ylist, xlist, 50.0, 0, 0, "median")  # the first cell fits; the rest reuse it
    ours = timed(thousand_cells, max(1, repeats // 2))
    got = UNBEND_PREDICT(ylist, xlist, 37.0, 0, 0, "median")
    ok = abs(got - sm_predict_cell(y, x, 37.0)) <= 1e-9 * abs(got)
    row("1,000 single-value UNBEND_PREDICT cells, 10^4 rows", ours, ref_one * 1000, "\u2265 2\u00d7", ok,
        "reference: statsmodels refit + get_prediction per cell")

    spill_new = new.tolist()
    ours = timed(lambda: UNBEND_PREDICT(copies[1][0], copies[1][1], spill_new, 0, 0), repeats)
    out = UNBEND_PREDICT(ylist, xlist, spill_new, 0, 0)
    ok = len(out) == 1001 and abs(out[1][1] - sm_predict_cell(y, x, new[0])) <= 1e-9 * abs(out[1][1])
    row("one UNBEND_PREDICT spilling 1,000 new x, 10^4 rows", ours, ref_one * 1000, "\u2265 100\u00d7", ok,
        "reference: the same 1,000 statsmodels cells")


def bench_inverse(repeats):
    """10,000 readings read back to x from one UNBEND_INVERSE cell (invented bending calibration, 12 standards)."""
    rng = np.random.default_rng(6)
    xs = np.repeat([1.0, 2, 5, 10, 20, 50], 2)
    ys = 3.0 * xs ** 0.8 * rng.lognormal(0.0, 0.03, xs.size)
    readings = (3.0 * rng.uniform(1.0, 50.0, 10_000) ** 0.8).tolist()  # a flat list, as xlwings hands a column
    ylist, xlist = ys.tolist(), xs.tolist()
    _cache.clear()
    cold = timed(lambda: (_cache.clear(), UNBEND_INVERSE(ylist, xlist, readings, 0, 0)), repeats)
    UNBEND_INVERSE(ylist, xlist, readings, 0, 0)  # the fit is cached from here on, as in a recalculating sheet
    warm = timed(lambda: UNBEND_INVERSE(ylist, xlist, readings, 0, 0), max(repeats, 7))
    cpu = []
    for _ in range(max(repeats, 7)):  # processor time as well: on a shared machine wall time waits for a core
        t0 = time.process_time()
        UNBEND_INVERSE(ylist, xlist, readings, 0, 0)
        cpu.append(time.process_time() - t0)
    out = UNBEND_INVERSE(ylist, xlist, readings, 0, 0)
    r = unbend.fit(ys, xs, y_power=0, x_power=0).inverse(np.array(readings))
    ok = len(out) == 10_001 and len(out[0]) == 13  # 11 result columns and the 2 reading columns
    for i in (1, 5_000, 10_000):
        ok &= all(abs(out[i][j] - r[c].iloc[i - 1]) <= 1e-12 * abs(r[c].iloc[i - 1]) for j, c in ((2, "x"), (3, "low"), (4, "high")))
    row("one UNBEND_INVERSE, 10^4 readings, fit cached", warm, None, "\u2264 50 ms", ok,
        f"cells to numbers, cache look-up, inverse, 10,001 x 13 table; processor time {statistics.median(cpu) * 1000:.1f} ms")
    row("one UNBEND_INVERSE, 10^4 readings, fit included", cold, None, "\u2264 100 ms", ok,
        "the same plus the fit of the 12 standards (powers given)")


def bench_column(repeats):
    col = [[float(i)] for i in range(10_000)] + [[None] for _ in range(1_048_576 - 10_000)]  # one list per row, as xlwings gives
    ours = timed(lambda: cells.to_numbers(col), max(repeats, 7))
    ok = cells.to_numbers(col).size == 10_000
    row("whole column to numbers (1,048,576 cells, 10^4 numbers)", ours, None, "\u2264 50 ms", ok)


def bench_host(repeats):
    """The cell functions through xlwings' own Windows code (see the module notes)."""
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    from host.checks import as_com
    from host.harness import Host

    import unbend.udfs as U

    y, x = data(10_000, 6)
    h = Host()
    s = h.sheet
    s.put_column("A1", ["y"] + y.tolist())
    s.put_column("B1", ["x"] + x.tolist())
    new = np.linspace(2, 98, 1000)
    s.put_column("F2", new.tolist())
    A, B = s.ref("A:A"), s.ref("B:B")
    TY, TX = s.ref("A2:A10001"), s.ref("B2:B10001")
    cache = h.ns.module.functions._cache
    h.call("UNBEND_FIT", A, B)
    h.call("UNBEND_FIT", TY, TX)  # the fake workbook builds each block's tuples once (the transfer is not timed)
    ylist, xlist = ["y"] + y.tolist(), ["x"] + x.tolist()

    def whole():
        cache.clear()
        return h.call("UNBEND_FIT", A, B)
    ours, cpu = timed_cpu(whole, repeats)
    ok = whole() == as_com(U.UNBEND_FIT(ylist, xlist))
    with h.active():  # the reference: xlwings' default reading of the same two whole columns, nothing else
        xw, xlw, conv = h.ns.xw, h.ns.xlwindows, h.ns.conversion
        old = timed(lambda: [conv.read(xw.Range(impl=xlw.Range(xl=r)), None, {}) for r in (A, B)], 1)
    s._cache.clear()  # the fake workbook's 1,048,576-row tuples: gone, so the garbage collector does not walk them
    gc.collect()
    calls0 = h.app.calls
    whole()
    row("UNBEND_FIT(A:A, B:B), 10^4 numbers, first calculation, through xlwings", ours, old, "\u2264 100 ms", ok,
        f"cpu {cpu * 1000:.1f} ms; reference: xlwings' default reading of the two columns alone; "
        f"{h.app.calls - calls0} round trips")

    for label, (Y, X) in (("table columns", (TY, TX)), ("whole columns", (A, B))):
        h.call("UNBEND_PREDICT", Y, X, s.ref("F2"), 0.0, 0.0, "median")

        def thousand():
            for i in range(1000):
                h.call("UNBEND_PREDICT", Y, X, s.ref(f"F{i + 2}"), 0.0, 0.0, "median", caller=h.out.ref(f"B{i + 1}"))
        ours, cpu = timed_cpu(thousand, max(1, repeats // 2))
        ours, cpu = ours / 1000, cpu / 1000
        calls0 = h.app.calls
        got = h.call("UNBEND_PREDICT", Y, X, s.ref("F40"), 0.0, 0.0, "median")
        per = h.app.calls - calls0
        ok = got == U.UNBEND_PREDICT(ylist, xlist, float(new[38]), 0.0, 0.0, "median")
        row(f"1,000 single-value UNBEND_PREDICT cells ({label}), per cell, through xlwings", ours, None,
            "\u2264 5 ms", ok, f"cpu {cpu * 1000:.2f} ms; {per} round trips per cell")

    F = s.ref("F2:F1001")

    def spill(fresh=True):
        if fresh:
            cache.clear()
        return h.call("UNBEND_PREDICT", TY, TX, F, 0.0, 0.0)
    ours, cpu = timed_cpu(spill, repeats)
    calls0 = h.app.calls
    out = spill()
    per = h.app.calls - calls0
    ok = out == as_com(U.UNBEND_PREDICT(y.tolist(), x.tolist(), new.tolist(), 0.0, 0.0)) and len(out) == 1001
    row("one UNBEND_PREDICT spilling 1,000 new x, first calculation, through xlwings", ours, None, "\u2264 30 ms", ok,
        f"cpu {cpu * 1000:.1f} ms; the fit included; result handed back for COM; {per} round trips")
    ours, cpu = timed_cpu(lambda: spill(False), repeats)
    row("the same, recalculated (the fit already cached)", ours, None, "\u2264 30 ms", ok, f"cpu {cpu * 1000:.1f} ms")


# 6./7. values below a limit (censored) ---------------------------------------------------
def censored_data(n, share=0.3, seed=6):
    y, x = data(n, seed)
    L = float(np.quantile(y, share))
    c = y < L
    return np.where(c, L, y), x, c


def _at_a_maximum(f, y, x, c):
    """The censored log-likelihood written with scipy.stats is lower a small step away from the fit in
    every coordinate (intercept, slope, log sigma): the fit is at its maximum."""
    z, lx = np.log(y), np.log(x)

    def ll(b0, b1, ls):
        mu, s = b0 + b1 * lx, np.exp(ls)
        return st.norm.logpdf(z[~c], mu[~c], s).sum() + st.norm.logcdf(z[c], mu[c], s).sum()

    th = np.array([f.coef[0], f.coef[1], np.log(f.sigma)])
    top = ll(*th)
    se = np.sqrt(np.diag(f.cov_information))
    for i in range(3):
        for d in (-1e-3, 1e-3):
            t2 = th.copy()
            t2[i] += d * se[i]
            if ll(*t2) > top:
                return False
    return True


def bench_censored(repeats):
    y, x, c = censored_data(100_000)
    ours = timed(lambda: unbend.fit(y, x, y_power=0, x_power=0, censored=c), repeats)
    ref = timed(lambda: unbend.fit(y, x, y_power=0, x_power=0), repeats)
    f = unbend.fit(y, x, y_power=0, x_power=0, censored=c)
    row("censored fit (30% below a limit, with checks), n = 100,000", ours, ref, "\u2265 0.1\u00d7",
        _at_a_maximum(f, y, x, c), "reference: the least-squares fit of the same y, limits as values")
    y, x, c = censored_data(10_000, seed=7)
    ours = timed(lambda: unbend.suggest_power(y, x, x_power=0, censored=c), repeats)
    s = unbend.suggest_power(y, x, x_power=0, censored=c)
    top = unbend.fit(y, x, y_power=s.estimate, x_power=0, censored=c).loglik
    row("power for y with 30% censored, one x, n = 10,000", ours, None, "\u2264 1000 ms",
        abs(s.loglik - top) <= 1e-6 * abs(top), "profile top = the censored fit's log-likelihood there")


def bench_memory():
    y, _ = data(1_000_000, 5)
    tracemalloc.start()
    unbend.suggest_power(y)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    ratio = peak / y.nbytes
    met = ratio <= 10
    ROWS.append(("peak memory, power for y, n = 10^6", peak, None, ratio, "\u2264 10\u00d7 data", met, ""))
    print(f"{'peak memory, power for y, n = 1,000,000':<58} peak {peak / 2**20:8.1f} MB  data {y.nbytes / 2**20:.1f} MB"
          f"  ratio {ratio:5.1f}  target \u2264 10\u00d7 data  {'met' if met else 'NOT met'}", flush=True)


# 6. many groups ------------------------------------------------------------------------
def group_data(groups, rows, seed=6):
    """Invented network: ``groups`` stations x ``rows`` readings, log y straight in log x per station."""
    rng = np.random.default_rng(seed)
    code = np.repeat(np.arange(groups), rows)
    x = rng.uniform(1.0, 100.0, code.size)
    a, b = rng.normal(0.0, 0.3, groups), rng.normal(0.7, 0.05, groups)
    y = np.exp(a[code] + b[code] * np.log(x) + rng.normal(0.0, 0.25, code.size))
    labels = np.array([f"station {i:05d}" for i in range(groups)], dtype=object)
    return y, x, labels[code]


def sm_group_lines(y, x, g, py, px):
    """pandas groupby + statsmodels, one group at a time, at given powers: the line with its interval, R²,
    residual SD, and the same four residual checks (Tukey 1 df, Kruskal-Wallis across bins of x,
    Breusch-Pagan, Shapiro-Wilk)."""
    import pandas as pd
    frame = pd.DataFrame({"g": g, "yt": _ladder(y, py), "xt": _ladder(x, px), "x": x})

    def one(d):
        X = sm.add_constant(d["xt"].to_numpy())
        yt = d["yt"].to_numpy()
        m = sm.OLS(yt, X).fit()
        ci = m.conf_int(0.05)
        c = X[:, 1] - X[:, 1].mean()
        q = (c / c.std()) ** 2
        curv = sm.OLS(yt, np.column_stack([X, q - q.mean()])).fit().pvalues[-1]
        n = yt.size
        k = int(np.clip(n // 8, 3, 10))
        bins = (st.rankdata(d["x"].to_numpy(), method="min").astype(int) - 1) * k // n
        kw = st.kruskal(*[m.resid[bins == i] for i in range(k) if np.any(bins == i)]).pvalue
        return pd.Series({"intercept": m.params[0], "slope": m.params[1], "slope_low": ci[1, 0],
                          "slope_high": ci[1, 1], "r2": m.rsquared, "resid_sd": np.sqrt(m.scale),
                          "curvature_p": curv, "pattern_p": kw, "spread_p": het_breuschpagan(m.resid, X)[1],
                          "normality_p": st.shapiro(m.resid).pvalue})

    return frame.groupby("g", sort=True).apply(one, include_groups=False)


def sm_group_lines_only(y, x, g, py, px):
    """pandas groupby + statsmodels OLS per group: the line with its interval, R² and residual SD only."""
    import pandas as pd
    frame = pd.DataFrame({"g": g, "yt": _ladder(y, py), "xt": _ladder(x, px)})

    def one(d):
        m = sm.OLS(d["yt"].to_numpy(), sm.add_constant(d["xt"].to_numpy())).fit()
        ci = m.conf_int(0.05)
        return pd.Series({"intercept": m.params[0], "slope": m.params[1], "slope_low": ci[1, 0],
                          "slope_high": ci[1, 1], "r2": m.rsquared, "resid_sd": np.sqrt(m.scale)})

    return frame.groupby("g", sort=True).apply(one, include_groups=False)


def bench_groups(groups, repeats):
    y, x, g = group_data(groups, 200)
    rows = f"{groups:,} groups x 200 rows"
    t_all = timed(lambda: unbend.fit_groups(y, x, g), repeats)
    c0 = time.process_time()
    gf = unbend.fit_groups(y, x, g)
    cpu = time.process_time() - c0
    sample = gf.table.iloc[:: max(1, groups // 20)]
    d = 0.0
    for _, r in sample.iterrows():
        sel = g == r["group"]
        f = unbend.fit(y[sel], x[sel], y_power=gf.y_power, x_power=gf.x_power)
        d = max(d, abs(r["slope"] - f.coef[1]) / abs(f.coef[1]), abs(r["resid_sd"] - f.resid_sd) / f.resid_sd)
    row(f"fit_groups, powers chosen, own powers and checks, {rows}", t_all, None, "\u2264 10000 ms", d <= 1e-10,
        f"CPU time {cpu:.1f} s; 20 group lines vs unbend.fit: {d:.1e}")
    py, px = gf.y_power, gf.x_power
    ref_t = timed(lambda: sm_group_lines(y, x, g, py, px), 1)
    ref = sm_group_lines(y, x, g, py, px)
    ours = timed(lambda: unbend.fit_groups(y, x, g, y_power=py, x_power=px, own_powers=False), repeats)
    got = unbend.fit_groups(y, x, g, y_power=py, x_power=px, own_powers=False).table.set_index("group")
    cols = list(ref.columns)
    dev = np.max(np.abs(got.loc[ref.index, cols].to_numpy(float) - ref.to_numpy(float))
                 / np.maximum(np.abs(ref.to_numpy(float)), 1e-300))
    row(f"lines and checks at given powers, {rows}", ours, ref_t, "\u2265 20\u00d7", dev <= 1e-8,
        f"reference: pandas groupby + statsmodels per group (same columns); max rel diff {dev:.1e}")
    ref2_t = timed(lambda: sm_group_lines_only(y, x, g, py, px), 1)
    ref2 = sm_group_lines_only(y, x, g, py, px)
    dev2 = np.max(np.abs(got.loc[ref2.index, list(ref2.columns)].to_numpy(float) - ref2.to_numpy(float))
                  / np.maximum(np.abs(ref2.to_numpy(float)), 1e-300))
    row(f"same, against lines only (no checks) in the reference, {rows}", ours, ref2_t, "none", dev2 <= 1e-8,
        f"reference: groupby + statsmodels OLS, interval, R², residual SD; ours also runs the checks; {dev2:.1e}")
    full = timed(lambda: unbend.fit_groups(y, x, g, y_power=py, x_power=px), repeats)
    row(f"same, with each group's own y and x powers, {rows}", full, ref_t, "none", True,
        "the reference does not estimate own powers")


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="fewer repeats, skip n = 10^6, 1,000 groups")
    ap.add_argument("--host", action="store_true", help="only the rows through xlwings' own code")
    ap.add_argument("--groups", action="store_true", help="only the many-groups rows")
    a = ap.parse_args(argv)
    reps = 3 if a.quick else 5
    print(f"unbend benchmark, {time.strftime('%Y-%m-%d')}, numpy {np.__version__}, medians of {reps} runs\n")
    if a.host:
        bench_host(reps)
        return _report()
    if a.groups:
        bench_groups(1_000 if a.quick else 10_000, 1 if a.quick else 3)
        return _report()
    for n in (10_000, 100_000) + (() if a.quick else (1_000_000,)):
        bench_boxcox(n, reps)
    bench_boxcox_x(100_000 if a.quick else 1_000_000, reps)
    bench_scan(100_000, reps)
    bench_cells(reps)
    bench_inverse(reps)
    bench_column(reps)
    bench_host(reps)
    bench_censored(reps)
    bench_groups(1_000 if a.quick else 10_000, 3 if not a.quick else 1)
    if not a.quick:
        bench_memory()
    return _report()


def _report():
    missed = [r[0] for r in ROWS if not r[5]]
    print("\nall targets met" if not missed else f"\ntargets not met: {'; '.join(missed)}")
    return 0 if not missed else 1


if __name__ == "__main__":
    sys.exit(main())
