"""Radiation-based methods: evaporation from the available energy alone (Priestley-Taylor).

- ``priestley_taylor``: the equilibrium evaporation of a wet surface scaled by alpha (Priestley
  and Taylor, 1972), on the available energy of open water.

References
----------
Priestley, C.H.B., Taylor, R.J. (1972). On the assessment of surface heat flux and evaporation
using large-scale parameters. Mon. Weather Rev. 100, 81-92.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..units import factor
from .atmosphere import latent_heat, psychrometric_constant, slope_vapour_pressure_curve
from .method import EvaporationMethod
from .options import EvaporationOptions
from .weather import PreparedWeather

__all__ = ["PRIESTLEY_TAYLOR", "priestley_taylor"]


def _arr(x: ArrayLike) -> NDArray[np.float64]:
    return np.asarray(x, dtype=float)


def priestley_taylor(
    available_energy: ArrayLike,
    tmean_c: ArrayLike,
    pressure_kpa: ArrayLike,
    alpha: float = 1.26,
) -> NDArray[np.float64]:
    """Evaporation from a wet surface by Priestley and Taylor (1972).

    Parameters
    ----------
    available_energy : array_like
        R_n - G, MJ m⁻² d⁻¹.
    tmean_c : array_like
        Mean daily air temperature, °C.
    pressure_kpa : array_like
        Atmospheric pressure, kPa.
    alpha : float
        Priestley-Taylor coefficient, dimensionless (1.26 for saturated surfaces).

    Returns
    -------
    ndarray
        E, mm/d.

    Notes
    -----
    .. math:: E = \\alpha \\frac{\\Delta}{\\Delta + \\gamma} \\frac{R_n - G}{\\lambda}

    with Δ (FAO-56 eq. 13), γ (eq. 8) and λ(T) (Annex 3 eq. 3-1).

    References
    ----------
    Priestley and Taylor (1972), the equilibrium evaporation scaled by alpha.
    """
    t = _arr(tmean_c)
    delta = slope_vapour_pressure_curve(t)
    gamma = psychrometric_constant(pressure_kpa)
    return alpha * delta / (delta + gamma) * _arr(available_energy) / latent_heat(t)


def _priestley_taylor(weather: PreparedWeather, options: EvaporationOptions) -> np.ndarray:
    """Priestley-Taylor on the available energy of open water, m/d."""
    mm_per_day = priestley_taylor(
        weather.available_energy, weather.tmean_c, weather.pressure_kpa, options.alpha
    )
    return np.asarray(mm_per_day, dtype=float) * factor("mm", "m")


PRIESTLEY_TAYLOR = EvaporationMethod(
    name="priestley_taylor",
    family="radiation",
    label="Priestley-Taylor",
    reference="Priestley and Taylor (1972), equilibrium evaporation times alpha",
    roles=("tmax", "tmin", "tmean", "rh", "rh_max", "rh_min", "dewpoint", "solar", "sunshine"),
    needs=("energy",),
    compute=_priestley_taylor,
    preference=5,
    condensation=True,
    uses_pressure=True,
    keep_negative=lambda options: options.heat_storage_lag > 0,
)
