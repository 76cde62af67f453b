"""Benchmark: 100 years of daily weather through every lake-evaporation method.

Target (issue 5): at most 1 s for 100 years (36 525 days) through every method, missing days
filled from the climatology. Prints the figures; never part of the pass/fail test run.

    python benchmarks/bench_evaporation.py
"""

from __future__ import annotations

import time
import warnings

import numpy as np
import pandas as pd

from lakebalance.evaporation import EvaporationOptions, estimate_lake_evaporation
from lakebalance.units import factor

TARGET_S = 1.0
YEARS = 100


def invented_weather(years: int = YEARS, seed: int = 1) -> pd.DataFrame:
    """Invented daily weather of a mid-latitude lake, with 2 % of days missing at random."""
    rng = np.random.default_rng(seed)
    index = pd.date_range("1921-01-01", periods=int(round(365.25 * years)), freq="D")
    n = len(index)
    season = np.sin(2 * np.pi * (index.dayofyear.to_numpy() - 110) / 365.0)
    tmean = 10 + 11 * season + rng.normal(0, 2.5, n)
    frame = pd.DataFrame(
        {
            "tmax": tmean + 5,
            "tmin": tmean - 5,
            "rh_max": np.clip(88 + rng.normal(0, 5, n), 50, 100),
            "rh_min": np.clip(50 - 10 * season + rng.normal(0, 8, n), 10, 90),
            "wind": rng.gamma(3.0, 1.1, n),
            "solar": np.clip(16 + 10 * season + rng.normal(0, 3, n), 1, None),
            "pan": np.clip(0.003 + 0.003 * season + rng.normal(0, 5e-4, n), 0, None),
        },
        index=index,
    )
    holes = rng.random(frame.shape) < 0.02
    return frame.mask(holes)


def main() -> None:
    w = invented_weather()
    factor("mm", "m")  # build the unit registry once, outside the timing (done once per process)
    runs = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _ in range(5):
            t0 = time.perf_counter()
            res = estimate_lake_evaporation(
                w,
                EvaporationOptions(
                    method="penman",
                    pan_coefficient=[
                        0.8,
                        0.78,
                        0.75,
                        0.72,
                        0.7,
                        0.68,
                        0.68,
                        0.7,
                        0.73,
                        0.76,
                        0.8,
                        0.82,
                    ],
                    wind_height=10.0,
                    heat_storage_lag=20.0,
                    mean_depth=8.0,  # m: the lake method (equilibrium_temperature) runs too
                    lake_area=3e6,  # m²
                    albedo_model="sun_angle",
                    open_water_class="by_depth",
                ),
                latitude_deg=46.4,
                elevation_m=412.0,
            )
            runs.append(time.perf_counter() - t0)
    best, median = min(runs), float(np.median(runs))
    print(f"days: {len(w)} ({YEARS} years), methods: {', '.join(res.available)}")
    print(f"filled days (penman): {int(res.filled.sum())}")
    print(f"time per run: best {best:.3f} s, median {median:.3f} s (5 runs)")
    print(f"target {TARGET_S:.1f} s; ratio target/median = {TARGET_S / median:.1f}x")
    print("PASS" if median <= TARGET_S else "FAIL")


if __name__ == "__main__":
    main()
