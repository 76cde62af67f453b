"""``lakebalance evaporation``: daily lake evaporation, monthly totals of every possible method."""

from __future__ import annotations

import argparse

from ._common import LakebalanceWarnings, add_json, add_site, open_lake

HELP = (
    "lake evaporation: monthly and water-year totals of every method the weather allows, side by "
    "side, with the spread between them"
)

#: ``--method`` choices: ``auto`` and the names of lakebalance.evaporation.registry.REGISTRY,
#: spelled here so that ``--help`` imports nothing heavy (tests/test_evaporation_registry.py
#: checks that they agree).
METHOD_CHOICES = (
    "auto",
    "given",
    "equilibrium_temperature",
    "pan",
    "penman",
    "priestley_taylor",
    "fao56",
    "hargreaves",
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    parser.add_argument(
        "--method",
        choices=METHOD_CHOICES,
        default=None,
        help="method for the lake evaporation (default: [evaporation] method of the site file)",
    )
    parser.add_argument(
        "--unit",
        default="mm",
        metavar="UNIT",
        help="depth unit of the monthly totals (default: mm)",
    )
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from .._json import dumps
    from ..evaporation.lake import CAUTION

    lake = open_lake(args)
    site = lake.site
    with LakebalanceWarnings() as messages:
        result = lake.evaporation_by(args.method)
    if args.json:
        print(dumps({"site": site.site.name, **result.to_dict(args.unit, warnings=messages)}))
        return 0
    monthly = result.monthly(args.unit)
    diffs = result.monthly_differences(args.unit)
    print(f"{site.site.name}: lake evaporation by {result.method} (monthly totals, {args.unit})")
    methods = list(result.available)
    width = {m: max(9, len(m) + 1) for m in methods}  # each column as wide as its name
    head = f"{'month':<8}" + "".join(f"{m:>{width[m]}}" for m in methods)
    head += f"{'days':>6}{'filled':>7}"
    others = [m for m in methods if m != result.method]
    head += "".join(f"{'Δ' + m:>{width[m] + 1}}" for m in others)
    print(head)

    def fmt(x: float, w: int) -> str:
        return f"{'-':>{w}}" if x != x else f"{x:>{w}.1f}"

    for month, row in monthly.iterrows():
        line = f"{str(month):<8}" + "".join(fmt(row[m], width[m]) for m in methods)
        line += f"{int(row['days']):>6}{int(row['filled_days']):>7}"
        line += "".join(fmt(diffs.loc[month, m], width[m] + 1) for m in others)
        print(line)
    line = f"{'total':<8}" + "".join(fmt(monthly[m].sum(min_count=1), width[m]) for m in methods)
    line += f"{int(monthly['days'].sum()):>6}{int(monthly['filled_days'].sum()):>7}"
    line += "".join(fmt(diffs[m].sum(min_count=1), width[m] + 1) for m in others)
    print(line)
    print(f"Δ columns: each method's monthly total minus {result.method}'s.")
    _water_years(result, args.unit, methods, width, fmt)
    heat = result.lake_heat
    if heat is not None:
        print(
            "lake method: mean depth "
            f"{heat['mean_depth_m'].mean():.1f} m (volume/area), time constant "
            f"{heat['time_constant_days'].mean():.0f} days, water temperature "
            f"{heat['water_temperature_c'].min():.1f} to {heat['water_temperature_c'].max():.1f} °C"
        )
    for key, value in result.inputs.items():
        print(f"input: {key}: {value}")
    for note in result.notes:
        print(f"note: {note}")
    for msg in messages:
        print(f"warning: {msg}")
    print(CAUTION)
    return 0


def _water_years(result, unit: str, methods: list[str], width: dict[str, int], fmt) -> None:
    """The water-year totals of every method and the spread between them."""
    years = result.water_years(unit)
    spread = result.spread(unit)
    start = result.water_year_start
    print()
    print(f"water-year totals ({unit}; water year starts in month {start}, named by its end)")
    head = f"{'year':<8}" + "".join(f"{m:>{width[m]}}" for m in methods)
    head += f"{'days':>6}{'ice':>5}{'sd':>8}{'rel.sd':>8}"
    print(head)
    for year, row in years.iterrows():
        line = f"{year:<8}" + "".join(fmt(row[m], width[m]) for m in methods)
        line += f"{int(row['days']):>6}{int(row['ice_days']):>5}"
        if year in spread.index and spread.loc[year, "methods"] >= 2:
            line += f"{spread.loc[year, 'sd']:>8.1f}{spread.loc[year, 'relative_sd']:>8.1%}"
        else:
            line += f"{'-':>8}{'-':>8}"
        print(line)
    rel = result.relative_spread()
    if rel is not None:
        print(
            f"spread between the methods (sd of complete water years' totals / their mean): "
            f'{rel:.1%} on average; [uncertainty] evaporation_error = "method_spread" uses it '
            "as the evaporation error of the balance"
        )
