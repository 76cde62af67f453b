"""Opening input files safely: regular files only, symbolic links checked, sizes bounded.

Every reader of lakebalance opens its file through :func:`open_input` or :func:`read_input`
(or checks it with :func:`check_input` when a library opens it by name), so that a named pipe, a
device or a folder is refused at once with its path, a symbolic-link loop is a plain error, and
a file larger than :data:`MAX_FILE_BYTES` is refused before it is read. The limits are generous
for real gauge exports and are stated in the README ("Safety").

A FIFO is never opened for reading in a way that blocks: the path is examined with ``stat``
first, and the file is opened with ``O_NONBLOCK`` and examined again (``fstat``), so that a file
swapped for a pipe between the two is still refused.
"""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path
from typing import BinaryIO

from ..errors import InputError, LimitError

__all__ = [
    "MAX_FILE_BYTES",
    "MAX_SITE_FILE_BYTES",
    "MAX_LINE_CHARS",
    "MAX_COLUMNS",
    "MAX_TOML_DEPTH",
    "MAX_XLSX_INFLATED_BYTES",
    "MAX_XLSX_MEMBERS",
    "check_input",
    "open_input",
    "read_input",
]

MAX_FILE_BYTES = 2 * 1024**3  # bytes (2 GiB): a century of 1-minute readings is about 3 GB less
MAX_SITE_FILE_BYTES = 10 * 1024**2  # bytes (10 MiB): a site file is a few kB
MAX_LINE_CHARS = 1024**2  # bytes per line of a delimited text file (1 MiB)
MAX_COLUMNS = 10_000  # fields in the header of a delimited text file
MAX_TOML_DEPTH = 32  # nested arrays and tables in the site file (its schema needs 3)
MAX_XLSX_INFLATED_BYTES = 1024**3  # bytes (1 GiB) of a workbook's parts once inflated
MAX_XLSX_MEMBERS = 10_000  # parts in a workbook's zip container

_KINDS = (
    (stat.S_ISFIFO, "a named pipe (FIFO)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
    (stat.S_ISDIR, "a folder"),
)


def _kind(mode: int) -> str | None:
    """What a non-regular file is, in words; None for a regular file."""
    if stat.S_ISREG(mode):
        return None
    for test, words in _KINDS:
        if test(mode):
            return words
    return "not a regular file"  # pragma: no cover - every POSIX type is listed above


def check_input(
    path: str | Path, what: str, *, limit: int = MAX_FILE_BYTES, error: type = InputError
) -> Path:
    """The resolved path of an input file, after checking that it can be read safely.

    Parameters
    ----------
    path : str or Path
        The file as given.
    what : str
        Names the file in messages (``"series.stage"``, ``"site file"``).
    limit : int
        Largest size accepted, bytes.
    error : type
        The :class:`~lakebalance.errors.LakebalanceError` subclass for a missing or unreadable
        file (the site-file loader uses ``ConfigError``).

    Returns
    -------
    Path
        The path with every symbolic link resolved.

    Raises
    ------
    LimitError
        Not a regular file (a FIFO, device, socket or folder), or larger than ``limit``.
    InputError (or ``error``)
        Missing, a symbolic-link loop, a link to nothing, or no permission.
    """
    p = Path(path).expanduser()
    try:
        st = os.stat(p)  # follows links; ELOOP on a loop
    except OSError as exc:
        raise _open_error(p, what, exc, error) from None
    kind = _kind(st.st_mode)
    if kind is not None:
        raise LimitError(f"{what}: {kind}, not a regular file; only regular files are read", file=p)
    if st.st_size > limit:
        raise LimitError(
            f"{what}: the file is {_size(st.st_size)}, over the limit of {_size(limit)}",
            file=p,
        )
    return Path(os.path.realpath(p))


def _open_error(p: Path, what: str, exc: OSError, error: type) -> Exception:
    if exc.errno == errno.ELOOP:
        return error(f"{what}: a loop of symbolic links; it leads to no file", file=p)
    if exc.errno == errno.ENOENT:
        if os.path.islink(p):
            return error(f"{what}: a symbolic link to a missing file ({os.readlink(p)})", file=p)
        return error(f"{what}: file not found", file=p)
    if exc.errno == errno.ENAMETOOLONG:
        return error(f"{what}: the file name is too long", file=str(p)[:200])
    return error(f"{what}: cannot read the file ({exc.strerror})", file=p)


def open_input(
    path: str | Path, what: str, *, limit: int = MAX_FILE_BYTES, error: type = InputError
) -> BinaryIO:
    """Open an input file for reading (binary), refusing anything but a regular file.

    The checks of :func:`check_input` run first; the file is then opened without blocking and
    checked again on the open descriptor.
    """
    p = check_input(path, what, limit=limit, error=error)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(p, flags)
    except OSError as exc:
        raise _open_error(p, what, exc, error) from None
    try:
        st = os.fstat(fd)
        kind = _kind(st.st_mode)
        if kind is not None:
            raise LimitError(
                f"{what}: {kind}, not a regular file; only regular files are read", file=p
            )
        if st.st_size > limit:
            raise LimitError(
                f"{what}: the file is {_size(st.st_size)}, over the limit of {_size(limit)}",
                file=p,
            )
        if hasattr(os, "set_blocking"):
            os.set_blocking(fd, True)
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def read_input(
    path: str | Path, what: str, *, limit: int = MAX_FILE_BYTES, error: type = InputError
) -> bytes:
    """The bytes of an input file (see :func:`open_input`); never more than ``limit``."""
    with open_input(path, what, limit=limit, error=error) as fh:
        size = os.fstat(fh.fileno()).st_size
        # read(n) reserves n bytes at once: ask for the file's size, not the limit (a worker's
        # address-space limit would refuse 2 GiB for a small file)
        chunks = [fh.read(size + 1)]
        total = len(chunks[0])
        while total > size and total <= limit:  # the file grew while it was read
            more = fh.read(1 << 20)
            if not more:
                break
            chunks.append(more)
            total += len(more)
    if total > limit:
        raise LimitError(f"{what}: the file is over the limit of {_size(limit)}", file=path)
    return chunks[0] if len(chunks) == 1 else b"".join(chunks)


def _size(n: int) -> str:
    for unit, factor in (("GiB", 1024**3), ("MiB", 1024**2), ("KiB", 1024)):
        if n >= factor:
            return f"{n / factor:,.1f} {unit}"
    return f"{n:,} bytes"
