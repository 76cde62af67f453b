"""Text files as tables: encoding, delimiter, comment lines and the file line of every row.

Shared by :mod:`lakebalance.io.tables` (storage tables, gaugings) and :mod:`lakebalance.io.csv`
(gauge series). Everything here is about bytes and characters; numbers and dates are parsed by the
callers. The parsing itself is done by pandas' C parser over the whole file at once; the only
Python-level work is over the (few) comment and blank lines.
"""

from __future__ import annotations

import csv as _csv
import io as _io
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError, suggest

__all__ = ["TextTable", "decode", "sniff_delimiter", "read_text_table", "resolve_column"]

_CANDIDATE_DELIMITERS = (",", ";", "\t", "|")
_BOMS = (
    (b"\xef\xbb\xbf", "utf-8-sig"),
    (b"\xff\xfe", "utf-16"),
    (b"\xfe\xff", "utf-16"),
)
_ZIP_MAGIC = b"PK\x03\x04"


@dataclass(frozen=True)
class TextTable:
    """The cells of a delimited text file, as strings or floats, with their file lines.

    ``frame`` holds the requested columns under the file's own header names; ``lines`` the 1-based
    file line of each row (header and comment lines excluded); ``header`` the header names in file
    order; ``header_line`` the line of the header; ``positions`` the 1-based file column of each
    column of ``frame``.
    """

    file: str
    frame: object  # pandas.DataFrame
    lines: np.ndarray
    header: tuple[str, ...]
    header_line: int
    positions: dict[str, int]
    delimiter: str
    encoding: str


def _looks_binary(head: bytes) -> bool:
    if not head:
        return False
    if b"\x00" in head:
        return True
    control = sum(head.count(bytes([c])) for c in (*range(0, 8), *range(14, 27), *range(28, 32)))
    return control > 0.05 * len(head)


def decode(raw: bytes, file: str, encoding: str | None = None) -> tuple[str, str]:
    """Decode the bytes of a text file; return ``(text, encoding_used)``.

    With ``encoding`` given, that encoding is used (a byte it cannot decode is an
    :class:`InputError` naming the line). Otherwise a byte-order mark decides (UTF-8, UTF-16);
    without one UTF-8 is tried, then Windows-1252, then Latin-1.

    Raises
    ------
    InputError
        Binary content (NUL or control bytes, a zip container such as an .xlsx workbook) or
        undecodable bytes in the declared encoding.
    """
    bom_enc = None
    for bom, enc in _BOMS:
        if raw.startswith(bom):
            bom_enc = enc
            break
    if raw.startswith(_ZIP_MAGIC):
        raise InputError(
            "binary file, not text: it looks like a zip container (an .xlsx workbook?); "
            "give it the .xlsx suffix or export it as CSV",
            file=file,
        )
    if bom_enc != "utf-16" and encoding is None and _looks_binary(raw[:65536]):
        raise InputError("binary file, not text (it holds NUL or control bytes)", file=file)
    if encoding is not None:
        try:
            text = raw.decode(encoding)
        except LookupError:
            raise InputError(f"unknown text encoding {encoding!r}", file=file) from None
        except UnicodeDecodeError as exc:
            line = raw[: exc.start].count(b"\n") + 1
            raise InputError(
                f"byte 0x{raw[exc.start]:02x} cannot be decoded as {encoding}; "
                "check the declared 'encoding'",
                file=file,
                line=line,
            ) from None
        if text.startswith("\ufeff"):
            text = text[1:]
        return text, encoding
    if bom_enc is not None:
        try:
            text = raw.decode(bom_enc)
        except UnicodeDecodeError:
            raise InputError(
                f"the file starts with a {bom_enc} mark but is not {bom_enc}", file=file
            ) from None
        return text.lstrip("\ufeff"), bom_enc
    for enc in ("utf-8", "cp1252", "latin-1"):
        try:
            return raw.decode(enc), enc
        except UnicodeDecodeError:
            continue
    raise AssertionError("latin-1 decodes every byte")  # pragma: no cover


