"""The Python API: from a site file to the objects of each step.

Each function takes a :class:`~lakebalance.config.Site` (from :func:`load_site`) and returns a frozen
result object. The command line calls these and nothing else.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from .config import Site
from .config import load_site as _load_site

if TYPE_CHECKING:  # pragma: no cover
    from .records import Records

__all__ = ["load_site", "load_records"]


def load_site(path: str | Path) -> Site:
    """Read and validate a site file (see ``docs/site-file.md``)."""
    return _load_site(path)


def load_records(site: Site, *, progress: bool = False) -> Records:
    """Read, convert to SI, aggregate to days and check every series of ``site``.

    Parameters
    ----------
    site : Site
        The validated site file.
    progress : bool
        Show a progress bar on stderr while reading.
    """
    from .io import read_records

    return read_records(site, progress=progress)


# ---- domain functions below: append one block per domain -------------------------------------
