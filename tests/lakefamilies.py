"""Families of simulated lakes, unlike the demo and unlike each other, for calibrating judgments.

Everything here is invented: made-up lakes in no real place, simulated by a forward model of the
storage equation ``A(h) dh/dt = I + (P − E) A − Q(h) − S(h) − W − R`` (hourly semi-implicit
steps, so stiff outlets stay stable), with gauge-like records written as a user would receive
them (CSV files, declared units, gauge resolution, random and persistent gauge errors) and a site
file. Faults are planted in the records (stage faults) or in the water (unmetered flows), with the
truth returned beside the site, so that the flags' detection and false-flag rates and the
coverage of the rating and seepage intervals can be measured on held-out seeds.

The families (see :data:`FAMILIES`):

* ``flow_through`` — a lake whose outflow over a power-law sill is tens of times its evaporation;
* ``seepage`` — a closed basin losing water mostly to the ground, with metered withdrawals;
* ``gated`` — a reservoir with a metered gate release and a weir spillway rarely gauged above
  its crest;
* ``snowmelt_us`` — a snowmelt-fed reservoir recorded in US customary units (ft, cfs, inches)
  with 15-minute stage.

The forward model is test code (common practice, no source: explicit storage equation).
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np
import pandas as pd

FT = 0.3048  # m per international foot (NIST SP 811, exact)
CFS = FT**3  # m³/s per ft³/s
INCH = 0.0254  # m per inch (exact)
INFLOW_AR1 = 0.6  # lag-one autocorrelation of the simulated inflow gauge error (-)
T = 86400.0  # s per day

FaultKind = Literal[
    "spike", "datum_shift", "offset_period", "stuck", "drift", "unmetered_withdrawal", "leak"
]
STAGE_FAULTS = ("spike", "datum_shift", "offset_period", "stuck", "drift")
FLOW_FAULTS = ("unmetered_withdrawal", "leak")


@dataclass(frozen=True)
class LakeFamily:
    """The shape, outlet, climate and gauges of one family of invented lakes (SI inside)."""

    name: str
    years: int = 6
    start: str = "2001-10-01"
    water_year_start: int = 10
    # basin: A(h) = area_top (max(h − bottom, 0) / depth)^shape between bottom and bottom + depth
    area_top_m2: float = 2.0e6
    bottom_m: float = 0.0
    depth_m: float = 15.0
    shape: float = 1.0
    start_stage_m: float = 10.0
    # outlet
    outlet: Literal["sill", "weir", "none"] = "sill"
    sill_c: float = 20.0  # Q = c (h − e)^b, m^(3−b)/s
    sill_e: float = 10.0
    sill_b: float = 1.6
    weir_crest_m: float = 14.0
    weir_length_m: float = 30.0
    weir_cw: float = 1.7  # m^0.5/s
    # climate and use
    inflow_mean_m3s: float = 5.0
    storm_rate: float = 0.08  # storm days per day
    snowmelt: bool = False
    evaporation_mm_d: float = 3.0
    rain_mm_storm: float = 8.0
    withdrawal_m3s: float = 0.0
    release_m3s: float = 0.0  # metered gate release
    seepage_k_m2s: float = 0.0  # net loss k (h − h0), m³/s per m
    seepage_h0_m: float = 0.0
    # gauges
    units: Literal["SI", "US"] = "SI"
    subdaily_minutes: int | None = None
    stage_resolution_m: float = 0.001
    stage_noise_m: float = 0.001
    inflow_random: float = 0.05  # relative, AR(1) day to day
    inflow_bias: float = 0.03  # relative, persistent over the record (sd of the draw)
    evaporation_random: float = 0.10
    gaugings: int = 40
    gaugings_above_crest: int = 4
    gauging_error: float = 0.05  # relative, lognormal


FAMILIES: dict[str, LakeFamily] = {
    "flow_through": LakeFamily(
        "flow_through", area_top_m2=1.5e6, depth_m=14.0, shape=1.3, start_stage_m=10.6,
        sill_c=25.0, sill_e=10.0, sill_b=1.6, inflow_mean_m3s=8.0, evaporation_mm_d=3.0,
        seepage_k_m2s=0.002, seepage_h0_m=6.0, storm_rate=0.1,
    ),
    "seepage": LakeFamily(
        "seepage", area_top_m2=6.0e5, depth_m=12.0, shape=1.8, start_stage_m=6.5, outlet="none",
        inflow_mean_m3s=0.1, storm_rate=0.06, evaporation_mm_d=4.0, withdrawal_m3s=0.03,
        seepage_k_m2s=0.012, seepage_h0_m=1.0, start="2003-01-01", water_year_start=1,
    ),
    "gated": LakeFamily(
        "gated", area_top_m2=5.0e6, depth_m=22.0, shape=1.5, start_stage_m=17.0, outlet="weir",
        weir_crest_m=19.0, weir_length_m=25.0, weir_cw=1.7, inflow_mean_m3s=6.0,
        release_m3s=3.2, withdrawal_m3s=0.5, evaporation_mm_d=3.5, seepage_k_m2s=0.004,
        seepage_h0_m=8.0, gaugings=30, gaugings_above_crest=4,
    ),
    "snowmelt_us": LakeFamily(
        "snowmelt_us", area_top_m2=3.0e6, depth_m=18.0, shape=1.2, start_stage_m=13.0,
        sill_c=12.0, sill_e=13.5, sill_b=1.7, inflow_mean_m3s=3.0, snowmelt=True,
        storm_rate=0.03, evaporation_mm_d=2.5, withdrawal_m3s=0.2, seepage_k_m2s=0.003,
        seepage_h0_m=5.0, units="US", subdaily_minutes=15, stage_resolution_m=0.01 * FT,
        stage_noise_m=0.003, start="2004-10-01",
    ),
}  # fmt: skip


@dataclass(frozen=True)
class Fault:
    """A planted fault: ``size`` in m (stage faults) or m³/s (unmetered flows, always a loss).

    ``spike``: one bad reading day; ``datum_shift``: the record is offset from ``start`` on;
    ``offset_period``: offset for ``days`` then back (ice, a fouled sensor); ``stuck``: the value
    of ``start`` repeated for ``days``; ``drift``: an offset growing linearly to ``size`` over
    ``days`` then staying; ``unmetered_withdrawal`` / ``leak``: an unrecorded loss for ``days``.
    """

    kind: FaultKind
    start: str
    days: int = 1
    size: float = 0.0

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class SimulatedLake:
    """A simulated lake written to a folder: its site file and the truth behind the records."""

    site_file: Path
    family: LakeFamily
    seed: int
    faults: tuple[Fault, ...]
    truth: dict = field(default_factory=dict)


def area_m2(f: LakeFamily, h: np.ndarray) -> np.ndarray:
    """Lake area of the family's basin, m² (truth)."""
    x = np.clip((np.asarray(h, dtype=float) - f.bottom_m) / f.depth_m, 0.0, None)
    return f.area_top_m2 * x**f.shape


