"""``lakebalance report``: the annual report of one site or many."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from ._common import add_seed

HELP = "write the annual report (HTML, PDF, CSV/XLSX, JSON) of one or many sites"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "sites",
        nargs="+",
        type=Path,
        metavar="SITE.toml",
        help="site files, or a register (.csv or .gpkg with a 'site_file' column)",
    )
    parser.add_argument(
        "--year",
        type=int,
        default=None,
        metavar="WY",
        help="water year to report, named by the calendar year it ends in "
        "(default: the last complete one)",
    )
    parser.add_argument(
        "--out",
        type=Path,
        default=Path("lakebalance_report"),
        metavar="DIR",
        help="output folder (default: ./lakebalance_report)",
    )
    parser.add_argument(
        "--workers",
        type=int,
        default=None,
        metavar="N",
        help="parallel worker processes for several sites (default: cores)",
    )
    parser.add_argument(
        "--scheduler",
        default=None,
        metavar="ADDRESS",
        help="run the batch on a Dask cluster at ADDRESS (tcp://host:8786)",
    )
    parser.add_argument(
        "--draws",
        type=int,
        default=None,
        metavar="N",
        help="Monte Carlo draws of the balance (default: site file)",
    )
    parser.add_argument(
        "--members",
        type=int,
        default=None,
        metavar="M",
        help="ensemble members of the drawdown fan chart (default: site file)",
    )
    parser.add_argument(
        "--site-timeout",
        type=float,
        default=None,
        metavar="SECONDS",
        help="time one site of a batch may take before its worker is stopped (default: 3600)",
    )
    parser.add_argument(
        "--site-memory",
        type=float,
        default=None,
        metavar="GIB",
        help="memory limit of one site's worker in GiB (default: the available memory shared "
        "by the workers)",
    )
    add_paper(parser)
    add_seed(parser)


def add_paper(parser: argparse.ArgumentParser) -> None:
    """``--no-pdf`` and ``--file-to DIR``, shared with ``lakebalance demo``."""
    parser.add_argument(
        "--no-pdf",
        dest="pdf",
        action="store_false",
        help="write no report.pdf (by default it is made from the HTML when the 'pdf' extra, "
        "WeasyPrint, is installed)",
    )
    parser.add_argument(
        "--file-to",
        type=Path,
        default=None,
        metavar="DIR",
        help="file the results into the archive DIR (an SQLite file archive.sqlite there) and "
        "list what changed in earlier years since the last filing (default: [report] archive)",
    )


def _expand(paths: list[Path]) -> tuple[list[Path], dict[str, tuple]]:
    from ..batch import read_register

    sites: list[Path] = []
    coords: dict[str, tuple] = {}
    for p in paths:
        if p.suffix.lower() in (".csv", ".gpkg", ".geojson", ".shp"):
            for site, lat, lon in read_register(p):
                sites.append(site)
                coords[str(site)] = (lat, lon)
        else:
            sites.append(p)
    return sites, coords


def _limits(args: argparse.Namespace):
    from ..batch import BatchOptions

    given = {"site_timeout": args.site_timeout, "site_memory": args.site_memory}
    return BatchOptions(**{k: v for k, v in given.items() if v is not None})


def run(args: argparse.Namespace) -> int:
    from ..batch import run_batch

    sites, coords = _expand(list(args.sites))
    registers = [p for p in args.sites if p.suffix.lower() in (".csv", ".gpkg", ".geojson", ".shp")]
    limits = _limits(args)
    options = {k: v for k, v in (("draws", args.draws), ("members", args.members)) if v}
    options["pdf"] = args.pdf
    if args.file_to is not None:
        options["file_to"] = args.file_to
    progress = sys.stderr.isatty()
    if len(sites) == 1 and args.scheduler is None:
        from ..report.build import make_report

        result = make_report(
            sites[0],
            args.out,
            year=args.year,
            seed=args.seed,
            progress=progress,
            **options,
        )
        print(f"report: {result.html}")
        if result.pdf is not None:
            print(f"paper:  {result.pdf}")
        for line in result.messages:
            print(f"  {line}")
        return 0
    batch = run_batch(
        sites,
        args.out,
        year=args.year,
        seed=args.seed,
        workers=args.workers or os.cpu_count(),
        scheduler=args.scheduler,
        progress=progress,
        options=options,
        coordinates=coords,
        limits=limits,
        inputs=registers,
    )
    for o in batch.outcomes:
        status = f"ok   {o.report}" if o.ok else f"FAIL {o.error}"
        print(f"{o.name:<30} {status}")
        if o.note:
            print(f"{'':<30} note: {o.note}")
    print(f"index: {batch.index}")
    return 0 if not batch.failed else 2
