"""The site-file documentation lists every key the validator accepts (common practice, no source)."""

from __future__ import annotations

import dataclasses
import re

import pytest
from conftest import ROOT

from lakebalance import config, operations

SECTIONS = {
    "[site]": config.SiteInfo,
    "[series.<role>]": config.SeriesSpec,
    "[storage]": config.StorageOptions,
    "[outlet]": config.OutletOptions,
    "[[outlet.component]]": config.OutletComponent,
    "[uncertainty]": config.UncertaintyOptions,
    "[evaporation]": config.EvaporationOptions,
    "[qa]": config.QAOptions,
    "[flags]": config.FlagOptions,
    "[seepage]": config.SeepageOptions,
    "[drawdown]": config.DrawdownOptions,
    "[[drawdown.restriction]]": config.DemandRule,
    "[operations]": operations.OperatingRules,
    "[operations.release]": operations.ReleaseRule,
    "[operations.spill]": operations.SpillRule,
    "[operations.demand]": operations.DemandSchedule,
    "[[operations.restriction]]": operations.RestrictionLevel,
    "[[correction]]": config.Correction,
    "[[period]]": config.Period,
    "[[storage.survey]]": config.DatedSurvey,
    "[[outlet.period]]": config.RatingPeriod,
    "[field_checks]": config.FieldCheckOptions,
    "[report]": config.ReportOptions,
}


@pytest.mark.parametrize("section", list(SECTIONS))
def test_every_key_is_in_docs_site_file(section):
    text = (ROOT / "docs" / "site-file.md").read_text(encoding="utf-8")
    row = next((ln for ln in text.splitlines() if ln.startswith(f"| `{section}` |")), None)
    assert row is not None, f"docs/site-file.md has no row for {section}"
    documented = set(re.findall(r"`([a-z_0-9]+)`", row.split("|")[2]))
    fields = {f.name for f in dataclasses.fields(SECTIONS[section])} - {"role", "key"}
    missing = fields - documented
    assert not missing, f"{section}: keys not documented: {sorted(missing)}"
