"""Vector layers (GeoPackage, Shapefile, GeoJSON): bathymetric contours and lake outlines.

Layers are read with geopandas through pyogrio (imported lazily). Areas are always measured in a
Lambert azimuthal equal-area projection centred on the layer (on the WGS 84 ellipsoid), whatever
the layer's own coordinate reference system, so that a geographic (lon/lat) layer or a conformal
projection such as UTM gives true areas. A layer without a coordinate reference system is an
error: its areas cannot be known.

Contours may be closed polygons (islands as holes, several parts allowed) or closed lines. The
area at an elevation is the area enclosed by that elevation's contours: the union of its
polygons (minus their holes); closed lines at one elevation are combined by the even-odd rule, so
a ring inside another ring (an island) is a hole, and a ring inside that (a pond on the island)
counts again.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import DataQualityWarning, InputError, suggest

if TYPE_CHECKING:  # pragma: no cover
    import geopandas as gpd
    import pandas as pd
    import pyproj

__all__ = [
    "ContourAreas",
    "read_layer",
    "equal_area_crs",
    "polygon_areas_m2",
    "read_contours",
    "read_outline",
    "layer_centroid",
]


def read_layer(path: str | Path, *, layer: str | None = None, what: str) -> gpd.GeoDataFrame:
    """Read one layer of a vector file, requiring a coordinate reference system.

    Parameters
    ----------
    path : str or Path
        GeoPackage, Shapefile, GeoJSON (or another format pyogrio reads).
    layer : str, optional
        Layer name in a multi-layer file (the first layer when None).
    what : str
        Names the layer in messages.

    Raises
    ------
    InputError
        File missing or unreadable, unknown layer, empty layer, no coordinate reference system.
    """
    import geopandas as gpd
    import pyogrio

    from .files import check_input

    path = Path(path)
    if not path.is_dir():  # a folder may hold a layer set (a folder of shapefiles)
        check_input(path, what)
    elif not path.exists():  # pragma: no cover - is_dir() was false
        raise InputError(f"{what}: file not found", file=path)
    if layer is not None:
        try:
            names = [str(n) for n in pyogrio.list_layers(path)[:, 0]]
        except Exception as exc:
            raise InputError(f"{what}: not a readable vector file ({exc})", file=path) from None
        if layer not in names:
            raise InputError(
                f"{what}: no layer '{layer}'{suggest(layer, names)}; layers are: "
                + ", ".join(names),
                file=path,
            )
    try:
        frame = gpd.read_file(path, layer=layer, engine="pyogrio")
    except Exception as exc:  # pyogrio/GDAL raise several unrelated types
        raise InputError(f"{what}: not a readable vector file ({exc})", file=path) from None
    if frame.empty:
        raise InputError(f"{what}: the layer has no features", file=path)
    if frame.crs is None:
        raise InputError(
            f"{what}: the layer has no coordinate reference system, so its areas cannot be "
            "measured; assign one in a GIS (e.g. its EPSG code) and save it again",
            file=path,
        )
    try:
        _lonlat_centre(frame)
    except InputError as exc:
        raise InputError(f"{what}: {exc.message}", file=path) from None
    return frame


def _read(path: str | Path, layer: str | None, what: str) -> gpd.GeoDataFrame:
    """The layer through the reader of its format (:mod:`lakebalance.io.formats`)."""
    from .formats import reader

    return reader(path, "vector", what)(path, layer=layer, what=what)


def equal_area_crs(frame: gpd.GeoDataFrame) -> pyproj.CRS:
    """A Lambert azimuthal equal-area CRS (WGS 84 ellipsoid, metres) centred on ``frame``.

    The centre is the middle of the layer's bounding box in longitude and latitude.
    """
    import pyproj

    lon, lat = _lonlat_centre(frame)
    return pyproj.CRS.from_proj4(
        f"+proj=laea +lat_0={lat:.10f} +lon_0={lon:.10f} +x_0=0 +y_0=0 "
        "+ellps=WGS84 +units=m +no_defs"
    )


def _lonlat_centre(frame: gpd.GeoDataFrame) -> tuple[float, float]:
    geo = frame.to_crs("EPSG:4326")
    west, south, east, north = geo.total_bounds
    if not (
        np.all(np.isfinite([west, south, east, north]))
        and -90.0 <= south <= north <= 90.0
        and -540.0 <= west <= east <= 540.0
    ):
        raise InputError(
            f"the layer's coordinates do not fit its coordinate reference system "
            f"({frame.crs.name}): they fall outside the globe; is the declared CRS right?"
        )
    return float(0.5 * (west + east)), float(0.5 * (south + north))


def polygon_areas_m2(frame: gpd.GeoDataFrame) -> np.ndarray:
    """Area of each feature of ``frame`` in m², measured in :func:`equal_area_crs`."""
    projected = frame.to_crs(equal_area_crs(frame))
    return projected.geometry.area.to_numpy(dtype=float)


@dataclass(frozen=True, eq=False)
class ContourAreas:
    """The area enclosed at each contour elevation of a layer.

    Attributes
    ----------
    elevation : ndarray
        Distinct contour elevations, increasing, in the layer's elevation unit.
    area_m2 : ndarray
        Area enclosed at each elevation, m².
    features : tuple of tuple of int
        The 1-based feature numbers that make each elevation (for messages).
    file : Path
        The layer's file.
    latitude, longitude : float
        Centroid of the largest contour, decimal degrees (WGS 84).
    """

    elevation: np.ndarray
    area_m2: np.ndarray
    features: tuple[tuple[int, ...], ...]
    file: Path
    latitude: float
    longitude: float

    def to_frame(self) -> pd.DataFrame:
        """Columns ``elevation``, ``area_m2``, ``features``."""
        import pandas as pd

        return pd.DataFrame(
            {
                "elevation": self.elevation,
                "area_m2": self.area_m2,
                "features": [",".join(map(str, f)) for f in self.features],
            }
        )


def _feature_list(numbers: Any) -> str:
    numbers = [int(n) for n in numbers]
    shown = ", ".join(map(str, numbers[:5]))
    return shown + (f" and {len(numbers) - 5} more" if len(numbers) > 5 else "")


def _polygons_of(frame: gpd.GeoDataFrame, path: Path, what: str) -> tuple[Any, np.ndarray]:
    """Each feature as a (multi)polygon; closed lines become polygons flagged for even-odd."""
    import shapely

    geoms = frame.geometry.to_numpy()
    numbers = np.arange(1, len(frame) + 1)
    missing = np.array([g is None or g.is_empty for g in geoms], dtype=bool)
    if missing.any():
        raise InputError(
            f"{what}: feature {_feature_list(numbers[missing])} has no geometry", file=path
        )
    kinds = shapely.get_type_id(geoms)
    # shapely type ids: 1 LineString, 2 LinearRing, 3 Polygon, 5 MultiLineString, 6 MultiPolygon
    is_line = np.isin(kinds, (1, 2, 5))
    is_poly = np.isin(kinds, (3, 6))
    other = ~(is_line | is_poly)
    if other.any():
        names = sorted({geoms[i].geom_type for i in np.flatnonzero(other)})
        raise InputError(
            f"{what}: feature {_feature_list(numbers[other])} is a {'/'.join(names)}; contours "
            "must be polygons or closed lines",
            file=path,
        )
    out = np.empty(len(geoms), dtype=object)
    if is_line.any():
        open_lines = []
        for i in np.flatnonzero(is_line):
            parts = shapely.get_parts(geoms[i])
            if not all(p.is_closed for p in parts):
                open_lines.append(numbers[i])
                continue
            rings = [shapely.Polygon(p.coords) for p in parts]
            out[i] = _even_odd(rings)
        if open_lines:
            raise InputError(
                f"{what}: feature {_feature_list(open_lines)} is a contour line that does not "
                "close on itself; close it (or give polygons) so it encloses an area",
                file=path,
            )
    out[is_poly] = geoms[is_poly]
    invalid = ~shapely.is_valid(out.astype(object))
    if invalid.any():
        warnings.warn(
            f"{path}: {what}: feature {_feature_list(numbers[invalid])} is not a valid polygon "
            "(self-intersecting or badly nested rings); it was repaired before measuring",
            DataQualityWarning,
            stacklevel=3,
        )
        out[invalid] = shapely.make_valid(out[invalid].astype(object))
    return out, is_line


def _even_odd(polygons: list[Any]) -> Any:
    """Combine rings by the even-odd rule (a ring inside another is a hole)."""
    import shapely

    result = polygons[0]
    for poly in polygons[1:]:
        result = shapely.symmetric_difference(result, poly)
    return result


def read_contours(
    path: str | Path,
    *,
    layer: str | None = None,
    elevation_field: str = "elevation",
    what: str = "contour layer",
) -> ContourAreas:
    """The area enclosed at each elevation of a bathymetric contour layer.

    Parameters
    ----------
    path : str or Path
        The vector file.
    layer : str, optional
        Layer of a multi-layer file.
    elevation_field : str
        Attribute holding each contour's elevation (in the unit the site file declares).
    what : str
        Names the layer in messages.

    Returns
    -------
    ContourAreas

    Raises
    ------
    InputError
        See :func:`read_layer`; also a missing elevation field, an empty or non-numeric elevation,
        a geometry that is neither a polygon nor a closed line.
    """
    import geopandas as gpd
    import shapely

    path = Path(path)
    frame = _read(path, layer, what)
    if elevation_field not in frame.columns:
        fields = [c for c in frame.columns if c != frame.geometry.name]
        raise InputError(
            f"{what}: no field '{elevation_field}'{suggest(elevation_field, fields)}; the "
            f"fields are: {', '.join(fields) or '(none)'}",
            file=path,
            column=elevation_field,
        )
    import pandas as pd

    numbers = np.arange(1, len(frame) + 1)
    elev = pd.to_numeric(frame[elevation_field], errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(elev)
    if bad.any():
        raise InputError(
            f"{what}: feature {_feature_list(numbers[bad])} has no numeric '{elevation_field}'",
            file=path,
            column=elevation_field,
        )
    polygons, _ = _polygons_of(frame, path, what)
    crs = equal_area_crs(frame)
    projected = gpd.GeoSeries(polygons, crs=frame.crs).to_crs(crs).to_numpy()
    levels = np.unique(elev)
    areas = np.empty(levels.size)
    features: list[tuple[int, ...]] = []
    unions = []
    for k, z in enumerate(levels):  # one union per contour level (tens of levels, not rows)
        members = np.flatnonzero(elev == z)
        union = shapely.union_all(projected[members])
        unions.append(union)
        areas[k] = union.area
        features.append(tuple(int(n) for n in numbers[members]))
    top = unions[int(np.argmax(areas))]
    lat, lon = _to_lonlat(top.centroid, crs)
    return ContourAreas(
        elevation=levels,
        area_m2=areas,
        features=tuple(features),
        file=path,
        latitude=lat,
        longitude=lon,
    )


def _to_lonlat(point: Any, crs: pyproj.CRS) -> tuple[float, float]:
    import pyproj

    to_geo = pyproj.Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
    lon, lat = to_geo.transform(point.x, point.y)
    return float(lat), float(lon)


def read_outline(
    path: str | Path,
    *,
    layer: str | None = None,
    elevation_field: str | None = None,
    what: str = "lake outline",
) -> tuple[float, float | None, float, float]:
    """Area of a lake outline layer (all its polygons united), and its shoreline elevation.

    Parameters
    ----------
    path : str or Path
        The vector file.
    layer : str, optional
        Layer of a multi-layer file.
    elevation_field : str, optional
        Attribute holding the shoreline elevation; its value is returned when present (all
        features must agree).
    what : str
        Names the layer in messages.

    Returns
    -------
    area_m2 : float
        Area enclosed by the outline, m².
    elevation : float or None
        Shoreline elevation from ``elevation_field`` (layer units), None when absent.
    latitude, longitude : float
        Centroid of the outline, decimal degrees (WGS 84).
    """
    import geopandas as gpd
    import shapely

    path = Path(path)
    frame = _read(path, layer, what)
    polygons, _ = _polygons_of(frame, path, what)
    crs = equal_area_crs(frame)
    projected = gpd.GeoSeries(polygons, crs=frame.crs).to_crs(crs).to_numpy()
    union = shapely.union_all(projected)
    elevation = None
    if elevation_field is not None and elevation_field in frame.columns:
        import pandas as pd

        values = pd.to_numeric(frame[elevation_field], errors="coerce").dropna().unique()
        if values.size > 1:
            raise InputError(
                f"{what}: the features give different '{elevation_field}' values "
                f"({', '.join(f'{v:g}' for v in values[:5])}); an outline has one shoreline level",
                file=path,
                column=elevation_field,
            )
        if values.size == 1:
            elevation = float(values[0])
    lat, lon = _to_lonlat(union.centroid, crs)
    return float(union.area), elevation, lat, lon


def layer_centroid(path: str | Path, *, layer: str | None = None) -> tuple[float, float]:
    """Latitude and longitude (decimal degrees, WGS 84) of the centroid of a layer's features.

    Used when the site file gives no latitude/longitude; the centroid is taken in the layer's
    equal-area projection.
    """
    import shapely

    frame = _read(path, layer, "vector layer")
    crs = equal_area_crs(frame)
    union = shapely.union_all(frame.to_crs(crs).geometry.to_numpy())
    return _to_lonlat(union.centroid, crs)
