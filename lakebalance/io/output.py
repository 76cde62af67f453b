"""Writing outputs safely: contained in ``--out``, never over an input, never half-written.

One mechanism for every command that writes files (the report, the batch and every command with
``--out``): an :class:`OutputFolder`.

- Every path it hands out is resolved and must lie inside the folder; names are plain file names
  (no ``..``, no absolute paths), and names made from user text go through :func:`slug`.
- It refuses, with one line, a folder that holds any input of the run (site file, series,
  survey, gaugings, a compared survey, the register) and any path that is a file the run read.
- Each file is written to a temporary name in its folder, then renamed (:func:`atomic_path`).
- A folder opened with ``replace=True`` (a report, a batch) is written whole into a temporary
  sibling and swapped in when complete (:meth:`OutputFolder.commit`), so a run killed half way
  leaves the earlier folder as it was, never a folder that mixes two runs. Only an empty folder
  or one that lakebalance wrote is replaced.

Tables are formula-safe: a text cell (or column name) of a CSV file that begins with ``=``,
``+``, ``-``, ``@``, a tab or a carriage return gets a leading apostrophe, the common practice
against spreadsheet formula injection (OWASP, "CSV Injection"); in an XLSX workbook such a cell
is written as a string cell with its text unchanged. Numbers stay numbers.
"""

from __future__ import annotations

import contextlib
import json
import os
import re
import shutil
import tempfile
import unicodedata
from collections.abc import Callable, Iterable, Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import OutputError

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from ..config import Site

__all__ = [
    "OutputFolder",
    "MARKER",
    "site_inputs",
    "slug",
    "unique_slugs",
    "neutralise",
    "formula_safe",
    "atomic_path",
    "write_text",
    "write_bytes",
    "write_csv",
    "write_parquet",
    "write_xlsx",
    "save_figure",
]

#: The file that marks a folder written by lakebalance (so that it may be replaced as a whole).
MARKER = ".lakebalance-output"
SLUG_CHARS = 60  # longest slug, characters
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")
_RESERVED = {
    "con",
    "prn",
    "aux",
    "nul",
    *(f"com{i}" for i in range(10)),
    *(f"lpt{i}" for i in range(10)),
}


# --------------------------------------------------------------------------------------------
# Names
# --------------------------------------------------------------------------------------------
def slug(text: str, fallback: str = "site") -> str:
    """A safe file or folder name made from user text.

    Letters are reduced to ASCII (accents dropped), lower-cased; every run of other characters
    (``/``, ``\\``, ``.``, ``:``, spaces, ...) becomes one ``-``; at most
    :data:`SLUG_CHARS` characters; names that Windows reserves get a trailing ``-``. So
    ``../../etc`` becomes ``etc`` and ``javascript:alert(1)`` becomes ``javascript-alert-1``:
    never a path, never a URL scheme.

    >>> slug("Lac d'Été / North basin")
    'lac-d-ete-north-basin'
    """
    ascii_text = unicodedata.normalize("NFKD", str(text)).encode("ascii", "ignore").decode()
    out = re.sub(r"[^a-z0-9_]+", "-", ascii_text.lower()).strip("-_")
    out = out[:SLUG_CHARS].rstrip("-_")
    if not out:
        out = fallback
    if out in _RESERVED:
        out += "-"
    return out


def unique_slugs(names: Iterable[str], fallback: str = "site") -> list[tuple[str, str | None]]:
    """Slugs of ``names``, unique within the run: ``(slug, note)`` per name.

    A slug already taken by an earlier name (ignoring case, as some file systems do) gets the
    suffix ``-2``, ``-3``, ...; its note says so (None when the slug is the name's own).
    """
    taken: dict[str, str] = {}
    out: list[tuple[str, str | None]] = []
    for name in names:
        base = slug(name, fallback)
        candidate, n = base, 1
        while candidate in taken:
            n += 1
            candidate = f"{base}-{n}"
        note = None
        if candidate != base:
            note = f"folder '{candidate}': '{base}' was taken by {taken[base]!r} in this run"
        taken[candidate] = str(name)
        out.append((candidate, note))
    return out


