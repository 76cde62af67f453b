"""Figures of the residual flags and of the seepage fit (matplotlib imported only when drawing)."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from ..flags import Flags
    from ..seepage import SeepageFit

__all__ = ["flags_figure", "seepage_figure"]


def flags_figure(flags: Flags) -> Any:
    """The daily residual (m³/d) with every flagged period shaded and labelled by kind.

    Returns the matplotlib figure.
    """
    import pandas as pd

    from .style import PALETTE, date_axis, new_figure, shade_periods

    fig, ax = new_figure(height=3.4)
    r = flags.residual_m3
    ax.plot(r.index, r.to_numpy(), color=PALETTE["residual"], lw=0.6, label="residual (m³/d)")
    ax.axhline(flags.baseline_m3, color=PALETTE["observed"], ls="--", lw=0.8, label="usual level")
    periods = [
        (pd.Timestamp(f.start), pd.Timestamp(f.end) + pd.Timedelta(days=1)) for f in flags.items
    ]
    if periods:
        shade_periods(ax, periods, label="flagged")
        top = float(r.max()) if r.notna().any() else 0.0
        for f, (start, _) in zip(flags.items, periods):
            ax.annotate(f.kind, (start, top), fontsize=6, rotation=90, va="top")
    ax.set_ylabel("residual, m³/d (+ = unexplained gain)")
    ax.set_title("Unexplained residual of the daily balance and its flags")
    date_axis(ax)
    ax.legend(loc="lower left", fontsize=7)
    return fig


def seepage_figure(fit: SeepageFit) -> Any:
    """Loss against stage with the fitted law and its 95 % band, and the regression residuals.

    Returns the matplotlib figure (two panels).
    """
    import numpy as np

    from .style import PALETTE, new_figure

    fig, (ax1, ax2) = new_figure(2, 1, height=3.0)
    h = fit.stage_m
    ax1.plot(h, fit.loss_m3s * 1000.0, ".", ms=2, color=PALETTE["observed"], label="days used")
    grid = np.linspace(float(h.min()), float(h.max()), 100) if h.size else np.zeros(0)
    if grid.size:
        rate, lo, hi = fit.predict(grid, interval="confidence")
        ax1.plot(grid, rate * 1000.0, color=PALETTE["seepage"], lw=1.6, label=f"{fit.model} law")
        ax1.fill_between(
            grid,
            lo * 1000.0,
            hi * 1000.0,
            color=PALETTE["band"],
            alpha=0.4,
            hatch="///",
            label="95 % interval",
        )
    ax1.set_xlabel("stage, m")
    ax1.set_ylabel("net loss, L/s")
    ax1.legend(fontsize=7)
    ax1.set_title("Seepage (net loss to the ground) from the balance residual")
    if fit.dates is not None and len(fit.dates) == fit.residuals_m3s.size:
        ax2.plot(fit.dates, fit.residuals_m3s * 1000.0, ".", ms=2, color=PALETTE["residual"])
        ax2.set_xlabel("date")
        from .style import date_axis

        date_axis(ax2)
    else:
        ax2.plot(fit.residuals_m3s * 1000.0, ".", ms=2, color=PALETTE["residual"])
    ax2.axhline(0.0, color=PALETTE["observed"], lw=0.8)
    ax2.set_ylabel("regression residual, L/s")
    ax2.set_title(f"Durbin–Watson {fit.durbin_watson:.2f}")
    return fig
