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

from ..errors import ConfigError, InputError
from ..units import to_si
from .tables import read_table

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

    from ..config import OutletOptions

__all__ = ["MIN_GAUGINGS", "Gaugings", "check_gaugings", "read_gaugings"]

#: Usable gaugings below which no rating can be fitted with an uncertainty: a law has at least
#: two free parameters (coefficient and datum) and needs one more gauging (common practice, no
#: source).
MIN_GAUGINGS = 3


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


def check_gaugings(
    stage_m: np.ndarray,
    discharge_m3s: np.ndarray,
    lines: np.ndarray,
    file: Path,
    stage_column: str = "stage",
    discharge_column: str = "discharge",
) -> None:
    """Stop a gaugings table that no rating can be fitted to, naming file, line and column.

    Usable rows have a stage and a non-negative discharge (the others are kept and reported by
    the fit). The table needs :data:`MIN_GAUGINGS` usable rows, at least two distinct stages and
    one gauging with flow.

    Raises
    ------
    InputError
        Too few usable rows, a single stage, or only zero flows.
    """
    h = np.asarray(stage_m, dtype=float)
    q = np.asarray(discharge_m3s, dtype=float)
    usable = np.isfinite(h) & np.isfinite(q) & (q >= 0)
    idx = np.flatnonzero(usable)
    if idx.size < MIN_GAUGINGS:
        at = int(lines[idx[-1]]) if idx.size else (int(lines[-1]) if len(lines) else None)
        raise InputError(
            f"gaugings: {idx.size} usable row(s) (a stage and a discharge of zero or more); a "
            f"rating needs at least {MIN_GAUGINGS}, more than its free parameters",
            file=file,
            line=at,
        )
    if np.unique(h[idx]).size < 2:
        raise InputError(
            f"gaugings: every usable gauging is at one stage ({h[idx[0]]:g} m); a rating needs "
            "gaugings over a range of stages",
            file=file,
            line=int(lines[idx[1]]),
            column=stage_column,
        )
    if not np.any(q[idx] > 0):
        raise InputError(
            "gaugings: every discharge is zero; a rating needs gaugings with flow (zero-flow "
            "gaugings only bound the datum)",
            file=file,
            line=int(lines[idx[0]]),
            column=discharge_column,
        )


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
        Also from :func:`check_gaugings` (too few usable rows, one stage, only zero flows).
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
        dayfirst_key="[outlet] dayfirst",
    )
    flow = to_si(table["discharge"].to_numpy(), options.discharge_units, "flow", "gaugings")
    stage = to_si(table["stage"].to_numpy(), options.stage_units, "length", "gauging stage")
    check_gaugings(
        stage, flow, table["_line"].to_numpy(), Path(options.gaugings), options.stage,
        options.discharge,
    )  # fmt: skip
    from ..unitcheck import intended_unit

    note = intended_unit("inflow", flow, options.discharge_units, label="gauged discharge")
    if note:
        import warnings

        from ..errors import DataQualityWarning

        warnings.warn(f"gaugings {options.gaugings}: {note}", DataQualityWarning, stacklevel=2)
    return Gaugings(
        file=Path(options.gaugings),
        date=(
            table["date"].to_numpy()
            if "date" in table
            else np.full(len(table), np.datetime64("NaT"), dtype="datetime64[ns]")
        ),
        stage_m=stage,
        discharge_m3s=flow,
        weight=table["weight"].to_numpy() if "weight" in table else None,
        line=table["_line"].to_numpy(),
    )
