"""The usual level of the residual: a robust straight line in stage, stepping at datum shifts."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class LevelDesign:
    """The regression behind a usual level, for the error of a departure from it.

    ``design`` (days × p) holds the regressors (NaN-free on the ``fit`` days), ``fit`` the days
    the level was fitted on and ``weight`` their weights (1 / scale², per m⁶).
    """

    design: np.ndarray
    fit: np.ndarray
    weight: np.ndarray

    def departure_weights(self, window: np.ndarray) -> np.ndarray:
        """Day weights ``w`` such that ``Σ_window (r − level) = Σ_d w_d r_d`` (-).

        ``w = 1_window − (1_windowᵀ X) (Xᵀ W X)⁻¹ Xᵀ W`` on the fit days, with W the weights:
        the fitted level of the window is a weighted mean of the fit days' residuals, so the
        errors they share (a bias held over the record, a rating error at the usual stages)
        partly cancel in the departure (weighted least squares; the Huber weights of the
        robust fit are near one away from the flagged runs).
        """
        win = np.asarray(window, dtype=float)
        x = np.where(self.fit[:, None], self.design, 0.0)
        xw = x * self.weight[:, None]
        gram = x.T @ xw
        row = np.nan_to_num(win @ np.nan_to_num(self.design))
        coef = np.linalg.lstsq(gram, row, rcond=None)[0]
        return win - xw @ coef


def usual_level(
    residual_m3: np.ndarray,
    stage_m: np.ndarray | None,
    scale_m3: np.ndarray,
    *,
    shifts: tuple[int, ...] = (),
) -> tuple[np.ndarray, str]:
    """The residual's usual level on each day: a robust straight line in stage (m³/d).

    Parameters
    ----------
    residual_m3 : ndarray
        Daily residual (m³/d) with flagged days set to NaN.
    stage_m : ndarray or None
        Daily stage (m); None gives a constant level.
    scale_m3 : ndarray
        Noise scale of each day (m³/d), used as weights.
    shifts : tuple of int
        Positions of gauge datum shifts found on the stage record; the level may step there.

    Returns
    -------
    level : ndarray
        Usual level (m³/d) of each day (NaN where the stage is missing).
    note : str
        The fitted line in words.

    Notes
    -----
    A lake that exchanges water with the ground shows a residual of about −k (h − h0) (see
    :mod:`lakebalance.seepage`), so the usual level is fitted as a + b (h − h̄) + Σ_j c_j 1[t ≥ t_j]
    by Huber's robust regression (Huber, 1981; statsmodels ``RLM``) of residual / scale on
    1 / scale, (h − h̄) / scale and the step indicators / scale. Departures from it, not from a
    constant, are what the run and shift detectors look for, so that slow stage-driven changes
    are not flagged. A step c_j at a datum shift t_j is the shift's aftermath: the outflow and
    area are computed from the shifted stage, so the residual changes level from that day on
    and stays there (common practice, no source); fitting it keeps the aftermath from passing
    for a level shift or from tilting the usual level of the rest of the record.
    """
    level, note, _, _ = usual_level_fit(residual_m3, stage_m, scale_m3, shifts)
    return level, note


def usual_level_fit(
    residual_m3: np.ndarray,
    stage_m: np.ndarray | None,
    scale_m3: np.ndarray,
    shifts: tuple[int, ...] = (),
    shapes: dict[int, np.ndarray] | None = None,
) -> tuple[np.ndarray, str, dict[int, float], LevelDesign]:
    """:func:`usual_level`, the fitted step (m³/d) at each datum shift position and the
    :class:`LevelDesign` of the fit.

    ``shapes`` gives, for a shift position, the regressor of its aftermath (m³/d, zero before
    it) used in place of the plain indicator; its fitted step is reported as the coefficient
    times the regressor's mean after the shift.
    """
    r = np.asarray(residual_m3, dtype=float)
    s = np.asarray(scale_m3, dtype=float)
    ok = np.isfinite(r) & np.isfinite(s) & (s > 0)
    h = None
    if stage_m is not None:
        h = np.asarray(stage_m, dtype=float)
        ok &= np.isfinite(h)
    if ok.sum() < 30:
        med = float(np.nanmedian(r)) if np.isfinite(r).any() else 0.0
        fit = np.isfinite(r)
        design = LevelDesign(np.ones((r.size, 1)), fit, np.where(fit, 1.0, 0.0))
        return np.full(r.shape, med), f"constant {med:,.0f} m³/d", {}, design
    import statsmodels.api as sm

    t = np.arange(r.size)
    # a step is fitted only with enough days on both sides of it
    steps = [
        int(j)
        for j in sorted(set(shifts))
        if (ok & (t < j)).sum() >= 30 and (ok & (t >= j)).sum() >= 30
    ]
    shapes = shapes or {}
    indicators = [
        np.asarray(shapes[j], dtype=float) if j in shapes else (t >= j).astype(float) for j in steps
    ]
    columns = [np.ones(r.size)]
    slope = h is not None and np.ptp(h[ok]) > 0
    h_mean = float(np.mean(h[ok])) if slope else 0.0
    if slope:
        columns.append(h - h_mean)
    columns += indicators
    design = np.column_stack(columns)
    fit = sm.RLM(r[ok] / s[ok], design[ok] / s[ok][:, None], M=sm.robust.norms.HuberT()).fit()
    params = np.asarray(fit.params, dtype=float)
    with np.errstate(invalid="ignore"):
        level = design @ params
    if not slope:
        level = np.where(np.isfinite(level), level, params[0])
    fitted_steps = {
        j: float(c) * (float(np.nanmean(x[t >= j])) if j in shapes else 1.0)
        for j, c, x in zip(steps, params[len(params) - len(steps) :], indicators)
    }
    note = f"{params[0]:,.0f}"
    if slope:
        note += f" {params[1]:+,.0f} (h − {h_mean:.2f} m)"
    if steps:
        note += "".join(f" {c:+,.0f} after a datum shift" for c in fitted_steps.values())
    weight = np.where(ok, 1.0 / np.where(ok, s, 1.0) ** 2, 0.0)
    return level, note + " m³/d", fitted_steps, LevelDesign(design, ok, weight)
