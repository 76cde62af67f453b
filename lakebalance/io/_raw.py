"""The cells of one gauge series as a reader found them, before any parsing or checking."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

__all__ = ["RawSeries"]


@dataclass(frozen=True)
class RawSeries:
    """Cells of one series: dates (and times), values, and the file line of each reading.

    ``units`` is the unit the file itself declares (WaterML 2.0 ``uom``), None when the format
    carries none. ``value_column`` and ``date_column`` are 1-based file columns for messages
    (None for XML). ``decimal`` is the decimal mark of text cells.
    """

    file: str
    dates: pd.Series
    values: pd.Series
    lines: np.ndarray
    times: pd.Series | None = None
    units: str | None = None
    value_column: int | None = None
    date_column: int | None = None
    decimal: str = "."
