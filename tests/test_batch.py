"""Batch reports: many sites, a broken one among them, local processes and a Dask cluster.

The sites are copies of the invented demo reservoir in a temporary folder: one whose name is an
HTML script tag (it must show as text), one with its own seed, and one whose stage file is missing
(it must fail alone, with its error on the index page and in the index CSV).

Outside references: WHATWG HTML Living Standard §13.1.2.6 (text is escaped as ``&lt;``/``&gt;``
character references, so ``<script>`` in a name is text, not an element); the batch over a Dask
``distributed.LocalCluster`` is compared with the local run (an independent scheduler as the
reference for "same numbers wherever it runs"); pyproj for the register's projected points.
"""

from __future__ import annotations

import csv
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import DEMO, ROOT

SEED = 777
DRAWS = 50
MEMBERS = 50
HOSTILE = "<script>alert(1)</script>"
DATA_DIRS = ("gauges", "meters", "survey", "weather")


def _site_text(name: str, *, stage_file: str = "gauges/stage_daily.csv") -> str:
    text = (DEMO / "site.toml").read_text(encoding="utf-8")
    old_name = 'name = "Vessilow Reservoir (invented demo)"'
    assert old_name in text
    text = text.replace(old_name, f"name = {json.dumps(name)}")
    text = "\n".join(line for line in text.splitlines() if not line.startswith("title = "))
    old_stage = 'file = "gauges/stage_daily.csv"'
    assert old_stage in text
    return text.replace(old_stage, f'file = "{stage_file}"') + "\n"


@pytest.fixture(scope="module")
def sites(tmp_path_factory) -> dict[str, Path]:
    """Three site files beside one copy of the demo data (the demo folder is never written)."""
    root = tmp_path_factory.mktemp("register")
    for d in DATA_DIRS:
        shutil.copytree(DEMO / d, root / d)
    shutil.copy2(DEMO / "gaugings.csv", root / "gaugings.csv")
    paths = {
        "hostile": root / "hostile.toml",
        "second": root / "second.toml",
        "broken": root / "broken.toml",
    }
    paths["hostile"].write_text(_site_text(HOSTILE), encoding="utf-8")
    paths["second"].write_text(_site_text("Second invented lake"), encoding="utf-8")
    paths["broken"].write_text(
        _site_text("Broken invented lake", stage_file="gauges/no_such_stage.csv"), encoding="utf-8"
    )
    register = root / "register.csv"
    with open(register, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["site_file", "latitude", "longitude", "note"])
        w.writerow(["hostile.toml", "46.42", "15.37", "invented"])
        w.writerow(["second.toml", "46.50", "15.20", "invented"])
        w.writerow(["broken.toml", "", "", "invented, broken on purpose"])
    paths["register"] = register
    return paths


@pytest.fixture(scope="module")
def batch(sites, tmp_path_factory) -> dict:
    """The register through the command line on two local worker processes."""
    out = tmp_path_factory.mktemp("batch")
    proc = subprocess.run(
        [
            sys.executable,
            "-m",
            "lakebalance",
            "report",
            str(sites["register"]),
            "--out",
            str(out),
            "--workers",
            "2",
            "--seed",
            str(SEED),
            "--draws",
            str(DRAWS),
            "--members",
            str(MEMBERS),
        ],
        capture_output=True,
        text=True,
        timeout=600,
        cwd=ROOT,
    )
    return {"out": out, "proc": proc}


def _index_rows(out: Path) -> dict[str, dict[str, str]]:
    with open(out / "index.csv", newline="", encoding="utf-8") as fh:
        return {Path(r["site_file"]).stem: r for r in csv.DictReader(fh)}


def test_batch_finishes_despite_a_broken_site(batch):
    """One broken site: the batch still reports the others; exit code 2 says something failed."""
    proc = batch["proc"]
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    out = batch["out"]
    assert (out / "index.html").is_file() and (out / "index.csv").is_file()
    rows = _index_rows(out)
    assert set(rows) == {"hostile", "second", "broken"}
    assert rows["hostile"]["status"] == rows["second"]["status"] == "ok"
    assert rows["broken"]["status"] == "failed"
    assert "no_such_stage.csv" in rows["broken"]["error"]
    assert rows["hostile"]["error"] == rows["second"]["error"] == ""
    for stem in ("hostile", "second"):
        assert (out / rows[stem]["report"]).is_file()
        assert (out / stem / "summary.json").is_file()
    assert not (out / "broken" / "report.html").exists()
    assert "index:" in proc.stdout and "FAIL" in proc.stdout


