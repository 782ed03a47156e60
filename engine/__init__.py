"""unbend: choose a re-expression that straightens data, fit the line, predict in original units.

The engine needs only numpy, scipy and pandas.

Examples
--------
>>> import numpy as np, unbend
>>> x = np.linspace(1, 10, 50)
>>> y = np.exp(1 + 0.2 * x) * np.random.default_rng(0).lognormal(0, 0.05, 50)
>>> s = unbend.suggest_power(y, x)
>>> f = unbend.fit(y, x, y_power=s.rung)
>>> p = f.predict([2.0, 12.0])
"""
from ._validation import DomainError, UnbendError
from .express import EXTRA_RUNGS, LADDER, Reexpression, express, propose_start, rung_label, unexpress
from .power import (PowerSuggestion, choose_rung, spread_power, suggest_power, suggest_x_power,
                    symmetry_power)
from .fitting import CAUTION, LineFit, fit
from .diagnostics import Check
from .scan import best_pair, scan
from .groups import CommonPower, GroupFit, fit_groups

__version__ = "0.1.0"

__all__ = [
    "UnbendError", "DomainError", "LADDER", "EXTRA_RUNGS", "Reexpression", "express", "unexpress",
    "propose_start", "rung_label", "PowerSuggestion", "choose_rung", "suggest_power", "suggest_x_power",
    "spread_power", "symmetry_power", "LineFit", "fit", "Check", "scan", "best_pair", "CAUTION",
    "CommonPower", "GroupFit", "fit_groups",
]
