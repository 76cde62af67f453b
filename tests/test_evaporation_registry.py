"""The registry of lake evaporation methods: one entry per method, and every other spelling of the
method names (the options' Literal, the command's choices, the documentation) agrees with it.

Agreement checks are common practice, no source; the entries' equations are checked against
FAO-56 and pyet in ``tests/reference``.
"""

from __future__ import annotations

import re
import typing
import warnings
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from conftest import ROOT

from lakebalance.commands.evaporation import METHOD_CHOICES
from lakebalance.errors import ConfigError
from lakebalance.evaporation import (
    METHODS,
    PREFERENCE,
    REGISTRY,
    WEATHER_ROLES,
    EvaporationMethod,
    EvaporationOptions,
    estimate_lake_evaporation,
)
from lakebalance.evaporation import lake as lake_module
from lakebalance.evaporation.method import FAMILIES, Family
from lakebalance.evaporation.weather import QUANTITIES
from lakebalance.results import Summary

DOC = ROOT / "docs" / "evaporation.md"


def test_options_literal_command_choices_and_registry_agree():
    literal = typing.get_args(typing.get_type_hints(EvaporationOptions)["method"])
    assert literal == ("auto", *METHODS)
    assert METHOD_CHOICES == ("auto", *METHODS)
    assert len(set(METHODS)) == len(METHODS)


def test_docs_list_every_method_in_the_key_table_and_in_methods():
    text = DOC.read_text(encoding="utf-8")
    row = next(ln for ln in text.splitlines() if ln.startswith("| `method` |"))
    assert re.findall(r"`([a-z_0-9]+)`", row.split("|")[3]) == ["auto", *METHODS]
    section = text.split("## Methods", 1)[1].split("\n## ", 1)[0]
    assert re.findall(r"^- \*\*([a-z_0-9]+)\*\*", section, flags=re.M) == list(METHODS)
    auto = re.search(r"`auto` takes the first possible of: (.*?)\.\n", text, flags=re.S)
    assert auto is not None
    assert re.findall(r"`([a-z_0-9]+)`", auto.group(1)) == list(PREFERENCE)


def test_every_entry_is_complete():
    assert typing.get_args(Family) == FAMILIES
    ranks = [m.preference for m in REGISTRY]
    assert len(set(ranks)) == len(ranks), "two methods share a rank in method = 'auto'"
    for m in REGISTRY:
        assert isinstance(m, EvaporationMethod)
        assert m.family in FAMILIES
        assert m.label and m.reference
        assert set(m.needs) <= set(QUANTITIES), m.name
        assert set(m.roles) <= set(WEATHER_ROLES), m.name
    # every weather role is read by some method
    assert set().union(*(m.roles for m in REGISTRY)) == set(WEATHER_ROLES)


def _weather(days: int = 365) -> pd.DataFrame:
    """Invented daily weather of a mid-latitude site."""
    rng = np.random.default_rng(11)
    index = pd.date_range("2020-01-01", periods=days, freq="D", name="date")
    season = np.sin(2 * np.pi * (index.day_of_year.to_numpy() - 110) / 365.0)
    tmean = 10 + 11 * season + rng.normal(0, 2, days)
    return pd.DataFrame(
        {
            "tmax": tmean + 5,
            "tmin": tmean - 5,
            "rh": np.clip(70 - 10 * season, 20, 100),
            "wind": rng.gamma(3.0, 1.0, days),
            "solar": np.clip(16 + 10 * season, 1, None),
        },
        index=index,
    )


def test_a_new_entry_is_one_registry_line(monkeypatch):
    """A method added to the registry (here: an invented constant rate, 3 mm/d) is computed,
    tabulated in table order and chosen by ``auto`` by its rank, with nothing else touched."""
    constant = EvaporationMethod(
        name="constant",
        family="temperature",
        label="a constant rate (invented, for this test)",
        reference="none (test only)",
        roles=("tmax", "tmin"),
        needs=("temperature_range",),
        compute=lambda weather, options: np.full(len(weather.index), 0.003),
        preference=-1,
    )
    registry = (*REGISTRY, constant)
    monkeypatch.setattr(lake_module, "REGISTRY", registry)
    monkeypatch.setattr(
        lake_module,
        "PREFERENCE",
        tuple(m.name for m in sorted(registry, key=lambda m: m.preference)),
    )
    monkeypatch.setattr(
        lake_module,
        "method_named",
        lambda name, site_file=None: {m.name: m for m in registry}[name],
    )
    res = estimate_lake_evaporation(
        _weather(), EvaporationOptions(), latitude_deg=46.0, elevation_m=300.0
    )
    assert res.available[-1] == "constant"
    assert res.method == "constant"
    np.testing.assert_allclose(res.depth_m, 0.003)


def test_a_method_that_is_not_possible_says_what_it_needs():
    w = _weather()[["tmax", "tmin"]]
    with pytest.raises(ConfigError, match="penman' needs solar radiation or sunshine hours and a "):
        estimate_lake_evaporation(
            w, EvaporationOptions(method="penman"), latitude_deg=46.0, elevation_m=None
        )


def test_result_protocol_summary_dict_and_frame():
    res = estimate_lake_evaporation(
        _weather(), EvaporationOptions(), latitude_deg=46.0, elevation_m=300.0
    )
    summary = res.summary()
    assert isinstance(summary, Summary) and "method penman" in summary
    assert "<pre>" in summary._repr_html_()
    doc = res.to_dict("mm", warnings=["w1"])
    assert doc["method"] == "penman" and doc["warnings"] == ["w1"]
    assert "licensed professionals" in doc["caution"]
    # monthly totals in mm are the sum of the daily depths in m (1 m = 1000 mm, NIST SP 811)
    july = next(r for r in doc["monthly"] if r["month"] == "2020-07")
    assert july["penman"] == pytest.approx(res.by_method.loc["2020-07", "penman"].sum() * 1000.0)
    frame = res.to_frame()
    assert list(frame.columns) == list(res.available)
    pd.testing.assert_frame_equal(frame, res.by_method)


def test_explicit_method_via_options_replace_matches_auto_column():
    w = _weather()
    base = EvaporationOptions()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        auto = estimate_lake_evaporation(w, base, latitude_deg=46.0, elevation_m=300.0)
        for name in auto.available:
            one = estimate_lake_evaporation(
                w, replace(base, method=name), latitude_deg=46.0, elevation_m=300.0
            )
            assert one.method == name
            np.testing.assert_array_equal(one.depth_m.to_numpy(), auto.by_method[name])
