"""A report in US customary units: every number people read is in ft, acre-ft, cfs, in and acres,
each the JSON's SI value converted by the NIST SP 811 factor and rounded by its stated rule; the
figures' axes say the same units as the tables. The lake is simulated (tests/lakefamilies.py,
invented), with the US-customary gauges of the ``snowmelt_us`` family."""

from __future__ import annotations

import json

import lxml.html
import pytest
from lakefamilies import simulate
from test_report import _check_factors, _html_tables, _read_csv, _same_cell

from lakebalance.display import US, Formatter


@pytest.fixture(scope="module")
def us_report(tmp_path_factory):
    from lakebalance.report.build import make_report

    root = tmp_path_factory.mktemp("us_lake")
    lake = simulate("snowmelt_us", 12, root, years=3)
    with open(lake.site_file, "a", encoding="utf-8") as fh:
        fh.write('\n[report]\nunits = "US"\n')
    out = tmp_path_factory.mktemp("us_report")
    make_report(lake.site_file, out, draws=20, members=20, pdf=False)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    doc = lxml.html.parse(str(out / "report.html")).getroot()
    return out, summary, doc


def test_every_number_in_us_units_is_the_json_rounded(us_report):
    out, summary, doc = us_report
    assert summary["display_units"] == "US"
    _check_factors(summary)
    checked = 0
    for table_id, (head, rows) in _html_tables(doc).items():
        js = summary["tables"][table_id]
        _, csv_rows = _read_csv(out / f"{table_id}.csv")
        assert head == js["headers"]
        for h_row, j_row, c_row in zip(rows, js["rows"], csv_rows, strict=True):
            for c, (h, j, t) in enumerate(zip(h_row, j_row, c_row, strict=True)):
                assert _same_cell(h, j, t, js["display"][c]), (table_id, head[c], h, j)
                checked += isinstance(j, float)
    assert checked > 100
    units = {r["kind"]: r["unit"] for t in summary["tables"].values() for r in t["display"]}
    assert units["volume"] == "acre-ft" and units["length"] == "ft"
    assert not any("m³" in h for t in summary["tables"].values() for h in t["headers"])


def test_figures_say_the_tables_units():
    """Axis labels of the storage and rating figures in US units say acres, acre-ft, ft and
    cfs, as the tables' headers do."""
    import numpy as np

    from lakebalance.report.figures_storage import storage_figure
    from lakebalance.storage import storage_from_table

    curve = storage_from_table([0.0, 1.0, 2.0], [1.0e4, 2.0e4, 4.0e4])
    fig = storage_figure(curve, units=US)
    labels = [ax.get_xlabel() for ax in fig.axes] + [fig.axes[0].get_ylabel()]
    fmt = Formatter(US)
    assert f"({fmt.rule('area_m2').unit})" in labels[0]
    assert f"({fmt.rule('volume_m3').unit})" in labels[1]
    assert labels[2] == "stage (ft)"
    # the plotted area is in acres: 4.0e4 m² = 9.884 acres (1 acre = 4,046.873 m², NIST SP 811)
    x = fig.axes[0].lines[0].get_xdata()
    assert float(np.max(x)) == pytest.approx(4.0e4 / 4046.873, rel=1e-5)
