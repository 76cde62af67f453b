"""Gauge series from WaterML 2.0 time-series documents (OGC 10-126r4, the open standard).

A document holds one or more ``wml2:MeasurementTimeseries``, each a list of ``wml2:point`` /
``wml2:MeasurementTVP`` with ``wml2:time`` and ``wml2:value``. The unit is the ``wml2:uom`` of
the series' ``wml2:defaultPointMetadata`` (a UCUM code such as ``m``, ``m3/s``, ``[ft_i]``,
``[cft_i]/s``). A value with ``xsi:nil="true"`` (or empty) is a missing reading.

When a document holds several series, the site file's ``value`` key picks one by the ``gml:id``
of the time series or of its observation, or by the ``xlink:title`` of the observed property.
"""

from __future__ import annotations

import re

import numpy as np

from ..config import SeriesSpec
from ..errors import InputError, excerpt
from ._raw import RawSeries
from .files import open_input

__all__ = ["NS", "ucum_to_unit", "read_waterml2_series"]


NS = {
    "wml2": "http://www.opengis.net/waterml/2.0",
    "om": "http://www.opengis.net/om/2.0",
    "gml": "http://www.opengis.net/gml/3.2",
    "xlink": "http://www.w3.org/1999/xlink",
    "xsi": "http://www.w3.org/2001/XMLSchema-instance",
}

# UCUM (Unified Code for Units of Measure) atoms that pint spells differently.
_UCUM_ATOMS = [
    (r"\[cft_i\]", "ft**3"),
    (r"\[ft_i\]", "ft"),
    (r"\[in_i\]", "inch"),
    (r"\[gal_us\]", "gallon"),
    (r"\[acr_us\]", "acre"),
    (r"\[mi_i\]", "mile"),
    (r"\[degF\]", "degF"),
    (r"\bCel\b", "degC"),
    (r"\[kn_i\]", "knot"),
]


def ucum_to_unit(code: str) -> str:
    """A UCUM unit code (``m3/s``, ``[ft_i]``, ``mm/d``, ``Cel``) in the spelling of lakebalance.

    Notes
    -----
    Covers the atoms of gauge data (Schadow and McDonald, The Unified Code for Units of Measure,
    sections 3 and 4: multiplication ``.``, exponents as trailing digits, annotations in ``{}``).
    """
    text = re.sub(r"\{[^}]*\}", "", code).strip()
    for pattern, repl in _UCUM_ATOMS:
        text = re.sub(pattern, repl, text)
    text = re.sub(r"(?<=[A-Za-z\]])(-?\d+)\b", r"**\1", text)  # m3 -> m**3, s-1 -> s**-1
    text = re.sub(r"(?<=[\w)])\.(?=[A-Za-z\[(])", "*", text)  # m.s-1 -> m*s**-1
    text = re.sub(r"/d\b", "/day", text)
    text = re.sub(r"/h\b", "/hour", text)
    text = re.sub(r"^h$", "hour", text)
    if text in ("1", ""):
        return "fraction"
    return text


def _text(el: object | None) -> str | None:
    if el is None:
        return None
    t = el.text  # type: ignore[attr-defined]
    return None if t is None else t.strip()


_PROLOG_BYTES = 1 << 16  # bytes read to find a DOCTYPE before the root element
_ROOT_START = re.compile(rb"<[A-Za-z_]")


def _doctype_error(what: str, file: str) -> InputError:
    return InputError(
        f"{what}: the document declares a DOCTYPE (a DTD, maybe entities); WaterML 2.0 "
        "documents have none, and such documents are refused",
        file=file,
    )


def _refuse_doctype(head: bytes, what: str, file: str) -> None:
    """Refuse a document whose prolog (the part before the root element) holds ``<!DOCTYPE``,
    in UTF-8 or UTF-16."""
    for enc in ("utf-8", "utf-16-le", "utf-16-be"):
        mark = "<!DOCTYPE".encode(enc)
        at = head.find(mark)
        if at < 0:
            continue
        if enc == "utf-8":
            root = _ROOT_START.search(head)
            if root is not None and root.start() < at:
                continue  # inside the document, e.g. in a CDATA section
        raise _doctype_error(what, file)


