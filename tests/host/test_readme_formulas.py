"""Every formula example in the README, typed into a fake workbook and run through xlwings' own code.

The README's examples assume a table named ``Data`` (columns ``flow``, ``load``, ``count``,
``size``), a table named ``Assay`` (``result``, ``batch``), a table named ``Std`` (``conc``,
``signal``), a table named ``Net`` (``station``, ``flow``, ``load``), new x values in ``F2:F6``,
re-expressed values in ``G2:G40``, a station name in ``H1`` and measured readings in ``H2:J40``. Here those are filled with unbend's own invented demo data
(``unbend.demo_data``: seeded random numbers in scenarios of our own, not measurements). Each
formula's arguments are resolved the way the program resolves them (a table column or a range is a
Range, text in quotes is text, a number is a number, an empty argument is VBA's missing marker); the
result must suit COM, carry no ``unbend:`` message, have the kind the README promises, and equal the
direct Python call with the same cells.
"""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

import unbend.udfs as U
from unbend import demo_data

from . import excel
from .harness import Host
from .checks import as_com, check_com

README = Path(__file__).resolve().parents[2] / "README.md"
_ROW = re.compile(r"^\|\s*`(=UNBEND_[A-Z_]+\(.*\))`\s*\|\s*(.*?)\s*\|\s*$")


def readme_examples():
    out = []
    for line in README.read_text(encoding="utf-8").splitlines():
        m = _ROW.match(line)
        if m:
            out.append((m.group(1), m.group(2)))
    return out


EXAMPLES = readme_examples()


def split_args(text: str) -> list:
    """Top-level arguments of a formula call: commas inside quotes do not split."""
    args, cur, quoted = [], "", False
    for ch in text:
        if ch == '"':
            quoted = not quoted
        if ch == "," and not quoted:
            args.append(cur.strip())
            cur = ""
        else:
            cur += ch
    args.append(cur.strip())
    return args


class Workbook:
    """The README's workbook: tables Data, Assay, Std and Net, F2:F6, G2:G40, H1 and H2:J40 on one sheet."""

    def __init__(self):
        self.host = Host()
        s = self.sheet = self.host.sheet
        river = demo_data.river_sediment()
        counts = demo_data.batch_defects(n=len(river))
        cols = {"flow": river["discharge_m3s"], "load": river["sediment_t_per_day"],
                "count": counts["defects"], "size": counts["batch_size"]}
        self.tables = {}
        for j, (name, values) in enumerate(cols.items(), start=1):  # table Data in A1:D61
            letter = excel.col_letters(j)
            s.put_column(f"{letter}1", [name] + [float(v) for v in values])
            self.tables[("Data", name)] = f"{letter}2:{letter}{len(values) + 1}"
        assay = demo_data.assay_batches()  # table Assay in J1:K97
        s.put_column("J1", ["result"] + [float(v) for v in assay["result_mg_per_l"]])
        s.put_column("K1", ["batch"] + list(assay["batch"]))
        self.tables[("Assay", "result")] = f"J2:J{len(assay) + 1}"
        self.tables[("Assay", "batch")] = f"K2:K{len(assay) + 1}"
        std = demo_data.detector_calibration()  # table Std in M1:N25
        s.put_column("M1", ["conc"] + [float(v) for v in std["conc_ug_per_l"]])
        s.put_column("N1", ["signal"] + [float(v) for v in std["signal_counts"]])
        self.tables[("Std", "conc")] = f"M2:M{len(std) + 1}"
        self.tables[("Std", "signal")] = f"N2:N{len(std) + 1}"
        samples = demo_data.detector_samples(n=39)  # readings in H2:J40, three per sample
        for j, letter in enumerate("HIJ", start=1):
            s.put_column(f"{letter}2", [float(v) for v in samples[f"reading_{j}"]])
        net = demo_data.gauging_network()  # table Net in P1:R1201, a station name in H1
        for letter, name, col in (("P", "station", "station"), ("Q", "flow", "discharge_m3s"),
                                  ("R", "load", "sediment_t_per_day")):
            vals = list(net[col]) if name == "station" else [float(v) for v in net[col]]
            s.put_column(f"{letter}1", [name] + vals)
            self.tables[("Net", name)] = f"{letter}2:{letter}{len(net) + 1}"
        s.put_column("H1", ["G07"])
        s.put_column("F2", [5.0, 20.0, 50.0, 200.0, 600.0])  # new x values
        s.put_column("G2", [float(v) ** 0.5 for v in river["sediment_t_per_day"][:39]])  # re-expressed values

    def resolve(self, arg: str, by_reference: bool = False):
        """(what the program passes, what a Python user passes) for one argument text.

        For an argument that takes a reference as a reference, a Python user passes the address.
        """
        if arg == "":
            return excel.MISSING, None
        if arg.startswith('"'):
            return arg.strip('"'), arg.strip('"')
        m = re.fullmatch(r"(\w+)\[(\w+)\]", arg)
        if m and (m.group(1), m.group(2)) not in self.tables:
            raise AssertionError(f"the README uses the table column {arg}; add it to this test's Workbook")
        ref = self.tables[(m.group(1), m.group(2))] if m else arg
        if re.fullmatch(r"[A-Z]+\d+(:[A-Z]+\d+)?", ref):
            rng = self.sheet.ref(ref)
            if by_reference:
                return rng, ref
            value = rng.Value
            if isinstance(value, tuple):
                if len(value[0]) > 1 and len(value) > 1:  # a block: rows of cells, as a Python user passes it
                    return rng, [list(row) for row in value]
                flat = [c for row in value for c in row]
                return rng, flat
            return rng, value
        return float(arg), float(arg)


