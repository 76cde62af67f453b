"""``lakebalance seepage``: net groundwater exchange from the residual of the daily balance."""

from __future__ import annotations

import argparse

from ._common import add_step_arguments, run_step

HELP = "estimate seepage (net loss to the ground) from the residual, with 95 per cent intervals"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_step_arguments(parser)


def run(args: argparse.Namespace) -> int:
    return run_step(args, "seepage", _write)


def _write(out, fit) -> list:
    """seepage_rates.csv (the rate at stages), seepage.txt (the summary) and seepage.png."""
    from ..io.output import save_figure, write_csv, write_text
    from ..report.figures_residuals import seepage_figure

    return [
        write_csv(out / "seepage_rates.csv", fit.rate_table(), index=False),
        write_text(out / "seepage.txt", fit.summary() + "\n"),
        save_figure(out / "seepage.png", seepage_figure(fit)),
    ]
