"""The filing archive: each report run can file its figures, and the next filing lists what changed.

An annual filing states every water year's balance again, and earlier years' figures move when the
record behind them changes: new gaugings refit the rating, an accepted correction shifts a gauge,
a new survey changes the storage relation, a data file is replaced. The archive keeps every
filing so that the next one can say which earlier year's figure changed, by how much, and why.

The store is one SQLite file (``archive.sqlite`` in the archive folder; SQLite through Python's
standard library, readable by any SQLite tool, a spreadsheet's database import or pandas'
``read_sql``). Its tables:

``filing``
    one row per filing: site, water year reported, time (UTC), tool version, the provenance hash
    (SHA-256 over the site file's and every input's SHA-256, the seeds and the tool version), the
    inputs with their hashes, the accepted corrections, the number of gaugings and a hash of each
    section of the site file.
``figure``
    one row per site, water year, term and filing: the value in SI at full precision, its unit
    and the filing's provenance hash.
``restatement``
    what a filing changed in the figures of the previous filing of the same site, with the cause.

The register-level index (``index.html`` and ``index.csv`` beside the database) shows, per site,
the latest filing's year beside the year before and how many figures it restated.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
import sqlite3
import tomllib
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis import Lake
    from ..display import Formatter

__all__ = [
    "ARCHIVE_FILE",
    "TERMS",
    "Restatement",
    "Filing",
    "figures_of",
    "prepare_filing",
    "read_filings",
    "read_restatements",
    "write_index",
]

#: The database file in the archive folder.
ARCHIVE_FILE = "archive.sqlite"

#: Terms filed for every water year (SI column names of the water-year balance), with their unit.
TERMS: dict[str, str] = {
    "complete_days": "d",
    "inflow_m3": "m3",
    "rain_m3": "m3",
    "evaporation_m3": "m3",
    "outflow_m3": "m3",
    "withdrawal_m3": "m3",
    "release_m3": "m3",
    "storage_change_m3": "m3",
    "residual_m3": "m3",
    "residual_mm": "mm",
    "closure_error_pct": "%",
}

#: Terms that every input can move (the residual closes the balance of all the others).
_CLOSING = {"residual_m3", "residual_mm", "closure_error_pct"}
#: Terms a change of each kind of input can move.
_MOVES: dict[str, set[str]] = {
    "stage": set(TERMS),
    "storage": {"storage_change_m3", "rain_m3", "evaporation_m3", "outflow_m3", "complete_days"},
    "rating": {"outflow_m3", "complete_days"},
    "inflow": {"inflow_m3", "complete_days"},
    "rain": {"rain_m3", "complete_days"},
    "evaporation": {"evaporation_m3", "complete_days"},
    "withdrawal": {"withdrawal_m3", "complete_days"},
    "release": {"release_m3", "complete_days"},
    "any": set(TERMS),
}
#: Series roles whose data make the evaporation term.
_EVAPORATION_ROLES = {
    "evaporation", "pan", "tmax", "tmin", "tmean", "rh", "rh_max", "rh_min", "dewpoint", "wind",
    "solar", "sunshine",
}  # fmt: skip

_SCHEMA = """
CREATE TABLE IF NOT EXISTS filing (
    filing_id INTEGER PRIMARY KEY AUTOINCREMENT,
    site TEXT NOT NULL,
    water_year INTEGER NOT NULL,
    filed_utc TEXT NOT NULL,
    tool_version TEXT NOT NULL,
    provenance_sha256 TEXT NOT NULL,
    site_sha256 TEXT NOT NULL,
    inputs_json TEXT NOT NULL,
    corrections_json TEXT NOT NULL,
    sections_json TEXT NOT NULL,
    gaugings INTEGER,
    display_units TEXT NOT NULL,
    report_folder TEXT
);
CREATE TABLE IF NOT EXISTS figure (
    filing_id INTEGER NOT NULL REFERENCES filing(filing_id),
    site TEXT NOT NULL,
    water_year INTEGER NOT NULL,
    term TEXT NOT NULL,
    value REAL,
    unit TEXT NOT NULL,
    provenance_sha256 TEXT NOT NULL,
    PRIMARY KEY (filing_id, water_year, term)
);
CREATE TABLE IF NOT EXISTS restatement (
    filing_id INTEGER NOT NULL REFERENCES filing(filing_id),
    previous_filing_id INTEGER NOT NULL REFERENCES filing(filing_id),
    site TEXT NOT NULL,
    water_year INTEGER NOT NULL,
    term TEXT NOT NULL,
    value_before REAL,
    value_after REAL,
    change REAL,
    unit TEXT NOT NULL,
    cause TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS figure_site ON figure(site, water_year, term);
"""


# --------------------------------------------------------------------------------------------
# What one filing holds
# --------------------------------------------------------------------------------------------
def figures_of(lake: Lake) -> dict[tuple[int, str], float | None]:
    """Every water year's filed terms of ``lake``'s balance, SI at full precision (None where a
    term could not be computed). Empty when the balance could not run."""
    bal = lake.get("balance")
    if bal is None:
        return {}
    wy = bal.water_years()
    out: dict[tuple[int, str], float | None] = {}
    for year, row in wy.iterrows():
        for term in TERMS:
            if term in row.index:
                v = float(row[term])
                out[(int(year), term)] = v if math.isfinite(v) else None
    return out


def _sections(site_file: Path) -> dict[str, str]:
    """SHA-256 of each top-level section of a site file (canonical JSON of its parsed TOML), so
    that a filing can say which settings changed, whatever their layout or comments."""
    with open(site_file, "rb") as fh:
        data = tomllib.load(fh)
    return {
        key: hashlib.sha256(
            json.dumps(value, sort_keys=True, default=str).encode("utf-8")
        ).hexdigest()
        for key, value in data.items()
    }


def _corrections(site_file: Path) -> list[dict[str, Any]]:
    with open(site_file, "rb") as fh:
        data = tomllib.load(fh)
    items = data.get("correction", [])
    return [json.loads(json.dumps(c, default=str)) for c in items if isinstance(c, dict)]


def provenance_hash(prov: dict[str, Any]) -> str:
    """SHA-256 of what a filing rests on: the site file's and each input's SHA-256, the seeds
    and the tool version (canonical JSON)."""
    basis = {
        "site": prov["site_sha256"],
        "inputs": sorted((i["what"], i["sha256"]) for i in prov["inputs"]),
        "seeds": prov.get("seeds", {}),
        "tool": prov.get("tool_version"),
    }
    return hashlib.sha256(json.dumps(basis, sort_keys=True).encode("utf-8")).hexdigest()


# --------------------------------------------------------------------------------------------
# Restatements
# --------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Cause:
    """One change between two filings: what it says, the terms it can move, and the water
    years it can touch (None: every year)."""

    text: str
    moves: frozenset[str]
    years: frozenset[int] | None = None

    def touches(self, year: int, term: str) -> bool:
        """Whether this change can move ``term`` of water ``year``."""
        in_year = self.years is None or year in self.years
        return in_year and (term in self.moves or term in _CLOSING)


@dataclass(frozen=True)
class Restatement:
    """An earlier figure that changed since the last filing (SI), and why."""

    water_year: int
    term: str
    before: float | None
    after: float | None
    cause: str

    @property
    def change(self) -> float | None:
        """``after - before`` (None when either is missing)."""
        if self.before is None or self.after is None:
            return None
        return self.after - self.before

    def to_dict(self, fmt: Formatter | None = None) -> dict[str, Any]:
        """Plain dict for JSON; with the texts people read when ``fmt`` is given."""
        from ..display import Formatter, header

        fmt = fmt or Formatter()
        return {
            "water_year": self.water_year,
            "term": self.term,
            "label": header(self.term, fmt.units),
            "before": self.before,
            "after": self.after,
            "change": self.change,
            "unit": TERMS[self.term],
            "before_text": fmt.cell(self.term, self.before),
            "after_text": fmt.cell(self.term, self.after),
            "change_text": fmt.cell(self.term, self.change),
            "cause": self.cause,
        }


def _role_of(what: str, roles: dict[str, str]) -> str:
    """The kind of input named ``what`` in the provenance (``series inflow:brook`` -> inflow)."""
    if what == "gaugings":
        return "rating"
    if what == "storage":
        return "storage"
    key = what.removeprefix("series ").strip()
    role = roles.get(key, key.split(":", 1)[0])
    return "evaporation" if role in _EVAPORATION_ROLES else role


def _water_years_from(start: str, end: str | None, start_month: int, years: Iterable[int]):
    """The water years (named by the calendar year they end in) that a dated change touches."""
    first = _dt.date.fromisoformat(str(start)[:10])
    last = _dt.date.fromisoformat(str(end)[:10]) if end else None

    def label(d: _dt.date) -> int:
        return d.year + (1 if start_month > 1 and d.month >= start_month else 0)

    lo = label(first)
    hi = label(last) if last else None
    return frozenset(y for y in years if y >= lo and (hi is None or y <= hi))


def causes_between(
    before: dict[str, Any], after: dict[str, Any], *, years: Iterable[int], start_month: int,
    roles: dict[str, str],
) -> list[Cause]:  # fmt: skip
    """The changes from the filing ``before`` to ``after`` (rows of the ``filing`` table, with
    ``inputs``, ``corrections`` and ``sections`` parsed), each with the terms and years it can
    move."""
    years = list(years)
    out: list[Cause] = []
    # accepted corrections: added or withdrawn, dated
    old = {json.dumps(c, sort_keys=True): c for c in before["corrections"]}
    new = {json.dumps(c, sort_keys=True): c for c in after["corrections"]}
    for key, c in new.items():
        if key not in old:
            what = _role_of(f"series {c.get('series', '')}", roles)
            out.append(
                Cause(
                    f"accepted correction: {c.get('series')} {float(c.get('value', 0)):+g} from "
                    f"{c.get('start')}" + (f" to {c['end']}" if c.get("end") else "")
                    + (f" ({c['reason']})" if c.get("reason") else ""),
                    frozenset(_MOVES.get(what, _MOVES["any"])),
                    _water_years_from(c.get("start", ""), c.get("end"), start_month, years),
                )
            )  # fmt: skip
    for key, c in old.items():
        if key not in new:
            what = _role_of(f"series {c.get('series', '')}", roles)
            out.append(
                Cause(
                    f"withdrawn correction: {c.get('series')} {float(c.get('value', 0)):+g} from "
                    f"{c.get('start')}",
                    frozenset(_MOVES.get(what, _MOVES["any"])),
                    _water_years_from(c.get("start", ""), c.get("end"), start_month, years),
                )
            )
    # input files, by their hash
    was = {i["what"]: i for i in before["inputs"]}
    now = {i["what"]: i for i in after["inputs"]}
    for what in sorted(set(was) | set(now)):
        a, b = was.get(what), now.get(what)
        kind = _role_of(what, roles)
        moves = frozenset(_MOVES.get(kind, _MOVES["any"]))
        if a is None:
            out.append(Cause(f"new input: {what} ({b['relative_path']})", moves))
        elif b is None:
            out.append(Cause(f"input no longer read: {what} ({a['relative_path']})", moves))
        elif a["sha256"] != b["sha256"]:
            if kind == "rating":
                n0, n1 = before.get("gaugings"), after.get("gaugings")
                if n0 is not None and n1 is not None and n1 > n0:
                    text = f"new gaugings ({n1 - n0} more: {n0} to {n1})"
                elif n0 is not None and n1 is not None and n1 < n0:
                    text = f"gaugings removed ({n0} to {n1})"
                else:
                    text = "gaugings file changed"
            elif kind == "storage":
                text = "new survey (storage relation file changed)"
            else:
                text = f"changed input: {what}"
            text += f" (SHA-256 {a['sha256'][:12]}… to {b['sha256'][:12]}…)"
            out.append(Cause(text, moves))
    # settings of the site file, by section (corrections said above)
    for section in sorted(set(before["sections"]) | set(after["sections"])):
        if section in ("correction", "report"):
            continue
        if before["sections"].get(section) != after["sections"].get(section):
            kind = {"outlet": "rating", "storage": "storage"}.get(section, "any")
            if section == "series":
                kind = "any"
            out.append(
                Cause(f"changed site settings: [{section}]", frozenset(_MOVES.get(kind, set())))
            )
    if before["tool_version"] != after["tool_version"]:
        out.append(
            Cause(
                f"lakebalance {before['tool_version']} to {after['tool_version']}",
                frozenset(_MOVES["any"]),
            )
        )
    return out


def _differs(a: float | None, b: float | None) -> bool:
    if a is None or b is None:
        return (a is None) != (b is None)
    return abs(a - b) > 1e-9 * max(1.0, abs(a), abs(b))


def restatements(
    before: dict[tuple[int, str], float | None],
    after: dict[tuple[int, str], float | None],
    causes: list[Cause],
) -> list[Restatement]:
    """The figures of ``before`` that ``after`` states differently (years in both), each with
    the causes that can move it (all causes when none is specific; "no recorded change of input"
    when the filings rest on the same inputs)."""
    out = []
    for key in sorted(set(before) & set(after)):
        if not _differs(before[key], after[key]):
            continue
        year, term = key
        named = [c.text for c in causes if c.touches(year, term)] or [c.text for c in causes]
        cause = "; ".join(named) if named else "no recorded change of input"
        out.append(Restatement(year, term, before[key], after[key], cause))
    return out


# --------------------------------------------------------------------------------------------
# The database
# --------------------------------------------------------------------------------------------
def _connect(folder: Path) -> sqlite3.Connection:
    folder.mkdir(parents=True, exist_ok=True)
    con = sqlite3.connect(folder / ARCHIVE_FILE, timeout=60.0)
    con.executescript(_SCHEMA)
    return con


def _row(con: sqlite3.Connection, cur: sqlite3.Cursor, row: tuple) -> dict[str, Any]:
    names = [d[0] for d in cur.description]
    out = dict(zip(names, row, strict=True))
    out["inputs"] = json.loads(out.pop("inputs_json"))
    out["corrections"] = json.loads(out.pop("corrections_json"))
    out["sections"] = json.loads(out.pop("sections_json"))
    return out


def _last_filing(con: sqlite3.Connection, site: str) -> dict[str, Any] | None:
    cur = con.execute(
        "SELECT * FROM filing WHERE site = ? ORDER BY filing_id DESC LIMIT 1", (site,)
    )
    row = cur.fetchone()
    return None if row is None else _row(con, cur, row)


def _figures(con: sqlite3.Connection, filing_id: int) -> dict[tuple[int, str], float | None]:
    cur = con.execute(
        "SELECT water_year, term, value FROM figure WHERE filing_id = ?", (filing_id,)
    )
    return {(int(y), t): (None if v is None else float(v)) for y, t, v in cur.fetchall()}


@dataclass(frozen=True)
class Filing:
    """A filing prepared by a report run: its row, its figures and its restatements, written to
    the archive by :meth:`record` once the report is complete."""

    folder: Path
    row: dict[str, Any]
    figures: dict[tuple[int, str], float | None]
    previous: dict[str, Any] | None
    restatements: tuple[Restatement, ...] = ()
    fmt: Any = None
    filing_id: list[int] = field(default_factory=list)  # set by record()

    def to_dict(self) -> dict[str, Any]:
        """What the report says of the filing (JSON and HTML)."""
        return {
            "archive": str(self.folder / ARCHIVE_FILE),
            "provenance_sha256": self.row["provenance_sha256"],
            "previous_filed_utc": None if self.previous is None else self.previous["filed_utc"],
            "previous_provenance_sha256": None
            if self.previous is None
            else self.previous["provenance_sha256"],
            "restatements": [r.to_dict(self.fmt) for r in self.restatements],
        }

    def record(self, report_folder: Path | None = None) -> int:
        """Write the filing, its figures and its restatements (one transaction); rewrite the
        register-level index. Returns the filing's id."""
        con = _connect(self.folder)
        try:
            with con:
                row = dict(
                    self.row, report_folder=None if report_folder is None else str(report_folder)
                )
                cols = list(row)
                cur = con.execute(
                    f"INSERT INTO filing ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})",
                    [row[c] for c in cols],
                )
                fid = int(cur.lastrowid)
                con.executemany(
                    "INSERT INTO figure VALUES (?, ?, ?, ?, ?, ?, ?)",
                    [
                        (fid, row["site"], y, t, v, TERMS[t], row["provenance_sha256"])
                        for (y, t), v in sorted(self.figures.items())
                    ],
                )
                if self.previous is not None:
                    con.executemany(
                        "INSERT INTO restatement VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                        [
                            (fid, self.previous["filing_id"], row["site"], r.water_year, r.term,
                             r.before, r.after, r.change, TERMS[r.term], r.cause)
                            for r in self.restatements
                        ],
                    )  # fmt: skip
        finally:
            con.close()
        self.filing_id.append(fid)
        write_index(self.folder)
        return fid


