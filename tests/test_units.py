"""The unit layer: kinds, amounts versus rates, errors naming the series."""

from __future__ import annotations

import numpy as np
import pytest

from lakebalance.errors import UnitError
from lakebalance.units import ROLE_KINDS, conversion, factor, from_si, to_si


@pytest.mark.parametrize(
    ("unit", "kind", "amount"),
    [
        ("m", "length", False),
        ("cm", "length", False),
        ("ft", "length", False),
        ("mm", "depth", True),
        ("in", "depth", True),
        ("mm/d", "depth", False),
        ("m3/s", "flow", False),
        ("L/s", "flow", False),
        ("ML/d", "flow", False),
        ("m3", "flow", True),
        ("ML", "flow", True),
        ("acre-ft", "flow", True),
        ("W/m2", "radiation", False),
        ("MJ/m2", "radiation", True),
        ("h", "duration", True),
        ("%", "humidity", False),
    ],
)
def test_amount_or_rate(unit, kind, amount):
    assert conversion(unit, kind).amount is amount


def test_every_role_has_a_kind_with_an_internal_unit():
    from lakebalance.config import SERIES_ROLES
    from lakebalance.units import INTERNAL_UNITS

    for role in SERIES_ROLES:
        assert ROLE_KINDS[role] in INTERNAL_UNITS


def test_megalitres_per_day_in_m3_per_s():
    # 1 ML = 1000 m³ (SI prefix, exact); a day is 86 400 s
    assert to_si(np.array([86.4]), "ML/d", "flow")[0] == pytest.approx(1.0, rel=1e-12)


def test_depth_rate_mm_per_day_to_m_per_day():
    assert to_si(np.array([5.0]), "mm/d", "depth")[0] == pytest.approx(0.005, rel=1e-12)


def test_fraction_humidity_to_percent():
    assert to_si(np.array([0.5]), "fraction", "humidity")[0] == pytest.approx(50.0)


@pytest.mark.parametrize(("unit", "kind"), [("m3/s", "length"), ("kg", "flow"), ("degC", "depth")])
def test_wrong_dimension_is_a_unit_error_naming_the_series(unit, kind):
    with pytest.raises(UnitError, match="series.x"):
        conversion(unit, kind, "series.x")


def test_unknown_unit_is_a_unit_error():
    with pytest.raises(UnitError, match="unknown unit"):
        conversion("blorps", "flow", "series.inflow")


def test_from_si_round_trip():
    values = np.array([0.1, 2.5, 40.0])
    back = from_si(to_si(values, "L/s", "flow"), "flow", "L/s")
    np.testing.assert_allclose(back, values, rtol=1e-12)


def test_factor_rejects_incompatible_units():
    with pytest.raises(UnitError):
        factor("m", "s")
