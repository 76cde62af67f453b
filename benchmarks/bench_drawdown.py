"""Benchmark: the drawdown engine, 10,000 members x 365 days.

Target (issue 8): at most 0.5 s on one core, at most 1 GB peak memory, at the accuracy of the
reference tests (<= 1 mm after 365 days against ``solve_ivp`` at rtol 1e-10). The machine is shared
and noisy, so the time target is also judged as a ratio measured in the same run: engine time over
the bare one-step loop's at most 2.3 (0.5 s against the bare loop's 0.22 s on a quiet core). Prints,
measured in this run:

* engine time for 10,000 x 365 (best of three) and member-days per second, for a slow and a stiff
  lake (invented lakes, autocorrelated inflows drawn with a fixed seed, 100 rating variants);
* peak memory of the run (tracemalloc: numpy's allocations) and the process's maximum RSS;
* for scale, a bare one-step-per-day numpy loop (interpolate area, outlet law, explicit update)
  over the same members;
* a per-member ``solve_ivp`` loop (RK45, rtol 1e-6) on 100 members, and the ratio of its time per
  member-day to the engine's;
* the largest stage difference of 5 members against ``solve_ivp`` (Radau, rtol 1e-10).

On the stiff lake the explicit bare loop is unstable: its members sit at the table's ends, where
``np.interp`` costs next to nothing, so that ratio is no yardstick there;
``benchmarks/bench_engine_families.py`` times every lake family against a stable (linearly
implicit) loop as well.

Run: ``python benchmarks/bench_drawdown.py [MEMBERS]``
"""

from __future__ import annotations

import resource
import sys
import time
import tracemalloc

import numpy as np
from scipy.integrate import solve_ivp

from lakebalance.drawdown.engine import build_tables, simulate

DAY = 86400.0
RATIO_TARGET = 2.3  # engine / bare loop, both timed in this run (0.5 s / 0.22 s)


def make_lake(area0: float, c_outlet: float):
    def area(h):
        return area0 * (1.0 + 0.3 * np.maximum(h, 0.0)) ** 1.2

    def outflow(h, c=c_outlet):
        h = np.asarray(h, dtype=float)
        return c * np.clip(h - 1.0, 0.0, None) ** 1.6 + 30.0 * np.clip(h - 3.0, 0.0, None) ** 1.5

    return area, outflow


def forcing(rng, days, members, mean_inflow):
    z = np.zeros((days, members))
    shocks = rng.normal(0.0, 0.35, (days, members))
    for d in range(1, days):
        z[d] = 0.85 * z[d - 1] + shocks[d]
    season = 1.0 - 0.6 * np.sin(np.linspace(0.0, np.pi, days))[:, None]
    inflow = mean_inflow * season * np.exp(z)
    net = (
        -0.004
        - 0.002 * np.sin(np.linspace(0.0, np.pi, days))[:, None]
        + (rng.random((days, members)) < 0.15) * 0.01
    )
    return inflow, net


def best_of(fn, repeat=3):
    times = []
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return min(times), out


def bare_loop(area, outflow, h0, inflow, net, demand):
    """One explicit step per day, no sub-steps: the floor of what a numpy loop costs."""
    grid = np.linspace(0.0, 8.0, 8001)
    a_tab, q_tab = area(grid), outflow(grid)
    h = np.full(inflow.shape[1], h0)
    for d in range(inflow.shape[0]):
        a = np.interp(h, grid, a_tab)
        q = np.interp(h, grid, q_tab)
        h = h + net[d] + (inflow[d] - demand - q) * DAY / a
        np.maximum(h, 0.0, out=h)
    return h


