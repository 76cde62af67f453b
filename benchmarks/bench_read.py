"""Benchmark: read 100 years of 15-minute stage (about 3.5 million rows) to daily values.

Writes an invented stage record to a temporary CSV, reads it through the stage reader of
``lakebalance`` (parsing, QA, coverage rule, daily means) and prints the wall time and the peak
memory of the read. Targets: at most 5 s and 1.5 GB.

Run: ``python benchmarks/bench_read.py [--years 100]``
"""

from __future__ import annotations

import argparse
import os
import resource
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


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--years", type=int, default=100)
    args = parser.parse_args()
    from lakebalance.config import load_site
    from lakebalance.io.series import load_series

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
        site = load_site(site_file)
        spec = site.series[0]
        from lakebalance.units import conversion

        conversion("m", "length")  # the unit registry is built once per process, not per file
        base_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        tracemalloc.start()
        t0 = time.perf_counter()
        c0 = time.process_time()
        loaded = load_series(spec, site)
        elapsed = time.perf_counter() - t0
        cpu = time.process_time() - c0
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        size_mb = csv.stat().st_size / 1e6
    daily = loaded.daily
    print(f"rows: {rows:,} ({size_mb:.0f} MB CSV, written in {t_write:.1f} s)")
    print(f"daily values: {int(daily.notna().sum()):,} days, {len(loaded.findings)} findings")
    print(f"read to daily: {elapsed:.2f} s wall (target <= 5 s), {cpu:.2f} s CPU")
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"load average during the run: {load:.2f} on {os.cpu_count()} CPUs")
    print(f"peak traced memory: {peak / 1e9:.2f} GB (target <= 1.5 GB)")
    print(f"peak RSS of the process: {rss / 1e6:.2f} GB (before the read: {base_rss / 1e6:.2f} GB)")
    ok = elapsed <= 5.0 and peak <= 1.5e9
    print("within targets" if ok else "OUTSIDE targets")
    return 0


if __name__ == "__main__":
    sys.exit(main())
