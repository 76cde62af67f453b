"""The filing archive: each filing lists exactly the earlier figures that changed, and why.

The reference for "what changed" is the balance itself: two analyses of the same simulated lake
(tests/lakefamilies.py, invented), before and after the change, compared term by term here,
independently of the archive's code; the archive must name exactly those years and terms. The
causes follow from what was changed and from the physics of the balance (common practice, no
source): a new gauging refits the rating, so it can move the outlet outflow of every year but
never the storage change; a correction of the stage gauge from a date moves the figures of the
water years from that date on only; a rewritten inflow file moves the inflow and the closing
terms (residual, closure), not the outflow.

SQLite is read back with the standard library's :mod:`sqlite3`, as any SQLite tool would.
"""

from __future__ import annotations

import json
import math
import sqlite3

import numpy as np
import pandas as pd
import pytest
from conftest import DEMO
from lakefamilies import FAMILIES, outflow_m3s, simulate

from lakebalance.analysis import open_site
from lakebalance.display import Formatter
from lakebalance.report.archive import (
    ARCHIVE_FILE,
    TERMS,
    figures_of,
    prepare_filing,
    read_filings,
    read_restatements,
)
from lakebalance.report.provenance import provenance

SEED = 31


def _file(site_path, archive, seed=SEED):
    """File one analysis of ``site_path`` into ``archive``; returns (filing, lake)."""
    lake = open_site(site_path, seed=seed, draws=20)
    prov = provenance(lake.site, {"balance": seed}).to_dict()
    year = max(y for y, _ in figures_of(lake))
    filing = prepare_filing(archive, lake, year, prov, Formatter())
    filing.record()
    return filing, lake


def _changed(lake_a, lake_b) -> set[tuple[int, str]]:
    """(water year, term) whose value differs between two analyses, from their water-year
    tables directly."""
    a, b = lake_a.balance.water_years(), lake_b.balance.water_years()
    out = set()
    for year in a.index.intersection(b.index):
        for term in TERMS:
            x, y = float(a.loc[year, term]), float(b.loc[year, term])
            if math.isnan(x) and math.isnan(y):
                continue
            if math.isnan(x) != math.isnan(y) or abs(x - y) > 1e-9 * max(1.0, abs(x), abs(y)):
                out.add((int(year), term))
    return out


@pytest.fixture(scope="module")
def filings(tmp_path_factory):
    """A simulated lake filed three times: as simulated; with one more gauging and an accepted
    stage correction; with its inflow file rewritten."""
    root = tmp_path_factory.mktemp("lake")
    archive = tmp_path_factory.mktemp("archive")
    lake = simulate("flow_through", SEED, root, years=3)
    first, lake1 = _file(lake.site_file, archive)
    # a new gauging: at a high stage of the record, 15 % above the true rating
    gaugings = pd.read_csv(root / "gaugings.csv")
    stage = float(np.quantile(gaugings["stage"], 0.9))
    q = float(outflow_m3s(FAMILIES["flow_through"], np.array([stage]))[0]) * 1.15
    extra = pd.DataFrame({"date": ["2004-06-15"], "stage": [stage], "discharge": [round(q, 4)]})
    pd.concat([gaugings, extra]).sort_values("date").to_csv(root / "gaugings.csv", index=False)
    # an accepted correction of the stage gauge from the middle of water year 2003
    with open(lake.site_file, "a", encoding="utf-8") as fh:
        fh.write(
            '\n[[correction]]\nseries = "stage"\nstart = 2003-04-01\nvalue = 0.02\n'
            'reason = "gauge board reset found by the level survey"\n'
        )
    second, lake2 = _file(lake.site_file, archive)
    # the inflow file rewritten: 5 % more in water year 2002 only
    inflow = pd.read_csv(root / "inflow.csv")
    in_2002 = (inflow["date"] >= "2001-10-01") & (inflow["date"] <= "2002-09-30")
    inflow.loc[in_2002, "value"] = (inflow.loc[in_2002, "value"] * 1.05).round(4)
    inflow.to_csv(root / "inflow.csv", index=False)
    third, lake3 = _file(lake.site_file, archive)
    return {
        "archive": archive,
        "filings": (first, second, third),
        "lakes": (lake1, lake2, lake3),
    }


def test_first_filing_restates_nothing(filings):
    first = filings["filings"][0]
    assert first.previous is None and first.restatements == ()
    assert first.to_dict()["previous_filed_utc"] is None


def test_gauging_and_correction_restate_exactly_what_changed(filings):
    """The second filing names exactly the (year, term) pairs whose figures changed."""
    lake1, lake2, _ = filings["lakes"]
    second = filings["filings"][1]
    expected = _changed(lake1, lake2)
    assert expected, "the changes moved nothing: the check would be empty"
    named = {(r.water_year, r.term) for r in second.restatements}
    assert named == expected
    for r in second.restatements:
        assert r.change == pytest.approx(r.after - r.before)


