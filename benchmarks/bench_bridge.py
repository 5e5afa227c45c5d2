"""Benchmark of the Pyomo -> CasADi -> Ipopt bridge on synthetic and real train models.

Measures, in one run and side by side for each model: Pyomo model build (not part of
the bridge, for scale), conversion (expression walk, flattening of the linear part and
CasADi graph), derivative setup (sparse Jacobian, exact Lagrangian Hessian, functions)
and Ipopt's own time (including its calls of the compiled functions); then a warm
re-solve of the same structure after a parameter change. Prints the ratio
(conversion + derivative setup) / Ipopt and the share of the total.

Target (the issue's): on the 6-zone x 24-period diurnal model, conversion + derivative
setup <= 0.5 x Ipopt time. Part 4 measures it on the real demo cyclic model
(layouts/demo.toml through airtaper.model, Radau IIA, airflow fixed, square solve),
repeated with a cold structure each time (medians quoted: the machine is shared); the
synthetic 6 x 24 x 4 size of part 2 is printed beside it.

Part 1 measures setup alone (conversion and derivative setup, no Ipopt) from ~10^3 to
~10^5 constraints; part 2 solves the synthetic sizes up to ~3x10^4 constraints (an
Ipopt solve at 10^5 takes several minutes); part 3 re-solves each after a parameter
change; part 4 solves the real models (demo, and the smaller three-tank layout) and
times the structure look-up after unfixing and refixing the airflows (no rebuild).

Usage: python benchmarks/bench_bridge.py [--quick] [--max-iter N] [--repeat N]
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

import synthetic_asm1  # noqa: E402

from airtaper.solve import clear_cache, solve_nlp  # noqa: E402

# (zones, periods, steps per period); constraints = 13 * zones * periods * steps
SETUP_QUICK = [(3, 24, 1), (6, 24, 4), (6, 24, 16)]
SETUP_FULL = [(3, 24, 1), (6, 24, 4), (6, 24, 16), (8, 24, 40)]
SOLVE_QUICK = [(3, 24, 1), (6, 24, 4)]
SOLVE_FULL = [(3, 24, 1), (6, 24, 4), (6, 24, 16)]
TARGET = (6, 24, 4)


def setup_only(sizes) -> None:
    from airtaper.solve import nlp

    header = (f"{'zones x periods x steps':>24} {'cons':>7} {'nodes':>8} {'build s':>8} "
              f"{'convert s':>9} {'derivs s':>8} {'us/cons':>8}")
    print("part 1: setup alone (conversion + derivative setup), no Ipopt")
    print(header)
    print("-" * len(header))
    for zones, periods, steps in sizes:
        t0 = time.perf_counter()
        m = synthetic_asm1.build(zones, periods, steps)
        build_s = time.perf_counter() - t0
        s, _ = nlp.get_structure(m, use_cache=False)
        n_cons = s.functions.m
        per = (s.conversion_s + s.derivatives_s) / n_cons * 1e6
        print(f"{zones} x {periods} x {steps:<3}".rjust(24)
              + f" {n_cons:>7} {s.tape.n_nodes:>8} {build_s:>8.2f} {s.conversion_s:>9.2f}"
              f" {s.derivatives_s:>8.2f} {per:>8.0f}", flush=True)
        del s, m
    print()


def run(sizes, max_iter: int) -> float | None:
    print("part 2: full solves")
    header = (f"{'zones x periods x steps':>24} {'vars':>7} {'cons':>7} {'build s':>8} "
              f"{'convert s':>9} {'derivs s':>8} {'ipopt s':>8} {'iters':>5} "
              f"{'(c+d)/ipopt':>11} {'(c+d)/total':>11} {'status':>10}")
    print(header)
    print("-" * len(header))
    target_ratio = None
    warm_rows = []
    for zones, periods, steps in sizes:
        t0 = time.perf_counter()
        m = synthetic_asm1.build(zones, periods, steps)
        build_s = time.perf_counter() - t0
        clear_cache(m)
        r = solve_nlp(m, {"max_iter": max_iter})
        t = r.timings
        setup = t.conversion_s + t.derivatives_s
        ratio = setup / t.ipopt_s
        label = f"{zones} x {periods} x {steps}"
        print(f"{label:>24} {r.n_variables:>7} {r.n_constraints:>7} {build_s:>8.2f} "
              f"{t.conversion_s:>9.2f} {t.derivatives_s:>8.2f} {t.ipopt_s:>8.2f} "
              f"{r.iterations:>5} {ratio:>11.2f} {setup / t.total_s:>11.2f} "
              f"{r.status.value:>10}", flush=True)
        if (zones, periods, steps) == TARGET:
            target_ratio = ratio
        # warm re-solve: same structure, influent load 3 % higher
        for k in m.T:
            m.inf_load[k] = 1.03 * m.inf_load[k].value
        w = solve_nlp(m, {"max_iter": max_iter}, warm_start=True)
        warm_rows.append((label, r, w))
    print()
    print("part 3: warm re-solve after a parameter change (structure reused, no rebuild)")
    print(f"{'zones x periods x steps':>24} {'reused':>6} {'look-up s':>9} {'ipopt s':>8} "
          f"{'iters':>5} {'cold total s':>12} {'warm total s':>12} {'warm/cold':>9}")
    for label, r, w in warm_rows:
        print(f"{label:>24} {str(w.reused_structure):>6} {w.timings.conversion_s:>9.3f} "
              f"{w.timings.ipopt_s:>8.2f} {w.iterations:>5} {r.timings.total_s:>12.2f} "
              f"{w.timings.total_s:>12.2f} {w.timings.total_s / r.timings.total_s:>9.2f}")
    print()
    return target_ratio


# the demo's diurnal airflow schedule (Sm3/h per aerated zone, sine around the mean)
DEMO_AIRFLOW_BASE = {"Z2": 2750.0, "Z3": 1860.0, "Z4": 1410.0, "Z5": 1000.0, "Z6": 800.0}
REAL_LAYOUTS = ("layouts/demo.toml", "layouts/three_tank.toml")


def _real_model(path: str):
    """Cyclic train model of a layout, initialised and marched (airflow fixed)."""
    import numpy as np

    from airtaper.layout import load_layout
    from airtaper.model import build_cyclic_model, initialise_cyclic
    from airtaper.model.initial_point import march_cyclic

    lay = load_layout(path)
    airflow = None
    if path.endswith("demo.toml"):
        shape = 1.0 + 0.5 * np.sin((np.arange(24) - 6) / 24 * 2 * np.pi)
        airflow = {z: (v * shape).tolist() for z, v in DEMO_AIRFLOW_BASE.items()}
    m = build_cyclic_model(lay, airflow=airflow)
    initialise_cyclic(m)
    march_cyclic(m)
    return m


def real_models(repeat: int, layouts=REAL_LAYOUTS) -> float | None:
    """Part 4: square solves of the real cyclic models, cold structure each repeat."""
    import pyomo.environ as pyo

    from airtaper.model import solve_square
    from airtaper.solve import nlp

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    print(f"part 4: real cyclic models (airtaper.model, airflow fixed, square solve), "
          f"median of {repeat} cold solves")
    header = (f"{'layout':>24} {'vars':>7} {'cons':>7} {'build s':>8} {'convert s':>9} "
              f"{'derivs s':>8} {'ipopt s':>8} {'iters':>5} {'(c+d)/ipopt':>11} "
              f"{'min..max':>11} {'fix/unfix look-up s':>19}")
    print(header)
    print("-" * len(header))
    demo_ratio = None
    for rel in layouts:
        t0 = time.perf_counter()
        m = _real_model(os.path.join(root, rel))
        build_s = time.perf_counter() - t0
        start = [(v, v.value) for v in m.component_data_objects(pyo.Var, descend_into=True)]
        rows = []
        for _ in range(repeat):
            for v, val in start:  # the same initial point for every repeat
                v.set_value(val, skip_validation=True)
            clear_cache(m)
            r = solve_square(m, solve_nlp, initialise=False).result
            t = r.timings
            rows.append((t.conversion_s, t.derivatives_s, t.ipopt_s, r.iterations,
                         (t.conversion_s + t.derivatives_s) / t.ipopt_s))
        # structure reuse: free the airflows, then fix them again (values, not structure)
        flows = [v for v in m.airflow_Sm3_h.values() if v.fixed]
        t1 = time.perf_counter()
        for v in flows:
            v.unfix()
        s_free, reused_free = nlp.get_structure(m)
        n_free = s_free.functions.n
        for v in flows:
            v.fix()
        s_fixed, reused_fixed = nlp.get_structure(m)
        lookup_s = (time.perf_counter() - t1) / 2
        reused = reused_free and reused_fixed and n_free == s_fixed.functions.n + len(flows)
        med = [statistics.median(c) for c in zip(*rows)]
        ratios = [row[4] for row in rows]
        label = os.path.basename(rel) + ("*" if med[3] == 0 else "")
        print(f"{label:>24} {r.n_variables:>7} {r.n_constraints:>7} {build_s:>8.2f} "
              f"{med[0]:>9.2f} {med[1]:>8.2f} {med[2]:>8.2f} {int(med[3]):>5} {med[4]:>11.2f} "
              f"{min(ratios):>5.2f}..{max(ratios):<5.2f} "
              f"{lookup_s:>12.3f} {'reused' if reused else 'REBUILT'}", flush=True)
        if rel.endswith("demo.toml"):
            demo_ratio = med[4]
        del m, s_free, s_fixed
    print("(* Ipopt took 0 iterations: the step march already solved the model, so the "
          "ratio only shows the fixed cost)\n")
    return demo_ratio


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes only (a few minutes)")
    ap.add_argument("--max-iter", type=int, default=300)
    ap.add_argument("--repeat", type=int, default=None,
                    help="cold solves of each real model (default 3, 1 with --quick)")
    args = ap.parse_args(argv)
    repeat = args.repeat or (1 if args.quick else 3)
    setup_only(SETUP_QUICK if args.quick else SETUP_FULL)
    ratio = run(SOLVE_QUICK if args.quick else SOLVE_FULL, args.max_iter)
    demo = real_models(repeat)
    print("(conversion + derivative setup) / Ipopt, side by side (target <= 0.50):")
    for name, value in ((f"synthetic {' x '.join(map(str, TARGET))}", ratio),
                        ("demo cyclic model (the issue's target)", demo)):
        if value is not None:
            print(f"  {name:>40}: {value:.2f} ({'met' if value <= 0.5 else 'NOT met'})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
