"""The demo reservoir's two surveys (a stage-area table and contour polygons) agree.

The table gives areas to 0.1 ha (1000 m², so +-500 m² of rounding) every 0.5 m of stage; the
contours lie every 0.5 m of elevation, offset from the table levels, so the contour relation is
interpolated to the table stages. The demo's table was made from planar UTM grid areas, while the
reader measures true ground areas; the two differ by the UTM areal scale factor at the lake,
taken from pyproj (``Proj.get_factors``, reference library) -- about 0.08% here.
"""

from __future__ import annotations

import warnings

import numpy as np
import pyproj
import pytest

from lakebalance import Lake, load_site
from lakebalance.storage import StorageCurve, compare_curves

ROUNDING_M2 = 500.0  # half of the table's 0.1 ha step


@pytest.fixture
def surveys(demo_site_path):
    table_site = load_site(demo_site_path)
    contour_site = load_site(demo_site_path.with_name("site_contours.toml"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return table_site, Lake(table_site).storage, Lake(contour_site).storage, contour_site


def _areal_scale(site) -> float:
    """UTM areal scale factor at the lake (pyproj ``Proj.get_factors``)."""
    import pyogrio

    lat, lon = Lake(site).location
    crs = pyogrio.read_info(site.storage.file, layer=site.storage.layer)["crs"]
    return float(pyproj.Proj(crs).get_factors(lon, lat).areal_scale)


def test_demo_table_and_contours_agree_in_storage(surveys):
    """Storage between the lowest and highest common stage agrees to 0.05%."""
    _, table, contours, contour_site = surveys
    scale = _areal_scale(contour_site)
    assert 0.998 < scale < 1.0  # UTM shrinks areas near its central meridian
    c = compare_curves(table, contours, 0.5)
    v_table = c["volume_first_m3"][-1]
    v_contours = c["volume_second_m3"][-1] * scale
    assert v_contours == pytest.approx(v_table, rel=5e-4)


def test_demo_table_and_contours_agree_in_area_within_rounding(surveys):
    """At the table's stages the contour areas agree within the table's rounding plus the
    interpolation uncertainty of contours 0.5 m apart, estimated as the spread between the
    two interpolation forms (frustum and linear; common practice, no source)."""
    _, table, contours, contour_site = surveys
    scale = _areal_scale(contour_site)
    linear = StorageCurve.from_areas(
        contours.stage_m, contours.area_m2, integration="average_end_area"
    )
    h = table.stage_m[table.stage_m >= contours.min_stage_m]
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        a_table = table.area(h)
        a_contours = contours.area(h) * scale
        spread = np.abs(contours.area(h) - linear.area(h)) * scale
    np.testing.assert_array_less(np.abs(a_contours - a_table), ROUNDING_M2 + spread)
    # most levels agree within the rounding alone
    assert np.mean(np.abs(a_contours - a_table) <= ROUNDING_M2) >= 0.6
