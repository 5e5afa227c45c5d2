"""Grid design over load days on the demo: how the decomposed design grows with the days, against separate
``optimize`` runs, and what the designed taper saves. Everything is measured side by side in one run.

1. The whole design (every day's baseline and model, the continuous search over the counts, the whole-count
   search; no verification) with the first 1, 2, 4 and 6 of the demo's load days: wall time, Ipopt time, day
   solves and grids evaluated, and the time per day; the target is about linear growth in the days (each grid
   costs one solve per day).
2. The same days each run once as ``optimize`` does it (baseline, solve, verification, marginal costs; blowers
   as one machine, as in the design): the design's wall time against the sum of theirs (each day run once and its
   time reused by every size that includes it).
3. The annual cost of the designed whole-count grid (the largest run) against the demo's current grid and
   against a uniform grid of the same total count (the same diffuser density in every zone, in whole steps),
   each evaluated with every day's schedule optimised on it.

    nice -n 10 python benchmarks/bench_design.py [--sizes 1,2,4,6] [--periods 6] [--no-separate]

Timings on a shared machine are noisy: compare the ratios of one run, not runs with each other; the load
average is printed with every row.
"""

from __future__ import annotations

import argparse
import os
import pathlib
import sys
import time
import warnings
from dataclasses import replace

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.layout import load_layout  # noqa: E402
from airtaper.layout.loaddays import day_layout  # noqa: E402
from airtaper.optimize.design import DesignOptions, GridDesign, grid_capital  # noqa: E402
from airtaper.optimize.diurnal import StudyOptions, run_optimization  # noqa: E402


def _load() -> str:
    return "load %.1f" % os.getloadavg()[0]


def _design(layout, periods: int):
    t0, c0 = time.perf_counter(), time.process_time()
    g = GridDesign(layout, DesignOptions(n_periods=periods, steps_per_period=2, verify=False))
    g.build()
    build = time.perf_counter() - t0
    best = g.solve_relaxed() and g.search()
    return g, best, build, time.perf_counter() - t0, time.process_time() - c0


_SEPARATE: dict[str, tuple[float, float, float]] = {}  # load day -> (wall s, Ipopt s, CPU s) of its optimize run


def _separate(layout, periods: int) -> tuple[float, float, float]:
    """Each load day run once as ``optimize`` runs it (blowers as one machine): (wall s, Ipopt s, CPU s of this
    process) summed. A day is run once per benchmark (the sizes share their first days: 6 runs in all, not
    1 + 2 + 4 + 6)."""
    wall = ipopt = cpu = 0.0
    for day in layout.load_days:
        if day.id not in _SEPARATE:
            t0, c0 = time.perf_counter(), time.process_time()
            r = run_optimization(day_layout(layout, day), StudyOptions(staging=False, steps_per_period=2))
            _SEPARATE[day.id] = (time.perf_counter() - t0,
                                 (r.summary.get("solver") or {}).get("timings", {}).get("ipopt_s", 0.0) or 0.0,
                                 time.process_time() - c0)
        wall += _SEPARATE[day.id][0]
        ipopt += _SEPARATE[day.id][1]
        cpu += _SEPARATE[day.id][2]
    return wall, ipopt, cpu


def _uniform(g: GridDesign, total: int) -> dict[str, int]:
    """The same total count at one density in every zone (counts by floor area), in whole steps within range."""
    area = sum(z.area_m2 for z in g.zones)
    out = {}
    for z in g.zones:
        step = z.count_step
        lo, hi = g.ranges[z.id]
        out[z.id] = int(min(max(step * round(total * z.area_m2 / area / step), lo), hi))
    return out


