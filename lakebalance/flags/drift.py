"""Drift: a linear trend of the residual inside a long segment, with Newey–West errors (step 4 of
:func:`~lakebalance.flags.detect_flags`)."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..stats import newey_west_lags
from .result import Flag

if TYPE_CHECKING:  # pragma: no cover
    from .context import FlagContext
    from .segments import Segmentation


def drift_flags(ctx: FlagContext, seg: Segmentation) -> list[Flag]:
    """A drift flag for each segment of at least ``drift_min_days`` whose departure from the
    usual level trends with a Newey–West p-value below ``drift_alpha``.

    Parameters
    ----------
    ctx : FlagContext
        The record.
    seg : Segmentation
        The segments and the departure from the usual level (m³/d).

    Returns
    -------
    list of Flag
        Rate: the slope (m³/d per day); significance: |Φ⁻¹(p/2)| (-).

    Notes
    -----
    The volume is the second half's excess over the segment's mean level: slope · Σ_{t>0} t with
    t centred on the segment (m³).
    """
    flags = []
    for a, b in seg.change.segments:
        if b - a + 1 < ctx.options.drift_min_days:
            continue
        res = trend_test(seg.departure_m3[a : b + 1])  # departure from the usual level
        if res is None:
            continue
        slope, p_value = res
        if p_value >= ctx.options.drift_alpha:
            continue
        days = b - a + 1
        t = np.arange(days) - (days - 1) / 2.0
        volume = float(slope * np.sum(t[t > 0]))  # second half's excess over the segment mean
        flags.append(
            Flag(
                kind="drift",
                start=ctx.iso(a),
                end=ctx.iso(b),
                series="residual",
                volume_m3=volume,
                depth_mm=ctx.depth_mm(volume, a, b),
                rate_m3_per_day=float(slope),
                significance=float(abs(norm_ppf(p_value / 2.0))),
                significant=bool(p_value < 0.05),
                cause="drift",
                hint=(
                    "The residual trends steadily: a drifting sensor (stage logger, flow meter), "
                    "a rating that changes slowly (weed growth, sedimentation) or a slowly "
                    "changing groundwater exchange."
                ),
                evidence=(
                    f"trend of {slope:+,.1f} m³/d per day over {days} d "
                    f"(Newey–West p = {p_value:.2g})",
                    f"{volume:+,.0f} m³ in the second half above the segment's mean level",
                ),
            )
        )
    return flags


def trend_test(y: np.ndarray) -> tuple[float, float] | None:
    """Slope (unit per step) and two-sided Newey–West p-value of a linear trend."""
    ok = np.isfinite(y)
    if ok.sum() < 10:
        return None
    import statsmodels.api as sm

    t = np.arange(y.size, dtype=float)[ok]
    n = int(ok.sum())
    lags = newey_west_lags(n)
    fit = sm.OLS(y[ok], sm.add_constant(t)).fit(cov_type="HAC", cov_kwds={"maxlags": lags})
    return float(fit.params[1]), float(fit.pvalues[1])


def norm_ppf(p: float) -> float:
    """Standard normal quantile of ``p`` (-)."""
    from scipy.special import ndtri as _ndtri  # standard normal quantile; lighter than scipy.stats

    return float(_ndtri(max(p, 1e-300)))
