"""Figures of the drawdown forecast: the fan chart of stage, and the odds of each level.

matplotlib is imported only inside the functions (through :mod:`lakebalance.report.style`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from .style import LINESTYLES, PALETTE, date_axis, new_figure

if TYPE_CHECKING:  # pragma: no cover
    from ..display import DisplayUnits
    from ..drawdown import Forecast

__all__ = ["fan_chart"]


def fan_chart(forecast: Forecast, *, width: float = 7.5, units: DisplayUnits | None = None) -> Any:
    """Stage percentiles (5-95, 10-90, 25-75 % bands and the median) with the named levels,
    above the probability of being below each level under the start stage that some member
    reaches; the unrestricted median beside a restricted run. Returns the matplotlib figure."""
    from ..display import SI, axis_label, convert

    u = units or SI
    fig, (ax, ax2) = new_figure(2, 1, width=width, height=2.6, sharex=True)
    sp = forecast.stage_percentiles.apply(lambda col: convert(col.to_numpy(), "length", u))
    x = sp.index
    for lo, hi, alpha in (("p5", "p95", 0.18), ("p10", "p90", 0.28), ("p25", "p75", 0.4)):
        ax.fill_between(
            x,
            sp[lo],
            sp[hi],
            color=PALETTE["simulated"],
            alpha=alpha,
            lw=0,
            label=f"{lo[1:]}-{hi[1:]} %",
        )
    ax.plot(x, sp["p50"], color=PALETTE["simulated"], lw=1.5, label="median")
    if forecast.unrestricted is not None:
        ax.plot(
            x,
            convert(forecast.unrestricted.stage_percentiles["p50"].to_numpy(), "length", u),
            color=PALETTE["withdrawal"],
            ls="--",
            lw=1.2,
            label="median, no restrictions",
        )
    lo_y, hi_y = float(sp["p5"].min()), float(sp["p95"].max())
    span = max(hi_y - lo_y, float(convert(0.5, "length", u)))
    shown = {k: float(convert(v, "length", u)) for k, v in forecast.levels.items()}
    for i, (name, stage) in enumerate(sorted(shown.items(), key=lambda kv: kv[1])):
        if lo_y - 0.5 * span <= stage <= hi_y + 0.5 * span:
            ax.axhline(stage, color="0.3", lw=0.8, ls=LINESTYLES[(i + 1) % len(LINESTYLES)])
            ax.annotate(
                f"{name} {stage:.2f} {u.of('length')[1]}",
                (x[0], stage),
                xytext=(2, 2),
                textcoords="offset points",
                fontsize=7,
                color="0.2",
            )
    ax.set_ylabel(axis_label("stage", "length", u))
    ax.set_title(
        f"Drawdown forecast from {forecast.start} ({forecast.scenario}, {forecast.members} members)"
    )
    ax.legend(loc="best", ncol=2)
    pb = forecast.probability_below
    for i, col in enumerate(pb.columns):
        below_start = forecast.levels[col] < forecast.start_stage_m
        if below_start and pb[col].max() > 0:
            ax2.plot(
                pb.index,
                100.0 * pb[col],
                ls=LINESTYLES[i % len(LINESTYLES)],
                label=col,
                color=list(PALETTE.values())[(i + 1) % len(PALETTE)],
            )
    ax2.set_ylabel("chance below (% of members)")
    date_axis(ax2)
    ax2.set_ylim(-2, 102)
    if ax2.get_legend_handles_labels()[0]:
        ax2.legend(loc="best", ncol=3)
    return fig
