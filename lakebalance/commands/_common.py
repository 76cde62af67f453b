"""Argument helpers shared by the subcommands (standard library only)."""

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
