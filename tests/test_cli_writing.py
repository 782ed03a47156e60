"""`unbend report`: model choices, zeros and negatives, output safety, `python -m unbend`, start-up.

What is checked against what
----------------------------
* Data are invented from seeded random numbers (counts against a size, a flow and a load); they only prove
  properties with a known truth: counts with zeros need a start before a log, a shifted x has negatives.
* The line fitted with pinned powers and starts is checked against statsmodels OLS (an outside reference
  library) on the textbook ladder re-expression (``conftest.ref``; common practice, Tukey 1977), and the
  intervals at ``--level 90`` against statsmodels' ``get_prediction`` taken back through the inverse.
* Output safety runs real processes: two `unbend report` processes writing the same ``--out`` at once.
  Which run a file came from is read from the run id unbend writes into the workbook's custom
  properties (docProps/custom.xml, ECMA-376 Part 1, 22.3) and into each PNG's text chunk (PNG
  specification, tEXt chunk, from memory).
"""
from __future__ import annotations

import contextlib
import io
import os
import re
import shutil
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest
import statsmodels.api as sm

from unbend.udfs import cli

PLOTS = ["before_after.png", "residuals.png", "scan.png"]
OPTION = re.compile(r"(?<![\w-])--[a-z][a-z-]*")


def run_main(argv):
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def one_line(code, out, err, exit_code=2):
    assert code == exit_code, (code, err)
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("unbend:"), err
    assert "Traceback" not in out + err
    return lines[0]


def console_script() -> str:
    exe = shutil.which("unbend", path=str(Path(sys.executable).parent))
    assert exe, "the unbend console script is not installed"
    return exe


def write_csv(path, cols: dict):
    names = list(cols)
    with open(path, "w") as fh:
        fh.write(",".join(names) + "\n")
        for row in zip(*cols.values()):
            fh.write(",".join(repr(float(v)) for v in row) + "\n")
    return path


def counts(n=60, seed=7):
    """Invented: defect counts against batch size; count ~ Poisson(0.03 * size), so some counts are 0."""
    rng = np.random.default_rng(seed)
    size = np.round(rng.uniform(5, 400, n), 1)
    count = rng.poisson(0.03 * size).astype(float)
    assert (count == 0).sum() >= 2  # the known truth the tests rely on
    return {"size": size, "count": count}


def shifted(n=60, seed=8):
    """Invented: load = 2 * exp(0.02 * (temp + 5)) * lognormal; temp runs from -5 to 60, so x has negatives."""
    rng = np.random.default_rng(seed)
    temp = np.round(rng.uniform(-5, 60, n), 2)
    temp[:2] = [-5.0, 0.0]
    load = np.round(2 * np.exp(0.02 * (temp + 5)) * rng.lognormal(0, 0.05, n), 4)
    return {"temp": temp, "load": load}


def table(ws, first_cell, col=1):
    """Rows of the table whose header row has ``first_cell`` in column ``col``, as dicts."""
    rows = list(ws.iter_rows(values_only=True))
    for i, r in enumerate(rows):
        if r and len(r) >= col and r[col - 1] == first_cell:
            head = [h for h in r]
            out = []
            for rr in rows[i + 1:]:
                if rr[col - 1] is None:
                    break
                out.append(dict(zip(head, rr)))
            return out
    raise AssertionError(f"no table headed {first_cell!r}")


def fit_items(ws):
    return {r["item"]: r["value"] for r in table(ws, "item")}


def all_options():
    p = cli.build_parser()
    opts = set()
    stack = [p]
    while stack:
        q = stack.pop()
        for a in q._actions:
            opts.update(a.option_strings)
            if getattr(a, "choices", None) and isinstance(a.choices, dict):
                stack.extend(a.choices.values())
    return opts


MESSAGES = []  # every line the command printed in these tests, for the option check at the end


def remember(*texts):
    MESSAGES.extend(texts)


