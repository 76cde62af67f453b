"""``lakebalance evaporation``: daily lake evaporation, monthly totals of every possible method."""

from __future__ import annotations

import argparse

from ._common import LakebalanceWarnings, add_json, add_site, open_lake, wrap

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
    import pandas as pd

    from ..display import Formatter, display_units, text_table

    monthly = result.monthly("mm")
    diffs = result.monthly_differences("mm")
    # the depth unit asked for: inches show in US customary units, anything else in mm
    us = str(args.unit).strip().lower() in ("in", "inch", "inches")
    display = Formatter(display_units("US" if us else "SI"))
    print(f"{site.site.name}: lake evaporation by {result.method} (monthly totals)")
    methods = list(result.available)
    others = [m for m in methods if m != result.method]
    frame = pd.DataFrame(index=pd.Index([str(m) for m in monthly.index], name="month"))
    for m in methods:
        frame[f"{m}_mm"] = monthly[m].to_numpy()
    frame["days"] = monthly["days"].astype(int).to_numpy()
    frame["filled_days"] = monthly["filled_days"].astype(int).to_numpy()
    for m in others:
        frame[f"{m}_minus_{result.method}_mm"] = diffs[m].to_numpy()
    total = {c: frame[c].sum(min_count=1) for c in frame.columns}
    frame.loc["total"] = [total[c] for c in frame.columns]
    frame["days"] = frame["days"].astype(int)
    frame["filled_days"] = frame["filled_days"].astype(int)
    print(text_table(frame, display))
    print(f"'minus' columns: each method's monthly total minus {result.method}'s.")
    _water_years(result, methods, display)
    heat = result.lake_heat
    if heat is not None:
        print(
            "lake method: mean depth "
            f"{display.value('mean_depth_m', heat['mean_depth_m'].mean())} (volume/area), time constant "
            f"{heat['time_constant_days'].mean():.0f} days, water temperature "
            f"{heat['water_temperature_c'].min():.1f} to {heat['water_temperature_c'].max():.1f} °C"
        )
    for key, value in result.inputs.items():
        print(wrap(f"input: {key}: {value}"))
    for note in result.notes:
        print(wrap(f"note: {note}"))
    for msg in messages:
        print(wrap(f"warning: {msg}"))
    print(wrap(CAUTION))
    return 0


def _water_years(result, methods: list[str], display) -> None:
    """The water-year totals of every method and the spread between them."""
    import pandas as pd

    from ..display import text_table

    years = result.water_years("mm")
    spread = result.spread("mm")
    print()
    print(
        f"water-year totals (water year starts in month {result.water_year_start}, named by "
        "its end)"
    )
    frame = pd.DataFrame(index=pd.Index([str(y) for y in years.index], name="water year"))
    for m in methods:
        frame[f"{m}_mm"] = years[m].to_numpy()
    frame["days"] = years["days"].astype(int).to_numpy()
    frame["ice_days"] = years["ice_days"].astype(int).to_numpy()
    enough = spread.reindex(years.index)
    ok = (enough["methods"] >= 2).to_numpy() if len(enough) else []
    frame["spread_sd_mm"] = enough["sd"].where(ok).to_numpy()
    frame["spread_relative_pct"] = (100 * enough["relative_sd"]).where(ok).to_numpy()
    print(text_table(frame, display))
    rel = result.relative_spread()
    if rel is not None:
        print(
            wrap(
                f"spread between the methods (sd of complete water years' totals / their mean): "
                f'{rel:.1%} on average; [uncertainty] evaporation_error = "method_spread" uses '
                "it as the evaporation error of the balance"
            )
        )
