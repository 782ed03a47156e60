"""The report's plots drawn in a second process (udfs/plots.py, Drawer) are the plots drawn in process.

The data are invented (y = 2 * x^0.5 * lognormal noise, seeded), so the only truth checked here is a
property: the second process writes the same files, byte for byte, as :func:`plots.draw` in this
process, and every way that process can fail still ends with those files, drawn here.
"""
from __future__ import annotations

import os
import sys

import numpy as np
import pandas as pd
import pytest

from unbend.udfs import plots
from unbend.udfs.report import analyse

from cli_helpers import run


@pytest.fixture(scope="module")
def plot_data():
    rng = np.random.default_rng(20261203)  # invented data
    x = rng.uniform(1.0, 200.0, 300)
    y = 2.0 * x ** 0.5 * rng.lognormal(0.0, 0.15, 300)
    cens = y < np.quantile(y, 0.1)  # invented: the lowest tenth held at a limit, to draw the censored markers too
    y = np.where(cens, np.quantile(y, 0.1), y)
    plain = plots.plot_data(analyse(pd.DataFrame({"y": y, "x": x}), "y", ["x"]))
    censored = plots.plot_data(analyse(pd.DataFrame({"y": y, "x": x}), "y", ["x"], censored=cens,
                                       y_power=0, x_power=0))
    return {"plain": plain, "censored": censored}


@pytest.fixture
def drawn_in(monkeypatch):
    """Where each command's plots were drawn ("second process" or "this process"), with two cores assumed."""
    seen = []
    original = plots.Drawer.result

    def spy(self):
        paths = original(self)
        seen.append(self.drawn_in)
        return paths

    monkeypatch.setattr(plots.Drawer, "result", spy)
    monkeypatch.setattr(plots, "_cores", lambda: 2)
    return seen


def _bytes(folder):
    return {name: open(os.path.join(folder, name), "rb").read() for name in sorted(os.listdir(folder))}


@pytest.mark.parametrize("kind", ["plain", "censored"])
def test_second_process_draws_the_same_files_as_this_one(plot_data, kind, tmp_path):
    d = plot_data[kind]
    here = plots.draw(d, tmp_path / "here")
    with plots.Drawer(parallel=True) as drawer:
        assert drawer.proc is not None
        drawer.submit(d, tmp_path / "there")
        there = drawer.result()
        assert drawer.drawn_in == "second process"
    assert [os.path.basename(p) for p in there] == [os.path.basename(p) for p in here] == list(plots.PLOT_FILES)
    a, b = _bytes(tmp_path / "here"), _bytes(tmp_path / "there")
    assert a.keys() == b.keys() == set(plots.PLOT_FILES)
    assert a == b
    assert all(v.startswith(b"\x89PNG") for v in a.values())


class _Fails(plots.Drawer):
    command = (sys.executable, "-c", "import sys; sys.exit(3)")  # ends at once, before reading the job


class _SaysFailed(plots.Drawer):  # reads the job, then answers that it could not draw
    command = (sys.executable, "-c", "import pickle, sys; sys.stdin.buffer.read(); "
               "sys.stdout.buffer.write(pickle.dumps(('failed', 'RuntimeError: invented failure')))")


class _Garbles(plots.Drawer):  # answers with something that is not an answer
    command = (sys.executable, "-c", "import sys; sys.stdin.buffer.read(); sys.stdout.write('matplotlib says hi')")


class _NoSuchProgram(plots.Drawer):
    command = (os.path.join(os.sep, "no", "such", "python"),)


@pytest.mark.parametrize("cls", [_Fails, _SaysFailed, _Garbles, _NoSuchProgram])
def test_a_failing_second_process_means_drawing_here_with_the_same_files(plot_data, cls, tmp_path):
    d = plot_data["plain"]
    plots.draw(d, tmp_path / "here")
    with cls(parallel=True) as drawer:
        if cls is _Fails:
            drawer.proc.wait()  # it has ended before the job is handed over: submit must not raise
        drawer.submit(d, tmp_path / "there")
        paths = drawer.result()
        assert drawer.drawn_in == "this process" and drawer.proc is None
    assert sorted(os.path.basename(p) for p in paths) == sorted(plots.PLOT_FILES)
    assert _bytes(tmp_path / "here") == _bytes(tmp_path / "there")


def test_one_core_or_asked_draws_here(plot_data, tmp_path):
    with plots.Drawer(parallel=False) as drawer:
        assert drawer.proc is None
        drawer.submit(plot_data["plain"], tmp_path / "p")
        drawer.result()
        assert drawer.drawn_in == "this process"
    assert sorted(os.listdir(tmp_path / "p")) == sorted(plots.PLOT_FILES)


def test_result_before_submit_is_a_programming_error():
    with plots.Drawer(parallel=False) as drawer, pytest.raises(RuntimeError, match="before submit"):
        drawer.result()


def test_leaving_before_submit_stops_the_second_process():
    with plots.Drawer(parallel=True) as drawer:
        proc = drawer.proc
        assert proc is not None and proc.poll() is None  # still loading matplotlib
    assert proc.returncode is not None and drawer.proc is None  # stopped and reaped on leaving


