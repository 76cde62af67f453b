"""Writing outputs safely: every file is written to a temporary name in its folder, then renamed.

A crash never leaves a half-written table, figure or report behind, and inputs are never touched.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = [
    "atomic_path",
    "write_text",
    "write_bytes",
    "write_csv",
    "write_parquet",
    "write_xlsx",
    "save_figure",
]


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


def write_csv(path: str | Path, frame: pd.DataFrame, *, index: bool = True) -> Path:
    """Write a table as UTF-8 CSV atomically (dates ISO, NaN as empty)."""
    return _write_with(path, lambda p: frame.to_csv(p, index=index, date_format="%Y-%m-%d"))


def write_parquet(path: str | Path, frame: pd.DataFrame) -> Path:
    """Write a table as Parquet (pyarrow) atomically."""
    return _write_with(path, lambda p: frame.to_parquet(p, engine="pyarrow"))


def write_xlsx(path: str | Path, sheets: dict[str, pd.DataFrame]) -> Path:
    """Write several tables as the sheets of one .xlsx workbook atomically."""
    import pandas as pd

    def _writer(p: Path) -> None:
        with pd.ExcelWriter(p, engine="openpyxl") as xl:
            for name, frame in sheets.items():
                frame.to_excel(xl, sheet_name=name[:31])

    return _write_with(path, _writer)


def save_figure(path: str | Path, figure: Any, **kwargs: Any) -> Path:
    """Save a matplotlib figure atomically (format from the suffix of ``path``)."""
    fmt = Path(path).suffix.lstrip(".") or "png"
    kwargs.setdefault("dpi", 120)
    kwargs.setdefault("bbox_inches", "tight")
    return _write_with(path, lambda p: figure.savefig(p, format=fmt, **kwargs))
