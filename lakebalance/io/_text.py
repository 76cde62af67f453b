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
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError, LimitError, excerpt, suggest
from .files import MAX_COLUMNS, MAX_LINE_CHARS, read_input

if TYPE_CHECKING:
    import pandas as pd

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


def decode(
    raw: bytes, file: str, encoding: str | None = None, what: str | None = None
) -> tuple[str, str]:
    """Decode the bytes of a text file; return ``(text, encoding_used)``.

    With ``encoding`` given, that encoding is used (a byte it cannot decode is an
    :class:`InputError` naming the line). Otherwise a byte-order mark decides (UTF-8, UTF-16);
    without one the whole file must be valid UTF-8 (plain ASCII is). A file that is neither is
    an error naming the line of its first byte that is not UTF-8: guessing another encoding
    would change the header and every name silently when one stray byte sits in a UTF-8 file.

    Raises
    ------
    InputError
        Binary content (NUL or control bytes, a zip container such as an .xlsx workbook),
        undecodable bytes in the declared encoding, or an undeclared file that is not UTF-8.
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
    try:
        return raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            (f"{what}: " if what else "")
            + f"byte 0x{raw[exc.start]:02x} is not UTF-8 and no 'encoding' is declared; "
            f"{_encoding_hint(raw)}",
            file=file,
            line=line,
        ) from None


def _encoding_hint(raw: bytes) -> str:
    """What to declare for a file that is not UTF-8, judged from the whole file."""
    import re as _re

    multibyte = _re.search(rb"[\xc2-\xf4][\x80-\xbf]+", raw) is not None
    if multibyte:
        return (
            "the rest of the file reads as UTF-8, so this byte is probably a stray one: fix "
            "it, or declare the file's encoding (e.g. encoding = 'cp1252')"
        )
    return "declare the file's encoding, e.g. encoding = 'cp1252' (Windows Western European)"


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
    found = ", ".join(excerpt(h, 40) for h in header[:12]) + (" ..." if len(header) > 12 else "")
    hint = suggest(want, stripped)
    if len(header) == 1:
        for cand in _CANDIDATE_DELIMITERS:
            if cand in header[0]:
                hint += f"; the header is one field: is the delimiter {cand!r}?"
                break
    raise InputError(
        f"{what}: no {role} {excerpt(want, 40)}; the header has {found}{hint}",
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
    thousands: str | None = None,
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

    A number split by the delimiter (an unquoted ``1,234`` in a comma-delimited file) stops the
    reading with its line. ``thousands`` is the separator the numbers may carry; it may be the
    delimiter when such numbers are quoted (``"1,234"``), and is applied by the callers.

    Raises
    ------
    InputError
        Unreadable, empty, binary or header-only file; a wanted column that is not in the header;
        a number split by the delimiter.
    LimitError
        Not a regular file, or past a documented limit (file size, line length, columns).
    """
    file = str(path)
    data, used_encoding = _utf8_bytes(path, what, encoding)
    starts, ends, skip, data_idx = _line_spans(data, what, file)
    header_line = int(data_idx[0]) + 1
    sample = [data[starts[i] : ends[i]].decode("utf-8", errors="replace") for i in data_idx[:30]]
    if delimiter is None:
        delimiter = sniff_delimiter(sample, decimal) or ","
    header = _header(sample[0], delimiter, decimal, what, file, header_line)
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
    if delimiter == ",":
        numeric = sorted(
            {p for k, p in positions.items() if k not in (*string_columns, *iso_columns)}
        )
        _check_split_thousands(data, starts, ends, data_idx[1:], len(header), numeric, what, file)
    clean = _data_lines(data, starts, ends, skip)
    del data
    lines = data_idx[1:] + 1
    frame = None
    if decimal == "." and len(set(header)) == len(header) and all(h.strip() for h in header):
        frame = _read_with_arrow(
            clean,
            delimiter,
            header,
            {k: header[p] for k, p in positions.items()},
            string_keys=set(string_columns),
            iso_keys=set(iso_columns),
            rows=len(lines),
        )
    if frame is None:
        str_pos = {positions[k] for k in (*string_columns, *iso_columns) if k in positions}
        frame, lines = _read_with_pandas(
            clean, delimiter, decimal, positions, str_pos, lines, data_idx, what=what, file=file
        )
    return TextTable(
        file=file,
        frame=frame,
        lines=np.asarray(lines, dtype=np.int64),
        header=header,
        header_line=header_line,
        positions={k: p + 1 for k, p in positions.items()},
        delimiter=delimiter,
        encoding=used_encoding,
    )


