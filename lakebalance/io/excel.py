"""Excel workbooks (.xlsx, .xlsm) as tables with spreadsheet row numbers.

Read with openpyxl in read-only mode. The first non-empty row of the sheet is the header; the
``_line`` of each data row is its spreadsheet row number, so that messages point at the cell a
user would open (``file:row:column``).

The zip container is checked before openpyxl parses any of it: inflated sizes are bounded, a
part with a DTD or entity declarations is refused, and a sheet whose values are cached formula
results is said (with the workbook's external links named).
"""

from __future__ import annotations

import re
import warnings
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO

import numpy as np

from ..config import SeriesSpec
from ..errors import FormulaValueWarning, InputError, LakebalanceError, LimitError, excerpt
from ._raw import RawSeries
from ._text import TextTable, resolve_column
from .files import MAX_COLUMNS, MAX_XLSX_INFLATED_BYTES, MAX_XLSX_MEMBERS, open_input

__all__ = [
    "WorkbookScan",
    "scan_workbook",
    "read_excel_table",
    "read_excel_series",
]


#: Rows of a worksheet (Excel's own limit, from memory: 1,048,576 rows by 16,384 columns).
MAX_SHEET_ROWS = 1_048_576
_XML_PARTS = (".xml", ".rels", ".vml")
_DTD_MARKS = tuple(
    mark.encode(enc)
    for mark in ("<!DOCTYPE", "<!ENTITY")
    for enc in ("utf-8", "utf-16-le", "utf-16-be")
)
_FORMULA = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?f[\s>/]")
_TARGET = re.compile(rb"""Target\s*=\s*["']([^"']*)["']""")
_CHUNK = 1 << 20  # bytes inflated at a time


@dataclass(frozen=True)
class WorkbookScan:
    """What the safety scan of a workbook's zip container found.

    ``formula_parts`` are the worksheet parts holding formula cells (their values are the
    results cached when the workbook was last saved); ``external_links`` the targets of the
    workbook's links to other workbooks.
    """

    formula_parts: frozenset[str]
    external_links: tuple[str, ...]


def scan_workbook(fh: BinaryIO, file: str, what: str) -> WorkbookScan:
    """Check a workbook's zip container before any XML in it is parsed.

    Declared inflated sizes are added up and refused past
    :data:`~lakebalance.io.files.MAX_XLSX_INFLATED_BYTES`; every XML part is then inflated in
    chunks (bounded again by what is actually inflated, and checked against its CRC) and
    refused when it declares a DTD or entities. Formula cells and external links are noted.

    Raises
    ------
    LimitError
        Too many parts, or more inflated bytes than the limit (a zip bomb).
    InputError
        Not a zip container, a corrupt part (bad CRC), or a DTD or entity declaration.
    """
    try:
        zf = zipfile.ZipFile(fh)
    except (zipfile.BadZipFile, zipfile.LargeZipFile, OSError, ValueError, EOFError) as exc:
        raise InputError(f"{what}: not a readable .xlsx workbook ({exc})", file=file) from None
    with zf:
        infos = zf.infolist()
        if len(infos) > MAX_XLSX_MEMBERS:
            raise LimitError(
                f"{what}: the workbook has {len(infos):,} parts, over the limit of "
                f"{MAX_XLSX_MEMBERS:,}",
                file=file,
            )
        declared = sum(i.file_size for i in infos)
        if declared > MAX_XLSX_INFLATED_BYTES:
            raise _bomb(what, file, declared, "declares")
        inflated = 0
        formulas: set[str] = set()
        links: list[str] = []
        for info in infos:
            if not info.filename.lower().endswith(_XML_PARTS):
                continue
            tail = b""
            has_formula = False
            body = b""
            try:
                with zf.open(info) as part:
                    while chunk := part.read(_CHUNK):
                        inflated += len(chunk)
                        if inflated > MAX_XLSX_INFLATED_BYTES:
                            raise _bomb(what, file, inflated, "inflates to")
                        window = tail + chunk
                        if any(mark in window for mark in _DTD_MARKS):
                            raise InputError(
                                f"{what}: the workbook part {info.filename!r} declares a DTD "
                                "or entities (<!DOCTYPE> or <!ENTITY>); such workbooks are "
                                "refused (a spreadsheet program never writes them)",
                                file=file,
                            )
                        if not has_formula and _FORMULA.search(window):
                            has_formula = True
                        if "externalLinks/_rels/" in info.filename and len(body) < 65536:
                            body += chunk
                        tail = chunk[-16:]
            except LakebalanceError:
                raise
            except (
                zipfile.BadZipFile,
                EOFError,
                zlib.error,
                NotImplementedError,
                OSError,
                ValueError,
                RuntimeError,  # an encrypted part
            ) as exc:
                text = excerpt(f"{info.filename}: {exc}")
                raise InputError(f"{what}: the workbook is corrupt ({text})", file=file) from None
            if has_formula and "worksheets/" in info.filename:
                formulas.add(info.filename)
            if body:
                links.extend(t.decode("utf-8", "replace") for t in _TARGET.findall(body))
    return WorkbookScan(frozenset(formulas), tuple(dict.fromkeys(links)))


def _bomb(what: str, file: str, size: int, verb: str) -> LimitError:
    return LimitError(
        f"{what}: the workbook {verb} {size / 1024**2:,.0f} MiB of parts, over the limit of "
        f"{MAX_XLSX_INFLATED_BYTES / 1024**2:,.0f} MiB (a zip bomb?)",
        file=file,
    )


