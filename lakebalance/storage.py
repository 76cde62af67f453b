"""The stage-area-storage relation of a lake basin: build, validate, evaluate, invert.

A :class:`StorageCurve` holds the surveyed levels (stage, area, volume) and evaluates

* ``area(stage_m)``  -- lake area, m²,
* ``volume(stage_m)`` -- storage, m³, the exact integral of ``area`` (so dV/dh = A everywhere),
* ``stage(volume_m3)`` -- the exact inverse of ``volume`` (closed form per segment),

vectorised for numpy arrays of any shape. Between two levels the area follows the interpolation
form that matches the declared integration rule, so that the volume is the *exact* integral of the
area that is interpolated:

``"frustum"`` (conic frustum)
    sqrt(A) varies linearly with stage inside a segment; the volume of a segment is then the
    frustum formula ΔV = Δh/3 (A1 + A2 + sqrt(A1 A2)) (e.g. Håkanson 1981). It is often called
    "prismoidal", but a true prismoidal rule needs the area at mid-level, which a survey of
    contours does not have; the name here says what the formula is.
``"average_end_area"``
    A varies linearly with stage; the volume of a segment is ΔV = Δh (A1 + A2)/2.

Outside the surveyed range a declared policy applies, never silently: ``"error"`` raises
:class:`~lakebalance.errors.RangeError`; ``"clamp"`` holds the end value and warns
(:class:`~lakebalance.errors.ExtrapolationWarning`; :meth:`StorageCurve.out_of_range` flags the
values); ``"extend"`` continues the area linearly with the slope dA/dh of the end segment (below the
survey the area stops at zero, the basin bottom) and warns too.

This module is pure (numpy only): readers for tables and GIS layers live in ``lakebalance.io``.

References
----------
Common practice, no source: the conic frustum and average-end-area rules are the usual
reservoir-survey integration rules; the frustum volume V = h/3 (A1 + A2 + sqrt(A1 A2)) is the exact
volume of a frustum of a right circular cone (any handbook of mensuration).
Håkanson, L. (1981). A Manual of Lake Morphometry. Springer (the frustum formula for the volume
between contours; from memory).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Literal

import numpy as np

from .display import number
from .errors import (
    ApproximationWarning,
    DataQualityWarning,
    ExtrapolationWarning,
    InputError,
    RangeError,
)
from .options import Options, iso_date, setting
from .results import Summary

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "StorageOptions",
    "DatedSurvey",
    "Policy",
    "Integration",
    "VolumeCheck",
    "StorageCurve",
    "integrate_area",
    "validate_relation",
    "check_volumes",
    "storage_from_table",
    "storage_from_outline",
    "compare_curves",
]


@dataclass(frozen=True)
class DatedSurvey(Options):
    """``[[storage.survey]]``: another survey of the basin, on its date, read with the settings
    of ``[storage]`` (columns, units, datum); see :mod:`lakebalance.surveys`."""

    date: str = setting(rule=iso_date)  # ISO date of the survey
    file: Path | None = None  # its table or contour layer
    sheet: str | None = None
    layer: str | None = None


@dataclass(frozen=True)
class StorageOptions(Options):
    """``[storage]``: the stage-area-storage relation of the basin."""

    source: Literal["table", "contours", "outline"] = "table"
    file: Path | None = None  # table (CSV/XLSX) or vector layer (GPKG/SHP/GeoJSON)
    sheet: str | None = None  # Excel sheet of a table
    layer: str | None = None  # layer of a multi-layer vector file
    stage: str = "stage"  # table column of stage
    area: str = "area"  # table column of area
    volume: str | None = None  # table column of volume (integrated from area when absent)
    stage_units: str = "m"
    area_units: str = "m**2"
    volume_units: str = "m**3"
    elevation_field: str = "elevation"  # contour attribute holding the elevation
    elevation_units: str = "m"
    datum_offset: float = setting(0.0, unit="m")  # stage = elevation - datum_offset
    integration: Literal["frustum", "average_end_area"] = "frustum"
    # policy below the lowest level: "error" (default; "clamp" would hold the area and volume
    # there, which silently zeroes the storage change of those days), or "extend" to `bottom`
    below: Literal["error", "clamp", "extend"] = "error"
    above: Literal["error", "clamp", "extend"] = "extend"  # policy above the highest level
    # outline source: depth from the outline level to the bottom
    max_depth: float | None = setting(None, unit="m", low=0.0, low_open=True)
    # outline source: area(z) proportional to ((z - z_bottom)/depth)^p
    shape_exponent: float = setting(1.0, unit="-", low=0.0, low_open=True)
    outline_stage: float | None = setting(None, unit="m")  # outline source: shoreline stage
    bottom: float | None = setting(None, unit="m")  # stage of the deepest point (area 0)
    # table volume vs integrated area: allowed share of the range
    volume_tolerance: float = setting(0.01, unit="-", low=0.0)
    # a volume column beyond the tolerance is an error; true accepts it with a warning (the
    # relation always integrates the areas)
    accept_volume_mismatch: bool = False
    compare: Path | None = None  # a second survey (table or contour layer) to compare against
    # date of the survey in 'file' (needed with [[storage.survey]]: relations dated in time)
    date: str | None = setting(None, rule=iso_date)
    survey: tuple[DatedSurvey, ...] = ()  # further dated surveys, interpolated in time
    delimiter: str | None = None  # CSV field delimiter of a table (sniffed when absent)
    decimal: str = "."  # decimal mark of a CSV table
    encoding: str | None = None  # text encoding of a CSV table (UTF-8 when absent)

    def __post_init__(self) -> None:
        super().__post_init__()
        from .errors import OptionError

        if self.survey and self.date is None:
            raise OptionError(
                "date", "'date' (of the survey in 'file') is needed with [[storage.survey]]"
            )
        dates = [str(self.date)[:10]] + [str(s.date)[:10] for s in self.survey]
        if len(set(dates)) != len(dates):
            raise OptionError("survey", f"two surveys share a date: {', '.join(dates)}")


Policy = Literal["error", "clamp", "extend"]
Integration = Literal["frustum", "average_end_area"]

_POLICIES = ("error", "clamp", "extend")
_INTEGRATIONS = ("frustum", "average_end_area")
_CHUNK = 1 << 13  # values per evaluation chunk (keeps temporaries in cache: ~4x faster)
_MAX_LISTED = 5  # rows named in one error message


# --------------------------------------------------------------------------------------------
# Integration and validation
# --------------------------------------------------------------------------------------------
def integrate_area(
    stage_m: np.ndarray, area_m2: np.ndarray, integration: Integration = "frustum"
) -> np.ndarray:
    """Cumulative volume above the lowest level, integrated from a stage-area table.

    Parameters
    ----------
    stage_m : array_like, shape (n,)
        Stages, strictly increasing, m.
    area_m2 : array_like, shape (n,)
        Lake areas at those stages, non-negative, m².
    integration : {"frustum", "average_end_area"}
        Integration rule between consecutive levels.

    Returns
    -------
    ndarray, shape (n,)
        Volume between the lowest stage and each stage, m³ (0 at the first level).

    Notes
    -----
    Prismoidal (conic frustum), per segment of height Δh with end areas A1, A2:

    .. math:: \\Delta V = \\frac{\\Delta h}{3}\\left(A_1 + A_2 + \\sqrt{A_1 A_2}\\right)

    Average end area: :math:`\\Delta V = \\Delta h (A_1 + A_2) / 2`.

    References
    ----------
    Common practice, no source (reservoir survey integration rules; frustum of a cone).

    Examples
    --------
    >>> integrate_area([0.0, 2.0], [0.0, 3.0]).tolist()  # a cone-shaped pit of 3 m² at 2 m
    [0.0, 2.0]
    """
    h = np.asarray(stage_m, dtype=float)
    a = np.asarray(area_m2, dtype=float)
    if integration not in _INTEGRATIONS:
        raise ValueError(f"integration must be one of {_INTEGRATIONS}, got {integration!r}")
    dh = np.diff(h)
    if integration == "frustum":
        dv = dh / 3.0 * (a[:-1] + a[1:] + np.sqrt(a[:-1] * a[1:]))
    else:
        dv = dh * 0.5 * (a[:-1] + a[1:])
    return np.concatenate([[0.0], np.cumsum(dv)])


def _where(rows: Sequence[int] | None, i: int, label: str = "line") -> str:
    return f"{label} {rows[i]}" if rows is not None else f"row {i + 1}"


def _lines(rows: Sequence[int] | None, idx: np.ndarray, label: str = "line") -> str:
    shown = [_where(rows, int(i), label) for i in idx[:_MAX_LISTED]]
    more = f" and {len(idx) - _MAX_LISTED} more" if len(idx) > _MAX_LISTED else ""
    return ", ".join(shown) + more


def validate_relation(
    stage_m: np.ndarray,
    area_m2: np.ndarray,
    volume_m3: np.ndarray | None = None,
    *,
    rows: Sequence[int] | None = None,
    file: str | Path | None = None,
    row_label: str = "line",
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Check a stage-area(-volume) table and return it as float arrays in increasing stage.

    A table listed from the top down (stage strictly decreasing throughout) is accepted and
    reversed; any other order is an error.

    Parameters
    ----------
    stage_m : array_like, shape (n,)
        Stages, m.
    area_m2 : array_like, shape (n,)
        Areas, m².
    volume_m3 : array_like, shape (n,), optional
        Volumes, m³.
    rows : sequence of int, optional
        The file line of each row, for messages (1-based).
    file : str or Path, optional
        The file the table came from, for messages.
    row_label : str
        What ``rows`` number (``"line"`` of a table, ``"feature"`` of a layer).

    Returns
    -------
    stage_m, area_m2, volume_m3 : ndarray
        The table in increasing stage (``volume_m3`` None when not given).

    Raises
    ------
    InputError
        Fewer than two levels; a missing value; a repeated or out-of-order stage; a negative area;
        an area (or volume) that decreases while stage rises; areas that are all zero.
    """
    h = np.asarray(stage_m, dtype=float).ravel()
    a = np.asarray(area_m2, dtype=float).ravel()
    v = None if volume_m3 is None else np.asarray(volume_m3, dtype=float).ravel()
    row_list = None if rows is None else [int(r) for r in rows]
    if h.shape != a.shape or (v is not None and v.shape != h.shape):
        raise InputError("stage, area and volume columns differ in length", file=file)
    if row_list is not None and len(row_list) != h.size:
        raise ValueError("rows must give one line number per table row")

    def line_at(i: int) -> int | None:
        use = row_list is not None and row_label == "line"
        return row_list[int(i)] if use else None  # type: ignore[index]

    if h.size < 2:
        raise InputError(f"a storage relation needs at least two levels, got {h.size}", file=file)
    for name, arr in (("stage", h), ("area", a), ("volume", v)):
        if arr is None:
            continue
        bad = np.flatnonzero(~np.isfinite(arr))
        if bad.size:
            line = line_at(int(bad[0]))
            raise InputError(
                f"missing or non-finite {name} at {_lines(row_list, bad, row_label)}",
                file=file,
                line=line,
                column=name,
            )
    dh = np.diff(h)
    if np.all(dh < 0):
        h, a = h[::-1], a[::-1]
        v = None if v is None else v[::-1]
        row_list = None if row_list is None else row_list[::-1]
        dh = -dh[::-1]
    bad = np.flatnonzero(dh <= 0)
    if bad.size:
        i = int(bad[0])
        kind = "repeated" if dh[i] == 0 else "out of order"
        pairs = ", ".join(
            f"{_where(row_list, int(k), row_label)} and {_where(row_list, int(k) + 1, row_label)}"
            for k in bad[:_MAX_LISTED]
        )
        raise InputError(
            f"stage must increase strictly from row to row: {kind} stage {h[i + 1]:g} m at {pairs}",
            file=file,
            line=line_at(i + 1),
            column="stage",
        )
    neg = np.flatnonzero(a < 0)
    if neg.size:
        raise InputError(
            f"negative area at {_lines(row_list, neg, row_label)} ({a[neg[0]]:g} m²)",
            file=file,
            line=line_at(neg[0]),
            column="area",
        )
    dec = np.flatnonzero(np.diff(a) < 0) + 1
    if dec.size:
        i = int(dec[0])
        raise InputError(
            f"area decreases while stage rises at {_lines(row_list, dec, row_label)} "
            f"({a[i - 1]:g} m² at {h[i - 1]:g} m, then {a[i]:g} m² at {h[i]:g} m)",
            file=file,
            line=line_at(i),
            column="area",
        )
    if not np.any(a > 0):
        raise InputError("every area of the storage relation is zero", file=file, column="area")
    if v is not None:
        dec = np.flatnonzero(np.diff(v) < 0) + 1
        if dec.size:
            i = int(dec[0])
            raise InputError(
                f"volume decreases while stage rises at {_lines(row_list, dec, row_label)} "
                f"({v[i - 1]:g} m³, then {v[i]:g} m³)",
                file=file,
                line=line_at(i),
                column="volume",
            )
    return h, a, v


