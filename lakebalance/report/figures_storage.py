"""Figure of a stage-area-storage relation: area and volume against stage (stage upwards, as
storage relations are usually drawn), with the surveyed levels marked and, optionally, a second
survey drawn over it. matplotlib is imported only when the figure is drawn."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from .style import LINESTYLES, PALETTE, new_figure

if TYPE_CHECKING:  # pragma: no cover
    from ..display import DisplayUnits
    from ..storage import StorageCurve

__all__ = ["storage_figure"]


def storage_figure(
    curve: StorageCurve,
    other: StorageCurve | None = None,
    *,
    step_m: float = 0.05,
    levels: dict[str, float] | None = None,
    units: DisplayUnits | None = None,
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
    units : DisplayUnits, optional
        Display units of the axes (default SI: m, km², thousand m³), as the report's tables.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from ..display import SI, axis_label, convert

    u = units or SI

    def A(v):
        return convert(v, "area", u)

    def V(v):
        return convert(v, "volume", u)

    def H(v):
        return convert(v, "length", u)

    fig, axes = new_figure(1, 2, width=8.0, height=3.6)
    ax_area, ax_volume = np.atleast_1d(axes).ravel()
    table = curve.table(step_m)
    h = H(table["stage_m"].to_numpy())
    name = curve.source or "relation"
    ax_area.plot(A(table["area_m2"]), h, color=PALETTE["simulated"], ls=LINESTYLES[0], label=name)
    ax_volume.plot(
        V(table["volume_m3"]), h, color=PALETTE["simulated"], ls=LINESTYLES[0], label=name
    )
    ax_area.plot(
        A(curve.area_m2),
        H(curve.stage_m),
        "o",
        ms=3,
        mfc="none",
        color=PALETTE["observed"],
        label="surveyed levels",
    )
    ax_volume.plot(
        V(curve.volume_m3),
        H(curve.stage_m),
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
            A(t2["area_m2"]),
            H(t2["stage_m"]),
            color=PALETTE["inflow"],
            ls=LINESTYLES[1],
            label=label,
        )
        ax_volume.plot(
            V(t2["volume_m3"] + shift),
            H(t2["stage_m"]),
            color=PALETTE["inflow"],
            ls=LINESTYLES[1],
            label=label,
        )
    for k, (level, stage) in enumerate(sorted((levels or {}).items(), key=lambda kv: kv[1])):
        for ax in (ax_area, ax_volume):
            ax.axhline(float(H(stage)), color=PALETTE["band"], lw=0.7, ls=LINESTYLES[(k + 2) % 6])
        ax_volume.annotate(
            level,
            (1.0, float(H(stage))),
            xycoords=("axes fraction", "data"),
            fontsize=7,
            ha="right",
            va="bottom",
        )
    ax_area.set_xlabel(axis_label("area", "area", u))
    ax_volume.set_xlabel(axis_label("storage", "volume", u))
    for ax in (ax_area, ax_volume):
        ax.set_ylabel(axis_label("stage", "length", u))
    ax_area.legend(loc="lower right")
    title = "stage-area-storage relation" + (" (approximate)" if curve.approximate else "")
    fig.suptitle(title)
    return fig
