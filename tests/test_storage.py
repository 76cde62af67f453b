"""Storage relation: policies, shapes, validation errors, readers and the ``storage`` command.

Expected values here are analytic (prism and cone volumes; common practice, no source) or
follow from the documented policies.
"""

from __future__ import annotations

import json
import math
import warnings

import geopandas as gpd
import numpy as np
import pytest
import shapely

from lakebalance.cli import main
from lakebalance.config import StorageOptions
from lakebalance.errors import (
    ConfigError,
    DataQualityWarning,
    ExtrapolationWarning,
    InputError,
    RangeError,
)
from lakebalance.io.storage import read_storage
from lakebalance.storage import StorageCurve, compare_curves, integrate_area, storage_from_table

CRS = "EPSG:3035"  # an equal-area CRS (metres)


def _prism(**kw) -> StorageCurve:
    return storage_from_table([10.0, 12.0, 15.0], [100.0, 100.0, 100.0], **kw)


# ---- evaluation and policies ------------------------------------------------------------------
def test_any_shape_and_nan_pass_through():
    curve = _prism()
    h = np.array([[10.5, np.nan, 14.0], [11.0, 12.0, 15.0]])
    v = curve.volume(h)
    assert v.shape == (2, 3)
    assert np.isnan(v[0, 1])
    np.testing.assert_allclose(v[~np.isnan(v)], 100.0 * (h[~np.isnan(h)] - 10.0))
    np.testing.assert_allclose(curve.stage(v), h, equal_nan=True)
    assert curve.area(np.empty((0, 4))).shape == (0, 4)


def test_error_policy_raises_range_error_naming_counts():
    curve = _prism(below="error", above="error")
    with pytest.raises(RangeError, match="2 of 3 stages below the lowest level"):
        curve.area(np.array([9.0, 9.5, 11.0]))
    with pytest.raises(RangeError, match="above the highest level"):
        curve.stage(np.array([1e9]))


def test_clamp_policy_holds_end_values_warns_and_flags():
    curve = _prism(below="clamp", above="clamp")
    h = np.array([8.0, 11.0, 20.0])
    with pytest.warns(ExtrapolationWarning, match="held at the lowest level"):
        a = curve.area(h)
    np.testing.assert_allclose(a, 100.0)
    with pytest.warns(ExtrapolationWarning):
        v = curve.volume(h)
    np.testing.assert_allclose(v, [0.0, 100.0, 500.0])
    np.testing.assert_array_equal(curve.out_of_range(h), [-1, 0, 1])
    np.testing.assert_array_equal(curve.volume_out_of_range([-1.0, 5.0, 501.0]), [-1, 0, 1])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        curve.area(h, warn=False)  # silenced on request only


def test_extend_policy_continues_area_linearly_and_stops_at_the_bottom():
    """Analytic: areas of a triangle and trapezoids under a linear area(h) (elementary geometry)."""
    # area linear in stage (average end area), slope 50 m²/m: bottom at 10 - 100/50 = 8 m
    curve = storage_from_table(
        [10.0, 12.0],
        [100.0, 200.0],
        integration="average_end_area",
        below="extend",
        above="extend",
    )
    assert curve.bottom_stage_m == pytest.approx(8.0)
    with pytest.warns(ExtrapolationWarning):
        a = curve.area(np.array([7.0, 9.0, 13.0]))
    np.testing.assert_allclose(a, [0.0, 50.0, 250.0])
    with pytest.warns(ExtrapolationWarning):
        v = curve.volume(np.array([7.0, 9.0, 13.0]))
    # triangle below: -(100 m² * 2 m / 2) at the bottom; trapezoids elsewhere
    np.testing.assert_allclose(v, [-100.0, -75.0, 300.0 + 225.0])
    with pytest.warns(ExtrapolationWarning):
        h = curve.stage(np.array([-500.0, -75.0, 525.0]))
    np.testing.assert_allclose(h, [8.0, 9.0, 13.0])  # below the empty basin: its bottom


def test_frustum_extension_uses_the_end_slope_of_area():
    """Analytic: a cone of area pi (10 h)^2 continued along its end slope dA/dh (calculus)."""
    # cone: area = pi (10 h)^2, dA/dh at h=2 is 2 pi 100 h = 400 pi
    h = np.array([0.0, 1.0, 2.0])
    curve = storage_from_table(h, math.pi * (10 * h) ** 2, above="extend")
    with pytest.warns(ExtrapolationWarning):
        a = curve.area(3.0)
    assert float(a) == pytest.approx(math.pi * 400 + 400 * math.pi * 1.0)


