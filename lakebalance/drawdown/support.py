"""What an ensemble can support: exact binomial intervals and the rule for quoting chances.

An ensemble of ``M`` members made from ``n`` historical years holds at most ``n`` independent
pieces of weather, however large ``M`` is: resampling the years (a bootstrap, a fitted model)
adds members, not information. Every statement of the outlook is therefore tied to ``n``, the
*independent years* behind it:

* a share of members crossing a level carries the exact (Clopper & Pearson, 1934) 95 % binomial
  interval on ``n`` trials, with ``round(p n)`` successes when the members are not the years
  themselves;
* a share is quoted as "an x % chance" only from :data:`MIN_YEARS_FOR_CHANCE` (20) independent
  years up; below, the outlook gives counts ("in 4 of 18 historical years") and the interval;
* a percentile ``q`` of the members (a fan band, a day by which q % have crossed) is printed only
  when at least one independent year lies beyond it, ``n min(q, 100 - q) / 100 >= 1``: the
  5-95 % band needs 20 years, the 10-90 % band 10, the quartiles 4; the median is always shown.

The threshold of 20 is a stated project rule (with fewer, the 5 % and 95 % points are beyond the
driest and wettest year), not a published standard.

References
----------
Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial limits illustrated in
the case of the binomial. Biometrika 26(4), 404-413.
"""

from __future__ import annotations

import math

__all__ = [
    "MIN_YEARS_FOR_CHANCE",
    "clopper_pearson",
    "percentile_supported",
    "can_quote_chance",
    "successes",
]

#: Independent years from which a share of members may be quoted as "an x % chance".
MIN_YEARS_FOR_CHANCE = 20


def clopper_pearson(k: int, n: int, level: float = 0.95) -> tuple[float, float]:
    """Exact binomial interval of a proportion ``k / n``.

    Parameters
    ----------
    k, n : int
        Successes and trials (0 <= k <= n, n >= 1).
    level : float
        Two-sided confidence level (-).

    Returns
    -------
    (low, high) : floats in [0, 1]
        ``low = B(a/2; k, n - k + 1)``, ``high = B(1 - a/2; k + 1, n - k)`` with ``B`` the beta
        quantile and ``a = 1 - level`` (Clopper & Pearson, 1934); 0 and 1 at the ends.
    """
    from scipy.stats import beta

    k, n = int(k), int(n)
    if n < 1 or not 0 <= k <= n:
        raise ValueError(f"need 0 <= k <= n and n >= 1, got k={k}, n={n}")
    a = 1.0 - float(level)
    low = 0.0 if k == 0 else float(beta.ppf(a / 2.0, k, n - k + 1))
    high = 1.0 if k == n else float(beta.ppf(1.0 - a / 2.0, k + 1, n - k))
    return low, high


def successes(probability: float, n: int) -> int:
    """The count of ``n`` independent years a share of members stands for: ``round(p n)``."""
    return int(min(max(round(float(probability) * int(n)), 0), int(n)))


def percentile_supported(q: float, n: int | None) -> bool:
    """Whether the ``q`` % point (0-100) of an ensemble on ``n`` independent years may be shown:
    the median always, another point when ``n min(q, 100 - q) / 100 >= 1``."""
    if math.isclose(q, 50.0):
        return True
    if n is None or n < 1:
        return False
    return n * min(q, 100.0 - q) / 100.0 >= 1.0 - 1e-12


def can_quote_chance(n: int | None) -> bool:
    """Whether a share of members may be quoted as "an x % chance" (``n >= 20`` years)."""
    return n is not None and n >= MIN_YEARS_FOR_CHANCE
