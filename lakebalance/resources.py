"""The memory a run may use, and the check that keeps an array within it.

Settings such as ``draws``, ``members``, ``rating_variants`` or ``bootstrap`` size arrays whose
bytes also depend on the record (days, gaugings). Each computation estimates its arrays before
allocating them and calls :func:`check_memory`, which raises a one-line
:class:`~lakebalance.errors.MemoryLimitError` giving the estimate and the limit instead of a
``MemoryError`` traceback after minutes of swapping.

The limit is :data:`MEMORY_SHARE` of the memory available now: the smallest of the system's
available memory (``MemAvailable``), the free part of the process's cgroup limit and of its
address-space limit (``RLIMIT_AS``, which the batch sets per site).
"""

from __future__ import annotations

import os

from .errors import MemoryLimitError

__all__ = [
    "MEMORY_SHARE",
    "available_memory_bytes",
    "memory_limit_bytes",
    "check_memory",
    "size_text",
]

MEMORY_SHARE = 0.5  # share of the available memory one step's arrays may take (-)
_FALLBACK_BYTES = 4 * 1024**3  # bytes, when the platform says nothing


def _meminfo_available() -> int | None:
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None


def _cgroup_free() -> int | None:
    try:
        with open("/sys/fs/cgroup/memory.max", encoding="ascii") as fh:
            limit = fh.read().strip()
        if limit == "max":
            return None
        with open("/sys/fs/cgroup/memory.current", encoding="ascii") as fh:
            used = int(fh.read().strip())
        return max(0, int(limit) - used)
    except (OSError, ValueError):
        return None


def address_space_bytes() -> int | None:
    """The process's virtual memory size now (bytes), where the platform tells."""
    try:
        with open("/proc/self/statm", encoding="ascii") as fh:
            return int(fh.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError, AttributeError):
        return None


def _rlimit_free() -> int | None:
    try:
        import resource
    except ImportError:  # pragma: no cover - not on Windows
        return None
    soft, _ = resource.getrlimit(resource.RLIMIT_AS)
    if soft == resource.RLIM_INFINITY:
        return None
    used = address_space_bytes()
    return max(0, soft - (used or 0))


def available_memory_bytes() -> int:
    """Memory available to this process now (bytes): the smallest of what the system, the
    cgroup and the address-space limit leave."""
    found = [v for v in (_meminfo_available(), _cgroup_free(), _rlimit_free()) if v is not None]
    return min(found) if found else _FALLBACK_BYTES


def memory_limit_bytes() -> int:
    """Bytes one step's arrays may take: :data:`MEMORY_SHARE` of the available memory."""
    return int(MEMORY_SHARE * available_memory_bytes())


def size_text(n: float) -> str:
    """Bytes in words (``"3.7 GiB"``)."""
    for unit, factor in (("TiB", 1024**4), ("GiB", 1024**3), ("MiB", 1024**2), ("KiB", 1024)):
        if n >= factor:
            return f"{n / factor:,.1f} {unit}"
    return f"{int(n):,} bytes"


def check_memory(estimate_bytes: float, *, option: str, value: int, what: str) -> None:
    """Raise :class:`MemoryLimitError` when ``estimate_bytes`` exceed :func:`memory_limit_bytes`.

    Parameters
    ----------
    estimate_bytes : float
        The arrays' size, estimated before allocating them (bytes).
    option : str
        The setting that sizes them (named in the message).
    value : int
        Its value.
    what : str
        What the arrays are for (``"the balance's Monte Carlo draws over 366 days"``).
    """
    limit = memory_limit_bytes()
    if estimate_bytes > limit:
        raise MemoryLimitError(
            option,
            f"{option} = {value:,} needs about {size_text(estimate_bytes)} for {what}; the limit "
            f"here is {size_text(limit)} ({MEMORY_SHARE:.0%} of the memory available now): "
            f"lower '{option}'",
        )
