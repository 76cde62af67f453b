"""The drawdown forecast on the invented demo reservoir, and the command line.

Check (issue 8): a member that replays a historical year reproduces that year's observed stage
path within the balance residual, i.e. |simulated - observed| <= sum |residual| / area over the
days run (the replay uses the same terms as the balance, so it misses exactly what the balance
leaves unexplained), plus 1 cm for the daily-mean stage standing in for the day-end state.
"""

from __future__ import annotations

import dataclasses
import json
import warnings

import numpy as np
import pytest

import lakebalance as lb
from lakebalance.cli import main


@pytest.fixture(scope="module")
def demo():
    from pathlib import Path

    path = Path(__file__).resolve().parents[1] / "data_demo" / "site.toml"
    site = lb.load_site(path)
    return site, None


def test_replay_member_reproduces_its_year_within_the_balance_residual(demo):
    site, records = demo
    opts = dataclasses.replace(
        site.drawdown, demand=None, restriction=(), seepage=False, sample_uncertainty=False,
        compare_methods=False,
    )  # fmt: skip
    site = dataclasses.replace(site, drawdown=opts)
    start, days = "2015-06-30", 90
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lb.errors.LakebalanceWarning)
        lake = lb.Lake(site, draws=0)
        balance = lake.balance
        fc = lake.forecast(start, days=days, scenario="replay")
    member = fc.labels.index("2015")
    daily = balance.daily.loc[start:].iloc[: days + 1]
    observed = daily["stage_m"].to_numpy()
    simulated = fc.stage_m[:, member]
    residual_m = np.abs(daily["residual_m3"].to_numpy()[1:]) / daily["area_m2"].to_numpy()[1:]
    bound = np.concatenate([[0.0], np.cumsum(residual_m)])
    assert np.all(np.isfinite(observed)) and np.all(np.isfinite(bound))
    assert np.all(np.abs(simulated - observed) <= bound + 0.01)
    # the other members are other years: they do not follow 2015
    other = fc.labels.index("2010")
    assert np.max(np.abs(fc.stage_m[:, other] - observed)) > 0.05


def test_restrictions_side_by_side(demo):
    site, records = demo
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lb.errors.LakebalanceWarning)
        fc = lb.Lake(site).forecast("2022-06-30", days=200, scenario="constant")
    assert fc.restricted and fc.unrestricted is not None
    table = fc.restriction_effect()
    assert set(table.index) == set(site.levels)
    # restrictions draw less water and never make a falling level come sooner
    assert fc.withdrawn_m3.mean() < fc.unrestricted.withdrawn_m3.mean()
    for o, u in zip(fc.odds, fc.unrestricted.odds, strict=True):
        if o.direction == "falling" and o.days_50 is not None and u.days_50 is not None:
            assert o.days_50 >= u.days_50
    doc = fc.to_dict()
    assert "unrestricted" in doc and doc["seed"] == site.site.seed


def test_command_json_has_odds_per_level(demo_site_path, capsys, tmp_path):
    code = main(
        [
            "drawdown",
            str(demo_site_path),
            "--start",
            "2022-06-30",
            "--days",
            "60",
            "--scenario",
            "stochastic",
            "--members",
            "200",
            "--seed",
            "5",
            "--json",
            "--out",
            str(tmp_path),
        ]
    )
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["seed"] == 5 and doc["members"] == 200
    for name in ("intake", "dead", "spill"):
        level = doc["levels"][name]
        assert 0.0 <= level["probability_by_horizon"] <= 1.0
        assert set(level["days_to_crossing"]) == {"p10", "p50", "p90"}
    assert (tmp_path / "drawdown_fan.png").stat().st_size > 1000
    assert (tmp_path / "drawdown_stage_percentiles.csv").exists()


def test_command_bad_start_is_a_one_line_error(demo_site_path, capsys):
    code = main(["drawdown", str(demo_site_path), "--start", "31/31/2022", "--days", "5"])
    assert code == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "ISO date" in err and len(err.strip().splitlines()) == 1


def test_sampled_uncertainty_spreads_a_single_scenario(demo):
    """With sample_uncertainty a one-member scenario becomes an ensemble whose members differ by
    their evaporation factor and rating draw: the fan has a width, the median stays near the
    unsampled run."""
    site, records = demo
    plain = dataclasses.replace(
        site.drawdown, restriction=(), seepage=False, sample_uncertainty=False,
        compare_methods=False,
    )  # fmt: skip
    sampled = dataclasses.replace(plain, sample_uncertainty=True, rating_variants=50)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lb.errors.LakebalanceWarning)
        one = lb.Lake(dataclasses.replace(site, drawdown=plain)).forecast(
            "2022-06-30", days=120, scenario="percentile"
        )
        many = lb.Lake(dataclasses.replace(site, drawdown=sampled)).forecast(
            "2022-06-30", days=120, scenario="percentile", members=200
        )
    assert one.members == 1 and many.members == 200 and many.sampled_uncertainty
    end = many.stage_percentiles.iloc[-1]
    assert end["p95"] - end["p5"] > 0.01
    assert abs(end["p50"] - one.stage_percentiles.iloc[-1]["p50"]) < end["p95"] - end["p5"]


def test_default_outlook_draws_model_uncertainty_and_shows_every_method(demo):
    """Issue 14: by default the outlook draws the rating, evaporation and seepage errors, says
    what it carries, and shows each scenario method's probabilities side by side."""
    site, _ = demo
    opts = dataclasses.replace(site.drawdown, compare_members=40, rating_variants=20)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", lb.errors.LakebalanceWarning)
        fc = lb.Lake(dataclasses.replace(site, drawdown=opts)).forecast(
            "2022-06-30", days=60, scenario="stochastic", members=60
        )
    assert fc.sampled_uncertainty
    assert any("rating" in c for c in fc.carried) and any("evaporation" in c for c in fc.carried)
    methods = [r.method for r in fc.method_spread]
    assert methods == ["replay", "esp", "bootstrap", "monthly"]
    replay = fc.method_spread[0]
    assert all(v is not None for v in replay.years_reached.values())
    doc = fc.to_dict()
    assert len(doc["method_spread"]) == 4 and doc["uncertainty"]["not_carried"]
    assert "side by side" in fc.summary()


def test_command_no_compare_runs_one_method(demo_site_path, capsys):
    code = main(
        ["drawdown", str(demo_site_path), "--days", "20", "--scenario", "replay", "--no-compare",
         "--no-progress", "--json"]
    )  # fmt: skip
    assert code == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["method_spread"] == [] and doc["method"] == "replay"
    assert doc["levels"]["sill"]["years_total"] == doc["independent_years"]
