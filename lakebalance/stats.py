"""Statistics and calendar helpers shared by several steps (pure, numpy only).

One home for what the QA, the flags, the seepage fit, the balance and the drawdown engine each
need: the robust scale, the HAC lag rule, Gauss–Legendre nodes and the water-year label.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

__all__ = [
    "MAD_TO_SIGMA",
    "Z95",
    "robust_sigma",
    "newey_west_lags",
    "gauss_legendre",
    "water_year_of",
]

#: Scale from the median absolute deviation to the standard deviation of a normal law (-),
#: 1 / Φ⁻¹(3/4) (Hampel, 1974; Rousseeuw and Croux, 1993, eq. 1.1).
MAD_TO_SIGMA = 1.482602218505602

#: Two-sided 95 % quantile of the standard normal law (-).
Z95 = 1.959963984540054


def robust_sigma(values: np.ndarray) -> float:
    """Standard deviation estimated from the median absolute deviation, ignoring NaN.

    Parameters
    ----------
    values : ndarray
        Values in any unit.

    Returns
    -------
    float
        ``1.4826 · median(|x − median(x)|)`` in the unit of ``values`` (NaN when empty).

    Notes
    -----
    σ̂ = MAD / Φ⁻¹(3/4): consistent for the normal law and unaffected by up to half of the values
    being outliers.

    References
    ----------
    Hampel, F. R. (1974). The influence curve and its role in robust estimation. JASA 69, 383–393.
    """
    x = np.asarray(values, dtype=float)
    x = x[np.isfinite(x)]
    if x.size == 0:
        return float("nan")
    return float(MAD_TO_SIGMA * np.median(np.abs(x - np.median(x))))


def newey_west_lags(n: int) -> int:
    """Bartlett truncation lag ``floor(4 (n/100)^(2/9))`` for n observations (-).

    References
    ----------
    Newey, W. K. and West, K. D. (1994). Automatic lag selection in covariance matrix estimation.
    Review of Economic Studies 61, 631–653 (the rule of thumb of their section 3).
    """
    return int(math.floor(4.0 * (max(int(n), 1) / 100.0) ** (2.0 / 9.0)))


@lru_cache(maxsize=32)
def _leggauss(n: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = np.polynomial.legendre.leggauss(n)
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w


def gauss_legendre(
    n: int, interval: tuple[float, float] = (-1.0, 1.0)
) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights on ``interval`` (read-only arrays).

    Parameters
    ----------
    n : int
        Number of nodes (≥ 1); exact for polynomials of degree 2n − 1.
    interval : (float, float)
        Integration interval (any unit); the weights sum to its length.
    """
    if n < 1:
        raise ValueError("nodes must be >= 1")
    x, w = _leggauss(int(n))
    a, b = interval
    if (a, b) == (-1.0, 1.0):
        return x, w
    half = 0.5 * (b - a)
    return a + half * (x + 1.0), half * w


def water_year_of(index, start_month: int) -> np.ndarray:
    """Water-year label of each date: the calendar year in which the water year ends.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        The days.
    start_month : int
        First month of the water year (1–12).

    Notes
    -----
    With ``start_month = 10`` the water year 2021 runs from 1 October 2020 to 30 September 2021
    (common practice, no source); with 1 it is the calendar year.
    """
    if not 1 <= int(start_month) <= 12:
        raise ValueError(f"water_year_start must be a month 1-12, got {start_month!r}")
    years = index.year.to_numpy()
    if start_month == 1:
        return years
    return years + (index.month.to_numpy() >= start_month).astype(int)