def volume_m3(f: LakeFamily, h: np.ndarray) -> np.ndarray:
    """Storage of the family's basin, m³ (the exact integral of :func:`area_m2`)."""
    x = np.clip((np.asarray(h, dtype=float) - f.bottom_m) / f.depth_m, 0.0, None)
    return f.area_top_m2 * f.depth_m * x ** (f.shape + 1) / (f.shape + 1)


def outflow_m3s(f: LakeFamily, h: np.ndarray) -> np.ndarray:
    """Outlet discharge of the family (truth), m³/s."""
    h = np.asarray(h, dtype=float)
    if f.outlet == "sill":
        return f.sill_c * np.clip(h - f.sill_e, 0.0, None) ** f.sill_b
    if f.outlet == "weir":
        return f.weir_cw * f.weir_length_m * np.clip(h - f.weir_crest_m, 0.0, None) ** 1.5
    return np.zeros_like(h)


def seepage_m3s(f: LakeFamily, h: np.ndarray) -> np.ndarray:
    """Net loss to the ground (truth), m³/s."""
    return f.seepage_k_m2s * (np.asarray(h, dtype=float) - f.seepage_h0_m)


def _forcing(f: LakeFamily, rng: np.random.Generator, n: int, idx: pd.DatetimeIndex) -> dict:
    doy = idx.day_of_year.to_numpy()
    season = np.sin(2 * np.pi * (doy - 100) / 365.25)
    storm = rng.random(n) < f.storm_rate * (1.0 - 0.5 * season)
    base = f.inflow_mean_m3s * (0.6 - 0.3 * season)
    pulses = storm * rng.gamma(1.5, 2.0 * f.inflow_mean_m3s, n)
    if f.snowmelt:  # a melt pulse from April to June, of a size that varies by year
        years = idx.year.to_numpy()
        size = {y: rng.gamma(6.0, 1.0 / 6.0) for y in np.unique(years)}
        melt = np.array([size[y] for y in years]) * np.exp(-(((doy - 135) / 22.0) ** 2))
        pulses = pulses + 4.0 * f.inflow_mean_m3s * melt
    kernel = np.exp(-np.arange(12) / 2.5)
    inflow = base + np.convolve(pulses, kernel, mode="full")[:n] / kernel.sum()
    rain = storm * rng.gamma(2.0, f.rain_mm_storm / 2.0, n) / 1000.0
    evap = np.maximum(f.evaporation_mm_d * (1.0 + 0.7 * season), 0.2) / 1000.0
    return {"inflow": inflow, "rain": rain, "evaporation": evap}


