"""Write the pyet reference values used by tests/reference/test_evaporation_vs_pyet_fixtures.py.

pyet (Vremec, Collenteur and Birk, 2024; PyPI ``pyet``) caps pandas below 3, so the main test
suite does not install it: its outputs on the invented weather of the tests are kept here as a
CSV file, generated once with the library and version named in the file. Run it again only when
the invented weather or the cases change:

    pip install "pyet==1.5.0"          # in an environment of its own (pandas < 3)
    python tests/reference/data/make_pyet_reference.py

The live comparison (tests/reference/test_evaporation_vs_pyet.py) runs where pyet is installed
(`.ci/run` runs it in a separate environment).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import pyet  # noqa: E402
from _weather import (  # noqa: E402
    ELEVATION,
    LATITUDE,
    _pyet_common,
    invented_year,
)

from lakebalance.evaporation import wind_at_2m  # noqa: E402


def cases() -> dict[str, pd.Series]:
    w = invented_year()
    out: dict[str, pd.Series] = {}
    for radiation, humidity in (("solar", "extremes"), ("sunshine", "mean")):
        rad = {"rs": w["solar"]} if radiation == "solar" else {"n": w["sunshine"]}
        common = _pyet_common(w, humidity)
        u2 = pd.Series(wind_at_2m(w["wind"], 10.0), index=w.index)
        out[f"penman_{radiation}_{humidity}"] = pyet.penman(
            w["tmean"], u2, aw=2.6, bw=2.6 * 0.54, albedo=0.06, **rad, **common
        )
        out[f"priestley_taylor_{radiation}_{humidity}"] = pyet.priestley_taylor(
            w["tmean"], alpha=1.26, albedo=0.06, **rad, **common
        )
        out[f"fao56_{radiation}_{humidity}"] = pyet.pm_fao56(w["tmean"], w["wind"], **rad, **common)
    ea = 0.6108 * np.exp(17.27 * w["dewpoint"] / (w["dewpoint"] + 237.3))
    out["penman_dewpoint"] = pyet.penman(
        w["tmean"], w["wind"], rs=w["solar"], aw=2.6, bw=1.404, albedo=0.06, ea=ea,
        **_pyet_common(w, "none"),
    )  # fmt: skip
    tmean = 0.5 * (w["tmax"] + w["tmin"])
    out["hargreaves"] = (
        pyet.hargreaves(tmean, w["tmax"], w["tmin"], lat=float(np.deg2rad(LATITUDE)))
        * 0.408
        * pyet.calc_lambda(tmean)
    )
    w7 = invented_year(seed=7)
    for lat in (-34.0, 5.0):
        kw = dict(tmax=w7["tmax"], tmin=w7["tmin"], rhmax=w7["rh_max"], rhmin=w7["rh_min"])
        kw.update(elevation=ELEVATION, lat=float(np.deg2rad(lat)), rs=w7["solar"])
        out[f"fao56_seed7_lat{lat:g}"] = pyet.pm_fao56(w7["tmean"], w7["wind"], **kw)
        out[f"priestley_taylor_seed7_lat{lat:g}"] = pyet.priestley_taylor(
            w7["tmean"], albedo=0.06, **kw
        )
    return out


def main() -> None:
    frame = pd.DataFrame({k: np.asarray(v, dtype=float) for k, v in cases().items()})
    frame.index = invented_year().index
    path = HERE / "pyet_1_5_0_reference.csv"
    with path.open("w", encoding="utf-8") as fh:
        fh.write(f"# pyet {pyet.__version__} outputs (mm/d) on tests' invented weather; "
                 "made by make_pyet_reference.py\n")  # fmt: skip
        frame.to_csv(fh, float_format="%.12g")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
