"""``lakebalance flags``: dated, sized and explained flags on the residual of the daily balance."""

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

HELP = "flag spikes, datum shifts, runs and drift in the residual of the daily balance"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_site(parser)
    add_json(parser)
    add_out(parser)
    add_seed(parser)


def run(args: argparse.Namespace) -> int:
    lake = open_lake(args)
    out = output_folder(args, lake)
    with LakebalanceWarnings():  # the balance's own notes carry them
        flags = lake.flags
    written = []
    if out is not None:
        from ..io.output import save_figure, write_csv, write_text
        from ..report.figures_residuals import flags_figure

        written.append(write_csv(out / "flags.csv", flags.to_frame(), index=False))
        written.append(write_text(out / "flags.txt", flags.summary() + "\n"))
        written.append(save_figure(out / "flags.png", flags_figure(flags)))
    emit(args, lake, flags.to_dict(), flags.summary(), written)
    return 0