# ----------------------------------------------------------------------------- zeros and negatives
@pytest.fixture(scope="module")
def zero_counts(tmp_path_factory):
    d = tmp_path_factory.mktemp("zeros")
    src = write_csv(d / "counts.csv", counts())
    code, out, err = run_main(["report", src, "--y", "count", "--x", "size", "--out", d / "r.xlsx", "--quiet"])
    remember(out, err)
    return dict(d=d, src=src, code=code, out=out, err=err, rep=d / "r.xlsx")


def test_zeros_in_y_do_not_stop_the_report(zero_counts):
    r = zero_counts
    assert r["code"] == 0, r["err"]
    wb = openpyxl.load_workbook(r["rep"])
    scan = table(wb["Scan"], "rank")
    # y has zeros: only the rungs defined at 0 are ranked (square, raw, square root), for every x rung
    assert {row["y rung"] for row in scan} == {"square", "raw", "square root"}
    assert len(scan) == 3 * 6
    text = " ".join(r["out"].split())
    zeros = int((counts()["count"] == 0).sum())  # the numbers in the sentence, from the data
    assert f"count has {zeros} zeros (smallest 0), so the scan leaves out log (0), reciprocal root (-0.5) and " \
           "reciprocal (-1), which need every count above 0" in text
    m = re.search(r"add a start: --y-start ([0-9.]+)", text)
    assert m and float(m.group(1)) == 0.5  # half the gap between counts 0 and 1 (common practice: 0.5)
    assert "Power for count: not estimated" in text
    assert "Power for size alone, with count at" in text  # x is positive: its power is still estimated


def test_the_proposed_start_brings_every_rung_back(zero_counts):
    d = zero_counts["d"]
    code, out, err = run_main(["report", zero_counts["src"], "--y", "count", "--x", "size", "--y-start", "0.5",
                               "--out", d / "r2.xlsx", "--quiet"])
    remember(out, err)
    assert code == 0, err
    wb = openpyxl.load_workbook(d / "r2.xlsx")
    assert len(table(wb["Scan"], "rank")) == 36
    items = fit_items(wb["Fit"])
    assert float(items["y start"]) == 0.5
    assert re.search(r"Power for count alone, with size at .+?: estimate", " ".join(out.split())) and "leaves out" not in out


@pytest.fixture(scope="module")
def negative_x(tmp_path_factory):
    d = tmp_path_factory.mktemp("neg")
    src = write_csv(d / "temps.csv", shifted())
    code, out, err = run_main(["report", src, "--y", "load", "--x", "temp", "--out", d / "r.xlsx", "--quiet"])
    remember(out, err)
    return dict(d=d, src=src, code=code, out=out, err=err, rep=d / "r.xlsx")


def test_negatives_in_x_rank_only_the_rungs_x_allows(negative_x):
    r = negative_x
    assert r["code"] == 0, r["err"]
    scan = table(openpyxl.load_workbook(r["rep"])["Scan"], "rank")
    assert {row["x rung"] for row in scan} == {"raw"}  # below 0: only odd whole powers, and 1 is the one here
    text = " ".join(r["out"].split())
    temp = shifted()["temp"]
    neg, zero = int((temp < 0).sum()), int((temp == 0).sum())
    assert f"temp has {neg} value{'s' if neg != 1 else ''} below 0 and {zero} zero (smallest -5)" in text
    m = re.search(r"add a start: --x-start ([0-9.]+)", text)
    assert m
    start = float(m.group(1))
    # unbend.propose_start lifts the smallest value to half the smallest gap between distinct values above 0;
    # the sentence gives the shortest decimal that still lifts every value above 0
    gap = float(np.min(np.diff(np.unique(temp))))
    proposal = 5 + gap / 2
    shortest = next(float(f"{proposal:.{d}g}") for d in range(1, 18) if np.all(temp + float(f"{proposal:.{d}g}") > 0))
    assert start == shortest and abs(start - proposal) < gap / 2
    code, out, err = run_main(["report", r["src"], "--y", "load", "--x", "temp", "--x-start", m.group(1),
                               "--out", r["d"] / "r2.xlsx", "--quiet"])
    remember(out, err)
    assert code == 0, err
    scan2 = table(openpyxl.load_workbook(r["d"] / "r2.xlsx")["Scan"], "rank")
    assert len(scan2) == 36
    assert re.search(r"Power for temp alone, with .+? at .+?: estimate", " ".join(out.split()))


