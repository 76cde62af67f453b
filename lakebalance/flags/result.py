"""The flags' result objects: one :class:`Flag` and the :class:`Flags` of a record (the result
protocol of :mod:`lakebalance.results`: ``summary()``, ``to_dict()``, ``to_frame()``)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np

from ..records import Correction
from ..results import Summary
from .options import FlagOptions

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd


FlagKind = Literal["spike", "datum_shift", "offset_period", "stuck", "level_shift", "run", "drift"]


@dataclass(frozen=True)
class Flag:
    """One dated, sized and explained flag.

    Attributes
    ----------
    kind : {"spike", "datum_shift", "offset_period", "stuck", "level_shift", "run", "drift"}
        What the detectors saw (an offset period is a stage read off between its two ends; a
        stuck sensor repeated its reading while the balance says the lake moved).
    start, end : str
        ISO dates of the first and last flagged day.
    series : str
        ``"residual"`` or ``"stage"`` (the record the evidence comes from).
    volume_m3 : float
        Signed unexplained volume over the flag (m³; positive = gain): the sum of the residual's
        departure from its usual level. For a stage spike or datum shift, the storage jump the
        stage step implies on its first day.
    depth_mm : float
        ``volume_m3`` over the mean lake area of the flagged days (mm).
    rate_m3_per_day : float
        Mean departure per flagged day (m³/d).
    significance : float
        |volume| / its 1-σ uncertainty (-), from the balance's uncertainty band when one was
        given, else from the noise of the residual itself (see :attr:`Flags.band_source`).
    significant : bool
        ``significance`` above the two-sided 95 % normal quantile (1.96).
    cause : str
        Likely cause in a few words ("gauge datum shift", "unmetered withdrawal", ...).
    hint : str
        One plain sentence on the likely cause and what to check.
    evidence : tuple of str
        The facts behind the hint.
    magnitude_m : float or None
        Stage step (m) of a datum shift or stage spike.
    correction : Correction or None
        The ``[[correction]]`` a user may accept (datum shifts); never applied here.
    accepted : bool
        A matching correction is already in the site file.
    """

    kind: FlagKind
    start: str
    end: str
    series: str
    volume_m3: float
    depth_mm: float
    rate_m3_per_day: float
    significance: float
    significant: bool
    cause: str
    hint: str
    evidence: tuple[str, ...] = ()
    magnitude_m: float | None = None
    correction: Correction | None = None
    accepted: bool = False

    @property
    def days(self) -> int:
        """Number of calendar days from ``start`` to ``end`` inclusive."""
        import pandas as pd

        return int((pd.Timestamp(self.end) - pd.Timestamp(self.start)).days) + 1

    def correction_toml(self) -> str:
        """The ``[[correction]]`` table a user would paste into the site file ('' when none)."""
        c = self.correction
        if c is None:
            return ""
        lines = [
            "[[correction]]",
            f'series = "{c.series}"',
            f'kind = "{c.kind}"',
            f'start = "{c.start}"',
        ]
        if c.end:
            lines.append(f'end = "{c.end}"')
        lines += [f"value = {c.value:.4f}", f'reason = "{c.reason}"']
        return "\n".join(lines)


@dataclass(frozen=True, eq=False)
class Flags:
    """All flags of one record, with the settings and scales behind them.

    ``items`` are ordered by start date. ``baseline_m3`` is the usual level of the residual
    (m³/d, the length-weighted median of segment means), ``noise_m3`` the robust day-to-day scale
    (m³/d), ``ratio`` the long-run variance ratio (-), ``change_points`` the ISO dates where a
    level-shift segment begins, ``corrections`` the ``[[correction]]`` tables of the site file in
    force (already applied to the records), ``band_source`` says what the significance is
    measured against.
    """

    items: tuple[Flag, ...]
    residual_m3: pd.Series = field(repr=False)
    baseline_m3: float = float("nan")
    noise_m3: float = float("nan")
    ratio: float = 1.0
    penalty: float = float("nan")
    change_points: tuple[str, ...] = ()
    corrections: tuple[Correction, ...] = ()
    band_source: str = "residual noise"
    usual_level: str = ""
    options: FlagOptions = field(default_factory=FlagOptions)

    def __len__(self) -> int:
        return len(self.items)

    def __iter__(self):
        return iter(self.items)

    def of_kind(self, kind: str) -> tuple[Flag, ...]:
        """The flags of one kind."""
        return tuple(f for f in self.items if f.kind == kind)

    def mask(self, index: pd.DatetimeIndex | None = None) -> pd.Series:
        """True on every day covered by a flag (index defaults to the residual's)."""
        import pandas as pd

        idx = self.residual_m3.index if index is None else index
        out = np.zeros(len(idx), dtype=bool)
        values = idx.values
        for f in self.items:  # loop over flags
            out |= (values >= np.datetime64(f.start)) & (values <= np.datetime64(f.end))
        return pd.Series(out, index=idx, name="flagged")

    def to_frame(self) -> pd.DataFrame:
        """One row per flag (columns as :class:`Flag`; evidence joined with '; ')."""
        import pandas as pd

        rows = []
        for f in self.items:
            rows.append(
                {
                    "kind": f.kind,
                    "start": f.start,
                    "end": f.end,
                    "days": f.days,
                    "series": f.series,
                    "volume_m3": f.volume_m3,
                    "depth_mm": f.depth_mm,
                    "rate_m3_per_day": f.rate_m3_per_day,
                    "significance": f.significance,
                    "significant": f.significant,
                    "cause": f.cause,
                    "hint": f.hint,
                    "evidence": "; ".join(f.evidence),
                    "magnitude_m": f.magnitude_m,
                    "accepted": f.accepted,
                }
            )
        cols = [
            "kind",
            "start",
            "end",
            "days",
            "series",
            "volume_m3",
            "depth_mm",
            "rate_m3_per_day",
            "significance",
            "significant",
            "cause",
            "hint",
            "evidence",
            "magnitude_m",
            "accepted",
        ]
        return pd.DataFrame(rows, columns=cols)

    def to_dict(self) -> dict:
        """A JSON-ready summary (used by ``lakebalance flags --json``)."""
        idx = self.residual_m3.index
        return {
            "period": [
                None if len(idx) == 0 else idx[0].date().isoformat(),
                None if len(idx) == 0 else idx[-1].date().isoformat(),
            ],
            "baseline_m3_per_day": self.baseline_m3,
            "usual_level": self.usual_level,
            "noise_m3_per_day": self.noise_m3,
            "long_run_variance_ratio": self.ratio,
            "change_point_penalty": self.penalty,
            "change_points": list(self.change_points),
            "significance_against": self.band_source,
            "corrections_in_force": [
                {
                    "series": c.series,
                    "kind": c.kind,
                    "start": c.start,
                    "end": c.end,
                    "value": c.value,
                    "reason": c.reason,
                }
                for c in self.corrections
            ],
            "flags": [
                {
                    **{
                        k: getattr(f, k)
                        for k in (
                            "kind",
                            "start",
                            "end",
                            "series",
                            "volume_m3",
                            "depth_mm",
                            "rate_m3_per_day",
                            "significance",
                            "significant",
                            "cause",
                            "hint",
                            "magnitude_m",
                            "accepted",
                        )
                    },
                    "days": f.days,
                    "evidence": list(f.evidence),
                    "correction": f.correction_toml() or None,
                }
                for f in self.items
            ],
            "note": NOTE,
        }

    def summary(self) -> Summary:
        """Plain text: one paragraph per flag, then the corrections in force."""
        idx = self.residual_m3.index
        out = []
        if len(idx):
            out.append(
                f"Residual flags, {idx[0].date()} to {idx[-1].date()}: {len(self.items)} flag(s); "
                f"usual residual {self.usual_level or f'{self.baseline_m3:,.0f} m³/d'}, typical noise "
                f"{self.noise_m3:,.0f} m³/d; significance against the {self.band_source}."
            )
        for i, f in enumerate(self.items, 1):
            sig = "significant" if f.significant else "not significant"
            out.append(
                f"\n{i}. {f.kind} {f.start}"
                + ("" if f.end == f.start else f" to {f.end}")
                + f" ({f.days} d): {f.volume_m3:+,.0f} m³ ({f.depth_mm:+.1f} mm over the lake), "
                f"{f.significance:.1f} σ, {sig}.\n   Likely cause: {f.cause}. {f.hint}"
            )
            for e in f.evidence:
                out.append(f"   - {e}")
            if f.accepted:
                out.append("   Correction accepted in the site file (applied to the records).")
            elif f.correction is not None:
                out.append("   To accept the correction, add to the site file:")
                out.extend("     " + ln for ln in f.correction_toml().splitlines())
        if self.corrections:
            out.append("\nCorrections in force (from the site file, applied to the records):")
            for c in self.corrections:
                span = c.start + (f" to {c.end}" if c.end else " onwards")
                out.append(f"  - {c.series}: {c.kind} {c.value:+.4f} from {span}. {c.reason}")
        out.append("\n" + NOTE)
        return Summary("\n".join(out), "flags")

    def __str__(self) -> str:  # pragma: no cover - convenience
        return self.summary()


NOTE = (
    "Flags are statistical pointers for review, not findings of fault; they never alter the data. "
    "Where a flag bears on dam safety, public water supply or flood levels, confirm it on site and "
    "defer to local codes and a licensed professional."
)
