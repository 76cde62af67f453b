"""Self-contained HTML from Jinja2 templates (autoescaped; figures embedded as base64 PNG)."""

from __future__ import annotations

import base64
from functools import cache
from importlib import resources
from typing import Any

__all__ = ["CAUTIONS", "render", "png_base64"]

#: The cautions every report and index page carries.
CAUTIONS = (
    "This report is an analysis aid. Its balance, seepage estimates, rating extrapolations and "
    "drawdown forecasts carry the uncertainties stated here and others that the records cannot "
    "show (unrecorded inflows or withdrawals, changes to the outlet, survey errors).",
    "Decisions on dam safety, spillway capacity, flood levels and the security of a public water "
    "supply rest with licensed professionals working under the codes and rules that apply where "
    "the lake is. Do not use a rating curve beyond its gauged range, or a forecast beyond its "
    "stated assumptions, for such decisions.",
)


@cache
def _environment() -> Any:
    import jinja2

    return jinja2.Environment(
        loader=jinja2.PackageLoader("lakebalance", "report/templates"),
        autoescape=jinja2.select_autoescape(["html", "htm"], default_for_string=True),
        undefined=jinja2.StrictUndefined,
        trim_blocks=False,
        lstrip_blocks=False,
    )


@cache
def _css() -> str:
    return (
        resources.files("lakebalance")
        .joinpath("report/templates/base.css")
        .read_text(encoding="utf-8")
    )


def png_base64(png: bytes) -> str:
    """Base64 text of PNG bytes for a ``data:`` URI."""
    return base64.b64encode(png).decode("ascii")


def render(template: str, **context: Any) -> str:
    """Render ``template`` (``"report.html"`` or ``"index.html"``) with the shared style and cautions."""
    from markupsafe import Markup

    # the style sheet is the package's own file: raw text inside <style>, where HTML entities
    # are not decoded (escaping its quotes would break CSS strings such as the page counter)
    css = _css()
    assert "</style" not in css.lower()
    context.setdefault("css", Markup(css))
    context.setdefault("cautions", CAUTIONS)
    return _environment().get_template(template).render(**context)
