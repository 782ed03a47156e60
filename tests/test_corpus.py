"""The corpus of messy files (tests/corpus/build.py) read as `unbend report` reads them.

What is checked against what
----------------------------
* Every file and its clean data are invented by the builder (seeded, scenarios of our own); the clean
  rows are the known truth of the construction.  For each case: the rows used equal the clean rows value for
  value, the rows skipped are counted under the expected reasons, labels carry the units or date origin,
  and the reading's sentences say what was done.
* The fitted line on the rows read is compared with numpy least squares on the clean rows
  (source: numpy.linalg.lstsq, an outside reference routine).
* A case that must refuse gives one message naming the column or option and the next thing to type,
  through the reading function and through the command (exit status 2, one line).
Nothing silently wrong: a case either matches the clean fit or refuses with its message.
"""
from __future__ import annotations

import contextlib
import io
import shutil
import time

import numpy as np
import openpyxl
import pytest

import unbend
from unbend import UnbendError
from unbend.udfs import cli, intake
from unbend.udfs.files import read_data

from corpus.build import CASES, build_all

OPTION = {"sheet": "--sheet", "header_row": "--header-row", "decimal": "--decimal", "hidden": "--hidden"}


@pytest.fixture(scope="session")
def corpus(tmp_path_factory):
    t0 = time.monotonic()
    files = build_all(str(tmp_path_factory.mktemp("corpus")))
    return {"files": files, "seconds": time.monotonic() - t0}


def _read(case, path):
    a = dict(case.args)
    return read_data(path, a.pop("y"), a.pop("x"), **a)


def _argv(case, path, out):
    a = dict(case.args)
    argv = ["report", str(path), "--y", a.pop("y")]
    for x in a.pop("x"):
        argv += ["--x", x]
    for k, v in a.items():
        argv += [OPTION[k], str(v)]
    return argv + ["--out", str(out), "--quiet"]


def _path(case, corpus):
    p = corpus["files"].get(case.file)
    if p is None:
        assert shutil.which("soffice") is None, f"{case.file} was not built"
        pytest.skip("LibreOffice (soffice) is not installed")
    return p


def test_corpus_has_at_least_30_cases_and_builds_quickly(corpus):
    assert len(CASES) >= 30
    assert len({c.name for c in CASES}) == len(CASES)
    assert corpus["seconds"] < 60, corpus["seconds"]


@pytest.mark.parametrize("case", [c for c in CASES if not c.refuse], ids=lambda c: c.name)
def test_case_reads_the_clean_rows(case, corpus):
    r = _read(case, _path(case, corpus))
    rows = r.rows
    # rows used: exactly the clean rows, value for value (known truth of the construction)
    assert rows.n_used == len(case.y), r.lines()
    np.testing.assert_allclose(r.y, case.y, rtol=1e-12, atol=0)
    np.testing.assert_allclose(r.X[:, 0], case.x, rtol=1e-12, atol=1e-12)
    # rows skipped, by reason
    got = {intake.REASON_KEYS[k]: n for k, n in rows.counts().items()}
    assert got == case.skipped, r.lines()
    text = " ".join(r.lines())
    for w in case.notes:
        assert w in text, text
    if case.labels:
        assert (r.y_label, r.x_labels[0]) == case.labels
    if case.from_text is not None:
        assert sum(c.from_text for c in rows.columns) == case.from_text
        assert "read from text" in text
    # the line: the engine on the rows read against numpy least squares on the clean rows
    f = unbend.fit(r.y, r.X, y_power=1, x_power=1)
    A = np.column_stack([np.ones(len(case.x)), np.asarray(case.x, float)])
    coef = np.linalg.lstsq(A, np.asarray(case.y, float), rcond=None)[0]  # source: numpy.linalg.lstsq
    np.testing.assert_allclose(f.coef, coef, rtol=1e-8, atol=1e-10)


@pytest.mark.parametrize("case", [c for c in CASES if c.refuse], ids=lambda c: c.name)
def test_case_refuses_in_words(case, corpus, tmp_path):
    path = _path(case, corpus)
    with pytest.raises(UnbendError) as e:
        _read(case, path)
    for w in case.refuse:
        assert w in str(e.value), str(e.value)
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main(_argv(case, path, tmp_path / "r.xlsx"))
    lines = [ln for ln in err.getvalue().splitlines() if ln.strip()]
    assert code == cli.EXIT_BAD_INPUT and len(lines) == 1 and lines[0].startswith("unbend:"), err.getvalue()
    for w in case.refuse:
        assert w in lines[0]
    assert not (tmp_path / "r.xlsx").exists()


def _case(name):
    return next(c for c in CASES if c.name == name)


@pytest.mark.parametrize("name", ["Total and Mittelwert lines in a CSV", "times of day as x",
                                  "units row under the header", "rows hidden by a filter"])
def test_command_report_shows_the_reading(name, corpus, tmp_path):
    """The path users take: `unbend report` on the file; the workbook holds the clean rows and says what was
    skipped and why, with the file's row numbers, units and date origin in the headers."""
    case = _case(name)
    path = _path(case, corpus)
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main(_argv(case, path, tmp_path / "r.xlsx"))
    assert code == 0, err.getvalue()
    wb = openpyxl.load_workbook(tmp_path / "r.xlsx")
    items = {r[0]: r[1] for r in wb["Fit"].iter_rows(min_row=4, max_col=2, values_only=True) if r[0]}
    assert items["rows used"] == len(case.y)
    assert items["rows skipped"] == sum(case.skipped.values())
    for reason, n in case.skipped.items():
        assert items[f"skipped: {intake.reason_word(intake.REASON_KEYS.index(reason))}"] == n
    res = wb["Residuals"]
    header = [c.value for c in res[2]]
    r = _read(case, path)
    assert r.y_label in header and r.x_labels[0] in header
    rows = [row[0] for row in res.iter_rows(min_row=3, values_only=True) if row[0] is not None]
    assert rows == [int(v) for v in r.row_numbers]  # the file's own row numbers
    ycol = header.index(r.y_label)
    got = [row[ycol] for row in res.iter_rows(min_row=3, values_only=True) if row[0] is not None]
    np.testing.assert_allclose(got, case.y, rtol=1e-12)
    summary = "\n".join(str(v) for row in wb["Summary"].iter_rows(values_only=True) for v in row if v)
    for line in r.lines():
        assert line in summary or line in out.getvalue()
