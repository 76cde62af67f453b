"""Benchmark of the rating fit (prints figures; not part of the test run).

Targets (issue 4): 500 gaugings, power law with e free, with confidence intervals: <= 0.1 s;
1,000 bootstrap refits: <= 3 s. ``--nist`` also prints the agreement (log relative error, digits)
with every NIST StRD nonlinear problem from both starting points.

Run: ``python benchmarks/bench_rating.py [--nist]``
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np

from lakebalance.outlet import FitOptions, fit_rating_curve, power_law


def _time(fn, repeat: int) -> float:
    fn()  # warm-up: first-call imports
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def main() -> None:
    rng = np.random.default_rng(42)  # invented gaugings
    law = power_law()
    h = rng.uniform(0.3, 3.0, 500)
    q = law.discharge([4.0, 0.1, 1.6], h) * np.exp(rng.normal(0, 0.05, h.size))
    grid = np.linspace(0.2, 3.5, 200)

    def fit_with_cis():
        fit = fit_rating_curve(law, h, q)
        fit.conf_int()
        fit.predict(grid, "confidence")
        fit.predict(grid, "prediction")

    t_fit = _time(fit_with_cis, 20)
    print(f"fit, 500 gaugings, power law e free, CIs + bands: {t_fit:.4f} s (target <= 0.1 s)")

    h60, q60 = h[:60], q[:60]

    def boot():
        fit_rating_curve(law, h60, q60, options=FitOptions(bootstrap=1000), rng=rng)

    t_boot = _time(boot, 5)
    print(f"fit + 1000 bootstrap refits, 60 gaugings:        {t_boot:.4f} s (target <= 3 s)")

    def boot500():
        fit_rating_curve(law, h, q, options=FitOptions(bootstrap=1000), rng=rng)

    t_boot500 = _time(boot500, 3)
    print(f"fit + 1000 bootstrap refits, 500 gaugings:       {t_boot500:.4f} s (target <= 3 s)")

    if "--nist" in sys.argv:
        sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "reference"))
        from test_nist_strd import MODELS, lre, read_problem, solve

        print("\nNIST StRD, minimum LRE (digits) over parameters / standard deviations:")
        for name in MODELS:
            p = read_problem(name)
            row = []
            for start in (1, 2):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    f = solve(p, start)
                row.append(
                    f"start {start}: {lre(f.params, p.certified).min():5.1f} / "
                    f"{lre(f.stderr, p.certified_sd).min():5.1f}"
                )
            print(f"  {name:<10s} " + "   ".join(row))


if __name__ == "__main__":
    main()