@dataclass(frozen=True, eq=False)
class VolumeCheck:
    """Table volumes compared with the volumes integrated from the table's areas.

    Attributes
    ----------
    stage_m : ndarray
        Stages of the table, m.
    given_m3 : ndarray
        Volumes as given in the table, m³.
    integrated_m3 : ndarray
        Volumes integrated from the areas, starting from the first given volume, m³.
    rows : tuple of int or None
        File lines of the rows.
    tolerance : float
        Allowed mismatch as a share of the full volume range (-).
    integration : str
        The rule used to integrate.
    """

    stage_m: np.ndarray
    given_m3: np.ndarray
    integrated_m3: np.ndarray
    rows: tuple[int, ...] | None
    tolerance: float
    integration: str

    @property
    def difference_m3(self) -> np.ndarray:
        """Given minus integrated volume at each level, m³."""
        return self.given_m3 - self.integrated_m3

    @property
    def volume_range_m3(self) -> float:
        """Given volume at the top minus at the bottom level, m³."""
        return float(self.given_m3[-1] - self.given_m3[0])

    @property
    def worst_index(self) -> int:
        """Index of the row with the largest absolute mismatch."""
        return int(np.argmax(np.abs(self.difference_m3)))

    @property
    def max_difference_m3(self) -> float:
        """Largest absolute mismatch, m³."""
        return float(np.abs(self.difference_m3).max())

    @property
    def max_relative(self) -> float:
        """Largest absolute mismatch as a share of the full volume range (-)."""
        rng = self.volume_range_m3
        return float(self.max_difference_m3 / rng) if rng > 0 else float("inf")

    @property
    def ok(self) -> bool:
        """True when the mismatch is within :attr:`tolerance`."""
        return self.max_relative <= self.tolerance

    def summary(self) -> str:
        """One line describing the agreement."""
        i = self.worst_index
        where = f"line {self.rows[i]}" if self.rows is not None else f"row {i + 1}"
        verdict = "within" if self.ok else "OUTSIDE"
        return (
            f"table volumes vs {self.integration} integration of areas: largest mismatch "
            f"{self.difference_m3[i]:+.6g} m³ at {where} (stage {self.stage_m[i]:g} m), "
            f"{100 * self.max_relative:.3g}% of the volume range, {verdict} the tolerance of "
            f"{100 * self.tolerance:g}%"
        )

    def to_dict(self) -> dict:
        """Plain values for JSON output."""
        return {
            "integration": self.integration,
            "max_difference_m3": self.max_difference_m3,
            "max_relative": self.max_relative,
            "tolerance": self.tolerance,
            "ok": self.ok,
            "worst_row": None if self.rows is None else self.rows[self.worst_index],
            "worst_stage_m": float(self.stage_m[self.worst_index]),
        }


