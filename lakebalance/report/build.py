"""The annual report of one site: every step run once, then HTML, CSV/XLSX tables and a JSON summary.

Every number shown in the HTML comes from the same rounded tables that are written to CSV, XLSX and
``summary.json``, so that the three always agree. A step that cannot run for this site (no outlet
gaugings, no weather for computed evaporation) is said in the report with its reason; the other
steps go on.
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..display import Formatter, Rule, count_of, header, percent
from ..errors import LakebalanceError
from ..stats import water_year_of
from ..units import SECONDS_PER_DAY
from ..vocabulary import TERMS
from .headline import (
    confirmed_corrections,
    confirmed_sentence,
    graded_numbers,
    graded_sentence,
    open_shifts,
    plan_outlook,
    residual_with,
    shift_sentences,
    survey_sentence,
)

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis import Lake

__all__ = ["Table", "Figure", "Section", "ReportResult", "REPORT_STEPS", "run_steps", "make_report"]


# --------------------------------------------------------------------------------------------
# Building blocks
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Table:
    """A table: SI values at full precision under unit-bearing column names (``residual_m3``).

    CSV, XLSX and JSON hold :attr:`frame` as it is; the HTML and the PDF show it through a
    :class:`~lakebalance.display.Formatter` (headers in words with the report's display unit,
    digits per quantity). ``omitted`` says why a table with nothing to show is left out.
    """

    id: str
    title: str
    frame: pd.DataFrame
    note: str = ""
    decimals: dict[str, int] = field(default_factory=dict)  # kept for callers; display rules rule
    omitted: str | None = None

    def _sample(self, column: str) -> Any:
        for v in self.frame[column]:
            if v is not None and not (isinstance(v, float) and math.isnan(v)):
                return v.item() if isinstance(v, np.generic) else v
        return None

    def rules(self, fmt: Formatter) -> list[Rule]:
        """The display rule of each column."""
        return [fmt.rule(c, self._sample(c)) for c in self.frame.columns]

    def headers(self, fmt: Formatter) -> list[str]:
        """The headers a person reads (words and display unit)."""
        return [fmt.header(c) for c in self.frame.columns]

    def cell(self, column: str, value: Any, fmt: Formatter | None = None) -> str:
        """The text of one cell, as the HTML shows it."""
        fmt = fmt or Formatter()
        return fmt.format(fmt.rule(column, self._sample(column)), _plain(value))

    def rows(self, fmt: Formatter | None = None) -> list[list[str]]:
        """All rows as text."""
        fmt = fmt or Formatter()
        rules = self.rules(fmt)
        return [
            [fmt.format(r, _plain(v)) for r, v in zip(rules, row, strict=True)]
            for row in self.frame.itertuples(index=False)
        ]

    def to_json(self, fmt: Formatter | None = None) -> dict[str, Any]:
        """Columns (SI names) and rows at full precision, numbers as numbers; with each column's
        header and display rule, so that a reader can check every number the HTML shows."""
        fmt = fmt or Formatter()
        rows = [[_plain(v) for v in row] for row in self.frame.itertuples(index=False)]
        return {
            "title": self.title,
            "columns": list(self.frame.columns),
            "headers": self.headers(fmt),
            "display": [r.to_dict() for r in self.rules(fmt)],
            "rows": rows,
        }


def _plain(v: Any) -> Any:
    """A cell as a JSON value: None for NaN, dates as ISO text, numpy scalars as Python ones."""
    if v is None:
        return None
    if isinstance(v, bool | np.bool_):
        return bool(v)
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, float | np.floating):
        return None if not math.isfinite(float(v)) else float(v)
    if isinstance(v, pd.Timestamp):
        return v.strftime("%Y-%m-%d")
    if v is pd.NA or v is pd.NaT:
        return None
    return v


#: Scaled column names some callers use, and the SI name and factor they become.
_SCALED = (("_1e3_m3", "_m3", 1e3), ("_1e6_m3", "_m3", 1e6), ("_ha", "_m2", 1e4))


def table(
    id: str,
    title: str,
    frame: pd.DataFrame,
    decimals: dict[str, int] | int = 0,
    note: str = "",
    *,
    empty_reason: str = "none of its values could be computed for this site",
) -> Table:
    """A :class:`Table` of SI values at full precision (``decimals`` is no longer used to round:
    the display rules of :mod:`lakebalance.display` choose the digits).

    Scaled columns (``_1e3_m3``, ``_ha``) are brought back to SI names and values. Numeric
    columns with no value at all are left out and named in the note; a table left with no
    number to show is marked ``omitted`` with ``empty_reason``.
    """
    frame = frame.copy()
    for c in list(frame.columns):
        for suffix, si, factor in _SCALED:
            if isinstance(c, str) and c.endswith(suffix):
                frame = frame.rename(columns={c: c[: -len(suffix)] + si})
                frame[c[: -len(suffix)] + si] = frame[c[: -len(suffix)] + si] * factor
                break
    for c in frame.columns:
        if pd.api.types.is_datetime64_any_dtype(frame[c]):
            frame[c] = frame[c].dt.strftime("%Y-%m-%d")
    numeric = [c for c in frame.columns[1:] if pd.api.types.is_numeric_dtype(frame[c])]
    if len(numeric) == 0 and frame.shape[1] > 1:
        numeric = []
    empty = [c for c in numeric if frame[c].isna().all()] if len(frame) else []
    omitted = None
    if empty:
        frame = frame.drop(columns=empty)
        left = ", ".join(header(c) for c in empty)
        note = (note + " " if note else "") + f"Left out, as no value could be computed: {left}."
        if len(empty) == len(numeric):
            omitted = f"The table '{title}' is left out: {empty_reason}."
    return Table(
        id=id,
        title=title,
        frame=frame.reset_index(drop=True),
        note=note,
        decimals=dict(decimals) if isinstance(decimals, dict) else {},
        omitted=omitted,
    )


@dataclass(frozen=True)
class Figure:
    """A figure as PNG bytes, with caption and alternative text."""

    id: str
    caption: str
    png: bytes
    alt: str


@dataclass(frozen=True)
class Section:
    """One section of the report."""

    id: str
    title: str
    paragraphs: tuple[str, ...] = ()
    tables: tuple[Table, ...] = ()
    figures: tuple[Figure, ...] = ()
    missing: tuple[str, ...] = ()


def _png(fig: Any) -> bytes:
    import io

    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110, metadata={"Software": None})
    plt.close(fig)
    return buf.getvalue()


def _fmt(x: float, decimals: int = 0) -> str:
    return "–" if x is None or not math.isfinite(x) else f"{x:,.{decimals}f}"


def formatter(run: Lake) -> Formatter:
    """The display of ``run``'s report: ``[report] units`` and the stage gauge's resolution
    (the stage series' ``resolution``, else 1 mm)."""
    from ..display import display_units
    from ..units import conversion

    spec = next(iter(run.site.series_of("stage")), None)
    resolution = 0.001
    if spec is not None and spec.resolution is not None:
        resolution = float(conversion(spec.units, "length", "stage").scale * spec.resolution)
    return Formatter(display_units(run.site.report.units), resolution)


# --------------------------------------------------------------------------------------------
# Running every step once
# --------------------------------------------------------------------------------------------
#: The steps a report shows, in the order they run.
REPORT_STEPS = (
    "storage",
    "rating",
    "evaporation",
    "balance",
    "flags",
    "seepage",
    "dynamics",
    "forecast",
    "yield",
)


def run_steps(lake: Lake, before_forecast: Any = None) -> list[str]:
    """Run every step of ``lake`` once (a step that cannot run keeps its reason) and return the
    warnings raised on the way, each once, as ``"Category: message"``. ``before_forecast`` (no
    arguments) is called before the forecast runs (e.g. to set where it starts)."""
    caught: list[str] = []
    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        lake.records  # noqa: B018 - the report cannot start without them
        for step in REPORT_STEPS:
            if step == "forecast" and before_forecast is not None:
                before_forecast()
            lake.get(step)
    for w in seen:
        text = f"{w.category.__name__}: {w.message}"
        if text not in caught:
            caught.append(text)
    return caught


# --------------------------------------------------------------------------------------------
# Choosing the year
# --------------------------------------------------------------------------------------------
def choose_year(daily_index: pd.DatetimeIndex, start_month: int, year: int | None) -> int:
    """The water year to report: ``year`` when the record covers it, else the last complete one."""
    labels = water_year_of(daily_index, start_month)
    present = sorted(set(labels.tolist()))
    if year is not None:
        if year not in present:
            raise LakebalanceError(
                f"water year {year} is not in the record ({present[0]}–{present[-1]})"
            )
        return year
    counts = pd.Series(labels).value_counts()
    complete = [y for y in present if counts[y] >= 365]
    return complete[-1] if complete else present[-1]


# --------------------------------------------------------------------------------------------
# Sections
# --------------------------------------------------------------------------------------------
_TERM_LABELS = {t.column: t.label for t in TERMS}


def _qa_section(run: Lake, year_days: pd.DatetimeIndex) -> Section:
    rec = run.records
    per_series = pd.DataFrame(
        [
            {
                "series": s.key,
                "file": Path(s.file).name,
                "units": s.declared_units,
                "first": s.first,
                "last": s.last,
                "days": s.days,
                "missing": s.missing,
                "flagged": s.flagged,
                "rejected": s.rejected,
            }
            for s in rec.series
        ]
    )
    accounting = pd.DataFrame(
        [
            {
                "file": Path(a.file).name,
                "series": a.series,
                "rows read": a.read,
                "used": a.used,
                "flagged": a.flagged,
                "rejected": a.rejected,
            }
            for a in rec.accounting
        ]
    )
    lo, hi = year_days[0].strftime("%Y-%m-%d"), year_days[-1].strftime("%Y-%m-%d")
    findings = [
        f
        for f in rec.findings
        if f.first is None or (f.first[:10] <= hi and (f.last or f.first)[:10] >= lo)
    ]
    finding_frame = pd.DataFrame(
        [
            {
                "series": f.series,
                "kind": f.kind,
                "first": (f.first or "")[:10],
                "last": (f.last or "")[:10],
                "count": f.count,
                "action": f.action,
                "detail": f.detail,
            }
            for f in findings
        ],
        columns=["series", "kind", "first", "last", "count", "action", "detail"],
    )
    tables = [
        table("qa-series", "Series loaded (whole record)", per_series),
        table("qa-accounting", "Row accounting: rows read = used + flagged + rejected", accounting),
    ]
    if len(finding_frame):
        tables.append(table("qa-findings", f"Data findings touching {lo} to {hi}", finding_frame))
    paragraphs = (
        f"{len(rec.series)} series were read; {len(rec.findings)} findings over the whole record, "
        f"{len(findings)} of them in the reported year. Flagged values are kept and marked; "
        "rejected rows are counted above and never silently dropped.",
    )
    return Section("qa", "Data quality", paragraphs=paragraphs, tables=tuple(tables))


def _provenance_dict(run: Lake) -> dict[str, Any]:
    from .provenance import provenance

    return provenance(run.site, {"balance": run.seed, "drawdown": run.seed + 1}).to_dict()


def _missing(run: Lake, *steps: str) -> tuple[str, ...]:
    return tuple(
        f"The {s} step could not run for this site: {run.reason(s)}"
        for s in steps
        if run.reason(s) is not None
    )


def _simulated_storage(daily: pd.DataFrame) -> pd.Series:
    """Storage (m³) from the measured terms alone, restarted from the observed storage after each
    day with a missing term: what the lake would have done if the residual were zero."""
    complete = daily["complete"].to_numpy(bool)
    measured = (daily["storage_change_m3"] - daily["residual_m3"]).to_numpy(float)
    start = daily["storage_start_m3"].to_numpy(float)
    out = np.full(len(daily), np.nan)
    # segments of consecutive complete days; each starts at the observed storage
    seg = np.cumsum(~complete)
    frame = pd.DataFrame({"seg": seg, "d": np.where(complete, measured, np.nan), "s0": start})
    frame = frame[complete]
    if len(frame):
        first = frame.groupby("seg")["s0"].transform("first")
        out[complete] = first.to_numpy() + frame.groupby("seg")["d"].cumsum().to_numpy()
    return pd.Series(out, index=daily.index)


def _stage_figure(run: Lake, days: pd.DatetimeIndex) -> Figure:
    from ..display import axis_label, convert
    from .style import PALETTE, date_axis, new_figure, shade_periods

    u = formatter(run).units
    d = run.get("balance").daily.loc[days[0] : days[-1]]
    sim_v = _simulated_storage(d)
    storage = run.get("storage")
    with warnings.catch_warnings(record=True) as outside:
        warnings.simplefilter("always")
        v = sim_v.to_numpy()
        if storage.below == "error" or storage.above == "error":  # drawn at the ends instead
            off = storage.volume_out_of_range(v) != 0
            if off.any():
                warnings.warn("simulated storage outside the relation", UserWarning, stacklevel=1)
            v = np.clip(v, storage.min_volume_m3, storage.max_volume_m3)
        sim_h = pd.Series(np.asarray(storage.stage(v), float), index=d.index)
    note = (
        " The simulated storage left the storage relation's range on some days; there its stage "
        f"follows the relation's '{run.get('storage').below}'/'{run.get('storage').above}' policy."
        if outside
        else ""
    )
    sim_h[sim_v.isna()] = np.nan
    fig, ax = new_figure(height=3.4)
    ax.plot(
        d.index,
        convert(d["stage_end_m"].to_numpy(), "length", u),
        color=PALETTE["observed"],
        label="observed (end of day)",
    )
    ax.plot(
        d.index,
        convert(sim_h.to_numpy(), "length", u),
        color=PALETTE["simulated"],
        ls="--",
        label="from measured terms only (residual = 0)",
    )
    periods = []
    if run.get("flags") is not None:
        for f in run.get("flags").items:
            s, e = pd.Timestamp(f.start), pd.Timestamp(f.end)
            if e >= d.index[0] and s <= d.index[-1]:
                periods.append((s, e + pd.Timedelta(days=1)))
    shade_periods(ax, periods, label="flagged residual")
    for name, level in sorted(run.site.levels.items(), key=lambda kv: kv[1]):
        lo, hi = np.nanmin(d["stage_end_m"]), np.nanmax(d["stage_end_m"])
        if lo - 1.0 <= level <= hi + 1.0:
            shown = float(convert(level, "length", u))
            ax.axhline(shown, color="#555555", lw=0.7, ls=":")
            ax.annotate(name, (d.index[0], shown), fontsize=7, va="bottom")
    ax.set_ylabel(axis_label("stage", "length", u, "on the gauge datum"))
    ax.set_xlabel("date")
    date_axis(ax)
    ax.legend(loc="best")
    return Figure(
        "stage",
        "Observed stage and the stage the measured terms alone would give (each stretch of "
        "complete days starts from the observed storage). Shaded: flagged residuals." + note,
        _png(fig),
        "Line chart of observed and simulated stage over the water year",
    )


def _components_figure(monthly: pd.DataFrame, units: Any = None) -> Figure:
    from ..display import SI, axis_label, convert
    from .style import PALETTE, new_figure

    u = units or SI

    def V(values: Any) -> np.ndarray:
        return convert(np.asarray(values, float), "volume", u)

    fig, ax = new_figure(height=3.6)
    x = np.arange(len(monthly))
    gains = [("inflow_m3", "inflow", "//"), ("rain_m3", "rain", "..")]
    losses = [
        ("evaporation_m3", "evaporation", "\\\\"),
        ("outflow_m3", "outflow", "xx"),
        ("withdrawal_m3", "withdrawal", "--"),
        ("release_m3", "release", "++"),
    ]
    for sign, terms in ((1.0, gains), (-1.0, losses)):  # gains stacked up, losses down
        bottom = np.zeros(len(monthly))
        for col, key, hatch in terms:
            v = sign * V(monthly[col].fillna(0).to_numpy())
            ax.bar(
                x,
                v,
                bottom=bottom,
                color=PALETTE[key],
                hatch=hatch,
                edgecolor="black",
                lw=0.3,
                label=key,
            )
            bottom += v
    ax.plot(x, V(monthly["storage_change_m3"].to_numpy()), "k-o", ms=3, label="storage change")
    ax.plot(
        x,
        V(monthly["residual_m3"].to_numpy()),
        color=PALETTE["residual"],
        ls="--",
        marker="s",
        ms=3,
        label="residual",
    )
    ax.axhline(0, color="black", lw=0.6)
    # one label a month, the year said under the first month of each year (concise, as a date axis)
    ax.set_xticks(
        x,
        [
            m.strftime("%b\n%Y") if i == 0 or m.month == 1 else m.strftime("%b")
            for i, m in enumerate(monthly.index)
        ],
    )
    ax.set_ylabel(axis_label("volume", "volume", u, "per month"))
    ax.legend(ncols=4, loc="upper center", bbox_to_anchor=(0.5, -0.3))
    return Figure(
        "components",
        "Monthly balance: gains above zero, losses below, storage change and residual as lines.",
        _png(fig),
        "Stacked bar chart of the monthly water-balance terms",
    )


def _cumulative_figure(run: Lake, days: pd.DatetimeIndex) -> Figure | None:
    from ..display import axis_label, convert
    from .style import PALETTE, date_axis, new_figure

    u = formatter(run).units

    def V(values: Any) -> np.ndarray:
        return convert(np.asarray(values, float), "volume", u)

    bal = run.get("balance")
    d = bal.daily.loc[days[0] : days[-1]]
    res = pd.Series(V(d["residual_m3"].where(d["complete"], 0.0).cumsum()), index=d.index)
    fig, ax = new_figure(height=3.2)
    if "cumulative_residual_p05_m3" in d:
        ax.fill_between(
            d.index,
            V(d["cumulative_residual_p05_m3"]),
            V(d["cumulative_residual_p95_m3"]),
            color=PALETTE["band"],
            alpha=0.4,
            hatch="...",
            edgecolor="#666666",
            lw=0,
            label="5–95 % band",
        )
    ax.plot(res.index, res, color=PALETTE["residual"], label="cumulative residual")
    ax.axhline(0, color="black", lw=0.6)
    ax.set_ylabel(axis_label("cumulative residual", "volume", u))
    ax.set_xlabel("date")
    date_axis(ax)
    ax.legend(loc="best")
    return Figure(
        "cumulative",
        "Cumulative unexplained residual over the water year (positive = unexplained gain), "
        "with its Monte Carlo band where computed.",
        _png(fig),
        "Line chart of the cumulative residual",
    )


def _storage_section(run: Lake) -> Section:
    if run.get("storage") is None:
        return Section("storage", "Stage–area–storage relation", missing=_missing(run, "storage"))
    from .figures_storage import storage_figure

    curve = run.get("storage")
    span = curve.max_stage_m - curve.min_stage_m
    step = max(0.1, round(span / 25, 1))
    tab = curve.table(step).copy()
    fig = storage_figure(curve, levels=dict(run.site.levels), units=formatter(run).units)
    fmt = formatter(run)
    paragraphs = [
        f"Built from the {curve.source or 'survey'} with {curve.stage_m.size} surveyed levels, "
        f"stage {fmt.value('stage_m', curve.min_stage_m)} to "
        f"{fmt.value('stage_m', curve.max_stage_m)}; "
        f"below the range: {curve.below}, above: {curve.above}."
    ]
    if getattr(curve, "check", None) is not None:
        paragraphs.append(curve.check.summary())
    return Section(
        "storage",
        "Stage–area–storage relation",
        paragraphs=tuple(paragraphs),
        tables=(
            table(
                "storage",
                f"Area and volume at {step:g} m steps of stage",
                tab,
            ),
        ),
        figures=(
            Figure(
                "storage",
                "Area and volume against stage; named levels dashed.",
                _png(fig),
                "Area and volume curves against stage",
            ),
        ),
    )


def _parameter_frame(
    names: Any, values: dict[str, float], stderr: dict[str, float], ci: dict[str, Any]
) -> pd.DataFrame:
    """One row per fitted parameter: value, standard error and 95 % interval (SI)."""
    return pd.DataFrame(
        {
            "parameter": list(names),
            "value": [values[n] for n in names],
            "stderr": [stderr[n] for n in names],
            "ci95_low": [ci[n][0] for n in names],
            "ci95_high": [ci[n][1] for n in names],
        }
    )


def _rating_section(run: Lake, year_stage: pd.Series) -> Section:
    if run.get("rating") is None:
        return Section("rating", "Outlet rating", missing=_missing(run, "rating"))
    from .figures_rating import rating_figure

    fit = run.get("rating")
    fixed = {n: p["fixed"] for n, p in fit.parameter_table().items()}
    params = _parameter_frame(fit.param_names, fit.params, fit.stderr, fit.conf_int())
    params["fixed"] = ["fixed" if fixed[n] else "fitted" for n in fit.param_names]
    lo, hi = fit.gauged_range
    h = year_stage.dropna().to_numpy()
    above = float(np.mean(h > hi)) * 100 if h.size else math.nan
    below = float(np.mean(h < lo)) * 100 if h.size else math.nan
    stage_max = float(np.nanmax(h)) if h.size else None
    fmt = formatter(run)
    fig = rating_figure(fit, stage_max, units=fmt.units)
    paragraphs = (
        f"Form {fit.form}, fitted to {fit.n} gaugings between {fmt.value('stage_m', lo)} and "
        f"{fmt.value('stage_m', hi)}; residual standard error {percent(fit.se_percent)}.",
        f"In the reported year the stage was above the highest gauging on {percent(above)} of "
        f"days and below the lowest on {percent(below)}; outflows there are extrapolated.",
    )
    return Section(
        "rating",
        "Outlet rating",
        paragraphs=paragraphs,
        tables=(
            table(
                "rating",
                "Rating parameters, in the SI units of the fitted law, with 95 % confidence "
                "intervals",
                params,
            ),
        ),
        figures=(
            Figure(
                "rating",
                "Gaugings, fitted rating and its 95 % confidence and "
                "prediction bands, on linear and log axes.",
                _png(fig),
                "Rating curve with gaugings",
            ),
        ),
    )


def _evaporation_section(run: Lake, days: pd.DatetimeIndex) -> Section:
    if run.get("evaporation") is None:
        return Section("evaporation", "Evaporation", missing=_missing(run, "evaporation"))
    ev = run.get("evaporation")
    monthly = ev.monthly("mm")
    monthly = monthly[
        (monthly.index.start_time >= days[0]) & (monthly.index.start_time <= days[-1])
    ]
    frame = monthly.copy()
    frame.insert(0, "month", [p.strftime("%Y-%m") for p in frame.index])
    methods = [c for c in ev.by_method.columns]
    frame = frame[["month", *methods, "days", "filled_days"]]
    frame.columns = ["month", *[f"{m}_mm" for m in methods], "days", "filled_days"]
    frame["days"] = frame["days"].astype(int)
    frame["filled_days"] = frame["filled_days"].astype(int)
    paragraphs = [
        f"Lake evaporation in the balance: {ev.method}. Every method the weather allows "
        "is shown beside it (monthly totals, mm)."
    ]
    paragraphs += list(ev.notes)
    return Section(
        "evaporation",
        "Evaporation",
        paragraphs=tuple(paragraphs),
        tables=(table("evaporation", "Monthly lake evaporation by method (mm)", frame, 1),),
    )


def _balance_tables(run: Lake, year: int) -> tuple[Table, Table, pd.DataFrame]:
    bal = run.get("balance")
    wy = bal.water_years().reset_index()
    cols = [
        "water_year",
        "complete_days",
        "inflow_m3",
        "rain_m3",
        "evaporation_m3",
        "outflow_m3",
        "withdrawal_m3",
        "release_m3",
        "storage_change_m3",
        "residual_m3",
    ]
    band_cols = [c for c in ("residual_p05_m3", "residual_p95_m3") if c in wy]
    annual = wy[cols + band_cols].copy()
    annual["residual_mm"] = wy["residual_mm"]
    annual["closure_error_pct"] = wy["closure_error_pct"]
    if "p_nonzero" in wy:
        annual["nonzero_confidence_pct"] = 100.0 * wy["p_nonzero"]
    annual_t = table(
        "annual",
        "Water-year balance (residual also as a depth over the mean lake area)",
        annual,
        note="Residual = observed storage change minus the sum of the measured terms; positive "
        "is an unexplained gain. The confidence that the residual is not zero comes from the "
        "Monte Carlo draws of the measured terms. Totals over complete days only.",
    )
    m = bal.monthly()
    keys = water_year_of(m.index, bal.water_year_start)
    m = m[keys == year]
    monthly = pd.DataFrame({"month": [t.strftime("%Y-%m") for t in m.index]})
    monthly["complete_days"] = m["complete_days"].to_numpy()
    for c in cols[2:] + [c for c in ("residual_p05_m3", "residual_p95_m3") if c in m]:
        monthly[c] = m[c].to_numpy()
    monthly["residual_mm"] = m["residual_mm"].to_numpy()
    monthly_t = table("monthly", f"Monthly balance, water year {year}", monthly)
    return annual_t, monthly_t, m


def _balance_section(run: Lake, year: int, days: pd.DatetimeIndex) -> Section:
    if run.get("balance") is None:
        return Section("balance", "Water balance", missing=_missing(run, "balance"))
    annual_t, monthly_t, m = _balance_tables(run, year)
    figures = [_stage_figure(run, days), _components_figure(m, formatter(run).units)]
    cum = _cumulative_figure(run, days)
    if cum is not None:
        figures.append(cum)
    # how the numbers were made (quadrature, draws, error settings) goes to the provenance
    paragraphs = [n for n in run.get("balance").notes if not is_method_note(n)]
    return Section(
        "balance",
        "Water balance",
        paragraphs=tuple(paragraphs),
        tables=(annual_t, monthly_t),
        figures=tuple(figures),
    )


_METHOD_WORDS = re.compile(
    r"quadrature|monte carlo|draws|covariance|day-boundary|relative errors|integrated along",
    re.I,
)


def is_method_note(note: str) -> bool:
    """Whether a step's note says how the numbers were computed (numerical method, Monte Carlo
    settings) rather than something about the lake or its records: such notes are listed with
    the provenance, not in the text a client reads first."""
    return bool(_METHOD_WORDS.search(note))


def _flags_section(run: Lake, days: pd.DatetimeIndex) -> Section:
    if run.get("flags") is None:
        return Section("flags", "Unexplained residuals", missing=_missing(run, "flags", "balance"))
    lo, hi = days[0].strftime("%Y-%m-%d"), days[-1].strftime("%Y-%m-%d")
    items = [f for f in run.get("flags").items if f.start <= hi and f.end >= lo]
    frame = pd.DataFrame(
        [
            {
                "start": f.start,
                "end": f.end,
                "kind": f.kind,
                "volume_m3": f.volume_m3,
                "depth_mm": f.depth_mm,
                "significance": f.significance,
                "likely cause": f.cause,
                "accepted correction": "yes" if f.accepted else "no",
            }
            for f in items
        ],
        columns=[
            "start",
            "end",
            "kind",
            "volume_m3",
            "depth_mm",
            "significance",
            "likely cause",
            "accepted correction",
        ],
    )
    paragraphs = [
        f"{len(run.get('flags').items)} flags over the whole record, {len(items)} touching the reported "
        "year. Flags never change the data; a correction is applied only when it is accepted in "
        "the site file."
    ]
    paragraphs += [f"{f.start} to {f.end}: {f.hint}" for f in items if f.significant][:12]
    lasting = [
        f
        for f in run.get("flags").items
        if f.kind in ("datum_shift", "level_shift") and f.start < lo and not f.accepted
    ]
    for f in lasting:
        text = (
            f"A {f.kind.replace('_', ' ')} flagged from {f.start} has not been accepted as a "
            "correction; if real, it still biases this year's storage and outflow terms."
        )
        if f.correction is not None:
            text += (
                f" To accept it, add to the site file: [[correction]] series = "
                f'"{f.correction.series}", start = {f.correction.start}, '
                f"value = {f.correction.value:+.3f}."
            )
        paragraphs.append(text)
    if run.get("flags").corrections:
        paragraphs.append(
            "Corrections accepted in the site file and applied: "
            + "; ".join(
                f"{c.series} {c.value:+g} from {c.start} ({c.reason or 'no reason given'})"
                for c in run.get("flags").corrections
            )
        )
    tables = ()
    if len(frame):
        tables = (
            table(
                "flags",
                f"Flags touching water year ({lo} to {hi})",
                frame,
            ),
        )
    return Section("flags", "Unexplained residuals", paragraphs=tuple(paragraphs), tables=tables)


def _seepage_section(run: Lake) -> Section:
    if run.get("seepage") is None:
        return Section("seepage", "Seepage", missing=_missing(run, "seepage", "balance"))
    s = run.get("seepage")
    rates = s.rate_table(levels=dict(run.site.levels))
    keep = [
        "name",
        "stage_m",
        "m3_per_day",
        "m3_per_day_low",
        "m3_per_day_high",
        "L_per_s",
        "mm_per_day",
        "within_fitted_stages",
    ]
    rates = rates[keep].copy()
    rates["within_fitted_stages"] = np.where(rates["within_fitted_stages"], "yes", "no")
    rates = pd.DataFrame(
        {
            "name": rates["name"],
            "stage_m": rates["stage_m"],
            "seepage_m3s": rates["m3_per_day"] / SECONDS_PER_DAY,
            "seepage_low_m3s": rates["m3_per_day_low"] / SECONDS_PER_DAY,
            "seepage_high_m3s": rates["m3_per_day_high"] / SECONDS_PER_DAY,
            "seepage_depth_mm_d": rates["mm_per_day"],
            "within_fitted_stages": rates["within_fitted_stages"],
        }
    )
    params = _parameter_frame(s.param_names, s.params, s.stderr, s.conf_int())
    paragraphs = [
        f"Seepage (net loss to the ground; positive leaves the lake), model {s.model}, from "
        f"{s.n} days selected from the residual; regression with Newey–West (HAC) errors, "
        f"Durbin–Watson {s.durbin_watson:.2f}.",
    ]
    if not s.distinguishable_from_zero:
        paragraphs.append("The estimate cannot be told from zero at the 95 % level.")
    paragraphs += list(s.notes)
    return Section(
        "seepage",
        "Seepage",
        paragraphs=tuple(paragraphs),
        tables=(
            table(
                "seepage-params",
                "Seepage law parameters, in the SI units of the fitted law (k in m²/s, h0 in m "
                "on the gauge datum)",
                params,
            ),
            table(
                "seepage-rates",
                "Seepage at the mean and named stages, with its 95 % interval",
                rates,
            ),
        ),
    )


# --------------------------------------------------------------------------------------------
# The year in plain words
# --------------------------------------------------------------------------------------------
def _headline(run: Lake, year: int, days: pd.DatetimeIndex) -> dict[str, Any]:
    """Headline numbers of the year (rounded as shown)."""
    out: dict[str, Any] = {
        "water_year": year,
        "first_day": days[0].strftime("%Y-%m-%d"),
        "last_day": days[-1].strftime("%Y-%m-%d"),
    }
    if run.get("balance") is not None:
        wy = run.get("balance").water_years()
        if year in wy.index:
            row = wy.loc[year]
            out["closure_percent"] = _r(row.get("closure_error_pct"))
            out["residual_m3"] = _r(row.get("residual_m3"))
            out["residual_mm"] = _r(row.get("residual_mm"))
            out["inflow_m3"] = _r(row.get("inflow_m3"))
            out["storage_change_m3"] = _r(row.get("storage_change_m3"))
            out["complete_days"] = int(row.get("complete_days", 0))
            if "residual_p05_m3" in row:
                out["residual_p05_m3"] = _r(row["residual_p05_m3"])
                out["residual_p95_m3"] = _r(row["residual_p95_m3"])
            if "p_nonzero" in row:
                out["p_nonzero"] = _r(row["p_nonzero"])
                out["nonzero_confidence_pct"] = _r(100.0 * row["p_nonzero"])
        d = run.get("balance").daily.loc[days[0] : days[-1], "stage_end_m"].dropna()
        if len(d):
            out["stage_end_m"] = _r(float(d.iloc[-1]))
    if run.get("seepage") is not None:
        rate = float(np.asarray(run.get("seepage").rate_m3s(run.get("seepage").mean_stage_m)))
        out["seepage_m3_per_day"] = _r(rate * SECONDS_PER_DAY)
        out["seepage_m3s"] = _r(rate)
    return out


def _r(value: Any) -> float | None:
    """A finite float at full precision (JSON keeps every digit; the display rules round what
    people read), else None."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _year_in_words(
    run: Lake,
    head: dict[str, Any],
    previous: dict[str, Any],
    outlook: dict[str, Any] | None = None,
    shifts: list[dict[str, Any]] | None = None,
) -> list[str]:
    name = run.site.site.name
    out = [
        f"This report covers water year {head['water_year']} of {name}, "
        f"{head['first_day']} to {head['last_day']}."
    ]
    if run.get("balance") is None:
        out.append("The water balance could not be closed for this site; see the sections below.")
        return out
    fmt = formatter(run)
    res = head.get("residual_m3")
    pct = head.get("closure_percent")
    if res is not None:
        sign = "an unexplained gain" if res > 0 else "an unexplained loss"
        depth = head.get("residual_mm")
        text = (
            f"The balance closed with {sign} of {fmt.value('residual_m3', abs(res))} "
            f"({fmt.value('residual_mm', abs(depth) if depth is not None else math.nan)} "
            "over the lake)"
        )
        if pct is not None:
            text += f", {percent(abs(pct))} of the measured gains (gauged inflow and rain)"
        if "residual_p05_m3" in head and head["residual_p05_m3"] is not None:
            text += (
                f"; the 5–95 % band of the residual is "
                f"{fmt.cell('residual_m3', head['residual_p05_m3'])}"
                f" to {fmt.value('residual_m3', head['residual_p95_m3'])}"
            )
            lo, hi = head["residual_p05_m3"], head["residual_p95_m3"]
            text += (
                ", so the measured terms cannot explain it"
                if lo > 0 or hi < 0
                else ", so it cannot be told from zero"
            )
        if any(
            x["day"] >= head["first_day"] and x["status"] != "contradicted" for x in shifts or []
        ):
            text += " (but see the datum shift below)"
        out.append(text + ".")
    out += shift_sentences(shifts or [], head["first_day"])
    confirmed = confirmed_sentence(
        head, sum(1 for x in shifts or [] if x["status"] != "contradicted")
    )
    if confirmed:
        out.append(confirmed)
    if head.get("complete_days") is not None:
        out.append(
            f"{head['complete_days']} days had every term measured; the others are left "
            "out of the totals, never counted as zero."
        )
        graded = graded_sentence(
            head, len(run.records.daily.loc[head["first_day"] : head["last_day"]])
        )
        if graded:
            out.append(graded)
    wy = run.get("balance").water_years()
    full = wy[wy["complete_days"] >= 300]
    if head.get("inflow_m3") is not None and len(full) > 1:
        mean_inflow = float(full["inflow_m3"].mean())
        if mean_inflow > 0:
            out.append(
                f"Gauged inflow was {fmt.value('inflow_m3', head['inflow_m3'])}, "
                f"{percent(100.0 * head['inflow_m3'] / mean_inflow)} of the mean of the "
                f"{len(full)} water years with at least 300 complete days."
            )
    if previous.get("residual_m3") is not None and res is not None:
        change = res - previous["residual_m3"]
        out.append(
            f"Compared with water year {previous['water_year']}, the residual changed by "
            f"{fmt.value('residual_m3', change)}."
        )
    if head.get("stage_end_m") is not None:
        out.append(
            f"The year ended at stage {fmt.value('stage_m', head['stage_end_m'])} on the "
            "gauge datum."
        )
    if head.get("seepage_m3s") is not None:
        out.append(
            f"Estimated seepage at the mean stage: {fmt.value('seepage_m3s', head['seepage_m3s'])}"
            " (net loss to the ground)."
        )
    if outlook and outlook.get("sentence"):
        out.append(outlook["sentence"])
    return out


#: The key-number tiles: headline key, label, and the SI column whose display rule it takes.
_KEY_NUMBERS = [
    ("closure_percent", "closure error (share of gains)", "closure_error_pct"),
    ("residual_m3", "residual", "residual_m3"),
    ("residual_mm", "residual depth", "residual_mm"),
    ("inflow_m3", "gauged inflow", "inflow_m3"),
    ("storage_change_m3", "storage change", "storage_change_m3"),
    ("stage_end_m", "stage at year end", "stage_m"),
    ("seepage_m3s", "seepage at mean stage", "seepage_m3s"),
]


def key_numbers(head: dict[str, Any], fmt: Formatter) -> list[dict[str, Any]]:
    """The key-number tiles of a headline: label, text, display unit and rule of each."""
    out = []
    for key, label, column in _KEY_NUMBERS:
        if head.get(key) is None:
            continue
        rule = fmt.rule(column, head[key])
        out.append(
            {
                "key": key,
                "label": label,
                "text": fmt.format(rule, head[key]),
                "unit": rule.unit,
                "display": rule.to_dict(),
            }
        )
    return out


# --------------------------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ReportResult:
    """Where a report went and what it says in a few numbers."""

    name: str
    folder: Path
    html: Path
    json: Path
    xlsx: Path
    csv: dict[str, Path]
    headline: dict[str, Any]
    latitude: float | None = None
    longitude: float | None = None
    messages: tuple[str, ...] = ()
    pdf: Path | None = None  # None when not asked for, or WeasyPrint is not here (see messages)
    filing: dict[str, Any] | None = None  # the archive filing and its restatements, when filed


def _safe_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_") or "site"


def build_sections(
    run: Lake, year: int, outlook: dict[str, Any] | None = None
) -> tuple[list[Section], dict[str, Any], list[str]]:
    """The sections, the headline numbers and the plain-words summary of ``year`` (``outlook``:
    where the drawdown outlook starts and why, :func:`~lakebalance.report.headline.plan_outlook`)."""
    index = run.records.daily.index
    keys = water_year_of(index, run.site.site.water_year_start)
    days = index[keys == year]
    stage = (
        run.records.daily["stage"].loc[days[0] : days[-1]]
        if "stage" in run.records.daily
        else pd.Series(dtype=float)
    )
    sections = [
        _balance_section(run, year, days),
        _flags_section(run, days),
        _seepage_section(run),
        _dynamics_section(run),
        _drawdown_section(run),
        _yield_section(run),
        _rating_section(run, stage),
        _storage_section(run),
        _evaporation_section(run, days),
        _qa_section(run, days),
    ]
    head = _headline(run, year, days)
    shifts = open_shifts(run, head["last_day"])
    head["unaccepted_shifts"] = (
        "; ".join(
            f"{x['day']} {x['step_m']:+.3f} m ({x['status'] or 'no field checks'})" for x in shifts
        )
        or None
    )
    head.update(graded_numbers(run, year))
    confirmed = confirmed_corrections(run, head["last_day"]) if shifts else []
    head.update(residual_with(run, confirmed, year))
    surveyed, survey_numbers = survey_sentence(run)
    head.update(survey_numbers)
    if outlook is not None:
        head["outlook_start"] = outlook.get("start")
        head["outlook_start_stage_m"] = outlook.get("start_stage_m")
    previous: dict[str, Any] = {}
    if run.get("balance") is not None:
        earlier = index[keys == year - 1]
        if len(earlier):
            previous = _headline(run, year - 1, earlier)
    if run.get("dynamics") is not None:
        head.update(_dynamics_headline(run))
    summary = _year_in_words(run, head, previous, outlook, shifts)
    if surveyed:
        summary.insert(len(summary) - (1 if outlook and outlook.get("sentence") else 0), surveyed)
    if run.get("forecast") is not None:
        summary += run.get("forecast").key_sentences(3)
    return sections, head, summary


def make_report(
    site_file: str | Path,
    out_dir: str | Path,
    *,
    year: int | None = None,
    seed: int | None = None,
    draws: int | None = None,
    members: int | None = None,
    progress: bool = False,
    pdf: bool = True,
    file_to: str | Path | None = None,
) -> ReportResult:
    """Run every step on one site and write its report into the folder ``out_dir``.

    Writes ``report.html`` (self-contained: figures embedded, no network needed), ``summary.json``
    (headline numbers, every table, provenance), ``tables.xlsx`` and one CSV per table. The same
    rounded values stand in all of them.

    Parameters
    ----------
    site_file : path
        The site file.
    out_dir : path
        Folder for the report (created).
    year : int, optional
        Water year to report, named by the calendar year it ends in (default: the last complete
        one in the record).
    seed : int, optional
        Seed of every random draw (default: ``[site] seed``); written into the report.
    draws, members : int, optional
        Monte Carlo draws of the balance and ensemble members of the forecast.
    progress : bool
        Show progress on stderr.
    pdf : bool
        Also write ``report.pdf`` from the same HTML (needs the ``pdf`` extra, WeasyPrint; when
        it is missing the report says so in its messages and goes on).
    file_to : path, optional
        Archive folder to file this run's results into (default: ``[report] archive``); the
        filing lists what changed in earlier years since the last filing of the site.
    """
    from ..config import load_site
    from ..io.output import OutputFolder, site_inputs

    site = load_site(site_file)
    # checked before any work: --out must not hold an input, nor be a folder we did not write
    folder = OutputFolder(out_dir, inputs=site_inputs(site), replace=True, kind="report")
    try:
        return _write_report(folder, site, year=year, seed=seed, draws=draws, members=members,
                             progress=progress, pdf=pdf, file_to=file_to)  # fmt: skip
    finally:
        folder.abandon()  # after a commit, nothing to remove


def _write_report(
    folder: Any, site: Any, *, year: int | None, seed: int | None, draws: int | None,
    members: int | None, progress: bool, pdf: bool = True, file_to: Any = None,
) -> ReportResult:  # fmt: skip
    """Run the steps of ``site`` and write the report into ``folder`` (an OutputFolder)."""
    from .. import __version__
    from .._json import dumps
    from ..analysis import Lake
    from ..io.output import unique_slugs
    from .html import CAUTIONS, render

    seed = int(site.site.seed if seed is None else seed)
    # the outlook draws from seed + 1, so that its streams are not the balance's
    run = Lake(site, seed=seed, forecast_seed=seed + 1, draws=draws, members=members,
               progress=progress)  # fmt: skip
    chosen: dict[str, Any] = {}

    def choose() -> None:  # inside run_steps: the year, then where the outlook starts
        keys = water_year_of(run.records.daily.index, site.site.water_year_start)
        present = sorted(set(np.asarray(keys).tolist()))
        if year is not None and year not in present:
            raise LakebalanceError(
                f"water year {year} is not in the record ({present[0]} to {present[-1]})",
                file=site.path,
            )
        if year is None:
            counts = pd.Series(keys).value_counts()
            complete = [y for y in present if counts[y] >= 365]
            chosen["year"] = complete[-1] if complete else present[-1]
        else:
            chosen["year"] = int(year)
        days = run.records.daily.index[np.asarray(keys) == chosen["year"]]
        plan = plan_outlook(run, days, explicit_year=year is not None)
        if plan["start"] is not None:
            run.forecast_start = plan["start"]
        if plan["start_stage_m"] is not None:
            run.forecast_start_stage = plan["start_stage_m"]
        chosen["outlook"] = plan

    caught = run_steps(run, before_forecast=choose)
    year = chosen["year"]
    sections, head, summary = build_sections(run, int(year), chosen["outlook"])
    prov = _provenance_dict(run)
    fmt = formatter(run)
    archive = file_to if file_to is not None else site.report.archive
    filing = None
    if archive is not None:
        from .archive import prepare_filing

        filing = prepare_filing(archive, run, int(year), prov, fmt)

    sections = [_without_omitted(s) for s in sections]
    tables = [t for s in sections for t in s.tables]
    csv_paths = {}
    for t, (name, _) in zip(tables, unique_slugs((t.id for t in tables), "table"), strict=True):
        csv_paths[t.id] = folder.write_csv(f"{name}.csv", t.frame, index=False)
    # first column as the index, so the sheets carry no extra 0..n row-number column
    xlsx = folder.write_xlsx(
        "tables.xlsx", {t.id: t.frame.set_index(t.frame.columns[0]) for t in tables}
    )
    tiles = key_numbers(head, fmt)
    location = run.location
    messages = [f"{step} not available: {why}" for step, why in run.unavailable.items()]
    document = {
        "tool": "lakebalance",
        "version": __version__,
        "site": site.site.name,
        "water_year": int(year),
        "display_units": fmt.units.system,
        "stage_resolution_m": fmt.stage_resolution_m,
        "headline": head,
        "key_numbers": tiles,
        "summary": summary,
        "tables": {t.id: t.to_json(fmt) for t in tables},
        "unavailable": run.unavailable,
        "warnings": caught,
        "cautions": list(CAUTIONS),
        "provenance": prov,
    }
    if filing is not None:
        document["filing"] = filing.to_dict()
    json_path = folder.write_text("summary.json", dumps(document))
    title = site.report.title or f"{site.site.name}: water balance"
    html = render(
        "report.html",
        title=title,
        subtitle=f"Water year {year} ({head['first_day']} to {head['last_day']}) · "
        f"lakebalance {__version__}",
        summary=summary,
        key_numbers=tiles,
        units_note=_units_note(fmt),
        sections=[_section_for_template(s, fmt) for s in sections],
        provenance=prov,
        method_notes=[]
        if run.get("balance") is None
        else [n for n in run.get("balance").notes if is_method_note(n)],
        filing=None if filing is None else filing.to_dict(),
    )
    html_path = folder.write_text("report.html", html)
    pdf_path = None
    if pdf:
        from .pdf import html_to_pdf, pdf_unavailable

        why = pdf_unavailable()
        if why is None:
            pdf_path = folder.write_bytes("report.pdf", html_to_pdf(html))
        else:
            messages.append(f"PDF not written: {why}")
    folder.commit()  # the whole folder at once: never a mix of two runs
    if filing is not None:  # filed once the report is complete
        filing.record(folder.root)
        n = len(filing.restatements)
        messages.append(
            f"filed into {filing.folder / 'archive.sqlite'}: "
            + (
                "first filing of this site"
                if filing.previous is None
                else f"{n} earlier figure{'s' if n != 1 else ''} restated since "
                f"{filing.previous['filed_utc']}"
            )
        )
    return ReportResult(
        name=site.site.name,
        folder=folder.root,
        html=html_path,
        pdf=pdf_path,
        json=json_path,
        xlsx=xlsx,
        csv=csv_paths,
        headline=head,
        latitude=None if location is None else location[0],
        longitude=None if location is None else location[1],
        messages=tuple(messages),
        filing=None if filing is None else filing.to_dict(),
    )


def _section_for_template(s: Section, fmt: Any) -> dict[str, Any]:
    """One section as the HTML template reads it (numbers already formatted by ``fmt``)."""
    from .html import png_base64

    return {
        "id": s.id,
        "title": s.title,
        "paragraphs": s.paragraphs,
        "missing": s.missing,
        "figures": [
            {"id": f.id, "caption": f.caption, "alt": f.alt, "png": png_base64(f.png)}
            for f in s.figures
        ],
        "tables": [
            {
                "id": t.id,
                "title": t.title,
                "columns": t.headers(fmt),
                "rows": t.rows(fmt),
                "note": t.note,
                "wide": t.frame.shape[1] > WIDE_COLUMNS,
            }
            for t in s.tables
        ],
    }


#: A table with more columns than this is printed on a landscape page.
WIDE_COLUMNS = 9


def _without_omitted(section: Section) -> Section:
    """The section without its tables that have nothing to show, each said as missing."""
    import dataclasses

    kept = tuple(t for t in section.tables if t.omitted is None)
    said = tuple(t.omitted for t in section.tables if t.omitted is not None)
    if not said:
        return section
    return dataclasses.replace(section, tables=kept, missing=section.missing + said)


def _units_note(fmt: Formatter) -> str:
    u = fmt.units
    return (
        f"Units shown ({'SI' if u.system == 'SI' else 'US customary'}): stage "
        f"{u.of('length')[1]}, volume {u.of('volume')[1]}, flow {u.of('flow')[1]}, depth "
        f"{u.of('depth')[1]}, area {u.of('area')[1]}. Volumes, flows, areas and depths to 3 "
        "significant digits (4 from 1,000 up), stages to the gauge resolution, percentages whole "
        "(one decimal below 10 %). The CSV and JSON files keep every digit, in SI."
    )


def _dynamics_headline(run: Lake) -> dict[str, Any]:
    dyn = run.get("dynamics")
    out: dict[str, Any] = {}
    res = dyn.residence
    if "all" in res.index:
        out["residence_days"] = _r(res.loc["all", "residence_losses_days"])
    out["equilibrium_stage_m"] = _r(dyn.equilibrium.stage_m)
    return out


def _dynamics_section(run: Lake) -> Section:
    if run.get("dynamics") is None:
        return Section(
            "dynamics", "Residence, response and equilibrium", missing=_missing(run, "dynamics")
        )
    dyn = run.get("dynamics")
    res = dyn.residence.reset_index()
    res["water_year"] = res["water_year"].astype(str)
    res = res[
        ["water_year", "mean_storage_m3", "residence_outflow_days", "residence_losses_days"]
    ].copy()
    resp = dyn.response.reset_index()
    resp = resp.rename(columns={resp.columns[0]: "stage"})
    resp = resp[["stage", "stage_m", "response_time_days"]]
    limits = dyn.limits.reset_index()
    limits = limits.rename(columns={limits.columns[0]: "level"})
    eq = dyn.equilibrium
    fmt = formatter(run)
    paragraphs = [
        f"For a sustained inflow of {fmt.value('inflow_m3s', dyn.inflow_m3s)} the lake settles at "
        + (
            f"{fmt.value('stage_m', eq.stage_m)}"
            if math.isfinite(eq.stage_m)
            else f"no stage in range ({eq.status})"
        )
        + (
            f", with a response time of {eq.response_time_days:.0f} days there"
            if math.isfinite(eq.response_time_s)
            else ""
        )
        + ". The steady state depends on the outlet law, the losses and the inflow; the lake's "
        "area sets how long it takes to get there.",
        f"The outlet stops flowing below {fmt.value('stage_m', dyn.cease_to_flow_stage_m)}; a "
        f"sustained inflow of at least {fmt.value('inflow_m3s', dyn.minimum_inflow_to_flow_m3s)} "
        "keeps it flowing.",
    ]
    for w in dyn.what_if:
        if math.isfinite(w.equilibrium.stage_m):
            paragraphs.append(
                f"{w.label}: equilibrium {fmt.value('stage_m', w.equilibrium.stage_m)}, 95 % of "
                f"the way there from {fmt.value('stage_m', w.start_stage_m)} in "
                f"{w.time_to_95_days:.0f} days."
            )
    paragraphs += list(dyn.notes)
    return Section(
        "dynamics",
        "Residence, response and equilibrium",
        paragraphs=tuple(paragraphs),
        tables=(
            table(
                "residence",
                "Residence time by water year",
                res,
                note="Mean volume over mean outlet outflow, and over mean total losses.",
            ),
            table(
                "response",
                "Response (e-folding) time at chosen stages",
                resp,
            ),
            table(
                "limits",
                "Largest sustained inflow that keeps the lake at or below each level",
                limits,
            ),
        ),
    )


def _drawdown_section(run: Lake) -> Section:
    if run.get("forecast") is None:
        return Section("drawdown", "Drought drawdown outlook", missing=_missing(run, "forecast"))
    from ..drawdown.forecast import METHOD_WORDS
    from ..drawdown.support import MIN_YEARS_FOR_CHANCE
    from .figures_drawdown import fan_chart

    fc = run.get("forecast")
    rows = [
        {
            "level": o.name,
            "stage_m": o.stage_m,
            "direction": o.direction,
            "years_reached": (
                f"{o.years_reached} of {o.years_total}" if o.years_reached is not None else ""
            ),
            "probability_pct": 100.0 * o.probability,
            "interval_low_pct": np.nan if o.interval is None else 100.0 * o.interval[0],
            "interval_high_pct": np.nan if o.interval is None else 100.0 * o.interval[1],
            # the same chance as a count of its basis, as a person says it
            "members_reaching": count_of(round(o.probability * fc.members), fc.members, "members"),
            "reach_10pct_days": o.days_10,
            "reach_50pct_days": o.days_50,
            "reach_90pct_days": o.days_90,
        }
        for o in fc.odds
    ]
    odds = pd.DataFrame(
        rows,
        columns=[
            "level",
            "stage_m",
            "direction",
            "years_reached",
            "probability_pct",
            "interval_low_pct",
            "interval_high_pct",
            "members_reaching",
            "reach_10pct_days",
            "reach_50pct_days",
            "reach_90pct_days",
        ],
    )
    if not any(r["years_reached"] for r in rows):
        odds = odds.drop(columns="years_reached")
    for c in ("reach_10pct_days", "reach_50pct_days", "reach_90pct_days"):
        odds[c] = odds[c].astype(float)
    basis = (
        f"{fc.independent_years} independent historical years"
        if fc.independent_years
        else "one constructed trace"
    )
    tables = [
        table(
            "drawdown-odds",
            f"Share of the {fc.members:,} runs reaching each named level within {fc.days} days of "
            f"{fc.start} ({basis}), its exact binomial 95 % interval on those years, and the days "
            "by which 10, 50 and 90 % of the runs have reached it (blank where the years cannot "
            "support that share)",
            odds,
        ),
    ]
    if fc.method_spread:
        spread = fc.method_spread_frame().reset_index()
        for k in (o.name for o in fc.odds):  # highest level first, as in the odds table
            if k in spread.columns:
                spread[f"{k}_pct"] = 100.0 * spread.pop(k).astype(float)
        spread["independent_years"] = spread["independent_years"].astype("Int64")
        tables.append(
            table(
                "drawdown-methods",
                f"The scenario methods side by side: share of runs (%) reaching each level within "
                f"{fc.days} days, with the members and the independent historical years behind "
                "each; their spread is part of the uncertainty",
                spread,
                1,
            )
        )
    if fc.unrestricted is not None:
        eff = fc.restriction_effect().reset_index()
        for c in eff.columns[1:]:
            eff[c] = eff[c].astype(float)
        for c in ("probability_restricted", "probability_unrestricted"):
            eff[f"{c}_pct"] = 100.0 * eff.pop(c)
        eff = eff.rename(
            columns={
                "median_days_restricted": "median_restricted_days",
                "median_days_unrestricted": "median_unrestricted_days",
            }
        )
        tables.append(
            table(
                "drawdown-restrictions",
                "What the restriction rules change",
                eff,
                empty_reason="no member reached a named level within the outlook, with or "
                "without the restriction rules",
            )
        )
    fig = fan_chart(fc, units=formatter(run).units)
    skill_text, skill_table = _hindcast_skill(run, fc)
    if skill_table is not None:
        tables.append(skill_table)
    paragraphs = [
        f"Scenario {fc.scenario} ({METHOD_WORDS.get(fc.method, fc.method)}), {fc.members:,} "
        f"runs on {basis}, from {fc.start} at stage "
        f"{formatter(run).value('stage_m', fc.start_stage_m)}, seed {fc.seed}. "
        f"A share is called a chance only from {MIN_YEARS_FOR_CHANCE} independent years; a "
        "percentile or band is shown only where at least one independent year lies beyond it.",
        *_forecast_sentences(run),
        *skill_text,
        *fc.notes,
    ]
    return Section(
        "drawdown",
        "Drought drawdown outlook",
        paragraphs=tuple(paragraphs),
        tables=tuple(tables),
        figures=(
            Figure(
                "fan",
                "Forecast stage: median and the 50, 80 and 90 % bands of the runs where the "
                "independent years support them, with the named levels.",
                _png(fig),
                "Fan chart of forecast stage",
            ),
        ),
    )


def _hindcast_skill(run: Lake, fc: Any) -> tuple[tuple[str, ...], Table | None]:
    """The skill of this outlook, hindcast from its own day of the year in the past years of the
    record (each start without its own future): sentences and a table."""
    from ..display import count_of

    scenario = fc.scenario if fc.scenario in ("replay", "stochastic", "percentile") else "replay"
    try:
        hc = run.hindcast(
            days=fc.days, scenario=scenario, members=min(fc.members, 200),
            anniversary=str(fc.start),
        )  # fmt: skip
    except LakebalanceError as exc:
        return (f"No hindcast of this outlook: {exc.one_line().removeprefix('error: ')}",), None
    rows = hc.skill[["level", "direction", "starts", "happened", "brier", "brier_skill"]].copy()
    scored = rows.dropna(subset=["brier_skill"])
    text = [
        f"Hindcast of this outlook ({scenario}) started on {fc.start:%d %B} in {hc.starts} past "
        f"years, each without its own future: "
        + (
            "; ".join(
                f"reaching the {r.level} level ({r.direction}) happened "
                f"{count_of(r.happened, r.starts)}, Brier skill against climatology "
                f"{r.brier_skill:+.2f}"
                for r in scored.itertuples()
            )
            if not scored.empty
            else "no level was reached in some years and not in others, so no skill can be told"
        )
        + ". A skill of zero or below means the outlook did no better than the share of past "
        "years in which the level was reached."
    ]
    crps = hc.crps_skill_persistence
    if crps is not None:
        text.append(
            f"Stage at the horizon: mean CRPS {hc.crps_m:.3f} m, skill {crps:+.2f} against "
            "persistence (the start stage)"
            + (
                f" and {hc.crps_skill_climatology:+.2f} against climatology."
                if hc.crps_skill_climatology is not None
                else "."
            )
        )
    rows["brier_skill"] = rows["brier_skill"].astype(float)
    return tuple(text), table(
        "drawdown-hindcast",
        f"Hindcast skill of this outlook from {fc.start:%d %B} in past years",
        rows,
        {"brier": 3, "brier_skill": 2},
        note="Brier skill: 1 - Brier score / Brier score of the share of years in which the "
        "level was reached; '–' where it was reached in every year or in none.",
    )


def _yield_section(run: Lake) -> Section:
    title = "Yield and reliability"
    study = run.get("yield")
    if study is None:
        return Section("yield", title, missing=_missing(run, "yield"))
    from ..display import quantity, stage
    from .figures_yield import firm_yield_figure, storage_yield_figure

    firm, curve = study.firm, study.curve
    paragraphs = [
        f"Firm yield through the record {firm.period[0]} to {firm.period[1]}: "
        f"{quantity(firm.demand_m3s, 'flow')} m³/s "
        f"({quantity(firm.demand_m3s * SECONDS_PER_DAY, 'volume')} thousand m³ a day), the "
        f"largest demand met on every day without the intake failing at the "
        f"{firm.failure_level} level ({stage(firm.failure_level_m)} m). Its critical period runs "
        f"from {firm.critical_start} to {firm.critical_end} ({firm.critical_days} days)"
        + (f"; the lake was back by {firm.refill_date}." if firm.refill_date else "."),
    ]
    tables = [
        table(
            "yield-storage",
            "Storage needed for a yield (sequent peak of the monthly net inflow, no outlet losses)",
            curve.to_frame(),
            {"yield_m3s": 3, "share_of_net_inflow": 2, "storage_m3": 0},
        )
    ]
    if study.performance is not None:
        perf = study.performance
        rows = []
        for label, p in (
            ("without restriction", perf.restriction),
            ("without failure", perf.failure),
        ):
            rows.append(
                {
                    "judged": label,
                    "days_ok_pct": 100.0 * p.reliability_days,
                    "years_ok_pct": None
                    if p.reliability_years is None
                    else 100.0 * p.reliability_years,
                    "resilience_pct": None if p.resilience is None else 100.0 * p.resilience,
                    "vulnerability_pct": None
                    if p.vulnerability is None
                    else 100.0 * p.vulnerability,
                    "events": p.events,
                    "longest_days": p.longest_days,
                }
            )
        frame = pd.DataFrame(rows)
        for c in ("years_ok_pct", "resilience_pct", "vulnerability_pct"):
            frame[c] = frame[c].astype(float)
        tables.append(
            table(
                "yield-reliability",
                f"The demand of {quantity(perf.demand_m3s, 'flow')} m³/s under its restriction "
                "rules through the "
                "record (Hashimoto et al. 1982)",
                frame,
                {"days_ok_pct": 1, "years_ok_pct": 1, "resilience_pct": 1, "vulnerability_pct": 1},
            )
        )
    if study.supply is not None:
        paragraphs.append(study.supply.sentence())
    from ..drawdown.yield_ import CAUTION as YIELD_CAUTION

    paragraphs += [*study.notes, YIELD_CAUTION]
    figures = (
        Figure(
            "firm-yield",
            "Stage through the record at the firm yield, critical period shaded.",
            _png(firm_yield_figure(study)),
            "Stage at the firm yield",
        ),
        Figure(
            "storage-yield",
            "Storage–yield curve (sequent peak) with the storage between the start and failure "
            "levels and the simulated firm yield.",
            _png(storage_yield_figure(study)),
            "Storage-yield curve",
        ),
    )
    return Section(
        "yield", title, paragraphs=tuple(paragraphs), tables=tuple(tables), figures=figures
    )


def _forecast_sentences(run: Lake) -> tuple[str, ...]:
    if run.get("forecast") is None:
        return ()
    from .html import CAUTIONS

    return tuple(
        s for s in run.get("forecast").sentences() if s not in CAUTIONS and "licensed" not in s
    )
