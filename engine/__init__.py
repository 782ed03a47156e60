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

Notes
-----
``import unbend`` is cheap: each public name is imported from its module the
first time it is used (PEP 562), so the ``unbend`` command starts without
loading numpy, scipy or pandas until a command needs them.
"""
import sys as _sys
import types as _types
from importlib import import_module as _import_module

__version__ = "0.1.0"

#: public name -> the module that defines it
_WHERE = {
    "UnbendError": "._validation", "DomainError": "._validation",
    "LADDER": ".express", "EXTRA_RUNGS": ".express", "Reexpression": ".express", "express": ".express",
    "unexpress": ".express", "propose_start": ".express", "rung_label": ".express",
    "PowerSuggestion": ".power", "choose_rung": ".power", "suggest_power": ".power", "suggest_x_power": ".power",
    "spread_power": ".power", "symmetry_power": ".power",
    "CAUTION": ".fitting", "LineFit": ".fitting", "fit": ".fitting",
    "Check": ".diagnostics",
    "scan": ".scan", "best_pair": ".scan",
    "CensoredFit": ".censored", "CensoredMean": ".censored", "censored_mean": ".censored", "half_limit": ".censored",
    "fieller": ".calibration", "calibration_limits": ".calibration", "CalibrationLimits": ".calibration",
    "CommonPower": ".groups", "GroupFit": ".groups", "fit_groups": ".groups",
}

__all__ = [
    "UnbendError", "DomainError", "LADDER", "EXTRA_RUNGS", "Reexpression", "express", "unexpress",
    "propose_start", "rung_label", "PowerSuggestion", "choose_rung", "suggest_power", "suggest_x_power",
    "spread_power", "symmetry_power", "LineFit", "fit", "Check", "scan", "best_pair", "CAUTION",
    "CensoredFit", "CensoredMean", "censored_mean", "half_limit",
    "fieller", "calibration_limits", "CalibrationLimits",
    "CommonPower", "GroupFit", "fit_groups",
]


def __getattr__(name):
    where = _WHERE.get(name)
    if where is not None:
        value = getattr(_import_module(where, __name__), name)
        globals()[name] = value
        return value
    try:  # a submodule not imported yet, e.g. ``unbend.predicting``
        return _import_module("." + name, __name__)
    except ModuleNotFoundError as e:
        if e.name != f"{__name__}.{name}":
            raise
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))


class _Package(_types.ModuleType):
    """Keeps ``unbend.express`` and ``unbend.scan`` the functions when their modules are imported later.

    Importing a submodule binds it as an attribute of its package; two public
    functions share their module's name, and the function must win (as it did
    when everything was imported up front).
    """

    def __setattr__(self, name, value):
        if name in _WHERE and isinstance(value, _types.ModuleType):
            return
        super().__setattr__(name, value)


_sys.modules[__name__].__class__ = _Package
