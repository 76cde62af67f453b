"""Calibration of the drought outlook's crossing probabilities on simulated lake families.

For each family of invented lakes in ``tests/lakefamilies.py`` one long record is simulated; the
outlook is then started at many past dates in its second half, each time from the recorded
stage and with only the record *before* the start (so no start sees its own future), and asked
the chance of falling below a low level within the horizon (the family's 25th percentile of
recorded stage). What the record did next is the outcome. Per family and scenario method the
script prints the Brier score (Brier, 1950), its skill against the climatological frequency of
the starts, and the reliability table: starts binned by stated probability, the mean stated
probability and the observed frequency in each bin (a reliable outlook has them equal; e.g.
Wilks, 2011, Statistical Methods in the Atmospheric Sciences, sec. 8.4.4).

The model uncertainty is left out here (it widens every method alike and slows the run); the
starts of one record overlap in weather, so the bins' frequencies carry more sampling error
than their counts suggest.

Run::

    python benchmarks/outlook_calibration.py [--families flow_through,gated] [--starts 24]
        [--members 200] [--days 90] [--years 16] [--level NAME]

``--families`` also takes site files (``data_demo/site.toml``) to hindcast a real record the
same way.
"""

from __future__ import annotations

import argparse
import dataclasses
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

METHODS = (("replay", "bootstrap"), ("esp", "bootstrap"), ("stochastic", "bootstrap"),
           ("stochastic", "monthly"))  # fmt: skip
BINS = np.array([0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0 + 1e-9])


def _name(scenario: str, method: str) -> str:
    return method if scenario == "stochastic" else scenario


def run_family(family: str, args: argparse.Namespace, root: Path) -> pd.DataFrame:
    """One row per (start, method): stated probability and outcome."""
    from lakefamilies import simulate

    import lakebalance as lb
    from lakebalance.drawdown import ForecastPlan, build_forcing, forecast_stage_max, run_forecast

    if family.endswith(".toml"):  # a site file of one's own (e.g. the demo)
        site_file = Path(family)
    else:
        site_file = simulate(family, seed=args.seed, root=root / family, years=args.years).site_file
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        lake = lb.open_site(site_file)
        history = lake.drawdown_history()
        laws, _ = lake.laws(seepage=True)
    stage = lake.records.daily["stage"].dropna()
    low = laws.levels[args.level] if args.level else float(stage.quantile(0.25))
    laws = dataclasses.replace(laws, levels={"low": low})
    years = (stage.index[-1] - stage.index[0]).days / 365.25
    first = stage.index[0] + pd.Timedelta(days=int(365.25 * years / 2))
    last = stage.index[-1] - pd.Timedelta(days=args.days)
    starts = pd.date_range(first, last, periods=args.starts).normalize()
    rows = []
    for k, start in enumerate(starts):
        if start not in stage.index:
            continue
        h0 = float(stage[start])
        if h0 <= low:
            continue  # already below: not a falling-crossing question
        future = stage.loc[start + pd.Timedelta(days=1) : start + pd.Timedelta(days=args.days)]
        outcome = float(future.min() < low)
        past = history.loc[:start]
        for scenario, method in METHODS:
            rng = np.random.default_rng([args.seed, k, len(rows)])
            try:
                forcing = build_forcing(
                    past, start, args.days, scenario, members=args.members, rng=rng,
                    method=method,
                )  # fmt: skip
            except lb.errors.LakebalanceError:
                continue
            plan = ForecastPlan(
                start=start, start_stage_m=h0, scenario=scenario,
                stage_max_m=forecast_stage_max(laws, h0),
            )  # fmt: skip
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                fc = run_forecast(laws, forcing, plan, rng=rng)
            rows.append(
                {
                    "family": family,
                    "start": start.date(),
                    "method": _name(scenario, method),
                    "p": fc.level("low").probability,
                    "outcome": outcome,
                    "years": forcing.independent_years,
                }
            )
    return pd.DataFrame(rows)


def report(frame: pd.DataFrame) -> str:
    lines = []
    for family, fam in frame.groupby("family", sort=False):
        n_starts = fam["start"].nunique()
        clim = fam.drop_duplicates("start")["outcome"].mean()
        lines.append(f"\n{family}: {n_starts} starts, observed crossing frequency {clim:.2f}")
        lines.append(
            f"  {'method':<10}{'Brier':>7}{'skill':>7}   reliability: bin [lo, hi) n, stated, seen"
        )
        for method, g in fam.groupby("method", sort=False):
            brier = float(np.mean((g["p"] - g["outcome"]) ** 2))
            ref = float(np.mean((clim - g["outcome"]) ** 2))
            skill = 1.0 - brier / ref if ref > 0 else float("nan")
            cells = []
            b = np.digitize(g["p"], BINS) - 1
            for i in range(len(BINS) - 1):
                sel = b == i
                if sel.any():
                    cells.append(
                        f"[{BINS[i]:.1f},{min(BINS[i + 1], 1):.1f}) {int(sel.sum())}, "
                        f"{g['p'][sel].mean():.2f}, {g['outcome'][sel].mean():.2f}"
                    )
            lines.append(f"  {method:<10}{brier:>7.3f}{skill:>7.2f}   " + "; ".join(cells))
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--families",
        default="flow_through,seepage,gated,snowmelt_us",
        help="lake families of tests/lakefamilies.py, or site files (.toml), comma-separated",
    )
    parser.add_argument(
        "--level", default=None, help="a [levels] name (default: 25th percentile of stage)"
    )
    parser.add_argument("--starts", type=int, default=24)
    parser.add_argument("--members", type=int, default=200)
    parser.add_argument("--days", type=int, default=90)
    parser.add_argument("--years", type=int, default=16)
    parser.add_argument("--seed", type=int, default=14)
    args = parser.parse_args(argv)
    frames = []
    with tempfile.TemporaryDirectory() as tmp:
        for family in args.families.split(","):
            t0 = time.perf_counter()
            frames.append(run_family(family.strip(), args, Path(tmp)))
            print(f"{family}: {time.perf_counter() - t0:.0f} s", file=sys.stderr)
    frame = pd.concat(frames, ignore_index=True)
    print(
        f"Outlook calibration: {args.days}-day chance of falling below "
        + (f"the {args.level} level" if args.level else "the 25th percentile of recorded stage")
        + f"; {args.members} members; seed {args.seed}"
    )
    print(report(frame))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
