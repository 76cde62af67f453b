"""Calibration figures for records that change over time, at more replicates than the tests.

Prints, on invented simulated records (analytic truth, fixed seeds):

* field checks: the largest error of the corrected stage between checks, for a planted step and
  a planted linear drift corrected from quarterly checks read within ±3 mm (uniform); the
  tolerance is the checks' own error, since the correction between two checks is a weighted mean
  of their errors;
* dated ratings: the coverage of each period's 95 % intervals over seeded replicates of
  gaugings from two known power laws (it should be 90–97 %);
* repeat surveys: the interpolated mid-date capacity of a cone silting at a constant rate, against
  the exact frustum volume.

    python benchmarks/calibrate_records_over_time.py [--replicates 200]

Not part of the test run (the tests hold smaller versions of each check).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))


def field_checks(reps: int) -> None:
    from test_fieldchecks import NOISE_M, _record

    from lakebalance.fieldchecks import (
        FieldCheckOptions,
        apply_corrections,
        compare_checks,
        size_corrections,
    )

    worst, located = [], 0
    for seed in range(reps):
        index, truth, logger, checks, check_days, step_day = _record(seed)
        comp = compare_checks(checks, logger)
        props = size_corrections(comp, logger, FieldCheckOptions(reading_error=NOISE_M))
        located += any(p.step_day == index[step_day].date().isoformat() for p in props)
        corrected = apply_corrections(logger, [c for p in props for c in p.corrections])
        span = slice(int(check_days[0]), int(check_days[-1]) + 1)
        worst.append(float(np.max(np.abs((corrected - truth).to_numpy()[span]))))
    w = np.array(worst) * 1000
    print(
        f"field checks ({reps} records, step 25 mm + drift 0.2 mm/d, checks ±{NOISE_M * 1000:g} mm):"
        f" step located in {located}/{reps}; largest error between checks median {np.median(w):.2f}"
        f" mm, max {w.max():.2f} mm (tolerance {NOISE_M * 1000:g} mm)"
    )


def dated_ratings(reps: int) -> None:
    from test_rating_periods import AFTER, BEFORE, WORKS, _gaugings

    from lakebalance.outlet.laws import power_law
    from lakebalance.outlet.periods import RatingPeriod, fit_rating_periods

    hits = {(k, n): 0 for k in (0, 1) for n in ("C", "e", "b")}
    for seed in range(reps):
        h, q, d = _gaugings(np.random.default_rng(seed))
        dated = fit_rating_periods(power_law(), h, q, d, [RatingPeriod(WORKS)])
        for k, truth in enumerate((BEFORE, AFTER)):
            ci = dated.fits[k].conf_int()
            for n in ("C", "e", "b"):
                hits[(k, n)] += ci[n][0] <= truth[n] <= ci[n][1]
    text = ", ".join(f"period {k + 1} {n} {100 * v / reps:.1f} %" for (k, n), v in hits.items())
    print(f"dated ratings ({reps} replicates, 20 gaugings a period, 5 % error): coverage {text}")


def surveys() -> None:
    from test_surveys import TOP, exact_volume, survey

    from lakebalance.surveys import DatedStorage

    dated = DatedStorage(("2010-01-01", "2020-01-01"), (survey(0.0), survey(0.8)))
    for frac, day in ((0.25, "2012-07-02"), (0.5, "2015-01-01"), (0.75, "2017-07-02")):
        w = (pd.Timestamp(day) - pd.Timestamp("2010-01-01")).days / 3652
        exact = exact_volume(0.8 * w, TOP)
        got = dated.capacity(TOP, day)
        print(
            f"repeat surveys: capacity at {frac:.0%} of the way, {got:,.0f} m³ against exact "
            f"{exact:,.0f} m³ ({100 * (got / exact - 1):+.3f} %)"
        )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=200)
    args = parser.parse_args(argv)
    field_checks(args.replicates)
    dated_ratings(args.replicates)
    surveys()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