def test_index_page_links_reports_and_lists_the_failure(batch):
    """The index links each good report (relative links that resolve), shows the failed site's
    error text, and embeds the site map as a PNG data URL."""
    import lxml.html

    out = batch["out"]
    doc = lxml.html.parse(str(out / "index.html")).getroot()
    links = [a.get("href") for a in doc.xpath("//table[@id='table-sites']//a")]
    assert sorted(links) == ["hostile/report.html", "second/report.html"]
    for href in links:
        assert (out / href).is_file()
    rows = _index_rows(out)
    failures = " ".join(li.text_content() for li in doc.xpath("//li"))
    assert rows["broken"]["error"] in " ".join(failures.split()) or rows["broken"]["error"] in (
        failures
    )
    status = [
        tr.xpath("./td")[1].text_content() for tr in doc.xpath("//table[@id='table-sites']//tr[td]")
    ]
    assert sorted(status) == ["failed", "ok", "ok"]
    imgs = doc.xpath("//img")
    assert imgs and all(i.get("src").startswith("data:image/png;base64,") for i in imgs)
    assert not doc.xpath("//script")


def test_index_numbers_equal_each_report(batch):
    """The headline numbers of index.csv equal each site's summary.json exactly; the HTML index
    shows them to its displayed precision."""
    import lxml.html

    out = batch["out"]
    rows = _index_rows(out)
    from lakebalance.batch import HEADLINE_COLUMNS

    doc = lxml.html.parse(str(out / "index.html")).getroot()
    html_rows = {}
    for tr in doc.xpath("//table[@id='table-sites']/tbody/tr"):
        cells = [td.text_content().strip() for td in tr.xpath("./td")]
        html_rows[cells[0]] = cells[2:]
    for stem in ("hostile", "second"):
        head = json.loads((out / stem / "summary.json").read_text(encoding="utf-8"))["headline"]
        site_name = json.loads((out / stem / "summary.json").read_text(encoding="utf-8"))["site"]
        shown = html_rows[site_name]
        for (key, _, _), cell in zip(HEADLINE_COLUMNS, shown, strict=True):
            value = head.get(key)
            text = rows[stem][key]
            if value is None:
                assert text == "" and cell == "–", key
                continue
            assert float(text) == float(value), key
            number = float(cell.replace(",", ""))
            decimals = len(cell.split(".")[1]) if "." in cell else 0
            assert abs(number - float(value)) <= 0.5 * 10.0**-decimals + 1e-9, (key, cell, value)


def test_script_name_is_text(batch):
    """A site named ``<script>alert(1)</script>`` is shown as text in its report and the index:
    escaped in the markup, no script element anywhere (WHATWG HTML §13.1.2.6)."""
    import lxml.html

    out = batch["out"]
    escaped = "&lt;script&gt;alert(1)&lt;/script&gt;"
    for page in (out / "index.html", out / "hostile" / "report.html"):
        raw = page.read_text(encoding="utf-8")
        assert HOSTILE not in raw, page
        assert escaped in raw, page
        doc = lxml.html.document_fromstring(raw)
        assert not doc.xpath("//script"), page
        assert HOSTILE in doc.text_content(), page
    report = lxml.html.parse(str(out / "hostile" / "report.html")).getroot()
    assert HOSTILE in report.findtext(".//title")
    assert HOSTILE in report.xpath("//h1")[0].text_content()


def test_write_index_escapes_names_and_errors(tmp_path):
    """Names and error messages with markup stay text on the index page (unit check)."""
    import lxml.html

    from lakebalance.batch import SiteOutcome, write_index

    outcomes = [
        SiteOutcome(
            site_file="/x/a.toml",
            name='<img src=x onerror="alert(2)">',
            ok=False,
            error="bad <b>value</b> & more",
        ),
        SiteOutcome(
            site_file="/x/b.toml",
            name="Plain & simple",
            ok=True,
            report=str(tmp_path / "b" / "report.html"),
            headline={"residual_m3": 12.5},
        ),
    ]
    page = write_index(outcomes, tmp_path)
    raw = page.read_text(encoding="utf-8")
    assert "<b>value</b>" not in raw and "&lt;b&gt;value&lt;/b&gt; &amp; more" in raw
    doc = lxml.html.document_fromstring(raw)
    assert not doc.xpath("//img"), "a name became an element"
    assert not doc.xpath("//b")
    assert "Plain & simple" in doc.text_content()
    rows = list(csv.DictReader(open(tmp_path / "index.csv", encoding="utf-8")))
    assert rows[0]["error"] == "bad <b>value</b> & more"
    assert rows[1]["residual_m3"] == "12.5"


