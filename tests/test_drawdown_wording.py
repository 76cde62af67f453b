"""Wording a manager can quote (issue 14, part 2): exact intervals against scipy, the rule of
what an ensemble can support, and the sentences of the forecast."""

from __future__ import annotations

import pytest
from scipy.stats import binomtest

from lakebalance.drawdown.support import (
    MIN_YEARS_FOR_CHANCE,
    can_quote_chance,
    clopper_pearson,
    percentile_supported,
    successes,
)


@pytest.mark.parametrize(
    ("k", "n"), [(0, 18), (1, 18), (4, 18), (7, 18), (18, 18), (3, 5), (50, 200)]
)
def test_clopper_pearson_matches_scipy_binomtest_exact(k, n):
    """Clopper & Pearson (1934) exact interval against scipy.stats.binomtest(...).proportion_ci(
    method='exact') (reference library)."""
    ref = binomtest(k, n).proportion_ci(confidence_level=0.95, method="exact")
    lo, hi = clopper_pearson(k, n)
    assert lo == pytest.approx(ref.low, abs=1e-12)
    assert hi == pytest.approx(ref.high, abs=1e-12)


def test_clopper_pearson_rejects_impossible_counts():
    with pytest.raises(ValueError):
        clopper_pearson(5, 4)
    with pytest.raises(ValueError):
        clopper_pearson(0, 0)


def test_support_rule():
    """The stated project rule (lakebalance.drawdown.support): the 5-95 % points need 20 years,
    10-90 % 10, quartiles 4; the median always; "x % chance" from 20 years."""
    assert MIN_YEARS_FOR_CHANCE == 20
    assert not percentile_supported(5, 19) and percentile_supported(5, 20)
    assert percentile_supported(95, 20) and not percentile_supported(95, 18)
    assert not percentile_supported(10, 9) and percentile_supported(10, 10)
    assert not percentile_supported(25, 3) and percentile_supported(25, 4)
    assert percentile_supported(50, 1) and percentile_supported(50, None)
    assert not can_quote_chance(18) and can_quote_chance(20) and not can_quote_chance(None)
    assert successes(0.39, 18) == 7 and successes(1.2, 5) == 5
