"""Every command's ``--json`` document validates against its published JSON Schema
(``docs/schema/<command>.schema.json``, JSON Schema draft 2020-12, checked with the jsonschema
library), on the invented demo and on a small lake of another shape (no outlet, one inflow)."""

from __future__ import annotations

import contextlib
import io
import json
import warnings
from pathlib import Path

import pytest
from _robust_sites import write_site

from lakebalance.cli import main

jsonschema = pytest.importorskip("jsonschema", reason="jsonschema is a test dependency")
referencing = pytest.importorskip("referencing", reason="comes with jsonschema")

ROOT = Path(__file__).resolve().parents[1]
SCHEMAS = ROOT / "docs" / "schema"
DEMO = ROOT / "data_demo" / "site.toml"

DEMO_RUNS = {
    "check": [],
    "storage": [],
    "rating": [],
    "evaporation": [],
    "balance": ["--draws", "20"],
    "dynamics": ["--outlet", "sill.e=10.0"],
    "flags": [],
    "seepage": [],
    "drawdown": ["--members", "20", "--days", "30", "--no-progress"],
    "yield": ["--tolerance", "0.05", "--supply-days", "400", "--no-progress"],
    "hindcast": ["--days", "30", "--every", "365", "--no-progress"],
}
SMALL_RUNS = {
    "check": [],
    "storage": ["--step", "1"],
    "balance": ["--draws", "20"],
    "dynamics": [],
    "drawdown": ["--scenario", "constant", "--days", "20", "--no-progress"],
    "yield": ["--tolerance", "0.05", "--no-progress"],
}


def _validator(command: str):
    from referencing.jsonschema import DRAFT202012

    resources = [
        (p.name, referencing.Resource.from_contents(json.loads(p.read_text()), DRAFT202012))
        for p in SCHEMAS.glob("*.schema.json")
    ]
    registry = referencing.Registry().with_resources(resources)
    schema = json.loads((SCHEMAS / f"{command}.schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema, registry=registry)


def _run(command: str, site: Path, extra: list[str]) -> dict:
    buf = io.StringIO()
    with warnings.catch_warnings(), contextlib.redirect_stdout(buf):
        warnings.simplefilter("ignore")
        assert main([command, str(site), "--json", *extra]) == 0
    return json.loads(buf.getvalue())


@pytest.mark.parametrize("command", sorted(DEMO_RUNS))
def test_demo_output_follows_its_schema(command):
    doc = _run(command, DEMO, DEMO_RUNS[command])
    errors = sorted(_validator(command).iter_errors(doc), key=str)
    assert not errors, [f"{list(e.absolute_path)}: {e.message}" for e in errors[:5]]


@pytest.mark.parametrize("command", sorted(SMALL_RUNS))
def test_another_lake_follows_the_same_schema(tmp_path, command):
    site = write_site(tmp_path)
    doc = _run(command, site, SMALL_RUNS[command])
    errors = sorted(_validator(command).iter_errors(doc), key=str)
    assert not errors, [f"{list(e.absolute_path)}: {e.message}" for e in errors[:5]]


def test_a_document_that_breaks_the_contract_is_refused():
    doc = _run("seepage", DEMO, [])
    validator = _validator("seepage")
    broken = dict(doc)
    del broken["parameters"]
    assert not validator.is_valid(broken)
    broken = json.loads(json.dumps(doc))
    broken["parameters"]["k"]["ci95"] = "wide"
    assert not validator.is_valid(broken)


def test_every_command_with_json_has_a_schema():
    from lakebalance.cli import COMMANDS

    with_json = [c for c in COMMANDS if c not in ("report", "demo")]
    assert sorted(with_json) == sorted(DEMO_RUNS)
    for c in with_json:
        assert (SCHEMAS / f"{c}.schema.json").exists()
