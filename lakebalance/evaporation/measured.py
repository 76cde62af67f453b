"""A measured lake evaporation series, taken as it is.

- ``given``: the ``evaporation`` series of the site file (e.g. an evaporation station on the
  lake, or a series computed elsewhere), m per day.
"""

from __future__ import annotations

import numpy as np

from .method import EvaporationMethod
from .options import EvaporationOptions
from .weather import PreparedWeather

__all__ = ["GIVEN"]


def _given(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """The measured series, m/d."""
    return np.asarray(weather.series("evaporation"), dtype=float)


GIVEN = EvaporationMethod(
    name="given",
    family="measured",
    label="measured",
    reference="the evaporation series as it is",
    roles=("evaporation",),
    needs=("evaporation",),
    compute=_given,
    preference=0,
)
