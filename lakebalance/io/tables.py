"""Small tables (storage relations, spot gaugings) from CSV or Excel, strictly checked.

Unlike the gauge-series readers, which turn bad cells into QA findings, :func:`read_table` refuses
a table with any unusable cell: a storage relation or a set of gaugings is small, and one wrong
number in it changes every result. Every error names the file, the line and the column.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError
from ._text import TextTable

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = ["read_table", "read_raw_table", "to_numbers"]


def read_raw_table(
    path: str | Path,
    columns: dict[str, str],
    *,
    what: str,
    sheet: str | None = None,
    delimiter: str | None = None,
    decimal: str = ".",
    encoding: str | None = None,
    string_columns: Iterable[str] = (),
) -> TextTable:
    """The requested columns of a CSV/text or .xlsx file, cells untouched, with file lines.

    The format follows the suffix (:data:`lakebalance.io.formats.FORMATS`): ``.xlsx``/``.xlsm``
    are workbooks, ``.csv``/``.txt``/``.tsv``/``.dat`` delimited text; any other suffix is an
    :class:`~lakebalance.errors.InputError`.
    """
    from .formats import reader

    return reader(path, "table", what)(
        path,
        columns,
        what=what,
        sheet=sheet,
        delimiter=delimiter,
        decimal=decimal,
        encoding=encoding,
        string_columns=tuple(string_columns),
    )


def to_numbers(cells: pd.Series, decimal: str = ".") -> tuple[np.ndarray, np.ndarray]:
    """Floats of a column of cells, and a mask of the non-empty cells that are not numbers.

    Floats pass through; text cells are stripped and parsed (with ``decimal`` as the decimal
    mark); empty cells are NaN and not counted as bad.
    """
    import pandas as pd

    if pd.api.types.is_numeric_dtype(cells) and not pd.api.types.is_bool_dtype(cells):
        values = cells.to_numpy(dtype=float)
        bad = np.isinf(values)
        return np.where(bad, np.nan, values), bad
    text = cells.astype(object)
    kind = pd.api.types.infer_dtype(text, skipna=True)
    if kind in ("string", "empty"):
        stripped = text.str.strip()
        if decimal != ".":
            stripped = stripped.str.replace(decimal, ".", regex=False)
        text = stripped.where(stripped != "", None)
        odd = np.zeros(len(text), dtype=bool)
    else:  # spreadsheet cells: numbers, text, booleans, datetimes mixed
        is_str = text.map(lambda v: isinstance(v, str), na_action="ignore")
        is_str = is_str.fillna(False).astype(bool)
        if is_str.any():
            stripped = text[is_str].str.strip()
            if decimal != ".":
                stripped = stripped.str.replace(decimal, ".", regex=False)
            text = text.copy()
            text[is_str] = stripped.where(stripped != "", None)
        odd = text.map(lambda v: isinstance(v, bool) or hasattr(v, "year"), na_action="ignore")
        odd = odd.fillna(False).astype(bool).to_numpy()
    empty = text.isna().to_numpy()
    values = pd.to_numeric(text.where(~odd, None), errors="coerce").to_numpy(dtype=float)
    # literal "inf" written in a file is not a measurement
    bad = (np.isnan(values) & ~empty) | odd | np.isinf(values)
    values = np.where(bad, np.nan, values)
    return values, bad


def read_table(
    path: str | Path,
    columns: dict[str, str],
    *,
    what: str,
    sheet: str | None = None,
    delimiter: str | None = None,
    decimal: str = ".",
    encoding: str | None = None,
    dayfirst: bool = False,
    date_columns: Iterable[str] = (),
) -> pd.DataFrame:
    """Read a small table (CSV or .xlsx) whose every requested cell must be usable.

    Parameters
    ----------
    path : str or Path
        The file; ``.xlsx``/``.xlsm`` are read as workbooks, ``.csv``/``.txt``/``.tsv``/``.dat``
        as delimited text (:mod:`lakebalance.io.formats`).
    columns : dict of str to str
        Our name -> the user's column (a header name, or a 1-based column number as text).
    what : str
        Names the table in messages (``"storage table"``, ``"gaugings"``).
    sheet : str, optional
        Workbook sheet (first sheet when None).
    delimiter : str, optional
        Field delimiter of a text file (sniffed when None).
    decimal : str
        Decimal mark of a text file (``","`` for a decimal comma).
    encoding : str, optional
        Text encoding (sniffed when None: byte-order mark, UTF-8, Windows-1252).
    dayfirst : bool
        Day-first dates (``03/04/2021`` is 3 April) in ``date_columns``.
    date_columns : iterable of str
        Our names of the columns holding dates (parsed to ``datetime64``; others are floats).

    Returns
    -------
    pandas.DataFrame
        One column per key of ``columns`` (floats, or datetimes for ``date_columns``), in file
        order, plus the int column ``_line``: the 1-based file line (spreadsheet row) of each row.
        Rows whose requested cells are all empty are dropped; a row with some empty cells keeps
        NaN (NaT) there.

    Raises
    ------
    InputError
        With file, line and column: a missing column, text in a number, an unparseable date, a
        header-only, empty or binary file.

    Examples
    --------
    >>> table = read_table("survey.csv", {"stage": "level", "area": "area"},
    ...                    what="storage table")  # doctest: +SKIP
    """
    import pandas as pd

    date_columns = tuple(date_columns)
    for key in date_columns:
        if key not in columns:
            raise ValueError(f"date column {key!r} is not one of the requested columns")
    raw = read_raw_table(
        path,
        columns,
        what=what,
        sheet=sheet,
        delimiter=delimiter,
        decimal=decimal,
        encoding=encoding,
        string_columns=date_columns,
    )
    frame = raw.frame
    out = pd.DataFrame(index=pd.RangeIndex(len(frame)))
    all_empty = np.ones(len(frame), dtype=bool)
    for key in columns:
        cells = frame[key]
        if key in date_columns:
            from .dates import parse_timestamps

            stamps, bad = parse_timestamps(cells, dayfirst=dayfirst)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise InputError(
                    f"{what}: column {columns[key]!r}: {str(cells.iloc[i]).strip()!r} is not a date",
                    file=raw.file,
                    line=int(raw.lines[i]),
                    column=raw.positions[key],
                )
            out[key] = stamps
            all_empty &= np.asarray(stamps.isna())
        else:
            values, bad = to_numbers(cells, decimal)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                n = int(bad.sum())
                more = f" ({n - 1} more such cells)" if n > 1 else ""
                raise InputError(
                    f"{what}: column {columns[key]!r}: {str(cells.iloc[i]).strip()!r} is not a "
                    f"number{more}",
                    file=raw.file,
                    line=int(raw.lines[i]),
                    column=raw.positions[key],
                )
            out[key] = values
            all_empty &= np.isnan(values)
    out["_line"] = raw.lines.astype(int)
    out = out[~all_empty].reset_index(drop=True)
    if out.empty:
        raise InputError(
            f"{what}: the file has a header but no data rows", file=raw.file, line=raw.header_line
        )
    return out
