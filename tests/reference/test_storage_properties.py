"""Properties of every storage relation: the inverse is exact and the volume is the integral
of the area.

Sources: analytic identities. stage(volume(h)) = h is the definition of an inverse; dV/dh = A is
the definition of storage as the integral of lake area over stage. Within one segment the area
is a polynomial of degree <= 2 in stage, so two-point Gauss-Legendre quadrature integrates it
exactly (Abramowitz & Stegun, 1964, eq. 25.4.29 with its table 25.4), which lets the test check
dV/dh = A without finite differences.
"""

from __future__ import annotations

import warnings

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance.storage import StorageCurve


@st.composite
def relations(draw) -> StorageCurve:
    n = draw(st.integers(min_value=2, max_value=25))
    base = draw(st.floats(min_value=-50.0, max_value=900.0))
    steps = draw(st.lists(st.floats(min_value=1e-3, max_value=5.0), min_size=n - 1, max_size=n - 1))
    stage = base + np.concatenate([[0.0], np.cumsum(steps)])
    first = draw(st.sampled_from([0.0, 1.0, 1e3, 1e6]))
    # area gains between levels: none, or at least 1 mm² (a survey resolves nothing finer; gains
    # like 1e-225 m² only test float underflow, not the relation)
    gain = st.one_of(st.just(0.0), st.floats(min_value=1e-6, max_value=1e6))
    gains = draw(st.lists(gain, min_size=n - 1, max_size=n - 1))
    area = first + np.concatenate([[0.0], np.cumsum(gains)])
    if area[-1] <= 0:
        area[-1] = 1.0
    rule = draw(st.sampled_from(["frustum", "average_end_area"]))
    volume0 = draw(st.sampled_from([0.0, 2.5e5]))
    return StorageCurve.from_areas(
        stage, area, base_volume_m3=volume0, integration=rule, below="extend", above="extend"
    )


def _well_conditioned(curve: StorageCurve, h: np.ndarray) -> np.ndarray:
    """Stages where one rounding unit of storage moves the stage by less than 1e-10 m."""
    area = curve.area(h)
    with np.errstate(divide="ignore", invalid="ignore"):
        moved = np.where(area > 0, 2.2e-16 * np.abs(curve.volume(h)) / area, np.inf)
    return moved < 1e-10


@settings(max_examples=150, deadline=None)
@given(curve=relations(), fractions=st.lists(st.floats(0.0, 1.0), min_size=1, max_size=40))
def test_stage_of_volume_is_the_inverse_to_1e9_m(curve, fractions):
    """stage(volume(h)) == h to 1e-9 m inside the range, wherever the problem itself allows it:
    a storage V is known to one rounding unit (2.2e-16 |V|), which moves the stage by that over
    the area, so points where that alone exceeds 1e-10 m (areas near zero at the very bottom)
    are left out, as are zero-area levels (no single stage holds that storage)."""
    lo, hi = curve.min_stage_m, curve.max_stage_m
    h = lo + (hi - lo) * np.asarray(fractions)
    h = h[_well_conditioned(curve, h)]
    back = curve.stage(curve.volume(h))
    np.testing.assert_allclose(back, h, rtol=0, atol=1e-9)


@settings(max_examples=100, deadline=None)
@given(curve=relations(), extra=st.floats(0.01, 3.0))
def test_inverse_holds_beyond_the_range_when_extended(curve, extra):
    """With linear extension of area the inverse stays exact above the range."""
    h = curve.max_stage_m + np.linspace(0.0, extra, 7)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        h = h[_well_conditioned(curve, h)]
        back = curve.stage(curve.volume(h))
    np.testing.assert_allclose(back, h, rtol=0, atol=1e-9)


def _gauss_integral(curve: StorageCurve, a: float, b: float) -> float:
    """Integral of area from a to b, split at the levels, two-point Gauss per piece."""
    cuts = np.concatenate([[a], curve.stage_m[(curve.stage_m > a) & (curve.stage_m < b)], [b]])
    mid = 0.5 * (cuts[1:] + cuts[:-1])
    half = 0.5 * (cuts[1:] - cuts[:-1])
    off = half / np.sqrt(3.0)
    return float(np.sum(half * (curve.area(mid - off) + curve.area(mid + off))))


@settings(max_examples=150, deadline=None)
@given(curve=relations(), f1=st.floats(0.0, 1.0), f2=st.floats(0.0, 1.0))
def test_volume_difference_is_the_integral_of_area(curve, f1, f2):
    """V(b) - V(a) equals the exact integral of area(h) (dV/dh = A), relative 1e-9.

    The difference of two stored volumes also carries their rounding (a few units in the last
    place of |V|, which a base volume of 2.5e5 m³ makes larger than 1e-9 of a tiny range), so
    8 rounding units of the larger volume are allowed on top."""
    lo, hi = curve.min_stage_m, curve.max_stage_m
    a, b = sorted((lo + (hi - lo) * f1, lo + (hi - lo) * f2))
    if b - a < 1e-6:
        return
    vb, va = float(curve.volume(b)), float(curve.volume(a))
    got = vb - va
    ref = _gauss_integral(curve, a, b)
    roundoff = 8 * np.spacing(max(abs(va), abs(vb)))
    tol = 1e-9 * max(abs(ref), curve.max_volume_m3 - curve.min_volume_m3) + roundoff
    assert abs(got - ref) <= tol


@settings(max_examples=60, deadline=None)
@given(curve=relations())
def test_area_and_volume_are_monotone_and_continuous(curve):
    """Area and volume never decrease with stage; values at the levels equal the table."""
    h = np.linspace(curve.min_stage_m, curve.max_stage_m, 301)
    assert np.all(np.diff(curve.area(h)) >= -1e-9 * curve.area_m2[-1])
    assert np.all(np.diff(curve.volume(h)) >= -1e-9 * max(curve.max_volume_m3, 1.0))
    np.testing.assert_allclose(curve.area(curve.stage_m), curve.area_m2, rtol=1e-12, atol=1e-9)
    np.testing.assert_array_equal(curve.volume(curve.stage_m), curve.volume_m3)
