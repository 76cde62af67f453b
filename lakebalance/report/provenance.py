"""Provenance of a run: what was read, with which tool, when and with which seeds.

Written into every report so that next year's run can be reproduced and compared.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import platform
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    from ..config import Site

__all__ = ["Provenance", "sha256_file", "input_files", "provenance"]


def sha256_file(path: str | Path, chunk: int = 1 << 20) -> str:
    """SHA-256 of a file's bytes, hex."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while block := fh.read(chunk):
            h.update(block)
    return h.hexdigest()


def input_files(site: Site) -> list[tuple[str, Path]]:
    """Every file a site reads, as (what, path): series, storage survey, gaugings."""
    files: list[tuple[str, Path]] = [(f"series {s.key}", s.file) for s in site.series]
    if site.storage is not None and site.storage.file is not None:
        files.append(("storage", site.storage.file))
    if site.outlet is not None and site.outlet.gaugings is not None:
        files.append(("gaugings", site.outlet.gaugings))
    return files


@dataclass(frozen=True)
class Provenance:
    """Tool version, run time (UTC), seeds and SHA-256 of the site file and each input."""

    tool_version: str
    run_utc: str
    site_file: str
    site_sha256: str
    inputs: tuple[tuple[str, str, str], ...]  # (what, path, sha256)
    relative: tuple[str, ...] = ()  # each input's path relative to the site file's folder
    seeds: dict[str, int] = field(default_factory=dict)
    python: str = ""
    libraries: dict[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict:
        """Plain dict for JSON."""
        return {
            "tool_version": self.tool_version,
            "run_utc": self.run_utc,
            "site_file": self.site_file,
            "site_sha256": self.site_sha256,
            "site_file_name": Path(self.site_file).name,
            "inputs": [
                {"what": w, "path": p, "relative_path": r, "sha256": h}
                for (w, p, h), r in zip(self.inputs, self._relative(), strict=True)
            ],
            "seeds": dict(self.seeds),
            "python": self.python,
            "libraries": dict(self.libraries),
        }

    def _relative(self) -> tuple[str, ...]:
        if len(self.relative) == len(self.inputs):
            return self.relative
        return tuple(relative_to_site(p, self.site_file) for _, p, _ in self.inputs)


def relative_to_site(path: str | Path, site_file: str | Path) -> str:
    """``path`` relative to the folder of ``site_file`` (with ``..`` where it lies outside), as
    POSIX text, so that a report names its inputs without the local folders above the site."""
    import os

    base = Path(site_file).resolve().parent
    try:
        return Path(os.path.relpath(Path(path).resolve(), base)).as_posix()
    except ValueError:  # another drive (Windows)
        return Path(path).name


def provenance(site: Site, seeds: dict[str, int], now: _dt.datetime | None = None) -> Provenance:
    """Provenance of a run on ``site`` with the given seeds (``now`` defaults to the current UTC time)."""
    from importlib import metadata

    from .. import __version__

    now = now or _dt.datetime.now(_dt.UTC)
    inputs = []
    for what, path in input_files(site):
        digest = sha256_file(path) if Path(path).is_file() else "missing"
        inputs.append((what, str(path), digest))
    libs = {}
    names = ("numpy", "pandas", "scipy", "statsmodels", "pint", "matplotlib", "geopandas",
             "jinja2", "weasyprint")  # fmt: skip
    for name in names:
        try:
            libs[name] = metadata.version(name)
        except metadata.PackageNotFoundError:  # an optional one (weasyprint) not installed
            pass
    return Provenance(
        tool_version=__version__,
        run_utc=now.replace(microsecond=0).isoformat(),
        site_file=str(site.path),
        site_sha256=sha256_file(site.path),
        inputs=tuple(inputs),
        seeds=dict(seeds),
        python=platform.python_version(),
        libraries=libs,
    )
