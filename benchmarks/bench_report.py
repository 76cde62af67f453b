"""Benchmark: the annual report of one site with 20 water years, and a batch of demo-like sites.

1. **One site, 20 water years, full report** (target: at most 10 s). The data come from the demo
   generator ``data_demo/make_demo.py`` (invented reservoir), run into a temporary folder with its
   first day moved back two years (water years 2003-2022); ``data_demo/`` itself is not touched.
   Timed as the command ``lakebalance report`` in a fresh process (interpreter start and imports
   included) and as a second, warm call of ``make_report`` in this process.
2. **Batch of N demo-like sites** (default 50; target: 2 workers at most 0.6 times the time of one
   after another). Site files are copies of the demo site, each with its own seed, all reading one
   copy of the demo data in a temporary folder. Both runs use :func:`lakebalance.batch.run_batch`.

Figures are printed; nothing is asserted (speed is never a pass/fail unit test). The machine's
load average is printed beside the ratio, because other work on the same cores skews it.

Run: ``python benchmarks/bench_report.py [--sites N] [--draws N] [--members M] [--skip-batch]``
"""

from __future__ import annotations

import argparse
import importlib.util
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data_demo"
TARGET_ONE_S = 10.0
TARGET_RATIO = 0.6
DATA_DIRS = ("gauges", "meters", "survey", "weather")


