"""``lakebalance check`` is the pre-flight of everything a site file names: storage table,
gaugings and outlet, levels, the day/month order of dates and the plausibility of units.

Every crafted bad file must be rejected by ``check`` with the one-line error that the later
command gives (``error: <file>:<line>:<column>: <what>``, exit 2; the command-line contract of
the project, common practice, no source); doubtful inputs give a warning that says what to do.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from lakebalance.cli import main

STAGE = "date,stage_m\n2021-01-01,10.00\n2021-01-02,10.01\n2021-01-03,10.02\n2021-01-04,10.03\n"
STORAGE = "level,surface\n9,0\n10,1000\n11,2000\n12,3000\n"


def site(tmp_path, *, storage=None, gaugings=None, extra="", stage=STAGE, stage_extra=""):
    (tmp_path / "s.csv").write_text(stage, encoding="utf-8")
    text = (
        '[site]\nname = "Invented Pond"\n\n[series.stage]\nfile = "s.csv"\nvalue = "stage_m"\n'
        f'units = "m"\n{stage_extra}\n'
    )
    if storage is not None:
        (tmp_path / "st.csv").write_text(storage, encoding="utf-8")
        text += '[storage]\nfile = "st.csv"\nstage = "level"\narea = "surface"\n'
        if "vol" in storage.splitlines()[0]:
            text += 'volume = "vol"\n'
    if gaugings is not None:
        (tmp_path / "g.csv").write_text(gaugings, encoding="utf-8")
        text += '[outlet]\ngaugings = "g.csv"\n'
    text += extra
    path = tmp_path / "site.toml"
    path.write_text(text, encoding="utf-8")
    return path


def run(capsys, *args):
    code = main(list(map(str, args)))
    out, err = capsys.readouterr()
    return code, out, err


def one_error(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), err
    return lines[0]


# ---- storage table ---------------------------------------------------------------------------------
# volumes in thousands of m³ declared as m³ (the integral of the areas by the frustum rule is
# 0, 333, 1830, 4327 m³; exact solids, common practice)
VOLUME_1000X_SMALL = "level,surface,vol\n9,0,0\n10,1000,0.333\n11,2000,1.83\n12,3000,4.33\n"


@pytest.mark.parametrize(
    ("body", "where", "words"),
    [
        ("level,surface\n9,0\n10,1000\n11,900\n12,3000\n", "st.csv:4:surface", "area decreases"),
        ("level,surface\n9,0\n10,1000\n10,2000\n12,3000\n", "st.csv:4:level", "repeated stage"),
        ("level,surface\n9,-5\n10,1000\n11,2000\n", "st.csv:2:surface", "negative area"),
        (VOLUME_1000X_SMALL, "st.csv:5:vol", "accept_volume_mismatch"),
    ],
)
def test_check_rejects_a_bad_storage_table_with_file_line_column(
    tmp_path, capsys, body, where, words
):
    path = site(tmp_path, storage=body)
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and where in line and words in line, line
    # the later command gives the same line
    code2, _, err2 = run(capsys, "storage", path)
    assert code2 == 2 and one_error(err2) == line


def test_volume_mismatch_accepted_by_its_key_is_a_warning(tmp_path, capsys):
    path = site(tmp_path, storage=VOLUME_1000X_SMALL)
    text = path.read_text().replace(
        'volume = "vol"\n', 'volume = "vol"\naccept_volume_mismatch = true\n'
    )
    path.write_text(text)
    code, out, err = run(capsys, "check", path)
    assert code == 0 and "OUTSIDE the tolerance" in err and "storage:" in out


def test_a_good_storage_table_and_levels_are_reported_and_an_odd_level_warns(tmp_path, capsys):
    path = site(tmp_path, storage=STORAGE, extra="[levels]\nspill = 11.5\nodd = 40.0\n")
    code, out, err = run(capsys, "check", path)
    assert code == 0
    assert "storage:  table st.csv, 9 to 12 m" in out and "spill = 11.5 m" in out
    assert "level 'odd' (40 m) lies outside the storage relation" in err
    code, out, _ = run(capsys, "check", path, "--json")
    doc = json.loads(out)
    assert doc["storage"]["max_stage_m"] == 12 and doc["levels"]["odd"]["inside_storage"] is False


# ---- gaugings and the outlet -----------------------------------------------------------------------
@pytest.mark.parametrize(
    ("body", "where", "words"),
    [
        ("date,stage,flow\n2020-01-01,1.0,2.0\n", "g.csv", "discharge"),  # missing column
        ("date,stage,discharge\n2020-01-01,1.0,2.0\n2020-02-01,1.5,3.0\n", "g.csv:3", "2 usable"),
        (
            "date,stage,discharge\n2020-01-01,1.0,2.0\n2020-02-01,1.0,2.5\n2020-03-01,1.0,2.2\n",
            "g.csv:3:stage",
            "one stage",
        ),
        (
            "date,stage,discharge\n2020-01-01,0.5,0\n2020-02-01,0.7,0\n2020-03-01,0.9,0.0\n",
            "g.csv:2:discharge",
            "every discharge is zero",
        ),
    ],
)
def test_check_rejects_bad_gaugings_as_the_rating_does(tmp_path, capsys, body, where, words):
    path = site(tmp_path, gaugings=body)
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and where in line and words in line, line
    code2, _, err2 = run(capsys, "rating", path)
    assert code2 == 2 and one_error(err2) == line


def test_check_rejects_an_outlet_definition_the_rating_rejects(tmp_path, capsys):
    body = "date,stage,discharge\n" + "".join(
        f"2020-{m:02d}-01,{h:.2f},{4 * (h - 0.2) ** 1.6:.4f}\n"
        for m, h in zip(range(1, 13), np.linspace(0.5, 2.0, 12))
    )
    path = site(tmp_path, gaugings=body, extra='form = "power"\nfixed = { q = 1.0 }\n')
    key_line = path.read_text().splitlines().index("fixed = { q = 1.0 }") + 1
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and "unknown parameter 'q'" in line
    assert f"site.toml:{key_line}:" in line  # the key's own line
    code2, _, err2 = run(capsys, "rating", path)
    assert one_error(err2) == line


def test_check_reads_the_comparison_survey_as_storage_does(tmp_path, capsys):
    path = site(tmp_path, storage=STORAGE)
    (tmp_path / "old.csv").write_text("level,surface\n9,0\n10,500\n10,900\n", encoding="utf-8")
    path.write_text(
        path.read_text().replace('area = "surface"\n', 'area = "surface"\ncompare = "old.csv"\n')
    )
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and "old.csv:4:level" in line and "repeated stage" in line


def test_check_fits_good_gaugings_and_says_so(tmp_path, capsys):
    rng = np.random.default_rng(2)
    h = np.linspace(0.5, 2.0, 14)
    q = 4 * (h - 0.2) ** 1.6 * np.exp(rng.normal(0, 0.03, h.size))
    body = "date,stage,discharge\n" + "".join(
        f"{d:%Y-%m-%d},{a:.3f},{b:.4f}\n"
        for d, a, b in zip(pd.date_range("2020-01-01", periods=14, freq="MS"), h, q)
    )
    code, out, _ = run(capsys, "check", site(tmp_path, gaugings=body))
    assert code == 0 and "outlet:   power rating fitted to 14 gaugings" in out


# ---- day/month order -----------------------------------------------------------------------------
DAY_FIRST = "date,stage_m\n05/01/2021,10.00\n06/01/2021,10.01\n13/01/2021,10.02\n14/01/2021,10.03\n"


def test_undeclared_day_first_dates_are_inferred_and_said(tmp_path, capsys):
    path = site(tmp_path, stage=DAY_FIRST)
    code, out, _ = run(capsys, "check", path)
    assert code == 0
    assert "read day first, as '13/01/2021' shows" in out
    assert "[series.stage] dayfirst = true" in out
    assert "2021-01-05 to 2021-01-14" in out and "rejected: 0 rows" in out


def test_declared_order_contradicted_by_the_data_stops_naming_the_key(tmp_path, capsys):
    path = site(tmp_path, stage=DAY_FIRST, stage_extra="dayfirst = false\n")
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and "s.csv:4:" in line and "set [series.stage] dayfirst = true" in line


def test_month_first_data_declared_day_first_stops(tmp_path, capsys):
    body = "date,stage_m\n01/05/2021,10.00\n01/06/2021,10.01\n01/13/2021,10.02\n"
    path = site(tmp_path, stage=body, stage_extra="dayfirst = true\n")
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and "s.csv:4:" in line and "dayfirst = false" in line


def test_gaugings_dates_contradicting_their_order_stop_naming_the_outlet_key(tmp_path, capsys):
    body = "date,stage,discharge\n02/01/2020,1.0,2\n25/01/2020,1.5,3\n02/03/2020,2.0,5\n"
    path = site(tmp_path, gaugings=body, extra="dayfirst = false\n")
    code, _, err = run(capsys, "check", path)
    line = one_error(err)
    assert code == 2 and "g.csv:3:" in line and "[outlet] dayfirst = true" in line


def test_resolve_day_order_rules():
    """A field above 12 can only be a day (calendar fact); ISO dates say nothing of the order."""
    from lakebalance.errors import InputError
    from lakebalance.io.dates import resolve_day_order

    assert resolve_day_order(["2021-01-13", "2021-02-01"], None, key="k") == (False, None)
    order, note = resolve_day_order(["01/02/2021", "03/04/2021"], None, key="k")
    assert order is False and "not told by the dates" in note and "set k" in note
    assert resolve_day_order(["01/02/2021", "03/04/2021"], True, key="k") == (True, None)
    order, note = resolve_day_order(["01/02/2021", "03/14/2021"], None, key="k")
    assert order is False and "month first" in note
    with pytest.raises(InputError, match="both day/month orders"):
        resolve_day_order(["13/01/2021", "01/14/2021"], None, key="k")


# ---- units ------------------------------------------------------------------------------------------
def test_a_flow_typed_in_millilitres_per_day_warns_naming_the_intended_unit(tmp_path, capsys):
    """pint reads 'ml' as the millilitre: 10 ml/d is 1.2e-10 m³/s, far below any metered flow;
    read in ML/d it is 0.12 m³/s."""
    path = site(tmp_path)
    (tmp_path / "q.csv").write_text(
        "date,q\n" + "".join(f"2021-01-{d:02d},{10 + d}\n" for d in range(1, 11)),
        encoding="utf-8",
    )
    path.write_text(
        path.read_text() + '[series.inflow]\nfile = "q.csv"\nvalue = "q"\nunits = "ml/d"\n'
    )
    code, out, err = run(capsys, "check", path)
    assert code == 0
    assert "read in 'ml/d'" in err and "'ML/d' intended?" in err and "case-sensitive" in err


def test_a_stage_in_feet_declared_as_metres_warns_against_the_storage_relation(tmp_path, capsys):
    feet = "date,stage_m\n" + "".join(
        f"2021-01-{d:02d},{(10 + 0.01 * d) / 0.3048:.3f}\n" for d in range(1, 11)
    )
    path = site(tmp_path, stage=feet, storage=STORAGE)
    code, _, err = run(capsys, "check", path)
    assert code == 0
    assert "lies wholly outside the storage relation (9 to 12 m)" in err
    assert "read in 'ft' it would lie inside" in err


def test_unit_check_is_quiet_on_plausible_series_and_names_rain_in_metres():
    from lakebalance.unitcheck import intended_unit

    rng = np.random.default_rng(0)
    flows = rng.uniform(0.5, 30.0, 200)  # m³/s
    assert intended_unit("inflow", flows, "m**3/s") is None
    rain_m = rng.gamma(0.8, 0.006, 200)  # daily rain, m (a few mm)
    assert intended_unit("rain", rain_m, "mm") is None
    # the same numbers typed as mm while they were m: a thousand times too small
    note = intended_unit("rain", rain_m * 1e-3, "mm")
    assert note is not None and "'m' intended?" in note


def _gaugings_text(h, q):
    dates = pd.date_range("2020-01-01", periods=len(h), freq="MS")
    return "date,stage,discharge\n" + "".join(
        f"{d:%Y-%m-%d},{a:.3f},{b:.6g}\n" for d, a, b in zip(dates, h, q)
    )


def test_gaugings_in_millilitres_per_day_and_stages_in_feet_warn(tmp_path, capsys):
    """The gaugings get the same unit checks as the series: a discharge typed 'ml/d' for
    'ML/d', and gauging stages in feet declared as metres against the storage relation."""
    h = np.linspace(10.2, 11.8, 14)
    q_mld = 86.4 * 4 * (h - 10.0) ** 1.6  # ML/d (1 m³/s = 86.4 ML/d)
    path = site(tmp_path, gaugings=_gaugings_text(h, q_mld), storage=STORAGE)
    path.write_text(path.read_text() + 'discharge_units = "ml/d"\n')
    code, _, err = run(capsys, "check", path)
    assert code == 0 and "gauged discharge read in 'ml/d'" in err and "'ML/d' intended?" in err
    path2 = site(
        tmp_path, gaugings=_gaugings_text(h / 0.3048, 4 * (h - 10.0) ** 1.6), storage=STORAGE
    )
    code, _, err = run(capsys, "check", path2)
    assert code == 0 and "gauging stages read in 'm'" in err and "'ft' it would lie inside" in err


def test_a_damaged_date_cell_parsed_as_year_minus_5_is_a_rejected_row(tmp_path, capsys):
    """A cell cut to '-05' parses as the year -5, outside what pandas holds in nanoseconds
    (1677-2262); it must be a rejected row, not a crash (found by tests/test_io_properties.py)."""
    body = STAGE.replace("2021-01-03,10.02\n", "2021-0\n-05,10.02\n")
    code, out, _ = run(capsys, "check", site(tmp_path, stage=body))
    assert code == 0 and "rejected: 2 rows" in out
