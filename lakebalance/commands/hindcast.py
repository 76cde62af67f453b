"""``lakebalance hindcast``: the drawdown outlook started at past dates (each start's own
future left out) and scored against the record: Brier skill per level, reliability, CRPS."""

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

HELP = "score the drawdown outlook started at past dates against what the record did"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    parser.add_argument(
        "--days", type=int, default=None, metavar="N", help="horizon in days (default: site file)"
    )
    parser.add_argument(
        "--every", type=int, default=60, metavar="N", help="days between start dates (default 60)"
    )
    parser.add_argument(
        "--scenario",
        choices=("replay", "stochastic", "percentile"),
        default="replay",
        help="scenario of the outlook scored (default replay)",
    )
    parser.add_argument(
        "--members",
        type=int,
        default=100,
        metavar="M",
        help="members per start of the stochastic scenario (default 100)",
    )
    parser.add_argument("--first", default=None, metavar="DATE", help="first start, ISO date")
    parser.add_argument("--last", default=None, metavar="DATE", help="last start, ISO date")
    parser.add_argument(
        "--anniversary",
        default=None,
        metavar="DATE",
        help="start on this date's day of the year in every year (the outlook's season)",
    )
    add_progress(parser)
    add_seed(parser)
    add_json(parser)
    add_out(parser)


def run(args: argparse.Namespace) -> int:

    from .._json import dumps

    lake = open_lake(args)
    out = output_folder(args, lake)
    with LakebalanceWarnings() as caught:
        hc = lake.hindcast(
            days=args.days,
            every=args.every,
            scenario=args.scenario,
            members=args.members,
            first=args.first,
            last=args.last,
            anniversary=args.anniversary,
        )
    written = []
    if out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_yield import reliability_diagram

        written.append(write_csv(out / "hindcast_skill.csv", hc.skill, index=False))
        written.append(write_csv(out / "hindcast_reliability.csv", hc.reliability, index=False))
        written.append(write_csv(out / "hindcast_events.csv", hc.events, index=False))
        written.append(write_csv(out / "hindcast_stage.csv", hc.stage))
        written.append(write_text(out / "hindcast.txt", hc.summary() + "\n"))
        written.append(write_text(out / "hindcast.json", dumps(hc.to_dict()) + "\n"))
        written.append(save_figure(out / "hindcast_reliability.png", reliability_diagram(hc)))
    if args.json:
        doc = hc.to_dict()
        doc["site"] = lake.site.site.name
        doc["warnings"] = caught
        doc["written"] = [str(p) for p in written]
        print(dumps(doc))
    else:
        print(f"{lake.site.site.name} (seed {lake.forecast_seed})")
        print(hc.summary())
        for msg in caught:
            print(f"warning: {msg}")
        for p in written:
            print(f"wrote {p}")
    return 0
