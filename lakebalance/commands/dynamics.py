"""``lakebalance dynamics``: residence, response and equilibrium of the lake, with what-ifs."""

from __future__ import annotations

import argparse

from ._common import LakebalanceWarnings, add_json, add_site, open_lake, wrap

HELP = "residence and response times, equilibrium stages, inflow limits and what-if changes"


def _pair(text: str) -> tuple[str, str]:
    name, sep, value = text.partition("=")
    if not sep or not name.strip() or not value.strip():
        raise argparse.ArgumentTypeError(f"expected NAME=VALUE, got {text!r}")
    return name.strip(), value.strip()


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    add_json(parser)
    parser.add_argument(
        "--inflow",
        default=None,
        metavar="Q",
        help="sustained inflow, m3/s or with a unit ('150 ML/d'); default: the record's mean",
    )
    parser.add_argument(
        "--outlet",
        type=_pair,
        action="append",
        default=[],
        metavar="PARAM=VALUE",
        help="what-if: a changed rating parameter in SI units, e.g. sill.e=9.5 (repeatable)",
    )
    parser.add_argument(
        "--demand",
        default=None,
        metavar="Q",
        help="what-if: a changed withdrawal demand, m3/s or with a unit",
    )
    parser.add_argument(
        "--stage",
        type=float,
        action="append",
        default=[],
        metavar="H",
        help="also give the response time at this stage, m (repeatable)",
    )
    parser.add_argument(
        "--evaporation-scale",
        type=float,
        default=None,
        metavar="F",
        help="what-if: evaporation multiplied by F",
    )


def _flow(text: str | None, what: str) -> float | None:
    if text is None:
        return None
    from ..config import quantity

    try:
        value: float | str = float(text)
    except ValueError:
        value = text
    return quantity(value, "m**3/s", "flow", what)


def run(args: argparse.Namespace) -> int:
    import sys

    from .._json import dumps
    from ..dynamics import WhatIfRequest
    from ..errors import LakebalanceError

    lake = open_lake(args)
    site = lake.site
    outlet = {}
    for name, value in args.outlet:
        try:
            outlet[name] = float(value)
        except ValueError:
            raise LakebalanceError(f"--outlet {name}: {value!r} is not a number") from None
    what_if = WhatIfRequest(
        outlet=outlet,
        demand_m3s=_flow(args.demand, "--demand"),
        evaporation_scale=args.evaporation_scale,
    )
    with LakebalanceWarnings() as messages:
        dyn = lake.dynamics(
            _flow(args.inflow, "--inflow"),
            what_if=what_if,
            stages={f"{h:g} m": h for h in args.stage} or None,
        )
    if args.json:
        doc = {"site": site.site.name, **dyn.to_dict(), "warnings": messages}
        print(dumps(doc))
        return 0
    print(f"{site.site.name}: lake dynamics")
    print()
    print("\n".join(wrap(line) if len(line) > 120 else line for line in dyn.summary().splitlines()))
    for m in messages:
        print(f"warning: {m}", file=sys.stderr)
    return 0
