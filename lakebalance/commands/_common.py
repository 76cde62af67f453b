"""Helpers shared by the subcommands: arguments and output (standard library at import; the
residual pipeline imports the API only when it runs)."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_site(parser: argparse.ArgumentParser) -> None:
    """The positional site file."""
    parser.add_argument("site", type=Path, metavar="SITE.toml", help="the site file")


def add_json(parser: argparse.ArgumentParser) -> None:
    """``--json``: print one JSON document on stdout instead of text."""
    parser.add_argument("--json", action="store_true", help="print one JSON document on stdout")


def add_out(parser: argparse.ArgumentParser) -> None:
    """``--out DIR``: where tables and figures go."""
    parser.add_argument(
        "--out", type=Path, default=None, metavar="DIR", help="write tables and figures to DIR"
    )


def add_seed(parser: argparse.ArgumentParser) -> None:
    """``--seed N``: overrides the site file's seed."""
    parser.add_argument("--seed", type=int, default=None, help="random seed (default: site file)")


def residual_inputs(site, seed: int, *, seepage: bool = False) -> tuple:
    """Records, the daily balance and its flags (and the seepage fit when asked) for ``site``.

    The flags and seepage commands both start from these; the balance's own notes carry its
    warnings, so lakebalance's warnings are not printed again here.
    """
    import warnings

    import numpy as np

    from ..api import close_balance, estimate_seepage, find_flags, load_records
    from ..errors import LakebalanceWarning

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)
        records = load_records(site)
        balance = close_balance(site, records=records, rng=np.random.default_rng(seed))
        flags = find_flags(site, balance=balance, records=records)
        fit = (
            estimate_seepage(site, balance=balance, flags=flags, records=records)
            if seepage
            else None
        )
    return records, balance, flags, fit


def emit(args: argparse.Namespace, site, seed: int, doc: dict, summary: str, written: list) -> None:
    """Print a result as one JSON document (``--json``) or as its text summary."""
    if args.json:
        from .._json import dumps

        doc = {**doc, "site": site.site.name, "seed": seed, "written": [str(p) for p in written]}
        print(dumps(doc))
    else:
        print(f"{site.site.name} (seed {seed})")
        print(summary)
        for p in written:
            print(f"wrote {p}")
