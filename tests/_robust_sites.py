"""Small invented sites written to a temporary folder for the robustness tests.

Everything here is made up: a vertical-sided lake (constant area) filled by one known inflow
and nothing else, so that its storage change is A dh (analytic, common practice, no source) and
the balance residual is close to zero.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

AREA_M2 = 2.0e5  # invented lake area, m²


def write_site(
    root: Path,
    *,
    days: int = 120,
    start: str = "2021-01-01",
    storage_offset_m: float = 0.0,
    inflow_shift_days: int = 0,
    extra_toml: str = "",
    stage_factor: float = 1.0,
) -> Path:
    """A site file with stage, inflow and storage table; returns its path.

    The stage rises by inflow / area each day (no other term), so the residual is near zero. ``storage_offset_m`` shifts the table's stage column (a table of elevations);
    ``inflow_shift_days`` moves the inflow record away from the stage record; ``stage_factor``
    scales the written stage (100 writes centimetres).
    """
    root.mkdir(parents=True, exist_ok=True)
    idx = pd.date_range(start, periods=days, freq="D")
    inflow = 0.2 + 0.1 * np.sin(np.arange(days) / 9.0)  # m³/s
    # daily mean stage of a lake filled at a known rate: mid-day value of the linear rise
    rise = np.cumsum(inflow) * 86400.0 / AREA_M2
    stage = 1.0 + rise - inflow * 86400.0 / AREA_M2 / 2.0
    pd.DataFrame(
        {"date": idx.strftime("%Y-%m-%d"), "value": np.round(stage * stage_factor, 6)}
    ).to_csv(root / "stage.csv", index=False)
    q_idx = idx + pd.Timedelta(days=inflow_shift_days)
    pd.DataFrame({"date": q_idx.strftime("%Y-%m-%d"), "value": inflow}).to_csv(
        root / "inflow.csv", index=False
    )
    levels = np.arange(0.0, 12.0, 1.0)
    pd.DataFrame(
        {"stage": levels + storage_offset_m, "area": np.full(levels.size, AREA_M2)}
    ).to_csv(root / "storage.csv", index=False)
    site = root / "site.toml"
    site.write_text(
        f"""[site]
name = "Robustness Pond (invented)"
water_year_start = 1

[storage]
file = "storage.csv"
below = "clamp"
above = "extend"

[series.stage]
file = "stage.csv"
units = "m"

[series.inflow]
file = "inflow.csv"
units = "m3/s"

[uncertainty]
draws = 0
{extra_toml}
"""
    )
    return site
