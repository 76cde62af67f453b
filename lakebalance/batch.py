"""Batch runs: the annual report of many sites, on local processes or a Dask cluster.

A failing site never stops the others: it is listed with its error on the batch index page, which
links every site report, tabulates the headline numbers and maps the sites.
"""

from __future__ import annotations

import datetime as _dt
import os
import sys
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import InputError, LakebalanceError

__all__ = [
    "SiteOutcome",
    "BatchResult",
    "read_register",
    "run_batch",
    "report_one",
    "write_index",
]

#: Columns of the batch index after the site name and status (keys of a report's ``headline``).
HEADLINE_COLUMNS = (
    ("water_year", "water year", ""),
    ("closure_percent", "closure error", "% of inflow"),
    ("residual_m3", "residual", "m³"),
    ("seepage_m3_per_day", "seepage", "m³/d"),
    ("residence_days", "residence time", "d"),
    ("stage_end_m", "stage at year end", "m"),
)


@dataclass(frozen=True)
class SiteOutcome:
    """What one site of a batch produced: its report folder and headline numbers, or its error."""

    site_file: str
    name: str
    ok: bool
    report: str | None = None  # path of report.html
    headline: dict[str, Any] = field(default_factory=dict)
    error: str | None = None
    latitude: float | None = None
    longitude: float | None = None
    seconds: float = 0.0


@dataclass(frozen=True)
class BatchResult:
    """All outcomes of a batch and the index page that lists them."""

    outcomes: tuple[SiteOutcome, ...]
    index: Path | None

    @property
    def failed(self) -> tuple[SiteOutcome, ...]:
        """The sites that failed."""
        return tuple(o for o in self.outcomes if not o.ok)


def read_register(path: str | Path) -> list[tuple[Path, float | None, float | None]]:
    """Site files listed in a register: a CSV or a GeoPackage with a ``site_file`` column.

    Relative site-file paths are taken from the register's folder. Optional coordinates come from
    ``latitude``/``longitude`` columns (CSV) or the point geometry (any vector layer, reprojected to
    longitude/latitude).

    Returns
    -------
    list of (site file, latitude in degrees or None, longitude in degrees or None)
    """
    path = Path(path)
    if not path.is_file():
        raise InputError("register file not found", file=path)
    suffix = path.suffix.lower()
    if suffix in (".gpkg", ".shp", ".geojson", ".json", ".fgb"):
        import geopandas as gpd

        try:
            frame = gpd.read_file(path)
        except Exception as exc:
            raise InputError(f"cannot read register layer ({exc})", file=path) from None
        if "site_file" not in frame.columns:
            raise InputError("register has no 'site_file' column", file=path, column="site_file")
        lat = lon = [None] * len(frame)
        if frame.geometry is not None and frame.crs is not None and not frame.geometry.isna().all():
            pts = frame.to_crs(4326).geometry.representative_point()
            lat, lon = list(pts.y), list(pts.x)
        rows = list(zip(frame["site_file"], lat, lon, strict=True))
        start_line = 1
    else:
        import pandas as pd

        try:
            frame = pd.read_csv(path, dtype=str, keep_default_na=False)
        except Exception as exc:
            raise InputError(f"cannot read register ({exc})", file=path) from None
        if "site_file" not in frame.columns:
            raise InputError("register has no 'site_file' column", file=path, line=1)

        def num(col: str, i: int) -> float | None:
            if col not in frame.columns or not str(frame[col].iloc[i]).strip():
                return None
            try:
                return float(frame[col].iloc[i])
            except ValueError:
                raise InputError(
                    f"'{frame[col].iloc[i]}' is not a number", file=path, line=i + 2, column=col
                ) from None

        rows = [
            (frame["site_file"].iloc[i], num("latitude", i), num("longitude", i))
            for i in range(len(frame))
        ]
        start_line = 2
    out = []
    for i, (site_file, la, lo) in enumerate(rows):
        if not isinstance(site_file, str) or not site_file.strip():
            raise InputError("empty site_file", file=path, line=i + start_line, column="site_file")
        p = Path(site_file.strip())
        out.append((Path(os.path.realpath(p if p.is_absolute() else path.parent / p)), la, lo))
    return out


