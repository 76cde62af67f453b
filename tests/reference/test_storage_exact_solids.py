"""Storage relations of solids whose volume is known in closed form.

Sources: the volumes of a right circular cone (pi r^2 h / 3), of a frustum of a cone
(pi h / 3 (R^2 + R r + r^2)), of a prism (A h) and of a paraboloid of revolution (half its
circumscribing cylinder, pi R^2 H / 2) are textbook results of solid geometry (from memory; any
handbook of mensuration). The area of a regular n-gon inscribed in a circle of radius r is
n r^2 sin(2 pi / n) / 2 (from memory), which bounds the polygon error below 1e-4 here.
"""

from __future__ import annotations

import math
import warnings

import geopandas as gpd
import numpy as np
import pytest
import shapely

from lakebalance.config import StorageOptions
from lakebalance.errors import ApproximationWarning
from lakebalance.io.storage import read_storage
from lakebalance.storage import storage_from_outline, storage_from_table

# an equal-area projected CRS (ETRS89-extended / LAEA Europe, EPSG:3035), metres
CRS = "EPSG:3035"
X0, Y0 = 4_700_000.0, 2_700_000.0  # a point well inside its area of use
SEGMENTS = 512  # quad_segs -> 2048 vertices per circle


def _circles(tmp_path, radii, elevations, name="contours.gpkg", crs=CRS):
    polys = [shapely.Point(X0, Y0).buffer(r, quad_segs=SEGMENTS) for r in radii]
    frame = gpd.GeoDataFrame({"elevation": elevations}, geometry=polys, crs=crs)
    path = tmp_path / name
    frame.to_file(path)
    return path


def test_cone_from_contour_polygons_matches_pi_r2_h_over_3(tmp_path):
    """Cone of radius 600 m and depth 12 m: V = pi r^2 h / 3 to 0.1% (solid geometry)."""
    r_top, depth = 600.0, 12.0
    z = np.arange(1.0, 13.0)  # contours every metre above the apex (apex at elevation 0)
    path = _circles(tmp_path, r_top * z / depth, z + 500.0)
    opts = StorageOptions(
        source="contours", file=path, datum_offset=500.0, bottom=0.0, integration="frustum"
    )
    curve = read_storage(opts)
    exact = math.pi * r_top**2 * depth / 3.0
    got = float(curve.volume(depth) - curve.volume(0.0))
    assert got == pytest.approx(exact, rel=1e-3)
    # and half-way: a cone of half the radius and depth holds 1/8
    assert float(curve.volume(6.0) - curve.volume(0.0)) == pytest.approx(exact / 8, rel=1e-3)


def test_frustum_from_contour_polygons_matches_frustum_formula(tmp_path):
    """Frustum r = 200 m (bottom) to R = 500 m (top), 8 m deep: V = pi h/3 (R^2 + R r + r^2)."""
    r0, r1, depth = 200.0, 500.0, 8.0
    z = np.linspace(0.0, depth, 5)
    path = _circles(tmp_path, r0 + (r1 - r0) * z / depth, z)
    curve = read_storage(StorageOptions(source="contours", file=path))
    exact = math.pi * depth / 3.0 * (r1**2 + r1 * r0 + r0**2)
    assert float(curve.volume(depth) - curve.volume(0.0)) == pytest.approx(exact, rel=1e-3)


def test_vertical_walls_give_area_times_depth_exactly(tmp_path):
    """A prism (the same polygon at every level): V = A h exactly, both integration rules."""
    square = shapely.box(X0, Y0, X0 + 300.0, Y0 + 200.0)
    frame = gpd.GeoDataFrame({"elevation": [0.0, 2.5, 7.0]}, geometry=[square] * 3, crs=CRS)
    path = tmp_path / "prism.geojson"
    frame.to_file(path)
    for rule in ("frustum", "average_end_area"):
        curve = read_storage(StorageOptions(source="contours", file=path, integration=rule))
        area = float(curve.area_m2[0])
        h = np.linspace(0.0, 7.0, 29)
        np.testing.assert_allclose(curve.volume(h) - curve.volume(0.0), area * h, rtol=1e-12)
        np.testing.assert_allclose(curve.area(h), area, rtol=1e-12)
    assert area == pytest.approx(300.0 * 200.0, rel=1e-6)


def test_paraboloid_is_exact_with_average_end_area():
    """Paraboloid of revolution (area linear in depth): V = pi R^2 H / 2, and the
    average-end-area rule integrates linear area exactly, between any levels."""
    radius, depth = 400.0, 9.0
    h = np.array([0.0, 1.0, 4.0, 9.0])
    area = math.pi * radius**2 * h / depth
    curve = storage_from_table(h, area, integration="average_end_area")
    assert float(curve.volume(9.0)) == pytest.approx(math.pi * radius**2 * depth / 2, rel=1e-12)
    x = np.linspace(0.0, 9.0, 37)
    np.testing.assert_allclose(
        curve.volume(x), math.pi * radius**2 * x**2 / (2 * depth), rtol=1e-12
    )


def test_cone_table_is_exact_with_frustum_rule():
    """The frustum rule is exact for a cone (sqrt(area) linear in stage) at every stage."""
    radius, depth = 250.0, 6.0
    h = np.array([0.0, 0.7, 2.0, 6.0])
    curve = storage_from_table(h, math.pi * (radius * h / depth) ** 2)
    x = np.linspace(0.0, 6.0, 61)
    exact = math.pi * radius**2 * x**3 / (3 * depth**2)
    np.testing.assert_allclose(curve.volume(x), exact, rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("p", [0.5, 1.0, 1.4, 2.0, 4.0])
def test_outline_approximation_matches_its_analytic_volume(p):
    """A(z) = A0 ((z - zb)/D)^p integrates to A0 D / (p + 1) (elementary calculus, from
    memory); the sampled relation agrees to 0.1% and warns that it is an approximation."""
    a0, depth, top = 2.0e6, 14.0, 20.0
    with pytest.warns(ApproximationWarning):
        curve = storage_from_outline(a0, top, depth, p)
    got = float(curve.volume(top) - curve.volume(top - depth))
    assert got == pytest.approx(a0 * depth / (p + 1), rel=1e-3)
    assert curve.approximate
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert float(curve.area(top)) == pytest.approx(a0, rel=1e-12)