def check_volumes(
    stage_m: np.ndarray,
    area_m2: np.ndarray,
    volume_m3: np.ndarray,
    *,
    integration: Integration = "frustum",
    tolerance: float = 0.01,
    rows: Sequence[int] | None = None,
) -> VolumeCheck:
    """Compare given volumes with the integral of the given areas.

    Parameters
    ----------
    stage_m, area_m2, volume_m3 : array_like, shape (n,)
        A validated table (see :func:`validate_relation`), m, m², m³.
    integration : {"frustum", "average_end_area"}
        Integration rule.
    tolerance : float
        Allowed largest mismatch as a share of the full volume range (-).
    rows : sequence of int, optional
        File lines of the rows.

    Returns
    -------
    VolumeCheck
    """
    v = np.asarray(volume_m3, dtype=float)
    integrated = v[0] + integrate_area(stage_m, area_m2, integration)
    return VolumeCheck(
        stage_m=np.asarray(stage_m, dtype=float),
        given_m3=v,
        integrated_m3=integrated,
        rows=None if rows is None else tuple(int(r) for r in rows),
        tolerance=float(tolerance),
        integration=integration,
    )


# --------------------------------------------------------------------------------------------
# Fast segment lookup
# --------------------------------------------------------------------------------------------
class _Locator:
    """Segment index of many values in a short non-decreasing knot array.

    A regular bucket grid over the knots maps each value to the segment at its bucket start; a few
    vectorised corrections (at most the largest number of knots inside one bucket) finish the
    search. About three times faster than ``numpy.searchsorted`` on unsorted values.
    """

    def __init__(self, knots: np.ndarray) -> None:
        self.knots = knots
        n = knots.size
        self.last = n - 2  # highest segment index
        self.x0 = float(knots[0])
        span = float(knots[-1] - knots[0])
        m = int(min(max(8 * (n - 1), 256), 1 << 16))
        self.m = m
        self.scale = m / span
        starts = self.x0 + np.arange(m + 1) / self.scale
        lut = np.clip(np.searchsorted(knots, starts, side="right") - 1, 0, self.last)
        self.lut = lut[:m].astype(np.intp)
        self.steps = int(np.max(lut[1:] - lut[:-1])) + 1
        # upper end of each segment, with a sentinel so that no step runs past the last one
        self.upper = np.concatenate([knots[1:], [np.inf]])

    def __call__(self, x: np.ndarray) -> np.ndarray:
        upper = self.upper
        with np.errstate(invalid="ignore"):
            j = ((x - self.x0) * self.scale).astype(np.intp)
        np.clip(j, 0, self.m - 1, out=j)
        i = self.lut[j]
        for _ in range(self.steps):
            i += x >= upper[i]
        np.minimum(i, self.last, out=i)
        i -= (x < self.knots[i]) & (i > 0)
        return i


