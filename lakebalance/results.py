"""The result protocol shared by every step.

Every result object is frozen and offers

* ``summary()`` — a :class:`Summary`: text that prints (``print(result.summary())``) and renders
  as HTML in a notebook;
* ``to_dict()`` — its JSON document (plain values, SI, the unit in each name or beside each value);
* ``to_frame()`` — its main table, where the result is tabular.

An estimated quantity has one shape everywhere, in Python and in JSON (:class:`Estimate`):
``{"value", "stderr", "ci95": [lower, upper], "unit"}``, plus ``"interval"`` when the interval was
not made the usual way (normal theory with the standard error).
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from typing import Any, Protocol, runtime_checkable

__all__ = ["Summary", "Estimate", "Result", "estimate"]


class Summary(str):
    """A result's summary: plain text that prints as itself and renders as HTML in a notebook.

    It is a ``str`` (so it can be printed, searched and written as it is) with a title.
    """

    title: str

    def __new__(cls, text: str, title: str = "") -> Summary:
        obj = super().__new__(cls, text)
        obj.title = title
        return obj

    def _repr_html_(self) -> str:
        head = f"<h4>{html.escape(self.title)}</h4>" if self.title else ""
        return f"{head}<pre>{html.escape(str(self))}</pre>"


@dataclass(frozen=True)
class Estimate:
    """An estimated quantity with its standard error and 95 % interval.

    Parameters
    ----------
    value : float
        The estimate, in ``unit``.
    stderr : float or None
        Its standard error (None when the interval is not built from one).
    ci95 : (float, float) or None
        The 95 % interval.
    unit : str
        Unit of value, standard error and interval (``"-"`` when dimensionless).
    interval : str, optional
        How the interval was made when it is not ``value ± 1.96 stderr`` (e.g. ``"profile
        likelihood"``, ``"bootstrap"``, ``"Clopper-Pearson"``).
    """

    value: float
    stderr: float | None
    ci95: tuple[float, float] | None
    unit: str
    interval: str | None = None

    def to_dict(self) -> dict[str, Any]:
        """``{value, stderr, ci95: [lo, hi], unit}`` (and ``interval`` when not the usual)."""
        out: dict[str, Any] = {
            "value": _num(self.value),
            "stderr": _num(self.stderr),
            "ci95": None if self.ci95 is None else [_num(self.ci95[0]), _num(self.ci95[1])],
            "unit": self.unit,
        }
        if self.interval is not None:
            out["interval"] = self.interval
        return out


def estimate(
    value: float,
    stderr: float | None,
    lower: float | None = None,
    upper: float | None = None,
    unit: str = "-",
    interval: str | None = None,
) -> Estimate:
    """An :class:`Estimate`; without bounds the interval is ``value ± 1.96 stderr``."""
    if lower is None or upper is None:
        if stderr is None or not math.isfinite(stderr):
            ci = None
        else:
            ci = (value - 1.959963984540054 * stderr, value + 1.959963984540054 * stderr)
    else:
        ci = (float(lower), float(upper))
    return Estimate(float(value), None if stderr is None else float(stderr), ci, unit, interval)


def _num(x: float | None) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


@runtime_checkable
class Result(Protocol):
    """What every step's result offers (``to_frame`` where the result is tabular)."""

    def summary(self) -> Summary: ...

    def to_dict(self) -> dict[str, Any]: ...
