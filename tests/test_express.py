"""Re-expression and its inverse: ladder rungs, any real power, log10, starts, Yeo-Johnson."""
from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
from scipy import stats

import unbend

# Invented positive values spanning four orders of magnitude.
POS = np.array([0.03, 0.5, 1.0, 2.7, 9.0, 41.0, 380.0])
RUNGS = list(unbend.LADDER) + list(unbend.EXTRA_RUNGS)  # 2, 1, 1/2, 0, -1/2, -1, 3, 1/3, -2
REALS = [0.37, -1.7, 2.5, 1.3, -0.25, 4.0, -3.0]


@pytest.mark.parametrize("p", RUNGS + REALS)
def test_matches_ladder_definition(p, ref):
    # common practice (Tukey's ladder: v**p, log v at 0, -(v**p) below 0 so that order is kept)
    np.testing.assert_allclose(unbend.express(POS, p), ref.ladder(POS, p), rtol=1e-13, atol=0)


@pytest.mark.parametrize("p", RUNGS + REALS)
@pytest.mark.parametrize("start", [0.0, 2.5])
def test_unexpress_is_exact_inverse(p, start):
    # property of an exact inverse (invented data); with the start some values are below 0
    v = POS - (2.0 if start else 0.0)
    z = unbend.express(v, p, start=start)
    assert np.all(np.isfinite(z))
    np.testing.assert_allclose(unbend.unexpress(z, p, start=start), v, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("p", [-2.0, -1.0, -0.5, -1.7, -0.25, -3.0])
def test_negative_powers_keep_order(p):
    # common practice: negative powers are applied as -(v**p) so larger values stay larger
    z = unbend.express(np.sort(POS), p)
    assert np.all(np.diff(z) > 0)
    assert np.all(z < 0)


@pytest.mark.parametrize("p", RUNGS + REALS)
def test_every_power_is_increasing(p):
    # common practice: every rung of the ladder, as re-expressed, is an increasing function
    v = np.linspace(0.2, 30.0, 60)
    assert np.all(np.diff(unbend.express(v, p)) > 0)


def test_log10_and_its_inverse():
    # source: numpy.log10
    np.testing.assert_allclose(unbend.express(POS, 0, log10=True), np.log10(POS), rtol=1e-14)
    np.testing.assert_allclose(unbend.express(POS, 0, start=1.5, log10=True), np.log10(POS + 1.5), rtol=1e-14)
    z = unbend.express(POS, 0, start=1.5, log10=True)
    np.testing.assert_allclose(unbend.unexpress(z, 0, start=1.5, log10=True), POS, rtol=1e-13)


def test_start_is_added_before_re_expressing():
    # source: numpy (sqrt, log of value + start)
    v = np.array([-1.5, 0.0, 2.0, 7.0])
    np.testing.assert_allclose(unbend.express(v, 0.5, start=2.0), np.sqrt(v + 2.0), rtol=1e-14)
    np.testing.assert_allclose(unbend.express(v, 0, start=2.0), np.log(v + 2.0), rtol=1e-14)


@pytest.mark.parametrize("p", [3.0, 5.0])
def test_odd_integer_powers_accept_any_sign(p):
    # source: numpy.power; an odd power is defined and increasing for values of either sign
    v = np.array([-4.0, -1.0, -0.2, 0.0, 0.3, 2.0, 6.0])
    z = unbend.express(v, p)
    np.testing.assert_allclose(z, np.power(v, p), rtol=1e-14)
    np.testing.assert_allclose(unbend.unexpress(z, p), v, rtol=1e-13, atol=1e-15)


def test_cube_root_of_negatives_is_refused():
    # common practice: fractional powers of negative numbers are not real in this family
    with pytest.raises(unbend.DomainError):
        unbend.express([-1.0, 2.0, 3.0], 1.0 / 3.0)


@pytest.mark.parametrize("lam", [-1.5, -0.5, 0.0, 0.5, 1.0, 1.5, 2.0, 2.7])
def test_yeo_johnson_matches_scipy_and_inverts(lam):
    # source: scipy.stats.yeojohnson(x, lmbda)
    v = np.array([-7.0, -2.5, -1.0, -0.3, 0.0, 0.4, 1.0, 3.3, 12.0])
    z = unbend.express(v, lam, family="yeo-johnson")
    np.testing.assert_allclose(z, stats.yeojohnson(v, lmbda=lam), rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(unbend.unexpress(z, lam, family="yeo-johnson"), v, rtol=1e-12, atol=1e-13)


CASES = [
    # values, power, start given, start proposed (None = check only that it works)
    (np.array([0.0, 1, 2, 2, 5, 9]), 0.0, 0.0, 0.5),     # counts with zeros: start 1/2 (common practice)
    (np.array([0.0, 1, 2, 2, 5, 9]), -1.0, 0.0, 0.5),    # reciprocal of counts with zeros
    (np.array([0.0, 1, 2, 2, 5, 9]), -0.5, 0.0, 0.5),
    (np.array([-3.0, 0, 1, 2, 5]), -0.5, 1.0, None),
    (np.array([-3.0, 0, 1, 2, 5]), 0.5, 0.0, None),
    (np.array([-0.25, 0.5, 1.75, 4.0]), 0.0, 0.0, None),
]


@pytest.mark.parametrize("values,power,start,expected", CASES)
def test_domain_error_proposes_a_start_that_works(values, power, start, expected):
    with pytest.raises(unbend.DomainError) as info:
        unbend.express(values, power, start=start)
    err = info.value
    assert isinstance(err, ValueError)  # callers can catch a plain ValueError
    s = err.proposed_start
    if expected is not None:
        # common practice: counts with zeros get a start of 1/2
        assert s == pytest.approx(expected)
    msg = str(err)
    assert "start" in msg and f"{s:g}" in msg
    assert "Traceback" not in msg and "nan" not in msg.lower()
    # the proposed start really makes the data usable: finite, increasing, exactly invertible
    z = unbend.express(values, power, start=s)
    assert np.all(np.isfinite(z))
    order = np.argsort(values, kind="stable")
    assert np.all(np.diff(z[order]) >= 0)
    np.testing.assert_allclose(unbend.unexpress(z, power, start=s), values, rtol=1e-12, atol=1e-12)


def test_proposed_start_works_through_fit_and_suggest_power():
    # invented counts with zeros against an invented predictor
    x = np.arange(1.0, 13.0)
    y = np.array([0, 1, 0, 2, 3, 3, 5, 4, 7, 9, 8, 12], dtype=float)
    with pytest.raises(unbend.DomainError) as info:
        unbend.fit(y, x, y_power=0)
    s = info.value.proposed_start
    f = unbend.fit(y, x, y_power=0, y_start=s)
    assert np.all(np.isfinite(f.coef))
    sug = unbend.suggest_power(y, x, y_start=s)
    assert np.isfinite(sug.estimate)


def test_domain_error_message_reads_plainly():
    # the message goes straight to a spreadsheet user: it must read as plain English
    with pytest.raises(unbend.DomainError) as info:
        unbend.express([0.0, 1.0, 2.0, 5.0], 0)
    msg = str(info.value)
    assert msg.startswith("log needs every")
    assert "values value" not in msg, msg


def test_unexpress_takes_unreachable_values_to_the_edge():
    # documented behaviour: below 0 for a square root goes to -start; 0 or above for a negative power to +inf
    np.testing.assert_array_equal(unbend.unexpress([-1.0, -0.1], 0.5, start=2.0), [-2.0, -2.0])
    for p in (-0.5, -1.0, -2.0):
        out = unbend.unexpress([0.0, 0.5], p)
        assert np.all(np.isposinf(out)), (p, out)


def test_non_numbers_stay_nan():
    z = unbend.express([1.0, "abc", None, 4.0, np.nan], 0.5)
    assert np.isnan(z[[1, 2, 4]]).all()
    np.testing.assert_allclose(z[[0, 3]], [1.0, 2.0])


def test_rung_labels():
    # common practice names of the rungs
    names = {2.0: "square", 1.0: "raw", 0.5: "square root", 0.0: "log", -0.5: "reciprocal root",
             -1.0: "reciprocal", 3.0: "cube", 1.0 / 3.0: "cube root", -2.0: "reciprocal square"}
    for p, nm in names.items():
        assert unbend.rung_label(p) == nm
    assert unbend.rung_label(0.0, log10=True) == "log10"
    assert unbend.rung_label(0.37) == "power 0.37"


def test_reexpression_is_frozen():
    t = unbend.Reexpression(0.5, 1.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        t.power = 2.0
    with pytest.raises(unbend.UnbendError):
        unbend.Reexpression(0.5, family="something else")


def test_bad_power_is_refused():
    for bad in ("half", np.nan, np.inf, 1000):
        with pytest.raises(unbend.UnbendError):
            unbend.express([1.0, 2.0], bad)


@pytest.mark.parametrize("kind", ["numpy", "list", "series"])
def test_inputs_are_not_changed(kind, unchanged):
    base = [0.0, 1.0, 2.5, np.nan, 7.0]
    v = {"numpy": np.array(base), "list": list(base), "series": pd.Series(base, index=[5, 6, 7, 8, 9])}[kind]
    before = unchanged.snapshot(v)
    unbend.express(v, 0.5)
    unbend.express(v, 0, start=1.0)
    unbend.express(v, 0.5, family="yeo-johnson")
    unbend.unexpress(v, 0.5)
    unbend.unexpress(v, -1.0, start=0.5)
    unbend.propose_start(v, 0.0)
    t = unbend.Reexpression(0.5)
    t.apply(v)
    t.invert(v)
    t.derivative(np.asarray(v, dtype=float) if kind == "list" else v)
    assert unchanged.same(v, before)