def prepare_filing(
    folder: str | Path, lake: Lake, year: int, prov: dict[str, Any], fmt: Formatter
) -> Filing:
    """The filing of ``lake``'s report of water ``year`` into the archive ``folder``, compared
    with the last filing of the same site there (nothing is written until
    :meth:`Filing.record`)."""
    folder = Path(folder)
    site = lake.site
    figures = figures_of(lake)
    fit = lake.get("rating")
    row = {
        "site": site.site.name,
        "water_year": int(year),
        "filed_utc": _dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
        "tool_version": prov["tool_version"],
        "provenance_sha256": provenance_hash(prov),
        "site_sha256": prov["site_sha256"],
        "inputs_json": json.dumps(
            [{k: i[k] for k in ("what", "relative_path", "sha256")} for i in prov["inputs"]]
        ),
        "corrections_json": json.dumps(_corrections(site.path)),
        "sections_json": json.dumps(_sections(site.path)),
        "gaugings": None if fit is None else int(fit.n),
        "display_units": fmt.units.system,
    }
    con = _connect(folder)
    try:
        previous = _last_filing(con, row["site"])
        before = {} if previous is None else _figures(con, previous["filing_id"])
    finally:
        con.close()
    found: list[Restatement] = []
    if previous is not None:
        now = dict(row)
        now["inputs"] = json.loads(row["inputs_json"])
        now["corrections"] = json.loads(row["corrections_json"])
        now["sections"] = json.loads(row["sections_json"])
        roles = {s.key: s.role for s in site.series}
        causes = causes_between(
            previous, now, years={y for y, _ in figures}, start_month=site.site.water_year_start,
            roles=roles,
        )  # fmt: skip
        found = restatements(before, figures, causes)
    return Filing(folder, row, figures, previous, tuple(found), fmt)