def _warn_formulas(scan: WorkbookScan, ws: object, file: str) -> None:
    part = str(getattr(ws, "_worksheet_path", "") or "")
    holds = (part in scan.formula_parts) if part else bool(scan.formula_parts)
    if not holds:
        return
    links = ""
    if scan.external_links:
        shown = ", ".join(excerpt(t, 80) for t in scan.external_links[:3])
        more = f" (+{len(scan.external_links) - 3} more)" if len(scan.external_links) > 3 else ""
        links = f"; the workbook links to other workbooks: {shown}{more}"
    warnings.warn(
        f"{file}: sheet {ws.title!r} holds formulas; their values are those cached when the "  # type: ignore[attr-defined]
        f"workbook was last saved, not recomputed{links}",
        FormulaValueWarning,
        stacklevel=2,
    )


_PARSE_ERRORS: tuple[type[BaseException], ...] = (
    zipfile.BadZipFile,
    EOFError,
    zlib.error,
    KeyError,
    ValueError,
    TypeError,
    IndexError,
    AttributeError,
    OSError,
    SyntaxError,  # xml.etree.ElementTree.ParseError is a SyntaxError
)


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
    sheet when None. The zip container is checked first (:func:`scan_workbook`); values that are
    cached formula results are said with a :class:`~lakebalance.errors.FormulaValueWarning`.

    Raises
    ------
    InputError
        Not a workbook, corrupt, a DTD or entities in its XML, no such sheet, an empty or
        header-only sheet, a missing column.
    LimitError
        Not a regular file, or past a limit (file size, inflated size, columns, rows).
    """
    file = str(path)
    with open_input(path, what) as fh:
        scan = scan_workbook(fh, file, what)
        fh.seek(0)
        try:
            return _read_sheet(fh, scan, wanted, what=what, sheet=sheet, file=file)
        except LakebalanceError:
            raise
        except _PARSE_ERRORS as exc:
            text = excerpt(f"{type(exc).__name__}: {exc}")
            raise InputError(f"{what}: not a readable .xlsx workbook ({text})", file=file) from None


def _read_sheet(
    fh: BinaryIO,
    scan: WorkbookScan,
    wanted: dict[str, str],
    *,
    what: str,
    sheet: str | None,
    file: str,
) -> TextTable:
    import openpyxl
    import pandas as pd

    wb = openpyxl.load_workbook(fh, read_only=True, data_only=True)
    try:
        if sheet is None:
            if not wb.worksheets:
                raise InputError(f"{what}: the workbook has no worksheet", file=file)
            ws = wb.worksheets[0]
        elif sheet in wb.sheetnames:
            ws = wb[sheet]
        elif sheet.isdigit() and 1 <= int(sheet) <= len(wb.worksheets):
            ws = wb.worksheets[int(sheet) - 1]
        else:
            from ..errors import suggest

            raise InputError(
                f"{what}: no sheet {excerpt(sheet, 40)}; the workbook has "
                + ", ".join(excerpt(n, 40) for n in wb.sheetnames[:20])
                + suggest(sheet, wb.sheetnames),
                file=file,
            )
        if not hasattr(ws, "iter_rows"):
            raise InputError(f"{what}: the sheet {ws.title!r} is a chart, not a table", file=file)
        _warn_formulas(scan, ws, file)
        if hasattr(ws, "reset_dimensions"):
            ws.reset_dimensions()  # rows as stored, not padded to a declared (maybe huge) size
        header, header_line = _header_row(ws, what, file)
        positions = {
            key: resolve_column(col, header, file=file, line=header_line, what=what)
            for key, col in wanted.items()
        }
        width = max(positions.values()) + 1
        body: list[tuple] = []
        lines: list[int] = []
        cols = list(positions.values())
        for number, row in enumerate(
            ws.iter_rows(min_row=header_line + 1, max_col=width, values_only=True),
            start=header_line + 1,
        ):
            if number > MAX_SHEET_ROWS:
                raise LimitError(
                    f"{what}: the sheet has rows past {MAX_SHEET_ROWS:,}, a worksheet's limit",
                    file=file,
                )
            if any(v is not None and not (isinstance(v, str) and not v.strip()) for v in row):
                body.append(tuple(row[p] if p < len(row) else None for p in cols))
                lines.append(number)
    finally:
        wb.close()
    if not body:
        raise InputError(
            f"{what}: the sheet has a header but no data rows", file=file, line=header_line
        )
    frame = pd.DataFrame(index=pd.RangeIndex(len(body)))
    for j, key in enumerate(positions):
        frame[key] = pd.Series([r[j] for r in body], dtype=object)
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


def _header_row(ws: object, what: str, file: str) -> tuple[tuple[str, ...], int]:
    """The first non-empty row of a sheet (trailing empty cells dropped) and its row number."""
    rows = ws.iter_rows(max_col=MAX_COLUMNS, values_only=True)  # type: ignore[attr-defined]
    for number, row in enumerate(rows, start=1):
        if number > MAX_SHEET_ROWS:
            break
        cells = ["" if v is None else str(v) for v in row]
        while cells and not cells[-1].strip():
            cells.pop()
        if cells:
            return tuple(cells), number
    raise InputError(f"{what}: the sheet {ws.title!r} is empty", file=file)  # type: ignore[attr-defined]


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
