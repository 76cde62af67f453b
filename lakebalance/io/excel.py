"""Excel workbooks (.xlsx, .xlsm) as tables with spreadsheet row numbers.

Read with openpyxl in read-only mode. The first non-empty row of the sheet is the header; the
``_line`` of each data row is its spreadsheet row number, so that messages point at the cell a
user would open (``file:row:column``).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..config import SeriesSpec
from ..errors import InputError
from ._raw import RawSeries
from ._text import TextTable, resolve_column

__all__ = ["read_excel_table", "read_excel_series"]


def read_excel_table(
    path: str | Path,
    wanted: dict[str, str],
    *,
    what: str,
    sheet: str | None = None,
) -> TextTable:
    """Read the columns ``wanted`` (our key -> the user's column) of one sheet of a workbook.

    Cells come back as they are stored (numbers as floats, dates as datetimes, text as strings);
    the callers convert them. ``sheet`` is a sheet name (or a 1-based number as text); the first
    sheet when None.

    Raises
    ------
    InputError
        Not a workbook, no such sheet, an empty or header-only sheet, a missing column.
    """
    import zipfile

    import openpyxl
    import pandas as pd

    file = str(path)
    p = Path(path)
    if not p.exists():
        raise InputError(f"{what}: file not found", file=file)
    try:
        wb = openpyxl.load_workbook(p, read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError) as exc:
        raise InputError(f"{what}: not a readable .xlsx workbook ({exc})", file=file) from None
    try:
        if sheet is None:
            ws = wb.worksheets[0]
        elif sheet in wb.sheetnames:
            ws = wb[sheet]
        elif sheet.isdigit() and 1 <= int(sheet) <= len(wb.worksheets):
            ws = wb.worksheets[int(sheet) - 1]
        else:
            from ..errors import suggest

            raise InputError(
                f"{what}: no sheet {sheet!r}; the workbook has "
                + ", ".join(repr(n) for n in wb.sheetnames)
                + suggest(sheet, wb.sheetnames),
                file=file,
            )
        rows = list(ws.iter_rows(min_row=1, values_only=True))
        first_row = 1
    finally:
        wb.close()
    numbers = np.arange(first_row, first_row + len(rows))
    nonempty = [
        i
        for i, r in enumerate(rows)
        if any(v is not None and not (isinstance(v, str) and not v.strip()) for v in r)
    ]
    if not nonempty:
        raise InputError(f"{what}: the sheet {ws.title!r} is empty", file=file)
    h = nonempty[0]
    header = tuple("" if v is None else str(v) for v in rows[h])
    header_line = int(numbers[h])
    positions = {
        key: resolve_column(col, header, file=file, line=header_line, what=what)
        for key, col in wanted.items()
    }
    body = [rows[i] for i in nonempty[1:]]
    lines = numbers[nonempty[1:]]
    if not body:
        raise InputError(
            f"{what}: the sheet has a header but no data rows", file=file, line=header_line
        )
    frame = pd.DataFrame(index=pd.RangeIndex(len(body)))
    for key, pos in positions.items():
        col = [r[pos] if pos < len(r) else None for r in body]
        frame[key] = pd.Series(col, dtype=object)
    return TextTable(
        file=file,
        frame=frame,
        lines=np.asarray(lines, dtype=np.int64),
        header=header,
        header_line=header_line,
        positions={k: p + 1 for k, p in positions.items()},
        delimiter="",
        encoding="",
    )


def read_excel_series(spec: SeriesSpec, what: str) -> RawSeries:
    """Read the date (and time) and value cells of ``spec`` from one sheet of a workbook.

    Raises
    ------
    InputError
        Not a workbook, no such sheet, an empty or header-only sheet, a missing column.
    """
    wanted = {"date": spec.date, "value": spec.value}
    if spec.time:
        wanted["time"] = spec.time
    table = read_excel_table(spec.file, wanted, what=what, sheet=spec.sheet)
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
