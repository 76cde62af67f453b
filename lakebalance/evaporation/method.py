"""What a lake evaporation method is: one entry of the registry (:mod:`.registry`).

An :class:`EvaporationMethod` names the method, its family, the weather it needs, its label and
reference, and the function that computes the daily lake evaporation depth (m per day) from the
prepared weather (:class:`~lakebalance.evaporation.weather.PreparedWeather`) and the
``[evaporation]`` options. :func:`~lakebalance.evaporation.lake.estimate_lake_evaporation` only
asks the entries: which are possible, what each computes, what each needs when it is not possible.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

if TYPE_CHECKING:  # pragma: no cover
    import numpy as np

    from .options import EvaporationOptions
    from .weather import PreparedWeather

__all__ = ["Family", "FAMILIES", "EvaporationMethod"]

#: Families of methods as the literature groups them (e.g. Xu and Singh, 2000-2002, from memory):
#: a measurement, a pan with a coefficient, combination (energy and aerodynamic terms),
#: radiation-based (energy only), temperature-based.
#: ``lake`` (module :mod:`.equilibrium`): methods that follow the lake's own heat store.
Family = Literal["measured", "lake", "pan", "combination", "radiation", "temperature"]
FAMILIES: tuple[str, ...] = ("measured", "lake", "pan", "combination", "radiation", "temperature")


@dataclass(frozen=True)
class EvaporationMethod:
    """One lake evaporation method.

    Parameters
    ----------
    name : str
        The name used in the site file (``[evaporation] method``), the command line and tables.
    family : Family
        Its family (module ``lakebalance.evaporation.<family module>``).
    label : str
        Plain words for people (report, documentation).
    reference : str
        The published equation it implements (author, year, equation number).
    roles : tuple of str
        The weather series roles it can draw on (a subset of
        :data:`~lakebalance.evaporation.weather.WEATHER_ROLES`).
    needs : tuple of str
        The quantities of the prepared weather it needs (see
        :data:`~lakebalance.evaporation.weather.QUANTITIES`); the method is possible when all
        are present, its ``filled`` mask is that of the series behind them, and when it is not
        possible the missing ones say what to add.
    compute : callable
        ``compute(weather, options) -> ndarray``: daily lake evaporation, m per day, from a
        :class:`~lakebalance.evaporation.weather.PreparedWeather` holding every quantity of
        ``needs`` and the :class:`~lakebalance.evaporation.options.EvaporationOptions`. May raise
        :class:`~lakebalance.errors.ConfigError` for options it cannot use.
    preference : int
        Rank in ``method = "auto"`` (the possible method of lowest rank is chosen).
    condensation : bool
        Whether the equation can give negative values (condensation), which
        ``clip_negative`` sets to 0.
    uses_pressure : bool
        Whether it uses the air pressure (a note says when sea level was assumed).
    input_note : callable, optional
        ``input_note(options) -> str | None``: a note whenever the method is computed (e.g. a
        rule-of-thumb coefficient).
    chosen_note : callable, optional
        ``chosen_note(options) -> str``: a note when the method is the one chosen.
    chosen_warning : str, optional
        An :class:`~lakebalance.errors.ApproximationWarning` raised when it is the one chosen.
    comparison_note : str, optional
        A note when it is computed but another method is chosen.
    keep_negative : callable, optional
        ``keep_negative(options) -> bool``: whether negative days are kept even with
        ``clip_negative`` (a method with heat storage: heat released on a cold night is real,
        and clipping it would bias the totals upward).
    """

    name: str
    family: Family
    label: str
    reference: str
    roles: tuple[str, ...]
    needs: tuple[str, ...]
    compute: Callable[[PreparedWeather, EvaporationOptions], np.ndarray]
    preference: int
    condensation: bool = False
    uses_pressure: bool = False
    input_note: Callable[[EvaporationOptions], str | None] | None = None
    chosen_note: Callable[[EvaporationOptions], str] | None = None
    chosen_warning: str | None = None
    comparison_note: str | None = None
    keep_negative: Callable[[EvaporationOptions], bool] | None = None
