"""``lakebalance seepage``: net groundwater exchange from the residual of the daily balance."""

from __future__ import annotations

import argparse

from ._common import (
    LakebalanceWarnings,
    add_json,
    add_out,
    add_seed,
    add_site,
    emit,
    open_lake,
    output_folder,
)

HELP = "estimate seepage (net loss to the ground) from the residual, with 95 per cent intervals"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    add_json(parser)
    add_out(parser)
    add_seed(parser)


def run(args: argparse.Namespace) -> int:
    lake = open_lake(args)
    out = output_folder(args, lake)
    with LakebalanceWarnings():  # the balance's own notes carry them
        fit = lake.seepage
    written = []
    if out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_residuals import seepage_figure

        written.append(write_csv(out / "seepage_rates.csv", fit.rate_table(), index=False))
        written.append(write_text(out / "seepage.txt", fit.summary() + "\n"))
        written.append(save_figure(out / "seepage.png", seepage_figure(fit)))
    emit(args, lake, fit.to_dict(), fit.summary(), written)
    return 0
