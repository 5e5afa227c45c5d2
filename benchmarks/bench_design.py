"""Grid design over load days on the demo: how the solve grows with the days, against separate solves, and what
the designed taper saves. Everything is measured side by side in one run.

1. The relaxed design (every day's schedule and the shared counts, one NLP) with 1, 2, 4 and 6 of the demo's
   load days: build time (baselines, models), Ipopt time and iterations, time per day and per iteration; the
   target is about linear growth in the days (the days couple only through the counts).
2. The same days solved as separate problems with the counts fixed at the relaxed design's (the work of
   ``optimize`` on each day without staging): Ipopt time of the one joint solve against the sum of the separate
   ones.
3. The annual cost of the designed whole-count grid against the demo's current grid and against a uniform grid
   of the same total count (each re-solved with its counts fixed over every day).

    python benchmarks/bench_design.py [--quick] [--periods 6]

``--quick``: days 1 and 2 only, no whole-count search. Timings on a shared machine are noisy: compare the
ratios of one run, not runs with each other.
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import time
import warnings
from dataclasses import replace

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.layout import load_layout  # noqa: E402
from airtaper.optimize.design import DesignOptions, GridDesign  # noqa: E402


def _design(layout, days, periods):
    g = GridDesign(replace(layout, load_days=days), DesignOptions(n_periods=periods, steps_per_period=2))
    t0 = time.perf_counter()
    g.build()
    build = time.perf_counter() - t0
    r = g.solve_relaxed()
    return g, r, build


def _separate(g: GridDesign) -> tuple[float, int]:
    """Each day alone, counts fixed at the relaxed design: the joint model's blocks solved one at a time."""
    from airtaper.optimize.attempts import BASE_OPTIONS, LADDER
    from airtaper.solve import solve_nlp

    total, iters = 0.0, 0
    for st in g.studies:
        m = st.m
        for z in g.ids:
            g.model.count[z].set_value(g.relaxed[z], skip_validation=True)
            g.model.count[z].fix()
        m.opt.objective.activate()  # the day's own objective, alone
        st._restart(LADDER[0])
        r = solve_nlp(m, dict(BASE_OPTIONS, **LADDER[0].options))
        m.opt.objective.deactivate()
        total += r.timings.ipopt_s
        iters += r.iterations
    return total, iters


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--periods", type=int, default=6, help="periods per day of the design (default 6)")
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    layout = load_layout(ROOT / "layouts" / "demo.toml")
    days = layout.load_days
    sizes = (1, 2) if args.quick else (1, 2, 4, 6)
    print(f"demo, {args.periods} periods of 2 steps; load days in file order: {', '.join(d.id for d in days)}")
    print(f"{'days':>4} {'build s':>8} {'ipopt s':>8} {'iter':>5} {'s/iter':>7} {'ipopt s/day':>11} {'vars':>7} "
          f"{'separate ipopt s':>16} {'joint/separate':>14}")
    base_per_day = None
    last = None
    for k in sizes:
        g, r, build = _design(layout, days[:k], args.periods)
        if not r.ok:
            print(f"{k:>4} relaxed design failed: {r.status.value} {r.message}")
            return 1
        t = r.timings.ipopt_s
        per_day = t / k
        base_per_day = base_per_day or per_day
        sep, sep_iters = _separate(g)
        print(f"{k:>4} {build:8.1f} {t:8.1f} {r.iterations:5d} {t / max(r.iterations, 1):7.2f} {per_day:11.2f} "
              f"{r.n_variables:7d} {sep:16.1f} {t / sep if sep > 0 else float('nan'):14.2f}")
        last = (g, r)
    g, _ = last
    print(f"time per day, {sizes[-1]} days against 1: {per_day / base_per_day:.2f} (1.0 = linear)")
    if args.quick:
        return 0
    g.solve_relaxed()  # back to the relaxed state the search starts from
    best = g.search()
    if best is None:
        print("no whole-count grid meets every day's limits")
        return 1
    current = g.evaluate(g.current)
    total = sum(best.counts.values())
    n = len(g.ids)
    uniform_counts = {}
    for z in g.zones:
        step = z.grid.count_step
        lo, hi = g.ranges[z.id]
        uniform_counts[z.id] = int(min(max(step * round(total / n / step), lo), hi))
    uniform = g.evaluate(uniform_counts)
    print("designed grid:  " + ", ".join(f"{z} {c}" for z, c in best.counts.items())
          + f"  annual cost {best.annual_cost:,.0f}")
    for name, c in (("current grid", current), ("uniform grid", uniform)):
        if c.annual_cost is None:
            print(f"{name}: " + ", ".join(f"{z} {v}" for z, v in c.counts.items()) + "  cannot meet every day")
        else:
            print(f"{name}: " + ", ".join(f"{z} {v}" for z, v in c.counts.items())
                  + f"  annual cost {c.annual_cost:,.0f}; the design saves {c.annual_cost - best.annual_cost:,.0f}"
                    f" ({100 * (c.annual_cost - best.annual_cost) / c.annual_cost:.1f} %)")
    print(f"whole-count candidates solved: {len(g.candidates)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