def _integrate(f: LakeFamily, forcing: dict, unmetered: np.ndarray, n: int, sub: int) -> tuple:
    """Stage at each sub-step (n·sub + 1 values) by semi-implicit (Rosenbrock–Euler) steps."""
    dt = T / sub
    h = np.empty(n * sub + 1)
    h[0] = f.start_stage_m
    eps = 1e-4
    x = f.start_stage_m
    for d in range(n):  # forward model (test code, not the library)
        gain = forcing["inflow"][d] - f.withdrawal_m3s - f.release_m3s - unmetered[d]
        net = forcing["rain"][d] - forcing["evaporation"][d]

        def rate(y, gain=gain, net=net):
            a = max(float(area_m2(f, y)), 1.0)
            loss = float(outflow_m3s(f, y)) + float(seepage_m3s(f, y))
            return (gain + net / T * a - loss) / a

        for k in range(sub):
            g = rate(x)
            slope = (rate(x + eps) - rate(x - eps)) / (2 * eps)
            x = x + dt * g / (1.0 - dt * min(slope, 0.0))
            x = max(x, f.bottom_m + 0.05)  # the lake does not dry out in these families
            h[d * sub + k + 1] = x
    return h


def _apply_stage_faults(stage: np.ndarray, idx: pd.DatetimeIndex, per_day: int, faults) -> None:
    """Plant the stage faults in ``stage`` (one value per reading, ``per_day`` readings a day)."""
    for fault in faults:
        if fault.kind not in STAGE_FAULTS:
            continue
        d0 = int(np.flatnonzero(idx == pd.Timestamp(fault.start))[0])
        a = d0 * per_day
        b = min(stage.size, (d0 + fault.days) * per_day)
        if fault.kind == "spike":
            stage[a : a + per_day] += fault.size
        elif fault.kind == "datum_shift":
            stage[a:] += fault.size
        elif fault.kind == "offset_period":
            stage[a:b] += fault.size
        elif fault.kind == "stuck":
            stage[a:b] = stage[a]
        elif fault.kind == "drift":
            ramp = np.linspace(0.0, fault.size, b - a)
            stage[a:b] += ramp
            stage[b:] += fault.size