def test_table_at_a_regular_step_includes_both_ends():
    curve = storage_from_table([0.03, 0.5, 1.01], [1.0, 2.0, 3.0])
    t = curve.table(0.25)
    np.testing.assert_allclose(t["stage_m"], [0.03, 0.25, 0.5, 0.75, 1.0, 1.01])
    assert list(t.columns) == ["stage_m", "area_m2", "volume_m3"]
    with pytest.raises(ValueError):
        curve.table(0.0)


def test_integrate_area_rules_differ_as_the_formulas_say():
    """Frustum rule dh/3 (A1 + A2 + sqrt(A1 A2)) and average end area dh (A1 + A2)/2
    worked by hand (solid geometry, common practice, no source)."""
    h, a = [0.0, 3.0], [100.0, 400.0]
    assert integrate_area(h, a, "frustum")[-1] == pytest.approx(3 / 3 * (500 + 200))
    assert integrate_area(h, a, "average_end_area")[-1] == pytest.approx(3 * 250)


def test_direct_construction_rejects_inconsistent_volumes():
    with pytest.raises(ValueError, match="not the integral"):
        StorageCurve(np.array([0.0, 1.0]), np.array([1.0, 1.0]), np.array([0.0, 2.0]))


def test_table_listed_from_the_top_is_accepted():
    down = storage_from_table([3.0, 2.0, 1.0], [30.0, 20.0, 10.0])
    up = storage_from_table([1.0, 2.0, 3.0], [10.0, 20.0, 30.0])
    np.testing.assert_allclose(down.volume_m3, up.volume_m3)


def test_bottom_level_adds_the_cone_below_the_lowest_row():
    """Analytic: area pi h^2 from a bottom at 0 is a cone, V(2) = pi r^2 h / 3 = 8 pi / 3."""
    curve = storage_from_table([1.0, 2.0], [math.pi, 4 * math.pi], bottom_stage_m=0.0)
    assert curve.min_stage_m == 0.0
    assert float(curve.volume(2.0) - curve.volume(0.0)) == pytest.approx(8 * math.pi / 3)
    with pytest.raises(InputError, match="below the lowest level"):
        storage_from_table([1.0, 2.0], [1.0, 2.0], bottom_stage_m=1.5)


def test_compare_curves_over_the_common_range():
    a = storage_from_table([0.0, 2.0, 4.0], [100.0, 100.0, 100.0])
    b = storage_from_table([1.0, 5.0], [101.0, 101.0])
    c = compare_curves(a, b, 0.5)
    assert c["stage_m"][0] == 1.0 and c["stage_m"][-1] == 4.0
    assert c["max_area_difference"] == pytest.approx(0.01)
    assert c["max_volume_difference"] == pytest.approx(0.01)


# ---- tables: validation errors name the file and the lines --------------------------------------
def _table(write, text, **kw) -> StorageOptions:
    path = write("survey.csv", text)
    return StorageOptions(source="table", file=path, **kw)


@pytest.mark.parametrize(
    ("body", "pattern", "line"),
    [
        ("1.0,10\n2.0,8\n3.0,12\n", r"area decreases while stage rises at line 3", 3),
        ("1.0,10\n1.0,12\n3.0,14\n", r"repeated stage 1 m at line 2 and line 3", 3),
        ("1.0,10\n2.0,-1\n3.0,14\n", r"negative area at line 3", 3),
        ("1.0,10\n3.0,12\n2.0,14\n", r"out of order", 4),
        ("1.0,10\n", r"at least two levels", None),
        ("0,0\n1,0\n", r"every area .* is zero", None),
    ],
)
def test_bad_tables_name_file_and_line(write, body, pattern, line):
    opts = _table(write, "stage,area\n" + body)
    with pytest.raises(InputError, match=pattern) as err:
        read_storage(opts)
    assert err.value.file.endswith("survey.csv")
    assert err.value.line == line