def _frustum_increment(r: np.ndarray, b: np.ndarray, d: np.ndarray, out: np.ndarray) -> None:
    """out = d (r² + r b d + b² d² / 3): volume above the segment start, m³ (frustum form)."""
    bd = b * d
    np.multiply(bd, bd, out=out)
    out *= 1.0 / 3.0
    out += r * (r + bd)
    out *= d


def _linear_increment(a0: np.ndarray, s: np.ndarray, d: np.ndarray, out: np.ndarray) -> None:
    """out = d (A_k + s d / 2): volume above the segment start, m³ (area linear in stage)."""
    np.multiply(s, d, out=out)
    out *= 0.5
    out += a0
    out *= d


# --------------------------------------------------------------------------------------------
# The relation
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class StorageCurve:
    """A stage-area-volume relation, evaluated and inverted exactly and vectorised.

    Build one with :func:`storage_from_table`, :func:`storage_from_outline`,
    :meth:`from_areas` or the readers in ``lakebalance.io.storage``.

    Parameters
    ----------
    stage_m : ndarray, shape (n,)
        Levels, strictly increasing, m (gauge datum).
    area_m2 : ndarray, shape (n,)
        Lake area at each level, non-negative and non-decreasing, m².
    volume_m3 : ndarray, shape (n,)
        Storage at each level, m³; must equal ``volume_m3[0]`` plus the integral of the areas
        under ``integration`` (relative 1e-9).
    below, above : {"error", "clamp", "extend"}
        Policy below the lowest / above the highest level.
    integration : {"frustum", "average_end_area"}
        Interpolation form of the area between levels (see the module docstring).
    source : str
        Where the relation came from (file and kind), for reports.
    check : VolumeCheck, optional
        The comparison of table volumes with the integrated areas, when the table gave both.
    approximate : bool
        True when the relation is an approximation (outline and shape exponent).

    Notes
    -----
    In segment k (stage h_k to h_{k+1}, d = h - h_k):

    * frustum: :math:`A = (a_k + b_k d)^2`, :math:`a_k = \\sqrt{A_k}`,
      :math:`b_k = (\\sqrt{A_{k+1}} - \\sqrt{A_k}) / (h_{k+1} - h_k)`,
      :math:`V = V_k + d (a_k^2 + a_k b_k d + b_k^2 d^2 / 3)`;
      inverse :math:`u = (a_k^3 + 3 b_k \\Delta V)^{1/3}`, :math:`d = 3 \\Delta V / (u^2 + u a_k + a_k^2)`.
    * average end area: :math:`A = A_k + s_k d`, :math:`V = V_k + d (A_k + s_k d / 2)`;
      inverse :math:`d = 2 \\Delta V / (A_k + \\sqrt{A_k^2 + 2 s_k \\Delta V})`.

    Both inverses are the closed-form roots written without cancellation, so stage(volume(h))
    returns h to rounding (about 1e-12 m for stages of hundreds of metres).

    Examples
    --------
    >>> c = storage_from_table([0.0, 1.0, 2.0], [100.0, 100.0, 100.0])
    >>> float(c.volume(1.5)), float(c.stage(150.0))
    (150.0, 1.5)
    """

    stage_m: np.ndarray
    area_m2: np.ndarray
    volume_m3: np.ndarray
    below: Policy = "clamp"
    above: Policy = "extend"
    integration: Integration = "frustum"
    source: str = ""
    check: VolumeCheck | None = None
    approximate: bool = False
    _seg: dict = field(default_factory=dict, init=False, repr=False)

    def __post_init__(self) -> None:
        h = np.array(self.stage_m, dtype=float).ravel()
        a = np.array(self.area_m2, dtype=float).ravel()
        v = np.array(self.volume_m3, dtype=float).ravel()
        if self.below not in _POLICIES or self.above not in _POLICIES:
            raise ValueError(f"below/above must be one of {_POLICIES}")
        if self.integration not in _INTEGRATIONS:
            raise ValueError(f"integration must be one of {_INTEGRATIONS}")
        if v.shape != h.shape:
            raise ValueError("volume_m3 must have one value per level")
        h, a, v = validate_relation(h, a, v)
        expected = v[0] + integrate_area(h, a, self.integration)
        scale = max(float(np.abs(expected).max()), float(expected[-1] - expected[0]), 1e-300)
        if np.max(np.abs(expected - v)) > 1e-9 * scale:
            raise ValueError(
                "volume_m3 is not the integral of area_m2 under the declared integration; "
                "build the relation with storage_from_table or StorageCurve.from_areas"
            )
        dh = np.diff(h)
        inc = np.empty_like(dh)
        seg: dict = {"h": h[:-1].copy(), "a0": a[:-1].copy()}
        if self.integration == "frustum":
            r = np.sqrt(a)
            b = (r[1:] - r[:-1]) / dh
            seg["r"] = r[:-1].copy()
            seg["b"] = b
            slope_bottom = 2.0 * r[0] * b[0]
            slope_top = 2.0 * r[-1] * b[-1]
            _frustum_increment(seg["r"], b, dh, inc)
        else:
            s = np.diff(a) / dh
            seg["s"] = s
            slope_bottom = float(s[0])
            slope_top = float(s[-1])
            _linear_increment(seg["a0"], s, dh, inc)
        # knot volumes summed from the very expression the evaluation uses, so that volume(h_k)
        # returns the knot volume bit for bit
        v = np.cumsum(np.concatenate([[v[0]], inc]))  # sequential: v[k+1] = v[k] + inc[k]
        for arr in (h, a, v):
            arr.setflags(write=False)
        object.__setattr__(self, "stage_m", h)
        object.__setattr__(self, "area_m2", a)
        object.__setattr__(self, "volume_m3", v)
        seg["v"] = v[:-1].copy()
        seg["slope_bottom"] = float(slope_bottom)  # m²/m, dA/dh at the lowest level
        seg["slope_top"] = float(slope_top)  # m²/m, dA/dh at the highest level
        if a[0] <= 0.0:
            bottom_depth = 0.0  # already at the basin bottom
        elif slope_bottom > 0.0:
            bottom_depth = a[0] / slope_bottom  # m below the lowest level where A reaches 0
        else:
            bottom_depth = np.inf  # vertical walls: no bottom
        seg["bottom_depth"] = float(bottom_depth)
        seg["stage_locator"] = _Locator(h)
        # volumes may repeat (zero-area levels at the bottom): locate on the distinct rising part
        seg["volume_locator"] = _Locator(v) if v[-1] > v[0] else None
        self._seg.update(seg)

    # ---- construction -----------------------------------------------------------------------
    @classmethod
    def from_areas(
        cls,
        stage_m: np.ndarray,
        area_m2: np.ndarray,
        *,
        base_volume_m3: float = 0.0,
        integration: Integration = "frustum",
        below: Policy = "clamp",
        above: Policy = "extend",
        source: str = "",
        approximate: bool = False,
    ) -> StorageCurve:
        """A relation from stages (m) and areas (m²); volume integrated from ``base_volume_m3`` (m³)."""
        h, a, _ = validate_relation(stage_m, area_m2)
        v = base_volume_m3 + integrate_area(h, a, integration)
        return cls(
            h,
            a,
            v,
            below=below,
            above=above,
            integration=integration,
            source=source,
            approximate=approximate,
        )

    # ---- range ------------------------------------------------------------------------------
    @property
    def min_stage_m(self) -> float:
        """Lowest level of the relation, m."""
        return float(self.stage_m[0])

    @property
    def max_stage_m(self) -> float:
        """Highest level of the relation, m."""
        return float(self.stage_m[-1])

    @property
    def min_volume_m3(self) -> float:
        """Storage at the lowest level, m³."""
        return float(self.volume_m3[0])

    @property
    def max_volume_m3(self) -> float:
        """Storage at the highest level, m³."""
        return float(self.volume_m3[-1])

    @property
    def bottom_stage_m(self) -> float:
        """Stage where the area reaches zero under the ``extend`` policy below, m (-inf if never)."""
        return self.min_stage_m - self._seg["bottom_depth"]

    def out_of_range(self, stage_m: np.ndarray) -> np.ndarray:
        """-1 below the lowest level, +1 above the highest, 0 inside (NaN: 0), int8, same shape."""
        x = np.asarray(stage_m, dtype=float)
        return (x > self.max_stage_m).astype(np.int8) - (x < self.min_stage_m).astype(np.int8)

    def volume_out_of_range(self, volume_m3: np.ndarray) -> np.ndarray:
        """-1 below the lowest storage, +1 above the highest, 0 inside, int8, same shape."""
        x = np.asarray(volume_m3, dtype=float)
        return (x > self.max_volume_m3).astype(np.int8) - (x < self.min_volume_m3).astype(np.int8)

    # ---- evaluation -------------------------------------------------------------------------
    def area(self, stage_m: np.ndarray, *, warn: bool = True) -> np.ndarray:
        """Lake area at ``stage_m`` (m, any shape), m²; NaN stays NaN.

        Raises :class:`RangeError` / warns :class:`ExtrapolationWarning` outside the range as the
        policies ``below`` and ``above`` declare (``warn=False`` silences the warning; use
        :meth:`out_of_range` to flag the values yourself).
        """
        return self._evaluate(stage_m, "stage", self._area_chunk, warn)

    def volume(self, stage_m: np.ndarray, *, warn: bool = True) -> np.ndarray:
        """Storage at ``stage_m`` (m, any shape), m³: the exact integral of :meth:`area`."""
        return self._evaluate(stage_m, "stage", self._volume_chunk, warn)

    def stage(self, volume_m3: np.ndarray, *, warn: bool = True) -> np.ndarray:
        """Stage holding ``volume_m3`` (m³, any shape), m: the exact inverse of :meth:`volume`.

        Where several stages hold the same storage (zero-area levels at the bottom of a table)
        the highest of them is returned. A storage below the empty basin (``extend``) or below
        the lowest level (``clamp``) gives the lowest stage, flagged by a warning.
        """
        return self._evaluate(volume_m3, "volume", self._stage_chunk, warn)

    def table(self, step_m: float = 0.05) -> pd.DataFrame:
        """The relation at a regular stage step (multiples of ``step_m``, m) plus both ends.

        Returns a DataFrame with columns ``stage_m``, ``area_m2``, ``volume_m3``.
        """
        import pandas as pd

        if not np.isfinite(step_m) or step_m <= 0:
            raise ValueError(f"step_m must be a positive number of metres, got {step_m!r}")
        lo, hi = self.min_stage_m, self.max_stage_m
        n_steps = (hi - lo) / step_m
        if n_steps > 1e6:
            raise RangeError(
                f"a step of {step_m:g} m gives more than a million rows over the relation's "
                f"{hi - lo:.4g} m: choose a coarser step"
            )
        first = np.ceil(lo / step_m - 1e-9)
        last = np.floor(hi / step_m + 1e-9)
        grid = np.arange(first, last + 1) * step_m
        grid = np.round(grid, 10)
        grid = grid[(grid > lo + 1e-9) & (grid < hi - 1e-9)]
        h = np.concatenate([[lo], grid, [hi]])
        return pd.DataFrame({"stage_m": h, "area_m2": self.area(h), "volume_m3": self.volume(h)})

    def check_record(self, stage_m: np.ndarray, dates: Sequence | None = None) -> None:
        """Check a stage record (m) against the relation once, before the many quiet evaluations.

        A record that lies wholly outside the relation is a :class:`RangeError` (the two are not
        on one datum, or the stage is in the wrong unit); days outside it give one
        :class:`ExtrapolationWarning` counted in days, or, under the ``"error"`` policy, a
        :class:`RangeError` that names the first such day (from ``dates``) and its stage.
        """
        h_all = np.asarray(stage_m, dtype=float)
        lo, hi = float(self.min_stage_m), float(self.max_stage_m)
        for side, policy, outside in (
            ("below the lowest", self.below, h_all < lo),
            ("above the highest", self.above, h_all > hi),
        ):
            if policy == "error" and outside.any() and np.any((h_all >= lo) & (h_all <= hi)):
                i = int(np.flatnonzero(outside)[0])
                day = f"{str(dates[i])[:10]}" if dates is not None else f"day {i + 1}"
                level = lo if side.startswith("below") else hi
                raise RangeError(
                    f"{int(outside.sum())} day(s) of the stage record lie {side} level of the "
                    f"storage relation ({level:.6g} m), first {day} at {h_all[i]:.4g} m: extend "
                    f"the survey, or set [storage] {side.split()[0]} = 'extend'"
                    + (
                        " (with bottom = the stage of the deepest point)"
                        if side.startswith("below")
                        else ""
                    )
                    + " or 'clamp' (which holds the storage constant there)"
                )
        h = h_all[np.isfinite(h_all)]
        if h.size and not np.any((h >= lo) & (h <= hi)):
            raise RangeError(
                f"the stage record ({h.min():.4g} to {h.max():.4g} m) lies wholly outside the "
                f"storage relation ({lo:.6g} to {hi:.6g} m): are both on the gauge datum (a "
                "table's stage column is taken as stage, not elevation) and is the stage series "
                "in its declared unit?"
            )
        if h.size:
            self.area(h)  # one warning (or the "error" policy) for the days outside

    def summary(self) -> Summary:
        """A few lines describing the relation."""
        lines = [
            f"storage relation{' (approximate)' if self.approximate else ''}: {self.source or '-'}",
            f"  levels {self.stage_m.size}, stage {self.min_stage_m:g} to {self.max_stage_m:g} m, "
            f"area {number(self.area_m2[0], 4)} to {number(self.area_m2[-1], 4)} m², "
            f"storage {number(self.min_volume_m3, 4)} to {number(self.max_volume_m3, 4)} m³",
            f"  integration {self.integration}; below the range: {self.below}; above: {self.above}",
        ]
        if self.check is not None:
            lines.append("  " + self.check.summary())
        return Summary("\n".join(lines), "storage relation")

    def to_frame(self) -> pd.DataFrame:
        """The surveyed levels: ``stage_m``, ``area_m2``, ``volume_m3``."""
        import pandas as pd

        return pd.DataFrame(
            {"stage_m": self.stage_m, "area_m2": self.area_m2, "volume_m3": self.volume_m3}
        )

    def to_dict(self) -> dict:
        """Plain values for JSON output."""
        return {
            "source": self.source,
            "approximate": self.approximate,
            "integration": self.integration,
            "below": self.below,
            "above": self.above,
            "min_stage_m": self.min_stage_m,
            "max_stage_m": self.max_stage_m,
            "levels": {
                "stage_m": self.stage_m,
                "area_m2": self.area_m2,
                "volume_m3": self.volume_m3,
            },
            "volume_check": None if self.check is None else self.check.to_dict(),
        }

    # ---- internals --------------------------------------------------------------------------
    def _evaluate(
        self,
        values: np.ndarray,
        kind: Literal["stage", "volume"],
        chunk_fn: Callable[[np.ndarray, np.ndarray], tuple[int, int]],
        warn: bool,
    ) -> np.ndarray:
        x = np.asarray(values, dtype=float)
        lo, hi = (
            (self.min_stage_m, self.max_stage_m)
            if kind == "stage"
            else (self.min_volume_m3, self.max_volume_m3)
        )
        if self.below == "error" or self.above == "error":
            n_lo = int(np.count_nonzero(x < lo)) if self.below == "error" else 0
            n_hi = int(np.count_nonzero(x > hi)) if self.above == "error" else 0
            if n_lo or n_hi:
                raise RangeError(self._range_message(kind, n_lo, n_hi, x.size, lo, hi, "error"))
        flat = x.reshape(-1)
        out = np.empty(flat.shape, dtype=float)
        n_lo = n_hi = 0
        for start in range(0, flat.size, _CHUNK):
            stop = start + _CHUNK
            lo_count, hi_count = chunk_fn(flat[start:stop], out[start:stop])
            n_lo += lo_count
            n_hi += hi_count
        if warn and (n_lo or n_hi):
            warnings.warn(
                self._range_message(kind, n_lo, n_hi, x.size, lo, hi, None),
                ExtrapolationWarning,
                stacklevel=3,
            )
        result = out.reshape(x.shape)
        return result

    def _range_message(
        self, kind: str, n_lo: int, n_hi: int, size: int, lo: float, hi: float, mode: str | None
    ) -> str:
        unit = "m" if kind == "stage" else "m³"
        what = "stages" if kind == "stage" else "storages"
        parts = []
        if n_lo:
            act = {"clamp": "held at the lowest level", "extend": "area extended linearly"}.get(
                self.below, "policy below = 'error'"
            )
            parts.append(
                f"{n_lo} of {size} {what} below the lowest level of the storage relation "
                f"({lo:.6g} {unit}): {act if mode is None else 'policy below = ' + repr(mode)}"
            )
        if n_hi:
            act = {"clamp": "held at the highest level", "extend": "area extended linearly"}.get(
                self.above, "policy above = 'error'"
            )
            parts.append(
                f"{n_hi} of {size} {what} above the highest level of the storage relation "
                f"({hi:.6g} {unit}): {act if mode is None else 'policy above = ' + repr(mode)}"
            )
        src = f" [{self.source}]" if self.source else ""
        return "; ".join(parts) + src

    # Each chunk function fills ``out`` for the values ``x`` and returns (n_below, n_above).
    def _area_chunk(self, x: np.ndarray, out: np.ndarray) -> tuple[int, int]:
        s = self._seg
        i = s["stage_locator"](x)
        d = x - s["h"][i]
        if self.integration == "frustum":
            np.multiply(s["b"][i], d, out=out)
            out += s["r"][i]
            np.square(out, out=out)
        else:
            np.multiply(s["s"][i], d, out=out)
            out += s["a0"][i]
        return self._fix_stage_ends(x, out, "area")

    def _volume_chunk(self, x: np.ndarray, out: np.ndarray) -> tuple[int, int]:
        s = self._seg
        i = s["stage_locator"](x)
        d = x - s["h"][i]
        if self.integration == "frustum":
            _frustum_increment(s["r"][i], s["b"][i], d, out)
        else:
            _linear_increment(s["a0"][i], s["s"][i], d, out)
        out += s["v"][i]
        return self._fix_stage_ends(x, out, "volume")

    def _stage_chunk(self, x: np.ndarray, out: np.ndarray) -> tuple[int, int]:
        s = self._seg
        loc = s["volume_locator"]
        if loc is None:  # pragma: no cover - excluded by validation (some area > 0)
            out[:] = self.max_stage_m
            return 0, 0
        i = loc(x)
        dv = x - s["v"][i]
        with np.errstate(invalid="ignore", divide="ignore"):
            if self.integration == "frustum":
                r = s["r"][i]
                u = np.cbrt(r * r * r + 3.0 * s["b"][i] * dv)
                den = u * u + u * r + r * r
                np.divide(3.0 * dv, den, out=out)
            else:
                a0 = s["a0"][i]
                den = a0 + np.sqrt(a0 * a0 + 2.0 * s["s"][i] * dv)
                np.divide(2.0 * dv, den, out=out)
            zero = den == 0.0
            if zero.any():
                out[zero] = 0.0
        out += s["h"][i]
        return self._fix_volume_ends(x, out)

    def _fix_stage_ends(
        self, x: np.ndarray, out: np.ndarray, what: Literal["area", "volume"]
    ) -> tuple[int, int]:
        s = self._seg
        h0, h1 = self.min_stage_m, self.max_stage_m
        low = x < h0
        high = x > h1
        n_lo = int(np.count_nonzero(low))
        n_hi = int(np.count_nonzero(high))
        if n_lo:
            d = x[low] - h0  # negative, m
            a0, v0 = float(self.area_m2[0]), float(self.volume_m3[0])
            if self.below == "extend":
                slope = s["slope_bottom"]
                d = np.maximum(d, -s["bottom_depth"])
                if what == "area":
                    out[low] = np.maximum(a0 + slope * d, 0.0)
                else:
                    out[low] = v0 + d * (a0 + 0.5 * slope * d)
            else:
                out[low] = a0 if what == "area" else v0
        if n_hi:
            d = x[high] - h1
            a1, v1 = float(self.area_m2[-1]), float(self.volume_m3[-1])
            if self.above == "extend":
                slope = s["slope_top"]
                if what == "area":
                    out[high] = a1 + slope * d
                else:
                    out[high] = v1 + d * (a1 + 0.5 * slope * d)
            else:
                out[high] = a1 if what == "area" else v1
        return n_lo, n_hi

    def _fix_volume_ends(self, x: np.ndarray, out: np.ndarray) -> tuple[int, int]:
        s = self._seg
        v0, v1 = self.min_volume_m3, self.max_volume_m3
        low = x < v0
        high = x > v1
        n_lo = int(np.count_nonzero(low))
        n_hi = int(np.count_nonzero(high))
        if n_lo:
            if self.below == "extend":
                a0 = float(self.area_m2[0])
                slope = s["slope_bottom"]
                dv = x[low] - v0  # negative, m³
                with np.errstate(invalid="ignore", divide="ignore"):
                    disc = a0 * a0 + 2.0 * slope * dv
                    d = 2.0 * dv / (a0 + np.sqrt(np.maximum(disc, 0.0)))
                empty = ~(disc > 0.0) | ~np.isfinite(d)
                d = np.where(empty, -s["bottom_depth"], d)
                out[low] = self.min_stage_m + d
            else:
                out[low] = self.min_stage_m
        if n_hi:
            if self.above == "extend":
                a1 = float(self.area_m2[-1])
                slope = s["slope_top"]
                dv = x[high] - v1
                d = 2.0 * dv / (a1 + np.sqrt(a1 * a1 + 2.0 * slope * dv))
                out[high] = self.max_stage_m + d
            else:
                out[high] = self.max_stage_m
        return n_lo, n_hi