def simulate(
    family: LakeFamily | str,
    seed: int,
    root: Path,
    faults: Sequence[Fault] = (),
    *,
    years: int | None = None,
) -> SimulatedLake:
    """Simulate one lake of ``family`` and write its records and site file under ``root``.

    Parameters
    ----------
    family : LakeFamily or str
        The family (or its name in :data:`FAMILIES`).
    seed : int
        Seed of everything random (weather, gauge errors, gaugings).
    root : Path
        Folder for the files (created).
    faults : sequence of Fault
        Faults to plant.
    years : int, optional
        Length of the record (default: the family's).
    """
    f = FAMILIES[family] if isinstance(family, str) else family
    if years is not None:
        f = dataclasses.replace(f, years=int(years))
    rng = np.random.default_rng(seed)
    n = int(round(365.25 * f.years))
    idx = pd.date_range(f.start, periods=n, freq="D", name="date")
    forcing = _forcing(f, rng, n, idx)
    unmetered = np.zeros(n)
    for fault in faults:
        if fault.kind in FLOW_FAULTS:
            d0 = int(np.flatnonzero(idx == pd.Timestamp(fault.start))[0])
            unmetered[d0 : d0 + fault.days] += fault.size
    sub = 24
    h = _integrate(f, forcing, unmetered, n, sub)
    root.mkdir(parents=True, exist_ok=True)
    per_day = 1 if f.subdaily_minutes is None else (24 * 60) // f.subdaily_minutes
    if per_day == 1:
        # daily means of the hourly path (trapezoid), as a logger's daily mean would be
        values = (0.5 * (h[:-1] + h[1:])).reshape(n, sub).mean(axis=1)
        times = idx
    else:  # instantaneous readings at the start of each interval, from the hourly path
        values = np.interp(np.arange(n * per_day) * (sub / per_day), np.arange(h.size), h)
        times = pd.date_range(f.start, periods=n * per_day, freq=f"{f.subdaily_minutes}min")
    observed = values + rng.normal(0.0, f.stage_noise_m, values.size)
    _apply_stage_faults(observed, idx, per_day, faults)
    res = f.stage_resolution_m
    observed = np.round(observed / res) * res
    files = _write_records(f, rng, root, idx, times, observed, forcing)
    _write_storage(f, root)
    if f.outlet != "none":
        _write_gaugings(f, rng, root, h, idx, sub)
    site = root / "site.toml"
    site.write_text(_site_text(f, seed, files), encoding="utf-8")
    daily_true = (0.5 * (h[:-1] + h[1:])).reshape(n, sub).mean(axis=1)
    truth = {
        "family": f.name,
        "seed": seed,
        "faults": [x.to_dict() for x in faults],
        "seepage": {"k_m2s": f.seepage_k_m2s, "h0_m": f.seepage_h0_m},
        "rating": _rating_truth(f),
        "stage_true_m": daily_true,
        "dates": idx,
        "unmetered_m3s": unmetered,
    }
    (root / "truth.json").write_text(
        json.dumps(
            {k: v for k, v in truth.items() if k not in ("stage_true_m", "dates", "unmetered_m3s")},
            indent=1,
        ),  # fmt: skip
        encoding="utf-8",
    )
    return SimulatedLake(site, f, seed, tuple(faults), truth)


def _rating_truth(f: LakeFamily) -> dict:
    if f.outlet == "sill":
        return {"C": f.sill_c, "e": f.sill_e, "b": f.sill_b}
    if f.outlet == "weir":
        return {"Cw": f.weir_cw, "crest": f.weir_crest_m}
    return {}