def test_table_units_are_converted_and_volumes_checked(write):
    # 1 ft = 0.3048 m; 1 ha = 1e4 m²; 1 ML = 1e3 m³ (NIST SP 811 factors)
    body = "stage_ft,area_ha,vol_ML\n0,1,0\n10,1,30.48\n20,1,60.96\n"
    opts = _table(
        write,
        body,
        stage="stage_ft",
        area="area_ha",
        volume="vol_ML",
        stage_units="ft",
        area_units="ha",
        volume_units="ML",
    )
    curve = read_storage(opts)
    assert curve.max_stage_m == pytest.approx(6.096)
    assert curve.max_volume_m3 == pytest.approx(60960.0)
    assert curve.check is not None and curve.check.ok
    assert curve.check.max_relative < 1e-12


def test_volume_mismatch_is_an_error_naming_line_column_and_the_key(write):
    """Volumes beyond the tolerance of the areas' integral stop the reading (issue 13): the
    error names the worst line, the file's volume column and the key that accepts it."""
    body = "stage,area,vol\n0,100,0\n1,100,100\n2,100,260\n3,100,300\n"
    opts = _table(write, body, volume="vol")
    with pytest.raises(InputError, match="accept_volume_mismatch") as exc:
        read_storage(opts)
    assert exc.value.line == 4 and exc.value.column == "vol"


def test_volume_mismatch_is_reported_with_the_row(write):
    body = "stage,area,volume\n0,100,0\n1,100,100\n2,100,260\n3,100,300\n"
    opts = _table(write, body, volume="volume", accept_volume_mismatch=True)
    with pytest.warns(DataQualityWarning, match=r"line 4 .*OUTSIDE the tolerance"):
        curve = read_storage(opts)
    assert curve.check.worst_index == 2
    assert curve.check.max_difference_m3 == pytest.approx(60.0)
    assert not curve.check.ok


# ---- vector layers -----------------------------------------------------------------------------
def _ring(r, x=4.7e6, y=2.7e6):
    return shapely.Point(x, y).buffer(r, quad_segs=64)


def test_contour_layer_without_crs_is_an_error(tmp_path):
    frame = gpd.GeoDataFrame({"elevation": [1.0, 2.0]}, geometry=[_ring(10), _ring(20)])
    path = tmp_path / "nocrs.shp"  # a Shapefile without its .prj
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # pyogrio notes the missing CRS when writing
        frame.to_file(path)
    with pytest.raises(InputError, match="no coordinate reference system") as err:
        read_storage(StorageOptions(source="contours", file=path))
    assert err.value.file.endswith("nocrs.shp")


def test_projected_coordinates_in_a_geographic_layer_are_an_error(tmp_path):
    frame = gpd.GeoDataFrame({"elevation": [1.0]}, geometry=[_ring(10)], crs="EPSG:4326")
    path = tmp_path / "wrong.gpkg"
    frame.to_file(path)
    with pytest.raises(InputError, match="outside the globe") as err:
        read_storage(StorageOptions(source="contours", file=path))
    assert err.value.file.endswith("wrong.gpkg")


def test_contour_layer_without_elevation_field_suggests_the_nearest(tmp_path):
    frame = gpd.GeoDataFrame({"elev": [1.0, 2.0]}, geometry=[_ring(10), _ring(20)], crs=CRS)
    path = tmp_path / "c.gpkg"
    frame.to_file(path)
    with pytest.raises(InputError, match=r"no field 'elevation' .*fields are: elev") as err:
        read_storage(StorageOptions(source="contours", file=path))
    assert err.value.column == "elevation"


def test_contours_decreasing_area_names_the_feature(tmp_path):
    frame = gpd.GeoDataFrame(
        {"elevation": [1.0, 3.0, 2.0]}, geometry=[_ring(10), _ring(15), _ring(20)], crs=CRS
    )
    path = tmp_path / "c.gpkg"
    frame.to_file(path)
    with pytest.raises(InputError, match="area decreases .* at feature 2"):
        read_storage(StorageOptions(source="contours", file=path))


def test_open_contour_line_is_an_error(tmp_path):
    line = shapely.LineString([(0, 0), (100, 0), (100, 100)])
    frame = gpd.GeoDataFrame({"elevation": [1.0]}, geometry=[line], crs=CRS)
    path = tmp_path / "open.gpkg"
    frame.to_file(path)
    with pytest.raises(InputError, match="feature 1 is a contour line that does not close"):
        read_storage(StorageOptions(source="contours", file=path))