def test_a_pinned_power_the_data_do_not_allow_is_refused_in_words(negative_x):
    code, out, err = run_main(["report", negative_x["src"], "--y", "load", "--x", "temp", "--x-power", "0",
                               "--out", negative_x["d"] / "r3.xlsx", "--quiet"])
    remember(out, err)
    line = one_line(code, out, err)
    assert "--x-power 0 (log) cannot be used" in line and "--x-start" in line and "--x-power 1" in line
    assert not (negative_x["d"] / "r3.xlsx").exists()


# ----------------------------------------------------------------------------- every model option
@pytest.fixture(scope="module")
def pinned(tmp_path_factory, ):
    d = tmp_path_factory.mktemp("pinned")
    rng = np.random.default_rng(11)  # invented: flow and load, load = (0.4 + 0.3 log(flow + 2))^2 with noise
    flow = np.round(rng.uniform(0.5, 80, 70), 3)
    load = np.round((0.4 + 0.3 * np.log(flow + 2) + rng.normal(0, 0.02, 70)) ** 2 - 1, 5)
    src = write_csv(d / "flows.csv", {"flow": flow, "load": load})
    argv = ["report", src, "--y", "load", "--x", "flow", "--y-power", "0.5", "--x-power", "0", "--y-start", "1",
            "--x-start", "2", "--level", "90", "--out", d / "r.xlsx", "--quiet"]
    code, out, err = run_main(argv)
    remember(out, err)
    return dict(d=d, src=src, code=code, out=out, err=err, rep=d / "r.xlsx", flow=flow, load=load)


def test_powers_starts_and_level_are_used(pinned, ref):
    r = pinned
    assert r["code"] == 0, r["err"]
    wb = openpyxl.load_workbook(r["rep"])
    items = fit_items(wb["Fit"])
    assert (float(items["y power"]), float(items["x power"])) == (0.5, 0.0)
    assert (float(items["y start"]), float(items["x start"])) == (1.0, 2.0)
    # the line against statsmodels OLS on the textbook ladder (conftest.ref; common practice)
    yt, xt = ref.ladder(r["load"] + 1.0, 0.5), ref.ladder(r["flow"] + 2.0, 0.0)
    ols = sm.OLS(yt, sm.add_constant(xt)).fit()  # source: statsmodels
    assert float(items["intercept"]) == pytest.approx(ols.params[0], rel=1e-9)
    assert float(items["slope flow"]) == pytest.approx(ols.params[1], rel=1e-9)
    # --level 90 means 90% intervals: the Summary's prediction table against statsmodels get_prediction
    preds = table(wb["Summary"], "flow")
    assert "low: one new y, 90%" in preds[0]
    for row in preds:
        x = row["flow"]
        pr = ols.get_prediction(np.array([[1.0, ref.ladder(np.array([x + 2.0]), 0.0)[0]]])).summary_frame(alpha=0.1)
        lo, hi = float(pr["obs_ci_lower"].iloc[0]), float(pr["obs_ci_upper"].iloc[0])
        assert row["low: one new y, 90%"] == pytest.approx(ref.ladder_inv(np.array([lo]), 0.5)[0] - 1.0, rel=1e-7)
        assert row["high: one new y, 90%"] == pytest.approx(ref.ladder_inv(np.array([hi]), 0.5)[0] - 1.0, rel=1e-7)
    # the model sheet starts from the same settings
    ws = wb["Model in formulas"]
    assert [ws[c].value for c in ("B8", "B9", "B10", "B11", "B12")] == [0.5, 1, 0, 2, 0.9]


