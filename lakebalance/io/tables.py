"""Small tables (storage relations, spot gaugings) from CSV or Excel, strictly checked.

Unlike the gauge-series readers, which turn bad cells into QA findings, :func:`read_table` refuses
a table with any unusable cell: a storage relation or a set of gaugings is small, and one wrong
number in it changes every result. Every error names the file, the line and the column.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError, excerpt
from ._text import TextTable

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = ["read_table", "read_raw_table", "to_numbers", "ambiguous_numbers", "ambiguity_error"]


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


_GROUPED = {  # thousands separator -> a number written with it, e.g. 1,234 or 1.234.567,5
    t: rf"[-+]?\d{{1,3}}(?:{re.escape(t)}\d{{3}})+"
    for t in (",", ".", " ", "'", "\u00a0", "\u202f")
}


def _text_cells(cells: pd.Series) -> tuple[pd.Series, np.ndarray]:
    """The stripped text cells of a column (others None) and the mask of text cells."""
    text = cells.astype(object)
    is_str = text.map(lambda v: isinstance(v, str)).to_numpy(dtype=bool)
    out = text.where(is_str, None)
    if is_str.any():
        out = out.copy()
        out[is_str] = text[is_str].str.strip()
    return out, is_str


def ambiguous_numbers(
    cells: pd.Series, decimal: str = ".", thousands: str | None = None
) -> np.ndarray:
    """Mask of the text cells whose number depends on a thousands separator not declared.

    With no ``thousands`` declared, ``12.345`` in a file with a decimal comma could be twelve
    thousand or twelve, and ``1,234`` in a file with a decimal point could be one thousand or a
    misplaced decimal comma; neither is guessed. Cells of such a shape are returned so that the
    caller stops with their line.
    """
    import pandas as pd

    if thousands is not None or pd.api.types.is_numeric_dtype(cells):
        return np.zeros(len(cells), dtype=bool)
    text, is_str = _text_cells(cells)
    if not is_str.any():
        return np.zeros(len(cells), dtype=bool)
    if decimal == ",":
        pattern = r"[-+]?\d*\.\d+(?:,\d*)?(?:[eE][-+]?\d+)?"
    else:
        pattern = _GROUPED[","] + r"(?:\.\d*)?"
    hit = text[is_str].str.fullmatch(pattern).fillna(False).astype(bool)
    mask = np.zeros(len(cells), dtype=bool)
    mask[is_str] = hit.to_numpy()
    return mask


def to_numbers(
    cells: pd.Series, decimal: str = ".", thousands: str | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Floats of a column of cells, and a mask of the non-empty cells that are not numbers.

    Floats pass through; text cells are stripped and parsed (with ``decimal`` as the decimal
    mark, and ``thousands`` as the thousands separator when declared: a cell using it must
    group the digits by three, ``1,234,567.5``, or it is not a number); empty cells are NaN and
    not counted as bad.
    """
    import pandas as pd

    if pd.api.types.is_numeric_dtype(cells) and not pd.api.types.is_bool_dtype(cells):
        values = cells.to_numpy(dtype=float)
        bad = np.isinf(values)
        return np.where(bad, np.nan, values), bad
    text = cells.astype(object)
    kind = pd.api.types.infer_dtype(text, skipna=True)

    def clean(stripped: pd.Series) -> pd.Series:
        if thousands is not None:
            has = stripped.str.contains(thousands, regex=False).fillna(False).astype(bool)
            if has.any():
                grouped = _GROUPED.get(thousands) or (
                    rf"[-+]?\d{{1,3}}(?:{re.escape(thousands)}\d{{3}})+"
                )
                dec = re.escape(decimal)
                ok = stripped[has].str.fullmatch(grouped + rf"(?:{dec}\d*)?(?:[eE][-+]?\d+)?")
                ok = ok.fillna(False).astype(bool)
                stripped = stripped.copy()
                stripped[has & ~ok.reindex(stripped.index, fill_value=False)] = "not a number"
                stripped[has] = stripped[has].str.replace(thousands, "", regex=False)
        if decimal != ".":
            stripped = stripped.str.replace(decimal, ".", regex=False)
        return stripped

    if kind in ("string", "empty"):
        stripped = clean(text.str.strip())
        text = stripped.where(stripped != "", None)
        odd = np.zeros(len(text), dtype=bool)
    else:  # spreadsheet cells: numbers, text, booleans, datetimes mixed
        is_str = text.map(lambda v: isinstance(v, str), na_action="ignore")
        is_str = is_str.fillna(False).astype(bool)
        if is_str.any():
            stripped = clean(text[is_str].str.strip())
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


def ambiguity_error(cell: object, decimal: str, *, what: str, key_hint: str, **where) -> InputError:
    """The error for a cell found by :func:`ambiguous_numbers` (``key_hint`` says where to set
    ``thousands``, or what to do when the table has no such key)."""
    if decimal == ",":
        why = "with decimal = ',' a '.' can only separate thousands"
        setting = "thousands = '.'"
    else:
        why = "with a decimal point a ',' between digit groups can only separate thousands"
        setting = "thousands = ','"
    return InputError(
        f"{what}: {excerpt(str(cell).strip())} is ambiguous ({why}); {key_hint.format(setting)}",
        **where,
    )


def read_table(
    path: str | Path,
    columns: dict[str, str],
    *,
    what: str,
    sheet: str | None = None,
    delimiter: str | None = None,
    decimal: str = ".",
    encoding: str | None = None,
    dayfirst: bool | None = False,
    date_columns: Iterable[str] = (),
    dayfirst_key: str = "dayfirst",
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
    dayfirst : bool or None
        Day-first dates (``03/04/2021`` is 3 April) in ``date_columns``; None infers the order
        from the cells and warns what it inferred
        (:func:`~lakebalance.io.dates.resolve_day_order`).
    date_columns : iterable of str
        Our names of the columns holding dates (parsed to ``datetime64``; others are floats).
    dayfirst_key : str
        The site-file key that sets the order, named when the cells contradict it.

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
            from .dates import parse_timestamps, resolve_day_order

            order, note = resolve_day_order(
                cells,
                dayfirst,
                key=dayfirst_key,
                file=raw.file,
                lines=raw.lines,
                column=raw.positions[key],
            )
            if note:
                import warnings

                from ..errors import DataQualityWarning

                warnings.warn(f"{what}: {note}", DataQualityWarning, stacklevel=2)
            stamps, bad = parse_timestamps(cells, dayfirst=order)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise InputError(
                    f"{what}: column {columns[key]!r}: {excerpt(str(cells.iloc[i]).strip())} is not a date",
                    file=raw.file,
                    line=int(raw.lines[i]),
                    column=raw.positions[key],
                )
            out[key] = stamps
            all_empty &= np.asarray(stamps.isna())
        else:
            unclear = ambiguous_numbers(cells, decimal)
            if unclear.any():
                i = int(np.flatnonzero(unclear)[0])
                raise ambiguity_error(
                    cells.iloc[i],
                    decimal,
                    what=f"{what}: column {columns[key]!r}",
                    key_hint="write the table's numbers without thousands separators",
                    file=raw.file,
                    line=int(raw.lines[i]),
                    column=raw.positions[key],
                )
            values, bad = to_numbers(cells, decimal)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                n = int(bad.sum())
                more = f" ({n - 1} more such cells)" if n > 1 else ""
                raise InputError(
                    f"{what}: column {columns[key]!r}: {excerpt(str(cells.iloc[i]).strip())} is not "
                    f"a number{more}",
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
