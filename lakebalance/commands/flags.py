"""``lakebalance flags``: dated, sized and explained flags on the residual of the daily balance."""

from __future__ import annotations

import argparse

from ._common import add_json, add_out, add_seed, add_site

HELP = "flag spikes, datum shifts, runs and drift in the residual of the daily balance"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    add_json(parser)
    add_out(parser)
    add_seed(parser)


def run(args: argparse.Namespace) -> int:
    import warnings

    import numpy as np

    from .._json import dumps
    from ..api import close_balance, find_flags, load_records, load_site
    from ..errors import LakebalanceWarning

    site = load_site(args.site)
    seed = site.site.seed if args.seed is None else args.seed
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)  # the balance's notes say it
        records = load_records(site)
        balance = close_balance(site, records=records, rng=np.random.default_rng(seed))
        flags = find_flags(site, balance=balance, records=records)
    written = []
    if args.out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_residuals import flags_figure

        written.append(write_csv(args.out / "flags.csv", flags.to_frame(), index=False))
        written.append(write_text(args.out / "flags.txt", flags.summary() + "\n"))
        written.append(save_figure(args.out / "flags.png", flags_figure(flags)))
    if args.json:
        doc = flags.to_dict()
        doc["site"] = site.site.name
        doc["seed"] = seed
        doc["written"] = [str(p) for p in written]
        print(dumps(doc))
    else:
        print(f"{site.site.name} (seed {seed})")
        print(flags.summary())
        for p in written:
            print(f"wrote {p}")
    return 0