def read_waterml2_series(spec: SeriesSpec, what: str) -> RawSeries:
    """Read the times, values and unit of one WaterML 2.0 measurement time series.

    Raises
    ------
    InputError
        Not XML, not WaterML 2.0, a DOCTYPE (refused: entities and DTDs are never followed),
        several series and none selected by ``value``, points without a time, or points in a
        unit different from the series' default.
    LimitError
        Not a regular file, or larger than the file-size limit.
    """
    import pandas as pd
    from lxml import etree

    file = str(spec.file)
    parser = etree.XMLParser(
        huge_tree=True,
        resolve_entities=False,
        load_dtd=False,
        no_network=True,
        dtd_validation=False,
    )
    with open_input(spec.file, what) as fh:
        _refuse_doctype(fh.read(_PROLOG_BYTES), what, file)
        fh.seek(0)
        try:
            tree = etree.parse(fh, parser)
        except OSError as exc:
            raise InputError(f"{what}: cannot read the file ({exc})", file=file) from None
        except etree.XMLSyntaxError as exc:
            line = exc.lineno if exc.lineno else None
            col = exc.offset if exc.offset else None
            raise InputError(
                f"{what}: not well-formed XML ({excerpt(exc.msg)})",
                file=file,
                line=line,
                column=col,
            ) from None
    if tree.docinfo.doctype or tree.docinfo.internalDTD is not None:
        raise _doctype_error(what, file)
    root = tree.getroot()
    series = root.xpath("//wml2:MeasurementTimeseries", namespaces=NS)
    if not series:
        raise InputError(
            f"{what}: no wml2:MeasurementTimeseries in the document (is it WaterML 2.0?)",
            file=file,
            line=root.sourceline,
        )

    def labels(ts: object) -> list[str]:
        out = [ts.get(f"{{{NS['gml']}}}id")]  # type: ignore[attr-defined]
        obs = ts.xpath("ancestor::om:OM_Observation[1]", namespaces=NS)  # type: ignore[attr-defined]
        if obs:
            out.append(obs[0].get(f"{{{NS['gml']}}}id"))
            prop = obs[0].find("om:observedProperty", NS)
            if prop is not None:
                out.append(prop.get(f"{{{NS['xlink']}}}title"))
        return [x for x in out if x]

    if len(series) == 1:
        ts = series[0]
    else:
        chosen = [t for t in series if spec.value in labels(t)]
        if len(chosen) != 1:
            names = ", ".join(repr(labels(t)[0]) if labels(t) else "?" for t in series)
            raise InputError(
                f"{what}: the document holds {len(series)} time series ({names}); "
                "set 'value' to the gml:id or observed property of the one to read",
                file=file,
                line=root.sourceline,
            )
        ts = chosen[0]
    uom_el = ts.find("wml2:defaultPointMetadata/wml2:DefaultTVPMeasurementMetadata/wml2:uom", NS)
    units = None
    if uom_el is not None:
        code = uom_el.get("code") or uom_el.get(f"{{{NS['xlink']}}}title")
        units = ucum_to_unit(code) if code else None
    tvps = ts.findall("wml2:point/wml2:MeasurementTVP", NS)
    if not tvps:
        raise InputError(f"{what}: the time series has no points", file=file, line=ts.sourceline)
    times = [_text(p.find("wml2:time", NS)) for p in tvps]
    value_els = [p.find("wml2:value", NS) for p in tvps]
    nil = f"{{{NS['xsi']}}}nil"
    values = [
        None if (v is None or v.get(nil) in ("true", "1")) else (_text(v) or None)
        for v in value_els
    ]
    lines = np.array([p.sourceline or 0 for p in tvps], dtype=np.int64)
    own_uoms = ts.xpath(
        "wml2:point/wml2:MeasurementTVP/wml2:metadata/wml2:TVPMeasurementMetadata/wml2:uom",
        namespaces=NS,
    )
    for own in own_uoms:  # point-level units are rare: only those are visited
        if own.get("code") and ucum_to_unit(own.get("code")) != units:
            raise InputError(
                f"{what}: a point is in {own.get('code')!r}, the series in {units!r}; "
                "one unit per series is supported",
                file=file,
                line=own.sourceline,
            )
    return RawSeries(
        file=file,
        dates=pd.Series(times, dtype=object),
        values=pd.Series(values, dtype=object),
        lines=lines,
        units=units,
    )
