"""The report on paper: a PDF made from the very HTML of the report, with its print styles.

WeasyPrint (Kozea, BSD licence) lays out HTML and CSS for paged media (CSS Paged Media Level 3:
``@page`` sizes and margin boxes, named pages, ``counter(page)``/``counter(pages)``, repeated table
headers) without a browser, in pure Python over Pango. It is an optional extra (``pip install
lakebalance[pdf]``); when it or its system libraries are missing the report is written without
the PDF, and the reason is said.
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

__all__ = ["pdf_unavailable", "html_to_pdf"]


@cache
def pdf_unavailable() -> str | None:
    """None when a PDF can be made here, else the reason it cannot (said in the report's
    messages)."""
    try:
        import weasyprint  # noqa: F401
    except ImportError:
        return "the PDF needs WeasyPrint, an optional extra: pip install 'lakebalance[pdf]'"
    except OSError as err:  # Pango or its companions not installed
        return (
            f"WeasyPrint is installed but its system libraries are not ({err}); on Debian or "
            "Ubuntu: apt-get install libpango-1.0-0 libpangoft2-1.0-0"
        )
    return None


def html_to_pdf(html: str, path: str | Path | None = None, *, base_url: str | None = None) -> bytes:
    """The PDF of ``html`` laid out for print (A4, the report's ``@media print`` styles), as
    bytes; also written to ``path`` when given.

    Raises
    ------
    lakebalance.errors.LakebalanceError
        When WeasyPrint cannot be used here (:func:`pdf_unavailable` says why).
    """
    from ..errors import LakebalanceError

    why = pdf_unavailable()
    if why is not None:
        raise LakebalanceError(why)
    import logging

    import weasyprint

    # WeasyPrint logs every CSS property it does not know at WARNING; the report's screen styles
    # have a few (overflow-x on a scrolling wrapper) that paper does not need
    logging.getLogger("weasyprint").setLevel(logging.ERROR)
    data = weasyprint.HTML(string=html, base_url=base_url).write_pdf(
        pdf_variant=None, uncompressed_pdf=False
    )
    if path is not None:
        Path(path).write_bytes(data)
    return data
