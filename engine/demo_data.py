"""Invented demo data sets, made up here from seeded random numbers.

None of these numbers are measurements. Each scenario is ours and is built
so that a known re-expression straightens it; they exist to show the tool
working and to test properties with a known truth.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

__all__ = ["river_sediment", "tool_life", "fleet_fuel", "batch_defects", "assay_batches", "detector_calibration",
           "detector_samples", "gauging_network", "SCENARIOS", "GROUP_SCENARIOS"]

INVENTED = "All numbers in this data set are invented by unbend's demo script (seeded random numbers); they are not measurements."


def river_sediment(n: int = 60, seed: int = 11) -> pd.DataFrame:
    """Suspended sediment (tonnes/day) against river discharge (m³/s): a power law, log-log straightens it."""
    rng = np.random.default_rng(seed)
    q = np.round(np.exp(rng.uniform(np.log(2.0), np.log(400.0), n)), 1)
    load = 0.8 * q ** 1.6 * rng.lognormal(0.0, 0.35, n)
    return pd.DataFrame({"discharge_m3s": q, "sediment_t_per_day": np.round(load, 1)})


def tool_life(n: int = 40, seed: int = 12) -> pd.DataFrame:
    """Cutting-tool life (minutes) against cutting speed (m/min): life falls as a power of speed."""
    rng = np.random.default_rng(seed)
    v = np.round(rng.uniform(80.0, 320.0, n), 0)
    life = (400.0 / v) ** (1 / 0.25) * rng.lognormal(0.0, 0.15, n)
    return pd.DataFrame({"cutting_speed_m_min": v, "tool_life_min": np.round(life, 2)})


def fleet_fuel(n: int = 50, seed: int = 13) -> pd.DataFrame:
    """Fuel economy (km per litre) against payload (tonnes): litres per km rise in a straight line,
    so the reciprocal of km per litre straightens it."""
    rng = np.random.default_rng(seed)
    payload = np.round(rng.uniform(0.5, 12.0, n), 2)
    litres_per_km = 0.22 + 0.018 * payload + rng.normal(0.0, 0.012, n)
    return pd.DataFrame({"payload_t": payload, "km_per_litre": np.round(1.0 / litres_per_km, 3)})


def batch_defects(n: int = 45, seed: int = 14) -> pd.DataFrame:
    """Defect counts per production batch against batch size: Poisson counts, the square root steadies them."""
    rng = np.random.default_rng(seed)
    size = rng.integers(200, 5000, n)
    defects = rng.poisson(0.004 * size)
    return pd.DataFrame({"batch_size": size.astype(float), "defects": defects.astype(float)})


def assay_batches(groups: int = 8, per_group: int = 12, seed: int = 15) -> pd.DataFrame:
    """Lab assay results in batches at different concentration levels; spread grows with level."""
    rng = np.random.default_rng(seed)
    levels = np.exp(np.linspace(np.log(2.0), np.log(300.0), groups))
    rows = []
    for i, lv in enumerate(levels):
        vals = lv * rng.lognormal(0.0, 0.12, per_group)
        rows += [(f"batch {chr(65 + i)}", round(float(v), 3)) for v in vals]
    return pd.DataFrame(rows, columns=["batch", "result_mg_per_l"])


def detector_calibration(levels=(0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0), replicates: int = 3,
                         seed: int = 16) -> pd.DataFrame:
    """Detector signal (counts) against the known concentration of standards (ug/L), each standard read
    ``replicates`` times: the detector saturates gently (signal grows as concentration to the power 0.78),
    so log signal against log concentration is straight, with the scatter proportional to the signal."""
    rng = np.random.default_rng(seed)
    conc = np.repeat(np.asarray(levels, float), replicates)
    signal = 850.0 * conc ** 0.78 * rng.lognormal(0.0, 0.04, conc.size)
    return pd.DataFrame({"conc_ug_per_l": conc, "signal_counts": np.round(signal, 0)})


def detector_samples(n: int = 12, replicates: int = 3, seed: int = 17) -> pd.DataFrame:
    """Unknown samples for :func:`detector_calibration`: ``replicates`` readings of each, with the
    concentration each was made up at (to compare with the estimate read back; unknown in real use)."""
    rng = np.random.default_rng(seed)
    true = np.round(np.exp(rng.uniform(np.log(0.8), np.log(90.0), n)), 2)
    reads = 850.0 * true[:, None] ** 0.78 * rng.lognormal(0.0, 0.04, (n, replicates))
    out = pd.DataFrame({"sample": [f"S{i + 1:02d}" for i in range(n)], "made_up_at_ug_per_l": true})
    for j in range(replicates):
        out[f"reading_{j + 1}"] = np.round(reads[:, j], 0)
    return out


SCENARIOS = {
    "river_sediment": (river_sediment, "sediment_t_per_day", "discharge_m3s"),
    "tool_life": (tool_life, "tool_life_min", "cutting_speed_m_min"),
    "fleet_fuel": (fleet_fuel, "km_per_litre", "payload_t"),
    "batch_defects": (batch_defects, "defects", "batch_size"),
}


#: Station of :func:`gauging_network` whose rating bends differently (by construction).
ODD_STATION = "G17 below the weir"


def gauging_network(stations: int = 30, readings: int = 40, seed: int = 21) -> pd.DataFrame:
    """An invented network of river gauging stations: suspended sediment (t/day) against discharge (m³/s).

    At every station but one, log sediment is a straight line in log discharge, with the station's own
    intercept and slope (logs of both straighten it). At ``ODD_STATION`` a weir upstream traps coarse
    sediment, and it is the square root of the load that is straight in log discharge: that station wants
    another re-expression. Readings are uneven in number, and a few are missing (blank).
    """
    if not 2 <= stations <= 99:
        raise ValueError("stations must be between 2 and 99")
    rng = np.random.default_rng(seed)
    names = [f"G{i + 1:02d}" for i in range(stations)]
    names[min(16, stations - 1)] = ODD_STATION
    rows = []
    for name in names:
        n = int(rng.integers(max(8, readings // 2), readings + readings // 2 + 1))
        q = np.round(np.exp(rng.uniform(np.log(3.0), np.log(300.0), n)), 1)
        if name == ODD_STATION:
            load = (3.0 + 2.2 * np.log(q) + rng.normal(0.0, 0.25, n)) ** 2
        else:
            a, b = rng.normal(-0.5, 0.4), rng.normal(1.5, 0.12)
            load = np.exp(a + b * np.log(q) + rng.normal(0.0, 0.3, n))
        rows += [(name, float(v), round(float(w), 2)) for v, w in zip(q, load)]
    out = pd.DataFrame(rows, columns=["station", "discharge_m3s", "sediment_t_per_day"])
    gaps = rng.choice(len(out), size=max(1, len(out) // 150), replace=False)
    out.loc[gaps, "sediment_t_per_day"] = np.nan
    out.attrs["note"] = INVENTED
    return out


#: Scenarios with many series: name -> (builder, y column, x column, group column).
GROUP_SCENARIOS = {
    "gauging_network": (gauging_network, "sediment_t_per_day", "discharge_m3s", "station"),
}
