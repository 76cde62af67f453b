"""Figure of a stage-area-storage relation: area and volume against stage (stage upwards, as
storage relations are usually drawn), with the surveyed levels marked and, optionally, a second
survey drawn over it. matplotlib is imported only when the figure is drawn."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from .style import LINESTYLES, PALETTE, new_figure

if TYPE_CHECKING:  # pragma: no cover
    from ..storage import StorageCurve

__all__ = ["storage_figure"]


def storage_figure(
    curve: StorageCurve,
    other: StorageCurve | None = None,
    *,
    step_m: float = 0.05,
    levels: dict[str, float] | None = None,
) -> Any:
    """Area and volume against stage.

    Parameters
    ----------
    curve : StorageCurve
        The relation.
    other : StorageCurve, optional
        A second survey of the same lake, drawn dashed (volumes shifted to agree with ``curve``
        at the lowest common stage).
    step_m : float
        Stage step of the drawn curve, m.
    levels : dict of str to float, optional
        Named stages (m) drawn as horizontal lines (spill, intake, ...).

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, axes = new_figure(1, 2, width=8.0, height=3.6)
    ax_area, ax_volume = np.atleast_1d(axes).ravel()
    table = curve.table(step_m)
    h = table["stage_m"].to_numpy()
    name = curve.source or "relation"
    ax_area.plot(
        table["area_m2"] / 1e6, h, color=PALETTE["simulated"], ls=LINESTYLES[0], label=name
    )
    ax_volume.plot(
        table["volume_m3"] / 1e6, h, color=PALETTE["simulated"], ls=LINESTYLES[0], label=name
    )
    ax_area.plot(
        curve.area_m2 / 1e6,
        curve.stage_m,
        "o",
        ms=3,
        mfc="none",
        color=PALETTE["observed"],
        label="surveyed levels",
    )
    ax_volume.plot(
        curve.volume_m3 / 1e6,
        curve.stage_m,
        "o",
        ms=3,
        mfc="none",
        color=PALETTE["observed"],
        label="surveyed levels",
    )
    if other is not None:
        t2 = other.table(step_m)
        lo = max(curve.min_stage_m, other.min_stage_m)
        shift = float(curve.volume(lo)) - float(other.volume(lo))
        label = other.source or "second survey"
        ax_area.plot(
            t2["area_m2"] / 1e6,
            t2["stage_m"],
            color=PALETTE["inflow"],
            ls=LINESTYLES[1],
            label=label,
        )
        ax_volume.plot(
            (t2["volume_m3"] + shift) / 1e6,
            t2["stage_m"],
            color=PALETTE["inflow"],
            ls=LINESTYLES[1],
            label=label,
        )
    for k, (level, stage) in enumerate(sorted((levels or {}).items(), key=lambda kv: kv[1])):
        for ax in (ax_area, ax_volume):
            ax.axhline(stage, color=PALETTE["band"], lw=0.7, ls=LINESTYLES[(k + 2) % 6])
        ax_volume.annotate(
            level,
            (1.0, stage),
            xycoords=("axes fraction", "data"),
            fontsize=7,
            ha="right",
            va="bottom",
        )
    ax_area.set_xlabel("area (km²)")
    ax_volume.set_xlabel("storage (million m³)")
    for ax in (ax_area, ax_volume):
        ax.set_ylabel("stage (m)")
    ax_area.legend(loc="lower right")
    title = "stage-area-storage relation" + (" (approximate)" if curve.approximate else "")
    fig.suptitle(title)
    return fig
