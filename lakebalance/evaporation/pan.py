"""Pan methods: lake evaporation from pan evaporation times a pan coefficient.

- ``pan``: E_lake = K_p E_pan, with one coefficient or one per calendar month.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import ConfigError
from .method import EvaporationMethod
from .options import EvaporationOptions
from .weather import PreparedWeather

__all__ = ["PAN", "pan_to_lake"]


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def pan_to_lake(
    pan: ArrayLike, coefficient: float | ArrayLike, month: ArrayLike | None = None
) -> NDArray[np.float64]:
    """Lake evaporation from pan evaporation and a pan coefficient.

    Parameters
    ----------
    pan : array_like
        Pan evaporation, any depth unit per day (the result has the same unit).
    coefficient : float or sequence of 12 floats
        Pan-to-lake coefficient, dimensionless: one value, or one per calendar month
        (January first).
    month : array_like of int, optional
        Calendar month (1-12) of each value of ``pan``; needed with monthly coefficients.

    Returns
    -------
    ndarray
        Lake evaporation, same unit as ``pan``.

    Notes
    -----
    :math:`E_{lake} = K_p E_{pan}`. The annual coefficient of a Class A pan is commonly taken as
    about 0.7 (a rule of thumb, from memory); it varies by season, climate and pan siting.
    """
    k = _arr(coefficient)
    if k.ndim == 0:
        return k * _arr(pan)
    if k.shape != (12,):
        raise ValueError("pan coefficient must be one value or 12 monthly values")
    if month is None:
        raise ValueError("monthly pan coefficients need the month of each day")
    return k[_arr(month).astype(int) - 1] * _arr(pan)


def _pan(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """The pan series times the (monthly) pan coefficient, m/d."""
    k = options.pan_coefficient
    if isinstance(k, list) and len(k) != 12:
        raise ConfigError(
            f"[evaporation] pan_coefficient must be one number or 12 monthly numbers, got {len(k)}"
        )
    values = pan_to_lake(weather.series("pan"), k, weather.index.month.to_numpy())
    return np.asarray(values, dtype=float)


def _rule_of_thumb(options: EvaporationOptions) -> str | None:
    k = options.pan_coefficient
    if not isinstance(k, list) and k == 0.7:
        return (
            "pan coefficient 0.7 is a rule of thumb (Class A pan, annual); calibrate it for "
            "the site where possible"
        )
    return None


PAN = EvaporationMethod(
    name="pan",
    family="pan",
    label="pan x coefficient",
    reference="E_lake = K_p E_pan (common practice, no source)",
    roles=("pan",),
    needs=("pan",),
    compute=_pan,
    preference=2,
    input_note=_rule_of_thumb,
)