def test_causes_follow_what_was_changed(filings):
    """A gauging moves outflow in every year (never the storage change); the stage correction
    moves only the water years from its start (2003 on), and is named only there."""
    second = filings["filings"][1]
    by = {(r.water_year, r.term): r.cause for r in second.restatements}
    years = {y for y, _ in by}
    assert {2002, 2003} <= years
    assert ("2002", "storage_change_m3") not in {(str(y), t) for y, t in by}
    assert (2002, "outflow_m3") in by
    for (year, term), cause in by.items():
        if term == "outflow_m3" or term in ("residual_m3", "closure_error_pct"):
            assert "new gaugings (1 more: " in cause, (year, term, cause)
        if year < 2003:
            assert "accepted correction" not in cause, (year, term, cause)
            assert term != "storage_change_m3", (year, term)
        if term == "storage_change_m3":
            assert "accepted correction: stage +0.02 from 2003-04-01" in cause
            assert "gaugings" not in cause


def test_changed_input_file_is_named_by_hash(filings):
    """The rewritten inflow file: only inflow and the closing terms of water year 2002 move,
    and the cause names the input and both hashes."""
    _, lake2, lake3 = filings["lakes"]
    third = filings["filings"][2]
    expected = _changed(lake2, lake3)
    assert {(r.water_year, r.term) for r in third.restatements} == expected
    assert {t for _, t in expected} <= {"inflow_m3", "residual_m3", "residual_mm",
                                        "closure_error_pct"}  # fmt: skip
    assert {y for y, _ in expected} == {2002}
    old = next(i for i in third.previous["inputs"] if i["what"] == "series inflow")
    for r in third.restatements:
        assert r.cause.startswith("changed input: series inflow (SHA-256 ")
        assert old["sha256"][:12] in r.cause


def test_archive_reads_back_with_sqlite(filings):
    """One row per site, water year, term and filing with the provenance hash; restatements
    stored with their filing; the index lists the site."""
    archive = filings["archive"]
    con = sqlite3.connect(archive / ARCHIVE_FILE)
    try:
        rows = con.execute(
            "SELECT filing_id, site, water_year, term, COUNT(*), MIN(provenance_sha256) "
            "FROM figure GROUP BY filing_id, site, water_year, term"
        ).fetchall()
        assert rows and all(n == 1 for *_, n, _ in rows)
        hashes = dict(con.execute("SELECT filing_id, provenance_sha256 FROM filing").fetchall())
        assert all(h == hashes[fid] for fid, *_, h in rows)
        assert len(set(hashes.values())) == 3  # every filing rests on other inputs
    finally:
        con.close()
    filed = read_filings(archive)
    assert [f["filing_id"] for f in filed] == [1, 2, 3]
    stored = read_restatements(archive, 2)
    assert {(r["water_year"], r["term"]) for r in stored} == {
        (r.water_year, r.term) for r in filings["filings"][1].restatements
    }
    index = pd.read_csv(archive / "index.csv")
    assert len(index) == 1 and index.loc[0, "filings"] == 3
    assert index.loc[0, "restated_figures"] == len(filings["filings"][2].restatements)
    year = int(index.loc[0, "water_year"])
    w = filings["lakes"][2].balance.water_years()
    assert index.loc[0, "inflow_m3"] == pytest.approx(float(w.loc[year, "inflow_m3"]), rel=1e-12)
    assert index.loc[0, "previous_year_inflow_m3"] == pytest.approx(
        float(w.loc[year - 1, "inflow_m3"]), rel=1e-12
    )
    assert (archive / "index.html").read_text(encoding="utf-8").count("<tr>") == 2


def test_identical_demo_filing_restates_nothing(tmp_path):
    """The demo report filed twice with the same inputs: the second filing lists no
    restatement, in its result, its summary.json and its HTML."""
    from lakebalance.report.build import make_report

    archive = tmp_path / "archive"
    kw = {"seed": 5, "draws": 10, "members": 10, "pdf": False, "file_to": archive}
    make_report(DEMO / "site.toml", tmp_path / "one", **kw)
    second = make_report(DEMO / "site.toml", tmp_path / "two", **kw)
    assert second.filing["previous_filed_utc"] is not None
    assert second.filing["restatements"] == []
    doc = json.loads((tmp_path / "two" / "summary.json").read_text(encoding="utf-8"))
    assert doc["filing"]["restatements"] == []
    assert "No earlier year's figure changed" in (tmp_path / "two" / "report.html").read_text(
        encoding="utf-8"
    )
    assert any("0 earlier figures restated" in m for m in second.messages)
