"""Write the JSON Schema of each command's ``--json`` output (a contributor's tool).

Runs every command on the invented demo with ``--json``, infers a schema from the document (types,
required keys, array items) and writes ``docs/schema/<command>.schema.json``. An estimated quantity
(``{value, stderr, ci95, unit}``) is recognised and refers to the one shared definition
``estimate.schema.json`` (with any further keys, such as a rating parameter's ``fixed``, required
beside it). Review the diff of the schemas before committing: they are the published
contract that ``tests/test_schemas.py`` checks every command's output against.

    python docs/schema/make_schemas.py
"""

from __future__ import annotations

import contextlib
import io
import json
import sys
import warnings
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
SITE = ROOT / "data_demo" / "site.toml"

#: Commands run on a small invented lake of another shape too (no outlet, one inflow), so that
#: what only some lakes have is not required.
SMALL: dict[str, list[str]] = {
    "check": [],
    "storage": ["--step", "1"],
    "balance": ["--draws", "20"],
    "dynamics": [],
    "drawdown": ["--scenario", "constant", "--days", "20", "--no-progress"],
    "yield": ["--tolerance", "0.05", "--no-progress"],
}

#: command -> extra arguments (small ensembles and draws: the shape does not depend on them)
COMMANDS: dict[str, list[str]] = {
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

ESTIMATE_KEYS = {"value", "stderr", "ci95", "unit"}

#: Objects keyed by the site's own names (levels, parameters, methods, tributaries): a map whose
#: values share one schema, not a fixed set of keys.
MAPS = {
    ".levels",
    ".unrestricted.levels",
    ".method_spread[].levels",
    ".parameters",
    ".derived",
    ".totals_m3",
    ".totals",
    ".inputs",
    ".selection",
}


def infer(value, path: str = "", in_array: bool = False) -> dict:
    """A schema that ``value`` satisfies (numbers and strings may also be null). Rows of tables
    (objects in arrays) require no column: a site's tables have columns of its own names."""
    if isinstance(value, dict):
        if ESTIMATE_KEYS <= set(value) and not (set(value) - ESTIMATE_KEYS - {"interval"}):
            return {"$ref": "estimate.schema.json"}
        if ESTIMATE_KEYS <= set(value):  # an estimate with more (a rating parameter's "fixed")
            extra = sorted(set(value) - ESTIMATE_KEYS - {"interval"})
            return {
                "allOf": [
                    {"$ref": "estimate.schema.json"},
                    {
                        "type": "object",
                        "properties": {k: infer(value[k], f"{path}.{k}") for k in extra},
                        "required": extra,
                    },
                ]
            }
        if path in MAPS:
            merged: dict | None = None
            for v in value.values():
                item = infer(v, path + ".*")
                merged = item if merged is None else merge(merged, item)
            return {"type": "object", "additionalProperties": merged or {}}
        return {
            "type": "object",
            "properties": {k: infer(v, f"{path}.{k}") for k, v in value.items()},
            "required": [] if in_array else sorted(value),
        }
    if isinstance(value, list):
        if not value:
            return {"type": "array"}
        merged = infer(value[0], path + "[]", True)
        for item in value[1:]:
            merged = merge(merged, infer(item, path + "[]", True))
        return {"type": "array", "items": merged}
    if isinstance(value, bool):
        return {"type": "boolean"}
    if isinstance(value, int | float):
        return {"type": ["number", "null"]}
    if isinstance(value, str):
        return {"type": ["string", "null"]}
    return {"type": "null"}


def merge(a: dict, b: dict) -> dict:
    """A schema both ``a`` and ``b`` documents satisfy (keys required only when in both)."""
    if a == b:
        return a
    for x, y in ((a, b), (b, a)):
        if x == {"type": "null"}:
            if "$ref" in y or "properties" in y or "additionalProperties" in y or "items" in y:
                return {"anyOf": [y, {"type": "null"}]}
            t = y.get("type")
            if t is None:
                return y
            types = set(t if isinstance(t, list) else [t]) | {"null"}
            return {**y, "type": sorted(types)}
        if "anyOf" in x and {"type": "null"} in x["anyOf"]:
            other = next(s for s in x["anyOf"] if s != {"type": "null"})
            if y == {"type": "null"}:
                return x
            return {"anyOf": [merge(other, y), {"type": "null"}]}
    if "additionalProperties" in a and "additionalProperties" in b:
        return {
            "type": "object",
            "additionalProperties": merge(a["additionalProperties"], b["additionalProperties"]),
        }
    if (
        a.get("type") == "object"
        and b.get("type") == "object"
        and "properties" in a
        and "properties" in b
    ):
        props = dict(a["properties"])
        for k, v in b["properties"].items():
            props[k] = merge(props[k], v) if k in props else v
        return {
            "type": "object",
            "properties": props,
            "required": sorted(set(a["required"]) & set(b["required"])),
        }
    if a.get("type") == "array" and b.get("type") == "array":
        if "items" in a and "items" in b:
            return {"type": "array", "items": merge(a["items"], b["items"])}
        return {"type": "array", **({"items": a.get("items") or b.get("items")})}
    if not a or not b:
        return {}
    if "properties" in a or "properties" in b or "items" in a or "items" in b:
        return {}  # different shapes: not constrained
    types = set()
    for s in (a, b):
        t = s.get("type")
        types.update(t if isinstance(t, list) else [t] if t else [])
    if "$ref" in a or "$ref" in b or not types:
        return {}
    return {"type": sorted(types)}


def run(command: str, extra: list[str], site: Path = SITE) -> dict:
    from lakebalance.cli import main

    buf = io.StringIO()
    with warnings.catch_warnings(), contextlib.redirect_stdout(buf):
        warnings.simplefilter("ignore")
        code = main([command, str(site), "--json", *extra])
    if code != 0:
        raise SystemExit(f"{command} exited {code}")
    return json.loads(buf.getvalue())


def main() -> int:
    import tempfile

    sys.path.insert(0, str(ROOT))
    sys.path.insert(0, str(ROOT / "tests"))
    from _robust_sites import write_site

    small = write_site(Path(tempfile.mkdtemp()) / "small")
    for command, extra in COMMANDS.items():
        shape = infer(run(command, extra))
        if command in SMALL:
            shape = merge(shape, infer(run(command, SMALL[command], small)))
        schema = {
            "$schema": "https://json-schema.org/draft/2020-12/schema",
            "$id": f"{command}.schema.json",
            "title": f"lakebalance {command} --json",
            **shape,
        }
        (HERE / f"{command}.schema.json").write_text(json.dumps(schema, indent=1) + "\n")
        print(f"wrote {command}.schema.json")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
