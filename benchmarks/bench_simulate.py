"""Benchmark of the independent simulator on the demo layout.

Prints (1) the time from layout to the periodic day (steady state at mean load,
then whole days until the day repeats) with ideal DO control at 2 mg/L, and
(2) side by side on the same span of the same day: the simulator's BDF with its
grouped sparse Jacobian against BDF with scipy's dense finite-difference Jacobian
(one right-hand side call per state per Jacobian), and the ratio of the two.

Usage: python benchmarks/bench_simulate.py [--quick]
(--quick: the side-by-side span is 2 periods instead of 6, one repetition.)
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper import simulate  # noqa: E402
from airtaper.layout import load_layout  # noqa: E402
from airtaper.simulate.plant import PlantData  # noqa: E402
from airtaper.simulate.run import resolve_aeration  # noqa: E402
from airtaper.simulate.steady import solve_steady  # noqa: E402
from airtaper.simulate.system import System  # noqa: E402


def _span(system, inputs, y0, periods, period_d, jac: bool):
    y = y0
    for k in range(periods):
        inp = inputs[k]
        sol = solve_ivp(lambda t, yy: system.rhs(yy, inp), (k * period_d, (k + 1) * period_d), y,
                        method="BDF", rtol=1e-5, atol=1e-5,
                        jac=(lambda t, yy: system.jacobian(yy, inp)) if jac else None)
        y = sol.y[:, -1]
    return y


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args(argv)
    layout = load_layout(str(ROOT / "layouts" / "demo.toml"))
    reps = 1 if args.quick else 3

    times = []
    for _ in range(reps):
        t0 = time.perf_counter()
        r = simulate.periodic(layout, do_setpoint_mg_L=2.0)
        times.append(time.perf_counter() - t0)
    print(f"demo ({len(layout.zones)} zones): periodic day after {r.days} days in {min(times):.2f} s "
          f"(best of {reps}; steady start {r.start.seconds:.3f} s, day change {r.day_change:.1e}, "
          f"COD closure {r.balance['cod_closure']:.1e})")

    plant = PlantData(layout)
    system = System(plant)
    air, sp = resolve_aeration(layout, None, 2.0)
    y0 = solve_steady(system, plant.inputs(None, air.mean(axis=0), sp)).y
    inputs = [plant.inputs(k, air[k], sp) for k in range(plant.n_periods)]
    periods = 2 if args.quick else 6
    t0 = time.perf_counter()
    y_fast = _span(system, inputs, y0, periods, plant.period_d, jac=True)
    t_fast = time.perf_counter() - t0
    t0 = time.perf_counter()
    y_dense = _span(system, inputs, y0, periods, plant.period_d, jac=False)
    t_dense = time.perf_counter() - t0
    diff = float(np.max(np.abs(y_fast - y_dense) / np.maximum(np.abs(y_dense), 1.0)))
    print(f"{periods} periods side by side: sparse grouped Jacobian {t_fast:.3f} s, "
          f"dense finite-difference Jacobian {t_dense:.3f} s, ratio {t_dense / t_fast:.1f}x "
          f"(states agree to {diff:.1e})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