def _load_generator():
    spec = importlib.util.spec_from_file_location("_make_demo_bench", DEMO / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def make_twenty_years(folder: Path) -> Path:
    """Demo data for water years 2003-2022 in ``folder``; returns its site file."""
    gen = _load_generator()
    gen.START = "2002-10-01"  # two more water years before the demo's first (2005)
    gen.generate(folder)
    site = folder / "site.toml"
    shutil.copy2(DEMO / "site.toml", site)
    return site


def _seeded(text: str, seed: int) -> str:
    new, n = re.subn(r"(?m)^seed\s*=\s*\d+", f"seed = {seed}", text)
    if n != 1:
        raise SystemExit("could not find the seed line of data_demo/site.toml")
    return new


def make_sites(folder: Path, n: int) -> list[Path]:
    """``n`` site files reading one copy of the demo data, each with its own seed."""
    for d in DATA_DIRS:
        shutil.copytree(DEMO / d, folder / d)
    shutil.copy2(DEMO / "gaugings.csv", folder / "gaugings.csv")
    text = (DEMO / "site.toml").read_text(encoding="utf-8")
    sites = []
    for i in range(n):
        p = folder / f"lake_{i:03d}.toml"
        p.write_text(_seeded(text, 1000 + i), encoding="utf-8")
        sites.append(p)
    return sites


def _options(args: argparse.Namespace) -> dict:
    return {k: v for k, v in (("draws", args.draws), ("members", args.members)) if v is not None}


def bench_one(tmp: Path, args: argparse.Namespace) -> None:
    from lakebalance.report.build import make_report

    t0 = time.perf_counter()
    site = make_twenty_years(tmp / "wy20")
    print(f"generated 20 water years of demo data in {time.perf_counter() - t0:.1f} s (not timed)")
    cmd = [sys.executable, "-m", "lakebalance", "report", str(site), "--out", str(tmp / "one")]
    for key, value in _options(args).items():
        cmd += [f"--{key}", str(value)]
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    cold = time.perf_counter() - t0
    if proc.returncode != 0:
        print(proc.stdout, proc.stderr, sep="\n")
        raise SystemExit(f"report command failed with exit code {proc.returncode}")
    t0 = time.perf_counter()
    make_report(site, tmp / "one_warm_prep", **_options(args))  # imports and caches
    prep = time.perf_counter() - t0
    t0 = time.perf_counter()
    result = make_report(site, tmp / "one_warm", **_options(args))
    warm = time.perf_counter() - t0
    years = result.headline.get("water_year")
    annual = json.loads(result.json.read_text(encoding="utf-8"))["tables"]["annual"]["rows"]
    print(
        f"one site, {len(annual)} water years {annual[0][0]}-{annual[-1][0]} (reported {years}), "
        "full report"
        f"{' ' + str(_options(args)) if _options(args) else ' (site-file draws and members)'}:"
    )
    print(f"  command in a fresh process: {cold:6.2f} s   (target <= {TARGET_ONE_S:.0f} s)")
    print(f"  first call in this process: {prep:6.2f} s")
    print(f"  warm call in this process:  {warm:6.2f} s")
    for line in result.messages:
        print(f"  note: {line}")


def _burn(n: int) -> int:
    total = 0
    for i in range(n):
        total += i * i
    return total


def free_core_ratio(n: int = 4_000_000) -> float:
    """Control: the same pure-Python job twice on 2 processes over once in this one (about 1.0
    when two cores are free, about 2.0 when other work holds one of them)."""
    from concurrent.futures import ProcessPoolExecutor

    t0 = time.perf_counter()
    _burn(n)
    one = time.perf_counter() - t0
    with ProcessPoolExecutor(2) as pool:
        pool.submit(_burn, 10).result()  # start the workers before timing
        t0 = time.perf_counter()
        list(pool.map(_burn, [n, n]))
        two = time.perf_counter() - t0
    return two / one


def _cpu() -> float:
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def bench_batch(tmp: Path, args: argparse.Namespace) -> None:
    from lakebalance.batch import run_batch

    sites = make_sites(tmp / "sites", args.sites)
    opts = _options(args)
    control_before = free_core_ratio()
    c0, t0 = _cpu(), time.perf_counter()
    serial = run_batch(sites, tmp / "serial", workers=1, options=opts)
    t_serial = time.perf_counter() - t0
    cpu_serial = _cpu() - c0
    load_serial = os.getloadavg()[0]
    c0, t0 = _cpu(), time.perf_counter()
    parallel = run_batch(sites, tmp / "parallel", workers=2, options=opts)
    t_parallel = time.perf_counter() - t0
    cpu_parallel = _cpu() - c0
    load_parallel = os.getloadavg()[0]
    control_after = free_core_ratio()
    bad = len(serial.failed) + len(parallel.failed)
    same = all(
        a.headline == b.headline for a, b in zip(serial.outcomes, parallel.outcomes, strict=True)
    )
    ratio = t_parallel / t_serial
    print(f"batch of {args.sites} demo-like sites{' ' + str(opts) if opts else ''}:")
    print(
        f"  one after another (1 worker): {t_serial:7.1f} s  ({t_serial / args.sites:.2f} s/site)"
    )
    print(f"  2 worker processes:           {t_parallel:7.1f} s")
    print(
        f"  CPU seconds (this process and its workers): {cpu_serial:.1f} one after another, "
        f"{cpu_parallel:.1f} on 2 workers"
    )
    print(f"  ratio 2 workers / 1 worker:   {ratio:7.2f}   (target <= {TARGET_RATIO})")
    print(f"  failed sites: {bad}; same headline numbers in both runs: {same}")
    print(
        f"  cores: {os.cpu_count()}; 1-minute load average after each run: "
        f"{load_serial:.1f}, {load_parallel:.1f}"
    )
    print(
        "  control, a pure-Python job twice on 2 processes / once on 1 (1.0 = two free cores, "
        f"2.0 = one): {control_before:.2f} before, {control_after:.2f} after"
    )


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sites", type=int, default=50, help="sites in the batch (default 50)")
    parser.add_argument("--draws", type=int, default=None, help="Monte Carlo draws (site file)")
    parser.add_argument("--members", type=int, default=None, help="forecast members (site file)")
    parser.add_argument("--skip-one", action="store_true", help="skip the 20-year site")
    parser.add_argument("--skip-batch", action="store_true", help="skip the batch")
    args = parser.parse_args(argv)
    os.environ.setdefault("MPLBACKEND", "Agg")
    with tempfile.TemporaryDirectory(prefix="lakebalance-bench-") as tmp:
        if not args.skip_one:
            bench_one(Path(tmp), args)
        if not args.skip_batch:
            bench_batch(Path(tmp), args)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