def _utf8_bytes(path: str | Path, what: str, encoding: str | None) -> tuple[bytes, str]:
    """The file's bytes as UTF-8 without a byte-order mark and with ``\\n`` line ends, and the
    encoding it was read in; an empty file is an :class:`InputError`."""
    file = str(path)
    raw = read_input(path, what)
    text, used_encoding = decode(raw, file, encoding, what)
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
    return data, used_encoding


def _line_spans(
    data: bytes, what: str, file: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Start and (exclusive) end offset of every line, which lines are comments or blank, and
    the indices of the others (header first)."""
    buf = np.frombuffer(data, dtype=np.uint8)
    nl = np.flatnonzero(buf == 10)
    starts = np.concatenate(([0], nl + 1))
    starts = starts[starts < len(data)]
    last_end = len(data) - 1 if data.endswith(b"\n") else len(data)
    ends = np.concatenate((starts[1:] - 1, [last_end]))  # exclusive, without the newline
    _check_line_lengths(data, starts, ends, what, file)
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
    return starts, ends, skip, data_idx


def _header(
    header_text: str, delimiter: str, decimal: str, what: str, file: str, header_line: int
) -> tuple[str, ...]:
    """The header's column names, after checking the delimiter against the decimal mark and the
    column limit."""
    if decimal == delimiter:
        raise InputError(
            f"{what}: the decimal mark and the field delimiter are both {delimiter!r}",
            file=file,
        )
    if header_text.count(delimiter) >= MAX_COLUMNS:
        raise LimitError(
            f"{what}: the header has {header_text.count(delimiter) + 1:,} fields, over the "
            f"limit of {MAX_COLUMNS:,} columns",
            file=file,
            line=header_line,
        )
    try:
        return tuple(next(_csv.reader([header_text], delimiter=delimiter)))
    except (_csv.Error, StopIteration):
        return (header_text,)


def _data_lines(data: bytes, starts: np.ndarray, ends: np.ndarray, skip: np.ndarray) -> bytes:
    """The bytes the parsers see: only the data lines (header first)."""
    if not skip.any():
        return data
    keep = np.concatenate(([0], (~skip).astype(np.int8), [0]))
    edges = np.flatnonzero(np.diff(keep))
    pieces = []
    for a, b in zip(edges[::2], edges[1::2]):  # one piece per run of data lines
        pieces.append(data[starts[a] : ends[b - 1]] + b"\n")
    return b"".join(pieces)


def _read_with_pandas(
    clean: bytes,
    delimiter: str,
    decimal: str,
    positions: dict[str, int],
    str_pos: set[int],
    lines: np.ndarray,
    data_idx: np.ndarray,
    *,
    what: str,
    file: str,
) -> tuple[pd.DataFrame, np.ndarray]:
    """Parse ``clean`` with pandas' C parser: the wanted columns under our keys, and the file
    line of each row (recovered record by record when quoted fields span lines)."""
    import pandas as pd

    cols = sorted(set(positions.values()))
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
    out = pd.DataFrame(index=pd.RangeIndex(len(frame)))
    by_pos = {p: frame.iloc[:, i] for i, p in enumerate(cols)}
    for key, p in positions.items():
        out[key] = by_pos[p].to_numpy()
    return out, lines


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
        f"({excerpt(sample[1 + i].strip())}): numbers with a decimal comma in a comma-delimited "
        "file? Save it with ';' or tab between fields and set decimal = ','",
        file=file,
        line=int(line_numbers[1 + i]),
    )


def _check_line_lengths(
    data: bytes, starts: np.ndarray, ends: np.ndarray, what: str, file: str
) -> None:
    """Stop a file with a line longer than :data:`~lakebalance.io.files.MAX_LINE_CHARS` bytes."""
    if len(data) <= MAX_LINE_CHARS or starts.size == 0:
        return
    lengths = ends - starts
    i = int(np.argmax(lengths))
    if lengths[i] > MAX_LINE_CHARS:
        head = data[starts[i] : starts[i] + 120].decode("utf-8", "replace")
        raise LimitError(
            f"{what}: the line is {int(lengths[i]):,} bytes long, over the limit of "
            f"{MAX_LINE_CHARS:,} ({excerpt(head)}...)",
            file=file,
            line=i + 1,
        )


def _split_number_rows(
    data: bytes,
    starts: np.ndarray,
    ends: np.ndarray,
    rows: np.ndarray,
    n_header: int,
    columns: list[int],
) -> np.ndarray:
    """Rows (line indices) where an integer of one to three digits in one of ``columns`` is
    followed by a field of exactly three digits, in a row longer than the header: the halves
    of a number like ``1,234`` split by a comma delimiter. Lines holding a quote are judged by
    the csv module, the others by counting delimiters (vectorised)."""
    buf = np.frombuffer(data, dtype=np.uint8)
    dpos = np.flatnonzero(buf == ord(","))
    a, b = starts[rows], ends[rows]
    first = np.searchsorted(dpos, a)
    count = np.searchsorted(dpos, b) - first
    qpos = np.flatnonzero(buf == ord('"'))
    quoted = (np.searchsorted(qpos, b) - np.searchsorted(qpos, a)) > 0
    longer = (count + 1 > n_header) & ~quoted
    digit = (buf >= 48) & (buf <= 57)
    hits = np.zeros(len(rows), dtype=bool)
    for p in columns:
        cand = np.flatnonzero(longer & (count >= p + 1))
        if cand.size == 0:
            continue
        f = first[cand]
        s0 = a[cand] if p == 0 else dpos[f + p - 1] + 1
        e0 = dpos[f + p]
        s1 = e0 + 1
        nxt = f + p + 1
        e1 = np.where(
            nxt < first[cand] + count[cand], dpos[np.minimum(nxt, dpos.size - 1)], b[cand]
        )
        sign = np.isin(buf[np.minimum(s0, buf.size - 1)], (ord("+"), ord("-"))) & (e0 > s0)
        s0d = s0 + sign
        n0 = e0 - s0d
        ok = (n0 >= 1) & (n0 <= 3) & (e1 - s1 == 3)
        for k in range(3):  # every byte of both fields is a digit
            ok &= np.where(k < n0, digit[np.minimum(s0d + k, buf.size - 1)], True)
            ok &= digit[np.minimum(s1 + k, buf.size - 1)]
        hits[cand[ok]] = True
    for j in np.flatnonzero(quoted):  # few lines in most files: the csv module's rules
        try:
            fields = next(_csv.reader([data[a[j] : b[j]].decode("utf-8", "replace")]))
        except (_csv.Error, StopIteration):
            continue
        if len(fields) <= n_header:
            continue
        for p in columns:
            if p + 1 < len(fields) and _SHORT_INTEGER.fullmatch(fields[p]):
                if _THREE_DIGITS.fullmatch(fields[p + 1]):
                    hits[j] = True
    return rows[hits]


_SHORT_INTEGER = re.compile(r"[-+]?\d{1,3}")
_THREE_DIGITS = re.compile(r"\d{3}")


def _check_split_thousands(
    data: bytes,
    starts: np.ndarray,
    ends: np.ndarray,
    rows: np.ndarray,
    n_header: int,
    columns: list[int],
    what: str,
    file: str,
) -> None:
    """Stop a comma-delimited file where a number such as ``1,234`` is split by the delimiter
    (it would silently be read as 1, the ``234`` taken for an extra field)."""
    if not columns or rows.size == 0:
        return
    found = _split_number_rows(data, starts, ends, rows, n_header, columns)
    if found.size == 0:
        return
    i = int(found[0])
    text = data[starts[i] : ends[i]].decode("utf-8", "replace").strip()
    more = f" ({found.size - 1:,} more such rows)" if found.size > 1 else ""
    raise InputError(
        f"{what}: a number split by the comma delimiter? {excerpt(text)} has more fields than "
        f'the header{more}; quote numbers with a thousands separator ("1,234") and set '
        "thousands = ',', save the file with ';' between fields, or name the extra column in "
        "the header",
        file=file,
        line=i + 1,
    )
