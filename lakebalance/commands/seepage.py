"""``lakebalance seepage``: net groundwater exchange from the residual of the daily balance."""

from __future__ import annotations

import argparse

from ._common import add_json, add_out, add_seed, add_site

HELP = "estimate seepage (net loss to the ground) from the residual, with 95 per cent intervals"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    add_json(parser)
    add_out(parser)
    add_seed(parser)


def run(args: argparse.Namespace) -> int:
    import warnings

    import numpy as np

    from .._json import dumps
    from ..api import close_balance, estimate_seepage, find_flags, load_records, load_site
    from ..errors import LakebalanceWarning

    site = load_site(args.site)
    seed = site.site.seed if args.seed is None else args.seed
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)  # the fit's notes carry its warnings
        records = load_records(site)
        balance = close_balance(site, records=records, rng=np.random.default_rng(seed))
        flags = find_flags(site, balance=balance, records=records)
        fit = estimate_seepage(site, balance=balance, flags=flags, records=records)
    written = []
    if args.out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_residuals import seepage_figure

        written.append(write_csv(args.out / "seepage_rates.csv", fit.rate_table(), index=False))
        written.append(write_text(args.out / "seepage.txt", fit.summary() + "\n"))
        written.append(save_figure(args.out / "seepage.png", seepage_figure(fit)))
    if args.json:
        doc = fit.to_dict()
        doc["site"] = site.site.name
        doc["seed"] = seed
        doc["written"] = [str(p) for p in written]
        print(dumps(doc))
    else:
        print(f"{site.site.name} (seed {seed})")
        print(fit.summary())
        for p in written:
            print(f"wrote {p}")
    return 0
