"""Storage relation from contours in feet with a datum offset in metres (invented basin).

Reference: the exact circle area pi r^2 (analytic), and the international foot = 0.3048 m
exactly (NIST SP 811, appendix B.8).
"""

from __future__ import annotations

import numpy as np
import pytest

import lakebalance as lb


def test_contour_stage_after_a_datum_offset_is_the_surveyed_zero(tmp_path):
    gpd = pytest.importorskip("geopandas")
    pyproj = pytest.importorskip("pyproj")
    from shapely.geometry import Point

    crs = pyproj.CRS.from_proj4("+proj=laea +lat_0=-30.5 +lon_0=139 +datum=WGS84")
    elev_ft = np.array([100.0, 102.0, 104.0])
    radii = np.array([200.0, 320.0, 440.0])  # m
    layer = gpd.GeoDataFrame(
        {"ELEV": elev_ft}, geometry=[Point(0, 0).buffer(r, 512) for r in radii], crs=crs
    ).to_crs(4326)
    layer.to_file(tmp_path / "contours.geojson", driver="GeoJSON")
    (tmp_path / "site.toml").write_text(
        '[site]\nname = "Round Lake (invented)"\n\n[storage]\nsource = "contours"\n'
        'file = "contours.geojson"\nelevation_field = "ELEV"\nelevation_units = "ft"\n'
        "datum_offset = 30.48\n"
    )
    curve = lb.open_site(tmp_path / "site.toml").storage
    # 100 ft - 30.48 m is 0 m exactly on paper; in floating point it was -3.6e-15 m
    assert curve.min_stage_m == 0.0
    assert str(curve.min_stage_m) == "0.0"
    assert curve.max_stage_m == pytest.approx(4 * 0.3048, abs=1e-9)
    # a 512-segment polygon holds pi r^2 to 2.5e-5 (inscribed polygon, analytic)
    assert curve.area(np.array(0.0)) == pytest.approx(np.pi * 200.0**2, rel=1e-4)


def test_check_states_the_outline_approximation_once_and_plainly(tmp_path, capsys):
    gpd = pytest.importorskip("geopandas")
    from shapely.geometry import Point

    from lakebalance.cli import main

    layer = gpd.GeoDataFrame(geometry=[Point(0, 0).buffer(500.0, 256)], crs="EPSG:32633")
    layer.to_file(tmp_path / "outline.gpkg", layer="shore", driver="GPKG")
    pd = pytest.importorskip("pandas")
    idx = pd.date_range("2021-01-01", periods=30, freq="D")
    pd.DataFrame({"date": idx.strftime("%Y-%m-%d"), "value": 4.0}).to_csv(
        tmp_path / "stage.csv", index=False
    )
    (tmp_path / "site.toml").write_text(
        '[site]\nname = "Outline Lake (invented)"\n\n[storage]\nsource = "outline"\n'
        'file = "outline.gpkg"\nmax_depth = 8.0\noutline_stage = 8.0\n\n'
        '[series.stage]\nfile = "stage.csv"\nunits = "m"\n'
    )
    assert main(["check", str(tmp_path / "site.toml")]) == 0
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("warning: the storage relation is approximated")


def test_a_stage_below_the_survey_stops_the_balance_naming_the_day(tmp_path, capsys):
    """The default below = 'error': a day below the lowest surveyed level is one error that
    names the day and its stage (clamping would zero its storage change silently; common
    practice, no source)."""
    from _robust_sites import write_site

    from lakebalance.cli import main

    site = write_site(tmp_path)
    site.write_text(site.read_text().replace('below = "clamp"\n', ""))  # the default
    stage = tmp_path / "stage.csv"
    lines = stage.read_text().splitlines()
    date, _ = lines[5].split(",")
    lines[5] = f"{date},-0.5"
    stage.write_text("\n".join(lines) + "\n")
    assert main(["balance", str(site), "--draws", "0"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "below the lowest level" in err[0]
    assert f"first {date} at -0.5 m" in err[0] and "below = 'extend'" in err[0]