def _write_records(f, rng, root, idx, times, stage, forcing) -> dict:
    n = len(idx)
    us = f.units == "US"
    # inflow: persistent bias (one draw for the record) and AR(1) day-to-day error
    bias = f.inflow_bias * rng.standard_normal()
    err = np.zeros(n)
    z = rng.normal(0.0, f.inflow_random * math.sqrt(1 - INFLOW_AR1**2), n)
    for i in range(1, n):
        err[i] = INFLOW_AR1 * err[i - 1] + z[i]
    inflow = forcing["inflow"] * (1.0 + bias + err)
    evap = forcing["evaporation"] * (1.0 + f.evaporation_random * rng.standard_normal(n))
    rain = forcing["rain"]
    day = idx.strftime("%Y-%m-%d")
    files = {}
    stage_out = stage / FT if us else stage
    stamp = times.strftime("%Y-%m-%d %H:%M") if f.subdaily_minutes else times.strftime("%Y-%m-%d")
    pd.DataFrame({"date": stamp, "value": np.round(stage_out, 4)}).to_csv(root / "stage.csv",
                                                                          index=False)  # fmt: skip
    files["stage"] = ("stage.csv", "ft" if us else "m")
    q = inflow / CFS if us else inflow
    pd.DataFrame({"date": day, "value": np.round(q, 4)}).to_csv(root / "inflow.csv", index=False)
    files["inflow"] = ("inflow.csv", "cfs" if us else "m3/s")
    r = rain / INCH if us else rain * 1000.0
    pd.DataFrame({"date": day, "value": np.round(r, 3)}).to_csv(root / "rain.csv", index=False)
    files["rain"] = ("rain.csv", "in" if us else "mm")
    e = evap / INCH if us else evap * 1000.0
    pd.DataFrame({"date": day, "value": np.round(e, 3)}).to_csv(root / "evaporation.csv",
                                                                index=False)  # fmt: skip
    files["evaporation"] = ("evaporation.csv", "in" if us else "mm")
    for role, rate in (("withdrawal", f.withdrawal_m3s), ("release", f.release_m3s)):
        if rate > 0:
            metered = rate * (1.0 + 0.02 * rng.standard_normal(n))
            v = metered / CFS if us else metered
            pd.DataFrame({"date": day, "value": np.round(v, 5)}).to_csv(root / f"{role}.csv",
                                                                        index=False)  # fmt: skip
            files[role] = (f"{role}.csv", "cfs" if us else "m3/s")
    return files


def _write_storage(f: LakeFamily, root: Path) -> None:
    """A survey table every 0.5 m (1 ft in US units) from the bottom to above the top."""
    us = f.units == "US"
    step = FT if us else 0.5
    top = f.bottom_m + f.depth_m + 3.0
    levels = np.arange(f.bottom_m, top + 1e-9, step)
    area = area_m2(f, levels)
    if us:
        frame = pd.DataFrame({"stage": np.round(levels / FT, 3), "area": area / 4046.8564224})
        frame.to_csv(root / "storage.csv", index=False)  # acres (NIST SP 811: 4046.856 m²)
    else:
        pd.DataFrame({"stage": np.round(levels, 3), "area": area}).to_csv(root / "storage.csv",
                                                                          index=False)  # fmt: skip


def _write_gaugings(f, rng, root, h, idx, sub) -> None:
    n = len(idx)
    daily_max = h[1:].reshape(n, sub).max(axis=1)
    if f.outlet == "sill":
        days = rng.choice(n, size=f.gaugings, replace=False)
        stages = daily_max[days]
    else:  # the spillway: mostly dry, a few gaugings above the crest
        above = np.flatnonzero(daily_max > f.weir_crest_m + 0.02)
        k = min(f.gaugings_above_crest, above.size)
        wet = rng.choice(above, size=k, replace=False) if k else np.array([], int)
        dry = rng.choice(np.flatnonzero(daily_max <= f.weir_crest_m), size=f.gaugings - k,
                         replace=False)  # fmt: skip
        days = np.concatenate([wet, dry])
        stages = daily_max[days]
    q = outflow_m3s(f, stages) * np.exp(f.gauging_error * rng.standard_normal(stages.size))
    us = f.units == "US"
    frame = pd.DataFrame(
        {
            "date": idx[days].strftime("%Y-%m-%d"),
            "stage": np.round(stages / FT if us else stages, 3),
            "discharge": np.round(q / CFS if us else q, 4),
        }
    ).sort_values("date")
    frame.to_csv(root / "gaugings.csv", index=False)


