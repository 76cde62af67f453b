"""The formatting layer for people: digits per quantity, display units, headers in words.

Unit factors: NIST SP 811 (2008) Appendix B — 1 ft = 0.3048 m (exact), 1 ft³/s =
2.831685E-02 m³/s, 1 acre-foot = 1.233489E+03 m³ (based on the international foot: 43,560 ft³),
1 in = 0.0254 m (exact).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from lakebalance.display import SI, US, count_of, header, number, percent, quantity, stage


def _parse(text: str) -> float:
    return float(text.replace(",", ""))


@given(st.floats(min_value=-1e12, max_value=1e12, allow_nan=False).filter(lambda x: abs(x) > 1e-9))
def test_a_number_reads_back_as_its_value_to_the_stated_digits(x):
    shown = number(x, 3)
    assert "e" not in shown.lower()
    assert _parse(shown) == pytest.approx(float(f"{x:.3g}"), rel=1e-12, abs=1e-300)


def test_volumes_flows_and_depths_in_si_and_us_units():
    assert quantity(4_593_462.0, "volume") == "4,593"  # thousand m³, 4 digits from 1,000
    assert quantity(1233.489 * 100, "volume", US) == "100"  # acre-ft (NIST SP 811)
    assert quantity(2.831685e-02 * 250, "flow", US) == "250"  # cfs (NIST SP 811)
    assert quantity(0.0254, "depth", US) == "1.00"  # in (exact)
    assert quantity(0.0123, "depth") == "12.3"  # mm
    assert quantity(float("nan"), "volume") == "–"


def test_stage_to_the_gauge_resolution():
    assert stage(10.23456, SI, 0.001) == "10.235"
    assert stage(10.23456, SI, 0.01) == "10.23"
    assert stage(10.0, US, 0.3048 * 0.01) == "32.81"  # 0.01 ft resolution, 0.3048 m/ft exact


def test_percentages_and_counts():
    assert percent(7.456) == "7.5 %" and percent(42.4) == "42 %"
    assert count_of(4, 18) == "in 4 of 18 years"
    assert math.isnan(float("nan")) and percent(float("nan")) == "–"


def test_headers_in_words_with_their_display_unit():
    assert header("residual_p05_m3") == "residual (unexplained), 5th percentile (thousand m³)"
    assert header("inflow:tamsby_brook_m3", US) == "gauged inflow (tamsby brook) (acre-ft)"
    assert header("closure_error_pct") == "residual share of gains (%)"
    assert header("outflow_m3s", US) == "outlet outflow (cfs)"
    assert header("mean_area_m2") == "mean lake area (km²)"
    assert header("p_nonzero") == "confidence the residual is not zero"
