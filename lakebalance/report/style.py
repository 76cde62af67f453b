"""The figure style of lakebalance: readable in greyscale and by colour-blind readers.

Colours come from the Okabe–Ito palette (Okabe & Ito, 2008, "Color Universal Design"), and every
series also differs by line style or marker, so a figure printed in grey still reads. matplotlib is
imported only when a figure is made (Agg backend, no screen needed).
"""

from __future__ import annotations

from typing import Any

__all__ = ["PALETTE", "LINESTYLES", "new_figure", "apply_style", "shade_periods", "date_axis"]

#: Okabe–Ito colours by role (hex).
PALETTE = {
    "observed": "#000000",
    "simulated": "#0072B2",
    "inflow": "#009E73",
    "rain": "#56B4E9",
    "evaporation": "#E69F00",
    "outflow": "#0072B2",
    "withdrawal": "#D55E00",
    "release": "#CC79A7",
    "seepage": "#F0E442",
    "residual": "#D55E00",
    "band": "#999999",
    "flag": "#E69F00",
}

LINESTYLES = ["-", "--", "-.", ":", (0, (5, 1)), (0, (3, 1, 1, 1, 1, 1))]

_RC = {
    "figure.dpi": 110,
    "savefig.dpi": 120,
    "font.size": 9,
    "axes.titlesize": 10,
    "axes.labelsize": 9,
    "axes.grid": True,
    "grid.alpha": 0.3,
    "grid.linewidth": 0.5,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "legend.frameon": False,
    "legend.fontsize": 8,
    "lines.linewidth": 1.2,
}


def apply_style() -> Any:
    """Select the Agg backend and apply lakebalance's rc settings; returns ``matplotlib.pyplot``."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    plt.rcParams.update(_RC)
    return plt


def new_figure(
    nrows: int = 1, ncols: int = 1, *, width: float = 7.5, height: float = 3.2, **kw: Any
):
    """A new (figure, axes) pair in lakebalance's style. ``width`` and ``height`` in inches."""
    plt = apply_style()
    kw.setdefault("constrained_layout", True)
    return plt.subplots(nrows, ncols, figsize=(width, height * nrows), **kw)


def shade_periods(ax: Any, periods: list[tuple[Any, Any]], *, label: str = "flagged") -> None:
    """Shade date periods (start, end) on a time axis, hatched so they read in greyscale."""
    for i, (start, end) in enumerate(periods):
        ax.axvspan(
            start,
            end,
            facecolor=PALETTE["flag"],
            alpha=0.25,
            hatch="///",
            edgecolor="none",
            label=label if i == 0 else None,
        )


def date_axis(ax: Any) -> None:
    """Concise date ticks on the x axis (matplotlib's ``ConciseDateFormatter`` on an
    ``AutoDateLocator`` of at most 8 ticks): labels that never print over each other at print
    size, the year said once."""
    import matplotlib.dates as mdates

    locator = mdates.AutoDateLocator(minticks=3, maxticks=8)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))
