"""Values below a detection limit in cells, through xlwings' own Windows code (issue 12).

The y column holds "<1.5" texts as a workbook hands them over through COM (str cells among floats, a
header on top); the fit must be the censored fit and the table must count the censored values.
Data are invented (seeded; a made-up residue-against-dose survey, not measurements); the check is an
independent censored likelihood maximised with scipy.optimize (tests/test_censored_reading.py).
"""
from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

import unbend.udfs as U

from .checks import as_com, check_com
from .harness import Host

_spec = importlib.util.spec_from_file_location("censored_reference", Path(__file__).parents[1]
                                               / "test_censored_reading.py")
_ref = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(_ref)
ml_line, survey = _ref.ml_line, _ref.survey


def test_censored_fit_through_xlwings():
    x, y, cens = survey()
    h = Host()
    s = h.sheet
    s.put_column("A1", ["residue"] + ["<1.5" if c else float(v) for v, c in zip(y, cens)])
    s.put_column("B1", ["dose"] + [float(v) for v in x])
    got = check_com(h.call("UNBEND_FIT", s.ref("A:A"), s.ref("B:B"), 0.0, 0.0))
    d = {r[0]: r[1] for r in got[1:]}
    a, b, sd = ml_line(np.log(np.where(cens, 1.5, y)), np.log(x), cens)  # source: scipy.optimize (see module)
    assert d["slope x"] == pytest.approx(b, rel=1e-4) and d["intercept"] == pytest.approx(a, rel=1e-4, abs=1e-6)
    assert d["values below a limit, fitted as censored"] == int(cens.sum())
    direct = as_com(U.UNBEND_FIT(["residue"] + ["<1.5" if c else float(v) for v, c in zip(y, cens)],
                                 ["dose"] + list(x), 0.0, 0.0))  # the header cells, as the whole columns hold
    assert got == direct
    text = h.call("UNBEND_FORMULA", s.ref("A2:A41"), s.ref("B2:B41"), 0.0, 0.0, "B2", "mean")
    assert isinstance(text, str) and text.startswith("=EXP(") and "NAN" not in text.upper()