def test_one_pinned_power_leaves_the_other_to_the_scan(pinned):
    d = pinned["d"]
    code, out, err = run_main(["report", pinned["src"], "--y", "load", "--x", "flow", "--x-power", "0.25",
                               "--y-start", "1", "--out", d / "r4.xlsx", "--quiet"])
    remember(out, err)
    assert code == 0, err
    items = fit_items(openpyxl.load_workbook(d / "r4.xlsx")["Fit"])
    assert float(items["x power"]) == 0.25  # off the ladder, but pinned: used as given
    assert float(items["level"] if "level" in items else 0.95) == 0.95


@pytest.mark.parametrize("args, opt", [(["--level", "100"], "--level"), (["--level", "0"], "--level"), (["--level", "-5"], "--level"),
                                       (["--y-power", "nan"], "--y-power"), (["--x-power", "500"], "--x-power"),
                                       (["--y-start", "inf"], "--y-start")])
def test_bad_model_options_are_refused_naming_the_option(pinned, tmp_path, args, opt):
    code, out, err = run_main(["report", pinned["src"], "--y", "load", "--x", "flow", "--out", tmp_path / "r.xlsx",
                               "--quiet"] + args)
    remember(out, err)
    line = one_line(code, out, err)
    assert opt in line
    assert list(tmp_path.iterdir()) == []


# ----------------------------------------------------------------------------- output safety
@pytest.fixture(scope="module")
def small(tmp_path_factory):
    d = tmp_path_factory.mktemp("small")
    return write_csv(d / "flows.csv", shifted(40, seed=3) | {"temp": np.linspace(1, 40, 40)})


def test_existing_report_is_kept_without_overwrite(small, tmp_path):
    out = tmp_path / "r.xlsx"
    out.write_bytes(b"an earlier report")
    code, o, e = run_main(["report", small, "--y", "load", "--x", "temp", "--out", out, "--quiet"])
    remember(o, e)
    line = one_line(code, o, e)
    assert "already exists" in line and "--overwrite" in line and str(out) in line
    assert out.read_bytes() == b"an earlier report"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.xlsx"]  # no plots, no staging folder


def test_existing_plots_folder_is_kept_without_overwrite(small, tmp_path):
    (tmp_path / "r_plots").mkdir()
    (tmp_path / "r_plots" / "mine.txt").write_text("a note of mine")
    code, o, e = run_main(["report", small, "--y", "load", "--x", "temp", "--out", tmp_path / "r.xlsx", "--quiet"])
    remember(o, e)
    line = one_line(code, o, e)
    assert "r_plots already exists" in line
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r_plots"]


def test_overwrite_replaces_workbook_and_plots(small, tmp_path):
    out = tmp_path / "r.xlsx"
    out.write_bytes(b"an earlier report")
    (tmp_path / "r_plots").mkdir()
    (tmp_path / "r_plots" / "scan.png").write_bytes(b"old")
    (tmp_path / "r_plots" / "mine.txt").write_text("a note of mine")
    code, o, e = run_main(["report", small, "--y", "load", "--x", "temp", "--out", out, "--overwrite", "--quiet"])
    assert code == 0, e
    assert zipfile.is_zipfile(out)
    assert (tmp_path / "r_plots" / "scan.png").read_bytes()[:4] == b"\x89PNG"
    assert (tmp_path / "r_plots" / "mine.txt").read_text() == "a note of mine"  # not ours: left alone
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no staging folder or lock file left


