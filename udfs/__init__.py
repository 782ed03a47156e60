"""Spreadsheet-facing side of unbend: the xlwings cell functions over the engine.

Name this module, ``unbend.udfs``, as the UDF module in the xlwings add-in
settings and import the functions; they appear in the function wizard in the
category "unbend".
"""
from .functions import (CATEGORY, FUNCTIONS, UNBEND_APPLY, UNBEND_EXPLAIN, UNBEND_FIT, UNBEND_FORMULA,
                        UNBEND_POWER, UNBEND_PREDICT, UNBEND_RESIDUALS, UNBEND_SCAN, UNBEND_SPREAD,
                        UNBEND_SUGGEST, UNBEND_SYMMETRY, UNBEND_UNDO)
from .functions import UNBEND_GROUP_PREDICT, UNBEND_GROUPS

__all__ = ["CATEGORY", "FUNCTIONS", "UNBEND_APPLY", "UNBEND_EXPLAIN", "UNBEND_FIT", "UNBEND_FORMULA",
           "UNBEND_POWER", "UNBEND_PREDICT", "UNBEND_RESIDUALS", "UNBEND_SCAN", "UNBEND_SPREAD",
           "UNBEND_SUGGEST", "UNBEND_SYMMETRY", "UNBEND_UNDO", "UNBEND_GROUPS", "UNBEND_GROUP_PREDICT"]
