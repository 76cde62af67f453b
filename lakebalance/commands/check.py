"""``lakebalance check SITE.toml``: load every series of a site and report what was found."""

from __future__ import annotations

import argparse

from ._common import LakebalanceWarnings, add_json, add_site, open_lake

HELP = "load and check the gauge records of a site: periods, missing days, findings, row accounting"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Arguments of ``check``: the site file and ``--json``."""
    add_site(parser)
    add_json(parser)


def _storage_findings(lake) -> tuple[list, str | None]:
    """Findings of stage outside the storage relation, when one can be loaded."""
    records = lake.records
    if lake.site.storage is None or not records.has("stage"):
        return [], None
    curve = lake.get("storage")
    if curve is None:
        return [], f"storage relation not checked against stage: {lake.reason('storage')}"
    from ..qa import outside_storage_findings

    key = records.keys("stage")[0]
    return outside_storage_findings(
        records.daily[key], curve.min_stage_m, curve.max_stage_m, key
    ), None


def run(args: argparse.Namespace) -> int:
    """Load the records, print the report (text or JSON), return 0."""
    import sys

    from .._json import dumps

    lake = open_lake(args, progress=not args.json)
    site = lake.site
    # stated once, plainly, after the report (not as Python's file:line warning text)
    with LakebalanceWarnings() as messages:
        records = lake.records
        extra, note = _storage_findings(lake)
    findings = list(records.findings) + extra
    if args.json:
        doc = {
            **records.to_dict(tuple(extra)),
            "notes": [note] if note else [],
            "warnings": messages,
        }
        print(dumps(doc))
        return 0
    out = sys.stdout
    print(f"site: {site.site.name}  ({site.path})", file=out)
    if len(records.daily):
        print(
            f"records: {records.daily.index[0].date()} to {records.daily.index[-1].date()}, "
            f"{len(records.daily)} days, {len(records.series)} series",
            file=out,
        )
    for s in records.series:
        print("", file=out)
        print(f"{s.key}  [{s.declared_units} -> {s.internal_units}, daily {s.statistic}]", file=out)
        print(f"  file:     {s.file}", file=out)
        print(f"  period:   {s.first} to {s.last}, {s.days} days", file=out)
        print(
            f"  missing:  {s.missing} days   flagged: {s.flagged} days   rejected: {s.rejected} rows",
            file=out,
        )
        mine = [f for f in findings if f.series == s.key]
        if not mine:
            print("  findings: none", file=out)
            continue
        print(f"  findings: {len(mine)}", file=out)
        for f in mine:
            span = f.first if f.first == f.last else f"{f.first} to {f.last}"
            span = span if f.first is not None else "-"
            detail = f"  ({f.detail})" if f.detail else ""
            print(f"    {f.kind:<22} {span:<42} n={f.count:<7} {f.action}{detail}", file=out)
    print("", file=out)
    print("row accounting (read = used + flagged + rejected):", file=out)
    for a in records.accounting:
        print(
            f"  {a.series:<24} {a.read:>9} = {a.used:>9} + {a.flagged:>7} + {a.rejected:>7}   {a.file}",
            file=out,
        )
    if note:
        print(f"note: {note}", file=out)
    for m in messages:
        print(f"warning: {m}", file=sys.stderr)
    return 0
