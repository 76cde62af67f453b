"""Benchmark: read 100 years of 15-minute stage (about 3.5 million rows) to daily values.

Writes an invented stage record to a temporary CSV, reads it through the stage reader of
``lakebalance`` (parsing, QA, coverage rule, daily means) and prints the wall time and the peak
memory of the reading process (peak RSS of a fresh process, which also counts Arrow's buffers).
Targets: at most 5 s and 1.5 GB.

Run: ``python benchmarks/bench_read.py [--years 100]``
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd


def write_record(path: Path, years: int, seed: int = 7) -> int:
    """An invented 15-minute stage record (m) with a seasonal cycle, noise and a few spikes."""
    rng = np.random.default_rng(seed)
    t = pd.date_range("1920-01-01", periods=int(years * 365.25 * 96), freq="15min")
    days = np.arange(len(t)) / 96.0
    stage = 10.0 + 0.8 * np.sin(2 * np.pi * days / 365.25) + rng.normal(0.0, 0.003, len(t))
    stage[rng.integers(0, len(t), 50)] += 0.5
    stamps = np.datetime_as_string(t.to_numpy(), unit="m")
    frame = pd.DataFrame({"timestamp": stamps, "level_m": stage.round(3)})
    frame.to_csv(path, index=False)
    return len(frame)


def peak_rss_bytes() -> int:
    """Peak resident memory of this process: VmHWM (Linux, reset by exec), else ru_maxrss.

    ``ru_maxrss`` survives ``exec`` on Linux, so a child would inherit the parent's peak.
    """
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) * 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024


def read_once(site_file: Path) -> dict:
    """Read the record of ``site_file`` to days in this process; time and memory figures."""
    from lakebalance.config import load_site
    from lakebalance.io.series import load_series
    from lakebalance.units import conversion

    site = load_site(site_file)
    conversion("m", "length")  # the unit registry is built once per process, not per file
    base_rss = peak_rss_bytes()
    tracemalloc.start()
    t0 = time.perf_counter()
    c0 = time.process_time()
    loaded = load_series(site.series[0], site)
    elapsed = time.perf_counter() - t0
    cpu = time.process_time() - c0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss = peak_rss_bytes()
    return {
        "seconds": elapsed,
        "cpu_seconds": cpu,
        "traced_peak_bytes": peak,
        "rss_peak_bytes": rss,
        "rss_before_bytes": base_rss,
        "days": int(loaded.daily.notna().sum()),
        "findings": len(loaded.findings),
        "read": loaded.account.read,
    }


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--years", type=int, default=100)
    parser.add_argument("--read-only", type=Path, default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.read_only is not None:  # child process: a clean process measures its own peak
        print(json.dumps(read_once(args.read_only)))
        return 0
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        csv = tmp / "stage_15min.csv"
        t0 = time.perf_counter()
        rows = write_record(csv, args.years)
        t_write = time.perf_counter() - t0
        site_file = tmp / "site.toml"
        site_file.write_text(
            '[site]\nname = "Invented bench lake"\ntimezone = "UTC"\n\n'
            '[series.stage]\nfile = "stage_15min.csv"\ndate = "timestamp"\nvalue = "level_m"\n'
            'units = "m"\n',
            encoding="utf-8",
        )
        size_mb = csv.stat().st_size / 1e6
        proc = subprocess.run(
            [sys.executable, __file__, "--read-only", str(site_file)],
            capture_output=True,
            text=True,
            check=True,
        )
        r = json.loads(proc.stdout.strip().splitlines()[-1])
    print(f"rows: {rows:,} ({size_mb:.0f} MB CSV, written in {t_write:.1f} s)")
    print(f"daily values: {r['days']:,} days from {r['read']:,} rows, {r['findings']} findings")
    print(f"read to daily: {r['seconds']:.2f} s wall (target <= 5 s), {r['cpu_seconds']:.2f} s CPU")
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"load average: {load:.2f} on {os.cpu_count()} CPUs")
    print(
        f"peak memory of the reading process: {r['rss_peak_bytes'] / 1e9:.2f} GB RSS "
        f"(target <= 1.5 GB; {r['rss_before_bytes'] / 1e9:.2f} GB before the read; "
        f"Python-traced peak of the read {r['traced_peak_bytes'] / 1e9:.2f} GB)"
    )
    ok = r["seconds"] <= 5.0 and r["rss_peak_bytes"] <= 1.5e9
    print("within targets" if ok else "OUTSIDE targets")
    return 0


if __name__ == "__main__":
    sys.exit(main())