def sniff_delimiter(sample_lines: list[str], decimal: str = ".") -> str | None:
    """The field delimiter that splits the sample lines into the same number (> 1) of fields.

    Candidates are ``,`` ``;`` tab and ``|``; a comma is only chosen with a decimal comma when no
    other candidate fits. Returns None when no candidate splits the lines (a one-column file).
    """
    best: tuple[float, str] | None = None
    for cand in _CANDIDATE_DELIMITERS:
        counts = []
        for ln in sample_lines:
            try:
                counts.append(len(next(_csv.reader([ln], delimiter=cand))) - 1)
            except (StopIteration, _csv.Error):
                counts.append(0)
        if not counts or max(counts) == 0:
            continue
        mode = max(set(counts), key=counts.count)
        if mode == 0:
            continue
        consistency = counts.count(mode) / len(counts)
        score = consistency + (0.0 if (cand == "," and decimal == ",") else 0.5)
        if cand == "," and decimal == ",":
            score -= 1.0
        if best is None or score > best[0]:
            best = (score, cand)
    return None if best is None else best[1]


def resolve_column(
    want: str, header: tuple[str, ...], *, file: str, line: int, what: str, role: str = "column"
) -> int:
    """0-based position of column ``want`` in ``header`` (a name, or a 1-based number as text).

    Raises
    ------
    InputError
        When no such column exists; the message lists the columns found and the nearest name, and
        hints at a wrong delimiter when the header is one field holding a likely delimiter.
    """
    stripped = [h.strip() for h in header]
    if want in header:
        return header.index(want)
    if want.strip() in stripped:
        return stripped.index(want.strip())
    lowered = [h.lower() for h in stripped]
    if want.strip().lower() in lowered and lowered.count(want.strip().lower()) == 1:
        return lowered.index(want.strip().lower())
    if want.strip().isdigit():
        pos = int(want.strip())
        if 1 <= pos <= len(header):
            return pos - 1
    found = ", ".join(repr(h) for h in header[:12]) + (" ..." if len(header) > 12 else "")
    hint = suggest(want, stripped)
    if len(header) == 1:
        for cand in _CANDIDATE_DELIMITERS:
            if cand in header[0]:
                hint += f"; the header is one field: is the delimiter {cand!r}?"
                break
    raise InputError(
        f"{what}: no {role} {want!r}; the header has {found}{hint}",
        file=file,
        line=line,
    )


