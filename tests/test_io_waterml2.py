"""WaterML 2.0 reader on documents written to the OGC standard's structure.

Source of the structure: OGC 10-126r4, "OGC WaterML 2.0: Part 1 - Timeseries" (Taylor, ed.,
2014), requirements classes "Timeseries TVP" and "Measurement TVP": a wml2:Collection of
om:OM_Observation members whose om:result is a wml2:MeasurementTimeseries with
wml2:defaultPointMetadata/wml2:DefaultTVPMeasurementMetadata/wml2:uom (a UCUM code) and
wml2:point/wml2:MeasurementTVP (wml2:time, wml2:value; missing values are xsi:nil).
"""

from __future__ import annotations

import numpy as np
import pytest

import lakebalance as lb
from lakebalance.errors import InputError, UnitError
from lakebalance.io.waterml2 import ucum_to_unit

HEAD = """<?xml version="1.0" encoding="UTF-8"?>
<wml2:Collection xmlns:wml2="http://www.opengis.net/waterml/2.0"
    xmlns:gml="http://www.opengis.net/gml/3.2"
    xmlns:om="http://www.opengis.net/om/2.0"
    xmlns:sa="http://www.opengis.net/sampling/2.0"
    xmlns:xlink="http://www.w3.org/1999/xlink"
    xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance"
    xsi:schemaLocation="http://www.opengis.net/waterml/2.0 http://schemas.opengis.net/waterml/2.0/waterml2.xsd"
    gml:id="collection.1">
  <wml2:metadata>
    <wml2:DocumentMetadata gml:id="doc.1">
      <wml2:generationDate>2024-01-05T10:00:00Z</wml2:generationDate>
    </wml2:DocumentMetadata>
  </wml2:metadata>
"""


def member(
    obs_id: str, ts_id: str, title: str, uom: str, points: list[tuple[str, str | None]]
) -> str:
    pts = []
    for t, v in points:
        value = '<wml2:value xsi:nil="true"/>' if v is None else f"<wml2:value>{v}</wml2:value>"
        pts.append(
            f"      <wml2:point><wml2:MeasurementTVP><wml2:time>{t}</wml2:time>{value}"
            "</wml2:MeasurementTVP></wml2:point>"
        )
    body = "\n".join(pts)
    return f"""  <wml2:observationMember>
    <om:OM_Observation gml:id="{obs_id}">
      <om:phenomenonTime>
        <gml:TimePeriod gml:id="{obs_id}.period">
          <gml:beginPosition>{points[0][0]}</gml:beginPosition>
          <gml:endPosition>{points[-1][0]}</gml:endPosition>
        </gml:TimePeriod>
      </om:phenomenonTime>
      <om:resultTime>
        <gml:TimeInstant gml:id="{obs_id}.rt"><gml:timePosition>2024-01-05T10:00:00Z</gml:timePosition></gml:TimeInstant>
      </om:resultTime>
      <om:procedure xlink:href="http://example.invalid/procedure/gauge" xlink:title="Invented gauge"/>
      <om:observedProperty xlink:href="http://example.invalid/property/{title}" xlink:title="{title}"/>
      <om:featureOfInterest xlink:href="http://example.invalid/site/pond" xlink:title="Invented Pond"/>
      <om:result>
        <wml2:MeasurementTimeseries gml:id="{ts_id}">
          <wml2:defaultPointMetadata>
            <wml2:DefaultTVPMeasurementMetadata>
              <wml2:uom code="{uom}"/>
              <wml2:interpolationType xlink:href="http://www.opengis.net/def/waterml/2.0/interpolationType/AveragePrec" xlink:title="Average in preceding interval"/>
            </wml2:DefaultTVPMeasurementMetadata>
          </wml2:defaultPointMetadata>
{body}
        </wml2:MeasurementTimeseries>
      </om:result>
    </om:OM_Observation>
  </wml2:observationMember>
"""


def document(*members: str) -> str:
    return HEAD + "".join(members) + "</wml2:Collection>\n"


POINTS = [
    ("2021-03-01T00:00:00+01:00", "1.5"),
    ("2021-03-02T00:00:00+01:00", None),
    ("2021-03-03T00:00:00+01:00", "2.5"),
]


