"""Areas of lon/lat and UTM contour polygons against pyproj's geodesic polygon area.

Reference library: ``pyproj.Geod(ellps="WGS84").geometry_area_perimeter`` (Karney's geodesic
algorithms as shipped in PROJ), used only by the tests. The reader measures areas in a local
Lambert azimuthal equal-area projection; the two must agree to 0.1% (the issue's tolerance).
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pytest
import shapely
import shapely.geometry
from pyproj import Geod

from lakebalance.io.vector import polygon_areas_m2, read_contours

GEOD = Geod(ellps="WGS84")


def _lake(lon: float, lat: float, size_deg: float, island: bool) -> shapely.Polygon:
    """An irregular invented lake shoreline around (lon, lat), optionally with an island."""
    t = np.linspace(0.0, 2 * np.pi, 400, endpoint=False)
    r = size_deg * (1.0 + 0.3 * np.cos(3 * t) + 0.1 * np.sin(5 * t))
    shell = np.column_stack([lon + r * np.cos(t) / np.cos(np.radians(lat)), lat + r * np.sin(t)])
    holes = []
    if island:
        ri = 0.15 * size_deg
        holes.append(
            np.column_stack(
                [
                    lon + ri * np.cos(t) / np.cos(np.radians(lat)),
                    lat + 0.1 * size_deg + ri * np.sin(t),
                ]
            )
        )
    # counter-clockwise shell and clockwise holes: the orientation pyproj's signed area expects
    return shapely.geometry.polygon.orient(shapely.Polygon(shell, holes), sign=1.0)


@pytest.mark.parametrize(
    ("lon", "lat"),
    [(15.37, 46.42), (-71.2, 44.1), (147.5, -42.3), (23.0, 66.5), (-60.0, 2.0)],
)
@pytest.mark.parametrize("size_deg", [0.005, 0.05])
def test_lonlat_polygon_area_matches_geodesic_area(lon, lat, size_deg):
    """Geographic polygons (EPSG:4326) with an island hole, at five latitudes and two sizes."""
    poly = _lake(lon, lat, size_deg, island=True)
    frame = gpd.GeoDataFrame(geometry=[poly], crs="EPSG:4326")
    ours = polygon_areas_m2(frame)[0]
    ref = abs(GEOD.geometry_area_perimeter(poly)[0])
    assert ours == pytest.approx(ref, rel=1e-3)


def test_utm_contours_match_geodesic_area_of_the_same_ground(tmp_path):
    """Contours stored in UTM zone 33N (a conformal, not equal-area, projection): the reader's
    areas equal the geodesic areas of the same polygons taken to lon/lat, not the grid areas."""
    polys = [_lake(15.37, 46.42, s, island=s > 0.004) for s in (0.002, 0.004, 0.008)]
    geo = gpd.GeoDataFrame({"elevation": [401.0, 402.0, 403.0]}, geometry=polys, crs="EPSG:4326")
    utm = geo.to_crs("EPSG:32633")
    path = tmp_path / "utm.gpkg"
    utm.to_file(path)
    contours = read_contours(path)
    back = utm.to_crs("EPSG:4326").geometry
    ref = np.array(
        [abs(GEOD.geometry_area_perimeter(shapely.geometry.polygon.orient(g))[0]) for g in back]
    )
    # 1e-5, not the 1e-3: the UTM grid areas are 0.078% off here (scale factor 0.9996),
    # so only a tight tolerance shows that the reader measures the ground, not the grid
    np.testing.assert_allclose(contours.area_m2, ref, rtol=1e-5)
    grid = utm.geometry.area.to_numpy()
    assert np.all(np.abs(grid / ref - 1) > 5e-4)
    np.testing.assert_allclose(contours.elevation, [401.0, 402.0, 403.0])
    # the centroid is reported in lon/lat near the lake's centre
    assert contours.latitude == pytest.approx(46.42, abs=0.01)
    assert contours.longitude == pytest.approx(15.37, abs=0.01)
