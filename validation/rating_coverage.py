"""Coverage of the rating's 95 % parameter intervals on simulated gaugings from known laws.

Each case draws gaugings from a known law with lognormal noise (seeded), fits it as a user would
(``fit_rating_curve``: Wald intervals with Student t, or profile-likelihood intervals where a
parameter rests on a bound or its control is weakly identified) and counts how often each 95 %
interval holds the true value. Target: 90-97 % for every parameter (DESIGN.md, "Judgments are
calibrated"); a binomial 95 % band around 95 % for R replicates is about ±1.96·sqrt(0.0475/R).

    python validation/rating_coverage.py [--replicates 400] [--seed 20261202]

It then prints the false-alarm and detection rates of the pooled rating-shift test.

Cases (invented, none is a real structure):

* ``power``      Q = C (h - e)^b, 25 gaugings over 0.5-2.5 m, 5 % noise;
* ``weir``       12 m broad-crested weir, crest 1.0 m, 20 gaugings, 4 % noise;
* ``compound``   a channel power law and a 12 m spillway at 2.0 m, 40 gaugings of which about a
                 third above the crest;
* ``sparse-spillway``  the same outlet with only 4 gaugings above the crest, the crest level fixed
                 from the drawings: the spillway coefficient is weakly constrained (profile
                 likelihood intervals);
* ``prior-spillway``  as ``sparse-spillway`` with a prior on the coefficient from the handbook,
                 N(1.7, 0.15²), drawn per replicate as the true value (so the prior is right on
                 average, as a calibrated prior must be).
"""

from __future__ import annotations

import argparse
import time
import warnings
from dataclasses import dataclass, field

import numpy as np

from lakebalance.errors import DataQualityWarning, FitError
from lakebalance.outlet import (
    FitOptions,
    compound_law,
    fit_rating_curve,
    power_law,
    weir_law,
)


@dataclass(frozen=True)
class Case:
    name: str
    law: object
    truth: dict[str, float]
    stages: object  # rng -> stages (m)
    sigma: float
    options: FitOptions = field(default_factory=FitOptions)
    prior_sd: dict[str, float] = field(default_factory=dict)  # truth drawn from the prior


def _uniform(lo, hi, n):
    return lambda rng: rng.uniform(lo, hi, n)


def _compound_stages(n_low, n_high):
    return lambda rng: np.concatenate(
        [rng.uniform(0.4, 1.95, n_low), rng.uniform(2.02, 2.6, n_high)]
    )


def _sparse_stages(rng):
    return np.concatenate([rng.uniform(0.4, 1.95, 16), rng.uniform(2.005, 2.1, 4)])


CASES = (
    Case("power", power_law(), {"C": 4.0, "e": 0.2, "b": 1.6}, _uniform(0.5, 2.5, 25), 0.05),
    Case("weir", weir_law(12.0), {"Cw": 1.7, "crest": 1.0}, _uniform(1.05, 2.0, 20), 0.04),
    Case(
        "compound",
        compound_law([("channel", power_law()), ("spillway", weir_law(12.0))]),
        {
            "channel.C": 3.0,
            "channel.e": 0.2,
            "channel.b": 1.6,
            "spillway.Cw": 1.7,
            "spillway.crest": 2.0,
        },
        _compound_stages(26, 14),
        0.05,
    ),  # fmt: skip
    Case(
        "sparse-spillway",
        compound_law([("channel", power_law()), ("spillway", weir_law(12.0))]),
        {
            "channel.C": 3.0,
            "channel.e": 0.2,
            "channel.b": 1.6,
            "spillway.Cw": 1.7,
            "spillway.crest": 2.0,
        },
        _sparse_stages,
        0.05,
        FitOptions(fixed={"spillway.crest": 2.0}),
    ),  # fmt: skip
    Case(
        "prior-spillway",
        compound_law([("channel", power_law()), ("spillway", weir_law(12.0))]),
        {
            "channel.C": 3.0,
            "channel.e": 0.2,
            "channel.b": 1.6,
            "spillway.Cw": 1.7,
            "spillway.crest": 2.0,
        },
        _sparse_stages,
        0.05,
        FitOptions(fixed={"spillway.crest": 2.0}, priors={"spillway.Cw": (1.7, 0.15)}),
        prior_sd={"spillway.Cw": 0.15},
    ),  # fmt: skip
)


