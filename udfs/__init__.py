"""Spreadsheet-facing side of unbend: the xlwings cell functions over the engine.

Name this module, ``unbend.udfs``, as the UDF module in the xlwings add-in
settings and import the functions; they appear in the function wizard in the
category "unbend".

The functions are loaded the first time one is looked up (PEP 562; xlwings
looks them up by ``dir`` and ``getattr``), so the ``unbend`` command, which
lives in this package, starts without importing xlwings or the engine.
"""
from importlib import import_module as _import_module

__all__ = ["CATEGORY", "FUNCTIONS", "UNBEND_APPLY", "UNBEND_EXPLAIN", "UNBEND_FIT", "UNBEND_FORMULA",
           "UNBEND_GROUPS", "UNBEND_GROUP_PREDICT", "UNBEND_INVERSE", "UNBEND_LIMITS", "UNBEND_POWER",
           "UNBEND_PREDICT", "UNBEND_RESIDUALS", "UNBEND_SCAN", "UNBEND_SPREAD", "UNBEND_SUGGEST",
           "UNBEND_SYMMETRY", "UNBEND_UNDO"]


def __getattr__(name):
    if name in __all__:
        functions = _import_module(".functions", __name__)
        for n in __all__:
            globals()[n] = getattr(functions, n)
        return globals()[name]
    try:  # a submodule not imported yet, e.g. ``unbend.udfs.cells``
        return _import_module("." + name, __name__)
    except ModuleNotFoundError as e:
        if e.name != f"{__name__}.{name}":
            raise
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