def report_one(
    site_file: str | Path,
    out_dir: str | Path,
    year: int | None = None,
    seed: int | None = None,
    options: dict[str, Any] | None = None,
) -> SiteOutcome:
    """Make the report of one site; any error becomes a failed :class:`SiteOutcome` (never raises).

    This is the unit of work of a batch (it runs in a worker process or on a Dask worker).
    """
    import time

    from .report.build import make_report

    t0 = time.perf_counter()
    name = Path(site_file).stem
    try:
        result = make_report(site_file, out_dir, year=year, seed=seed, **(options or {}))
        return SiteOutcome(
            site_file=str(site_file),
            name=result.name,
            ok=True,
            report=str(result.html),
            headline=result.headline,
            latitude=result.latitude,
            longitude=result.longitude,
            seconds=time.perf_counter() - t0,
        )
    except LakebalanceError as exc:
        message = exc.one_line().removeprefix("error: ")
    except Exception as exc:  # a bug in lakebalance: keep the batch going, but say so
        message = f"internal error ({type(exc).__name__}: {exc}); please report it"
    return SiteOutcome(
        site_file=str(site_file),
        name=name,
        ok=False,
        error=message,
        seconds=time.perf_counter() - t0,
    )


def _warm_imports() -> None:
    """Import what every report needs once, before worker processes are forked."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot  # noqa: F401
    import scipy.optimize  # noqa: F401
    import scipy.stats  # noqa: F401
    import statsmodels.api  # noqa: F401

    from . import analysis  # noqa: F401
    from .report import build  # noqa: F401
    from .units import registry

    registry()


def _progress(total: int, enabled: bool) -> Any:
    from tqdm import tqdm

    return tqdm(total=total, unit="site", disable=not enabled, file=sys.stderr, leave=False)


def _run_local(
    jobs: Sequence[tuple[Path, Path]],
    worker: Callable[..., SiteOutcome],
    kwargs: dict[str, Any],
    workers: int,
    progress: bool,
) -> list[SiteOutcome]:
    outcomes: list[SiteOutcome | None] = [None] * len(jobs)
    bar = _progress(len(jobs), progress)
    if workers <= 1 or len(jobs) <= 1:
        for i, (site, out) in enumerate(jobs):
            outcomes[i] = worker(site, out, **kwargs)
            bar.update(1)
    else:
        import multiprocessing as mp
        from concurrent.futures import ProcessPoolExecutor, as_completed

        ctx = mp.get_context("fork") if sys.platform.startswith("linux") else None
        if ctx is not None:
            _warm_imports()  # forked workers inherit the loaded libraries instead of each paying
        with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
            futures = {pool.submit(worker, s, o, **kwargs): i for i, (s, o) in enumerate(jobs)}
            for fut in as_completed(futures):
                outcomes[futures[fut]] = fut.result()
                bar.update(1)
    bar.close()
    return [o for o in outcomes if o is not None]


def _run_dask(
    jobs: Sequence[tuple[Path, Path]],
    worker: Callable[..., SiteOutcome],
    kwargs: dict[str, Any],
    scheduler: Any,
    progress: bool,
) -> list[SiteOutcome]:
    try:
        from distributed import Client, as_completed
    except ImportError:  # pragma: no cover - optional dependency
        raise LakebalanceError(
            "a Dask scheduler was given but 'distributed' is not installed "
            "(pip install 'lakebalance[dask]')"
        ) from None
    own = not isinstance(scheduler, Client)
    client = Client(scheduler) if own else scheduler
    try:
        futures = [client.submit(worker, str(s), str(o), pure=False, **kwargs) for s, o in jobs]
        index = {f.key: i for i, f in enumerate(futures)}
        outcomes: list[SiteOutcome | None] = [None] * len(jobs)
        bar = _progress(len(jobs), progress)
        for fut in as_completed(futures):
            outcomes[index[fut.key]] = fut.result()
            bar.update(1)
        bar.close()
    finally:
        if own:
            client.close()
    return [o for o in outcomes if o is not None]


def run_batch(
    sites: Iterable[str | Path],
    out_dir: str | Path,
    *,
    year: int | None = None,
    seed: int | None = None,
    workers: int | None = None,
    scheduler: Any = None,
    progress: bool = False,
    options: dict[str, Any] | None = None,
    coordinates: dict[str, tuple[float | None, float | None]] | None = None,
    worker: Callable[..., SiteOutcome] = report_one,
) -> BatchResult:
    """Report many sites and write the batch index page.

    Parameters
    ----------
    sites : iterable of paths
        Site files. Each report goes to ``out_dir/<site-file stem>/``.
    out_dir : path
        Folder of the batch; ``index.html`` and ``index.csv`` are written there.
    year : int, optional
        Water year to report (default: each site's last complete water year).
    seed : int, optional
        Seed for every site (default: each site file's own).
    workers : int, optional
        Local worker processes (default: the number of cores).
    scheduler : str or distributed.Client, optional
        A Dask scheduler address (``"tcp://host:8786"``) or client; the batch then runs there.
    progress : bool
        Show a progress bar on stderr.
    options : dict, optional
        Extra keyword arguments of :func:`lakebalance.report.build.make_report`.
    coordinates : dict, optional
        Site file -> (latitude, longitude) from a register, for the map.
    """
    out_dir = Path(out_dir)
    site_list = [Path(s).resolve() for s in sites]
    if not site_list:
        raise LakebalanceError("no site files given")
    stems: dict[str, int] = {}
    jobs = []
    for s in site_list:
        stem = s.stem if s.stem != "site" else s.parent.name or s.stem
        n = stems.get(stem, 0)
        stems[stem] = n + 1
        jobs.append((s, out_dir / (stem if n == 0 else f"{stem}-{n + 1}")))
    kwargs = {"year": year, "seed": seed, "options": options}
    if scheduler is not None:
        outcomes = _run_dask(jobs, worker, kwargs, scheduler, progress)
    else:
        outcomes = _run_local(jobs, worker, kwargs, workers or os.cpu_count() or 1, progress)
    if coordinates:
        import dataclasses

        outcomes = [
            dataclasses.replace(
                o,
                latitude=o.latitude
                if o.latitude is not None
                else coordinates.get(o.site_file, (None, None))[0],
                longitude=o.longitude
                if o.longitude is not None
                else coordinates.get(o.site_file, (None, None))[1],
            )
            for o in outcomes
        ]
    index = write_index(outcomes, out_dir)
    return BatchResult(outcomes=tuple(outcomes), index=index)


def _map_png(outcomes: Sequence[SiteOutcome]) -> bytes | None:
    located = [o for o in outcomes if o.latitude is not None and o.longitude is not None]
    if not located:
        return None
    import io

    import geopandas as gpd
    from shapely.geometry import Point

    from .report.style import new_figure

    frame = gpd.GeoDataFrame(
        {"name": [o.name for o in located], "ok": [o.ok for o in located]},
        geometry=[Point(o.longitude, o.latitude) for o in located],
        crs=4326,
    )
    fig, ax = new_figure(width=6.0, height=4.0)
    ok = frame[frame["ok"]]
    bad = frame[~frame["ok"]]
    if len(ok):
        ok.plot(ax=ax, marker="o", color="#0072B2", markersize=25, label="reported")
    if len(bad):
        bad.plot(ax=ax, marker="x", color="#D55E00", markersize=40, label="failed")
    if len(frame) <= 40:
        for _, row in frame.iterrows():
            ax.annotate(
                row["name"],
                (row.geometry.x, row.geometry.y),
                fontsize=7,
                xytext=(3, 3),
                textcoords="offset points",
            )
    ax.set_xlabel("longitude (°)")
    ax.set_ylabel("latitude (°)")
    ax.legend(loc="best")
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    import matplotlib.pyplot as plt

    plt.close(fig)
    return buf.getvalue()


def _cell(value: Any) -> str:
    if value is None:
        return "–"
    if isinstance(value, float):
        return f"{value:,.1f}" if abs(value) >= 100 else f"{value:.2f}"
    return str(value)


def write_index(outcomes: Sequence[SiteOutcome], out_dir: str | Path) -> Path:
    """Write ``index.html`` (links, headline table, map, failures) and ``index.csv`` in ``out_dir``."""
    import pandas as pd

    from . import __version__
    from .io.output import write_csv, write_text
    from .report.html import png_base64, render

    out_dir = Path(out_dir)
    rows, records = [], []
    for o in outcomes:
        link = os.path.relpath(o.report, out_dir) if o.report else None
        cells = [_cell(o.headline.get(k)) for k, _, _ in HEADLINE_COLUMNS]
        rows.append(
            {"name": o.name, "status": "ok" if o.ok else "failed", "link": link, "cells": cells}
        )
        records.append(
            {
                "site": o.name,
                "site_file": o.site_file,
                "status": "ok" if o.ok else "failed",
                "error": o.error or "",
                **{k: o.headline.get(k) for k, _, _ in HEADLINE_COLUMNS},
                "report": link or "",
            }
        )
    png = _map_png(outcomes)
    columns = ["site", "status"] + [
        f"{label} ({unit})" if unit else label for _, label, unit in HEADLINE_COLUMNS
    ]
    n_bad = sum(not o.ok for o in outcomes)
    html = render(
        "index.html",
        title="lakebalance batch report",
        subtitle=f"{len(outcomes)} sites, {len(outcomes) - n_bad} reported, {n_bad} failed",
        columns=columns,
        rows=rows,
        failures=[
            {"name": o.name, "path": o.site_file, "error": o.error} for o in outcomes if not o.ok
        ],
        map_png=png_base64(png) if png else None,
        version=__version__,
        run_utc=_dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
    )
    write_csv(out_dir / "index.csv", pd.DataFrame.from_records(records), index=False)
    return write_text(out_dir / "index.html", html)
