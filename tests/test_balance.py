"""Daily closure, aggregation, missing days and the Monte Carlo machinery of the balance."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance import (
    ClosureOptions,
    DailyTerms,
    Lake,
    TermErrors,
    add_uncertainty,
    close_daily,
    load_site,
)
from lakebalance.balance import boundary_stage_from_readings, water_year_of

T = 86400.0


def _area(h):
    return 1.0e6 * (1.0 + 0.1 * np.asarray(h))


def _volume(h):
    h = np.asarray(h)
    return 1.0e6 * (h + 0.05 * h**2)  # integral of _area


def _terms(n=120, seed=0, nan_frac=0.0, start="2019-08-01"):
    rng = np.random.default_rng(seed)
    idx = pd.date_range(start, periods=n, freq="D", name="date")

    def s(values):
        v = np.asarray(values, dtype=float)
        if nan_frac:
            v = np.where(rng.random(n) < nan_frac, np.nan, v)
        return pd.Series(v, idx)

    return DailyTerms(
        stage_m=s(5 + 0.3 * np.sin(np.arange(n) / 9) + 0.01 * rng.standard_normal(n)),
        inflow_m3s={"east": s(1 + rng.random(n)), "west": s(0.5 * rng.random(n))},
        rain_m=s(0.003 * rng.random(n)),
        evaporation_m=s(0.004 * rng.random(n)),
        withdrawal_m3s=s(np.full(n, 0.2)),
        release_m3s=s(np.full(n, 0.05)),
    )


def _outflow(h):
    return 3.0 * np.clip(np.asarray(h) - 4.5, 0.0, None) ** 1.5


def test_a_missing_term_leaves_the_day_missing_and_counted():
    t = _terms(n=30)
    rain = t.rain_m.copy()
    rain.iloc[10] = np.nan
    bal = close_daily(
        DailyTerms(**{**t.__dict__, "rain_m": rain}),
        volume_fn=_volume,
        area_fn=_area,
        outflow_fn=_outflow,
    )
    d = bal.daily
    assert math.isnan(d["residual_m3"].iloc[10])
    assert not d["complete"].iloc[10]
    # first and last day have no boundary stage from daily means: missing too
    assert bal.missing_days == 3
    m = bal.monthly()
    assert int(m["complete_days"].sum()) == 27
    assert int(m["days"].sum()) == 30


def test_absent_terms_are_zero_and_listed():
    t = _terms(n=20)
    bal = close_daily(
        DailyTerms(stage_m=t.stage_m, inflow_m3s=t.inflow_m3s), volume_fn=_volume, area_fn=_area
    )
    assert set(bal.absent_terms) == {"outflow", "rain", "evaporation", "withdrawal", "release"}
    assert (bal.daily["outflow_m3"] == 0).all()
    assert any("no record of" in n for n in bal.notes)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), nan_frac=st.sampled_from([0.0, 0.03, 0.2]))
def test_every_table_adds_up(seed, nan_frac):
    """Conservation of mass: ΔV = gains − losses + residual, day by day, month, water year."""
    t = _terms(n=200, seed=seed, nan_frac=nan_frac)
    bal = close_daily(t, volume_fn=_volume, area_fn=_area, outflow_fn=_outflow,
                      options=ClosureOptions(water_year_start=10))  # fmt: skip
    for table in (bal.daily[bal.daily["complete"]], bal.monthly(), bal.water_years()):
        table = table.dropna(subset=["residual_m3"])
        gains = table["inflow_m3"] + table["rain_m3"]
        losses = (
            table["evaporation_m3"] + table["outflow_m3"] + table["withdrawal_m3"]
            + table["release_m3"]
        )  # fmt: skip
        np.testing.assert_allclose(
            table["storage_change_m3"], gains - losses + table["residual_m3"], rtol=0, atol=1e-6
        )
        per = table[[f"inflow:{n}_m3" for n in bal.inflow_names]].sum(axis=1)
        np.testing.assert_allclose(per, table["inflow_m3"], rtol=1e-12)


@settings(max_examples=20, deadline=None)
@given(offset=st.floats(-1e7, 1e7), seed=st.integers(0, 1000))
def test_residual_does_not_depend_on_the_volume_datum(offset, seed):
    """Only volume differences enter the balance (common practice, no source)."""
    t = _terms(n=40, seed=seed)
    a = close_daily(t, volume_fn=_volume, area_fn=_area, outflow_fn=_outflow)
    b = close_daily(t, volume_fn=lambda h: _volume(h) + offset, area_fn=_area,
                    outflow_fn=_outflow)  # fmt: skip
    np.testing.assert_allclose(a.daily["residual_m3"], b.daily["residual_m3"], atol=1e-6)


def test_mm_over_mean_area():
    """1 m = 1000 mm (NIST SP 811, Appendix B): residual_mm = residual_m3 / mean area × 1000."""
    bal = close_daily(_terms(n=62), volume_fn=_volume, area_fn=_area, outflow_fn=_outflow)
    m = bal.monthly().dropna(subset=["residual_m3"])
    np.testing.assert_allclose(m["residual_mm"], m["residual_m3"] / m["mean_area_m2"] * 1000.0)
    gains = m["inflow_m3"] + m["rain_m3"]
    np.testing.assert_allclose(m["closure_error_pct"], 100 * m["residual_m3"] / gains)


def test_water_year_labels():
    """A water year starting in October is labelled by the year it ends in (common practice,
    no source); starting in January it is the calendar year."""
    idx = pd.DatetimeIndex(["2020-09-30", "2020-10-01", "2021-09-30", "2021-10-01"])
    assert list(water_year_of(idx, 10)) == [2020, 2021, 2021, 2022]
    assert list(water_year_of(idx, 1)) == [2020, 2020, 2021, 2021]
    with pytest.raises(ValueError):
        water_year_of(idx, 13)


def test_boundary_stage_from_readings_interpolates_linearly():
    """Analytic: readings of a stage rising linearly in time give its exact midnight values;
    a reading gap longer than the allowed hours leaves that boundary missing."""
    days = pd.date_range("2021-05-01", periods=3, freq="D")
    times = pd.date_range("2021-04-30 23:00", "2021-05-04 01:00", freq="2h")
    hours = (times - pd.Timestamp("2021-05-01")) / pd.Timedelta(hours=1)
    readings = pd.Series(10.0 + 0.01 * hours.to_numpy(), times)
    b = boundary_stage_from_readings(readings, days)
    assert len(b) == 4
    np.testing.assert_allclose(b.to_numpy(), 10.0 + 0.01 * np.array([0, 24, 48, 72]), atol=1e-12)
    sparse = readings[(readings.index < "2021-05-01 18:00") | (readings.index > "2021-05-02 06:00")]
    b2 = boundary_stage_from_readings(sparse, days, max_gap_hours=3)
    assert math.isnan(b2.iloc[1]) and np.isfinite(b2.iloc[[0, 2, 3]]).all()


def test_monte_carlo_is_seeded_and_reproducible():
    bal = close_daily(_terms(n=400), volume_fn=_volume, area_fn=_area, outflow_fn=_outflow)
    run = lambda s: add_uncertainty(bal, area_fn=_area, outflow_fn=_outflow, draws=200,  # noqa: E731
                                    rng=np.random.default_rng(s), seed=s)  # fmt: skip
    a, b, c = run(5), run(5), run(6)
    pd.testing.assert_frame_equal(a.water_years(), b.water_years())
    assert not np.allclose(a.daily["residual_p95_m3"], c.daily["residual_p95_m3"], equal_nan=True)
    assert a.seed == 5 and a.draws == 200
    wy = a.water_years()
    assert {"residual_p05_m3", "residual_p95_m3", "p_gain", "p_nonzero"} <= set(wy)
    assert ((wy["p_nonzero"] >= 0) & (wy["p_nonzero"] <= 1)).all()
    d = a.daily[a.daily["complete"]]
    assert (d["residual_p05_m3"] <= d["residual_p95_m3"]).all()


def test_term_errors_are_validated():
    with pytest.raises(ValueError):
        TermErrors(inflow=-0.1)
    with pytest.raises(ValueError):
        TermErrors(systematic=1.5)


def _closed_lake_site(write, tmp_path, rate_m3s=0.1, days=90):
    """An invented closed lake with vertical walls fed by one gauged stream."""
    area = 2.0e5  # m²
    idx = pd.date_range("2022-10-01", periods=days, freq="D")
    rise = rate_m3s * T / area  # m per day
    stage = 3.0 + rise * (np.arange(days) + 0.5)  # daily means of a linear rise
    write("stage.csv", "date,value\n" + "".join(
        f"{d.date()},{v:.12f}\n" for d, v in zip(idx, stage, strict=True)))  # fmt: skip
    write(
        "inflow.csv", "date,value\n" + "".join(f"{d.date()},{rate_m3s * 86.4:.12f}\n" for d in idx)
    )  # fmt: skip  (ML/d)
    write("survey.csv", "stage,area\n0,20\n10,20\n")  # ha
    return write(
        "site.toml",
        """