# --------------------------------------------------------------------------------------------
# Builders
# --------------------------------------------------------------------------------------------
def storage_from_table(
    stage_m: np.ndarray,
    area_m2: np.ndarray,
    volume_m3: np.ndarray | None = None,
    *,
    integration: Integration = "frustum",
    below: Policy = "clamp",
    above: Policy = "extend",
    rows: Sequence[int] | None = None,
    file: str | Path | None = None,
    tolerance: float = 0.01,
    bottom_stage_m: float | None = None,
    source: str | None = None,
    row_label: str = "line",
    volume_mismatch: Literal["error", "warn"] = "error",
    accept_hint: str = "pass volume_mismatch='warn' to accept it",
) -> StorageCurve:
    """A relation from a stage-area(-volume) survey table (SI values).

    Parameters
    ----------
    stage_m : array_like, shape (n,)
        Stages, m.
    area_m2 : array_like, shape (n,)
        Areas, m².
    volume_m3 : array_like, shape (n,), optional
        Volumes, m³. When given, the first sets the storage of the lowest level and every one is
        compared with the integral of the areas (:func:`check_volumes`); a mismatch beyond
        ``tolerance`` is an :class:`~lakebalance.errors.InputError` naming the worst line (a
        volume column in the wrong unit, or areas that do not belong to it), or with
        ``volume_mismatch="warn"`` a :class:`~lakebalance.errors.DataQualityWarning`. The
        relation itself always integrates the areas, so that dV/dh equals the area.
    integration : {"frustum", "average_end_area"}
        Integration rule and matching area interpolation.
    below, above : {"error", "clamp", "extend"}
        Policies outside the range.
    rows : sequence of int, optional
        File lines of the rows (1-based), for messages.
    file : str or Path, optional
        The source file, for messages.
    tolerance : float
        Allowed volume mismatch as a share of the full volume range (-).
    bottom_stage_m : float, optional
        Stage of the deepest point, m, below the lowest row: a level of zero area is added there.
    source : str, optional
        Description for reports (default: the file name).
    row_label : str
        What ``rows`` number (``"line"`` of a table, ``"feature"`` of a layer).
    volume_mismatch : {"error", "warn"}
        What a volume column beyond ``tolerance`` does.
    accept_hint : str
        How the caller accepts a mismatch, ending the error (the site file names its key).

    Returns
    -------
    StorageCurve

    Raises
    ------
    InputError
        See :func:`validate_relation`; also a ``bottom_stage_m`` not below the lowest row, and
        volumes inconsistent with the areas beyond ``tolerance`` (``volume_mismatch="error"``).
    """
    h, a, v = validate_relation(
        stage_m, area_m2, volume_m3, rows=rows, file=file, row_label=row_label
    )
    row_list = None if rows is None else list(rows)
    if row_list is not None and np.asarray(stage_m, dtype=float).ravel()[0] > h[0]:
        row_list = row_list[::-1]  # the table was listed from the top down
    check = None
    base = 0.0
    if v is not None:
        check = check_volumes(h, a, v, integration=integration, tolerance=tolerance, rows=row_list)
        base = float(v[0])
        if not check.ok and volume_mismatch == "error":
            worst = check.worst_index
            raise InputError(
                f"{check.summary()}; a volume column in another unit than declared, or areas "
                f"and volumes of different surveys? {accept_hint}",
                file=file,
                line=None if row_list is None or row_label != "line" else row_list[worst],
                column="volume",
            )
        if not check.ok:
            where = f"{file}: " if file is not None else ""
            warnings.warn(where + check.summary(), DataQualityWarning, stacklevel=2)
    if bottom_stage_m is not None:
        if not bottom_stage_m < h[0]:
            raise InputError(
                f"the bottom stage {bottom_stage_m:g} m must lie below the lowest level {h[0]:g} m",
                file=file,
            )
        if a[0] > 0:
            sub = integrate_area([bottom_stage_m, h[0]], [0.0, a[0]], integration)[-1]
            h = np.concatenate([[bottom_stage_m], h])
            a = np.concatenate([[0.0], a])
            base -= float(sub)
    return StorageCurve(
        h,
        a,
        base + integrate_area(h, a, integration),
        below=below,
        above=above,
        integration=integration,
        source=source if source is not None else ("" if file is None else str(file)),
        check=check,
    )