def _check_name(name: str) -> str:
    parts = Path(name).parts
    if (
        not name
        or Path(name).is_absolute()
        or any(p in ("..", ".", "") for p in parts)
        or "\\" in name
        or "\x00" in name
    ):
        raise OutputError(f"not a plain output name: {name!r}")
    return name


# --------------------------------------------------------------------------------------------
# Inputs
# --------------------------------------------------------------------------------------------
def site_inputs(site: Site) -> list[Path]:
    """Every file a site's run reads: the site file, each series, the survey (and the one it is
    compared with), the gaugings."""
    files = [site.path, *(s.file for s in site.series)]
    if site.storage is not None:
        files += [p for p in (site.storage.file, site.storage.compare) if p is not None]
    if site.outlet is not None and site.outlet.gaugings is not None:
        files.append(site.outlet.gaugings)
    return [Path(f) for f in files]


def _real(path: str | Path) -> Path:
    return Path(os.path.realpath(Path(path).expanduser()))


def _inside(path: Path, folder: Path) -> bool:
    return path == folder or folder in path.parents


# --------------------------------------------------------------------------------------------
# The output folder
# --------------------------------------------------------------------------------------------
class OutputFolder:
    """The folder that receives one run's outputs (see the module notes).

    Parameters
    ----------
    root : str or Path
        The folder (``--out``); created when missing.
    inputs : iterable of paths
        Every file the run reads. The folder must not hold any of them.
    replace : bool
        Write into a temporary sibling and swap it in on :meth:`commit` (a report, a batch).
    kind : str
        What the folder holds, written into its marker (``"report"``, ``"batch"``, ...).

    Raises
    ------
    OutputError
        The folder holds an input, is a file, or (with ``replace``) is a folder that lakebalance
        did not write and that is not empty.

    Examples
    --------
    >>> with OutputFolder("out", inputs=[site.path], replace=True) as out:  # doctest: +SKIP
    ...     out.write_text("report.html", html)
    """

    def __init__(
        self,
        root: str | Path,
        *,
        inputs: Iterable[str | Path] = (),
        replace: bool = False,
        kind: str = "outputs",
    ) -> None:
        self.root = _real(root)
        self.replace = replace
        self.kind = kind
        self.inputs = tuple(dict.fromkeys(_real(p) for p in inputs))
        if self.root.exists() and not self.root.is_dir():
            raise OutputError(f"--out {self.root} is a file, not a folder")
        held = [p for p in self.inputs if _inside(p, self.root)]
        if held:
            more = f" and {len(held) - 1} more" if len(held) > 1 else ""
            raise OutputError(
                f"--out {self.root} holds an input of this run ({held[0]}{more}); outputs never "
                "go beside the inputs: choose another folder"
            )
        self._tmp: Path | None = None
        if replace:
            if self.root.is_dir() and not _is_ours(self.root):
                raise OutputError(
                    f"--out {self.root} is a folder that lakebalance did not write and it is not "
                    "empty; a report replaces its folder as a whole, so choose a new or empty "
                    "folder"
                )
            self.root.parent.mkdir(parents=True, exist_ok=True)
            _remove_stale_siblings(self.root)
            self._tmp = Path(
                tempfile.mkdtemp(
                    prefix=f".{self.root.name}.{os.getpid()}.",
                    suffix=".partial",
                    dir=self.root.parent,
                )
            )
            os.chmod(self._tmp, 0o777 & ~_umask())
            self.dir = self._tmp
        else:
            self.root.mkdir(parents=True, exist_ok=True)
            self.dir = self.root
        self.written: list[Path] = []

    def __repr__(self) -> str:
        return f"OutputFolder({str(self.root)!r}, replace={self.replace})"

    # paths ------------------------------------------------------------------------------
    def path(self, name: str) -> Path:
        """The path to write ``name`` at (inside the folder; parents created).

        Raises
        ------
        OutputError
            ``name`` is not a plain relative name, leads outside the folder (through ``..`` or
            a symbolic link), or is a file this run reads.
        """
        _check_name(name)
        target = self.dir / name
        target.parent.mkdir(parents=True, exist_ok=True)
        real = _real(target)
        if not _inside(real, _real(self.dir)) or real == _real(self.dir):
            raise OutputError(f"the output {name!r} would be written outside --out {self.root}")
        final = self.root / name
        if real in self.inputs or _real(final) in self.inputs:
            raise OutputError(
                f"the output {final} is an input of this run; it is never overwritten"
            )
        return target

    def final(self, name: str) -> Path:
        """Where ``name`` is once the folder is complete (``root / name``)."""
        return self.root / _check_name(name)

    def __truediv__(self, name: str) -> Path:
        return self.path(name)

    def folder(self, name: str, *, replace: bool = True, kind: str = "report") -> OutputFolder:
        """A sub-folder ``name`` (a plain name, e.g. a :func:`slug`) as its own output folder."""
        self.path(f"{_check_name(name)}/{MARKER}")  # containment of the sub-folder
        return OutputFolder(self.dir / name, inputs=self.inputs, replace=replace, kind=kind)

    # writing ----------------------------------------------------------------------------
    def _write(self, name: str, writer: Callable[[Path, Any], Path], *args: Any, **kw: Any) -> Path:
        writer(self.path(name), *args, **kw)
        final = self.final(name)
        self.written.append(final)
        return final

    def write_text(self, name: str, text: str) -> Path:
        """Write UTF-8 text; returns the final path."""
        return self._write(name, write_text, text)

    def write_bytes(self, name: str, data: bytes) -> Path:
        """Write bytes; returns the final path."""
        return self._write(name, write_bytes, data)

    def write_csv(self, name: str, frame: pd.DataFrame, *, index: bool = True) -> Path:
        """Write a formula-safe CSV table; returns the final path."""
        return self._write(name, write_csv, frame, index=index)

    def write_parquet(self, name: str, frame: pd.DataFrame) -> Path:
        """Write a Parquet table; returns the final path."""
        return self._write(name, write_parquet, frame)

    def write_xlsx(self, name: str, sheets: dict[str, pd.DataFrame]) -> Path:
        """Write a formula-safe workbook; returns the final path."""
        return self._write(name, write_xlsx, sheets)

    def save_figure(self, name: str, figure: Any, **kwargs: Any) -> Path:
        """Save a matplotlib figure; returns the final path."""
        return self._write(name, save_figure, figure, **kwargs)

    # completing -------------------------------------------------------------------------
    def commit(self) -> Path:
        """Complete the folder: with ``replace``, swap the temporary sibling in for the earlier
        folder (which is then removed). Returns the folder."""
        if self._tmp is None:
            return self.root
        marker = {"tool": "lakebalance", "kind": self.kind}
        write_text(self._tmp / MARKER, json.dumps(marker) + "\n")
        tmp, self._tmp = self._tmp, None
        self.dir = self.root
        _swap_in(tmp, self.root)
        return self.root

    def abandon(self) -> None:
        """Remove the temporary sibling of an incomplete ``replace`` folder."""
        if self._tmp is not None:
            shutil.rmtree(self._tmp, ignore_errors=True)
            self._tmp = None
            self.dir = self.root

    def __enter__(self) -> OutputFolder:
        return self

    def __exit__(self, exc_type: Any, *exc: Any) -> None:
        if exc_type is None:
            self.commit()
        else:
            self.abandon()


