"""``lakebalance check SITE.toml``: the pre-flight of everything the site file names.

Loads every series, the storage table or layer, the gaugings (and fits the outlet rating, so
that its definition and its gaugings are checked as the later commands use them) and the named
levels. Whatever a later command would reject, ``check`` rejects with the same one-line error
(file, line, column); what is doubtful (a unit out of its role's plausible range, a level
outside the storage relation, a control with few gaugings) is a warning.
"""

from __future__ import annotations

import argparse

from ._common import FoldedStream, LakebalanceWarnings, add_json, add_site, open_lake

HELP = (
    "pre-flight of a site: series, storage relation, gaugings and outlet, levels; periods, "
    "findings, row accounting"
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Arguments of ``check``: the site file and ``--json``."""
    add_site(parser)
    add_json(parser)


def _storage_findings(lake) -> tuple[list, str | None]:
    """Findings of stage outside the storage relation (the relation is loaded: an unusable one
    stops here with its own error)."""
    records = lake.records
    if lake.site.storage is None:
        return [], None
    curve = lake.storage  # raises what the balance would raise
    if not records.has("stage"):
        return [], None
    from ..qa import outside_storage_findings
    from ..unitcheck import stage_unit_against_storage

    key = records.keys("stage")[0]
    spec = next(s for s in lake.site.series if s.key == key)
    note = stage_unit_against_storage(
        records.daily[key].to_numpy(), spec.units, curve.min_stage_m, curve.max_stage_m
    )
    if note:
        import warnings

        from ..errors import DataQualityWarning

        warnings.warn(f"{key}: {note}", DataQualityWarning, stacklevel=2)
    return outside_storage_findings(
        records.daily[key], curve.min_stage_m, curve.max_stage_m, key
    ), None


def _preflight(lake) -> dict:
    """The storage relation, the rating and the levels, as the later commands use them; what
    they would reject raises here. Returns a short account of each."""
    import warnings

    from ..errors import DataQualityWarning

    site = lake.site
    out: dict = {"storage": None, "rating": None, "levels": {}}
    curve = lake.storage if site.storage is not None else None
    if curve is not None:
        out["storage"] = {
            "source": curve.source,
            "min_stage_m": curve.min_stage_m,
            "max_stage_m": curve.max_stage_m,
            "max_volume_m3": curve.max_volume_m3,
        }
    if curve is not None and site.storage.compare is not None:
        other = lake.survey(site.storage.compare)  # `storage` compares with it: read it now
        out["storage"]["compare"] = {
            "source": other.source,
            "min_stage_m": other.min_stage_m,
            "max_stage_m": other.max_stage_m,
        }
    if site.outlet is not None:
        fit = lake.rating  # reads the gaugings, builds the law and fits it: raises as `rating`
        if curve is not None:
            from ..unitcheck import stage_unit_against_storage

            note = stage_unit_against_storage(
                fit.table["stage_m"].to_numpy(),
                site.outlet.stage_units,
                curve.min_stage_m,
                curve.max_stage_m,
                what="gauging stages",
            )
            if note:
                warnings.warn(f"gaugings: {note}", DataQualityWarning, stacklevel=2)
        out["rating"] = {
            "form": fit.form,
            "gaugings": fit.n,
            "gauged_range_m": list(fit.gauged_range),
            "weakly_identified": [c.control for c in fit.support if c.weak],
        }
    for name, stage in site.levels.items():
        inside = curve is None or curve.min_stage_m <= stage <= curve.max_stage_m
        out["levels"][name] = {"stage_m": stage, "inside_storage": inside}
        if not inside:
            warnings.warn(
                f"level '{name}' ({stage:g} m) lies outside the storage relation "
                f"({curve.min_stage_m:g} to {curve.max_stage_m:g} m): a level in another unit "
                "or datum than the relation?",
                DataQualityWarning,
                stacklevel=2,
            )
    return out


def run(args: argparse.Namespace) -> int:
    """Load the records, print the report (text or JSON), return 0."""
    import sys

    from .._json import dumps
    from ..display import number

    lake = open_lake(args, progress=not args.json)
    site = lake.site
    # stated once, plainly, after the report (not as Python's file:line warning text)
    with LakebalanceWarnings() as messages:
        records = lake.records
        extra, note = _storage_findings(lake)
        checked = _preflight(lake)
    findings = list(records.findings) + extra
    if args.json:
        doc = {
            **records.to_dict(tuple(extra)),
            **checked,
            "notes": [note] if note else [],
            "warnings": messages,
        }
        print(dumps(doc))
        return 0
    out = FoldedStream(sys.stdout)
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
    if checked["storage"] is not None:
        st = checked["storage"]
        print(
            f"storage:  {st['source']}, {st['min_stage_m']:g} to {st['max_stage_m']:g} m, "
            f"up to {number(st['max_volume_m3'], 4)} m³",
            file=out,
        )
    if checked["rating"] is not None:
        rt = checked["rating"]
        weak = ", weakly identified: " + ", ".join(rt["weakly_identified"])
        print(
            f"outlet:   {rt['form']} rating fitted to {rt['gaugings']} gaugings, "
            f"{rt['gauged_range_m'][0]:g} to {rt['gauged_range_m'][1]:g} m"
            + (weak if rt["weakly_identified"] else ""),
            file=out,
        )
    for name, lv in checked["levels"].items():
        where = "" if lv["inside_storage"] else "  (outside the storage relation)"
        print(f"level:    {name} = {lv['stage_m']:g} m{where}", file=out)
    if note:
        print(f"note: {note}", file=out)
    out.flush()
    for m in messages:
        print(f"warning: {m}", file=sys.stderr)
    return 0