def storage_from_outline(
    outline_area_m2: float,
    outline_stage_m: float,
    max_depth_m: float,
    shape_exponent: float = 1.0,
    *,
    levels: int = 400,
    integration: Integration = "frustum",
    below: Policy = "clamp",
    above: Policy = "extend",
    source: str = "",
    warn: bool = True,
) -> StorageCurve:
    """An approximate relation from the shoreline area, the greatest depth and a basin shape.

    Parameters
    ----------
    outline_area_m2 : float
        Area enclosed by the shoreline outline, m².
    outline_stage_m : float
        Stage of that shoreline, m.
    max_depth_m : float
        Depth of the deepest point below the shoreline, m.
    shape_exponent : float
        Basin shape p > 0 (-): 1 gives a paraboloid-like bowl (area linear in depth),
        2 a cone (area quadratic), large p a flat-bottomed basin with steep sides.
    levels : int
        Number of levels sampled between bottom and shoreline (more near the bottom).
    integration, below, above, source
        As for :func:`storage_from_table`.
    warn : bool
        Warn :class:`~lakebalance.errors.ApproximationWarning` (default True).

    Returns
    -------
    StorageCurve
        Marked ``approximate``; its volume at the shoreline is within 0.1% of the analytic
        :math:`A_0 D / (p + 1)` for 0.3 <= p <= 5 with the default levels.

    Notes
    -----
    :math:`A(z) = A_0 \\left((z - z_b)/D\\right)^p` for :math:`z_b \\le z \\le z_b + D`,
    :math:`V(z) = A_0 D/(p+1) \\left((z - z_b)/D\\right)^{p+1}` (integral of the area, from memory
    of elementary calculus). The levels are spaced by the square of a regular grid so that the
    steep part near the bottom is resolved.
    """
    for name, value in (
        ("outline area", outline_area_m2),
        ("maximum depth", max_depth_m),
        ("shape exponent", shape_exponent),
    ):
        if not (np.isfinite(value) and value > 0):
            raise InputError(f"{name} must be a positive number, got {value!r}")
    if warn:
        warnings.warn(
            "the storage relation is approximated from an outline, a maximum depth and a basin "
            f"shape exponent ({shape_exponent:g}); a bathymetric survey is needed for volumes "
            "that can be relied on",
            ApproximationWarning,
            stacklevel=2,
        )
    t = np.linspace(0.0, 1.0, int(levels)) ** 2  # relative height above the bottom (-)
    z_bottom = outline_stage_m - max_depth_m
    h = z_bottom + max_depth_m * t
    a = outline_area_m2 * t**shape_exponent
    return StorageCurve.from_areas(
        h,
        a,
        integration=integration,
        below=below,
        above=above,
        source=source or "outline approximation",
        approximate=True,
    )


