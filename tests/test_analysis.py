"""The analysis object: one site, each step computed once on first use, reasons for steps that
cannot run (common practice, no source: the design of the project)."""

from __future__ import annotations

import warnings

import pytest
from _robust_sites import write_site

import lakebalance as lb
from lakebalance.errors import ConfigError, LakebalanceWarning
from lakebalance.report.build import REPORT_STEPS, run_steps


@pytest.fixture(scope="module")
def demo_lake():
    from pathlib import Path

    site = Path(__file__).resolve().parents[1] / "data_demo" / "site.toml"
    lake = lb.open_site(site, draws=50, members=20)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)
        run_steps(lake)
    return lake


def test_every_step_is_computed_once_and_kept(demo_lake):
    lake = demo_lake
    assert set(lake.computed) >= {"records", *REPORT_STEPS}
    before = dict(lake.computed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)
        again = [lake.records, lake.storage, lake.rating, lake.evaporation, lake.balance,
                 lake.flags, lake.seepage, lake.dynamics(), lake.forecast()]  # fmt: skip
    assert lake.computed == before  # nothing ran again
    assert all(v == 1 for v in lake.computed.values()), lake.computed
    assert again[4] is lake.balance and again[7] is lake.dynamics()
    assert lake.unavailable == {}


def test_a_step_with_other_arguments_is_its_own_result(demo_lake):
    lake = demo_lake
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", LakebalanceWarning)
        other = lake.forecast(days=30)
    assert other is not lake.forecast() and other.days == 30
    assert lake.computed["forecast"] == 2 and lake.computed["balance"] == 1


def test_a_step_that_cannot_run_says_why_once_and_its_dependants_name_it(tmp_path):
    site = write_site(tmp_path)  # stage, inflow and storage; no [outlet]
    text = site.read_text().replace('file = "storage.csv"', 'file = "absent.csv"')
    site.write_text(text)
    lake = lb.open_site(site, draws=0)
    assert lake.rating is None and lake.reason("rating") is None  # no outlet: not a failure
    assert lake.get("balance") is None
    assert "absent.csv" in lake.reason("storage")
    assert lake.reason("balance").startswith("needs the storage relation")
    with pytest.raises(lb.InputError, match="absent.csv"):
        _ = lake.balance  # asked directly: the storage's own error, with its file
    assert lake.computed["storage"] == 1 and lake.computed["balance"] == 1


def test_known_results_are_used_as_given(tmp_path):
    site = lb.load_site(write_site(tmp_path))
    records = lb.Lake(site).records
    lake = lb.Lake.with_results(site, records=records)
    assert lake.records is records and "records" not in lake.computed
    with pytest.raises(ValueError, match="unknown steps"):
        lb.Lake.with_results(site, recrods=records)


def test_bad_settings_are_one_error(tmp_path):
    site = lb.load_site(write_site(tmp_path))
    with pytest.raises(ConfigError, match="at least 2"):
        lb.Lake(site, draws=1)