def _nearest_feasible_uniform(g: GridDesign, total: int, tries: int = 6):
    """The uniform grid of ``total`` diffusers, or when it cannot meet a day the nearest uniform total that can
    (one zone's step more, then less, and so on): (candidate of the same total, candidate used, its total)."""
    step = max(z.count_step for z in g.zones) * len(g.zones)
    same = g.evaluate(_uniform(g, total))
    if same.annual_cost is not None:
        return same, same, total
    for k in range(1, tries + 1):
        for sign in (1, -1):
            t = total + sign * k * step
            c = g.evaluate(_uniform(g, t))
            if c.annual_cost is not None:
                return same, c, t
    return same, None, None


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1,2,4,6", help="numbers of load days (the first k in file order), run in the order given; the "
                         "savings are printed after the largest (default 1,2,4,6)")
    ap.add_argument("--periods", type=int, default=6, help="periods per day of the design (default 6)")
    ap.add_argument("--no-separate", action="store_true", help="skip the separate optimize runs")
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    layout = load_layout(ROOT / "layouts" / "demo.toml")
    days = layout.load_days
    sizes = [int(k) for k in args.sizes.split(",")]
    print(f"demo, {args.periods} periods of 2 steps; load days in file order: {', '.join(d.id for d in days)}")
    print("wall and CPU seconds of this process (Ipopt runs in it); ratios on CPU seconds, the load shifts wall time")
    print(f"{'days':>4} {'build s':>8} {'design s':>9} {'CPU s':>8} {'CPU s/day':>9} {'ipopt s':>8} "
          f"{'day solves':>10} {'grids':>5} {'runs s':>8} {'runs CPU s':>10} {'design/runs CPU':>15}  load")
    per_day: dict[int, float] = {}  # days -> design CPU s per day, of the runs that found a grid
    for k in sizes:
        lay = replace(layout, load_days=days[:k])
        g, best, build, wall, cpu = _design(lay, args.periods)
        sep = None if args.no_separate else _separate(with_periods_of(lay, args.periods), args.periods)
        grids = len(g.candidates)
        print(f"{k:>4} {build:8.1f} {wall:9.1f} {cpu:8.1f} {cpu / k:9.1f} {g.timings.get('ipopt_s', 0.0):8.1f} "
              f"{g.timings.get('day_solves', 0):10d} {grids:5d} "
              f"{'-' if sep is None else f'{sep[0]:.1f}':>8} {'-' if sep is None else f'{sep[2]:.1f}':>10} "
              f"{'-' if sep is None else f'{cpu / sep[2]:.2f}':>15}  {_load()}", flush=True)
        if best is None:
            print("     no whole-count grid found: " + "; ".join(
                f"{c.status} ({c.failed_day})" for c in g.candidates))
            continue
        per_day[k] = cpu / k
        if k == max(sizes):  # the savings of the largest design, printed as soon as it is done
            _savings(g, best)
    if len(per_day) > 1:
        lo, hi = min(per_day), max(per_day)
        print(f"CPU time per day, {hi} days against {lo}: {per_day[hi] / per_day[lo]:.2f} (1.0 = linear)")
    return 0 if per_day else 1


def _savings(g: GridDesign, best) -> None:
    """The designed grid against the current grid and a uniform grid of the same total, each with every day's
    schedule optimised on it; a grid that cannot meet a day is compared on the days it meets (the designed grid's
    annual cost on the same days), as ``design`` compares the current grid."""
    print("designed grid: " + ", ".join(f"{z} {c}" for z, c in best.counts.items())
          + f"  annual cost {best.annual_cost:,.0f}")
    ours = g._solved[g._key(best.counts)]

    def line(name, c):
        grid = ", ".join(f"{z} {v}" for z, v in c.counts.items())
        solves = g._solved[g._key(c.counts)]
        met = [i for i, s in enumerate(solves) if s.ok]
        missed = [f"{g.days[i].id}" + (f": {s.reason}" if s.reason else f" ({s.status})")
                  for i, s in enumerate(solves) if not s.ok]

        def cost(counts, days):
            return g.crf * grid_capital(g.capital, counts) + sum(g.days[i].days_per_year * days[i].goal for i in met)

        if not met:
            return f"{name}: {grid}  cannot meet any day ({'; '.join(missed)})"
        theirs, mine = cost(c.counts, solves), cost(best.counts, ours)
        where = "every day" if not missed else (
            f"the {sum(g.days[i].days_per_year for i in met):g} days a year it meets; it cannot meet "
            + "; ".join(missed))
        return (f"{name}: {grid}  annual cost {theirs:,.0f} against the design's {mine:,.0f} on {where}: the design "
                f"saves {theirs - mine:,.0f} ({100 * (theirs - mine) / theirs:.1f} %)")

    print(line("current grid", g.evaluate(g.current, every_day=True)))
    total = sum(best.counts.values())
    same, used, t = _nearest_feasible_uniform(g, total)
    g.evaluate(same.counts, every_day=True)
    print(line(f"uniform grid of the same total ({total})", same))
    if used is not None and used is not same:
        print(line(f"nearest uniform grid that meets every day ({t} diffusers)", used))
    elif used is None:
        print("no uniform grid within six steps of the same total meets every day")
    print(f"grids evaluated: {len(g.candidates)}; {_load()}", flush=True)


def with_periods_of(layout, periods: int):
    from airtaper.optimize.horizon import with_periods

    return layout if layout.horizon.n_periods == periods else with_periods(layout, periods)


if __name__ == "__main__":
    raise SystemExit(main())
