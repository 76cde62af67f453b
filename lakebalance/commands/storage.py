"""``lakebalance storage``: the stage-area-storage relation at a regular step, and its figure."""

from __future__ import annotations

import argparse
import os
from pathlib import Path

from ._common import LakebalanceWarnings, add_json, add_out, add_site, open_lake, output_folder

HELP = "the stage-area-storage relation at a regular stage step, with a figure"

CAUTION = (
    "Storage volumes beyond the surveyed range are extrapolations. Where they inform dam safety, "
    "flood levels or public water supply, defer to local codes and a licensed professional."
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    parser.add_argument(
        "--step",
        type=float,
        default=0.05,
        metavar="M",
        help="stage step of the printed relation, in m (default: 0.05)",
    )
    parser.add_argument(
        "--compare",
        type=Path,
        default=None,
        metavar="FILE",
        help="a second survey (table or contour layer) to compare with "
        "(default: [storage] compare of the site file)",
    )
    add_json(parser)
    add_out(parser)


def run(args: argparse.Namespace) -> int:
    from .._json import dumps
    from ..errors import LakebalanceError
    from ..storage import compare_curves

    if not (args.step > 0):
        raise LakebalanceError(f"--step must be a positive number of metres, got {args.step}")
    lake = open_lake(args)
    site = lake.site
    out = output_folder(args, lake, args.compare)
    with LakebalanceWarnings() as messages:
        curve = lake.storage
        compare_file = args.compare or (site.storage.compare if site.storage else None)
        other = None
        comparison = None
        if compare_file is not None:
            other = lake.survey(Path(os.path.realpath(Path(compare_file).expanduser())))
            comparison = compare_curves(curve, other, args.step)
        location = lake.location
        table = curve.table(args.step)
    location_from = None
    if location is not None:
        given = site.site.latitude is not None and site.site.longitude is not None
        location_from = "site file" if given else "survey centroid"

    if out is not None:
        _write_outputs(out, curve, other, table, comparison, args.step, site.levels)

    if args.json:
        doc = {
            "site": site.site.name,
            "step_m": args.step,
            "relation": curve.to_dict(),
            "table": table,
            "comparison": None
            if comparison is None
            else {
                "source": other.source,
                "max_area_difference": comparison["max_area_difference"],
                "max_volume_difference": comparison["max_volume_difference"],
                "relation": other.to_dict(),
            },
            "location": None
            if location is None
            else {"latitude": location[0], "longitude": location[1], "from": location_from},
            "warnings": messages,
            "caution": CAUTION,
        }
        print(dumps(doc))
        return 0

    print(curve.summary())
    if location is not None:
        print(f"  lake position {location[0]:.5f} N, {location[1]:.5f} E ({location_from})")
    if comparison is not None:
        print(
            f"compared with {other.source}: largest area difference "
            f"{100 * comparison['max_area_difference']:.2f}% of the top area, largest storage "
            f"difference {100 * comparison['max_volume_difference']:.2f}% of the top storage "
            f"(over {comparison['stage_m'][0]:g} to {comparison['stage_m'][-1]:g} m)"
        )
    for m in messages:
        print(f"warning: {m}")
    print()
    from ..display import text_table
    from ._common import formatter, wrap

    print(text_table(table, formatter(lake), index=False))
    print()
    print(wrap(f"caution: {CAUTION}"))
    if args.out is not None:
        print(f"wrote storage tables and figure to {args.out}")
    return 0


def _write_outputs(out, curve, other, table, comparison, step, levels) -> None:
    import pandas as pd

    from ..io.output import save_figure, write_csv
    from ..report.figures_storage import storage_figure

    write_csv(out / "storage_table.csv", table, index=False)
    if comparison is not None:
        frame = pd.DataFrame({k: v for k, v in comparison.items() if not k.startswith("max_")})
        write_csv(out / "storage_comparison.csv", frame, index=False)
    fig = storage_figure(curve, other, step_m=step, levels=levels)
    save_figure(out / "storage.png", fig)
    import matplotlib.pyplot as plt

    plt.close(fig)
