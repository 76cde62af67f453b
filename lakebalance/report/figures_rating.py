"""Figures of a rating fit: gaugings with the curve and its bands (linear and log axes), and the
residuals against stage and time. matplotlib is imported only when a figure is drawn."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from .style import PALETTE, date_axis, new_figure

if TYPE_CHECKING:  # pragma: no cover
    from ..display import DisplayUnits
    from ..outlet.fit import RatingFit

__all__ = ["rating_figure", "rating_residual_figure", "curve_grid"]


def curve_grid(fit: RatingFit, stage_max_m: float | None = None, points: int = 300) -> np.ndarray:
    """Stages (m) from just below the lowest gauging to ``stage_max_m`` (default: 10 % above)."""
    lo, hi = fit.gauged_range
    span = max(hi - lo, 1e-3)
    top = max(hi + 0.1 * span, stage_max_m or -np.inf)
    return np.linspace(lo - 0.05 * span, top, points)


def rating_figure(
    fit: RatingFit, stage_max_m: float | None = None, *, units: DisplayUnits | None = None
) -> Any:
    """Gaugings, fitted curve, 95% confidence and prediction bands; linear and log axes.

    Parameters
    ----------
    fit : RatingFit
        The fitted rating.
    stage_max_m : float, optional
        Draw the curve up to this stage (m), e.g. the highest stage of the record.
    units : DisplayUnits, optional
        Display units of the axes (default SI).
    """
    from ..display import SI, axis_label, convert

    u = units or SI

    def Q(v):
        return convert(v, "flow", u)

    def H(v):
        return convert(v, "length", u)

    h_si = curve_grid(fit, stage_max_m)
    h = H(h_si)
    conf = fit.predict(h_si, "confidence")
    pred = fit.predict(h_si, "prediction")
    t = fit.table
    fig, axes = new_figure(1, 2, width=8.0, height=3.4)
    axes = np.atleast_1d(axes).ravel()
    lo, hi = fit.gauged_range
    for ax, log in zip(axes, (False, True)):
        ax.fill_betweenx(
            h,
            Q(pred.lower_m3s),
            Q(pred.upper_m3s),
            color=PALETTE["band"],
            alpha=0.2,
            label="95% prediction",
        )
        ax.fill_betweenx(
            h,
            Q(conf.lower_m3s),
            Q(conf.upper_m3s),
            color=PALETTE["band"],
            alpha=0.5,
            label="95% confidence",
        )
        ax.plot(Q(conf.discharge_m3s), h, color=PALETTE["simulated"], label=f"fitted ({fit.form})")
        used = t[t["used"]]
        ax.plot(
            Q(used["discharge_m3s"]),
            H(used["stage_m"]),
            "o",
            ms=3.5,
            mfc="none",
            color=PALETTE["observed"],
            label="gaugings",
        )
        excl = t[~t["used"]]
        if not excl.empty:
            ax.plot(
                Q(excl["discharge_m3s"].clip(lower=0)),
                H(excl["stage_m"]),
                "x",
                ms=4,
                color=PALETTE["flag"],
                label="excluded",
            )
        ax.axhline(float(H(hi)), ls=":", lw=0.8, color=PALETTE["observed"])
        ax.set_xlabel(axis_label("discharge", "flow", u))
        ax.set_ylabel(axis_label("stage", "length", u))
        if log:
            pos = t.loc[t["used"] & (t["discharge_m3s"] > 0), "discharge_m3s"]
            if pos.size:
                ax.set_xscale("log")
                ax.set_xlim(0.3 * float(Q(float(pos.min()))), None)
            ax.set_title("log discharge axis")
        else:
            ax.set_title("linear axes")
            ax.legend(loc="lower right")
    return fig


def rating_residual_figure(fit: RatingFit) -> Any:
    """Residuals of the gaugings against stage and against time."""
    t = fit.table[fit.table["used"] & fit.table["residual"].notna()]
    fig, axes = new_figure(1, 2, width=8.0, height=2.8)
    axes = np.atleast_1d(axes).ravel()
    label = "log residual (-)" if fit.residuals == "log" else "residual (m³/s)"
    axes[0].plot(t["stage_m"], t["residual"], "o", ms=3.5, mfc="none", color=PALETTE["observed"])
    axes[0].set_xlabel("stage (m)")
    if t["date"].notna().any():
        axes[1].plot(t["date"], t["residual"], "o", ms=3.5, mfc="none", color=PALETTE["observed"])
        axes[1].set_xlabel("date")
        date_axis(axes[1])
    for ax in axes:
        ax.axhline(0.0, color=PALETTE["simulated"], lw=0.8)
        ax.set_ylabel(label)
    return fig
