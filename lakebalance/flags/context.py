"""What every detector reads, worked out once from the daily balance: a frozen :class:`FlagContext`.

The context holds the residual (with the excluded days left out), its rolling median and noise
scale, the outliers, the stage record's daily steps and their robust z-scores, the gauged terms
used as evidence, the balance's uncertainty band and the corrections in force. Detectors read it
and never change it (its arrays are read-only).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields
from typing import TYPE_CHECKING

import numpy as np

from ..records import Correction
from ..units import MM_PER_M
from .options import FlagOptions
from .robust import noise_scale, quiet_nan_warnings, rolling_robust_z
from .stage import flow_adjusted_stage_change, gauged_net_flow, stage_step_anomaly

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from ..errormodel import ResidualErrors
    from .level import LevelDesign

#: Fewest days with a residual that the detectors work on (common practice, no source: a noise
#: scale and a rolling median need a handful of values).
MIN_RESIDUAL_DAYS = 10


@dataclass(frozen=True, eq=False)
class FlagContext:
    """The daily arrays and settings every detector reads (one value per day of the balance).

    Attributes
    ----------
    options : FlagOptions
        The thresholds.
    index : DatetimeIndex
        The days.
    residual_m3 : ndarray
        Residual (m³/d), NaN on the excluded days.
    median_m3 : ndarray
        Its centred rolling median over ``outlier_window`` days (m³/d).
    scale_m3 : ndarray
        Noise scale (1-σ) of each day's residual (m³/d), growing with the throughput.
    z : ndarray
        (residual − rolling median) / noise scale (-).
    noise_m3 : float
        Median of the noise scale (m³/d).
    outlier : ndarray of bool
        Days with |z| above ``outlier_threshold``.
    stage_m, area_m2 : ndarray or None
        Stage (m) and lake area (m²).
    inflow_m3, rain_m3, outflow_m3, evaporation_m3 : ndarray or None
        Gauged terms (m³/d), used as evidence.
    step_m : ndarray
        Daily stage step against the neighbouring days' change (m), with the change the gauged
        flows explain taken out where they are known; zero without a stage.
    step_z : ndarray or None
        Robust z-score of ``step_m`` (-); None without a stage.
    jump : ndarray of bool
        Days whose stage step is an outlier and that have a balance to confirm it.
    band_m3 : ndarray or None
        1-σ uncertainty of each day's residual from the balance's band (m³/d).
    band_source : str
        What the significance is measured against.
    corrections : tuple of Correction
        The site file's corrections in force.
    mean_area_m2 : float
        Mean lake area of the record (m²; NaN when unknown).
    errors : ResidualErrors or None
        The balance's error model (:mod:`lakebalance.errormodel`); when given, every
        significance is measured against it.
    """

    options: FlagOptions
    index: pd.DatetimeIndex
    residual_m3: np.ndarray
    median_m3: np.ndarray
    scale_m3: np.ndarray
    z: np.ndarray
    noise_m3: float
    outlier: np.ndarray
    stage_m: np.ndarray | None
    area_m2: np.ndarray | None
    inflow_m3: np.ndarray | None
    rain_m3: np.ndarray | None
    outflow_m3: np.ndarray | None
    evaporation_m3: np.ndarray | None
    step_m: np.ndarray
    step_z: np.ndarray | None
    jump: np.ndarray
    band_m3: np.ndarray | None
    band_source: str
    corrections: tuple[Correction, ...]
    mean_area_m2: float
    errors: ResidualErrors | None = None

    def __post_init__(self) -> None:
        # the daily arrays are kept as read-only views: a detector that wrote into one would
        # change what the detectors after it read (the caller's arrays stay writable)
        for f in fields(self):
            value = getattr(self, f.name)
            if isinstance(value, np.ndarray):
                view = value.view()
                view.flags.writeable = False
                object.__setattr__(self, f.name, view)

    @property
    def n(self) -> int:
        """Number of days."""
        return int(self.residual_m3.size)

    @property
    def resolution_m(self) -> float:
        """Gauge resolution (m) of the error model (0 without one)."""
        return float(self.errors.resolution_m) if self.errors is not None else 0.0

    def too_small_for_a_shift(self, step_m: float) -> bool:
        """A stage step smaller than twice the gauge resolution is not called a datum shift
        (the gauge cannot tell it from its own rounding; common practice, no source)."""
        return abs(step_m) < 2.0 * self.resolution_m

    @property
    def departure_m3(self) -> np.ndarray:
        """Residual minus its rolling median (m³/d)."""
        return self.residual_m3 - self.median_m3

    def iso(self, i: int) -> str:
        """ISO date of position ``i``."""
        import pandas as pd

        return pd.Timestamp(self.index[i]).date().isoformat()

    def depth_mm(self, volume: float, a: int, b: int) -> float:
        """``volume`` (m³) over the mean lake area of days ``a``..``b`` (mm; NaN without area)."""
        area = self.area_m2
        if area is None:
            return float("nan")
        with quiet_nan_warnings():
            ar = np.nanmean(area[a : b + 1])
        if not np.isfinite(ar) or ar <= 0:
            ar = self.mean_area_m2
        return float(volume / ar * MM_PER_M) if np.isfinite(ar) and ar > 0 else float("nan")

    def sigma_of(self, a: int, b: int, ratio: float) -> float:
        """1-σ uncertainty (m³) of the summed residual of days ``a``..``b``.

        From the error model when one was given (:meth:`ResidualErrors.sd_of_window`), else
        from the balance's band (days independent), else from the noise scale of the days with
        a residual times the square root of the long-run variance ratio ``ratio``.
        """
        if self.errors is not None:
            ok = np.isfinite(self.residual_m3[a : b + 1])
            if ok.any():
                w = np.zeros(self.n)
                w[a : b + 1] = ok
                sd = self.errors.sd_of_sum(w)
                if sd > 0:
                    return sd
        if self.band_m3 is not None:
            s = self.band_m3[a : b + 1]
            s = s[np.isfinite(s)]
            if s.size:
                return float(math.sqrt(np.sum(s**2)))
        ok = np.isfinite(self.residual_m3[a : b + 1])
        if not ok.any():
            return float(self.noise_m3 * math.sqrt(ratio))
        return float(math.sqrt(ratio * np.sum(self.scale_m3[a : b + 1][ok] ** 2)))

    def sigma_of_departure(
        self, a: int, b: int, valid: np.ndarray, design: LevelDesign | None, ratio: float
    ) -> float:
        """1-σ uncertainty (m³) of the summed departure from the usual level over ``a``..``b``.

        With an error model: the exact standard deviation of ``Σ_d w_d e_d``, the weights
        ``w`` of the departure (:meth:`LevelDesign.departure_weights`: the window's days minus
        their share of the fitted level), through every part of the model: the rating variants
        (the outflow of each day under each rating drawn from the fit), the persistent share of
        each term held over its period, the AR(1) day-to-day part, the area and the gauge
        resolution. Else :meth:`sigma_of`.
        """
        if self.errors is None or design is None:
            return self.sigma_of(a, b, ratio)
        win = np.zeros(self.n)
        win[a : b + 1] = np.asarray(valid, dtype=float)[a : b + 1]
        if not win.any():
            return self.sigma_of(a, b, ratio)
        sd = self.errors.sd_of_sum(design.departure_weights(win))
        return sd if sd > 0 else self.sigma_of(a, b, ratio)


def build_context(
    daily: pd.DataFrame,
    options: FlagOptions,
    *,
    sigma_m3: pd.Series | np.ndarray | None = None,
    corrections: tuple[Correction, ...] = (),
    exclude: pd.Series | np.ndarray | None = None,
    errors: ResidualErrors | None = None,
) -> FlagContext:
    """The :class:`FlagContext` of a daily balance (arguments as :func:`detect_flags`).

    Raises
    ------
    LakebalanceError
        The balance has no ``residual_m3`` column.
    FitError
        Fewer than :data:`MIN_RESIDUAL_DAYS` days have a residual.
    ValueError
        ``exclude`` or ``sigma_m3`` does not have one value per day.
    """
    if "residual_m3" not in daily.columns:
        from ..errors import LakebalanceError

        raise LakebalanceError("the daily balance has no 'residual_m3' column to flag")
    r = daily["residual_m3"].to_numpy(dtype=float).copy()
    n = r.size
    if exclude is not None:
        left_out = np.asarray(exclude, dtype=bool)
        if left_out.shape != r.shape:
            raise ValueError("exclude must have one value per day of the balance")
        r[left_out] = np.nan
    n_valid = int(np.isfinite(r).sum())
    if n_valid < MIN_RESIDUAL_DAYS:
        # Without residuals the noise scale has nothing to stand on and every stage step would
        # be "significant" against a placeholder noise of 1 m³/d.
        from ..errors import FitError

        raise FitError(
            f"only {n_valid} of {n} day(s) have a residual (at least {MIN_RESIDUAL_DAYS} needed "
            "to flag it): the record is too short, a term is missing on the other days, or a "
            "term's record does not overlap the stage record (see 'lakebalance check')"
        )
    stage = column(daily, "stage_m")
    area = column(daily, "area_m2")
    if errors is not None and errors.days != n:
        raise ValueError("errors must model one residual per day of the balance")
    if sigma_m3 is not None:
        band = np.asarray(sigma_m3, dtype=float)
        if band.shape != r.shape:
            raise ValueError("sigma_m3 must have one value per day of the balance")
        band_source = "balance uncertainty band"
    else:
        band = None
        band_source = "noise of the residual (no uncertainty band given)"
    if errors is not None:
        band_source = (
            "balance's error model (rating variants, persistent and day-to-day term "
            "errors, area, gauge resolution)"
        )
    mean_area = np.nanmean(area) if area is not None and np.isfinite(area).any() else float("nan")
    # noise scale of each day (for detection)
    _, med_r, _ = rolling_robust_z(r, options.outlier_window)
    dev0 = r - med_r
    throughput = term_throughput(daily)
    scale_m3 = noise_scale(dev0, throughput, window=3 * options.outlier_window)
    z_w = dev0 / scale_m3
    step, z_h, jump = _stage_steps(daily, r, throughput, options)
    return FlagContext(
        options=options,
        index=daily.index,
        residual_m3=r,
        median_m3=med_r,
        scale_m3=scale_m3,
        z=z_w,
        noise_m3=float(np.nanmedian(scale_m3)),
        outlier=np.abs(z_w) > options.outlier_threshold,
        stage_m=stage,
        area_m2=area,
        inflow_m3=column(daily, "inflow_m3"),
        rain_m3=column(daily, "rain_m3"),
        outflow_m3=column(daily, "outflow_m3"),
        evaporation_m3=column(daily, "evaporation_m3"),
        step_m=step,
        step_z=z_h,
        jump=jump,
        band_m3=band,
        band_source=band_source,
        corrections=tuple(corrections),
        mean_area_m2=mean_area,
        errors=errors,
    )


def _stage_steps(
    daily: pd.DataFrame, r: np.ndarray, throughput: np.ndarray | None, options: FlagOptions
) -> tuple[np.ndarray, np.ndarray | None, np.ndarray]:
    """Stage step of each day (m), its robust z (-) and the days of outlying steps (bool).

    The step is :func:`stage_step_anomaly` of the stage, or of the stage once the day's gauged
    flows are taken out (:func:`flow_adjusted_stage_change`) where they are known.
    """
    import pandas as pd

    stage = column(daily, "stage_m")
    area = column(daily, "area_m2")
    n = r.size
    if stage is None:
        return np.zeros(n), None, np.zeros(n, dtype=bool)
    net_flow = gauged_net_flow(daily)
    if net_flow is not None and area is not None:
        # steps the gauged flows explain (storms) are taken out before looking for steps
        # the area of a day with no balance is taken from the nearest day that has one
        area_near = pd.Series(area).ffill().bfill().to_numpy()
        adjusted = flow_adjusted_stage_change(stage, net_flow, area_near)
        step_adj = stage_step_anomaly(stage[0] + np.nancumsum(np.nan_to_num(adjusted)))
        step_adj = np.where(np.isfinite(adjusted), step_adj, np.nan)
    else:
        step_adj = None
    step = stage_step_anomaly(stage)
    z_h = step / noise_scale(step, throughput, window=3 * options.outlier_window)
    if step_adj is not None:
        # the step left once the day's gauged flows are taken out (a storm the gauges see
        # leaves none); its scale grows with the throughput, as the mid-day rule is rough
        # when the outflow bends sharply within a flood day
        z_adj = step_adj / noise_scale(step_adj, throughput, window=3 * options.outlier_window)
        use_adj = np.isfinite(z_adj)
        step = np.where(use_adj, step_adj, step)
        z_h = np.where(use_adj, z_adj, z_h)
    step = np.nan_to_num(step)
    # a step is judged by the balance of its own day: none there, nothing to confirm it
    jump = (np.abs(np.nan_to_num(z_h)) > options.outlier_threshold) & np.isfinite(r)
    return step, z_h, jump


def column(daily: pd.DataFrame, name: str) -> np.ndarray | None:
    """Column ``name`` of ``daily`` as floats, None when absent."""
    if name in daily.columns:
        return daily[name].to_numpy(dtype=float)
    return None


def term_throughput(daily: pd.DataFrame) -> np.ndarray | None:
    """Sum of the absolute gauged terms of each day (m³/d), plus its change from and to the
    neighbouring days; None when no term is known."""
    names = [
        c
        for c in daily.columns
        if c in ("inflow_m3", "rain_m3", "evaporation_m3", "outflow_m3", "withdrawal_m3")
        or c == "release_m3"
    ]
    if not names:
        return None
    values = np.abs(daily[names].to_numpy(dtype=float))
    # the terms known on a day (an unknown outflow on the last day must not hide its storm)
    g = np.where(np.isfinite(values).any(axis=1), np.nansum(values, axis=1), np.nan)
    # a day of rising or falling flows carries the timing errors of the day boundaries too
    change = np.abs(np.diff(g, prepend=np.nan))
    change_next = np.abs(np.diff(g, append=np.nan))
    return g + np.nan_to_num(change) + np.nan_to_num(change_next)
