"""`python -m unbend`: run the engine on built-in invented demo data and print a summary."""
from __future__ import annotations

import sys

import numpy as np
import pandas as pd

from . import CAUTION, fit, scan, suggest_power, suggest_x_power
from .demo_data import INVENTED, river_sediment
from .wording import fitted_rung_words


def main(argv=None) -> int:
    d = river_sediment()
    y, x = d["sediment_t_per_day"], d["discharge_m3s"]
    print("unbend demo: suspended sediment (t/day) against river discharge (m3/s)")
    print(INVENTED)
    print()
    t = scan(y, x)
    best = t.iloc[0]
    f = fit(y, x, y_power=best.y_power, x_power=best.x_power, x_names=["discharge"])
    sy = suggest_power(y, x, x_power=f.x_power)
    sx = suggest_x_power(y, x, y_power=f.y_power)
    for s, fitted, other in ((sy, f.y_power, f.x_power), (sx, f.x_power, f.y_power)):
        print(f"Power for {s.what} alone ({s.method}): estimate {s.estimate:.3f}, 95% interval {s.low:.3f} to "
              f"{s.high:.3f} -> use {s.label} ({s.rung:g}). {s.note} {fitted_rung_words(s, fitted, other, t)}")
    print("\nScan of every pair of rungs, best first (top 5):")
    with pd.option_context("display.width", 160, "display.max_colwidth", 50):
        print(t.head(5)[["rank", "y_rung", "x_rung", "loglik", "curvature_p", "spread_p", "r2", "verdict"]]
              .to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    print(f"\nFit of {f.y_expr.label} y on {f.x_expr.label} x: {f.verdict}")
    print(f.slope_reading())
    new = np.array([5.0, 50.0, 300.0, 800.0])
    p = f.predict(new)
    print("\nPredicted sediment (t/day), back in original units:")
    print(p[["discharge", "median", "mean", "low", "high", "outside_range"]]
          .to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    print("\n" + CAUTION)
    return 0


if __name__ == "__main__":
    sys.exit(main())