def run_case(name, area0, c_outlet, mean_inflow, members, days, rng):
    area, outflow = make_lake(area0, c_outlet)
    variants = 100
    scale = np.exp(rng.normal(0.0, 0.05, variants))  # rating coefficient uncertainty
    tables = build_tables(
        lambda h: area(h),
        lambda h: np.stack([outflow(h, c_outlet * s) for s in scale]),
        stage_min_m=0.0,
        stage_max_m=8.0,
    )
    inflow, net = forcing(rng, days, members, mean_inflow)
    variant = rng.integers(0, variants, members)
    demand = 0.05 * mean_inflow
    h0 = 1.5
    t_engine, res = best_of(
        lambda: simulate(tables, h0, inflow, net, demand, variant=variant, levels={"low": 1.0})
    )
    tracemalloc.start()  # a separate, untimed run: tracing slows every allocation
    simulate(tables, h0, inflow, net, demand, variant=variant, levels={"low": 1.0})
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    t_bare, _ = best_of(lambda: bare_loop(area, outflow, h0, inflow, net, demand))
    tau = area(np.array([1.5]))[0] / (1.6 * c_outlet * 0.5**0.6) / 3600.0
    print(f"{name} lake (response time at 1.5 m: {tau:.2f} h)")
    print(
        f"  engine {members:,} x {days}: {t_engine:.3f} s  "
        f"({members * days / t_engine / 1e6:.1f} M member-days/s, "
        f"{res.refined_member_days:,} member-days refined)"
    )
    print(
        f"  bare one-step numpy loop:  {t_bare:.3f} s  "
        f"({members * days / t_bare / 1e6:.1f} M member-days/s); engine/bare = "
        f"{t_engine / t_bare:.2f}"
    )
    print(f"  peak traced memory of the engine run: {peak / 2**20:.0f} MiB")

    def member_rhs(m, method, rtol, atol):
        c = c_outlet * scale[variant[m]]
        h = h0
        path = [h]
        for d in range(days):

            def rhs(t, y, d=d):
                return net[d, m] / DAY + (inflow[d, m] - demand - outflow(y, c)) / area(y)

            sol = solve_ivp(rhs, (0.0, DAY), [h], method=method, rtol=rtol, atol=atol)
            h = max(float(sol.y[0, -1]), 0.0)
            path.append(h)
        return np.array(path)

    n_ivp = 100
    t0 = time.perf_counter()
    for m in range(n_ivp):
        member_rhs(m, "RK45", 1e-6, 1e-9)
    t_ivp = time.perf_counter() - t0
    per_engine = t_engine / (members * days)
    per_ivp = t_ivp / (n_ivp * days)
    print(
        f"  solve_ivp RK45 rtol 1e-6, {n_ivp} members: {t_ivp:.1f} s; per member-day "
        f"{per_ivp * 1e6:.1f} us vs engine {per_engine * 1e9:.0f} ns: ratio {per_ivp / per_engine:,.0f}"
    )
    worst = 0.0
    for m in range(5):
        ref = member_rhs(m, "Radau", 1e-10, 1e-12)
        worst = max(worst, float(np.max(np.abs(res.stage_m[:, m] - ref))))
    print(f"  largest difference of 5 members vs solve_ivp Radau rtol 1e-10: {worst * 1000:.4f} mm")
    for what, good in (
        ("<= 0.5 s", t_engine <= 0.5),
        (f"engine/bare <= {RATIO_TARGET}", t_engine / t_bare <= RATIO_TARGET),
        ("<= 1 GB", peak <= 2**30),
        ("<= 1 mm", worst <= 1e-3),
    ):
        print(f"  target {what}: {'met' if good else 'NOT met'}")
    return t_engine, t_bare, peak, worst


def main(members: int = 10_000) -> int:
    rng = np.random.default_rng(20240801)
    days = 365
    ok = True
    for name, area0, c_outlet, mean_inflow in (
        ("slow", 5.0e6, 5.0, 2.0),
        ("stiff", 2.0e4, 20.0, 3.0),
    ):
        t_engine, t_bare, peak, worst = run_case(
            name, area0, c_outlet, mean_inflow, members, days, rng
        )
        fast = t_engine <= 0.5 or t_engine / t_bare <= RATIO_TARGET
        ok &= fast and peak <= 2**30 and worst <= 1e-3
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"max RSS of the process: {rss:.0f} MiB")
    print(
        f"targets (<= 0.5 s or engine/bare <= {RATIO_TARGET}, <= 1 GB, <= 1 mm):",
        "met" if ok else "NOT met",
    )
    return 0


if __name__ == "__main__":
    sys.exit(main(*(int(a) for a in sys.argv[1:2])))
