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

from .errors import InputError, LakebalanceError, SchedulerError, excerpt
from .options import Options, setting

__all__ = [
    "BatchOptions",
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
class BatchOptions(Options):
    """Limits of a batch run (``lakebalance report --site-timeout/--site-memory``)."""

    # wall-clock time one site may take before its worker is stopped (a report takes minutes)
    site_timeout: float = setting(3600.0, unit="s", low=1.0)
    # address space of one site's worker; default: the available memory shared by the workers
    site_memory: float | None = setting(None, unit="GiB", low=0.5)
    # how long to try to reach a Dask scheduler
    scheduler_timeout: float = setting(5.0, unit="s", low=0.1, high=600.0)


@dataclass(frozen=True)
class SiteOutcome:
    """What one site of a batch produced: its report folder and headline numbers, or its error.

    ``folder`` is the site's sub-folder of the batch (a slug of its file name, unique in the
    run); ``note`` says when it had to differ from the site's own slug.
    """

    site_file: str
    name: str
    ok: bool
    report: str | None = None  # path of report.html
    headline: dict[str, Any] = field(default_factory=dict)
    error: str | None = None
    latitude: float | None = None
    longitude: float | None = None
    seconds: float = 0.0
    folder: str | None = None
    note: str | None = None


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
    from .io.files import check_input

    path = Path(path)
    if not path.exists() and not path.is_symlink():
        raise InputError("register file not found", file=path)
    if not path.is_dir():
        check_input(path, "register")
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
    except MemoryError:
        message = (
            "ran out of memory (the site's worker has a memory limit: see --site-memory); "
            "lower draws or members, or give the site more memory"
        )
    except Exception as exc:  # a bug in lakebalance: keep the batch going, but say so
        message = f"internal error ({type(exc).__name__}: {excerpt(exc)}); please report it"
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


def _failed(site: Path, why: str, seconds: float = 0.0) -> SiteOutcome:
    return SiteOutcome(site_file=str(site), name=site.stem, ok=False, error=why, seconds=seconds)


def _memory_budget(options: BatchOptions, workers: int) -> int | None:
    """Address-space limit of one site's worker (bytes), or None where none can be set."""
    from .resources import address_space_bytes, available_memory_bytes

    try:
        import resource  # noqa: F401
    except ImportError:  # pragma: no cover - not on Windows
        return None
    if options.site_memory is not None:
        budget = int(options.site_memory * 1024**3)
    else:
        budget = max(1024**3, int(0.8 * available_memory_bytes() / max(1, workers)))
    return (address_space_bytes() or 0) + budget


def _child(conn: Any, worker: Callable[..., SiteOutcome], site: Path, out: Path,
           kwargs: dict[str, Any], memory: int | None) -> None:  # fmt: skip
    """Body of one site's worker process: limit the memory, run, send the outcome."""
    if memory is not None:
        import resource

        _, hard = resource.getrlimit(resource.RLIMIT_AS)
        if hard == resource.RLIM_INFINITY or memory <= hard:
            resource.setrlimit(resource.RLIMIT_AS, (memory, hard))
    try:
        outcome = worker(site, out, **kwargs)
    except BaseException as exc:  # a worker that raises despite report_one's promise
        outcome = _failed(site, f"internal error ({type(exc).__name__}: {excerpt(exc)})")
    conn.send(outcome)
    conn.close()


def _death(process: Any) -> str:
    import signal

    code = process.exitcode
    if code is not None and code < 0:
        try:
            name = signal.Signals(-code).name
        except ValueError:
            name = f"signal {-code}"
        why = " (the system stops processes that way when memory runs out)" if code == -9 else ""
        return f"its worker process was killed by {name}{why}; the other sites went on"
    return f"its worker process ended with exit code {code} before giving a result"


def _run_local(
    jobs: Sequence[tuple[Path, Path]],
    worker: Callable[..., SiteOutcome],
    kwargs: dict[str, Any],
    workers: int,
    progress: bool,
    limits: BatchOptions,
) -> list[SiteOutcome]:
    """Each site in its own worker process (at most ``workers`` at once), so that a site that
    hangs is stopped at its time limit and a worker that dies takes only its own site."""
    import multiprocessing as mp
    import time
    from multiprocessing.connection import wait

    outcomes: list[SiteOutcome | None] = [None] * len(jobs)
    bar = _progress(len(jobs), progress)
    if not sys.platform.startswith("linux"):  # no fork: one after the other, in this process
        for i, (site, out) in enumerate(jobs):
            outcomes[i] = worker(site, out, **kwargs)
            bar.update(1)
        bar.close()
        return [o for o in outcomes if o is not None]
    ctx = mp.get_context("fork")
    _warm_imports()  # forked workers inherit the loaded libraries instead of each paying
    memory = _memory_budget(limits, workers)
    pending = list(range(len(jobs)))[::-1]
    running: dict[Any, tuple[int, Any, float]] = {}  # connection -> (job, process, start)

    def finish(conn: Any, outcome: SiteOutcome) -> None:
        i, process, _ = running.pop(conn)
        process.join(5)
        if process.is_alive():  # pragma: no cover - a worker that will not end
            process.kill()
            process.join()
        conn.close()
        outcomes[i] = outcome
        bar.update(1)

    try:
        while pending or running:
            while pending and len(running) < workers:
                i = pending.pop()
                site, out = jobs[i]
                receive, send = ctx.Pipe(duplex=False)
                process = ctx.Process(
                    target=_child, args=(send, worker, site, out, kwargs, memory), daemon=True
                )
                process.start()
                send.close()
                running[receive] = (i, process, time.monotonic())
            deadline = min(t0 for _, _, t0 in running.values()) + limits.site_timeout
            for conn in wait(list(running), timeout=max(0.0, deadline - time.monotonic())):
                i, process, t0 = running[conn]
                try:
                    outcome = conn.recv()
                except (EOFError, OSError):
                    process.join(5)
                    outcome = _failed(jobs[i][0], _death(process), time.monotonic() - t0)
                finish(conn, outcome)
            now = time.monotonic()
            for conn, (i, process, t0) in list(running.items()):
                if now - t0 >= limits.site_timeout:
                    process.kill()
                    why = (
                        f"no result within the time limit of {limits.site_timeout:g} s "
                        "(--site-timeout): its worker was stopped"
                    )
                    finish(conn, _failed(jobs[i][0], why, now - t0))
    except BaseException as exc:
        for conn, (_, process, _) in list(running.items()):  # interrupted: stop the workers
            process.kill()
            process.join()
            conn.close()
        if not isinstance(exc, KeyboardInterrupt):
            raise
        # interrupted by the user: the index is still written, with every site's status
    finally:
        bar.close()
    return [
        o or _failed(jobs[i][0], "not run: the batch was interrupted")
        for i, o in enumerate(outcomes)
    ]


def _client(scheduler: Any, timeout_s: float) -> tuple[Any, bool]:
    """A Dask client for ``scheduler`` (an address or a client) and whether it is ours to close."""
    try:
        from distributed import Client
    except ImportError:  # pragma: no cover - optional dependency
        raise SchedulerError(
            "a Dask scheduler was given but 'distributed' is not installed "
            "(pip install 'lakebalance[dask]')"
        ) from None
    if isinstance(scheduler, Client):
        return scheduler, False
    import logging

    quiet = logging.getLogger("distributed")
    level = quiet.level
    quiet.setLevel(logging.CRITICAL)  # its own connection retries would print tracebacks
    try:
        return Client(scheduler, timeout=timeout_s, set_as_default=False), True
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        text = excerpt(f"{type(exc).__name__}: {exc}")
        raise SchedulerError(
            f"cannot reach the Dask scheduler at {excerpt(str(scheduler), 80)} within "
            f"{timeout_s:g} s ({text}); check the address and that the scheduler runs"
        ) from None
    finally:
        quiet.setLevel(level)


def _run_dask(
    jobs: Sequence[tuple[Path, Path]],
    worker: Callable[..., SiteOutcome],
    kwargs: dict[str, Any],
    scheduler: Any,
    progress: bool,
    limits: BatchOptions,
) -> list[SiteOutcome]:
    """The sites as tasks of a Dask cluster. A task whose worker dies fails alone (Dask's own
    retries aside); sites still running when the batch's time is up are cancelled."""
    import math

    from distributed import as_completed

    client, own = _client(scheduler, limits.scheduler_timeout)
    try:
        futures = [client.submit(worker, str(s), str(o), pure=False, **kwargs) for s, o in jobs]
        index = {f.key: i for i, f in enumerate(futures)}
        outcomes: list[SiteOutcome | None] = [None] * len(jobs)
        bar = _progress(len(jobs), progress)
        try:
            slots = sum(client.nthreads().values()) or 1
        except Exception:  # noqa: BLE001 - only used to size the deadline
            slots = 1
        deadline = limits.site_timeout * math.ceil(len(jobs) / slots)
        try:
            for fut in as_completed(futures, timeout=deadline):
                i = index[fut.key]
                try:
                    outcomes[i] = fut.result()
                except Exception as exc:  # a killed worker (KilledWorker), a cancelled task
                    text = excerpt(f"{type(exc).__name__}: {exc}")
                    outcomes[i] = _failed(jobs[i][0], f"the Dask task failed ({text})")
                bar.update(1)
        except TimeoutError:
            for i, fut in enumerate(futures):
                if outcomes[i] is None:
                    fut.cancel()
                    outcomes[i] = _failed(
                        jobs[i][0], f"no result within the batch's time ({deadline:g} s)"
                    )
        bar.close()
    finally:
        if own:
            client.close()
    return [o or _failed(jobs[i][0], "no result from the cluster") for i, o in enumerate(outcomes)]


def _site_folders(site_list: Sequence[Path]) -> list[tuple[str, str | None]]:
    """The sub-folder of each site: a slug of its file name (its folder's name for a file called
    ``site.toml``), unique in the run."""
    from .io.output import unique_slugs

    names = [s.stem if s.stem.lower() != "site" else (s.parent.name or s.stem) for s in site_list]
    return unique_slugs(names)


def _batch_inputs(site_list: Sequence[Path]) -> list[Path]:
    from .config import load_site
    from .io.output import site_inputs

    inputs: list[Path] = []
    for s in site_list:
        inputs.append(s)
        try:
            inputs.extend(site_inputs(load_site(s)))
        except LakebalanceError:
            pass  # that site fails in its worker, with this same error
    return inputs


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
    limits: BatchOptions | None = None,
    inputs: Iterable[str | Path] = (),
) -> BatchResult:
    """Report many sites and write the batch index page.

    Parameters
    ----------
    sites : iterable of paths
        Site files. Each report goes to ``out_dir/<slug of the site-file stem>/`` (made unique).
    out_dir : path
        Folder of the batch; ``index.html`` and ``index.csv`` are written there. It is written
        whole into a temporary sibling and swapped in at the end, so an earlier batch there stays
        as it was until this one is complete.
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
    worker : callable
        The unit of work (``report_one``).
    limits : BatchOptions, optional
        Per-site time and memory limits, Dask connection time.
    inputs : iterable of paths
        Other files the batch reads (the register), which ``out_dir`` must not hold.

    Raises
    ------
    OutputError
        ``out_dir`` holds an input, or is a folder lakebalance did not write.
    SchedulerError
        The Dask scheduler cannot be reached.
    """
    from .io.output import OutputFolder

    limits = limits or BatchOptions()
    site_list = [Path(os.path.realpath(Path(s).expanduser())) for s in sites]
    if not site_list:
        raise LakebalanceError("no site files given")
    folder = OutputFolder(
        out_dir, inputs=[*_batch_inputs(site_list), *inputs], replace=True, kind="batch"
    )
    try:
        slugs = _site_folders(site_list)
        jobs = [(s, folder.dir / name) for s, (name, _) in zip(site_list, slugs, strict=True)]
        kwargs = {"year": year, "seed": seed, "options": options}
        if scheduler is not None:
            outcomes = _run_dask(jobs, worker, kwargs, scheduler, progress, limits)
        else:
            n = workers or os.cpu_count() or 1
            outcomes = _run_local(jobs, worker, kwargs, n, progress, limits)
        outcomes = [
            _placed(o, name, note, folder.root, coordinates or {})
            for o, (name, note) in zip(outcomes, slugs, strict=True)
        ]
        index = write_index(outcomes, folder.dir, final=folder.root)
        folder.commit()
    finally:
        folder.abandon()  # after the commit, nothing to remove
    return BatchResult(outcomes=tuple(outcomes), index=index)


