"""Spot gaugings (date, stage, discharge[, weight]) of the outlet, read from CSV or Excel.

The table is read strictly by :func:`lakebalance.io.tables.read_table` (errors name file, line and
column) and converted to SI through :mod:`lakebalance.units`. Rows with a missing cell or a
negative discharge are kept and marked: the fit excludes and reports them, so nothing is dropped
silently.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConfigError
from ..units import to_si
from .tables import read_table

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from ..config import OutletOptions

__all__ = ["Gaugings", "read_gaugings"]


@dataclass(frozen=True)
class Gaugings:
    """Spot gaugings in SI.

    Attributes
    ----------
    file : Path
        Where they were read from.
    date : ndarray of datetime64
        Date (and time) of each gauging (NaT when absent).
    stage_m : ndarray
        Stage on the gauge datum, m.
    discharge_m3s : ndarray
        Gauged discharge, m³/s.
    weight : ndarray or None
        Relative weights (-), when a weights column is given.
    line : ndarray of int
        1-based file line (spreadsheet row) of each gauging.
    """

    file: Path
    date: np.ndarray
    stage_m: np.ndarray
    discharge_m3s: np.ndarray
    weight: np.ndarray | None
    line: np.ndarray

    def __len__(self) -> int:
        return int(self.stage_m.size)

    def frame(self) -> pd.DataFrame:
        """The gaugings as a table (columns date, stage_m, discharge_m3s[, weight], line)."""
        import pandas as pd

        data = {
            "date": self.date,
            "stage_m": self.stage_m,
            "discharge_m3s": self.discharge_m3s,
        }
        if self.weight is not None:
            data["weight"] = self.weight
        data["line"] = self.line
        return pd.DataFrame(data)


def read_gaugings(options: OutletOptions) -> Gaugings:
    """Read the gaugings an ``[outlet]`` section points to.

    Parameters
    ----------
    options : OutletOptions
        ``gaugings`` (file), column names ``date``/``stage``/``discharge``/``weights``, their
        units ``stage_units`` (length) and ``discharge_units`` (flow), CSV layout.

    Raises
    ------
    ConfigError
        When no gaugings file is declared.
    InputError
        From :func:`~lakebalance.io.tables.read_table` (missing column, text in a number...).
    UnitError
        When a declared unit is unknown or of the wrong kind.
    """
    if options.gaugings is None:
        raise ConfigError("[outlet] needs 'gaugings' (a CSV/XLSX of spot gaugings) to fit a rating")
    columns = {"stage": options.stage, "discharge": options.discharge}
    if options.date:
        columns["date"] = options.date
    if options.weights:
        columns["weight"] = options.weights
    table = read_table(
        options.gaugings,
        columns,
        what="gaugings",
        sheet=options.sheet,
        delimiter=options.delimiter,
        decimal=options.decimal,
        encoding=options.encoding,
        dayfirst=options.dayfirst,
        date_columns=("date",) if options.date else (),
    )
    flow = to_si(table["discharge"].to_numpy(), options.discharge_units, "flow", "gaugings")
    return Gaugings(
        file=Path(options.gaugings),
        date=(
            table["date"].to_numpy()
            if "date" in table
            else np.full(len(table), np.datetime64("NaT"), dtype="datetime64[ns]")
        ),
        stage_m=to_si(table["stage"].to_numpy(), options.stage_units, "length", "gauging stage"),
        discharge_m3s=flow,
        weight=table["weight"].to_numpy() if "weight" in table else None,
        line=table["_line"].to_numpy(),
    )