def test_dask_cluster_gives_the_local_numbers(batch, sites, tmp_path):
    """The same sites on a Dask ``LocalCluster`` (2 processes, 1 thread each) give exactly the
    headline numbers of the local run, and the broken site fails there too."""
    distributed = pytest.importorskip("distributed", reason="Dask distributed is not installed")
    from lakebalance.batch import run_batch

    with (
        distributed.LocalCluster(
            n_workers=2,
            processes=True,
            threads_per_worker=1,
            dashboard_address=None,
            silence_logs=40,
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        result = run_batch(
            [sites["second"], sites["broken"]],
            tmp_path,
            seed=SEED,
            scheduler=client,
            options={"draws": DRAWS, "members": MEMBERS},
        )
    by_stem = {Path(o.site_file).stem: o for o in result.outcomes}
    assert by_stem["second"].ok and not by_stem["broken"].ok
    assert "no_such_stage.csv" in by_stem["broken"].error
    local = json.loads((batch["out"] / "second" / "summary.json").read_text(encoding="utf-8"))
    assert by_stem["second"].headline == local["headline"]
    for name in ("annual.csv", "monthly.csv"):
        assert (tmp_path / "second" / name).read_bytes() == (
            batch["out"] / "second" / name
        ).read_bytes()
    assert result.index is not None and result.index.is_file()


def test_report_one_never_raises(tmp_path):
    """A site file that cannot be read is a failed outcome naming the file, not an exception."""
    from lakebalance.batch import report_one

    outcome = report_one(tmp_path / "absent.toml", tmp_path / "out")
    assert not outcome.ok and outcome.report is None
    assert "absent.toml" in outcome.error
    assert outcome.seconds >= 0.0


def test_read_register_csv(sites, tmp_path):
    """Relative site files resolve from the register's folder; blank coordinates are None."""
    from lakebalance.batch import read_register

    rows = read_register(sites["register"])
    assert [p for p, _, _ in rows] == [
        sites["hostile"].resolve(),
        sites["second"].resolve(),
        sites["broken"].resolve(),
    ]
    assert rows[0][1:] == (46.42, 15.37)
    assert rows[2][1:] == (None, None)


def test_read_register_errors(tmp_path):
    """Register errors name the file, line and column (the project's InputError contract)."""
    from lakebalance.batch import read_register
    from lakebalance.errors import InputError

    no_column = tmp_path / "a.csv"
    no_column.write_text("path\nx.toml\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_register(no_column)
    assert info.value.line == 1 and "site_file" in str(info.value)
    bad_number = tmp_path / "b.csv"
    bad_number.write_text("site_file,latitude\nx.toml,46.1\ny.toml,north\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_register(bad_number)
    assert info.value.line == 3 and info.value.column == "latitude"
    empty = tmp_path / "c.csv"
    empty.write_text("site_file,latitude\nx.toml,46.0\n,46.1\n", encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_register(empty)
    assert info.value.line == 3 and info.value.column == "site_file"
    with pytest.raises(InputError):
        read_register(tmp_path / "missing.csv")


def test_read_register_geopackage(tmp_path):
    """A GeoPackage register in a projected CRS gives longitude/latitude of its points, equal to
    pyproj's inverse projection (EPSG:32633, UTM 33N)."""
    import geopandas as gpd
    from pyproj import Transformer
    from shapely.geometry import Point

    from lakebalance.batch import read_register

    to_utm = Transformer.from_crs(4326, 32633, always_xy=True)
    lonlat = [(15.37, 46.42), (14.9, 47.05)]
    pts = [Point(*to_utm.transform(lon, lat)) for lon, lat in lonlat]
    frame = gpd.GeoDataFrame({"site_file": ["one/site.toml", "two.toml"]}, geometry=pts, crs=32633)
    path = tmp_path / "register.gpkg"
    frame.to_file(path, driver="GPKG")
    rows = read_register(path)
    assert rows[0][0] == (tmp_path / "one" / "site.toml").resolve()
    for (_, lat, lon), (lon0, lat0) in zip(rows, lonlat, strict=True):
        assert lat == pytest.approx(lat0, abs=1e-9) and lon == pytest.approx(lon0, abs=1e-9)
