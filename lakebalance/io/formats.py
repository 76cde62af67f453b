"""The one table of input formats: a file's suffix decides its format and what it can hold.

Every reader of the package finds its format here (:func:`reader`): gauge series
(:func:`lakebalance.io.series.read_raw_series`), small strict tables such as storage relations and
gaugings (:func:`lakebalance.io.tables.read_raw_table`) and vector layers (contours, outlines,
:mod:`lakebalance.io.vector`). A suffix that no format knows, or a format that does not hold the
kind asked for, is one :class:`~lakebalance.errors.InputError` naming the file and the suffixes
that would do.

Each :class:`Format` names the function that reads each kind it holds, as ``"module:function"``
of this package, imported only when a file of that format is read (so that Excel, XML or GIS
libraries load only when needed). The functions of one kind share a signature:

``series``
    ``(spec: SeriesSpec, what: str) -> RawSeries``, the cells of one gauge series;
``table``
    ``(path, columns, *, what, sheet, delimiter, decimal, encoding, string_columns) -> TextTable``,
    the requested columns of a small table with their file lines;
``vector``
    ``(path, *, layer, what) -> GeoDataFrame``, one layer with its coordinate reference system.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from ..errors import InputError

if TYPE_CHECKING:  # pragma: no cover
    from ._text import TextTable

__all__ = ["Kind", "KINDS", "Format", "FORMATS", "format_of", "reader", "suffixes"]

Kind = Literal["series", "table", "vector"]
KINDS: dict[str, str] = {"series": "gauge series", "table": "table", "vector": "vector layer"}


@dataclass(frozen=True)
class Format:
    """One input format: its suffixes and the reader of each kind of content it holds.

    Parameters
    ----------
    name : str
        The format in words (``"delimited text"``).
    suffixes : tuple of str
        Lower-case file suffixes with the dot (``".csv"``).
    series, table, vector : str, optional
        ``"module:function"`` (module relative to :mod:`lakebalance.io`) reading that kind;
        None when the format does not hold it.
    """

    name: str
    suffixes: tuple[str, ...]
    series: str | None = None
    table: str | None = None
    vector: str | None = None

    def reads(self, kind: Kind) -> bool:
        """Whether the format holds ``kind``."""
        return getattr(self, kind) is not None

    def function(self, kind: Kind) -> Callable[..., Any]:
        """The reader of ``kind`` (imported now)."""
        target = getattr(self, kind)
        if target is None:
            raise ValueError(f"{self.name} holds no {KINDS[kind]}")
        module, name = target.split(":")
        return getattr(importlib.import_module(f"lakebalance.io.{module}"), name)


def _text_table(
    path: str | Path,
    columns: dict[str, str],
    *,
    what: str,
    sheet: str | None = None,
    delimiter: str | None = None,
    decimal: str = ".",
    encoding: str | None = None,
    string_columns: tuple[str, ...] = (),
) -> TextTable:
    """A table from delimited text (``sheet`` does not apply)."""
    from ._text import read_text_table

    return read_text_table(
        path,
        columns,
        what=what,
        delimiter=delimiter,
        decimal=decimal,
        encoding=encoding,
        string_columns=tuple(string_columns),
    )


def _excel_table(
    path: str | Path,
    columns: dict[str, str],
    *,
    what: str,
    sheet: str | None = None,
    delimiter: str | None = None,
    decimal: str = ".",
    encoding: str | None = None,
    string_columns: tuple[str, ...] = (),
) -> TextTable:
    """A table from one sheet of a workbook (the text options do not apply)."""
    from .excel import read_excel_table

    return read_excel_table(path, columns, what=what, sheet=sheet)


#: Every input format. Add one by writing its reader(s) and one entry here.
FORMATS: tuple[Format, ...] = (
    Format(
        "delimited text",
        (".csv", ".txt", ".tsv", ".dat"),
        series="csv:read_csv_series",
        table="formats:_text_table",
    ),
    Format(
        "Excel workbook",
        (".xlsx", ".xlsm"),
        series="excel:read_excel_series",
        table="formats:_excel_table",
    ),
    Format(
        "WaterML 2.0 document", (".xml", ".wml", ".wml2"), series="waterml2:read_waterml2_series"
    ),
    Format(
        "vector layer",
        (".gpkg", ".shp", ".geojson", ".json", ".fgb", ".gml", ".kml", ".zip"),
        vector="vector:read_layer",
    ),
)


def suffixes(kind: Kind) -> tuple[str, ...]:
    """Every suffix whose format holds ``kind``."""
    return tuple(s for f in FORMATS if f.reads(kind) for s in f.suffixes)


def _known(kind: Kind) -> str:
    return "; ".join(f"{', '.join(f.suffixes)} ({f.name})" for f in FORMATS if f.reads(kind))


def format_of(path: str | Path) -> Format | None:
    """The format of ``path`` by its suffix (case-insensitive), or None when none knows it."""
    suffix = Path(path).suffix.lower()
    return next((f for f in FORMATS if suffix in f.suffixes), None)


def reader(path: str | Path, kind: Kind, what: str) -> Callable[..., Any]:
    """The function that reads ``kind`` from ``path``, chosen by the file's suffix.

    Parameters
    ----------
    path : str or Path
        The file.
    kind : {"series", "table", "vector"}
        What is to be read from it.
    what : str
        Names the file's role in the message (``"series stage"``, ``"storage table"``).

    Raises
    ------
    InputError
        The suffix belongs to no format, or to one that does not hold ``kind``; the message
        names the file and the suffixes that hold ``kind``.
    """
    fmt = format_of(path)
    if fmt is not None and fmt.reads(kind):
        return fmt.function(kind)
    from .files import check_input

    check_input(path, what)  # a missing file, a device or a folder says so first
    suffix = Path(path).suffix.lower()
    if fmt is None:
        found = f"unknown file suffix {suffix!r}" if suffix else "the file has no suffix"
    else:
        found = f"a {fmt.name} ({suffix}) holds no {KINDS[kind]}"
    raise InputError(
        f"{what}: {found}; a {KINDS[kind]} is read from {_known(kind)}",
        file=Path(path),
    )
