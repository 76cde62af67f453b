"""Sizes within reason (issue 18): ``draws``, ``members``, ``days``, ``rating_variants`` and
``bootstrap`` have declared upper limits, and the arrays they size are estimated from the record
before they are allocated.

``10**9`` draws or members ended in allocation tracebacks, ``days = 10**9`` in a datetime one.
The memory estimate of the balance's Monte Carlo is checked against the peak that Python's
``tracemalloc`` measures (numpy reports its array buffers to it; an independent measurement).
The last date a day-resolution timestamp can hold is pandas' ``Timestamp.max`` (2262-04-11).
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from _robust_sites import write_site
from conftest import DEMO

import lakebalance as lb
from lakebalance import resources
from lakebalance.cli import main
from lakebalance.errors import MemoryLimitError


def _one_error(capsys) -> str:
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "Traceback" not in err[0], err
    return err[0]


@pytest.mark.parametrize(
    ("argv", "needle"),
    [
        (["balance", "--draws", "1000000000"], "'draws' must be between 0 and 1,000,000"),
        (["drawdown", "--members", "1000000000"], "'members' must be between 1 and 1,000,000"),
        (["drawdown", "--days", "1000000000"], "'days' must be between 1 and 36,525"),
    ],
)
def test_a_billion_is_refused_by_the_declared_range(tmp_path, capsys, argv, needle):
    site = write_site(tmp_path)
    assert main([argv[0], str(site), *argv[1:]]) == 2
    assert needle in _one_error(capsys)


def test_declared_limits_hold_in_the_site_file(tmp_path, capsys):
    site = write_site(tmp_path, extra_toml="\n[drawdown]\nrating_variants = 1000000\n")
    assert main(["check", str(site)]) == 2
    line = _one_error(capsys)
    assert "'drawdown.rating_variants' must be between 1 and 100,000" in line
    assert re.search(r"site\.toml:\d+:", line)


def test_draws_past_the_memory_limit_stop_before_allocating(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(resources, "available_memory_bytes", lambda: 200 * 1024**2)
    site = write_site(tmp_path)
    assert main(["balance", str(site), "--draws", "500000"]) == 2
    line = _one_error(capsys)
    assert "draws = 500,000 needs about" in line and "the limit here is 100.0 MiB" in line


def test_members_past_the_memory_limit_stop_before_allocating(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(resources, "available_memory_bytes", lambda: 200 * 1024**2)
    site = write_site(tmp_path)
    argv = ["drawdown", str(site), "--scenario", "stochastic", "--members", "900000"]
    argv += ["--days", "3650"]
    assert main(argv) == 2
    assert "members = " in (line := _one_error(capsys)) and "needs about" in line


def test_bootstrap_past_the_memory_limit_is_one_line(tmp_path, monkeypatch):
    text = (DEMO / "site.toml").read_text(encoding="utf-8")
    text = re.sub(r'^(file|gaugings) = "', rf'\1 = "{DEMO.as_posix()}/', text, flags=re.M)
    text = text.replace("[outlet]\n", "[outlet]\nbootstrap = 100000\n", 1)
    site = tmp_path / "site.toml"
    site.write_text(text, encoding="utf-8")
    monkeypatch.setattr(resources, "available_memory_bytes", lambda: 20 * 1024**2)
    with pytest.raises(MemoryLimitError, match="bootstrap = 100,000 needs about"):
        _ = lb.open_site(site).rating


def test_a_horizon_past_the_datetime_range_is_one_line(tmp_path, capsys):
    site = write_site(tmp_path)
    argv = ["drawdown", str(site), "--scenario", "constant", "--start", "2250-01-01"]
    argv += ["--start-stage", "2.0", "--days", "36000"]
    assert main(argv) == 2
    assert "ends after 2262-04-10" in _one_error(capsys)


@pytest.mark.filterwarnings("ignore::lakebalance.errors.ExtrapolationWarning")
def test_the_monte_carlo_estimate_bounds_the_measured_peak(tmp_path):
    """The estimate (bytes) is at least the peak tracemalloc measures, and not wildly above it
    (within a factor of four), on a 2-year record with 4,000 draws."""
    import tracemalloc

    from lakebalance.balance import _monte_carlo_bytes, add_uncertainty

    site = write_site(tmp_path, days=730, extra_toml="")
    lake = lb.open_site(site, draws=0)
    balance = lake.balance
    laws = lake.laws_without_seepage
    draws = 4000
    estimate = _monte_carlo_bytes(balance.daily.index, balance.water_year_start, draws)
    tracemalloc.start()
    add_uncertainty(balance, area_fn=laws.area, draws=draws, rng=np.random.default_rng(1))
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak <= estimate <= 4 * peak, (peak, estimate)