def _site_text(f: LakeFamily, seed: int, files: dict) -> str:
    us = f.units == "US"
    lines = [
        "# an invented lake of the test families (tests/lakefamilies.py); all data simulated",
        "[site]",
        f'name = "{f.name.replace("_", " ").title()} Lake {seed} (invented)"',
        "latitude = 44.0",
        "elevation = 300.0",
        f"water_year_start = {f.water_year_start}",
        f"seed = {seed}",
        "",
        "[storage]",
        'file = "storage.csv"',
        f'stage_units = "{"ft" if us else "m"}"',
        f'area_units = "{"acre" if us else "m**2"}"',
        "",
    ]
    for role, (name, unit) in files.items():
        lines += [f"[series.{role}]", f'file = "{name}"', f'units = "{unit}"']
        if role == "stage":
            res = f.stage_resolution_m / FT if us else f.stage_resolution_m
            lines.append(f"resolution = {res:.6g}")
        lines.append("")
    if f.outlet == "sill":
        lines += [
            "[outlet]", 'gaugings = "gaugings.csv"', 'form = "power"',
            f'stage_units = "{"ft" if us else "m"}"',
            f'discharge_units = "{"cfs" if us else "m**3/s"}"', "",
        ]  # fmt: skip
    elif f.outlet == "weir":
        lines += [
            "[outlet]", 'gaugings = "gaugings.csv"', 'form = "weir"',
            f"length = {f.weir_length_m}", f'stage_units = "{"ft" if us else "m"}"',
            f'discharge_units = "{"cfs" if us else "m**3/s"}"', "",
        ]  # fmt: skip
    # the errors the simulated gauges have, declared as a user who knows them would
    total = math.hypot(f.inflow_bias, f.inflow_random)
    lines += [
        "[uncertainty]",
        "draws = 200",
        f"inflow = {total:.6g}",
        f"systematic = {f.inflow_bias**2 / total**2:.6g}",
        f"daily_autocorrelation = {INFLOW_AR1:g}",
        "rain = 0.0",
        f"evaporation = {f.evaporation_random:.6g}",
        "withdrawal = 0.02",
        "release = 0.02",
        "area = 0.005",
        "",
    ]
    return "\n".join(lines)


def plant(
    family: LakeFamily | str,
    rng: np.random.Generator,
    kinds: Sequence[FaultKind],
    sizes: dict[str, float],
    *,
    years: int | None = None,
    margin_days: int = 120,
) -> tuple[Fault, ...]:
    """Non-overlapping faults of ``kinds`` at random dates, of the given ``sizes`` (m or m³/s by
    kind), at least ``margin_days`` from each other and from the record's ends."""
    f = FAMILIES[family] if isinstance(family, str) else family
    n = int(round(365.25 * (years or f.years)))
    idx = pd.date_range(f.start, periods=n, freq="D")
    length = {"spike": 1, "datum_shift": 1, "offset_period": 28, "stuck": 6, "drift": 150,
              "unmetered_withdrawal": 38, "leak": 30}  # fmt: skip
    slots = np.arange(margin_days, n - margin_days - 160, margin_days + 160)
    if len(kinds) > slots.size:
        raise ValueError(f"{len(kinds)} faults do not fit in {years or f.years} years")
    chosen = np.sort(rng.choice(slots, size=len(kinds), replace=False))
    out = []
    for day, kind in zip(chosen, kinds, strict=True):
        jitter = int(rng.integers(0, 60))
        out.append(Fault(kind, str(idx[day + jitter].date()), length[kind], float(sizes[kind])))
    return tuple(out)