def compare_curves(
    first: StorageCurve, second: StorageCurve, step_m: float = 0.05
) -> dict[str, np.ndarray | float]:
    """Two relations of one lake side by side over the stages both cover.

    Volumes are compared as storage above the lowest common stage, since two surveys rarely
    share the storage they assign to their lowest level.

    Parameters
    ----------
    first, second : StorageCurve
        The relations (e.g. a survey table and the contours it was drawn from).
    step_m : float
        Stage step of the comparison, m.

    Returns
    -------
    dict
        ``stage_m`` (m), ``area_first_m2``, ``area_second_m2`` (m²), ``volume_first_m3``,
        ``volume_second_m3`` (m³ above the lowest common stage), and the largest differences
        ``max_area_difference`` and ``max_volume_difference`` as shares (-) of the first
        relation's area and volume at the top of the common range.

    Raises
    ------
    InputError
        When the two relations share no stage range.
    """
    lo = max(first.min_stage_m, second.min_stage_m)
    hi = min(first.max_stage_m, second.max_stage_m)
    if not hi > lo:
        raise InputError(
            f"the two storage relations share no stage range ({first.source}: "
            f"{first.min_stage_m:g} to {first.max_stage_m:g} m; {second.source}: "
            f"{second.min_stage_m:g} to {second.max_stage_m:g} m)"
        )
    grid = np.arange(np.ceil(lo / step_m - 1e-9), np.floor(hi / step_m + 1e-9) + 1) * step_m
    grid = grid[(grid > lo + 1e-9) & (grid < hi - 1e-9)]
    h = np.concatenate([[lo], grid, [hi]])
    a1, a2 = first.area(h), second.area(h)
    v1 = first.volume(h) - first.volume(lo)
    v2 = second.volume(h) - second.volume(lo)
    return {
        "stage_m": h,
        "area_first_m2": a1,
        "area_second_m2": a2,
        "volume_first_m3": v1,
        "volume_second_m3": v2,
        "max_area_difference": float(np.max(np.abs(a2 - a1)) / a1[-1]),
        "max_volume_difference": float(np.max(np.abs(v2 - v1)) / v1[-1]),
    }
