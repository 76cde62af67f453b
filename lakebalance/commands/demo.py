"""``lakebalance demo``: the full report on the bundled demo reservoir."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ._common import add_seed

HELP = "run the full annual report on the bundled demo reservoir (invented data)"


def demo_site() -> Path:
    """The demo's site file: shipped inside the package (``lakebalance/_demo/``, a wheel), else
    ``data_demo/site.toml`` of the source checkout (an editable install)."""
    package = Path(__file__).resolve().parents[1]
    shipped = package / "_demo" / "site.toml"
    if shipped.is_file():
        return shipped
    return package.parent / "data_demo" / "site.toml"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--out",
        type=Path,
        default=Path("demo_report"),
        metavar="DIR",
        help="output folder (default: ./demo_report)",
    )
    parser.add_argument(
        "--year",
        type=int,
        default=None,
        metavar="WY",
        help="water year to report (default: the last complete one)",
    )
    from .report import add_paper

    add_paper(parser)
    add_seed(parser)


def run(args: argparse.Namespace) -> int:
    from ..errors import LakebalanceError
    from ..report.build import make_report

    site = demo_site()
    if not site.is_file():
        raise LakebalanceError(
            f"the demo data is not here ({site}): this installation of lakebalance is "
            "incomplete; reinstall it (pip install lakebalance, or pip install -e . in a checkout)"
        )
    result = make_report(
        site,
        args.out,
        year=args.year,
        seed=args.seed,
        progress=sys.stderr.isatty(),
        pdf=args.pdf,
        file_to=args.file_to,
    )
    print(f"demo report: {result.html}")
    if result.pdf is not None:
        print(f"demo paper:  {result.pdf}")
    for line in result.messages:
        print(f"  {line}")
    return 0
