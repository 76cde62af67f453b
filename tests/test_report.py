"""The annual report of one site: valid, self-contained HTML whose numbers equal its JSON and CSV.

One demo report is made through the command line (``lakebalance report``) and a second one, with
the same seed, through the Python API; the module shares both between its tests. Small Monte Carlo
sizes keep the module to seconds: the checks are about the report, not the statistics.

Outside references used here:

- WHATWG HTML Living Standard: §13.1.1 (the DOCTYPE ``<!DOCTYPE html>``), §13.1.2 (the list of void
  elements), §3.2.6.2 (an ``id`` is unique in its document), §2.3.2 (attribute names unique within
  an element). Checked with the standard library's ``html.parser`` tokenizer and with lxml.
- PNG (ISO/IEC 15948:2003, §5.2): the 8-byte signature ``89 50 4E 47 0D 0A 1A 0A``.
- RFC 2397 (the ``data:`` URL scheme) for embedded figures.
- FIPS 180-4 / NIST CSRC example "abc" for SHA-256 of the provenance (digest from the NIST
  example, quoted from memory; also cross-checked with :mod:`hashlib`).
"""

from __future__ import annotations

import base64
import csv
import hashlib
import io
import json
import math
import re
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest
from conftest import DEMO, ROOT

SEED = 4242
DRAWS = 50
MEMBERS = 50
SITE = DEMO / "site.toml"

#: WHATWG HTML §13.1.2: elements that have no end tag.
VOID_ELEMENTS = frozenset("area base br col embed hr img input link meta source track wbr".split())


def _cli(*args: str, timeout: float = 600) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "lakebalance", *args],
        capture_output=True,
        text=True,
        timeout=timeout,
        cwd=ROOT,
    )


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """Two reports of the demo with the same seed: one by the command line, one by the API."""
    from lakebalance.report.build import make_report

    cli_dir = tmp_path_factory.mktemp("report_cli")
    proc = _cli(
        "report",
        str(SITE),
        "--out",
        str(cli_dir),
        "--seed",
        str(SEED),
        "--draws",
        str(DRAWS),
        "--members",
        str(MEMBERS),
    )
    api_dir = tmp_path_factory.mktemp("report_api")
    result = make_report(SITE, api_dir, seed=SEED, draws=DRAWS, members=MEMBERS, pdf=False)
    return {"cli": cli_dir, "proc": proc, "api": api_dir, "result": result}


@pytest.fixture(scope="module")
def out(runs) -> Path:
    proc = runs["proc"]
    assert proc.returncode == 0, proc.stderr
    return runs["cli"]


@pytest.fixture(scope="module")
def html_text(out) -> str:
    return (out / "report.html").read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def doc(html_text):
    import lxml.html

    return lxml.html.document_fromstring(html_text)


def _no_nan(token: str):
    raise AssertionError(f"summary.json holds {token}, which JSON does not allow (RFC 8259 §6)")


@pytest.fixture(scope="module")
def summary(out) -> dict:
    """``summary.json``, parsed strictly: NaN and Infinity are not JSON."""
    return json.loads((out / "summary.json").read_text(encoding="utf-8"), parse_constant=_no_nan)


# --------------------------------------------------------------------------------------------
# Files and the command line
# --------------------------------------------------------------------------------------------
def test_report_command_writes_every_file(runs, out, summary):
    """``lakebalance report SITE --out DIR``: exit 0, HTML, JSON, XLSX and one CSV per table."""
    assert "report:" in runs["proc"].stdout
    for name in ("report.html", "summary.json", "tables.xlsx"):
        assert (out / name).is_file() and (out / name).stat().st_size > 0, name
    assert summary["tables"], "the summary holds no tables"
    for table_id in summary["tables"]:
        assert (out / f"{table_id}.csv").is_file(), table_id
    # the annual and monthly tables are the core of an annual report
    assert {"annual", "monthly"} <= set(summary["tables"])
    # no temporary files left behind by the write-then-rename
    assert not [p.name for p in out.iterdir() if p.name.endswith(".tmp")]