def load(tmp_path, series_body: str, xml: str, timezone: str = "Etc/GMT-1"):
    (tmp_path / "q.xml").write_text(xml, encoding="utf-8")
    site = tmp_path / "site.toml"
    site.write_text(
        f'[site]\nname = "Invented Pond"\ntimezone = "{timezone}"\n\n[series.inflow]\n'
        f'file = "q.xml"\n{series_body}',
        encoding="utf-8",
    )
    return lb.open_site(site).records


def test_measurement_timeseries_values_nil_and_zone(tmp_path):
    rec = load(
        tmp_path, 'units = "m3/s"\n', document(member("obs.1", "ts.1", "Discharge", "m3/s", POINTS))
    )
    q = rec.daily["inflow"]
    assert q.index[0].isoformat() == "2021-03-01T00:00:00"
    assert q.iloc[0] == 1.5 and np.isnan(q.iloc[1]) and q.iloc[2] == 2.5
    assert [f.kind for f in rec.findings] == ["empty"]
    assert rec.accounting[0].read == 3 and rec.accounting[0].rejected == 1


def test_units_from_the_document_stand_in(tmp_path):
    xml = document(member("obs.1", "ts.1", "Discharge", "[cft_i]/s", POINTS))
    rec = load(tmp_path, 'units = "file"\n', xml)
    # NIST SP 811 Appendix B.8: 1 ft³/s = 2.831685 E-02 m³/s
    assert rec.daily["inflow"].iloc[0] == pytest.approx(1.5 * 2.831685e-02, rel=1e-6)
    assert rec.series[0].declared_units == "ft**3/s"


def test_declared_units_must_agree_with_the_document(tmp_path):
    xml = document(member("obs.1", "ts.1", "Discharge", "L/s", POINTS))
    with pytest.raises(UnitError, match="document says"):
        load(tmp_path, 'units = "m3/s"\n', xml)
    # an equal unit written differently agrees
    rec = load(tmp_path, 'units = "L/s"\n', xml)
    assert rec.daily["inflow"].iloc[0] == pytest.approx(0.0015)


def test_several_series_are_chosen_by_id_or_property(tmp_path):
    xml = document(
        member("obs.q", "ts.q", "Discharge", "m3/s", POINTS),
        member("obs.h", "ts.h", "Spillway discharge", "m3/s", [(t, "9") for t, _ in POINTS]),
    )
    with pytest.raises(InputError, match="2 time series"):
        load(tmp_path, 'units = "m3/s"\n', xml)
    rec = load(tmp_path, 'units = "m3/s"\nvalue = "Discharge"\n', xml)
    assert rec.daily["inflow"].iloc[0] == 1.5
    rec = load(tmp_path, 'units = "m3/s"\nvalue = "ts.h"\n', xml)
    assert rec.daily["inflow"].iloc[0] == 9.0


def test_point_lines_are_source_lines(tmp_path):
    xml = document(member("obs.1", "ts.1", "Discharge", "m3/s", [(POINTS[0][0], "x"), *POINTS[1:]]))
    rec = load(tmp_path, 'units = "m3/s"\n', xml)
    f = [f for f in rec.findings if f.kind == "non_numeric"][0]
    assert f.detail == "token 'x'"


def test_not_well_formed_xml(tmp_path):
    with pytest.raises(InputError, match="not well-formed") as err:
        load(tmp_path, 'units = "m3/s"\n', document(member("o", "t", "Q", "m3/s", POINTS))[:-30])
    assert err.value.line is not None


def test_xml_that_is_not_waterml(tmp_path):
    with pytest.raises(InputError, match="MeasurementTimeseries"):
        load(tmp_path, 'units = "m3/s"\n', "<root><a/></root>")


@pytest.mark.parametrize(
    ("code", "unit"),
    [
        ("m3/s", "m**3/s"),
        ("[ft_i]", "ft"),
        ("[cft_i]/s", "ft**3/s"),
        ("mm/d", "mm/day"),
        ("Cel", "degC"),
        ("m.s-1", "m*s**-1"),
        ("%", "%"),
    ],
)
def test_ucum_codes(code, unit):
    # UCUM (Schadow and McDonald), sections 3-4: '.' multiplies, trailing digits are exponents
    assert ucum_to_unit(code) == unit
