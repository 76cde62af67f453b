"""Repeat surveys: several dated stage–area–storage relations of one basin, interpolated in time.

A basin silts up between surveys; each survey is a :class:`~lakebalance.storage.StorageCurve` on
its date. Between two surveys the relation of day t is the linear interpolation in time of the
two, for volume and area alike::

    V(h, t) = (1 − w) V₁(h) + w V₂(h),   A(h, t) = (1 − w) A₁(h) + w A₂(h),
    w = (t − t₁) / (t₂ − t₁)

(so dV/dh = A holds on every day), held at the first survey before it and at the last after it.
This is exact for a deposit that grows linearly in time and whose volume below each stage is
linear in the deposit's amount, and close for a thin uniform deposit on the bed (the usual
assumption between reservoir resurveys: a constant sedimentation rate; common practice, no
source). The balance closes each day with that day's relation, so that sediment filling the
basin is not read as a storage change.

Pure: numpy and pandas only.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .results import Summary

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from .storage import StorageCurve

__all__ = ["DatedStorage", "DatedRelation"]


class DatedRelation:
    """A stage function that changes in time: ``f(h)`` is today's (the latest), ``f.on_days(h,
    days)`` that of each day. The balance (:func:`lakebalance.balance.close_daily`) evaluates
    it day by day; everything else sees the latest relation."""

    def __init__(self, latest, on_days) -> None:
        self._latest = latest
        self.on_days = on_days

    def __call__(self, stage_m):
        return self._latest(stage_m)


@dataclass(frozen=True, eq=False)
class DatedStorage:
    """Dated storage relations of one basin, interpolated linearly in time.

    Parameters
    ----------
    dates : sequence of str
        ISO dates of the surveys, strictly increasing.
    curves : sequence of StorageCurve
        The relation of each survey (same gauge datum).

    Notes
    -----
    :meth:`volume` and :meth:`area` take the stage and the days; a stage array of shape (n,) or
    (n, k) is matched with n days (one day per row).
    """

    dates: tuple[str, ...]
    curves: tuple[StorageCurve, ...]

    def __post_init__(self) -> None:
        import pandas as pd

        if len(self.dates) != len(self.curves) or len(self.curves) < 1:
            raise ValueError("one date per survey, at least one survey")
        t = pd.DatetimeIndex([pd.Timestamp(d) for d in self.dates])
        if not t.is_monotonic_increasing or t.has_duplicates:
            raise ValueError(f"survey dates must be strictly increasing, got {list(self.dates)}")
        object.__setattr__(self, "dates", tuple(str(d)[:10] for d in self.dates))
        object.__setattr__(self, "curves", tuple(self.curves))

    # ---- time weights ----------------------------------------------------------------------
    def weights(self, days: pd.DatetimeIndex | Sequence) -> np.ndarray:
        """Weight of each survey on each day, shape (days, surveys); rows sum to 1."""
        import pandas as pd

        t = pd.DatetimeIndex(pd.to_datetime(list(days) if not hasattr(days, "asi8") else days))
        x = t.as_unit("ns").asi8.astype(float)
        knots = (
            pd.DatetimeIndex([pd.Timestamp(d) for d in self.dates]).as_unit("ns").asi8.astype(float)
        )
        k = len(knots)
        w = np.zeros((x.size, k))
        if k == 1:
            w[:, 0] = 1.0
            return w
        for j in range(k):
            e = np.zeros(k)
            e[j] = 1.0
            w[:, j] = np.interp(x, knots, e)  # hat functions, held flat beyond the ends
        return w

    def _combine(self, method: str, stage_m: np.ndarray, days) -> np.ndarray:
        h = np.asarray(stage_m, dtype=float)
        w = self.weights(days)  # (n, K)
        if h.shape[0] != w.shape[0]:
            raise ValueError(f"{h.shape[0]} stages for {w.shape[0]} days")
        out = np.zeros(h.shape)
        shape = (-1,) + (1,) * (h.ndim - 1)
        for j, c in enumerate(self.curves):
            wj = w[:, j]
            if not np.any(wj):
                continue
            out += wj.reshape(shape) * np.asarray(getattr(c, method)(h, warn=False), dtype=float)
        return out

    def volume(self, stage_m: np.ndarray, days) -> np.ndarray:
        """Storage (m³) at ``stage_m`` (m) on ``days``, each day's interpolated relation."""
        return self._combine("volume", stage_m, days)

    def area(self, stage_m: np.ndarray, days) -> np.ndarray:
        """Lake area (m²) at ``stage_m`` (m) on ``days``."""
        return self._combine("area", stage_m, days)

    @property
    def latest(self) -> StorageCurve:
        """The relation of the last survey (the basin as it is now)."""
        return self.curves[-1]

    # ---- capacity --------------------------------------------------------------------------
    def capacity(self, stage_m: float, on: str) -> float:
        """Storage at ``stage_m`` (m) on date ``on`` (the interpolated relation), m³.

        The storage of each relation counts from its own zero (the empty basin of its survey),
        so that what the sediment took is lost capacity.
        """
        return float(self.volume(np.array([float(stage_m)]), [on])[0])

    def capacity_lost(self, stage_m: float) -> list[dict]:
        """Capacity at ``stage_m`` (m, e.g. the spillway crest) lost between consecutive
        surveys: from, to, capacity at each (m³), lost (m³), its share of the first (-) and the
        mean rate (m³ per year)."""
        import pandas as pd

        out = []
        for (d1, c1), (d2, c2) in zip(
            zip(self.dates, self.curves, strict=True),
            zip(self.dates[1:], self.curves[1:], strict=True),
            strict=False,
        ):
            v1 = float(c1.volume(np.array([stage_m]), warn=False)[0])
            v2 = float(c2.volume(np.array([stage_m]), warn=False)[0])
            years = (pd.Timestamp(d2) - pd.Timestamp(d1)).days / 365.25
            out.append(
                {
                    "from": d1,
                    "to": d2,
                    "stage_m": float(stage_m),
                    "capacity_from_m3": v1,
                    "capacity_to_m3": v2,
                    "lost_m3": v1 - v2,
                    "lost_share": (v1 - v2) / v1 if v1 > 0 else float("nan"),
                    "lost_m3_per_year": (v1 - v2) / years if years > 0 else float("nan"),
                }
            )
        return out

    def volume_relation(self, clip: tuple[float, float] | None = None) -> DatedRelation:
        """Storage as a :class:`DatedRelation` (stage clipped to ``clip`` when given, m)."""
        lo, hi = clip if clip is not None else (-np.inf, np.inf)
        latest = self.latest
        return DatedRelation(
            lambda h: latest.volume(np.clip(h, lo, hi), warn=False),
            lambda h, days: self.volume(np.clip(h, lo, hi), days),
        )

    def area_relation(self, clip: tuple[float, float] | None = None) -> DatedRelation:
        """Area as a :class:`DatedRelation` (stage clipped to ``clip`` when given, m)."""
        lo, hi = clip if clip is not None else (-np.inf, np.inf)
        latest = self.latest
        return DatedRelation(
            lambda h: latest.area(np.clip(h, lo, hi), warn=False),
            lambda h, days: self.area(np.clip(h, lo, hi), days),
        )

    def summary(self, stage_m: float | None = None) -> Summary:
        """The surveys and, at ``stage_m`` (default: the top of the last survey), the capacity
        lost between them."""
        h = float(self.latest.max_stage_m if stage_m is None else stage_m)
        lines = [f"{len(self.dates)} surveys: {', '.join(self.dates)}"]
        for row in self.capacity_lost(h):
            lines.append(
                f"  {row['from']} to {row['to']}: capacity at {h:.2f} m from "
                f"{row['capacity_from_m3']:,.0f} to {row['capacity_to_m3']:,.0f} m³, lost "
                f"{row['lost_m3']:,.0f} m³ ({100 * row['lost_share']:.2f} %, "
                f"{row['lost_m3_per_year']:,.0f} m³/year)"
            )
        return Summary("\n".join(lines), "storage surveys")

    def to_dict(self, stage_m: float | None = None) -> dict:
        """The surveys and the capacity lost between them (m³)."""
        h = float(self.latest.max_stage_m if stage_m is None else stage_m)
        return {
            "dates": list(self.dates),
            "sources": [c.source for c in self.curves],
            "capacity_lost": self.capacity_lost(h),
        }
