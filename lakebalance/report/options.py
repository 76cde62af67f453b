"""Options of the annual report (``[report]`` in the site file)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from ..options import Options, setting

__all__ = ["ReportOptions", "UNIT_SYSTEMS"]

#: The display unit systems of a report (see :mod:`lakebalance.display`).
UNIT_SYSTEMS = ("SI", "US")


def _one_of_systems(value: str) -> str | None:
    return None if value in UNIT_SYSTEMS else f"be one of {', '.join(map(repr, UNIT_SYSTEMS))}"


@dataclass(frozen=True)
class ReportOptions(Options):
    """``[report]``: annual report settings.

    ``units`` chooses the display units of everything a person reads (HTML, PDF, figures):
    ``"SI"`` (m, thousand m³, m³/s, mm, km²) or ``"US"`` customary (ft, acre-ft, cfs, in, acres).
    CSV and JSON stay in SI at full precision whatever it says. ``archive`` is a folder (relative
    to the site file) into which each report run files its results (see
    :mod:`lakebalance.report.archive`); ``lakebalance report --file-to DIR`` gives it on the
    command line.
    """

    year: int | None = setting(
        None, unit="water year", low=1800, high=2300
    )  # default: last complete
    title: str | None = None
    units: str = setting("SI", rule=_one_of_systems)
    archive: Path | None = None
