"""Calibration of the demo plant from three simulated days of 15-minute data: the NLP against a derivative-free fit.

Data: layouts/demo_plant_data.csv (SYNTHETIC, scripts/make_plant_data.py: the independent
simulator with alpha x F 0.30/0.36/0.40/0.45/0.50 in Z2..Z6 and mu_A 0.65 1/d, noise stated
in the file). Measured side by side in one run:

1. ``airtaper calibrate``'s fit (:func:`airtaper.calibrate.run_calibration`, six parameters,
   one NLP through the Ipopt bridge with exact derivatives): time, Ipopt iterations,
   estimates against the truth;
2. the same six parameters fitted by a derivative-free search, ``scipy.optimize.minimize``
   (Powell), on the same data and the same model: every trial fixes the parameters and
   solves the model equations (square, warm-started from the previous trial) with Ipopt,
   then evaluates the same weighted least squares. Stopped when it reaches the NLP's
   objective within 0.1 % or at the budget (``--budget`` x the NLP's time);
3. the ratio of the two times (derivative-free / NLP), from this one run.

    python benchmarks/bench_calibrate.py [--quick] [--budget 20]
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

from airtaper.calibrate import CalibrationOptions, run_calibration  # noqa: E402
from airtaper.calibrate.problem import fix_parameters, parameters  # noqa: E402
from airtaper.layout import load_layout  # noqa: E402
from airtaper.layout.plantdata import load_plant_data  # noqa: E402
from airtaper.solve import solve_nlp  # noqa: E402

TRUTH = {"alpha_F.Z2": 0.30, "alpha_F.Z3": 0.36, "alpha_F.Z4": 0.40, "alpha_F.Z5": 0.45, "alpha_F.Z6": 0.50,
         "mu_A": 0.65}


class _Stop(Exception):
    pass


def derivative_free(res, target: float, budget_s: float):
    """Powell over the parameters; every trial a square solve of the model (see module notes)."""
    from scipy.optimize import minimize

    m = res.model
    b = m.fit
    params = parameters(b)
    start = np.array(b.start_values)
    fix_parameters(b)
    for v, x in zip(params, start):
        v.set_value(float(x))
    b.objective.deactivate()
    history = {"evals": 0, "best": np.inf, "best_x": start.copy(), "t_reach": None, "iters": 0}
    t0 = time.perf_counter()
    lo = np.array([v.lb for v in params])
    hi = np.array([v.ub for v in params])

    def f(x):
        x = np.clip(x, lo, hi)
        for v, val in zip(params, x):
            v.fix(float(val))
        r = solve_nlp(m, {"tol": 1e-8, "max_iter": 100, "mumps_pivot_order": 2})
        history["evals"] += 1
        history["iters"] += r.iterations
        val = float(0.5 * sum(b.residual[i]() ** 2 for i in b.OBS)) if r.ok else 1e12
        if val < history["best"]:
            history["best"], history["best_x"] = val, x.copy()
        elapsed = time.perf_counter() - t0
        if history["t_reach"] is None and val <= target * 1.001:
            history["t_reach"] = elapsed
            raise _Stop
        if elapsed > budget_s:
            raise _Stop
        return val

    try:
        minimize(f, start, method="Powell", bounds=list(zip(lo, hi)), options={"xtol": 1e-5, "ftol": 1e-9})
    except _Stop:
        pass
    history["seconds"] = time.perf_counter() - t0
    b.objective.activate()
    return history


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="one day of the record, smaller budget")
    ap.add_argument("--budget", type=float, default=20.0, help="derivative-free budget, x the NLP's time")
    args = ap.parse_args()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(ROOT / "layouts" / "demo.toml")
    path = ROOT / "layouts" / "demo_plant_data.csv"
    record = load_plant_data(path, layout)
    if args.quick:
        from dataclasses import replace

        keep = record.time_h < 24.0
        record = replace(record, time_h=record.time_h[keep], flow_m3_d=record.flow_m3_d[keep],
                         temperature_C=None if record.temperature_C is None else record.temperature_C[keep],
                         airflow_Sm3_h={z: v[keep] for z, v in record.airflow_Sm3_h.items()},
                         do_mg_L={z: v[keep] for z, v in record.do_mg_L.items()},
                         nh4_mg_L={z: v[keep] for z, v in record.nh4_mg_L.items()})
        args.budget = min(args.budget, 5.0)
    print(f"data: {path.name}, {record.days:.3g} days, {len(record.time_h)} rows every {60 * record.interval_h:g} min")
    t = time.perf_counter()
    res = run_calibration(layout, record, CalibrationOptions(mu_A=True))
    nlp_s = time.perf_counter() - t
    s = res.solver
    print(f"1. NLP fit: {res.status}, {nlp_s:.1f} s (build {s['timings']['build_s']:.1f}, solve "
          f"{s['timings']['solve_s']:.1f}, statistics {s['timings'].get('statistics_s', 0):.1f}), "
          f"{s['iterations']} Ipopt iterations, {s['variables']} variables, objective {s['objective']:.2f}")
    est = res.estimates.set_index("parameter")
    for name, row in est.iterrows():
        inside = row["ci95_low"] <= TRUTH[name] <= row["ci95_high"]
        print(f"   {name:<12} truth {TRUTH[name]:.3f}  fitted {row['fitted']:.4f}  95 % [{row['ci95_low']:.4f}, "
              f"{row['ci95_high']:.4f}]  {'inside' if inside else 'OUTSIDE'}")
    df = derivative_free(res, float(s["objective"]), args.budget * nlp_s)
    names = list(est.index)
    err = max(abs(df["best_x"][k] - TRUTH[n]) for k, n in enumerate(names))
    err_nlp = max(abs(est.loc[n, "fitted"] - TRUTH[n]) for n in names)
    reached = df["t_reach"] is not None
    print(f"2. derivative-free (Powell, square model solve per trial): {df['evals']} trials, {df['iters']} Ipopt "
          f"iterations, {df['seconds']:.1f} s, best objective {df['best']:.2f} "
          f"({'reached' if reached else 'did NOT reach'} the NLP's {s['objective']:.2f} within 0.1 %); largest "
          f"error against the truth {err:.4f} (NLP {err_nlp:.4f})")
    ratio = (df["t_reach"] if reached else df["seconds"]) / nlp_s
    print(f"3. ratio derivative-free / NLP time: {ratio:.1f}" + ("" if reached else " (at least: budget exhausted)"))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