def _placed(
    o: SiteOutcome, name: str, note: str | None, root: Path, coordinates: dict
) -> SiteOutcome:
    """An outcome with its folder, its report's final path and the register's coordinates."""
    import dataclasses

    lat, lon = coordinates.get(o.site_file, (None, None))
    return dataclasses.replace(
        o,
        folder=name,
        note=note,
        report=str(root / name / "report.html") if o.ok else None,
        latitude=o.latitude if o.latitude is not None else lat,
        longitude=o.longitude if o.longitude is not None else lon,
    )


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


def write_index(
    outcomes: Sequence[SiteOutcome], out_dir: str | Path, *, final: str | Path | None = None
) -> Path:
    """Write ``index.html`` (links, headline table, map, failures) and ``index.csv`` in ``out_dir``.

    Links are relative paths built from each site's folder slug only (``<slug>/report.html``),
    never from a name or a path the user wrote. ``final`` is where ``out_dir`` will be once the
    batch is complete (the returned path is there).
    """
    from urllib.parse import quote

    import pandas as pd

    from . import __version__
    from .io.output import slug, write_csv, write_text
    from .report.html import png_base64, render

    out_dir = Path(out_dir)
    rows, records = [], []
    for o in outcomes:
        link = None
        if o.ok and o.report:  # from the slug alone: a relative path, never a scheme
            link = f"{quote(slug(o.folder or Path(o.report).parent.name))}/report.html"
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
                "folder": o.folder or "",
                "note": o.note or "",
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
        notes=[{"name": o.name, "note": o.note} for o in outcomes if o.note],
        map_png=png_base64(png) if png else None,
        version=__version__,
        run_utc=_dt.datetime.now(_dt.UTC).replace(microsecond=0).isoformat(),
    )
    write_csv(out_dir / "index.csv", pd.DataFrame.from_records(records), index=False)
    write_text(out_dir / "index.html", html)
    return Path(final if final is not None else out_dir) / "index.html"
