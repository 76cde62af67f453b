"""Options of the annual report (``[report]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass

from ..options import Options, setting

__all__ = ["ReportOptions"]


@dataclass(frozen=True)
class ReportOptions(Options):
    """``[report]``: annual report settings."""

    year: int | None = setting(
        None, unit="water year", low=1800, high=2300
    )  # default: last complete
    title: str | None = None