@pytest.fixture(scope="module")
def workbook():
    return Workbook()


def test_the_readme_has_an_example_of_every_function():
    assert {re.match(r"=(UNBEND_[A-Z_]+)", f).group(1) for f, _ in EXAMPLES} == set(U.FUNCTIONS)


@pytest.mark.parametrize("formula, promise", EXAMPLES, ids=[f for f, _ in EXAMPLES])
def test_readme_formula_through_xlwings(workbook, formula, promise):
    name, inner = re.fullmatch(r"=(UNBEND_[A-Z_]+)\((.*)\)", formula).groups()
    HostReference = workbook.host.ns.module.host.HostReference
    specs = getattr(workbook.host.ns.module, name).__xlfunc__["args"]
    pairs = [workbook.resolve(a, specs[i]["options"].get("convert") is HostReference)
             for i, a in enumerate(split_args(inner))]
    got = check_com(workbook.host.call(name, *[p[0] for p in pairs]))
    want = as_com(getattr(U, name)(*[p[1] for p in pairs]))
    assert got == want
    assert not (isinstance(got, str) and got.startswith("unbend:")), got
    if promise.startswith("table") or name in ("UNBEND_FIT", "UNBEND_SYMMETRY", "UNBEND_RESIDUALS") \
            or promise.startswith("header"):
        assert isinstance(got, list) and isinstance(got[0], list) and len(got) >= 2, promise
        if "36 pairs" in promise:
            assert len(got) == 1 + 36
    elif name == "UNBEND_POWER" or promise.startswith("one number") or promise.startswith("upper end"):
        assert type(got) is float, (promise, got)
    elif promise.startswith("text") or promise.startswith("a few plain sentences"):
        assert isinstance(got, str) and got, promise
        if name == "UNBEND_FORMULA":
            assert got.startswith("=")
    elif "column" in promise or "values" in promise:
        assert isinstance(got, list) and all(isinstance(r, list) and len(r) == 1 for r in got), promise
    if name == "UNBEND_UNDO":  # G holds square roots of load: undoing the 0.5 power gives load back
        assert np.allclose([r[0] for r in got], [v[0] ** 2 for v in workbook.sheet.ref("G2:G40").Value], rtol=1e-12)