def _process_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # e.g. another user's process
        return True
    return True


def _remove_stale_siblings(root: Path) -> list[Path]:
    """Remove the temporary siblings (``.NAME.PID.*.partial`` or ``.old``) that a killed run of
    this folder left behind, when the process that made them is gone; returns those removed.

    A sibling of a run still alive (this one or another) is kept.
    """
    removed = []
    pattern = re.compile(rf"^\.{re.escape(root.name)}\.(\d+)\.[^/]*\.(partial|old)$")
    with contextlib.suppress(OSError):
        for entry in os.scandir(root.parent):
            m = pattern.match(entry.name)
            if m and entry.is_dir(follow_symlinks=False) and not _process_alive(int(m.group(1))):
                shutil.rmtree(entry.path, ignore_errors=True)
                removed.append(Path(entry.path))
    return removed


def _is_ours(folder: Path) -> bool:
    """Whether a folder may be replaced: empty, marked, or an earlier lakebalance report or
    batch (from before the marker)."""
    try:
        entries = [e.name for e in os.scandir(folder)]
    except OSError:
        return False
    if not entries or MARKER in entries:
        return True
    with contextlib.suppress(OSError, ValueError, UnicodeDecodeError):
        if "summary.json" in entries and "report.html" in entries:
            head = (folder / "summary.json").read_text(encoding="utf-8")[:200]
            return '"tool": "lakebalance"' in head
        if "index.csv" in entries and "index.html" in entries:
            with open(folder / "index.csv", encoding="utf-8") as fh:
                return fh.readline().startswith("site,site_file,status")
    return False


