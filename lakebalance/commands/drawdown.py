"""``lakebalance drawdown``: drought drawdown forecast as odds of reaching the named levels."""

from __future__ import annotations

import argparse

from ._common import (
    LakebalanceWarnings,
    add_json,
    add_out,
    add_progress,
    add_seed,
    add_site,
    open_lake,
    output_folder,
)

HELP = "forecast the drawdown of the lake: odds and dates of reaching each named level"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    parser.add_argument(
        "--start",
        default=None,
        metavar="DATE",
        help="start day, ISO date (default: [drawdown] start, else the last recorded stage)",
    )
    parser.add_argument(
        "--start-stage",
        type=float,
        default=None,
        metavar="M",
        help="stage at the start, m on the gauge datum (default: the record that day)",
    )
    parser.add_argument(
        "--days", type=int, default=None, metavar="N", help="horizon in days (default: site file)"
    )
    parser.add_argument(
        "--scenario",
        choices=("replay", "esp", "percentile", "stochastic", "constant"),
        default=None,
        help="how future inflows are made (default: [drawdown] scenario)",
    )
    parser.add_argument(
        "--members", type=int, default=None, metavar="M", help="ensemble members (default: site)"
    )
    parser.add_argument(
        "--no-compare",
        action="store_true",
        help="run the chosen scenario only, not every method side by side (faster)",
    )
    add_progress(parser)
    add_seed(parser)
    add_json(parser)
    add_out(parser)


def run(args: argparse.Namespace) -> int:

    from .._json import dumps

    lake = open_lake(args)
    out = output_folder(args, lake)
    site, seed = lake.site, lake.seed
    with LakebalanceWarnings() as caught:
        forecast = lake.forecast(
            args.start,
            days=args.days,
            scenario=args.scenario,
            members=args.members,
            start_stage_m=args.start_stage,
            compare_methods=False if args.no_compare else None,
        )
    written = []
    if out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_drawdown import fan_chart

        written.append(
            write_csv(out / "drawdown_stage_percentiles.csv", forecast.stage_percentiles)
        )
        written.append(
            write_csv(out / "drawdown_probability_below.csv", forecast.probability_below)
        )
        written.append(
            write_csv(out / "drawdown_volume_above_dead.csv", forecast.volume_percentiles)
        )
        if forecast.unrestricted is not None:
            written.append(
                write_csv(out / "drawdown_restriction_effect.csv", forecast.restriction_effect())
            )
        written.append(write_text(out / "drawdown.txt", forecast.summary() + "\n"))
        written.append(write_text(out / "drawdown.json", dumps(forecast.to_dict()) + "\n"))
        written.append(save_figure(out / "drawdown_fan.png", fan_chart(forecast)))
    if args.json:
        doc = forecast.to_dict()
        doc["site"] = site.site.name
        doc["warnings"] = caught
        doc["written"] = [str(p) for p in written]
        print(dumps(doc))
    else:
        print(f"{site.site.name} (seed {seed})")
        print(forecast.summary())
        for msg in caught:
            print(f"warning: {msg}")
        for p in written:
            print(f"wrote {p}")
    return 0