def read_text_table(
    path: str | Path,
    wanted: dict[str, str],
    *,
    what: str,
    delimiter: str | None = None,
    decimal: str = ".",
    encoding: str | None = None,
    string_columns: tuple[str, ...] = (),
    iso_columns: tuple[str, ...] = (),
) -> TextTable:
    """Read the columns ``wanted`` (our key -> the user's column) of a delimited text file.

    Lines that are empty, blank or start with ``#`` are comments and skipped; the first other line
    is the header. Quoted fields follow the usual CSV rules. Numeric-looking columns come back as
    floats (empty cells NaN); a column holding any other text comes back as strings, untouched
    (so callers can count the tokens). Keys in ``string_columns`` always come back as strings;
    keys in ``iso_columns`` come back as strings or, when every cell is an ISO 8601 date or
    timestamp, already parsed (``datetime64``, zone-aware when the cells carry an offset).

    Large plain files (UTF-8, decimal point, unique header names) are parsed with Apache Arrow's
    multi-threaded CSV reader; anything it does not accept falls back to pandas' C parser.
    Extra fields at the end of a row are ignored; missing ones are empty.

    Raises
    ------
    InputError
        Unreadable, empty, binary or header-only file; a wanted column that is not in the header.
    """
    import pandas as pd

    file = str(path)
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError(f"{what}: file not found", file=file) from None
    except OSError as exc:
        raise InputError(f"{what}: cannot read the file ({exc.strerror})", file=file) from None
    text, used_encoding = decode(raw, file, encoding)
    if used_encoding in ("utf-8", "utf-8-sig", "ascii"):
        data = raw[3:] if raw.startswith(b"\xef\xbb\xbf") else raw
    else:
        data = text.encode("utf-8")
    del raw
    if not text.strip():
        raise InputError(f"{what}: the file is empty", file=file)
    del text
    if b"\r" in data:
        data = data.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    buf = np.frombuffer(data, dtype=np.uint8)
    nl = np.flatnonzero(buf == 10)
    starts = np.concatenate(([0], nl + 1))
    starts = starts[starts < len(data)]
    last_end = len(data) - 1 if data.endswith(b"\n") else len(data)
    ends = np.concatenate((starts[1:] - 1, [last_end]))  # exclusive, without the newline
    # Skip blank, whitespace-only and '#' comment lines (Python only over lines starting oddly).
    candidate = np.flatnonzero(np.isin(buf[starts], [10, 32, 9, 35]))
    skip = np.zeros(len(starts), dtype=bool)
    for i in candidate:
        segment = data[starts[i] : ends[i]].strip()
        if not segment or segment.startswith(b"#"):
            skip[i] = True
    data_idx = np.flatnonzero(~skip)
    if len(data_idx) == 0:
        raise InputError(f"{what}: the file holds only comments or blank lines", file=file)
    header_line = int(data_idx[0]) + 1

    sample = [data[starts[i] : ends[i]].decode("utf-8", errors="replace") for i in data_idx[:30]]
    header_text = sample[0]
    if delimiter is None:
        delimiter = sniff_delimiter(sample, decimal) or ","
    if decimal == delimiter:
        raise InputError(
            f"{what}: the decimal mark and the field delimiter are both {delimiter!r}",
            file=file,
        )
    try:
        header = tuple(next(_csv.reader([header_text], delimiter=delimiter)))
    except (_csv.Error, StopIteration):
        header = (header_text,)
    positions: dict[str, int] = {}
    for key, col in wanted.items():
        positions[key] = resolve_column(col, header, file=file, line=header_line, what=what)
    _check_split_decimals(
        sample, data_idx[: len(sample)] + 1, header, delimiter, decimal, what, file
    )
    if len(data_idx) == 1:
        raise InputError(
            f"{what}: the file has a header but no data rows", file=file, line=header_line
        )
    # The bytes pandas sees: only the data lines (header first).
    if skip.any():
        keep = np.concatenate(([0], (~skip).astype(np.int8), [0]))
        edges = np.flatnonzero(np.diff(keep))
        pieces = []
        for a, b in zip(edges[::2], edges[1::2]):  # one piece per run of data lines
            piece = data[starts[a] : ends[b - 1]]
            pieces.append(piece + b"\n")
        clean = b"".join(pieces)
    else:
        clean = data
    del data, buf
    lines = data_idx[1:] + 1
    cols = sorted(set(positions.values()))
    fast = None
    if decimal == "." and len(set(header)) == len(header) and all(h.strip() for h in header):
        fast = _read_with_arrow(
            clean,
            delimiter,
            header,
            {k: header[p] for k, p in positions.items()},
            string_keys=set(string_columns),
            iso_keys=set(iso_columns),
            rows=len(lines),
        )
    if fast is not None:
        return TextTable(
            file=file,
            frame=fast,
            lines=np.asarray(lines, dtype=np.int64),
            header=header,
            header_line=header_line,
            positions={k: p + 1 for k, p in positions.items()},
            delimiter=delimiter,
            encoding=used_encoding,
        )
    str_pos = {positions[k] for k in (*string_columns, *iso_columns) if k in positions}
    dtype = {p: str for p in str_pos} or None
    try:
        frame = pd.read_csv(
            _io.BytesIO(clean),
            encoding="utf-8",
            encoding_errors="replace",
            sep=delimiter,
            decimal=decimal,
            header=0,
            usecols=cols,
            dtype=dtype,
            keep_default_na=False,
            na_values=[""],
            skip_blank_lines=False,
            engine="c",
            quotechar='"',
            low_memory=False,
        )
    except pd.errors.ParserError as exc:
        raise InputError(f"{what}: cannot parse the file ({exc})", file=file) from None
    except (ValueError, UnicodeError) as exc:
        raise InputError(f"{what}: cannot parse the file ({exc})", file=file) from None
    if len(frame) != len(lines):
        # quoted fields spanning lines: recover each record's first line with the csv module
        lines = _record_lines(clean, delimiter, data_idx + 1)[1:]
        if len(lines) != len(frame):
            raise InputError(
                f"{what}: rows and lines do not match ({len(frame)} rows, {len(lines)} records); "
                "check quoting",
                file=file,
            )
    # map to our keys
    out = pd.DataFrame(index=pd.RangeIndex(len(frame)))
    by_pos = {p: frame.iloc[:, i] for i, p in enumerate(cols)}
    for key, p in positions.items():
        out[key] = by_pos[p].to_numpy()
    return TextTable(
        file=file,
        frame=out,
        lines=np.asarray(lines, dtype=np.int64),
        header=header,
        header_line=header_line,
        positions={k: p + 1 for k, p in positions.items()},
        delimiter=delimiter,
        encoding=used_encoding,
    )


_ARROW_MIN_BYTES = 1_000_000  # smaller files: the C parser is as fast and starts quicker


