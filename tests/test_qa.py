"""QA functions on crafted arrays.

The MAD-to-sigma factor is checked against the normal quantile from scipy (an independent
library); the rest are crafted cases whose answer is evident from the construction (common
practice, no source).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from lakebalance import qa


def test_mad_to_sigma_is_the_reciprocal_normal_quartile():
    from scipy.stats import norm

    assert qa.MAD_TO_SIGMA == pytest.approx(1.0 / norm.ppf(0.75), rel=1e-12)


def test_runs():
    np.testing.assert_array_equal(
        qa.runs(np.array([0, 1, 1, 0, 1, 0, 0, 1], bool)), [[1, 3], [4, 5], [7, 8]]
    )
    assert qa.runs(np.zeros(0, bool)).shape == (0, 2)


def test_token_counts():
    cells = pd.Series(["1", "ICE", " n/a", "ICE", "2", "<0.01"], dtype=object)
    bad = np.array([False, True, True, True, False, True])
    assert qa.token_counts(cells, bad) == {"ICE": 2, "n/a": 1, "<0.01": 1}


def test_order_and_duplicates():
    t = np.array(
        ["2021-01-03", "2021-01-01", "2021-01-02", "2021-01-02", "2021-01-01", "2021-01-04"],
        "datetime64[ns]",
    )
    v = np.array([3.0, 1.0, 2.0, 2.5, 1.0, 4.0])
    d = qa.order_and_duplicates(t, v)
    assert d.out_of_order == 4  # rows 2 to 5 are earlier than the first row (2021-01-03)
    np.testing.assert_array_equal(d.merged, [False, False, False, False, True, False])
    np.testing.assert_array_equal(d.conflict, [False, False, True, True, False, False])
    assert d.conflict_times.astype(str).tolist() == ["2021-01-02T00:00:00.000000000"]
    assert np.all(np.diff(t[d.order]) >= np.timedelta64(0))


def test_out_of_bounds():
    neg, rng = qa.out_of_bounds("inflow", np.array([1.0, -0.1, np.nan]))
    assert neg.tolist() == [False, True, False] and not rng.any()
    neg, rng = qa.out_of_bounds("rh", np.array([50.0, 101.0, -1.0]))
    assert neg.tolist() == [False, False, True] and rng.tolist() == [False, True, False]
    neg, rng = qa.out_of_bounds("stage", np.array([-3.0]))
    assert not neg.any() and not rng.any()


def test_rolling_median_matches_pandas():
    x = np.random.default_rng(5).normal(size=3000)
    expected = pd.Series(x).rolling(7, center=True, min_periods=4).median().to_numpy()
    np.testing.assert_allclose(qa.rolling_median(x, 7), expected, rtol=0, atol=0)


def test_spike_isolated_reading_found_step_and_peak_not():
    rng = np.random.default_rng(11)
    x = 10 + np.cumsum(rng.normal(0, 0.01, 400))
    x[100] += 0.8  # isolated wrong reading
    x[250:] += 1.5  # a real step (a flood rise that stays)
    x[300:360] += np.exp(-(((np.arange(60) - 30) / 6.0) ** 2))  # a rounded flood peak of 1 m
    found = np.flatnonzero(qa.spikes(x, window=7, threshold=6.0))
    assert found.tolist() == [100]


def test_spike_without_return_test_flags_the_hampel_outliers_only():
    x = np.r_[np.zeros(20), 5.0, np.zeros(20)] + np.linspace(0, 0.001, 41)
    assert np.flatnonzero(qa.spikes(x, returns=False)).tolist() == [20]


def test_flat_stretches_do_not_make_spikes_of_resolution_steps():
    x = np.r_[np.full(30, 1.000), np.full(30, 1.001)]
    assert not qa.spikes(x, resolution=0.001).any()


def test_flatlines():
    x = np.array([1, 2, 3, 3, 3, 3, 4, np.nan, 5, 5, 5, 5, 5], float)
    np.testing.assert_array_equal(qa.flatlines(x, 4), [[2, 6], [8, 13]])
    np.testing.assert_array_equal(qa.flatlines(x, 5), [[8, 13]])


@pytest.mark.parametrize(
    ("role", "values", "bad"),
    [
        ("stage", 1000 + 300 * np.sin(np.arange(50)), True),  # cm declared as m
        ("stage", 10 + 0.01 * np.sin(np.arange(50)), False),
        ("rain", np.full(50, 12.0), True),  # mm declared as m
        ("rain", np.full(50, 0.012), False),
        ("rh", np.full(50, 0.6), True),  # a fraction declared as %
        ("tmax", np.full(50, 80.0), True),  # °F declared as °C
        ("inflow", np.full(50, 5.0e5), True),
    ],
)
def test_implausible_units(role, values, bad):
    assert (qa.implausible_units(role, values) is not None) is bad


def test_outside_storage_findings():
    idx = pd.date_range("2021-01-01", periods=6, name="date")
    h = pd.Series([1.0, 0.4, 0.3, 1.0, 5.5, 1.0], index=idx)
    found = qa.outside_storage_findings(h, 0.5, 5.0)
    assert [(f.first, f.last, f.count) for f in found] == [
        ("2021-01-02", "2021-01-03", 2),
        ("2021-01-05", "2021-01-05", 1),
    ]
    assert "below" in found[0].detail and "above" in found[1].detail


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=0, max_size=60), st.integers(2, 12))
def test_flatline_runs_are_really_flat(values, min_days):
    x = np.asarray(values, float)
    for a, b in qa.flatlines(x, min_days):
        assert b - a >= min_days
        assert np.all(x[a:b] == x[a])