def test_a_failed_move_puts_the_earlier_files_back(small, tmp_path, monkeypatch):
    """The last move (the workbook) fails as a file held open would: the plots already moved go back."""
    from unbend.udfs import outputs

    out = tmp_path / "r.xlsx"
    out.write_bytes(b"an earlier report")
    (tmp_path / "r_plots").mkdir()
    for p in PLOTS:
        (tmp_path / "r_plots" / p).write_bytes(b"earlier " + p.encode())

    def refuse(src, dst):
        raise PermissionError(13, "Permission denied", dst)

    monkeypatch.setattr(outputs, "_move_no_replace", refuse)
    code, o, e = run_main(["report", small, "--y", "load", "--x", "temp", "--out", out, "--overwrite", "--quiet"])
    remember(o, e)
    line = one_line(code, o, e)
    assert "nothing was changed" in line
    assert out.read_bytes() == b"an earlier report"
    assert [(tmp_path / "r_plots" / p).read_bytes() for p in PLOTS] == [b"earlier " + p.encode() for p in PLOTS]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.xlsx", "r_plots"]


def test_read_only_report_is_never_replaced(small, tmp_path):
    out = tmp_path / "r.xlsx"
    out.write_bytes(b"a read-only report")
    out.chmod(0o444)
    try:
        code, o, e = run_main(["report", small, "--y", "load", "--x", "temp", "--out", out, "--overwrite",
                               "--quiet"])
        remember(o, e)
        line = one_line(code, o, e)
        assert "read-only" in line and str(out) in line
        assert out.read_bytes() == b"a read-only report"
    finally:
        out.chmod(0o644)


@contextlib.contextmanager
def unwritable(folder: Path):
    """Make a folder that this process cannot write in: chmod for a user; the immutable flag for root."""
    if os.geteuid() != 0:
        folder.chmod(0o555)
        try:
            yield
        finally:
            folder.chmod(0o755)
        return
    if shutil.which("chattr") is None or subprocess.run(["chattr", "+i", str(folder)]).returncode != 0:
        pytest.skip("as root a folder is unwritable only with the immutable flag, and chattr +i is not available")
    try:
        yield
    finally:
        subprocess.run(["chattr", "-i", str(folder)], check=True)


def test_a_folder_that_cannot_be_written_is_named(small, tmp_path):
    folder = tmp_path / "locked"
    folder.mkdir()
    with unwritable(folder):
        code, o, e = run_main(["report", small, "--y", "load", "--x", "temp", "--out", folder / "r.xlsx", "--quiet"])
    remember(o, e)
    line = one_line(code, o, e)
    assert f"cannot write in the folder {folder}" in line and "--out" in line
    assert list(folder.iterdir()) == []


# ----------------------------------------------------------------------------- concurrent runs
def _run_id_of_workbook(path) -> str:
    with zipfile.ZipFile(path) as z:
        xml = z.read("docProps/custom.xml").decode()
    m = re.search(r'name="unbend run"[^>]*>\s*<vt:lpwstr>([0-9a-f]{32})</vt:lpwstr>', xml)
    assert m, xml
    return m.group(1)


def _run_id_of_png(path) -> str:
    data = Path(path).read_bytes()
    m = re.search(rb"tEXtunbend run\x00([0-9a-f]{32})", data)  # a uuid4 in hex; the chunk CRC follows
    assert m, path
    return m.group(1).decode()


