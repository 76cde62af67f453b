"""Unit factors of lakebalance against NIST Special Publication 811 (2008 edition).

Source: A. Thompson and B. N. Taylor, "Guide for the Use of the International System of Units
(SI)", NIST Special Publication 811, 2008 edition, Appendix B.8 "Factors for units listed
alphabetically" and B.9 "by kind of quantity". The factors are printed there to seven significant
digits (``1.233 489 E+03``) or marked exact; the tolerance below is half a unit of the last
printed digit, and exact factors are checked to floating-point accuracy.
"""

from __future__ import annotations

import numpy as np
import pytest

from lakebalance.units import conversion, factor, to_si

# (unit as users write it, SI unit, NIST SP 811 Appendix B.8 factor, exact?)
NIST_SP811_B8 = [
    ("acre-ft", "m**3", 1.233489e03, False),  # acre-foot (based on U.S. survey foot)
    ("ft3/s", "m**3/s", 2.831685e-02, False),  # cubic foot per second
    ("cfs", "m**3/s", 2.831685e-02, False),  # same unit, trade spelling
    ("US gallon", "m**3", 3.785412e-03, False),  # gallon (U.S.)
    ("gallon/minute", "m**3/s", 6.309020e-05, False),  # gallon (U.S.) per minute
    ("acre", "m**2", 4.046873e03, False),  # acre (based on U.S. survey foot)
    ("inch", "m", 2.54e-02, True),  # inch, exact
    ("ft", "m", 3.048e-01, True),  # foot, exact
    ("mile", "m", 1.609344e03, True),  # mile (international), exact
    ("ha", "m**2", 1.0e04, True),  # hectare, exact
    ("L", "m**3", 1.0e-03, True),  # liter, exact
    ("km/h", "m/s", 2.777778e-01, False),  # kilometer per hour
]


@pytest.mark.parametrize(("unit", "si", "expected", "exact"), NIST_SP811_B8)
def test_factor_matches_nist_sp811_appendix_b8(unit, si, expected, exact):
    got = factor(unit, si)
    if exact:
        assert got == pytest.approx(expected, rel=1e-12)
    else:
        # half a unit in the 7th significant digit
        assert abs(got - expected) <= 0.5e-6 * 10 ** np.floor(np.log10(expected))


def test_ingest_conversion_of_flows_uses_the_nist_factors():
    """NIST SP 811 B.8: ft³/s and acre-foot; a day is 86 400 s (exact)."""
    assert to_si(np.array([1.0]), "ft³/s", "flow")[0] == pytest.approx(2.831685e-02, abs=5e-9)
    # 1 acre-foot per day in m³/s
    assert to_si(np.array([1.0]), "acre-ft/d", "flow")[0] == pytest.approx(
        1.233489e03 / 86400.0, rel=5e-7
    )
    # US gallon per minute
    assert to_si(np.array([1.0]), "gpm", "flow")[0] == pytest.approx(6.309020e-05, rel=1e-6)


def test_fahrenheit_to_celsius_nist_sp811_b9():
    """NIST SP 811 B.9 (temperature): t/°C = (t/°F - 32)/1.8, exact."""
    conv = conversion("degF", "temperature")
    values = np.array([32.0, 212.0, -40.0, 98.6])
    np.testing.assert_allclose(conv.apply(values), (values - 32.0) / 1.8, atol=1e-10)


def test_inch_per_day_is_a_depth_rate_of_exactly_0_0254_m_per_day():
    """NIST SP 811 B.8: inch = 2.54 E-02 m exactly."""
    conv = conversion("in/d", "depth")
    assert conv.scale == pytest.approx(0.0254, rel=1e-12)
    assert conv.amount is False