[site]
name = "Closed test pond (invented)"
water_year_start = 10
seed = 99
[storage]
file = "survey.csv"
area_units = "ha"
[series.stage]
file = "stage.csv"
units = "m"
resolution = 1.0
[series.inflow]
file = "inflow.csv"
units = "ML/d"
[uncertainty]
draws = 300
""",
    )


def test_api_closes_a_closed_lake_end_to_end(write, tmp_path):
    """Vertical walls, constant inflow, no outlet: stage rises linearly, so the mean of adjacent
    daily means is the exact boundary stage and the residual vanishes (analytic)."""
    site = load_site(_closed_lake_site(write, tmp_path))
    bal = Lake(site).balance
    d = bal.daily[bal.daily["complete"]]
    assert len(d) == 88
    assert (d["residual_m3"].abs() / d["inflow_m3"]).max() < 1e-8
    assert bal.draws == 300 and bal.seed == 99
    # stage resolution declared as 1.0 m on the series (converted to m): the widest term
    assert bal.errors.stage_resolution_m == pytest.approx(1.0)
    assert "evaporation" in bal.absent_terms and "outflow" in bal.absent_terms


def test_balance_command_writes_tables(write, tmp_path, capsys):
    from lakebalance.cli import main

    path = _closed_lake_site(write, tmp_path)
    out = tmp_path / "out"
    assert main(["balance", str(path), "--json", "--out", str(out), "--draws", "50"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["draws"] == 50 and doc["seed"] == 99
    assert doc["water_years"][0]["water_year"] == 2023
    assert "caution" in doc
    daily = pd.read_parquet(out / "balance_daily.parquet")
    assert len(daily) == 90 and "residual_p05_m3" in daily
    assert (out / "balance_daily.csv").exists() and (out / "balance_monthly.csv").exists()
    grades = pd.read_csv(out / "balance_daily_grades.csv")
    assert len(grades) == 90 and {"inflow", "outflow", "residual"} <= set(grades.columns)
    graded = pd.read_csv(out / "balance_water_years_graded.csv")
    assert {"inflow_measured_m3", "inflow_infilled_m3", "inflow_estimated_share"} <= set(graded)
    assert main(["balance", str(path), "--draws", "0"]) == 0
    text = capsys.readouterr().out
    assert "water years" in text and "no bands" in text
    bands = []
    for seed in ("5", "5", "6"):
        assert main(["balance", str(path), "--json", "--draws", "50", "--seed", seed]) == 0
        doc = json.loads(capsys.readouterr().out)
        assert doc["seed"] == int(seed)
        bands.append(doc["water_years"][0]["residual_p95_m3"])
    assert bands[0] == bands[1] != bands[2]


def test_balance_command_reports_a_missing_storage_section(write, tmp_path, capsys):
    from lakebalance.cli import main

    write("stage.csv", "date,value\n2020-01-01,1\n2020-01-02,1.1\n")
    path = write(
        "site.toml", '[site]\nname = "x"\n[series.stage]\nfile = "stage.csv"\nunits = "m"\n'
    )
    assert main(["balance", str(path)]) == 2
    assert "storage" in capsys.readouterr().err


def test_sub_daily_stage_gives_the_day_boundaries(write, tmp_path):
    """Stage logged every 15 min from Torricelli's law on a vertical-walled basin,
    sqrt(h − e) = sqrt(h0 − e) − K t / (2A) (analytic): the midnight readings become the day
    boundaries, so ΔV = A (h(t_e) − h(t_s)) exactly."""
    area, K, e, h0 = 2.0e5, 1.0, 0.5, 3.0
    times = pd.date_range("2023-01-01", "2023-01-11", freq="15min", inclusive="left")
    t = (times - times[0]).total_seconds().to_numpy()
    stage = e + (math.sqrt(h0 - e) - K * t / (2 * area)) ** 2
    write("stage.csv", "date,value\n" + "".join(
        f"{a},{b:.12f}\n" for a, b in zip(times.strftime("%Y-%m-%d %H:%M"), stage, strict=True)))  # fmt: skip
    write("survey.csv", "stage,area\n0,200000\n10,200000\n")
    path = write(
        "site.toml",
        '[site]\nname = "logged pond (invented)"\n[storage]\nfile = "survey.csv"\n'
        '[series.stage]\nfile = "stage.csv"\nunits = "m"\n',
    )
    bal = Lake(load_site(path), draws=0).balance
    assert bal.notes[0].startswith("day-boundary stage: 10 of 11 from the sub-daily record")
    d = bal.daily.iloc[:-1]
    days = np.arange(len(d) + 1) * T
    h_mid = e + (math.sqrt(h0 - e) - K * days / (2 * area)) ** 2
    np.testing.assert_allclose(d["stage_start_m"], h_mid[:-1], atol=1e-9)
    np.testing.assert_allclose(d["storage_change_m3"], area * np.diff(h_mid), rtol=1e-9)
