"""The ensemble engine of the drawdown forecast: many members of one lake, day by day.

The state of each member is its stage ``h`` (m). Within a day the forcing is constant (daily means
of inflow, withdrawal demand, rain and evaporation), so that the stage follows the scalar,
autonomous equation

.. math::

    \\frac{dh}{dt} = g(h) = a + \\frac{I - D\\,r(h) - O_v(h)}{A(h)}

with ``a = (P - E)/86400`` the net vertical depth rate (m/s), ``I`` the inflow and ``D`` the
withdrawal demand (m³/s), ``r(h)`` the intake ramp (share of the demand the intake can still draw,
falling from 1 to 0 over ``ramp_m`` above the dead level), ``O_v(h)`` the losses that depend on
stage only (outlet rating of rating variant ``v`` with its spillway, minimum environmental release,
seepage) and ``A(h)`` the lake area.

The day is integrated in one step by *implicit exponential collocation*: the day-end stage ``c``
is the fixed point of "linearise ``g`` about ``c`` and solve the linear equation exactly over the
day from ``h0``",

.. math::

    c = c + (h_0 - c)\\,e^{J\\Delta t} + \\frac{e^{J\\Delta t} - 1}{J}\\,g(c), \\qquad J = g'(c).

It is exact when ``g`` is linear, second order in general, and for a stiff lake (response time
``1/|J|`` much shorter than the day) it returns the quasi-equilibrium ``g(c) = 0`` exactly, so that
the step is accurate for slow and stiff lakes alike. The fixed point is found by a few vectorised
iterations started from the exponential Euler step (linearisation about ``h0``); the iteration map's
derivative is proportional to ``g''`` (it vanishes for linear ``g``), so that it converges in two or
three iterations. Optionally the day is split into ``substeps`` equal parts.

Member-days whose error indicator exceeds the target (a path crossing an outlet sill or the intake
ramp, where ``g`` changes regime, or a stage near a power-law sill ``C (h - e)^b``, where ``g''``
grows as ``(h - e)^(b - 2)``) are Newton-corrected on the day's exact time equation
``integral_{h0}^{c} dh / g(h) = dt`` (:func:`_time_correction`: the singular part by the tangent
model in closed form, the bounded rest by Gauss-Legendre quadrature). The few that a correction
cannot settle are re-solved from the same time integral taken exactly on the grid with ``g``
linear between nodes (closed form per segment, a logarithm; infinite on the segment of an
equilibrium), all such members at once (:func:`_table_path`).

A gate release by calendar month and stage (:mod:`lakebalance.operations`) is a second table
with one row per month; restriction levels (monthly triggers, restore levels, lags) are stepped
by :class:`lakebalance.operations.RestrictionState` on each day's start stage.

All stage-dependent terms are read from dense tables on a uniform stage grid (an integer index, no
search), linearly interpolated, so that the cost per evaluation does not depend on the law.

References
----------
Hochbruck, M. & Ostermann, A. (2010). Exponential integrators. Acta Numerica 19, 209-286
(exponential Euler and Rosenbrock-type methods, sections 2.2 and 2.4).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np

from ..operations import RestrictionLevel, RestrictionState
from ..stats import gauss_legendre

__all__ = ["LakeTables", "EngineResult", "build_tables", "simulate", "crossing_fraction"]

SECONDS_PER_DAY = 86400.0  # s


@dataclass(frozen=True)
class LakeTables:
    """Dense uniform-grid tables of one lake (stage grid ``stage0_m + i * step_m``).

    ``outflow_m3s`` has one row per rating variant: outlet discharge plus minimum environmental
    release plus seepage (m³/s). ``area_m2`` is the lake area (m²). Slopes are per cell (value of
    cell ``i+1`` minus cell ``i``).
    """

    stage0_m: float
    step_m: float
    area_m2: np.ndarray
    outflow_m3s: np.ndarray  # (variants, grid)
    floor_m: float  # dead level: withdrawals and environmental release stop below it
    bottom_m: float  # empty lake: the stage never goes below
    ramp_m: float  # intake ramp height above the floor (m)
    _inv_area: np.ndarray = field(repr=False, default=None)  # type: ignore[assignment]
    _inv_area_slope: np.ndarray = field(repr=False, default=None)  # type: ignore[assignment]
    _outflow_flat: np.ndarray = field(repr=False, default=None)  # type: ignore[assignment]
    _outflow_slope: np.ndarray = field(repr=False, default=None)  # type: ignore[assignment]
    #: (12, grid) gate release by calendar month (m³/s; zero below the dead level), or None
    release_m3s: np.ndarray | None = None
    #: (variants,) stage where each outlet row starts to flow (its sill: the law's kink), or NaN
    onset_m: np.ndarray | None = None
    _release_flat: np.ndarray | None = field(repr=False, default=None)
    _release_slope: np.ndarray | None = field(repr=False, default=None)

    @property
    def size(self) -> int:
        """Number of grid nodes."""
        return int(self.area_m2.shape[-1])

    @property
    def variants(self) -> int:
        """Number of rating variants (rows of ``outflow_m3s``)."""
        return int(self.outflow_m3s.shape[0])

    @property
    def top_m(self) -> float:
        """Highest stage of the grid (m); above it the last cell is extrapolated."""
        return self.stage0_m + (self.size - 1) * self.step_m

    def stage_grid(self) -> np.ndarray:
        """The grid stages (m)."""
        return self.stage0_m + self.step_m * np.arange(self.size)


def build_tables(
    area: Callable[[np.ndarray], np.ndarray],
    outflow: Callable[[np.ndarray], np.ndarray] | Sequence[Callable[[np.ndarray], np.ndarray]],
    *,
    stage_min_m: float,
    stage_max_m: float,
    seepage: Callable[[np.ndarray], np.ndarray] | None = None,
    environmental_release_m3s: float = 0.0,
    floor_m: float | None = None,
    ramp_m: float = 0.01,
    step_m: float | None = None,
    min_area_m2: float | None = None,
    gate_release: Callable[[np.ndarray], np.ndarray] | None = None,
) -> LakeTables:
    """Sample a lake's stage-dependent terms onto a dense uniform stage grid.

    Parameters
    ----------
    area : callable
        Lake area (m²) of an array of stages (m), vectorised.
    outflow : callable or sequence of callables
        Outlet discharge (m³/s, spillway included) of an array of stages (m). A sequence gives one
        rating variant per callable. A callable returning a 2-D array ``(variants, n)`` from a
        1-D stage array also gives variants.
    stage_min_m, stage_max_m : float
        Stage range of the grid (m). ``stage_min_m`` is the empty lake.
    seepage : callable, optional
        Net loss to groundwater (m³/s, positive leaving the lake) of an array of stages (m).
    environmental_release_m3s : float
        Minimum flow kept downstream while the stage is above the dead level (m³/s): when the outlet
        gives less, the difference is released.
    floor_m : float, optional
        Dead level (m): withdrawals and the environmental release stop below it. Default: the
        empty lake.
    ramp_m : float
        Height over which the intake ramps from nothing (at ``floor_m``) to full draw (m).
    step_m : float, optional
        Grid spacing (m); default 1 mm, coarsened to keep at most 2**16 nodes.
    min_area_m2 : float, optional
        Smallest area used in ``1/A`` near the empty lake (m²); default 1e-6 of the largest area.
    gate_release : callable, optional
        Stage array (n,) -> (12, n) gate release (m³/s) in each calendar month, e.g.
        :meth:`lakebalance.operations.OperatingRules.gate_release_by_month` (which already keeps
        the environmental minimum: pass ``environmental_release_m3s=0`` with it). The release
        stops at the dead level like the withdrawals (the intake ramp).

    Returns
    -------
    LakeTables
    """
    if not stage_max_m > stage_min_m:
        raise ValueError("stage_max_m must be above stage_min_m")
    span = stage_max_m - stage_min_m
    if step_m is None:
        step_m = max(0.001, span / 65535.0)
    n = int(np.ceil(span / step_m)) + 1
    grid = stage_min_m + step_m * np.arange(n)
    a = np.asarray(area(grid), dtype=float).reshape(n)
    if min_area_m2 is None:
        min_area_m2 = max(float(np.nanmax(a)) * 1e-6, 1e-9)
    a = np.maximum(a, min_area_m2)
    if callable(outflow):
        q = np.asarray(outflow(grid), dtype=float)
        q = q.reshape(1, n) if q.ndim == 1 else q.reshape(-1, n)
    else:
        q = np.stack([np.asarray(f(grid), dtype=float).reshape(n) for f in outflow])
    q = np.nan_to_num(q, nan=0.0)
    onset = _outlet_onsets(q, grid)
    floor = stage_min_m if floor_m is None else float(floor_m)
    ramp = np.clip((grid - floor) / ramp_m, 0.0, 1.0) if ramp_m > 0 else (grid > floor) * 1.0
    if environmental_release_m3s > 0:
        q = np.maximum(q, environmental_release_m3s * ramp)
    if seepage is not None:  # a callable may give one law (n,) or sampled variants (variants, n)
        q = q + np.asarray(seepage(grid), dtype=float).reshape(-1, n)
    rel = rel_flat = rel_slope = None
    if gate_release is not None:
        rel = np.asarray(gate_release(grid), dtype=float).reshape(12, n) * ramp[None, :]
        rel_slope = np.concatenate([np.diff(rel, axis=1), np.zeros((12, 1))], axis=1).ravel()
        rel_flat = np.ascontiguousarray(rel).ravel()
    inv = 1.0 / a
    inv_slope = np.append(np.diff(inv), 0.0)
    q_slope = np.concatenate([np.diff(q, axis=1), np.zeros((q.shape[0], 1))], axis=1)
    return LakeTables(
        stage0_m=float(stage_min_m),
        step_m=float(step_m),
        area_m2=a,
        outflow_m3s=q,
        floor_m=floor,
        bottom_m=float(stage_min_m),
        ramp_m=float(ramp_m),
        _inv_area=inv,
        _inv_area_slope=inv_slope,
        _outflow_flat=np.ascontiguousarray(q).ravel(),
        _outflow_slope=np.ascontiguousarray(q_slope).ravel(),
        release_m3s=rel,
        onset_m=onset,
        _release_flat=rel_flat,
        _release_slope=rel_slope,
    )


def _outlet_onsets(q: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """(variants,) the highest grid stage where an outlet row goes from no flow to flow (the
    sill, where a power law ``C (h - e)^b`` has its kink), NaN for a row that never starts."""
    starts = (q[:, :-1] <= 0.0) & (q[:, 1:] > 0.0)
    last = np.where(
        starts.any(axis=1), starts.shape[1] - 1 - np.argmax(starts[:, ::-1], axis=1), -1
    )
    return np.where(last >= 0, grid[np.maximum(last, 0)], np.nan)


@dataclass(frozen=True)
class EngineResult:
    """Raw engine output. ``stage_m`` is (days + 1, members): the start and each day's end.

    ``withdrawal_m3s`` (days, members) is the mean withdrawal plus release drawn each day (after the
    restriction cut and the intake ramp), ``cut`` (days, members) the restriction share in force,
    ``crossing_day`` maps each level name to (members,) fractional days from the start to the first
    crossing (NaN: not crossed within the horizon).
    """

    stage_m: np.ndarray
    withdrawal_m3s: np.ndarray
    cut: np.ndarray
    crossing_day: dict[str, np.ndarray]
    refined_member_days: int = 0  # member-days re-solved from the exact path on the grid
    corrected_member_days: int = 0  # rough member-days Newton-corrected on the time equation


class _Eval:
    """g(h) and g'(h) from the tables, vectorised over members."""

    def __init__(self, t: LakeTables, variant: np.ndarray) -> None:
        self.lo = t.stage0_m
        self.inv_step = 1.0 / t.step_m
        self.step_m = t.step_m
        self.nmax = t.size - 2
        variant = np.asarray(variant, dtype=np.intp)
        # None: every member reads row 0 (no offset to add)
        self.offset = variant * t.size if variant.any() else None
        self.members = variant.size
        onset = t.onset_m if t.onset_m is not None else np.full(t.variants, np.nan)
        self.kink = onset[variant] if onset.size else np.full(variant.size, np.nan)
        self.inv = t._inv_area
        self.inv_s = t._inv_area_slope
        self.q = t._outflow_flat
        self.q_s = t._outflow_slope
        self.floor = t.floor_m
        # candidates of the fixed-point map are kept within one grid span of the grid
        self.keep_lo = t.stage0_m - (t.size - 1) * t.step_m
        self.keep_hi = t.stage0_m + 2.0 * (t.size - 1) * t.step_m
        self.inv_ramp = 1.0 / t.ramp_m if t.ramp_m > 0 else 0.0
        self.full_draw_m = t.floor_m + t.ramp_m  # the intake draws in full from here up
        self.bottom_m = t.bottom_m
        self.rel, self.rel_s = t._release_flat, t._release_slope
        self.rel_off = 0  # calendar month's row of the gate release (month index * grid size)
        self.size = t.size

    def subset(self, idx: np.ndarray) -> _Eval:
        """The same evaluator for the members ``idx``."""
        new = object.__new__(_Eval)
        new.__dict__.update(self.__dict__)
        new.offset = self.offset[idx] if self.offset is not None else None
        new.kink = self.kink[idx]
        return new

    def draw(self, h: np.ndarray, demand: np.ndarray) -> np.ndarray:
        """Withdrawal drawn at stages ``h`` (m³/s): the demand times the intake ramp."""
        if self.inv_ramp:
            return demand * np.clip((h - self.floor) * self.inv_ramp, 0.0, 1.0)
        return demand * (h > self.floor)

    def __call__(
        self, h: np.ndarray, a: np.ndarray, inflow: np.ndarray, demand: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        u = (h - self.lo) * self.inv_step
        i = u.astype(np.intp)
        np.maximum(i, 0, out=i)
        np.minimum(i, self.nmax, out=i)
        u -= i
        j = i + self.offset if self.offset is not None else i
        qs = self.q_s[j]
        q = self.q[j]
        q += u * qs
        if self.rel is not None:
            k = i + self.rel_off
            rs = self.rel_s[k]
            q += self.rel[k]
            q += u * rs
            qs += rs
        ias = self.inv_s[i]
        ia = self.inv[i]
        ia += u * ias
        ddraw = None
        if self.inv_ramp and h.size and h.min() >= self.full_draw_m:
            draw = np.array(demand, dtype=float)  # every member at full draw (a copy)
        elif self.inv_ramp:
            rr = (h - self.floor) * self.inv_ramp
            inside = (rr > 0.0) & (rr < 1.0)
            np.maximum(rr, 0.0, out=rr)
            np.minimum(rr, 1.0, out=rr)
            draw = demand * rr
            ddraw = demand * (inside * self.inv_ramp)
        else:
            draw = demand * (h > self.floor)
        net = inflow - draw
        net -= q
        g = net * ia
        g += a
        net *= ias
        qs *= ia
        net -= qs
        net *= self.inv_step
        if ddraw is not None:
            ddraw *= ia
            net -= ddraw
        return g, net, draw


def _pick(x: np.ndarray | float, idx: np.ndarray) -> np.ndarray | float:
    return x[idx] if isinstance(x, np.ndarray) and x.ndim else x


def _update(
    ev: _Eval,
    h0: np.ndarray,
    c: np.ndarray,
    a: np.ndarray,
    inflow: np.ndarray,
    demand: np.ndarray,
    dt: float | np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The fixed-point map at ``c``: the exact solution over ``dt`` of the equation linearised
    about ``c``.

    Returns (new stage, linear model at ``h0`` i.e. ``g(c) + g'(c)(h0 - c)``, draw at ``c``,
    weight ``E phi`` of the remainder ``g(h0)`` minus that linear model, ``z = g'(c) dt``).
    """
    g, dg, draw = ev(c, a, inflow, demand)
    z = dg * dt
    np.maximum(z, -700.0, out=z)
    np.minimum(z, 50.0, out=z)
    small = np.abs(z) < 1e-10
    phi = np.where(small, dt, np.expm1(z) / np.where(small, 1.0, dg))
    e = np.exp(z)
    new = c + (h0 - c) * e + phi * g
    np.maximum(new, ev.keep_lo, out=new)  # no runaway of an unstable iteration
    np.minimum(new, ev.keep_hi, out=new)
    # E phi weights the remainder by how long the path stays away from c: ~dt for a slow lake,
    # ~0 for a stiff one that reaches c early in the step.
    weight = e * phi
    return new, g + dg * (h0 - c), draw, weight, z


def _settle(
    ev: _Eval,
    state: list[np.ndarray],
    idx: np.ndarray,
    h0: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float | np.ndarray,
    tol_m: float,
    span_m: float,
) -> np.ndarray | None:
    """Go on with plain fixed-point iterations for the members ``idx`` still moving.

    ``state`` is ``[c, lin0, draw, weight, z]`` (updated in place). Returns the members that do
    not settle within six more iterations (None when all do); their stage is kept within the
    grid's span of ``h0``.
    """
    a, inflow, demand = forcing
    sub = ev.subset(idx)
    h0_b, a_b, in_b, dem_b, dt_b = h0[idx], a[idx], inflow[idx], demand[idx], _pick(dt, idx)
    c_b = state[0][idx]
    for _ in range(SETTLE_ITERATIONS):
        new, lin_b, draw_b, w_b, z_b = _update(sub, h0_b, c_b, a_b, in_b, dem_b, dt_b)
        moved = np.abs(new - c_b)
        c_b = new
        for arr, val in zip(state, (c_b, lin_b, draw_b, w_b, z_b)):
            arr[idx] = val
        keep = ~(moved <= tol_m)
        if not keep.any():
            return None
        k = np.flatnonzero(keep)
        idx, sub = idx[keep], sub.subset(k)
        h0_b, a_b, in_b, dem_b = h0_b[keep], a_b[keep], in_b[keep], dem_b[keep]
        dt_b, c_b = _pick(dt_b, k), c_b[keep]
    state[0][idx] = np.clip(np.nan_to_num(c_b, nan=0.0) - h0_b, -span_m, span_m) + h0_b
    return idx


def _step_error(
    ev: _Eval,
    h0: np.ndarray,
    c: np.ndarray,
    g0: np.ndarray,
    lin0: np.ndarray,
    weight: np.ndarray,
    zc: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    *,
    dt: float | np.ndarray,
    err_m: float,
) -> np.ndarray:
    """Error estimate (m) of the collocation step from ``h0`` to ``c``.

    The remainder ``|g(h0) - (g(c) + g'(c)(h0 - c))|`` of the linear model falls off as the
    square of the distance to ``c`` along the path, so a third of it, weighted by ``E phi`` (how
    long the path stays away from ``c``), is the first estimate. A path that starts much slower
    than the linear model (rising from a slow regime into a stiff one) arrives late and has not
    relaxed by the end: the second estimate is the move times the relative remainder, damped by
    the relaxation left after the arrival time estimated from the speeds at ``h0`` and halfway
    (harmonic mean: a path that slows on the way, at the intake ramp or a sill, arrives late).
    Only the comparison with ``err_m`` matters to the caller, so the second estimate is worked
    out only where its bound does not decide it: estimates at or below ``err_m`` stay below it.
    """
    rem = np.abs(g0 - lin0)
    est = rem * weight / 3.0
    move = np.abs(c - h0)
    speed = np.abs(g0) + np.abs(lin0) + 1e-300
    # the damping factor is at most exp(max(z, 0)): only members that this bound does not
    # settle either way need the speed halfway (one evaluation on a few members)
    bound = move * (rem / speed) * np.exp(np.clip(zc, 0.0, 50.0))
    need = np.flatnonzero((est <= err_m) & (bound > err_m))
    out = np.maximum(est, np.minimum(bound, err_m))
    if need.size:
        sub = ev.subset(need)
        h0_n, c_n, g0_n, move_n = h0[need], c[need], g0[need], move[need]
        gm, _, _ = sub(0.5 * (h0_n + c_n), *(x[need] for x in forcing))
        with np.errstate(divide="ignore", invalid="ignore"):
            arrive = 0.5 * move_n * (1.0 / np.abs(g0_n) + 1.0 / np.abs(gm))
            late = np.fmax(1.0 - arrive / _pick(dt, need), 0.0)  # not moving: 0 (not NaN)
        second = move_n * (rem[need] / speed[need]) * np.exp(np.maximum(zc[need], -700.0) * late)
        out[need] = np.maximum(est[need], second)
    return out


#: Most plain iterations of the collocation step run on all members of a day, and the share of
#: members still moving below which the rest iterate alone (a subset costs about one more
#: evaluation's worth of copying, so iterating all is cheaper while many move).
FULL_ITERATIONS = 6
MOVING_SHARE = 0.3
#: Plain iterations for the few members still moving; those still moving after them are
#: Newton-corrected on the time equation (faster where the fixed-point map contracts slowly,
#: as it does where g bends sharply).
SETTLE_ITERATIONS = 2


def _day_step(
    ev: _Eval,
    h0: np.ndarray,
    a: np.ndarray,
    inflow: np.ndarray,
    demand: np.ndarray,
    dt: float | np.ndarray,
    *,
    iterations: int,
    tol_m: float,
    span_m: float,
    err_m: float,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """One implicit exponential collocation step of length ``dt`` (s).

    Returns (stage, draw, error estimate in m, ``g(h0)``). At least ``iterations`` plain fixed-point
    iterations run on all members after the exponential Euler start, more while over
    :data:`MOVING_SHARE` of the members still move by more than ``tol_m``; the members still
    moving then go on alone (:func:`_settle`); those that do not settle get an infinite
    estimate, so that the caller corrects them. The estimate is :func:`_step_error`.
    """
    c, g0, draw, weight, zc = _update(ev, h0, h0, a, inflow, demand, dt)
    lin0 = g0
    prev = h0
    for k in range(FULL_ITERATIONS):
        prev = c
        c, lin0, draw, weight, zc = _update(ev, h0, c, a, inflow, demand, dt)
        bad = ~(np.abs(c - prev) <= tol_m)
        # all members iterate while many still move; the few left go on alone (_settle)
        if k + 1 >= iterations and np.count_nonzero(bad) <= MOVING_SHARE * bad.size:
            break
    unsettled = None
    if bad.any():
        state = [c.copy(), lin0.copy(), draw.copy(), weight.copy(), zc.copy()]
        unsettled = _settle(
            ev, state, np.flatnonzero(bad), h0, (a, inflow, demand), dt, tol_m, span_m
        )
        c, lin0, draw, weight, zc = state
    est = _step_error(ev, h0, c, g0, lin0, weight, zc, (a, inflow, demand), dt=dt, err_m=err_m)
    if unsettled is not None:
        est[unsettled] = np.inf
    return c, draw, est, g0


#: Gauss-Legendre nodes of the correction's quadrature (:func:`_time_correction`).
TIME_NODES = 3
#: Speed at the day's end, times the day, below which share of the day's move the correction
#: leaves a member to the grid path (a path ending at a quasi-equilibrium, see above).
EQUILIBRIUM_SHARE = 0.05


def _remainder(
    ev: _Eval,
    p: np.ndarray,
    q: np.ndarray,
    g: np.ndarray,
    dg: np.ndarray,
    c: np.ndarray,
    g0: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    *,
    panels: int = 1,
) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre integral over ``[p, q]`` (``panels`` equal parts) of ``(l - g) / (g l)``,
    ``l(s) = g + dg (s - c)``, and whether ``g`` keeps the sign of ``g0`` at every node."""
    nodes, weights = gauss_legendre(TIME_NODES)
    width = (q - p) / panels
    half = 0.5 * width
    rest = np.zeros_like(p)
    ok = np.ones(p.shape, dtype=bool)
    for k in range(panels):
        mid = p + (k + 0.5) * width
        for xi, wi in zip(nodes, weights):
            s = mid + half * xi
            gs, _, _ = ev(s, *forcing)
            ok &= gs * g0 > 0.0
            ls = g + dg * (s - c)
            rest += wi * (ls - gs) / (gs * ls)
    return rest * half, ok


def _time_correction(
    ev: _Eval,
    h0: np.ndarray,
    g0: np.ndarray,
    c: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float,
    panels: int = 1,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """One Newton step on the exact time equation ``T(c) = dt`` of the day's path.

    Within a day the forcing is constant, so the path from ``h0`` is monotone and reaches ``c``
    after ``T(c) = integral_{h0}^{c} ds / g(s)``. The integrand is singular at an equilibrium;
    its singular part is taken by the tangent model ``l(s) = g(c) + g'(c)(s - c)``, whose time is
    closed-form, and the rest by Gauss-Legendre quadrature,

    .. math::

        T(c) = \\frac{1}{g'(c)} \\ln\\frac{g(c)}{l(h_0)}
             + \\int_{h_0}^{c} \\frac{l(s) - g(s)}{g(s)\\,l(s)}\\,ds,

    whose integrand stays bounded (``-g''/(2 g'^2)``) as ``g(c)`` tends to zero. Newton's step on
    ``T`` (``dT/dc = 1/g(c)``) is ``c + (dt - T(c)) g(c)``; it vanishes at an equilibrium, where
    the collocation step is already exact. This removes the error of the linear model where
    ``g`` bends sharply, as a power-law outlet ``C (h - e)^b`` does near its sill (``g''`` grows
    as ``(h - e)^(b - 2)``), at a cost of ``TIME_NODES + 1`` evaluations.

    ``g0`` is ``g(h0)``. Returns (new stage, size of the step in m, ``ok``): ``ok`` is False
    where the correction cannot be trusted (``g`` changes sign on ``[h0, c]``, i.e. ``c`` lies
    beyond an equilibrium, or the linear model has no path to ``c``).
    """
    g, dg, _ = ev(c, *forcing)
    x = dg * (h0 - c) / np.where(g != 0.0, g, 1.0)  # l(h0) / g(c) - 1
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        t_lin = np.where(
            np.abs(x) < 1e-8,
            (c - h0) / g * (1.0 - 0.5 * x),
            -np.log1p(x) / np.where(dg != 0.0, dg, 1.0),
        )
        ok = (x > -1.0) & (g * g0 > 0.0) & np.isfinite(t_lin)
        # at a quasi-equilibrium (speed at c far below the day's mean speed) Newton's step
        # (dt - T) g(c) is small whatever T is, so it cannot tell a late arrival: not trusted
        ok &= np.abs(g) * dt >= EQUILIBRIUM_SHARE * np.abs(c - h0)
        # the remainder's integrand has a kink at the outlet's sill: split the quadrature there
        lo, hi = np.minimum(h0, c), np.maximum(h0, c)
        inside = (ev.kink > lo) & (ev.kink < hi)
        split = np.where(inside, ev.kink, c)
        rest, good = _remainder(ev, h0, split, g, dg, c, g0, forcing, panels=panels)
        ok &= good
        two = np.flatnonzero(inside)
        if two.size:
            sub = ev.subset(two)
            f2 = tuple(v[two] for v in forcing)
            r2, good2 = _remainder(
                sub, split[two], c[two], g[two], dg[two], c[two], g0[two], f2, panels=panels
            )
            rest[two] += r2
            ok[two] &= good2
        step = (dt - t_lin - rest) * g
    ok &= np.isfinite(step)
    step = np.where(ok, step, 0.0)
    return c + step, np.abs(step), ok


def _correct(
    ev: _Eval,
    h0: np.ndarray,
    g0: np.ndarray,
    c: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float,
    err_m: float,
    rounds: int = 3,
) -> tuple[np.ndarray, np.ndarray]:
    """Newton-correct the day-end stage of rough members (:func:`_time_correction`).

    A member is accepted when a correction moved it by at most ``err_m`` (Newton converges
    quadratically, so its remaining error is well below the last step). Returns (stage, members
    not accepted within ``rounds`` corrections or not correctable: indices into ``h0``).
    """
    out_h = c.copy()
    failed = []
    todo = np.arange(h0.size)
    sub, f, h0_t, g0_t, c_t = ev, forcing, h0, g0, c
    for _ in range(rounds):
        new, moved, ok = _time_correction(sub, h0_t, g0_t, c_t, f, dt)
        out_h[todo] = new
        failed.append(todo[~ok])
        k = np.flatnonzero(ok & (moved > err_m))
        todo = todo[k]
        if k.size == 0:
            break
        sub, f = sub.subset(k), tuple(x[k] for x in f)
        h0_t, g0_t, c_t = h0_t[k], g0_t[k], new[k]
    failed.append(todo)  # still moving after the last round
    return out_h, np.concatenate(failed)


@dataclass
class _Walk:
    """State of the grid walk of :func:`_table_path` (one entry per member of the day)."""

    s: np.ndarray  # direction of the path (+1 rising, -1 falling)
    node: np.ndarray  # next grid node (index, as float)
    p: np.ndarray  # stage where the walk stands (m)
    gp: np.ndarray  # g there (m/s)
    dp: np.ndarray  # draw there (m³/s)
    elapsed: np.ndarray  # time walked (s)
    drawn: np.ndarray  # draw integrated over the time walked (m³)
    h1: np.ndarray  # day-end stage of the members done (m)
    mean_draw: np.ndarray  # mean draw over the day of the members done (m³/s)


def _segments(
    ev: _Eval,
    w: _Walk,
    active: np.ndarray,
    chunk: int,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The next ``chunk`` grid nodes of the members ``active``: (stages with the start point
    first, g there, draw there, time across each segment; infinite where g changes sign)."""
    a, inflow, demand = forcing
    m = active.size
    j = np.arange(chunk, dtype=float)
    x = ev.lo + (w.node[active, None] + w.s[active, None] * j) * ev.step_m  # (m, chunk)
    rep = np.repeat(active, chunk)
    gx, _, dx = ev.subset(rep)(x.ravel(), a[rep], inflow[rep], demand[rep])
    pts = np.concatenate([w.p[active, None], x], axis=1)
    gs = np.concatenate([w.gp[active, None], gx.reshape(m, chunk)], axis=1)
    ds = np.concatenate([w.dp[active, None], dx.reshape(m, chunk)], axis=1)
    delta = np.diff(pts, axis=1)
    ga, gb = gs[:, :-1], gs[:, 1:]
    through = w.s[active, None] * gb > 0.0  # no equilibrium on the segment
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(through, gb / ga - 1.0, 0.0)
        lr = np.where(np.abs(r) < 1e-8, 1.0 - 0.5 * r, np.log1p(r) / r)
        t_seg = np.where(through, delta / ga * lr, np.inf)
    return pts, gs, ds, t_seg


def _end_in_segment(
    ev: _Eval,
    w: _Walk,
    ids: np.ndarray,
    seg: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray],
    cum: np.ndarray,
    first: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float,
) -> None:
    """Finish the members ``ids`` whose day ends on segment ``first`` of this chunk: the
    position a time ``tau`` into a segment where g is linear is
    ``p + g_p tau (e^{k tau} - 1)/(k tau)``; the draw is a trapezoid on each segment."""
    pts, gs, ds, t_seg = seg
    f = first
    rows = np.arange(ids.size)
    before = np.where(f > 0, cum[rows, f - 1], w.elapsed[ids])
    tau = dt - before
    pa, pb = pts[rows, f], pts[rows, f + 1]
    g_a, g_b = gs[rows, f], gs[rows, f + 1]
    width = pb - pa
    k = np.where(width != 0.0, (g_b - g_a) / np.where(width != 0.0, width, 1.0), 0.0)
    z = np.clip(k * tau, -700.0, 700.0)
    small = np.abs(z) < 1e-10
    phi = np.where(small, 1.0 + 0.5 * z, np.expm1(z) / np.where(small, 1.0, z))
    end = pa + g_a * tau * phi
    end = np.clip(end, np.minimum(pa, pb), np.maximum(pa, pb))
    end = np.maximum(end, ev.bottom_m)  # stopped at the empty lake
    finite = np.isfinite(t_seg)
    seg_draw = np.where(finite, 0.5 * (ds[:, :-1] + ds[:, 1:]), 0.0)
    seg_t = np.where(finite, t_seg, 0.0)
    upto = np.arange(t_seg.shape[1])[None, :] < f[:, None]
    part = (seg_draw * seg_t * upto).sum(axis=1)
    _, _, d_end = ev.subset(ids)(end, *(x[ids] for x in forcing))
    part += tau * 0.5 * (ds[rows, f] + d_end)
    w.h1[ids] = end
    w.mean_draw[ids] = (w.drawn[ids] + part) / dt


def _advance(
    ev: _Eval,
    w: _Walk,
    ids: np.ndarray,
    seg: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray],
    cum: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float,
    top_m: float,
) -> np.ndarray:
    """Move the members ``ids`` (not done within this chunk) to the chunk's last node; stop
    those below the empty lake or far above the grid. Returns the members still walking."""
    pts, gs, ds, t_seg = seg
    chunk = t_seg.shape[1]
    w.drawn[ids] += (0.5 * (ds[:, :-1] + ds[:, 1:]) * t_seg).sum(axis=1)
    w.elapsed[ids] = cum[:, -1]
    w.p[ids], w.gp[ids], w.dp[ids] = pts[:, -1], gs[:, -1], ds[:, -1]
    w.node[ids] += w.s[ids] * chunk
    out = (w.p[ids] <= ev.bottom_m) | (w.p[ids] >= top_m)
    if out.any():
        o = ids[out]
        w.h1[o] = np.maximum(w.p[o], ev.bottom_m)
        _, _, d_o = ev.subset(o)(w.h1[o], *(x[o] for x in forcing))
        w.mean_draw[o] = (w.drawn[o] + (dt - w.elapsed[o]) * d_o) / dt
        ids = ids[~out]
    return ids


def _table_path(
    ev: _Eval,
    h0: np.ndarray,
    a: np.ndarray,
    inflow: np.ndarray,
    demand: np.ndarray,
    dt: float,
    guess: np.ndarray,
    *,
    bottom_m: float,
    span_m: float,
    max_chunks: int = 24,
) -> tuple[np.ndarray, np.ndarray]:
    """Day-end stage of the exact path on the stage grid: ``g`` linear between grid nodes.

    Within a day the forcing is constant, so the path is monotone and its time from ``h0`` to
    ``h`` is ``T(h) = integral ds / g(s)``. With ``g`` linear on a segment ``[p, q]`` (the tables'
    own resolution: grid nodes, and ``h0`` itself) the time across it is exact,

    .. math::

        t_{pq} = (q - p)\\,\\frac{\\ln(g_q / g_p)}{g_q - g_p},

    infinite when ``g`` changes sign on it (the day's equilibrium). The segment times are summed
    node by node (:func:`_segments`, in chunks that double in length, all members at once) until
    they reach ``dt`` (:func:`_end_in_segment`); no step-size control, no singular quadrature
    near the equilibrium. The cost grows with the cells crossed, so the engine keeps it for the
    few member-days the Newton correction cannot settle. ``bottom_m`` is kept for callers; the
    evaluator's own empty-lake level is used.

    Returns (stage, mean draw over the day).
    """
    forcing = (a, inflow, demand)
    g0, _, d0 = ev(h0, *forcing)
    s = np.where(g0 > 0.0, 1.0, -1.0)
    u0 = (h0 - ev.lo) * ev.inv_step
    w = _Walk(
        s=s,
        node=np.where(s > 0.0, np.floor(u0) + 1.0, np.ceil(u0) - 1.0),
        p=h0.copy(),
        gp=g0.copy(),
        dp=d0.copy(),
        elapsed=np.zeros(h0.size),
        drawn=np.zeros(h0.size),
        h1=h0.copy(),
        mean_draw=d0.copy(),
    )
    active = np.flatnonzero(g0 != 0.0)
    # first chunk: the cells to the one-step estimate, with a margin
    cells = np.abs(guess - h0) * ev.inv_step * 1.25 + 8.0
    chunk = int(min(max(np.max(cells[active]) if active.size else 8.0, 8.0), 65536.0))
    budget = 1 << 20  # nodes evaluated per chunk over all members (memory)
    top = ev.lo + span_m + (ev.nmax + 1) * ev.step_m
    for _ in range(max_chunks):
        if active.size == 0:
            break
        chunk = max(8, min(chunk, budget // active.size))
        seg = _segments(ev, w, active, chunk, forcing)
        cum = w.elapsed[active, None] + np.cumsum(seg[3], axis=1)
        reach = cum >= dt
        hit = reach.any(axis=1)
        if hit.any():
            sel = np.flatnonzero(hit)
            part = tuple(x[sel] for x in seg)
            _end_in_segment(
                ev, w, active[sel], part, cum[sel], np.argmax(reach[sel], axis=1), forcing, dt
            )
        go = np.flatnonzero(~hit)
        part = tuple(x[go] for x in seg)
        active = _advance(ev, w, active[go], part, cum[go], forcing, dt, top)
        chunk = min(2 * chunk, 65536)
    if active.size:  # not reached within the chunks: where the scan stopped
        w.h1[active] = w.p[active]
        w.mean_draw[active] = w.drawn[active] / np.maximum(w.elapsed[active], 1e-300)
    return w.h1, w.mean_draw


def _split_at_kink(
    ev: _Eval,
    h0: np.ndarray,
    g0: np.ndarray,
    c: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float,
    *,
    err_m: float,
    span_m: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Split the day where the path crosses the outlet's sill ``e`` (the kink of the law).

    For members whose one-step estimate ``c`` lies beyond the sill seen from ``h0``, the time to
    the sill ``T_e = integral_{h0}^{e} ds / g(s)`` is taken by Gauss-Legendre quadrature (two
    panels; ``g`` is smooth on that side and does not vanish there, else the path never reaches
    the sill); when ``T_e < dt`` the rest of the day is one collocation step from ``e`` on the
    other, smooth branch (:func:`_day_step`, ``dt - T_e``). This is the case of a path rising
    from the slow regime below a sill into a stiff one above, which arrives late at its
    quasi-equilibrium. Returns (stage, accepted: the step's estimate is within ``err_m``).
    """
    e = ev.kink
    lo, hi = np.minimum(h0, c), np.maximum(h0, c)
    done = np.zeros(h0.size, dtype=bool)
    out = c.copy()
    cand = np.flatnonzero((e > lo) & (e < hi))
    if cand.size == 0:
        return out, done
    sub = ev.subset(cand)
    f = tuple(x[cand] for x in forcing)
    p, q, s0 = h0[cand], e[cand], g0[cand]
    nodes, weights = gauss_legendre(TIME_NODES)
    t_e = np.zeros(cand.size)
    ok = np.ones(cand.size, dtype=bool)
    width = 0.5 * (q - p)
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in range(2):
            mid = p + (k + 0.5) * width
            for xi, wi in zip(nodes, weights):
                gs, _, _ = sub(mid + 0.5 * width * xi, *f)
                ok &= gs * s0 > 0.0
                t_e += wi * 0.5 * width / gs
        g_e, _, _ = sub(q, *f)
    ok &= (g_e * s0 > 0.0) & np.isfinite(t_e) & (t_e >= 0.0) & (t_e < dt)
    go = np.flatnonzero(ok)
    if go.size == 0:
        return out, done
    sub2 = sub.subset(go)
    f2 = tuple(x[go] for x in f)
    rest = dt - t_e[go]
    c2, _, est, _ = _day_step(
        sub2, q[go].copy(), *f2, rest, iterations=1, tol_m=1e-5, span_m=span_m, err_m=err_m
    )
    good = est <= err_m
    out[cand[go[good]]] = c2[good]
    done[cand[go[good]]] = True
    return out, done


def _resolve_rough(
    ev: _Eval,
    h0: np.ndarray,
    g0: np.ndarray,
    h: np.ndarray,
    draw: np.ndarray,
    rough: np.ndarray,
    forcing: tuple[np.ndarray, np.ndarray, np.ndarray],
    dt: float,
    *,
    err_m: float,
    span_m: float,
) -> int:
    """Re-solve the rough member-days ``rough`` in place (``h``, ``draw``).

    First Newton corrections on the day's exact time equation (:func:`_correct`); the few
    members they cannot settle (a path ending beyond an equilibrium, a step that does not
    converge) are re-solved from the exact path on the grid (:func:`_table_path`). Returns the
    number of member-days that needed the grid path.
    """
    f = tuple(x[rough] for x in forcing)
    sub = ev.subset(rough)
    c0 = h[rough]
    h_c, failed = _correct(sub, h0[rough], g0[rough], c0, f, dt, err_m)
    if failed.size:
        h_s, done = _split_at_kink(
            sub.subset(failed), h0[rough][failed], g0[rough][failed], c0[failed],
            tuple(x[failed] for x in f), dt, err_m=err_m, span_m=span_m,
        )  # fmt: skip
        h_c[failed[done]] = h_s[done]
        failed = failed[~done]
    h[rough], draw[rough] = h_c, sub.draw(h_c, f[2])
    if failed.size == 0:
        return 0
    idx = rough[failed]
    h_r, draw_r = _table_path(
        ev.subset(idx),
        h0[idx],
        *(x[failed] for x in f),
        dt,
        h_c[failed],
        bottom_m=float(ev.bottom_m),
        span_m=span_m,
    )
    h[idx], draw[idx] = h_r, draw_r
    return int(idx.size)


def crossing_fraction(
    ev: _Eval,
    h0: np.ndarray,
    level: float,
    a: np.ndarray,
    inflow: np.ndarray,
    demand: np.ndarray,
    dt: float,
    nodes: int = 12,
) -> np.ndarray:
    """Share of the day (0..1) at which the stage path from ``h0`` first reaches ``level``.

    Within a day the forcing is constant, so the path is monotone and the time to go from ``h0`` to
    ``level`` is ``t = integral dh / g(h)`` (Gauss-Legendre quadrature on ``nodes`` points).
    """
    x, w = gauss_legendre(nodes)
    n = h0.size
    half = 0.5 * (level - h0)
    mid = 0.5 * (level + h0)
    rep = np.tile(np.arange(n), nodes)  # all nodes of all members in one evaluation
    pts = (mid[None, :] + half[None, :] * x[:, None]).ravel()
    g = ev.subset(rep)(pts, a[rep], inflow[rep], demand[rep])[0].reshape(nodes, n)
    with np.errstate(divide="ignore", invalid="ignore"):
        total = (w[:, None] / g).sum(axis=0)
    t = total * half / dt
    return np.clip(np.nan_to_num(t, nan=1.0, posinf=1.0, neginf=1.0), 0.0, 1.0)


def _restriction_state(
    restriction: Sequence[tuple[float, float] | RestrictionLevel], members: int
) -> RestrictionState | None:
    """The restriction levels as a state machine over the members (None without levels)."""
    levels = [
        r
        if isinstance(r, RestrictionLevel)
        else RestrictionLevel(trigger=float(r[0]), cut=float(r[1]))
        for r in restriction
    ]
    return RestrictionState.start(levels, members) if levels else None


def _months(
    months: np.ndarray | None,
    days: int,
    tables: LakeTables,
    restriction: Sequence[tuple[float, float] | RestrictionLevel],
) -> np.ndarray:
    """(days,) calendar months; required where a rule varies by month."""
    if months is not None:
        m = np.asarray(months, dtype=int).reshape(days)
        if m.min() < 1 or m.max() > 12:
            raise ValueError("months must be 1 to 12")
        return m
    monthly_rule = tables.release_m3s is not None and np.ptp(tables.release_m3s, axis=0).any()
    monthly_rule |= any(
        isinstance(r, RestrictionLevel)
        and (np.ptp(r.trigger_by_month()) > 0 or np.ptp(r.restore_by_month()) > 0)
        for r in restriction
    )
    if monthly_rule:
        raise ValueError("a rule varies by month: give the calendar month of each day (months)")
    return np.ones(days, dtype=int)


def simulate(
    tables: LakeTables,
    start_stage_m: np.ndarray | float,
    inflow_m3s: np.ndarray,
    net_depth_m: np.ndarray,
    demand_m3s: np.ndarray | float = 0.0,
    *,
    release_m3s: np.ndarray | float = 0.0,
    variant: np.ndarray | None = None,
    restriction: Sequence[tuple[float, float] | RestrictionLevel] = (),
    months: np.ndarray | None = None,
    levels: dict[str, float] | None = None,
    substeps: int = 1,
    iterations: int = 1,
    tol_m: float = 1e-5,
    err_m: float = 1e-4,
    day_s: float = SECONDS_PER_DAY,
    progress: Callable[[int], None] | None = None,
) -> EngineResult:
    """Run all members forward, one day at a time.

    Parameters
    ----------
    tables : LakeTables
        The lake (:func:`build_tables`).
    start_stage_m : float or ndarray (members,)
        Stage at the start (m).
    inflow_m3s : ndarray (days, members)
        Daily mean inflow (m³/s).
    net_depth_m : ndarray (days, members)
        Rain minus lake evaporation of each day (m per day).
    demand_m3s : float or ndarray (days, members)
        Withdrawal demand before restrictions (m³/s).
    release_m3s : float or ndarray (days, members)
        Scheduled releases (m³/s): drawn like withdrawals (they stop at the dead level) but never
        cut by a restriction.
    variant : ndarray (members,) of int, optional
        Rating variant (row of ``tables.outflow_m3s``) of each member; default 0.
    restriction : sequence of RestrictionLevel or (trigger_m, cut)
        Restriction levels (:class:`lakebalance.operations.RestrictionLevel`: trigger by month,
        restore level, lag; stepped by :class:`~lakebalance.operations.RestrictionState` on the
        stage at each day's start). A pair ``(trigger_m, cut)`` is a level with neither
        hysteresis nor lag: demand is cut by ``cut`` (-) on days that start below ``trigger_m``
        (m). Where several levels are in force the largest cut is used.
    months : ndarray (days,) of int, optional
        Calendar month (1-12) of each day; needed when the tables carry a gate release or a
        restriction level varies by month.
    levels : dict, optional
        Named stages (m) whose first crossing is recorded: downward when a member starts above the
        level, upward when it starts below.
    substeps : int
        Equal steps per day (1 is accurate for slow and stiff lakes; more for very nonlinear laws).
    iterations : int
        Fixed-point iterations of the implicit step after the exponential Euler start.
    tol_m : float
        Members whose last fixed-point update moved more than this (m) are iterated on, inside a
        bracket, until it holds.
    err_m : float
        Local error allowed per day (m): members whose step error estimate exceeds it are
        re-solved over that day from the exact path on the stage grid (``g`` linear between
        nodes, the segment times of ``1/g`` summed to the day's length).
    day_s : float
        Length of a forcing period (s).
    progress : callable, optional
        Called with the number of days done, every 10 days.

    Returns
    -------
    EngineResult
    """
    inflow_m3s = np.asarray(inflow_m3s, dtype=float)
    if inflow_m3s.ndim != 2:
        raise ValueError("inflow_m3s must be (days, members)")
    days, members = inflow_m3s.shape
    net_depth_m = np.broadcast_to(np.asarray(net_depth_m, dtype=float), (days, members))
    demand = np.broadcast_to(np.asarray(demand_m3s, dtype=float), (days, members))
    release = np.asarray(release_m3s, dtype=float)
    has_release = bool(np.any(release != 0.0))
    release = np.broadcast_to(release, (days, members))
    h = np.broadcast_to(np.asarray(start_stage_m, dtype=float), (members,)).copy()
    if variant is None:
        variant = np.zeros(members, dtype=np.intp)
    ev = _Eval(tables, variant)
    dt = day_s / substeps
    stage = np.empty((days + 1, members))
    stage[0] = h
    drawn = np.empty((days, members))
    cut_used = np.zeros((days, members))
    levels = dict(levels or {})
    crossing = {k: np.full(members, np.nan) for k in levels}
    above = {k: h > v for k, v in levels.items()}
    rules = _restriction_state(restriction, members)
    months = _months(months, days, tables, restriction)
    bottom = tables.bottom_m
    refined = corrected = 0
    span = tables.top_m - tables.bottom_m
    for d in range(days):
        a = net_depth_m[d] / day_s
        q_in = inflow_m3s[d]
        dem = demand[d]
        ev.rel_off = (int(months[d]) - 1) * ev.size
        if rules is not None:
            cut = rules.step(h, int(months[d]))
            cut_used[d] = cut
            dem = dem * (1.0 - cut)
        if has_release:
            dem = dem + release[d]
        h_start = h
        acc = np.zeros(members)
        for _ in range(substeps):
            h_prev = h
            h, draw, est, g0 = _day_step(
                ev,
                h,
                a,
                q_in,
                dem,
                dt,
                iterations=iterations,
                tol_m=tol_m,
                span_m=span,
                err_m=err_m / substeps,
            )
            np.maximum(h, bottom, out=h)
            rough = np.flatnonzero(est > err_m / substeps)
            if rough.size:
                corrected += rough.size
                refined += _resolve_rough(
                    ev,
                    h_prev,
                    g0,
                    h,
                    draw,
                    rough,
                    (a, q_in, dem),
                    dt,
                    err_m=err_m / substeps,
                    span_m=span,
                )
                np.maximum(h, bottom, out=h)
            acc += draw
        drawn[d] = acc / substeps
        stage[d + 1] = h
        for name, lev in levels.items():
            new = np.isnan(crossing[name]) & ((h > lev) != above[name])
            if new.any():
                idx = np.flatnonzero(new)
                frac = crossing_fraction(
                    ev.subset(idx), h_start[idx], lev, a[idx], q_in[idx], dem[idx], day_s
                )
                crossing[name][idx] = d + frac
        if progress is not None and (d + 1) % 10 == 0:
            progress(d + 1)
    return EngineResult(
        stage_m=stage,
        withdrawal_m3s=drawn,
        cut=cut_used,
        crossing_day=crossing,
        refined_member_days=refined,
        corrected_member_days=corrected,
    )