# --------------------------------------------------------------------------------------------
# Reading back, and the register-level index
# --------------------------------------------------------------------------------------------
def read_filings(folder: str | Path) -> list[dict[str, Any]]:
    """Every filing in the archive, oldest first (rows of the ``filing`` table)."""
    con = _connect(Path(folder))
    try:
        cur = con.execute("SELECT * FROM filing ORDER BY filing_id")
        return [_row(con, cur, r) for r in cur.fetchall()]
    finally:
        con.close()


def read_restatements(folder: str | Path, filing_id: int | None = None) -> list[dict[str, Any]]:
    """The restatements of one filing (default: the latest), as rows."""
    con = _connect(Path(folder))
    try:
        if filing_id is None:
            got = con.execute("SELECT MAX(filing_id) FROM filing").fetchone()[0]
            filing_id = -1 if got is None else int(got)
        cur = con.execute(
            "SELECT * FROM restatement WHERE filing_id = ? ORDER BY water_year, term", (filing_id,)
        )
        names = [d[0] for d in cur.description]
        return [dict(zip(names, r, strict=True)) for r in cur.fetchall()]
    finally:
        con.close()


#: The key figures of the register-level index.
INDEX_TERMS = ("inflow_m3", "outflow_m3", "evaporation_m3", "residual_m3", "closure_error_pct")


