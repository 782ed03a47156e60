"""The Examples in the engine's docstrings run and print what they say (numpy-style, runnable)."""
import doctest
import importlib

import pytest

MODULES = ["unbend", "unbend.express", "unbend.power", "unbend.fitting", "unbend.predicting", "unbend.scan",
           "unbend.censored", "unbend.calibration", "unbend.groups"]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples_run(name):
    result = doctest.testmod(importlib.import_module(name), verbose=False)
    assert result.attempted > 0, f"{name} has no runnable examples"
    assert result.failed == 0
