"""The demo report and a batch index page render in headless Chromium to a picture that is not blank.

The browser is Debian's ``chromium`` package (an independent HTML/CSS/PNG engine as the reference
for "a reader sees the report"); the test skips with its reason when it is not installed. The
browser runs without network, sandbox, GPU or a profile of its own (a temporary one).

The figures are drawn in the Okabe–Ito palette (Okabe & Ito, 2008); the gauged-inflow bars use its
bluish green #009E73, which the report's style sheet does not use, so finding that colour in the
screenshot shows that the embedded figures were decoded and painted, not just the text.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from conftest import DEMO

CHROMIUM = shutil.which("chromium") or (
    "/usr/bin/chromium" if Path("/usr/bin/chromium").is_file() else None
)
pytestmark = pytest.mark.skipif(
    CHROMIUM is None, reason="headless Chromium (Debian package 'chromium') is not installed"
)

WIDTH, HEIGHT = 1200, 3000
INFLOW_GREEN = (0x00, 0x9E, 0x73)  # Okabe-Ito bluish green


def _screenshot(page: Path, tmp: Path) -> Path:
    png = tmp / (page.stem + ".png")
    profile = tmp / f"profile-{page.stem}"
    cmd = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={profile}",
        f"--screenshot={png}",
        f"--window-size={WIDTH},{HEIGHT}",
        page.resolve().as_uri(),
    ]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=180)
    assert png.is_file(), f"no screenshot (exit {proc.returncode}): {proc.stderr[-2000:]}"
    return png


def _pixels(png: Path):
    import numpy as np
    from PIL import Image

    with Image.open(png) as im:
        return np.asarray(im.convert("RGB"), dtype=np.int16)


@pytest.fixture(scope="module")
def pages(tmp_path_factory) -> dict[str, Path]:
    """One small demo report and the batch index page that lists it."""
    from lakebalance.batch import report_one, write_index

    out = tmp_path_factory.mktemp("browser")
    outcome = report_one(DEMO / "site.toml", out / "demo", options={"draws": 20, "members": 20})
    assert outcome.ok, outcome.error
    index = write_index([outcome], out)
    return {"report": Path(outcome.report), "index": index, "tmp": out}


def test_report_renders_not_blank(pages):
    """The report's screenshot has the full window size, is not one flat colour, has ink on a
    fair share of it, and shows the painted figures (their inflow colour)."""
    import numpy as np

    rgb = _pixels(_screenshot(pages["report"], pages["tmp"]))
    assert rgb.shape[:2] == (HEIGHT, WIDTH)
    grey = rgb.mean(axis=2)
    assert float(grey.std()) > 20.0, "flat screenshot"
    inked = float(np.mean(grey < 200))
    assert inked > 0.02, f"only {inked:.1%} of the page has ink"
    # content all down the page, not only a header
    for band in np.array_split(grey[: HEIGHT // 2], 3):
        assert float(band.std()) > 10.0
    green = np.all(np.abs(rgb - np.array(INFLOW_GREEN)) <= 12, axis=2)
    assert int(green.sum()) > 500, "the embedded figures were not painted"


def test_index_renders_not_blank(pages):
    """The batch index page (table, map figure) renders to a picture that is not blank."""
    import numpy as np

    rgb = _pixels(_screenshot(pages["index"], pages["tmp"]))
    grey = rgb.mean(axis=2)
    assert float(grey.std()) > 10.0
    assert float(np.mean(grey < 200)) > 0.005


def test_blank_page_fails_the_check(tmp_path):
    """The blankness check itself: an empty white page does not pass it."""
    import numpy as np

    page = tmp_path / "blank.html"
    page.write_text("<!DOCTYPE html><html><body></body></html>", encoding="utf-8")
    grey = _pixels(_screenshot(page, tmp_path)).mean(axis=2)
    assert float(grey.std()) < 1.0 and float(np.mean(grey < 200)) == 0.0


def _print_to_pdf(page: Path, tmp: Path) -> Path:
    pdf = tmp / (page.stem + "-print.pdf")
    profile = tmp / f"profile-print-{page.stem}"
    cmd = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-pdf-header-footer",
        f"--user-data-dir={profile}",
        f"--print-to-pdf={pdf}",
        page.resolve().as_uri(),
    ]
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert pdf.is_file(), f"no PDF (exit {proc.returncode}): {proc.stderr[-2000:]}"
    return pdf


def test_report_print_preview(pages):
    """Chromium's print of the report (its own paged-media engine, the print styles applied):
    several A4 pages (the print style's ``@page`` size; CSS Paged Media Level 3), the caution on
    page one, the section headings and the print style's page counter in the text (read back with
    pypdf)."""
    import re

    pypdf = pytest.importorskip("pypdf", reason="pypdf reads the PDF back (test extra)")
    from lakebalance.report.html import CAUTIONS

    reader = pypdf.PdfReader(_print_to_pdf(pages["report"], pages["tmp"]))
    n = len(reader.pages)
    assert n >= 5, n
    import unicodedata

    # NFKC folds the typographic ligatures (ﬁ, ﬂ) that Chromium's fonts set into their letters
    texts = [
        re.sub(r"\s+", "", unicodedata.normalize("NFKC", p.extract_text() or ""))
        for p in reader.pages
    ]
    for caution in CAUTIONS:
        assert re.sub(r"\s+", "", caution) in texts[0]
    everything = "".join(texts)
    for heading in ("Theyearinbrief", "Waterbalance", "Provenance"):
        assert heading in everything
    assert f"page1of{n}" in texts[0]  # the print style's page counter
    for page in reader.pages:  # A4 (ISO 216: 595 × 842 pt), either way up
        w, h = sorted((float(page.mediabox.width), float(page.mediabox.height)))
        assert abs(w - 595.3) < 2 and abs(h - 841.9) < 2, (w, h)
