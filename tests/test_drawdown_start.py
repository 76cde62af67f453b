"""A forecast never starts outside the storage relation (common practice, no source: a relation
is not extrapolated far beyond its survey)."""

from __future__ import annotations

import subprocess
import sys

import pytest

import lakebalance as lb
from lakebalance.errors import RangeError


def test_start_stage_far_above_the_survey_is_one_error(demo_site_path):
    site = lb.load_site(demo_site_path)
    with pytest.raises(RangeError, match="outside the storage relation"):
        lb.Lake(site).forecast(start_stage_m=100.0, members=5, days=10)
    with pytest.raises(RangeError, match="outside the storage relation"):
        lb.Lake(site).forecast(start_stage_m=-1.0, members=5, days=10)


def test_cli_start_stage_in_wrong_unit_exits_2_with_one_line(demo_site_path):
    # 1025 cm typed as m: the relation spans 0-17 m
    out = subprocess.run(
        [
            sys.executable,
            "-m",
            "lakebalance",
            "drawdown",
            str(demo_site_path),
            "--start-stage",
            "1025",
            "--members",
            "5",
            "--days",
            "10",
        ],
        capture_output=True,
        text=True,
    )
    assert out.returncode == 2
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    assert "Traceback" not in out.stderr
