"""Every lake evaporation method, one entry each, in the order tables list them.

A method is an :class:`~lakebalance.evaporation.method.EvaporationMethod` defined in the module
of its family (:mod:`.measured`, :mod:`.pan`, :mod:`.combination`, :mod:`.radiation_based`,
:mod:`.temperature_based`, :mod:`.equilibrium`) and listed once in :data:`REGISTRY`; the method names of the site
file, the command line and the tables all come from here (``tests/test_evaporation_registry.py``
checks that the options, the command and the documentation agree with it).
"""

from __future__ import annotations

from ..errors import ConfigError
from .combination import FAO56, PENMAN
from .equilibrium import EQUILIBRIUM
from .measured import GIVEN
from .method import EvaporationMethod
from .pan import PAN
from .radiation_based import PRIESTLEY_TAYLOR
from .temperature_based import HARGREAVES

__all__ = ["REGISTRY", "METHODS", "PREFERENCE", "method_named"]

#: Every method, in the order tables list them.
REGISTRY: tuple[EvaporationMethod, ...] = (
    GIVEN,
    EQUILIBRIUM,
    PAN,
    PENMAN,
    PRIESTLEY_TAYLOR,
    FAO56,
    HARGREAVES,
)

#: Method names in table order.
METHODS: tuple[str, ...] = tuple(m.name for m in REGISTRY)

#: The order ``method = "auto"`` tries them: a measurement, then the lake method (where the lake's
#: depth and area are known), a pan, the open-water energy-and-aerodynamic method, the grass
#: reference scaled, energy only, temperature only.
PREFERENCE: tuple[str, ...] = tuple(m.name for m in sorted(REGISTRY, key=lambda m: m.preference))

_BY_NAME = {m.name: m for m in REGISTRY}


def method_named(name: str, site_file: str | None = None) -> EvaporationMethod:
    """The entry of method ``name``; a :class:`~lakebalance.errors.ConfigError` for an unknown one."""
    try:
        return _BY_NAME[name]
    except KeyError:
        raise ConfigError(f"unknown evaporation method {name!r}", file=site_file) from None