def _start(src, out, y, *extra):
    return subprocess.Popen([console_script(), "report", str(src), "--y", y, "--x", "temp", "--out", str(out),
                             "--quiet", *extra], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.fixture(scope="module")
def two_sources(tmp_path_factory):
    d = tmp_path_factory.mktemp("two")
    rng = np.random.default_rng(5)  # invented: two loads against the same temperatures
    temp = np.round(rng.uniform(1, 60, 50), 2)
    a = np.round(2 * temp ** 0.5 * rng.lognormal(0, 0.05, 50), 4)
    b = np.round(0.1 * temp ** 1.5 * rng.lognormal(0, 0.05, 50), 4)
    return write_csv(d / "a.csv", {"temp": temp, "load_a": a}), write_csv(d / "b.csv", {"temp": temp, "load_b": b})


def test_two_runs_at_once_never_mix_their_files(two_sources, tmp_path):
    src_a, src_b = two_sources
    out = tmp_path / "same.xlsx"
    procs = [_start(src_a, out, "load_a", "--overwrite"), _start(src_b, out, "load_b", "--overwrite")]
    results = [p.communicate(timeout=300) + (p.returncode,) for p in procs]
    for o, e, code in results:
        assert code == 0, e
    run = _run_id_of_workbook(out)
    assert [_run_id_of_png(tmp_path / "same_plots" / p) for p in PLOTS] == [run] * 3
    y = openpyxl.load_workbook(out)["Fit"]["A1"].value
    assert ("load_a" in y) != ("load_b" in y)
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_two_runs_at_once_without_overwrite_one_refuses(two_sources, tmp_path):
    src_a, src_b = two_sources
    out = tmp_path / "same.xlsx"
    procs = [_start(src_a, out, "load_a"), _start(src_b, out, "load_b")]
    results = [p.communicate(timeout=300) + (p.returncode,) for p in procs]
    codes = sorted(r[2] for r in results)
    assert codes == [0, 2], results
    loser = next(r for r in results if r[2] == 2)
    remember(loser[0], loser[1])
    assert "already exists" in loser[1] or "appeared while this report was being written" in loser[1]
    run = _run_id_of_workbook(out)
    assert [_run_id_of_png(tmp_path / "same_plots" / p) for p in PLOTS] == [run] * 3
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_a_run_waits_for_the_lock_before_putting_files_in_place(two_sources, tmp_path):
    from unbend.udfs.outputs import target_lock

    out = tmp_path / "r.xlsx"
    with target_lock(out):
        p = _start(two_sources[0], out, "load_a")
        deadline = time.monotonic() + 240
        staged = []
        while time.monotonic() < deadline and p.poll() is None:  # wait until everything is written, staged
            staged = [s for s in tmp_path.glob(".unbend-*") if (s / "report.xlsx").exists()
                      and sorted(q.name for q in (s / "plots").iterdir()) == PLOTS]
            if staged:
                break
            time.sleep(0.1)
        assert staged, "the run did not stage its files"
        time.sleep(0.5)
        assert p.poll() is None and not out.exists() and not (tmp_path / "r_plots").exists()
    o, e = p.communicate(timeout=120)
    assert p.returncode == 0, e
    assert _run_id_of_workbook(out) == _run_id_of_png(tmp_path / "r_plots" / "scan.png")


# ----------------------------------------------------------------------------- python -m unbend
def test_python_m_unbend_is_the_command(small, tmp_path):
    """`python -m unbend` (a real process) against the `unbend` command's own entry point, cli.main."""
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    pb = subprocess.Popen([sys.executable, "-m", "unbend", "report", str(small), "--y", "load", "--x", "temp",
                           "--out", str(b / "r.xlsx"), "--quiet"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                          text=True)
    code, oa, ea = run_main(["report", small, "--y", "load", "--x", "temp", "--out", a / "r.xlsx", "--quiet"])
    ob, eb = pb.communicate(timeout=300)
    assert code == pb.returncode == 0, (ea, eb)
    assert oa.replace(str(a), "<out>") == ob.replace(str(b), "<out>")
    assert ea == eb == ""
    fa, fb = fit_items(openpyxl.load_workbook(a / "r.xlsx")["Fit"]), fit_items(openpyxl.load_workbook(b / "r.xlsx")["Fit"])
    assert fa == fb
    # a refusal is the same line and the same exit status
    bad = ["report", str(tmp_path / "missing.csv"), "--y", "y", "--x", "x", "--quiet"]
    code, o, e = run_main(bad)
    r = subprocess.run([sys.executable, "-m", "unbend", *bad], capture_output=True, text=True)
    assert (r.returncode, r.stderr, r.stdout) == (code, e, o) and code == 2


BLOCK_UDFS = """
import sys, importlib.abc
class Block(importlib.abc.MetaPathFinder):
    def find_spec(self, name, path, target=None):
        if name == "unbend.udfs" or name.startswith("unbend.udfs."):
            raise ModuleNotFoundError(f"No module named {name!r}", name=name)
sys.meta_path.insert(0, Block())
import runpy
sys.argv = ["unbend", "--help"]
runpy.run_module("unbend", run_name="__main__")
"""


def test_python_m_unbend_without_the_spreadsheet_side_says_so():
    r = subprocess.run([sys.executable, "-c", BLOCK_UDFS], capture_output=True, text=True)
    assert r.returncode == 2, r
    assert "spreadsheet side" in r.stderr and "unbend.udfs" in r.stderr and "Traceback" not in r.stderr


# ----------------------------------------------------------------------------- start-up
def test_help_imports_nothing_heavy_and_answers_quickly():
    probe = ("import sys, time; t = time.perf_counter(); from unbend.udfs import cli; cli.build_parser(); "
             "heavy = [m for m in ('numpy', 'pandas', 'scipy', 'openpyxl', 'matplotlib', 'xlwings', 'xlsxwriter') "
             "if m in sys.modules]; print(heavy)")
    r = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "[]"
    t0 = time.perf_counter()
    r = subprocess.run([console_script(), "--help"], capture_output=True, text=True)
    wall = time.perf_counter() - t0
    assert r.returncode == 0 and "report" in r.stdout
    assert wall < 2.5, f"unbend --help took {wall:.2f} s"  # generous on a shared machine; the benchmark has the figure


# ----------------------------------------------------------------------------- every option a message names exists
def test_every_option_named_in_a_message_exists(zero_counts, negative_x, pinned, tmp_path):
    """Every --option a message or note names is an option of the command (the notes and refusals above,
    and the ones made here, so the test stands on its own)."""
    texts = [zero_counts["out"], negative_x["out"], pinned["out"]] + MESSAGES
    src = negative_x["src"]
    existing = tmp_path / "old.xlsx"
    existing.write_bytes(b"old")
    for extra in (["--x-power", "0"], ["--y-power", "-0.5", "--x-start", "6"], ["--level", "0"],
                  ["--out", existing], ["--out", tmp_path / "r.csv"]):
        argv = ["report", src, "--y", "load", "--x", "temp", "--quiet"] + extra
        if "--out" not in extra:
            argv += ["--out", tmp_path / "r.xlsx"]
        code, out, err = run_main(argv)
        texts += [out, err]
    opts = all_options()
    named = set()
    for m in texts:
        named.update(OPTION.findall(m))
    assert {"--y-start", "--x-start", "--x-power", "--overwrite", "--out", "--level"} <= named
    assert named <= opts, named - opts


def test_a_reader_that_stops_reading_gets_one_line_not_a_file_error(tmp_path):
    """`unbend report ... | head`: stdout's reader is gone before the summary is printed (its end of the pipe is
    closed at once). The files are in place, stderr says what happened in one line, the exit status is 1."""
    rng = np.random.default_rng(11)  # invented
    x = rng.uniform(1.0, 50.0, 40)
    data = tmp_path / "d.csv"
    y = 3.0 * x ** 0.5 * rng.lognormal(0.0, 0.1, 40)
    data.write_text("y,x\n" + "".join(f"{a!r},{b!r}\n" for a, b in zip(y.tolist(), x.tolist())))

    r, w = os.pipe()
    os.close(r)
    try:
        p = subprocess.run([sys.executable, "-m", "unbend", "report", str(data), "--y", "y", "--x", "x", "--quiet",
                            "--out", str(tmp_path / "r.xlsx")], stdout=w, stderr=subprocess.PIPE, text=True,
                           timeout=300)
    finally:
        os.close(w)
    lines = [ln for ln in p.stderr.splitlines() if ln.strip()]
    assert p.returncode == 1 and len(lines) == 1, p.stderr
    assert lines[0].startswith("unbend: the printed summary was cut short") and "Traceback" not in p.stderr
    assert (tmp_path / "r.xlsx").is_file() and sorted(os.listdir(tmp_path / "r_plots")) == PLOTS
