"""Figures of the yield study and the hindcast: the record's stage at the firm yield with its
critical period, the storage–yield curve, and the hindcast's reliability diagram.

matplotlib is imported only inside the functions (through :mod:`lakebalance.report.style`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from .style import PALETTE, new_figure

if TYPE_CHECKING:  # pragma: no cover
    from ..drawdown.hindcast import Hindcast
    from ..drawdown.yield_ import YieldStudy

__all__ = ["firm_yield_figure", "storage_yield_figure", "reliability_diagram"]


def firm_yield_figure(study: YieldStudy, *, width: float = 7.5) -> Any:
    """Stage through the record at the firm yield, the failure level and the critical period
    shaded. Returns the matplotlib figure."""
    import pandas as pd

    firm = study.firm
    fig, ax = new_figure(width=width, height=3.0)
    ax.plot(
        firm.dates, firm.stage_m, color=PALETTE["simulated"], lw=1.0, label="stage at firm yield"
    )
    ax.axhline(firm.failure_level_m, color="0.3", lw=0.8, ls="--")
    ax.annotate(
        f"{firm.failure_level} {firm.failure_level_m:.2f} m",
        (firm.dates[0], firm.failure_level_m),
        xytext=(2, 2),
        textcoords="offset points",
        fontsize=7,
    )
    ax.axvspan(
        pd.Timestamp(firm.critical_start),
        pd.Timestamp(firm.critical_end),
        color="0.85",
        lw=0,
        label=f"critical period ({firm.critical_days} days)",
    )
    ax.set_ylabel("stage (m)")
    ax.set_title(f"Firm yield {firm.demand_m3s:.3g} m3/s through the record")
    ax.legend(loc="best")
    return fig


def storage_yield_figure(study: YieldStudy, *, width: float = 6.0) -> Any:
    """Sequent-peak storage–yield curve, with the storage between the start and failure levels
    and the simulated firm yield."""
    curve = study.curve
    fig, ax = new_figure(width=width, height=3.4)
    ax.plot(curve.yields_m3s, curve.storage_m3 / 1e6, marker="o", color=PALETTE["simulated"],
            label="sequent peak (no outlet losses)")  # fmt: skip
    ax.axhline(curve.available_m3 / 1e6, color="0.3", lw=0.8, ls="--",
               label="storage between start and failure levels")  # fmt: skip
    ax.axvline(study.firm.demand_m3s, color=PALETTE["withdrawal"], lw=1.0, ls="-.",
               label="firm yield by simulation")  # fmt: skip
    ax.set_xlabel("yield (m3/s)")
    ax.set_ylabel("storage needed (million m3)")
    ax.set_title("Storage-yield curve")
    ax.legend(loc="best")
    return fig


def reliability_diagram(hindcast: Hindcast, *, width: float = 4.8) -> Any:
    """Observed frequency against forecast probability (all levels pooled), with the number
    of forecasts per bin; the diagonal is perfect reliability."""
    t = hindcast.reliability
    fig, ax = new_figure(width=width, height=4.2)
    ax.plot([0, 1], [0, 1], color="0.5", lw=0.8, ls="--", label="perfect reliability")
    used = t[t["forecasts"] > 0]
    ax.plot(used["mean_probability"], used["observed_frequency"], marker="o",
            color=PALETTE["simulated"], label="hindcast")  # fmt: skip
    for r in used.itertuples():
        ax.annotate(f"{r.forecasts}", (r.mean_probability, r.observed_frequency),
                    xytext=(4, -10), textcoords="offset points", fontsize=7)  # fmt: skip
    base = float(np.mean(hindcast.events["happened"])) if not hindcast.events.empty else np.nan
    if np.isfinite(base):
        ax.axhline(base, color="0.7", lw=0.8, label="climatology (all events)")
    ax.set_xlim(-0.02, 1.02)
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel("forecast probability of reaching the level")
    ax.set_ylabel("observed frequency")
    ax.set_title(f"Hindcast reliability ({hindcast.starts} starts, {hindcast.days} days)")
    ax.legend(loc="upper left", fontsize=7)
    return fig