def _read_with_arrow(
    clean: bytes,
    delimiter: str,
    header: tuple[str, ...],
    names: dict[str, str],
    *,
    string_keys: set[str],
    iso_keys: set[str],
    rows: int,
) -> object | None:
    """The wanted columns parsed by ``pyarrow.csv``, or None when it cannot be used safely.

    Numbers and ISO 8601 timestamps are typed by Arrow; a column whose cells are not all of one
    type (a token like ``ICE`` after the first block) makes Arrow fail and the caller falls back.
    """
    if len(clean) < _ARROW_MIN_BYTES:
        return None
    try:
        import pandas as pd
        import pyarrow as pa
        import pyarrow.csv as pacsv
    except ImportError:  # pragma: no cover - pyarrow is a dependency
        return None
    wanted = list(dict.fromkeys(names.values()))
    types = {names[k]: pa.string() for k in string_keys if k in names}
    try:
        table = pacsv.read_csv(
            _io.BytesIO(clean),
            read_options=pacsv.ReadOptions(block_size=1 << 24),
            parse_options=pacsv.ParseOptions(delimiter=delimiter, quote_char='"'),
            convert_options=pacsv.ConvertOptions(
                include_columns=wanted,
                column_types=types,
                null_values=[""],
                strings_can_be_null=True,
                quoted_strings_can_be_null=True,
            ),
        )
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError, ValueError):
        return None
    if table.num_rows != rows:
        return None
    out = pd.DataFrame(index=pd.RangeIndex(rows))
    for key, name in names.items():
        col = table.column(name)
        t = col.type
        if pa.types.is_timestamp(t) or pa.types.is_date(t):
            if key not in iso_keys:
                col = col.cast(pa.string()) if not pa.types.is_date(t) else col.cast(pa.string())
            elif pa.types.is_date(t):
                col = col.cast(pa.timestamp("s"))
        elif pa.types.is_time(t) or pa.types.is_boolean(t) or pa.types.is_decimal(t):
            col = col.cast(pa.string())
        elif pa.types.is_null(t):
            col = col.cast(pa.float64())
        if pa.types.is_string(col.type) or pa.types.is_large_string(col.type):
            out[key] = pd.Series(col.to_numpy(zero_copy_only=False), dtype=object)
        else:
            out[key] = col.to_pandas()
    return out


def _record_lines(clean: bytes, delimiter: str, original_lines: np.ndarray) -> np.ndarray:
    """First line (in the original file) of every CSV record of ``clean``."""
    reader = _csv.reader(_io.StringIO(clean.decode("utf-8", "replace")), delimiter=delimiter)
    firsts = []
    prev = 0
    for _ in reader:
        firsts.append(prev)
        prev = reader.line_num
    idx = np.asarray(firsts, dtype=np.int64)
    idx = idx[idx < len(original_lines)]
    return original_lines[idx]


_INTEGER = re.compile(r"\s*[-+]?\d+\s*")
_DIGITS = re.compile(r"\s*\d+\s*")


def _check_split_decimals(
    sample: list[str],
    line_numbers: np.ndarray,
    header: tuple[str, ...],
    delimiter: str,
    decimal: str,
    what: str,
    file: str,
) -> None:
    """Stop a comma-delimited file whose numbers carry a decimal comma.

    ``12,5`` in such a file splits into two fields, ``12`` and ``5``; the row then has more
    fields than the header and the extra ones are dropped, so every value would silently lose
    its decimals. Raised when nearly all sampled rows (90 %) are longer than the header and each of them
    holds an integer field followed by a field of digits only (the two halves of a number).
    """
    if delimiter != "," or decimal != "." or len(sample) < 2:
        return
    rows = list(_csv.reader(sample[1:], delimiter=delimiter))
    if not rows:
        return
    k = len(header)
    longer = [i for i, r in enumerate(rows) if len(r) > k]
    if len(longer) < 0.9 * len(rows):
        return

    def split_number(r: list[str]) -> bool:
        return any(_INTEGER.fullmatch(a) and _DIGITS.fullmatch(b) for a, b in zip(r[1:], r[2:]))

    if not all(split_number(rows[i]) for i in longer):
        return
    i = longer[0]
    raise InputError(
        f"{what}: this row has {len(rows[i])} fields but the header has {k} "
        f"({sample[1 + i].strip()!r}): numbers with a decimal comma in a comma-delimited "
        "file? Save it with ';' or tab between fields and set decimal = ','",
        file=file,
        line=int(line_numbers[1 + i]),
    )