def test_bad_site_path_is_one_error_line(tmp_path):
    """A site file that does not exist: exit 2 and exactly one ``error:`` line naming it
    (the project's command-line contract; common practice, no source)."""
    missing = tmp_path / "no_such_site.toml"
    proc = _cli("report", str(missing), "--out", str(tmp_path / "out"))
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert lines[0].startswith("error: ") and "no_such_site.toml" in lines[0]
    assert "Traceback" not in proc.stderr
    assert not (tmp_path / "out" / "report.html").exists()


def test_unknown_water_year_is_an_error(tmp_path):
    """Asking for a water year outside the record is an error, not an empty report."""
    proc = _cli("report", str(SITE), "--out", str(tmp_path), "--year", "1850")
    assert proc.returncode == 2
    assert proc.stderr.strip().startswith("error: ")
    assert "1850" in proc.stderr


def test_demo_command(tmp_path):
    """``lakebalance demo --out DIR`` makes the full report of the bundled demo."""
    proc = _cli("demo", "--out", str(tmp_path), "--seed", str(SEED))
    assert proc.returncode == 0, proc.stderr
    assert (tmp_path / "report.html").is_file()
    doc = json.loads((tmp_path / "summary.json").read_text(encoding="utf-8"))
    assert doc["site"].startswith("Vessilow Reservoir")
    assert doc["provenance"]["seeds"]["balance"] == SEED


