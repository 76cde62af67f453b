"""Drift: a linear trend of the residual inside a long segment, with Newey–West errors."""

from __future__ import annotations

import numpy as np

from ..stats import newey_west_lags


def trend_test(y: np.ndarray) -> tuple[float, float] | None:
    """Slope (unit per step) and two-sided Newey–West p-value of a linear trend."""
    ok = np.isfinite(y)
    if ok.sum() < 10:
        return None
    import statsmodels.api as sm

    t = np.arange(y.size, dtype=float)[ok]
    n = int(ok.sum())
    lags = newey_west_lags(n)
    fit = sm.OLS(y[ok], sm.add_constant(t)).fit(cov_type="HAC", cov_kwds={"maxlags": lags})
    return float(fit.params[1]), float(fit.pvalues[1])


def norm_ppf(p: float) -> float:
    from scipy.special import ndtri as _ndtri  # standard normal quantile; lighter than scipy.stats

    return float(_ndtri(max(p, 1e-300)))
