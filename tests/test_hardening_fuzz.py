"""Fuzzing of the site-file loader and the workbook and WaterML readers (issue 18).

Random mutations of the demo's files (bytes replaced, inserted, deleted; XML parts of a workbook
mutated inside an intact container; the container itself damaged). Whatever the mutation, the
loader and readers either succeed or raise a :class:`~lakebalance.errors.LakebalanceError`
(one line at the CLI): any other exception is a bug. Kept quick: a few tens of examples each,
on shortened copies of the demo files (the first rows), no deadline.
"""

from __future__ import annotations

import io
import re
import warnings
import zipfile
from pathlib import Path

from conftest import DEMO
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import lakebalance as lb
from lakebalance.errors import LakebalanceError

FUZZ = settings(
    max_examples=30,
    deadline=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)
TOKENS = [b"[", b"]", b"{", b"}", b"=", b'"', b"'", b"\n", b"#", b"<", b">", b"/", b"&", b"\x00",
          b"\xff", b"<!DOCTYPE x>", b"<![CDATA[", b"-1e400", b"nan", b"9" * 40]  # fmt: skip


@st.composite
def mutations(draw: st.DrawFn, size: int) -> list[tuple[int, int, bytes]]:
    """A few (position, bytes to delete, bytes to insert) edits of a file of ``size`` bytes."""
    edits = []
    for _ in range(draw(st.integers(1, 4))):
        at = draw(st.integers(0, max(0, size - 1)))
        cut = draw(st.integers(0, 64))
        new = draw(st.one_of(st.sampled_from(TOKENS), st.binary(max_size=16)))
        edits.append((at, cut, new))
    return edits


def _apply(data: bytes, edits: list[tuple[int, int, bytes]]) -> bytes:
    for at, cut, new in edits:
        at = min(at, len(data))
        data = data[:at] + new + data[at + cut :]
    return data


def _no_traceback(action) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            action()
        except LakebalanceError:
            pass


# ---- the site file -------------------------------------------------------------------------
SITE = (DEMO / "site.toml").read_bytes()


@FUZZ
@given(edits=mutations(len(SITE)))
def test_site_loader_never_raises_anything_but_its_errors(tmp_path_factory, edits):
    folder = tmp_path_factory.mktemp("toml")
    path = folder / "site.toml"
    path.write_bytes(_apply(SITE, edits))
    _no_traceback(lambda: lb.load_site(path))


# ---- workbooks -------------------------------------------------------------------------------
def _small_workbook() -> bytes:
    """The demo's meter workbook cut to its first 60 rows (same sheet, same columns)."""
    import openpyxl

    src = openpyxl.load_workbook(DEMO / "meters" / "withdrawals.xlsx", read_only=True)
    ws_src = src["Meter readings"]
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Meter readings"
    for row in ws_src.iter_rows(max_row=60, values_only=True):
        ws.append(list(row))
    src.close()
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


WORKBOOK = _small_workbook()
with zipfile.ZipFile(io.BytesIO(WORKBOOK)) as _z:
    PARTS = {i.filename: _z.read(i) for i in _z.infolist()}
XML_PARTS = sorted(n for n in PARTS if n.endswith((".xml", ".rels")))


def _read_workbook(path: Path) -> None:
    from lakebalance.io.excel import read_excel_table

    read_excel_table(
        path,
        {"date": "Day", "value": "Volume m3"},
        what="series.withdrawal",
        sheet="Meter readings",
    )


@FUZZ
@given(part=st.sampled_from(XML_PARTS), data=st.data())
def test_workbook_reader_with_mutated_xml_parts(tmp_path_factory, part, data):
    edits = data.draw(mutations(len(PARTS[part])))
    path = tmp_path_factory.mktemp("xlsx") / "w.xlsx"
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, body in PARTS.items():
            z.writestr(name, _apply(body, edits) if name == part else body)
    _no_traceback(lambda: _read_workbook(path))


@FUZZ
@given(edits=mutations(len(WORKBOOK)))
def test_workbook_reader_with_a_damaged_container(tmp_path_factory, edits):
    path = tmp_path_factory.mktemp("xlsx") / "w.xlsx"
    path.write_bytes(_apply(WORKBOOK, edits))
    _no_traceback(lambda: _read_workbook(path))


# ---- WaterML -------------------------------------------------------------------------------
def _small_waterml() -> bytes:
    """The demo's WaterML document with only its first 40 points."""
    text = (DEMO / "gauges" / "wrenholt_creek_wml2.xml").read_text(encoding="utf-8")
    points = list(re.finditer(r"<wml2:point>.*?</wml2:point>\s*", text, flags=re.S))
    assert len(points) > 40
    return (text[: points[40].start()] + text[points[-1].end() :]).encode("utf-8")


WATERML = _small_waterml()


@FUZZ
@given(edits=mutations(len(WATERML)))
def test_waterml_series_through_the_whole_reading(tmp_path_factory, edits):
    folder = tmp_path_factory.mktemp("wml")
    (folder / "q.xml").write_bytes(_apply(WATERML, edits))
    site = folder / "site.toml"
    site.write_text(
        '[site]\nname = "Fuzz (invented)"\n\n[series.inflow]\nfile = "q.xml"\nunits = "m3/s"\n'
    )
    _no_traceback(lambda: lb.open_site(site).records)


def test_the_fuzzed_files_are_readable_unmutated(tmp_path):
    """The starting points are valid, so that a mutation is what the tests exercise."""
    (tmp_path / "w.xlsx").write_bytes(WORKBOOK)
    _read_workbook(tmp_path / "w.xlsx")
    (tmp_path / "q.xml").write_bytes(WATERML)
    site = tmp_path / "site.toml"
    site.write_text('[site]\nname = "Fuzz"\n\n[series.inflow]\nfile = "q.xml"\nunits = "m3/s"\n')
    assert len(lb.open_site(site).records.daily) == 40
    lb.load_site(DEMO / "site.toml")
