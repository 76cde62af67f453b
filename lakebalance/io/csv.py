"""Gauge series from delimited text (.csv, .txt, .tsv).

Delimiter, decimal comma, byte-order mark and encoding are sniffed or taken from the site file;
quoted fields and ``#`` comment lines are handled by :mod:`lakebalance.io._text`. Cells are
returned untouched; :mod:`lakebalance.io.series` parses and checks them.
"""

from __future__ import annotations

from ..config import SeriesSpec
from ._raw import RawSeries
from ._text import read_text_table

__all__ = ["read_csv_series"]


def read_csv_series(spec: SeriesSpec, what: str) -> RawSeries:
    """Read the date (and time) and value cells of ``spec`` from a delimited text file.

    Raises
    ------
    InputError
        Unreadable, empty, binary or header-only file, or a missing column (file and line).
    """
    wanted = {"date": spec.date, "value": spec.value}
    if spec.time:
        wanted["time"] = spec.time
    delimiter = spec.delimiter
    if delimiter is None and spec.file.suffix.lower() == ".tsv":
        delimiter = "\t"
    table = read_text_table(
        spec.file,
        wanted,
        what=what,
        delimiter=delimiter,
        decimal=spec.decimal,
        encoding=spec.encoding,
        thousands=spec.thousands,
        string_columns=("date", "time") if (spec.time or spec.format) else (),
        iso_columns=() if (spec.time or spec.format) else ("date",),
    )
    frame = table.frame
    return RawSeries(
        file=table.file,
        dates=frame["date"],
        values=frame["value"],
        times=frame["time"] if spec.time else None,
        lines=table.lines,
        units=None,
        value_column=table.positions["value"],
        date_column=table.positions["date"],
        decimal=spec.decimal,
    )
