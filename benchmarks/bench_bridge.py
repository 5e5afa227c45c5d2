"""Benchmark of the Pyomo -> CasADi -> Ipopt bridge on synthetic ASM1-like models.

Measures, in one run and side by side for each model size: Pyomo model build (not part
of the bridge, for scale), conversion (expression walk and CasADi graph), derivative
setup (sparse Jacobian, exact Lagrangian Hessian, functions) and Ipopt's own time
(including its calls of the compiled functions); then a warm re-solve of the same
structure after a parameter change. Prints the ratio (conversion + derivative setup) /
Ipopt and the share of the total.

Target: at the 6-zone x 24-period x 4-step size (~7.6k variables, ~7.5k constraints)
conversion + derivative setup <= 0.5 x Ipopt time.

Part 1 measures setup alone (conversion and derivative setup, no Ipopt) from ~10^3 to
~10^5 constraints; part 2 solves the sizes up to ~3x10^4 constraints (an Ipopt solve at
10^5 takes several minutes); part 3 re-solves each after a parameter change.

Usage: python benchmarks/bench_bridge.py [--quick] [--max-iter N]
"""

from __future__ import annotations

import argparse
import os
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
    return target_ratio


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes only (about a minute)")
    ap.add_argument("--max-iter", type=int, default=300)
    args = ap.parse_args(argv)
    setup_only(SETUP_QUICK if args.quick else SETUP_FULL)
    ratio = run(SOLVE_QUICK if args.quick else SOLVE_FULL, args.max_iter)
    if ratio is not None:
        verdict = "met" if ratio <= 0.5 else "NOT met"
        print(f"\ntarget at {' x '.join(map(str, TARGET))}: (conversion + derivative setup)"
              f" / Ipopt = {ratio:.2f} (target <= 0.50: {verdict})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