def test_a_refused_report_stops_the_second_process(tmp_path, monkeypatch):
    """`unbend report` on a column that is not there: one-line refusal, and no second process left running."""
    started = []
    original = plots.Drawer.__init__

    def spy(self, parallel=None):
        original(self, parallel=True)
        started.append(self)

    monkeypatch.setattr(plots.Drawer, "__init__", spy)
    data = tmp_path / "d.csv"
    data.write_text("a,b\n1,2\n2,3\n3,5\n4,4\n")  # invented
    code, out, err = run(["report", data, "--y", "a", "--x", "nope", "--out", tmp_path / "r.xlsx"])
    assert code != 0 and "nope" in err
    assert len(started) == 1 and started[0].proc is None
    assert not (tmp_path / "r.xlsx").exists() and not (tmp_path / "r_plots").exists()


def test_report_draws_in_the_second_process_and_publishes_its_plots(tmp_path, drawn_in):
    """The command's own path: the plots come from the second process and sit beside the workbook."""
    rng = np.random.default_rng(7)  # invented
    x = rng.uniform(1.0, 100.0, 60)
    y = 5.0 * np.log(x) + rng.normal(0.0, 0.2, 60)
    data = tmp_path / "d.csv"
    pd.DataFrame({"reading": y, "dose": x}).to_csv(data, index=False)
    code, out, err = run(["report", data, "--y", "reading", "--x", "dose", "--out", tmp_path / "r.xlsx", "--quiet"])
    assert code == 0, err
    assert drawn_in == ["second process"]
    assert sorted(os.listdir(tmp_path / "r_plots")) == sorted(plots.PLOT_FILES)
    for name in plots.PLOT_FILES:
        assert f"r_plots{os.sep}{name}" in out


@pytest.mark.parametrize("exe, ok", [("/usr/bin/python3", True), (r"C:\\Python311\\python.exe", True),
                                     (r"C:\\Python311\\pythonw.exe", True), ("/opt/venv/bin/python3.11", True),
                                     (r"C:\\Program Files\\Office\\EXCEL.EXE", False), ("", False), (None, False)])
def test_second_process_only_from_a_python_interpreter(exe, ok, monkeypatch):
    """Inside a program that embeds Python, sys.executable names that program: never start it."""
    assert plots._is_python(exe) is ok
    monkeypatch.setattr(plots.sys, "executable", exe)
    monkeypatch.setattr(plots, "_cores", lambda: 2)
    monkeypatch.setattr(plots.subprocess, "Popen", lambda *a, **k: pytest.fail("started a process"))
    if not ok:
        with plots.Drawer() as drawer:
            assert drawer.proc is None



def test_groups_plots_from_the_second_process_equal_those_drawn_here(tmp_path):
    """`unbend groups`' two PNGs (plots.draw_groups) drawn in the second process equal, byte for byte, those
    drawn here. Invented series (three straight on log-log, one that bends there)."""
    from unbend.udfs import groups_report as G
    from unbend.udfs.files import read_data

    rng = np.random.default_rng(1)  # invented
    g = np.repeat(["a", "b", "c", "d"], 40)
    x = np.tile(np.linspace(1.0, 50.0, 40), 4)
    y = 3.0 * x ** 0.7 * rng.lognormal(0.0, 0.05, 160)
    y[g == "d"] = 5.0 * np.exp(0.02 * x[g == "d"]) * rng.lognormal(0.0, 0.05, 40)
    pd.DataFrame({"site": g, "x": x, "y": y}).to_csv(tmp_path / "s.csv", index=False)
    a = G.analyse_groups(read_data(str(tmp_path / "s.csv"), "y", ["x"], groups="site"), y_power=0, x_power=0)
    d = G.plot_data(a)
    here = plots.draw_groups(d, tmp_path / "here")
    with plots.Drawer(parallel=True) as drawer:
        drawer.submit(d, tmp_path / "there", plots.draw_groups)
        there = drawer.result()
        assert drawer.drawn_in == "second process"
    assert [os.path.basename(p) for p in here] == [os.path.basename(p) for p in there] == G.PLOT_FILES
    assert _bytes(tmp_path / "here") == _bytes(tmp_path / "there")
    # the series that bends is drawn red and named, from the fit's own table
    assert d["bad"].tolist() == [False, False, False, True] and d["named"] == [(3, "d")]


def test_groups_command_draws_in_the_second_process(tmp_path, drawn_in):
    rng = np.random.default_rng(2)  # invented
    g = np.repeat(["p", "q", "r"], 25)
    x = np.tile(np.linspace(1.0, 30.0, 25), 3)
    pd.DataFrame({"line": g, "x": x, "y": 2.0 * x ** 0.5 * rng.lognormal(0.0, 0.05, 75)}).to_csv(
        tmp_path / "g.csv", index=False)
    code, out, err = run(["groups", tmp_path / "g.csv", "--y", "y", "--x", "x", "--by", "line", "--quiet",
                          "--out", tmp_path / "g.xlsx"])
    assert code == 0, err
    assert drawn_in == ["second process"]
    assert sorted(os.listdir(tmp_path / "g_plots")) == ["all_series.png", "worst_series.png"]
