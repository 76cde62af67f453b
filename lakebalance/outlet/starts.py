"""Automatic starting values of the control laws, from the gaugings (the laws call these).

A rating fit by nonlinear least squares needs starting values near the optimum, because the
datum of a power law makes the problem strongly nonlinear. Each law of :mod:`.laws` supplies its
own through ``starting_values``; the numerics live here:

- :func:`profile_start` for one control of the power family: a profile over the datum with a
  log-linear fit of the coefficient and exponent at each trial datum;
- :func:`controls_start` for several controls (in parallel or over stage ranges): candidate
  datums of the later controls, the first control fitted below them, and the coefficient of each
  later control from the discharge left over above its datum.

All in common practice, no source.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable, Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    from .laws import PowerFamilyLaw

__all__ = ["profile_start", "controls_start", "local_values"]

Array = np.ndarray

#: Quantiles of the gauged stages tried as datums of later parallel controls (-).
PARALLEL_DATUM_QUANTILES = (0.2, 0.35, 0.5, 0.65, 0.8, 0.92)
#: At most this many combinations of candidate datums are tried.
MAX_COMBINATIONS = 60


def local_values(given: Mapping[str, float], prefix: str) -> dict[str, float]:
    """The values of ``given`` whose names start with ``prefix``, without it."""
    return {k[len(prefix) :]: v for k, v in given.items() if k.startswith(prefix)}


def profile_start(
    law: PowerFamilyLaw,
    h: Array,
    q: Array,
    w: Array,
    e_lo: float,
    e_hi: float,
    fixed: Mapping[str, float],
) -> dict[str, float]:
    """Starting values of one power-family law: a profile over the datum with a log-linear fit.

    Parameters
    ----------
    law : PowerFamilyLaw
        The control.
    h, q, w : ndarray
        Stages (m), discharges (m³/s) and weights (-) of the gaugings with flow.
    e_lo, e_hi : float
        Bounds of the datum, m.
    fixed : mapping
        Values given for the law's own parameters (its names without a prefix), SI.

    Returns
    -------
    dict
        A value for each of ``law.param_names`` (SI).

    Notes
    -----
    For each trial datum e, ``ln Q = ln(c·factor) + b ln(h - e)`` is linear in ``ln c`` and
    ``b``; the datum with the smallest weighted sum of squares wins (common practice, no source).
    """
    pos = q > 0
    h, y, w = h[pos], np.log(q[pos]), w[pos]
    hmin, span = float(h.min()), float(np.ptp(h)) or max(abs(float(h.min())), 1.0)
    dn = law.datum_name
    if dn in fixed:
        grid = np.array([fixed[dn]])
    else:
        depth = np.geomspace(1e-3 * span, 20 * span, 80)
        grid = hmin - depth
        grid = grid[(grid >= e_lo) & (grid <= e_hi)]
        if grid.size == 0:
            grid = np.array([min(max(e_lo, hmin - span), e_hi)])
    x = np.log(np.maximum(h[None, :] - grid[:, None], 1e-300))  # (g, n)
    sw = w / w.sum()
    xm = (x * sw).sum(1, keepdims=True)
    ym = (y * sw).sum()
    if law.exponent is not None or "b" in fixed:
        b = np.full(grid.size, law.exponent if law.exponent is not None else fixed["b"])
    else:
        sxx = ((x - xm) ** 2 * sw).sum(1)
        sxy = ((x - xm) * (y - ym) * sw).sum(1)
        b = np.where(sxx > 0, sxy / np.where(sxx > 0, sxx, 1), 1.0)
        b = np.clip(b, 0.05, 20.0)
    a = ym - b * xm[:, 0]
    sse = (((y[None, :] - a[:, None] - b[:, None] * x) ** 2) * sw).sum(1)
    i = int(np.nanargmin(sse))
    out = {law.coef_name: float(np.exp(a[i]) / law.factor), dn: float(grid[i])}
    if law.exponent is None:
        out["b"] = float(b[i])
    return out


def parallel_datum_candidates(h: Array, lo: float, hi: float) -> list[float]:
    """Candidate datums of a later parallel control: quantiles of the gauged stages (m)."""
    return list(np.clip(np.quantile(h, PARALLEL_DATUM_QUANTILES), lo, hi))


def segment_datum_candidates(h: Array, lo: float, hi: float, break_m: float) -> list[float]:
    """Candidate datums of a later segment: below its lower break by fractions of the gauged
    stage range (m)."""
    return list(np.clip(break_m - np.array([0.05, 0.3, 1.0]) * np.ptp(h), lo, hi))


def controls_start(
    names: Sequence[str],
    controls: Sequence[tuple[str, PowerFamilyLaw]],
    gaugings: tuple[Array, Array, Array],
    bounds: tuple[Array, Array],
    given: Mapping[str, float],
    *,
    datum_candidates: Callable[[int, Array, float, float], list[float]],
    first_below: Callable[[tuple[float, ...]], float],
) -> list[Array]:
    """Candidate starting vectors of several controls (``<control>.<param>`` names).

    Parameters
    ----------
    names : sequence of str
        The law's parameter names, in order.
    controls : sequence of (name, PowerFamilyLaw)
        The controls, lowest first.
    gaugings : (h, q, w)
        Stages (m), discharges (m³/s) and weights (-) of the gaugings with flow.
    bounds : (lower, upper)
        Bounds of every parameter, in ``names`` order (SI).
    given : mapping
        Initial and fixed values by name (SI); a given datum is the only candidate.
    datum_candidates : callable
        ``(j, h, lower, upper) -> list`` of trial datums (m) of control ``j`` (1, 2, ...).
    first_below : callable
        ``(datums of the later controls) -> stage`` (m) below which the gaugings belong to the
        first control alone.

    Returns
    -------
    list of ndarray
        One vector per combination of candidate datums (at most :data:`MAX_COMBINATIONS`).
    """
    hf, qf, wf = gaugings
    lo, hi = bounds

    def bounds_of(full: str) -> tuple[float, float]:
        i = names.index(full)
        return lo[i], hi[i]

    first_name, first = controls[0]
    later = controls[1:]
    cand_lists = []
    for j, (name, sub) in enumerate(later, start=1):
        key = f"{name}.{sub.datum_name}"
        dlo, dhi = bounds_of(key)
        if key in given:
            cand_lists.append([given[key]])
        else:
            cand_lists.append(datum_candidates(j, hf, dlo, dhi))
    combos = list(itertools.product(*cand_lists))[:MAX_COMBINATIONS]
    out = []
    for combo in combos:
        vec = np.full(len(names), np.nan)
        # first control: gaugings below the lowest later datum (all if too few)
        below = hf < first_below(combo)
        sel = below if below.sum() >= 3 else np.ones_like(below)
        e_lo, e_hi = bounds_of(f"{first_name}.{first.datum_name}")
        s0 = profile_start(
            first, hf[sel], qf[sel], wf[sel], e_lo, e_hi, local_values(given, f"{first_name}.")
        )
        for p, v in s0.items():
            vec[names.index(f"{first_name}.{p}")] = v
        for (name, sub), d in zip(later, combo):
            vec[names.index(f"{name}.{sub.datum_name}")] = d
            if "b" in sub.param_names:
                vec[names.index(f"{name}.b")] = 1.5
            cname = f"{name}.{sub.coef_name}"
            if cname in names:
                q1 = first.discharge([s0[p] for p in first.param_names], hf)
                above = hf > d
                g = sub.discharge([1.0, d] + ([1.5] if sub.exponent is None else []), hf)
                ratio = (qf - q1)[above] / np.maximum(g[above], 1e-300)
                ratio = ratio[ratio > 0]
                vec[names.index(cname)] = float(np.median(ratio)) if ratio.size else 1.0
        out.append(vec)
    return out
