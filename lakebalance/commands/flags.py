"""``lakebalance flags``: dated, sized and explained flags on the residual of the daily balance."""

from __future__ import annotations

import argparse

from ._common import add_step_arguments, run_step

HELP = "flag spikes, datum shifts, runs and drift in the residual of the daily balance"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_step_arguments(parser)


def run(args: argparse.Namespace) -> int:
    return run_step(args, "flags", _write)


def _write(out, flags) -> list:
    """flags.csv (one row a flag), flags.txt (the summary) and flags.png."""
    from ..io.output import save_figure, write_csv, write_text
    from ..report.figures_residuals import flags_figure

    return [
        write_csv(out / "flags.csv", flags.to_frame(), index=False),
        write_text(out / "flags.txt", flags.summary() + "\n"),
        save_figure(out / "flags.png", flags_figure(flags)),
    ]
