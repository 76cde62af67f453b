"""``lakebalance yield``: firm yield through the record, storage–yield curve, the demand's
reliability under its restriction rules, and days of supply from the last recorded stage."""

from __future__ import annotations

import argparse

from ._common import (
    LakebalanceWarnings,
    add_json,
    add_out,
    add_progress,
    add_site,
    open_lake,
    output_folder,
)

HELP = "firm yield through the record, storage-yield curve, reliability and days of supply"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    parser.add_argument(
        "--failure-level",
        default=None,
        metavar="NAME",
        help="[levels] name at which the intake fails (default: the dead level)",
    )
    parser.add_argument(
        "--start-level",
        default=None,
        metavar="NAME",
        help="[levels] name the record is started from (default: the first recorded stage)",
    )
    parser.add_argument(
        "--constant",
        action="store_true",
        help="firm yield as a constant demand (default: the demand's monthly pattern)",
    )
    parser.add_argument(
        "--dry-inflow",
        type=float,
        default=0.0,
        metavar="M3S",
        help="constant inflow of the dry scenario for the days of supply, m3/s (default 0)",
    )
    parser.add_argument(
        "--supply-days",
        type=int,
        default=3650,
        metavar="N",
        help="horizon of the days of supply, days (default 3650: ten years)",
    )
    parser.add_argument(
        "--tolerance",
        type=float,
        default=1e-3,
        metavar="R",
        help="relative width of the firm yield's final bracket (default 0.001)",
    )
    add_progress(parser)
    add_json(parser)
    add_out(parser)


def run(args: argparse.Namespace) -> int:

    from .._json import dumps

    lake = open_lake(args)
    out = output_folder(args, lake)
    with LakebalanceWarnings() as caught:
        study = lake.yield_(
            failure_level=args.failure_level,
            start_level=args.start_level,
            pattern="constant" if args.constant else "demand",
            dry_inflow_m3s=args.dry_inflow,
            supply_days=args.supply_days,
            rtol=args.tolerance,
        )
    written = []
    if out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_yield import firm_yield_figure, storage_yield_figure

        written.append(write_csv(out / "storage_yield.csv", study.curve.to_frame(), index=False))
        written.append(write_csv(out / "firm_yield_stage.csv", study.firm.to_frame()))
        written.append(write_text(out / "yield.txt", study.summary() + "\n"))
        written.append(write_text(out / "yield.json", dumps(study.to_dict()) + "\n"))
        written.append(save_figure(out / "firm_yield_stage.png", firm_yield_figure(study)))
        written.append(save_figure(out / "storage_yield.png", storage_yield_figure(study)))
    if args.json:
        doc = study.to_dict()
        doc["site"] = lake.site.site.name
        doc["warnings"] = caught
        doc["written"] = [str(p) for p in written]
        print(dumps(doc))
    else:
        print(lake.site.site.name)
        print(study.summary())
        for msg in caught:
            print(f"warning: {msg}")
        for p in written:
            print(f"wrote {p}")
    return 0
