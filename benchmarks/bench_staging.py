"""Blower staging and swing zones against the blowers-as-one-machine optimisation, side by side in one run.

For the demo (three blowers, no swing zone) and the Fenwhistle layout (three unlike
blowers and a swing zone), runs ``run_optimization`` twice in the same process:

* **one machine** (``StudyOptions(staging=False)``): the blower set as one machine at the
  header's aggregate efficiency, swing zones relaxed to [0, maximum] - the optimiser as it
  was before staging. Its schedule is then billed honestly: the same dispatch MILP chooses
  machines for its per-period airflow and pressure (``bill with staging``), and the swing
  periods whose air is below the grid's minimum are counted (a grid cannot deliver them);
* **staged**: the outer loop (relaxed solve, swing rounding, dispatch rounds).

Prints wall times and their ratio (one run each: timings on the shared 2-core machine
are noisy), the rounds taken, and the cost of each schedule under the dispatch.

    python benchmarks/bench_staging.py [--quick]     (--quick: 6 periods instead of 24)
"""

from __future__ import annotations

import argparse
import pathlib
import sys
import time
import warnings

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.layout import load_layout  # noqa: E402
from airtaper.optimize.dispatch import Bill, solve_dispatch  # noqa: E402
from airtaper.optimize.horizon import with_periods  # noqa: E402
from airtaper.optimize.staging import model_air_state  # noqa: E402
from airtaper.optimize.diurnal import StudyOptions, run_optimization  # noqa: E402


def load(path, periods):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(str(ROOT / path))
    return layout if periods is None else with_periods(layout, periods, steps_per_period=2)


def one_machine(layout):
    t0 = time.perf_counter()
    r = run_optimization(layout, StudyOptions(staging=False))
    seconds = time.perf_counter() - t0
    m, problem = r.study.m, r.study.problem
    b = m.opt
    state = model_air_state(problem)
    dp = solve_dispatch(problem.machines, state["demand_Sm3_h"], state["discharge_gauge_kPa"],
                        state["kw_per_equivalent"], Bill.of(layout, problem.objective), layout.horizon.period_h, state["excess_max_Sm3_h"])
    bill = dp.bill(layout)
    below = 0
    for z in b.SWING_ZONES:
        lo = layout.zone_airflow_range_Sm3_h(layout.zone(z))[0]
        q = np.array([m.airflow_Sm3_h[z, p].value for p in m.PERIODS])
        below += int(np.sum((q > 1e-6) & (q < lo * (1 - 1e-6))))
    return r, seconds, bill, dp, below


def staged(layout):
    t0 = time.perf_counter()
    r = run_optimization(layout)
    return r, time.perf_counter() - t0


def report(name, layout):
    print(f"--- {name}: {len(layout.zones)} zones, {layout.horizon.n_periods} periods, "
          f"{len(layout.blowers)} blowers, swing zones: "
          f"{', '.join(z.id for z in layout.zones if z.kind == 'swing') or 'none'}", flush=True)
    r1, t1, bill1, dp1, below = one_machine(layout)
    r2, t2 = staged(layout)
    s1, s2 = r1.summary, r2.summary
    cur = s2.get("currency", "")
    key = "cost_per_day" if s2["objective"] == "cost" else "energy_kWh_per_day"
    unit = f"{cur}/d" if key == "cost_per_day" else "kWh/d"
    d = s2["dispatch"]
    print(f"one machine : {t1:7.1f} s  status {s1['status']}, own figure {s1[key]:.2f} {unit} "
          f"(aggregate efficiency); billed with staging {bill1[key]:.2f} {unit}, "
          f"energy {bill1['energy_kWh_per_day']:.1f} kWh/d, peak {bill1['peak_kW']:.1f} kW; "
          f"shortfall periods {len(dp1.findings)}; swing periods below the grid minimum: {below}")
    print(f"staged      : {t2:7.1f} s  status {s2['status']}, {s2[key]:.2f} {unit}, energy "
          f"{s2['energy_kWh_per_day']:.1f} kWh/d, peak {d['peak_kW']:.1f} kW, rounds "
          f"{len([x for x in d['rounds'] if 'cost' in x])} ({d['stopped']}), starts "
          f"{sum(v['starts'] for v in d['blowers'].values())}")
    print(f"time ratio staged / one machine: {t2 / t1:.2f}; cost difference staged - one machine (both billed "
          f"with staging): {s2[key] - bill1[key]:+.2f} {unit} ({100 * (s2[key] / bill1[key] - 1):+.2f} %)",
          flush=True)
    if d.get("swing_zones"):
        for z, v in d["swing_zones"].items():
            print(f"swing zone {z}: aerated in periods {v['aerated_periods']}, {v['switches']} switches")
        for x in d["rounds"]:
            if x.get("round") == 0 and "status" in x:
                obj = "-" if x.get("objective") is None else f"{x['objective']:.5f}"
                print(f"  {x['step']}: {x['status']}, objective {obj}, {x['seconds']:.1f} s")
    return 0 if s2["status"] == "optimal" else 1


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="6 periods instead of 24")
    args = ap.parse_args()
    periods = 6 if args.quick else None
    rc = report("demo (Brackenford)", load("layouts/demo.toml", periods))
    rc |= report("Fenwhistle (swing zone, unlike blowers)", load("layouts/fenwhistle.toml", periods))
    return rc


if __name__ == "__main__":
    raise SystemExit(main())