def run_case(case: Case, replicates: int, rng: np.random.Generator) -> dict:
    """Coverage, mean interval width and share of profile intervals per free parameter."""
    names = [n for n in case.law.param_names if n not in case.options.fixed]
    hits = dict.fromkeys(names, 0)
    width = dict.fromkeys(names, 0.0)
    profiled = dict.fromkeys(names, 0)
    done = failed = 0
    for _ in range(replicates):
        truth = dict(case.truth)
        for n, sd in case.prior_sd.items():
            truth[n] = rng.normal(case.truth[n], sd)
        vec = [truth[n] for n in case.law.param_names]
        h = case.stages(rng)
        q = case.law.discharge(vec, h) * np.exp(rng.normal(0.0, case.sigma, h.size))
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", DataQualityWarning)
                fit = fit_rating_curve(case.law, h, q, options=case.options)
        except FitError:
            failed += 1
            continue
        done += 1
        ci = fit.conf_int()
        for n in names:
            lo, hi = ci[n]
            hits[n] += bool(lo <= truth[n] <= hi)
            width[n] += (hi - lo) if np.isfinite(hi - lo) else np.nan
            profiled[n] += n in fit.profile
    return {
        "done": done,
        "failed": failed,
        "rows": [
            (n, hits[n] / max(done, 1), width[n] / max(done, 1), profiled[n] / max(done, 1))
            for n in names
        ],
    }


def coverage_table(replicates: int, seed: int, cases=CASES) -> list[tuple]:
    """``(case, parameter, replicates, coverage, mean width, share profiled)`` rows."""
    rng = np.random.default_rng(seed)
    out = []
    for case in cases:
        res = run_case(case, replicates, rng)
        for n, cov, w, prof in res["rows"]:
            out.append((case.name, n, res["done"], cov, w, prof))
    return out


def shift_rates(replicates: int, seed: int) -> list[tuple[str, float]]:
    """False-alarm and detection rates of the pooled rating-shift test (change-point search and
    Holm correction): 48 gaugings every 45 days, 4 % noise, stable or with a planted 15 % or 25 %
    step in 2014; a detection is a change point within 90 days of the step."""
    import pandas as pd

    from lakebalance.outlet import shift_test

    rng = np.random.default_rng(seed)
    law = power_law()
    dates = pd.date_range("2010-01-01", periods=48, freq="45D")
    step = pd.Timestamp("2014-01-01")
    out = []
    for size in (0.0, 0.15, 0.25):
        hits = 0
        for _ in range(replicates):
            h = rng.uniform(0.5, 2.5, dates.size)
            q = law.discharge([4.0, 0.1, 1.6], h) * np.exp(rng.normal(0, 0.04, h.size))
            q[dates >= step] *= 1 + size
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", DataQualityWarning)
                fit = fit_rating_curve(law, h, q, dates=dates)
            test = shift_test(fit)
            if size == 0.0:
                hits += bool(test.change_points) or bool(test.periods["shifted"].any())
            else:
                hits += any(abs((pd.Timestamp(c) - step).days) <= 90 for c in test.change_points)
        what = "false alarms, stable" if size == 0.0 else f"detected, {100 * size:.0f} % step"
        out.append((what, hits / replicates))
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=400)
    parser.add_argument("--seed", type=int, default=20261202)
    args = parser.parse_args(argv)
    t0 = time.perf_counter()
    rows = coverage_table(args.replicates, args.seed)
    band = 1.96 * np.sqrt(0.95 * 0.05 / args.replicates)
    print(f"rating parameter coverage, seed {args.seed}, {args.replicates} replicates per case")
    print(f"(target 90-97 %; binomial 95 % band around 95 %: ±{100 * band:.1f} points)")
    print(f"{'case':<17}{'parameter':<16}{'fits':>6}{'coverage':>10}{'mean width':>12}"
          f"{'profiled':>10}  verdict")  # fmt: skip
    for case, n, done, cov, w, prof in rows:
        verdict = "ok" if 0.90 <= cov <= 0.97 else "OUT OF TARGET"
        print(
            f"{case:<17}{n:<16}{done:>6}{100 * cov:>9.1f}%{w:>12.4g}{100 * prof:>9.0f}%  {verdict}"
        )
    print()
    print(f"rating-shift test (change-point search, Holm), {args.replicates // 4} replicates each")
    for what, rate in shift_rates(max(args.replicates // 4, 10), args.seed + 1):
        print(f"  {what:<28}{100 * rate:6.1f} %")
    print(f"({time.perf_counter() - t0:.0f} s)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
