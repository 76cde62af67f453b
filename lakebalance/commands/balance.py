"""``lakebalance balance``: the daily water balance with monthly and water-year tables and bands."""

from __future__ import annotations

import argparse

from ._common import (
    LakebalanceWarnings,
    add_json,
    add_out,
    add_seed,
    add_site,
    formatter,
    open_lake,
    output_folder,
    wrap,
)

HELP = (
    "close the daily water balance: monthly and water-year tables with 5-95 percent residual bands"
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    add_json(parser)
    add_out(parser)
    add_seed(parser)
    parser.add_argument(
        "--draws",
        type=int,
        default=None,
        metavar="N",
        help="Monte Carlo draws (default: [uncertainty] draws of the site file; 0 = no bands)",
    )


_ANNUAL = [
    "complete_days",
    "storage_start_m3",
    "storage_end_m3",
    "storage_change_m3",
    "inflow_m3",
    "rain_m3",
    "evaporation_m3",
    "outflow_m3",
    "withdrawal_m3",
    "release_m3",
    "residual_m3",
    "residual_mm",
    "closure_error_pct",
]
_BANDS = ["residual_p05_m3", "residual_p95_m3", "p_gain", "p_nonzero"]


def run(args: argparse.Namespace) -> int:
    import sys

    import pandas as pd

    from .._json import dumps
    from ..balance import CAUTION
    from ..errors import LakebalanceError

    if args.draws is not None and args.draws < 0:
        raise LakebalanceError("--draws must be 0 or more")
    lake = open_lake(args, draws=args.draws)
    out = output_folder(args, lake)
    site, seed = lake.site, lake.seed
    with LakebalanceWarnings() as messages:
        balance = lake.balance
    annual = balance.water_years()
    monthly = balance.monthly()
    files = _write_outputs(out, balance, annual, monthly, seed) if out else []

    if args.json:
        doc = {
            "site": site.site.name,
            **balance.to_dict(),
            "seed": seed if balance.draws else None,
            "warnings": messages,
            "files": [str(f) for f in files],
        }
        print(dumps(doc))
        return 0

    first, last = balance.period
    print(f"{site.site.name}: water balance {first.date()} to {last.date()}")
    print(
        f"{len(balance.daily)} days, {balance.missing_days} with a missing term; "
        f"absent terms: {', '.join(balance.absent_terms) or 'none'}; "
        + (f"{balance.draws} Monte Carlo draws, seed {seed}" if balance.draws else "no bands")
    )
    from ..display import text_table

    display = formatter(lake)
    shown = annual.copy()
    if "p_nonzero" in shown:
        shown["nonzero_confidence_pct"] = 100.0 * shown["p_nonzero"]
    if "p_gain" in shown:
        shown["gain_chance_pct"] = 100.0 * shown["p_gain"]
    cols = [c for c in _ANNUAL if c in shown]
    cols += [
        c for c in ("residual_p05_m3", "residual_p95_m3", "nonzero_confidence_pct") if c in shown
    ]
    print()
    print("water years (residual also as a depth over the mean lake area):")
    print(text_table(shown[cols], display))
    print()
    print("months:")
    mcols = ["complete_days", "storage_change_m3", "inflow_m3", "outflow_m3", "residual_m3"]
    mcols += [c for c in ("residual_p05_m3", "residual_p95_m3") if c in monthly]
    view = monthly[mcols].copy()
    view.index = pd.Index(view.index.strftime("%Y-%m"), name="month")
    print(text_table(view, display))
    print()
    for note in balance.notes:
        print(wrap(f"note: {note}"))
    for m in messages:
        print(f"warning: {m}", file=sys.stderr)
    if files:
        print(f"wrote {len(files)} files to {args.out}")
    print(wrap(f"caution: {CAUTION}"))
    return 0


def _write_outputs(out, balance, annual, monthly, seed) -> list:
    from ..io.output import write_csv, write_parquet, write_text

    daily = balance.daily.copy()
    files = [
        write_csv(out / "balance_daily.csv", daily),
        write_parquet(out / "balance_daily.parquet", daily),
        write_csv(out / "balance_monthly.csv", monthly),
        write_csv(out / "balance_water_years.csv", annual),
    ]
    if balance.grades is not None:  # each day's grade of each term; totals measured and infilled
        files += [
            write_csv(out / "balance_daily_grades.csv", balance.grades),
            write_csv(out / "balance_monthly_graded.csv", balance.graded_monthly()),
            write_csv(out / "balance_water_years_graded.csv", balance.graded_water_years()),
        ]
    from ..balance import CAUTION

    about = [
        f"seed: {seed if balance.draws else 'none (no Monte Carlo)'}",
        f"draws: {balance.draws}",
        *balance.notes,
        "",
        CAUTION,
        "",
    ]
    files.append(write_text(out / "balance_notes.txt", "\n".join(about)))
    return files
