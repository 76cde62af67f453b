"""The laws of one lake, shared by the dynamics and the drawdown forecast.

:class:`LakeLaws` bundles what both need of a lake: area and volume of a stage, the outlet's
discharge (or none), the net seepage law (or none), the named levels and the stage range over
which the laws hold. It replaces the argument groups (area, volume, outflow, seepage, levels)
that the two used to pass around. Analytic laws (plain functions) test the computations without
a site file; :meth:`LakeLaws.from_fits` builds them from a fitted storage relation, rating and
seepage law.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Any, Literal

import numpy as np

__all__ = ["LakeLaws"]

StageFn = Callable[[np.ndarray], np.ndarray]
Policy = Literal["error", "clamp", "extend"]


@dataclass(frozen=True, eq=False)
class LakeLaws:
    """A lake reduced to its stage-dependent laws.

    Parameters
    ----------
    area : callable
        Lake area (m²) of an array of stages (m).
    volume : callable
        Storage (m³) of an array of stages (m).
    stage_range_m : (float, float)
        Lowest and highest surveyed stage (m): the range where area and volume are known.
    outflow : callable, optional
        Outlet discharge (m³/s, spillway included) of an array of stages (m); None for a lake
        without an outlet.
    seepage : callable, optional
        Net loss to groundwater (m³/s, positive leaving) of an array of stages (m).
    levels : mapping of str to float
        Named stages, m on the gauge datum.
    below, above : {"error", "clamp", "extend"}
        What the storage relation does below and above its surveyed range.
    rating : RatingFit, optional
        The fitted rating behind ``outflow``, for what-ifs and sampled ratings.
    """

    area: StageFn
    volume: StageFn
    stage_range_m: tuple[float, float]
    outflow: StageFn | None = None
    seepage: StageFn | None = None
    levels: Mapping[str, float] = field(default_factory=dict)
    below: Policy = "clamp"
    above: Policy = "extend"
    rating: Any = field(default=None, repr=False)

    @classmethod
    def from_fits(
        cls,
        storage: Any,
        rating: Any = None,
        seepage: Any = None,
        levels: Mapping[str, float] | None = None,
    ) -> LakeLaws:
        """Laws from a :class:`~lakebalance.storage.StorageCurve`, a fitted rating (or None) and
        a seepage fit (or None; its ``rate_m3s``)."""

        lo, hi = float(storage.min_stage_m), float(storage.max_stage_m)
        low = lo if storage.below == "error" else -np.inf
        high = hi if storage.above == "error" else np.inf

        # Days outside the relation were reported where the record was checked; under an "error"
        # policy a checked record's in-day path may still dip a little past the end level
        # between its boundaries (the quadratic through them and the daily mean): held there.
        def area(h):
            return storage.area(np.clip(h, low, high), warn=False)

        def volume(h):
            return storage.volume(np.clip(h, low, high), warn=False)

        return cls(
            area=area,
            volume=volume,
            stage_range_m=(float(storage.min_stage_m), float(storage.max_stage_m)),
            outflow=None if rating is None else rating.discharge,
            seepage=None if seepage is None else seepage.rate_m3s,
            levels=dict(levels or {}),
            below=storage.below,
            above=storage.above,
            rating=rating,
        )

    @property
    def min_stage_m(self) -> float:
        """Lowest stage of the storage relation, m."""
        return float(self.stage_range_m[0])

    @property
    def max_stage_m(self) -> float:
        """Highest surveyed stage of the storage relation, m."""
        return float(self.stage_range_m[1])

    def outflow_m3s(self, stage_m: np.ndarray) -> np.ndarray:
        """Outlet discharge (m³/s) at ``stage_m`` (m); zero without an outlet."""
        h = np.asarray(stage_m, dtype=float)
        return np.zeros_like(h) if self.outflow is None else np.asarray(self.outflow(h), float)

    def without_seepage(self) -> LakeLaws:
        """The same laws with no seepage law."""
        return replace(self, seepage=None)
