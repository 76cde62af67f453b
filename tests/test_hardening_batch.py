"""Batches that finish (issue 18): a hanging site, a killed worker, a memory guard, hostile names,
an unreachable scheduler.

The sites are the small invented lakes of ``_robust_sites``. Process behaviour checked here is
POSIX's (SIGKILL cannot be caught; a killed child's exit code is minus the signal number, as
Python's ``multiprocessing`` reports it; ``RLIMIT_AS`` makes a larger allocation fail with
ENOMEM, which numpy raises as ``MemoryError``) — common practice, no source.
"""

from __future__ import annotations

import csv
import os
import signal
import threading
import time
from pathlib import Path

import pytest
from _robust_sites import write_site

from lakebalance.batch import BatchOptions, report_one, run_batch
from lakebalance.errors import SchedulerError

linux_only = pytest.mark.skipif(
    not os.sys.platform.startswith("linux") or not hasattr(os, "mkfifo"),
    reason="the per-site worker processes are forked (Linux)",
)


def _rows(out: Path) -> dict[str, dict[str, str]]:
    with open(out / "index.csv", newline="", encoding="utf-8") as fh:
        return {r["folder"]: r for r in csv.DictReader(fh)}


def _hanging_or_killed_worker(site, out, **kwargs):
    """report_one, except for two sites: ``hang`` opens its FIFO stage file the way the readers
    did before (a blocking open with no writer: it never returns), and ``killed`` waits for the
    test to kill its process."""
    folder = Path(site).parent
    if folder.name == "hang":
        with open(folder / "stage.csv", "rb") as fh:  # blocks forever
            fh.read()
    if folder.name == "killed":
        (folder / "worker.pid").write_text(str(os.getpid()))
        time.sleep(600)
    return report_one(site, out, **kwargs)


def _kill_when_started(pid_file: Path, stop: threading.Event) -> None:
    while not stop.is_set():
        if pid_file.exists() and pid_file.read_text():
            os.kill(int(pid_file.read_text()), signal.SIGKILL)
            return
        time.sleep(0.05)


@linux_only
def test_five_sites_with_one_hanging_and_one_killed_worker(tmp_path):
    """The other three complete and the index lists all five with their status."""
    sites = [write_site(tmp_path / name) for name in ("alder", "birch", "hang", "killed", "cedar")]
    (tmp_path / "hang" / "stage.csv").unlink()
    os.mkfifo(tmp_path / "hang" / "stage.csv")
    stop = threading.Event()
    killer = threading.Thread(
        target=_kill_when_started, args=(tmp_path / "killed" / "worker.pid", stop), daemon=True
    )
    killer.start()
    out = tmp_path / "batch"
    t0 = time.monotonic()
    try:
        result = run_batch(
            sites,
            out,
            workers=2,
            worker=_hanging_or_killed_worker,
            limits=BatchOptions(site_timeout=20.0),
        )
    finally:
        stop.set()
    assert time.monotonic() - t0 < 240
    rows = _rows(out)
    assert set(rows) == {"alder", "birch", "hang", "killed", "cedar"}
    for name in ("alder", "birch", "cedar"):
        assert rows[name]["status"] == "ok", rows[name]["error"]
        assert (out / name / "report.html").is_file()
        assert rows[name]["report"] == f"{name}/report.html"
    assert rows["hang"]["status"] == "failed"
    assert "time limit of 20 s" in rows["hang"]["error"]
    assert rows["killed"]["status"] == "failed"
    assert "killed by SIGKILL" in rows["killed"]["error"]
    assert len(result.failed) == 2 and result.index == out / "index.html"
    page = (out / "index.html").read_text(encoding="utf-8")
    assert all(name in page for name in rows)


def test_a_fifo_input_fails_its_site_at_once(tmp_path):
    """Through the real readers a FIFO input no longer hangs: the site fails with the path."""
    site = write_site(tmp_path / "pond")
    (tmp_path / "pond" / "inflow.csv").unlink()
    os.mkfifo(tmp_path / "pond" / "inflow.csv")
    t0 = time.monotonic()
    outcome = report_one(site, tmp_path / "out")
    assert time.monotonic() - t0 < 60
    assert not outcome.ok and "inflow.csv" in outcome.error and "named pipe" in outcome.error


def _greedy_worker(site, out, **kwargs):
    import numpy as np

    if Path(site).parent.name == "greedy":
        np.ones((4 * 1024**3) // 8)  # 4 GiB: over the worker's memory limit
    return report_one(site, out, **kwargs)


@linux_only
def test_the_memory_guard_fails_only_the_greedy_site(tmp_path):
    sites = [write_site(tmp_path / n) for n in ("greedy", "modest")]
    result = run_batch(
        sites,
        tmp_path / "out",
        workers=2,
        worker=_greedy_worker,
        limits=BatchOptions(site_memory=1.0),
    )
    by = {Path(o.site_file).parent.name: o for o in result.outcomes}
    assert "MemoryError" in by["greedy"].error
    assert by["modest"].ok, by["modest"].error  # a whole report fits under the same guard


def test_hostile_site_names_stay_inside_out_with_relative_links(tmp_path):
    """A site file named ``javascript:alert(1).toml``, a site called ``../../escape``, and two
    names that differ only in case: every report inside ``--out``, links relative (RFC 3986
    §4.2: no scheme), the collision suffixed and noted."""
    import lxml.html

    js = write_site(tmp_path / "a")
    js = js.rename(tmp_path / "a" / "javascript:alert(1).toml")
    esc = write_site(tmp_path / "b")
    esc.write_text(esc.read_text().replace("Robustness Pond (invented)", "../../escape"))
    upper = write_site(tmp_path / "c").rename(tmp_path / "c" / "Lake.toml")
    lower = write_site(tmp_path / "d").rename(tmp_path / "d" / "lake.toml")
    out = tmp_path / "out"
    before = set(tmp_path.iterdir())
    result = run_batch([js, esc, upper, lower], out, workers=2)
    assert set(tmp_path.iterdir()) == before | {out}  # nothing written beside --out
    assert not result.failed, [o.error for o in result.failed]
    rows = _rows(out)
    assert set(rows) == {"javascript-alert-1", "b", "lake", "lake-2"}
    assert "'lake' was taken by 'Lake'" in rows["lake-2"]["note"]
    doc = lxml.html.parse(str(out / "index.html")).getroot()
    links = sorted(a.get("href") for a in doc.xpath("//a"))
    assert links == sorted(f"{f}/report.html" for f in rows)
    assert all(":" not in href and not href.startswith(("/", ".")) for href in links)
    for href in links:
        assert (out / href).resolve().is_relative_to(out.resolve())
    assert "Folders renamed" in doc.text_content()
    assert not list(tmp_path.glob("**/escape*"))


def test_an_unreachable_scheduler_is_one_line_within_seconds(tmp_path):
    pytest.importorskip("distributed", reason="Dask distributed is not installed")
    site = write_site(tmp_path / "pond")
    t0 = time.monotonic()
    with pytest.raises(
        SchedulerError, match="cannot reach the Dask scheduler at 'tcp://127.0.0.1:9'"
    ):
        run_batch(
            [site],
            tmp_path / "out",
            scheduler="tcp://127.0.0.1:9",
            limits=BatchOptions(scheduler_timeout=2.0),
        )
    assert time.monotonic() - t0 < 15
    assert not (tmp_path / "out").exists()