# --------------------------------------------------------------------------------------------
# Valid, self-contained HTML
# --------------------------------------------------------------------------------------------
class _StrictChecker(HTMLParser):
    """Tokenises with ``html.parser`` and records what a strict HTML5 document must not have."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[tuple[str, tuple[int, int]]] = []
        self.problems: list[str] = []
        self.ids: dict[str, tuple[int, int]] = {}
        self.doctypes: list[str] = []
        self.elements: list[str] = []

    def handle_decl(self, decl: str) -> None:
        self.doctypes.append(decl)

    def _attrs(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        names = [a for a, _ in attrs]
        if len(names) != len(set(names)):
            self.problems.append(f"duplicate attribute on <{tag}> at {self.getpos()}")
        for name, value in attrs:
            if name == "id":
                if value in self.ids:
                    self.problems.append(f"duplicate id '{value}' at {self.getpos()}")
                self.ids[value or ""] = self.getpos()

    def handle_starttag(self, tag: str, attrs) -> None:
        self.elements.append(tag)
        self._attrs(tag, attrs)
        if tag not in VOID_ELEMENTS:
            self.stack.append((tag, self.getpos()))

    def handle_startendtag(self, tag: str, attrs) -> None:
        self.elements.append(tag)
        self._attrs(tag, attrs)
        if tag not in VOID_ELEMENTS:
            self.problems.append(f"self-closing non-void <{tag}/> at {self.getpos()}")

    def handle_endtag(self, tag: str) -> None:
        if tag in VOID_ELEMENTS:
            self.problems.append(f"end tag of void element </{tag}> at {self.getpos()}")
            return
        if not self.stack:
            self.problems.append(f"stray </{tag}> at {self.getpos()}")
            return
        open_tag, where = self.stack.pop()
        if open_tag != tag:
            self.problems.append(f"<{open_tag}> opened at {where} closed by </{tag}>")


def _strict_check(text: str) -> _StrictChecker:
    checker = _StrictChecker()
    checker.feed(text)
    checker.close()
    return checker


def test_strict_checker_catches_errors():
    """The checker itself: a misnested, unclosed document with a duplicate id is caught."""
    bad = _strict_check('<!DOCTYPE html><html><body><p id="a"><b>x</p><p id="a"></body>')
    assert bad.problems and bad.stack
    good = _strict_check('<!DOCTYPE html><html><body><p id="a">x<br></p></body></html>')
    assert not good.problems and not good.stack


def test_html_is_well_formed(html_text):
    """Every element closed and properly nested, ids unique, one HTML5 DOCTYPE (WHATWG HTML
    §13.1.1, §13.1.2, §3.2.6.2, §2.3.2)."""
    checker = _strict_check(html_text)
    assert checker.doctypes == ["DOCTYPE html"]
    assert html_text.lstrip().lower().startswith("<!doctype html>")
    assert not checker.problems, checker.problems[:10]
    assert not checker.stack, f"unclosed: {checker.stack[:10]}"
    assert checker.elements[0] == "html"
    assert checker.elements.count("title") == 1
    assert checker.elements.count("body") == 1


def test_html_parses_with_lxml(html_text, doc):
    """lxml (libxml2) parses it into the expected document: language, charset, title, headings."""
    assert doc.tag == "html" and doc.get("lang") == "en"
    assert doc.xpath("//meta[@charset]")[0].get("charset").lower() == "utf-8"
    assert doc.findtext(".//title").strip()
    headings = [h.text_content().strip() for h in doc.iter("h2")]
    for needed in ("The year in brief", "Water balance", "Provenance"):
        assert needed in headings, headings


def test_html_is_self_contained(html_text, doc):
    """Nothing to fetch: no http(s) or protocol-relative src/href, no external scripts or
    stylesheets, every image a base64 PNG ``data:`` URL (RFC 2397; PNG signature from
    ISO/IEC 15948 §5.2) that decodes to a non-blank picture."""
    import matplotlib.image as mpimg
    import numpy as np

    for el in doc.iter():
        if not isinstance(el.tag, str):
            continue
        for attr in ("src", "href", "srcset", "poster", "data", "action"):
            value = (el.get(attr) or "").strip().lower()
            assert not value.startswith(("http:", "https:", "//", "ftp:")), (el.tag, value[:80])
    assert not doc.xpath("//script"), "a report needs no script"
    assert not doc.xpath("//link[@rel='stylesheet']")
    assert not re.search(r"@import|url\(\s*['\"]?(?!data:)", html_text, flags=re.I)
    images = doc.xpath("//img")
    assert len(images) >= 3, "expected the balance figures at least"
    signature = bytes([0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A])
    for img in images:
        src = img.get("src")
        assert src.startswith("data:image/png;base64,"), src[:40]
        assert img.get("alt"), "every figure has alternative text"
        png = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert png[:8] == signature
        pixels = mpimg.imread(io.BytesIO(png), format="png")
        assert pixels.ndim == 3 and pixels.shape[0] > 100 and pixels.shape[1] > 100
        assert float(np.std(pixels[..., :3])) > 0.02, "a blank figure"


def test_html_carries_the_cautions(doc, summary):
    """Dam safety, flood levels and public supply defer to licensed professionals and local
    rules (the project's binding rule for such outputs)."""
    from lakebalance.report.html import CAUTIONS

    text = " ".join(doc.text_content().split())
    for caution in CAUTIONS:
        assert " ".join(caution.split()) in text
    assert summary["cautions"] == list(CAUTIONS)
    joined = " ".join(CAUTIONS).lower()
    for word in ("dam safety", "flood levels", "public water supply", "licensed professionals"):
        assert word in joined


# --------------------------------------------------------------------------------------------
# Every number in the HTML equals the JSON and the CSV
# --------------------------------------------------------------------------------------------
DASH = "–"


def _html_tables(doc) -> dict[str, tuple[list[str], list[list[str]]]]:
    out = {}
    for t in doc.xpath("//table[@data-table]"):
        head = [th.text_content().strip() for th in t.xpath("./thead/tr/th")]
        rows = [
            [td.text_content().strip() for td in tr.xpath("./td")] for tr in t.xpath("./tbody/tr")
        ]
        out[t.get("data-table")] = (head, rows)
    return out


def _read_csv(path: Path) -> tuple[list[str], list[list[str]]]:
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    return rows[0], rows[1:]


def _parse(text: str) -> float:
    return float(text.replace(",", "").replace("%", "").strip())


def _shown(value, rule: dict) -> float | int | str | None:
    """The number a person should read for the JSON ``value`` under the JSON ``rule``, rounded
    here independently of lakebalance.display: significant digits with Python's ``g`` format,
    fixed decimals with :func:`round` (3 significant digits, 4 from 1,000 up, is the rule the
    report states)."""
    if value is None or isinstance(value, str | bool):
        return value
    kind = rule["kind"]
    if kind == "count":
        return int(round(value))
    if kind == "percent":
        return round(value, 1 if abs(value) < 10 else 0)
    x = value * rule["factor_from_si"]
    if rule["decimals"] is not None:
        return round(x, rule["decimals"])
    digits = rule["significant_digits"]
    if kind != "number" and abs(x) >= 1000:
        digits = 4
    return float(f"{x:.{digits}g}")


def _same_cell(html: str, value, csv_text: str, rule: dict) -> bool:
    """HTML text, JSON value and CSV text of one cell say the same thing: the CSV holds the JSON
    value at full precision, the HTML the value rounded by its column's stated rule."""
    if value is None:
        return html == DASH and csv_text == ""
    if isinstance(value, bool):
        return html == ("yes" if value else "no") and csv_text in ("True", "False", "")
    if isinstance(value, int | float):
        try:
            shown = _parse(html)
            return float(csv_text) == float(value) and shown == pytest.approx(
                _shown(value, rule), rel=1e-12, abs=1e-15
            )
        except ValueError:
            return False
    return html == str(value) and csv_text == str(value)


_VOLUME = {"kind": "volume", "factor_from_si": 1e-3, "decimals": None, "significant_digits": 3}


def test_same_cell_rejects_differences():
    """The comparison itself can fail: a wrong digit, a value not at full precision in the CSV,
    a blank, a unit not applied."""
    assert _same_cell("4,593", 4593462.0, "4593462.0", _VOLUME)
    assert not _same_cell("4,594", 4593462.0, "4593462.0", _VOLUME)
    assert not _same_cell("4,593", 4593462.0, "4593000.0", _VOLUME)
    assert not _same_cell("4,593,462", 4593462.0, "4593462.0", _VOLUME)
    assert not _same_cell("12", None, "", _VOLUME)
    assert _same_cell(DASH, None, "", _VOLUME)
    assert _same_cell("sill.C", "sill.C", "sill.C", _VOLUME)


#: Display factors from SI, from NIST SP 811 (2008) Appendix B: 1 ft = 0.3048 m (exact),
#: 1 acre-foot = 1.233489E+03 m³, 1 ft³/s = 2.831685E-02 m³/s, 1 in = 0.0254 m (exact),
#: 1 acre = 4.046873E+03 m²; SI volumes in thousand m³, areas in km², depths in mm.
NIST_FACTOR = {
    ("SI", "volume"): 1e-3,
    ("SI", "flow"): 1.0,
    ("SI", "area"): 1e-6,
    ("SI", "depth"): 1.0,
    ("SI", "length"): 1.0,
    ("US", "volume"): 1 / 1.233489e3,
    ("US", "flow"): 1 / 2.831685e-2,
    ("US", "area"): 1 / 4.046873e3,
    ("US", "depth"): 1 / 25.4,
    ("US", "length"): 1 / 0.3048,
}


def _check_factors(summary) -> None:
    system = summary["display_units"]
    for t in summary["tables"].values():
        for rule in t["display"]:
            kind = "depth" if rule["kind"] == "depth_rate" else rule["kind"]
            if (system, kind) in NIST_FACTOR:
                assert rule["factor_from_si"] == pytest.approx(
                    NIST_FACTOR[(system, kind)], rel=2e-6
                ), (system, rule)


def test_every_table_number_equals_json_and_csv(out, doc, summary):
    """Each HTML table cell is its JSON value rounded by the column's stated rule (in the stated
    display unit, whose factor from SI agrees with NIST SP 811); the CSV holds the JSON value at
    full precision (property over every number of the demo report)."""
    _check_factors(summary)
    shown = _html_tables(doc)
    assert set(shown) == set(summary["tables"])
    checked = 0
    for table_id, (head, rows) in shown.items():
        js = summary["tables"][table_id]
        csv_head, csv_rows = _read_csv(out / f"{table_id}.csv")
        assert js["columns"] == csv_head, table_id
        assert head == js["headers"], table_id
        assert len(rows) == len(js["rows"]) == len(csv_rows), table_id
        for r, (h_row, j_row, c_row) in enumerate(zip(rows, js["rows"], csv_rows, strict=True)):
            assert len(h_row) == len(j_row) == len(c_row) == len(head), (table_id, r)
            for c, (h, j, t) in enumerate(zip(h_row, j_row, c_row, strict=True)):
                assert _same_cell(h, j, t, js["display"][c]), (table_id, r, head[c], h, j, t)
                checked += isinstance(j, int | float) and not isinstance(j, bool)
    assert checked > 200, f"only {checked} numbers compared"


def test_headers_are_words_with_units(summary):
    """No header reads like code: no underscores, no scaled names (``1e3``), and every column
    with a unit in its SI name says its display unit in brackets."""
    for table_id, t in summary["tables"].items():
        for column, head, rule in zip(t["columns"], t["headers"], t["display"], strict=True):
            assert "_" not in head and "1e3" not in head, (table_id, head)
            if rule["kind"] in ("volume", "flow", "area", "depth", "length", "percent"):
                assert head.endswith(f"({rule['unit']})"), (table_id, column, head)


def test_one_display_unit_per_quantity(summary):
    """One report, one display unit for each kind of quantity."""
    seen: dict[str, set] = {}
    for t in summary["tables"].values():
        for rule in t["display"]:
            seen.setdefault(rule["kind"], set()).add(rule["unit"])
    for kind, units in seen.items():
        assert len(units) == 1, (kind, units)


def test_no_table_is_all_dashes(doc):
    """A table whose every value is missing is left out with its reason, never shown as dashes."""
    for head, rows in _html_tables(doc).values():
        for c in range(1, len(head)):
            column = [row[c] for row in rows]
            assert not rows or any(cell != DASH for cell in column), head[c]


def test_xlsx_sheets_equal_csv(out, summary):
    """The workbook holds the same tables as the CSV files (read back with openpyxl), to the 15
    significant digits a spreadsheet keeps."""
    import pandas as pd

    sheets = pd.read_excel(out / "tables.xlsx", sheet_name=None, engine="openpyxl")
    assert set(sheets) == set(summary["tables"])
    for table_id, frame in sheets.items():
        from_csv = pd.read_csv(out / f"{table_id}.csv")
        pd.testing.assert_frame_equal(
            frame, from_csv, check_dtype=False, check_exact=False, rtol=1e-14, obj=table_id
        )  # a spreadsheet number carries 15 significant digits (Excel specifications, from memory)


def test_key_numbers_equal_json_headline(out, doc, summary, runs):
    """The key-number tiles are the JSON headline rounded by their stated rule, in the report's
    display unit; the plain-words summary of the HTML says what the JSON says."""
    boxes = doc.xpath("//*[@data-key]")
    assert boxes, "no key numbers shown"
    head = summary["headline"]
    tiles = {t["key"]: t for t in summary["key_numbers"]}
    for box in boxes:
        key = box.get("data-key")
        assert head.get(key) is not None, key
        rule = tiles[key]["display"]
        shown = _parse(box.text_content())
        assert shown == pytest.approx(_shown(head[key], rule), rel=1e-12, abs=1e-15), key
        unit = box.getparent().xpath("./span[@class='unit']")
        assert unit and unit[0].text_content() == rule["unit"], key
    keys = {b.get("data-key") for b in boxes}
    assert {"closure_percent", "residual_m3"} <= keys
    paragraphs = [" ".join(p.text_content().split()) for p in doc.xpath("//section[@id='year']/p")]
    assert paragraphs[: len(summary["summary"])] == [
        " ".join(s.split()) for s in summary["summary"]
    ]
    # the annual table's row of the reported year carries the headline's residual exactly
    annual = summary["tables"]["annual"]
    row = next(r for r in annual["rows"] if r[0] == summary["water_year"])
    assert row[annual["columns"].index("residual_m3")] == head["residual_m3"]
    # the API's result carries the same headline as the file of the command-line run
    assert runs["result"].headline == head


# --------------------------------------------------------------------------------------------
# Reproducible: the same seed gives the same tables
# --------------------------------------------------------------------------------------------
def test_same_seed_gives_identical_tables(runs):
    """Two runs with one seed (command line and API): every CSV byte-identical and the JSON equal
    apart from the provenance's run time."""
    a, b = runs["cli"], runs["api"]
    names_a = sorted(p.name for p in a.glob("*.csv"))
    names_b = sorted(p.name for p in b.glob("*.csv"))
    assert names_a == names_b and names_a
    for name in names_a:
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
    ja = json.loads((a / "summary.json").read_text(encoding="utf-8"))
    jb = json.loads((b / "summary.json").read_text(encoding="utf-8"))
    ja["provenance"].pop("run_utc")
    jb["provenance"].pop("run_utc")
    assert ja == jb


def test_provenance(out, doc, summary):
    """Seeds, tool version and SHA-256 of the site file and of every input are recorded, equal
    to :mod:`hashlib` digests of the files, in the JSON and in the HTML."""
    from lakebalance import __version__
    from lakebalance.report.provenance import sha256_file

    prov = summary["provenance"]
    assert prov["tool_version"] == __version__ == summary["version"]
    assert prov["seeds"] == {"balance": SEED, "drawdown": SEED + 1}
    assert prov["site_sha256"] == hashlib.sha256(SITE.read_bytes()).hexdigest()
    assert len(prov["inputs"]) >= 10
    for item in prov["inputs"]:
        path = Path(item["path"])
        assert path.is_file(), path
        assert item["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest() == sha256_file(path)
    text = doc.text_content()
    assert prov["site_sha256"] in text
    for item in prov["inputs"]:
        assert item["sha256"] in text
        # shown relative to the site file's folder, never as an absolute local path
        assert (SITE.parent / item["relative_path"]).resolve() == Path(item["path"]).resolve()
        assert item["relative_path"] in text
        assert not Path(item["relative_path"]).is_absolute()
    assert str(ROOT) not in text, "an absolute local path in the HTML"
    libraries = " ".join(doc.xpath("//p[@id='libraries']")[0].text_content().split())
    for name, version in prov["libraries"].items():
        assert f"{name} {version}" in libraries
    assert f"balance = {SEED}" in " ".join(text.split())
    assert re.fullmatch(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\+00:00", prov["run_utc"])


def test_sha256_known_answer(tmp_path):
    """SHA-256 of "abc" (FIPS 180-4 example, NIST CSRC; digest from memory, cross-checked with
    hashlib) and of a file larger than one read chunk."""
    from lakebalance.report.provenance import sha256_file

    p = tmp_path / "abc.txt"
    p.write_bytes(b"abc")
    assert sha256_file(p) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    big = tmp_path / "big.bin"
    data = bytes(range(256)) * 9000  # 2.3 MB, more than the 1 MiB chunk
    big.write_bytes(data)
    assert sha256_file(big, chunk=1 << 20) == hashlib.sha256(data).hexdigest()


def test_report_is_finite_where_it_says_numbers(summary):
    """Headline numbers are finite numbers, text or null (the fixture already refused NaN and
    Infinity tokens, which JSON does not have: RFC 8259 §6)."""
    for key, value in summary["headline"].items():
        assert value is None or isinstance(value, int | float | str), key
        if isinstance(value, float):
            assert math.isfinite(value), key


def test_method_notes_are_with_the_provenance(doc):
    """How the numbers were computed (quadrature, Monte Carlo settings) is listed with the
    provenance, not in the balance section a client reads."""
    from lakebalance.report.build import is_method_note

    balance = " ".join(
        p.text_content() for p in doc.xpath("//section[@id='balance']/p[not(@class)]")
    )
    assert "quadrature" not in balance.lower() and "draws" not in balance.lower()
    listed = [li.text_content() for li in doc.xpath("//section[@id='provenance']//ul/li")]
    assert listed and all(is_method_note(n) for n in listed)
    assert any("quadrature" in n.lower() for n in listed)
    assert not is_method_note("46 of 6574 days have a missing term (residual left missing)")
