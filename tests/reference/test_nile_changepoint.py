"""Level-shift detector against an open dataset with a well-known change point.

Source: annual flow volume of the Nile at Aswan, 1871–1970 (10⁸ m³), shipped with statsmodels as
``statsmodels.datasets.nile`` (Cobb, G. W., 1978, "The problem of the Nile: conditional solution
to a change-point problem", Biometrika 65, 243–251). Cobb and later analyses place one change in
the mean between 1898 and 1899 (the first Aswan dam works); the flow after it is lower.
"""

from __future__ import annotations

import numpy as np
import pytest

from lakebalance import change_points


@pytest.fixture(scope="module")
def nile():
    import statsmodels.api as sm

    data = sm.datasets.nile.load_pandas().data
    return data["year"].to_numpy().astype(int), data["volume"].to_numpy(dtype=float)


@pytest.mark.parametrize("method", ["pelt", "binseg"])
def test_nile_one_change_point_1898_1899_cobb_1978(nile, method):
    """Cobb (1978): exactly one change, the new level starting in 1899 (last old year 1898)."""
    years, volume = nile
    cp = change_points(volume, method=method)
    assert len(cp.starts) == 1
    assert years[cp.starts[0]] == 1899
    assert years[cp.segments[0][1]] == 1898


def test_nile_segment_means_drop(nile):
    """The mean falls across the change (Cobb 1978: roughly 1100 to 850 × 10⁸ m³)."""
    _, volume = nile
    cp = change_points(volume)
    before, after = cp.means
    assert before == pytest.approx(np.mean(volume[:28]), rel=1e-12)
    assert after == pytest.approx(np.mean(volume[28:]), rel=1e-12)
    assert 1050 < before < 1150 and 800 < after < 900


def test_nile_no_change_without_the_shift(nile):
    """Removing the step (each part minus its own mean) leaves no change point."""
    _, volume = nile
    flat = volume.copy()
    flat[:28] -= flat[:28].mean()
    flat[28:] -= flat[28:].mean()
    assert change_points(flat).starts == ()