def test_closed_lines_islands_and_multipart_polygons(tmp_path):
    """Even-odd for lines (island = hole); union of parts and holes for polygons."""
    r_out, r_island = 100.0, 30.0
    shore = _ring(r_out).exterior
    island = _ring(r_island).exterior
    lines = shapely.MultiLineString([shore, island])
    second = shapely.MultiPolygon(
        [shapely.Polygon(_ring(120).exterior, [_ring(30).exterior]), _ring(40, x=4.8e6)]
    )
    frame = gpd.GeoDataFrame({"elevation": [1.0, 2.0]}, geometry=[lines, second], crs=CRS)
    path = tmp_path / "mixed.gpkg"
    frame.to_file(path)
    curve = read_storage(StorageOptions(source="contours", file=path))
    circle = 64 * 4 / 2 * math.sin(2 * math.pi / (64 * 4))  # polygon/circle area ratio * pi
    assert curve.area_m2[0] == pytest.approx(circle * (r_out**2 - r_island**2), rel=1e-6)
    assert curve.area_m2[1] == pytest.approx(circle * (120**2 - 30**2 + 40**2), rel=1e-6)


def test_outline_source_needs_depth_and_uses_the_elevation_attribute(tmp_path):
    frame = gpd.GeoDataFrame({"elevation": [105.0]}, geometry=[_ring(500)], crs=CRS)
    path = tmp_path / "outline.gpkg"
    frame.to_file(path)
    with pytest.raises(ConfigError, match="max_depth"):
        read_storage(StorageOptions(source="outline", file=path))
    opts = StorageOptions(
        source="outline", file=path, max_depth=8.0, shape_exponent=2.0, datum_offset=100.0
    )
    with pytest.warns(Warning, match="approximated from an outline"):
        curve = read_storage(opts)
    assert curve.max_stage_m == pytest.approx(5.0)
    assert curve.min_stage_m == pytest.approx(-3.0)
    assert curve.approximate


# ---- the command ----------------------------------------------------------------------------------
def _site(write, tmp_path, extra=""):
    write("survey.csv", "stage,area_ha\n0,0\n1,10\n2,40\n3,90\n")
    shells = [_ring(math.sqrt(a * 1e4 / math.pi)) for a in (10, 40, 90)]
    gpd.GeoDataFrame({"elevation": [101.0, 102.0, 103.0]}, geometry=shells, crs=CRS).to_file(
        tmp_path / "contours.gpkg"
    )
    return write(
        "site.toml",
        '[site]\nname = "Invented Tarn"\n\n[storage]\nsource = "table"\nfile = "survey.csv"\n'
        'area = "area_ha"\narea_units = "ha"\ndatum_offset = 100.0\n' + extra,
    )


def test_storage_command_prints_json_and_writes_outputs(write, tmp_path, capsys):
    site = _site(write, tmp_path, 'compare = "contours.gpkg"\n')
    out = tmp_path / "out"
    assert main(["storage", str(site), "--step", "0.5", "--json", "--out", str(out)]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert [r["stage_m"] for r in doc["table"]] == [0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0]
    assert doc["table"][-1]["area_m2"] == pytest.approx(9e5)
    assert doc["comparison"]["max_area_difference"] < 1e-3
    assert doc["location"] is None  # a table has no position and the site gives none
    assert "licensed professional" in doc["caution"]
    assert (out / "storage.png").stat().st_size > 1000
    assert (out / "storage_table.csv").exists() and (out / "storage_comparison.csv").exists()


def test_storage_command_text_and_errors(write, tmp_path, capsys):
    site = _site(write, tmp_path)
    assert main(["storage", str(site), "--step", "1"]) == 0
    text = capsys.readouterr().out
    assert "storage relation: table survey.csv" in text and "caution:" in text
    bad = write("bad.toml", '[site]\nname = "x"\n[storage]\nfile = "missing.csv"\n')
    assert main(["storage", str(bad)]) == 2
    assert "missing.csv" in capsys.readouterr().err


def test_location_from_contours_when_site_gives_none(write, tmp_path):
    from lakebalance import Lake, load_site

    _site(write, tmp_path)
    site = load_site(
        write(
            "c.toml",
            '[site]\nname = "x"\n[storage]\nsource = "contours"\nfile = "contours.gpkg"\n',
        )
    )
    lat, lon = Lake(site).location
    # EPSG:3035 point (4.7e6 E, 2.7e6 N) lies in central Europe
    assert 40 < lat < 55 and 0 < lon < 25