def _swap_in(new: Path, target: Path) -> None:
    """Put the complete folder ``new`` at ``target``; the earlier ``target`` (if any) is removed.

    On Linux the two folders are exchanged in one step (``renameat2`` with
    ``RENAME_EXCHANGE``); elsewhere the earlier folder is renamed aside first.
    """
    if not target.exists():
        os.rename(new, target)
        return
    if _exchange(new, target):
        shutil.rmtree(new, ignore_errors=True)  # now holds the earlier folder
        return
    old = Path(
        tempfile.mkdtemp(prefix=f".{target.name}.{os.getpid()}.", suffix=".old", dir=target.parent)
    )
    os.rmdir(old)
    os.rename(target, old)
    os.rename(new, target)
    shutil.rmtree(old, ignore_errors=True)


def _exchange(a: Path, b: Path) -> bool:
    """Exchange two paths atomically (Linux ``renameat2``); False where that is not possible."""
    import sys

    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        renameat2 = libc.renameat2
    except (OSError, AttributeError):
        return False
    at_fdcwd, rename_exchange = -100, 2
    renameat2.argtypes = [
        ctypes.c_int,
        ctypes.c_char_p,
        ctypes.c_int,
        ctypes.c_char_p,
        ctypes.c_uint,
    ]
    done = renameat2(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange)
    return done == 0


# --------------------------------------------------------------------------------------------
# Formula-safe tables
# --------------------------------------------------------------------------------------------
def neutralise(value: Any) -> Any:
    """A text cell that a spreadsheet would run as a formula, with a leading apostrophe.

    Text beginning with ``=``, ``+``, ``-``, ``@``, tab or carriage return is neutralised, unless
    it is a plain number (``-1.5``); anything that is not a string is returned as it is.
    """
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        if not _PLAIN_NUMBER.fullmatch(value):
            return "'" + value
    return value


