"""Temperature-based methods: evaporation from air temperature and latitude (Hargreaves).

- ``hargreaves``: the Hargreaves and Samani (1985) reference evapotranspiration (FAO-56 eq. 52),
  temperature only: a rough estimate for open water, shown for comparison unless nothing else is
  possible.

References
----------
Allen, R.G., Pereira, L.S., Raes, D., Smith, M. (1998). Crop evapotranspiration. FAO Irrigation
and Drainage Paper 56, Rome.
Hargreaves, G.H., Samani, Z.A. (1985). Reference crop evapotranspiration from temperature.
Appl. Eng. Agric. 1, 96-99.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..units import factor
from .atmosphere import MJ_TO_MM_FAO56
from .method import EvaporationMethod
from .options import EvaporationOptions
from .weather import PreparedWeather

__all__ = ["HARGREAVES", "hargreaves"]


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def hargreaves(
    tmax_c: ArrayLike, tmin_c: ArrayLike, extraterrestrial: ArrayLike
) -> NDArray[np.float64]:
    """Reference evapotranspiration from temperature only (Hargreaves and Samani, 1985).

    Parameters
    ----------
    tmax_c, tmin_c : array_like
        Daily maximum and minimum air temperature, °C.
    extraterrestrial : array_like
        R_a, MJ m⁻² d⁻¹.

    Returns
    -------
    ndarray
        ET_0, mm/d. A rough estimate: FAO-56 recommends it only where radiation, humidity and
        wind are missing. A negative temperature range is treated as zero.

    Notes
    -----
    FAO-56 eq. 52:
    :math:`ET_0 = 0.0023 (T_{mean} + 17.8) (T_{max} - T_{min})^{0.5} R_a`, R_a in mm/d
    (0.408 R_a), T_mean = (T_max + T_min)/2.

    References
    ----------
    Allen et al. (1998), FAO-56, eq. 52; Hargreaves and Samani (1985).
    """
    tmax = _arr(tmax_c)
    tmin = _arr(tmin_c)
    tmean = 0.5 * (tmax + tmin)
    spread = np.sqrt(np.clip(tmax - tmin, 0.0, None))
    return 0.0023 * (tmean + 17.8) * spread * MJ_TO_MM_FAO56 * _arr(extraterrestrial)


def _hargreaves(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """Hargreaves ET0 from the daily temperature range and R_a, times an open-water
    coefficient (``hargreaves_coefficient``, else that of the FAO-56 route), m/d.

    Hargreaves estimates the evapotranspiration of a grass reference, not of a lake: as lake
    evaporation it needs the coefficient that FAO-56 applies to any ET0 (the ET0 of eq. 52 is
    the same quantity as that of eq. 6)."""
    from .combination import open_water_kc

    mm_per_day = hargreaves(weather.tmax_c, weather.tmin_c, weather.extraterrestrial)
    k = options.hargreaves_coefficient
    mm_per_day = (open_water_kc(weather, options) if k is None else k) * mm_per_day
    return np.asarray(mm_per_day, dtype=float) * factor("mm", "m")


HARGREAVES = EvaporationMethod(
    name="hargreaves",
    family="temperature",
    label="Hargreaves (temperature only)",
    reference="Hargreaves and Samani (1985); Allen et al. (1998), FAO-56, eq. 52",
    roles=("tmax", "tmin"),
    needs=("temperature_range", "extraterrestrial"),
    compute=_hargreaves,
    preference=6,
    condensation=True,
    input_note=lambda options: (
        "hargreaves: the grass reference ET0 of FAO-56 eq. 52 times "
        + (
            f"hargreaves_coefficient {options.hargreaves_coefficient:g}"
            if options.hargreaves_coefficient is not None
            else "the open-water coefficient of the FAO-56 route (no hargreaves_coefficient)"
        )
    ),
    chosen_note=lambda options: "Hargreaves (temperature only) is a rough estimate for open water",
    chosen_warning=(
        "lake evaporation by Hargreaves uses temperature only; expect errors of 20% or more "
        "on single days and a bias for open water (FAO-56, section on missing data)"
    ),
    comparison_note="hargreaves is shown for comparison only (temperature-only estimate)",
)