def write_index(folder: str | Path) -> Path:
    """``index.html`` and ``index.csv`` of the archive: per site, its latest filing's water year
    beside the year before (as that filing states both), the change, and how many earlier
    figures the filing restated. Returns the HTML's path."""
    import pandas as pd

    from ..display import Formatter, display_units
    from .html import render

    folder = Path(folder)
    con = _connect(folder)
    try:
        latest = con.execute(
            "SELECT f.filing_id, f.site, f.water_year, f.filed_utc, f.provenance_sha256, "
            "f.display_units, (SELECT COUNT(*) FROM restatement r WHERE r.filing_id = f.filing_id), "
            "(SELECT COUNT(*) FROM filing g WHERE g.site = f.site) "
            "FROM filing f WHERE f.filing_id = (SELECT MAX(filing_id) FROM filing h "
            "WHERE h.site = f.site) ORDER BY f.site"
        ).fetchall()
        records = []
        for fid, site, year, filed, phash, units, restated, filings in latest:
            figs = _figures(con, fid)
            rec: dict[str, Any] = {
                "site": site, "water_year": year, "filed_utc": filed, "filings": filings,
                "restated_figures": restated, "provenance_sha256": phash, "units": units,
            }  # fmt: skip
            for term in INDEX_TERMS:
                rec[term] = figs.get((year, term))
                rec[f"previous_year_{term}"] = figs.get((year - 1, term))
            records.append(rec)
    finally:
        con.close()
    frame = pd.DataFrame(records)
    csv_path = folder / "index.csv"
    frame.drop(columns=["units"], errors="ignore").to_csv(csv_path, index=False)
    systems = {r["units"] for r in records}
    fmt = Formatter(display_units(systems.pop() if len(systems) == 1 else "SI"))
    from ..display import header

    columns = ["site", "water year", "filed (UTC)", "filings", "earlier figures restated"]
    for term in INDEX_TERMS:
        columns += [header(term, fmt.units) + ", this year", "the year before"]
    rows = []
    for r in records:
        cells = [r["site"], str(r["water_year"]), r["filed_utc"], str(r["filings"]),
                 str(r["restated_figures"])]  # fmt: skip
        for term in INDEX_TERMS:
            cells += [fmt.cell(term, r[term]), fmt.cell(term, r[f"previous_year_{term}"])]
        rows.append(cells)
    html = render(
        "archive.html",
        title="Filing archive: the latest filing of each site",
        columns=columns,
        rows=rows,
        units=fmt.units.system,
        provenance={"tool_version": _version()},
    )
    path = folder / "index.html"
    path.write_text(html, encoding="utf-8")
    return path


def _version() -> str:
    from .. import __version__

    return __version__