def formula_safe(frame: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``frame`` whose text cells, column names and index labels are neutralised
    (:func:`neutralise`); numeric columns are untouched."""
    import pandas as pd

    out = frame.copy()
    for i in range(out.shape[1]):
        col = out.iloc[:, i]
        if pd.api.types.is_object_dtype(col) or pd.api.types.is_string_dtype(col):
            out.isetitem(i, col.map(neutralise, na_action="ignore"))
    out.columns = _safe_index(out.columns)
    out.index = _safe_index(out.index)
    return out


def _safe_index(index: pd.Index) -> pd.Index:
    import pandas as pd

    if isinstance(index, pd.MultiIndex):
        return index.set_levels([_safe_index(level) for level in index.levels])
    if pd.api.types.is_object_dtype(index) or pd.api.types.is_string_dtype(index):
        return index.map(neutralise)
    return index


# --------------------------------------------------------------------------------------------
# Atomic writers
# --------------------------------------------------------------------------------------------
@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it is renamed to ``path``."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    tmp_path = Path(tmp)
    os.chmod(tmp_path, 0o666 & ~_umask())  # mkstemp makes 0600; outputs get the usual mode
    try:
        yield tmp_path
        os.replace(tmp_path, path)
    finally:
        if tmp_path.exists():
            tmp_path.unlink()


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _write_with(path: str | Path, writer: Callable[[Path], Any]) -> Path:
    with atomic_path(path) as tmp:
        writer(tmp)
    return Path(path)


def write_text(path: str | Path, text: str) -> Path:
    """Write UTF-8 text atomically."""
    return _write_with(path, lambda p: p.write_text(text, encoding="utf-8"))


def write_bytes(path: str | Path, data: bytes) -> Path:
    """Write bytes atomically."""
    return _write_with(path, lambda p: p.write_bytes(data))


def _line_breaks(value: Any) -> Any:
    if isinstance(value, str) and "\r" in value:
        return value.replace("\r\n", "\n").replace("\r", "\n")
    return value


def write_csv(path: str | Path, frame: pd.DataFrame, *, index: bool = True) -> Path:
    """Write a table as UTF-8 CSV atomically (dates ISO, NaN as empty), formula-safe.

    A carriage return inside a text cell becomes a line feed, which the writer quotes (a bare
    carriage return is not quoted and would split the row for some readers).
    """
    import pandas as pd

    safe = formula_safe(frame)
    for i in range(safe.shape[1]):
        col = safe.iloc[:, i]
        if pd.api.types.is_object_dtype(col) or pd.api.types.is_string_dtype(col):
            safe.isetitem(i, col.map(_line_breaks, na_action="ignore"))
    return _write_with(path, lambda p: safe.to_csv(p, index=index, date_format="%Y-%m-%d"))


def write_parquet(path: str | Path, frame: pd.DataFrame) -> Path:
    """Write a table as Parquet (pyarrow) atomically."""
    return _write_with(path, lambda p: frame.to_parquet(p, engine="pyarrow"))


def sheet_names(names: Iterable[str]) -> list[str]:
    """Valid, unique worksheet names (at most 31 characters, none of ``[]:*?/\\``)."""
    out: list[str] = []
    seen: set[str] = set()
    for name in names:
        base = re.sub(r"[\[\]:*?/\\]+", "_", str(name)).strip("'") or "sheet"
        base = base[:31]
        candidate, n = base, 1
        while candidate.lower() in seen or candidate.lower() == "history":
            n += 1
            candidate = f"{base[: 31 - len(str(n)) - 1]}-{n}"
        seen.add(candidate.lower())
        out.append(candidate)
    return out


def write_xlsx(path: str | Path, sheets: dict[str, pd.DataFrame]) -> Path:
    """Write several tables as the sheets of one .xlsx workbook atomically.

    Text that a spreadsheet would run as a formula is written as a string cell, unchanged
    (marked with Excel's quote prefix, so it stays text when edited); numbers stay numbers.
    """
    import pandas as pd

    def _writer(p: Path) -> None:
        with pd.ExcelWriter(p, engine="openpyxl") as xl:
            for name, (_, frame) in zip(sheet_names(sheets), sheets.items(), strict=True):
                frame.to_excel(xl, sheet_name=name)
                _string_cells(xl.sheets[name])

    return _write_with(path, _writer)


def _string_cells(ws: Any) -> None:
    """Make every text cell of an openpyxl worksheet that looks like a formula a string cell."""
    for row in ws.iter_rows():
        for cell in row:
            value = cell.value
            if isinstance(value, str) and value.startswith(_FORMULA_START):
                if cell.data_type == "f" or not _PLAIN_NUMBER.fullmatch(value):
                    cell.data_type = "s"
                    cell.quotePrefix = True


def save_figure(path: str | Path, figure: Any, **kwargs: Any) -> Path:
    """Save a matplotlib figure atomically (format from the suffix of ``path``)."""
    fmt = Path(path).suffix.lstrip(".") or "png"
    kwargs.setdefault("dpi", 120)
    kwargs.setdefault("bbox_inches", "tight")
    return _write_with(path, lambda p: figure.savefig(p, format=fmt, **kwargs))
