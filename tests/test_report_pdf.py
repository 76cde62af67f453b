"""The report on paper: the PDF made from the report's HTML with its print styles.

References outside the project:

- CSS Paged Media Module Level 3 (W3C): ``@page`` size (A4 = 210 mm × 297 mm, ISO 216), margin
  boxes, named pages, ``counter(page)`` and ``counter(pages)``; CSS 2.1 §17.2 ``table-header-group``
  (a header group repeats at the top of each page a table spans).
- ISO 32000 (PDF): the page's MediaBox in points of 1/72 in; read back with pypdf, a PDF library
  independent of the renderer, whose text extraction is the reader's view of what is printed.

The PDF is laid out by WeasyPrint; the test skips with its reason when the ``pdf`` extra is not
installed (the report then says why it wrote no PDF, checked here too).
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import DEMO, ROOT

from lakebalance.report.pdf import pdf_unavailable

pytestmark = pytest.mark.skipif(pdf_unavailable() is not None, reason=str(pdf_unavailable()))
pypdf = pytest.importorskip("pypdf", reason="pypdf reads the PDF back (test extra)")

SITE = DEMO / "site.toml"
A4_PT = (595.28, 841.89)  # 210 mm × 297 mm at 72 pt per inch (ISO 216)


def _words(text: str) -> str:
    """Text with all white space removed: line wrapping and hyphen-free breaks do not count."""
    import unicodedata

    return re.sub(r"\s+", "", unicodedata.normalize("NFKC", text))  # ligatures (ﬁ) as letters


@pytest.fixture(scope="module")
def made(tmp_path_factory) -> dict:
    """One demo report through the command line, with its PDF."""
    out = tmp_path_factory.mktemp("paper")
    proc = subprocess.run(
        [sys.executable, "-m", "lakebalance", "report", str(SITE), "--out", str(out),
         "--draws", "30", "--members", "30", "--seed", "11"],
        capture_output=True, text=True, timeout=900, cwd=ROOT,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert "paper:" in proc.stdout
    reader = pypdf.PdfReader(out / "report.pdf")
    texts = [p.extract_text() or "" for p in reader.pages]
    return {"out": out, "reader": reader, "texts": texts, "proc": proc}


def test_pdf_has_a_page_per_section_and_numbers_them(made):
    """Each section starts a page (plus the first page), no runaway page count, and every page
    says "page i of N"."""
    import lxml.html

    doc = lxml.html.parse(str(made["out"] / "report.html")).getroot()
    sections = len(doc.xpath("//section")) - 1  # the year in brief shares page one
    n = len(made["reader"].pages)
    assert sections + 1 <= n <= 4 * (sections + 1), (sections, n)
    for i, text in enumerate(made["texts"], start=1):
        assert f"page {i} of {n}" in " ".join(text.split()), i


def test_caution_on_page_one(made):
    """The cautions (dam safety, public supply, licensed professionals) are on page one."""
    from lakebalance.report.html import CAUTIONS

    first = _words(made["texts"][0])
    for caution in CAUTIONS:
        assert _words(caution) in first


def test_pages_are_a4_and_wide_tables_landscape(made):
    """Portrait A4 pages, and the wide annual table on a landscape A4 page (named page)."""
    sizes = [(float(p.mediabox.width), float(p.mediabox.height)) for p in made["reader"].pages]
    for w, h in sizes:
        assert sorted((round(w, 0), round(h, 0))) == [round(A4_PT[0]), round(A4_PT[1])]
    landscape = [i for i, (w, h) in enumerate(sizes) if w > h]
    assert landscape, "no landscape page"
    summary = json.loads((made["out"] / "summary.json").read_text(encoding="utf-8"))
    headers = summary["tables"]["annual"]["headers"]
    on = [i for i in landscape if _words(headers[-1]) in _words(made["texts"][i])]
    assert on, "the annual table is not on a landscape page"


def test_every_table_cell_is_printed_whole(made):
    """Every header and cell the HTML shows is in the PDF's text, whole (a cell cut at the page
    edge would lose characters), and so the PDF shows the same numbers as the HTML."""
    import lxml.html

    doc = lxml.html.parse(str(made["out"] / "report.html")).getroot()
    printed = _words(" ".join(made["texts"]))
    checked = 0
    for table in doc.xpath("//table[@data-table]"):
        for cell in table.xpath(".//th | .//td"):
            text = _words(cell.text_content())
            if text:
                assert text in printed, (table.get("data-table"), cell.text_content())
                checked += 1
    assert checked > 500, checked
    for tile in doc.xpath("//*[@data-key]"):
        assert _words(tile.text_content()) in printed


def test_tables_fit_the_page_width(made):
    """Laid out again by WeasyPrint: no table box reaches past the right edge of its page's
    content area (the cut-cell check on the geometry itself)."""
    import weasyprint

    html = (made["out"] / "report.html").read_text(encoding="utf-8")
    document = weasyprint.HTML(string=html).render()
    tables = 0
    for page in document.pages:
        box = page._page_box
        right = box.content_box_x() + box.width

        def walk(b, right=right):
            nonlocal tables
            if getattr(b, "element_tag", None) == "table":
                tables += 1
                assert b.position_x + b.margin_width() <= right + 0.5, (b.element_tag, right)
            for child in getattr(b, "children", ()) or ():
                walk(child)

        walk(box)
    assert tables >= 10


def test_long_table_repeats_its_header(tmp_path):
    """A table longer than a page repeats its header row on every page it spans (CSS 2.1
    §17.2, table-header-group), with the report's own print styles."""
    from lakebalance.report.html import _css
    from lakebalance.report.pdf import html_to_pdf

    rows = "".join(f"<tr><td>{i}</td><td>{i * 3.5:.1f}</td></tr>" for i in range(200))
    html = (
        f"<!DOCTYPE html><html><head><style>{_css()}</style></head><body><section id='x'>"
        "<table><thead><tr><th>water year</th><th>header that repeats (mm)</th></tr></thead>"
        f"<tbody>{rows}</tbody></table></section></body></html>"
    )
    reader = pypdf.PdfReader(_write(tmp_path / "long.pdf", html_to_pdf(html)))
    assert len(reader.pages) >= 3
    for page in reader.pages:
        assert "headerthatrepeats(mm)" in _words(page.extract_text())


def _write(path: Path, data: bytes) -> Path:
    path.write_bytes(data)
    return path


def test_no_pdf_says_why(tmp_path, monkeypatch):
    """Without WeasyPrint the report is written without the PDF, and its messages say why."""
    import lakebalance.report.pdf as pdf

    monkeypatch.setattr(pdf, "pdf_unavailable", lambda: "the PDF needs WeasyPrint (test)")
    from lakebalance.report.build import make_report

    result = make_report(SITE, tmp_path, draws=10, members=10, seed=3)
    assert result.pdf is None and not (tmp_path / "report.pdf").exists()
    assert any("PDF not written: the PDF needs WeasyPrint" in m for m in result.messages)
