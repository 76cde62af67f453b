"""Reading the stage-area-storage relation that the site file's ``[storage]`` section declares.

Three sources (``source`` key):

``"table"``
    A CSV or .xlsx survey table of stage and area (and optionally volume), in the declared units.
``"contours"``
    Bathymetric contours in a vector layer (GeoPackage, Shapefile, GeoJSON) with an elevation
    attribute; stage = elevation - ``datum_offset``.
``"outline"``
    A lake outline polygon, the greatest depth and a basin-shape exponent: an approximation.

Units are converted here, at ingest, through :mod:`lakebalance.units`.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np

from ..config import StorageOptions
from ..errors import ConfigError, InputError
from ..storage import StorageCurve, storage_from_outline, storage_from_table
from ..units import to_si

__all__ = ["read_storage", "storage_location", "source_of"]


def source_of(path: Path) -> str:
    """``"table"`` or ``"contours"`` from a file's format (for a comparison survey)."""
    from .formats import format_of, suffixes

    fmt = format_of(path)
    if fmt is not None and fmt.reads("table"):
        return "table"
    if fmt is not None and fmt.reads("vector"):
        return "contours"
    raise InputError(
        f"cannot tell a table from a vector layer by the suffix '{path.suffix.lower()}' (tables: "
        f"{', '.join(suffixes('table'))}; layers: {', '.join(suffixes('vector'))})",
        file=path,
    )


def _need_file(options: StorageOptions, site_file: Path | None) -> Path:
    if options.file is None:
        raise ConfigError(f"[storage] source = '{options.source}' needs 'file'", file=site_file)
    return options.file


def read_storage(
    options: StorageOptions,
    *,
    site_file: Path | None = None,
    file: Path | None = None,
    source: str | None = None,
) -> StorageCurve:
    """The storage relation of ``[storage]``, in SI units.

    Parameters
    ----------
    options : StorageOptions
        The ``[storage]`` section of the site file.
    site_file : Path, optional
        The site file, named in configuration errors.
    file : Path, optional
        Read this file instead of ``options.file`` (e.g. the ``compare`` survey).
    source : {"table", "contours", "outline"}, optional
        Its kind (default ``options.source``, or from the suffix when ``file`` is given).

    Returns
    -------
    StorageCurve

    Raises
    ------
    InputError
        Unreadable or invalid survey (errors name the file and rows or features).
    ConfigError
        A key the source needs is missing.
    """
    if file is not None:
        options = dataclasses.replace(options, file=file)
        source = source or source_of(file)
    source = source or options.source
    path = _need_file(options, site_file)
    if source == "table":
        return _read_table(options, path)
    if source == "contours":
        return _read_contours(options, path)
    if source == "outline":
        return _read_outline(options, path, site_file)
    raise ConfigError(f"[storage] unknown source {source!r}", file=site_file)


def _read_table(options: StorageOptions, path: Path) -> StorageCurve:
    from .tables import read_table

    columns = {"stage": options.stage, "area": options.area}
    if options.volume is not None:
        columns["volume"] = options.volume
    frame = read_table(
        path,
        columns,
        what="storage table",
        sheet=options.sheet,
        delimiter=options.delimiter,
        decimal=options.decimal,
        encoding=options.encoding,
    )
    stage = to_si(frame["stage"].to_numpy(), options.stage_units, "length", "storage stage")
    area = to_si(frame["area"].to_numpy(), options.area_units, "area", "storage area")
    volume = None
    if options.volume is not None:
        volume = to_si(frame["volume"].to_numpy(), options.volume_units, "volume", "storage volume")
    try:
        return storage_from_table(
            stage,
            area,
            volume,
            integration=options.integration,
            below=options.below,
            above=options.above,
            rows=frame["_line"].tolist(),
            file=path,
            tolerance=options.volume_tolerance,
            bottom_stage_m=options.bottom,
            source=f"table {path.name}",
            volume_mismatch="warn" if options.accept_volume_mismatch else "error",
            accept_hint=(
                f"set accept_volume_mismatch = true in [storage] to accept it (the relation "
                f"integrates the areas), or widen volume_tolerance ({options.volume_tolerance:g})"
            ),
        )
    except InputError as exc:  # name the file's own column header
        exc.column = columns.get(str(exc.column), exc.column)
        raise


def _read_contours(options: StorageOptions, path: Path) -> StorageCurve:
    from .vector import read_contours

    contours = read_contours(path, layer=options.layer, elevation_field=options.elevation_field)
    elevation_m = to_si(contours.elevation, options.elevation_units, "length", "contour elevation")
    # to the nanometre: 100 ft - 30.48 m is -3.6e-15 m in floating point, not the 0 m surveyed
    stage = np.round(elevation_m - options.datum_offset, 9) + 0.0  # + 0.0: no negative zero
    return storage_from_table(
        stage,
        contours.area_m2,
        integration=options.integration,
        below=options.below,
        above=options.above,
        rows=[f[0] for f in contours.features],
        row_label="feature",
        file=path,
        bottom_stage_m=options.bottom,
        source=f"contours {path.name}",
    )


def _read_outline(options: StorageOptions, path: Path, site_file: Path | None) -> StorageCurve:
    from .vector import read_outline

    if options.max_depth is None:
        raise ConfigError("[storage] source = 'outline' needs 'max_depth' (m)", file=site_file)
    area, elevation, _, _ = read_outline(
        path, layer=options.layer, elevation_field=options.elevation_field
    )
    if options.outline_stage is not None:
        stage = float(options.outline_stage)
    elif elevation is not None:
        elevation_m = float(
            to_si(np.array([elevation]), options.elevation_units, "length", "outline elevation")[0]
        )
        stage = round(elevation_m - options.datum_offset, 9) + 0.0
    else:
        raise ConfigError(
            "[storage] source = 'outline' needs 'outline_stage' (m), or an "
            f"'{options.elevation_field}' attribute on the outline",
            file=site_file,
        )
    return storage_from_outline(
        area,
        stage,
        options.max_depth,
        options.shape_exponent,
        integration=options.integration,
        below=options.below,
        above=options.above,
        source=f"outline {path.name} (max depth {options.max_depth:g} m, "
        f"shape exponent {options.shape_exponent:g})",
    )


def storage_location(options: StorageOptions) -> tuple[float, float] | None:
    """Latitude and longitude (decimal degrees) of the lake from its contours or outline.

    Returns None for a table source (a table has no position).
    """
    if options.file is None or options.source == "table":
        return None
    from .vector import layer_centroid

    return layer_centroid(options.file, layer=options.layer)


def read_surveys(options: StorageOptions, *, site_file: Path | None = None):
    """The dated surveys of ``[storage]`` (its own ``file`` on ``date`` and each
    ``[[storage.survey]]``) as a :class:`~lakebalance.surveys.DatedStorage`, or None when there is
    only one survey."""
    from ..surveys import DatedStorage

    if not options.survey:
        return None
    items = [(str(options.date)[:10], read_storage(options, site_file=site_file))]
    for s in options.survey:
        if s.file is None:
            raise ConfigError(f"[[storage.survey]] of {s.date} needs 'file'", file=site_file)
        opts = dataclasses.replace(
            options,
            sheet=s.sheet if s.sheet is not None else options.sheet,
            layer=s.layer if s.layer is not None else options.layer,
        )
        items.append((str(s.date)[:10], read_storage(opts, site_file=site_file, file=s.file)))
    items.sort(key=lambda x: x[0])
    return DatedStorage(tuple(d for d, _ in items), tuple(c for _, c in items))
