"""The diurnal optimisation: demo end to end, scaling over zones and periods, and a black-box comparison.

Prints, measured side by side in one run:

1. the 6-zone x 24-period demo end to end (baseline, build, conversion and
   derivatives, Ipopt, verification, writing the outputs) against the 20 s target;
2. the optimisation (build + derivatives + Ipopt) over aerated zones 3-20 (12 periods)
   and periods 12-96 (the demo's zones), with time per (zones x periods), Ipopt time
   per iteration, the log-log slopes of both over each series and of time against
   zones x periods (1 = linear); then MUMPS's automatic ordering of the KKT matrix
   against the optimiser's AMF ordering on two sizes;
3. the same decisions (airflow per zone and period) optimised by a black box,
   ``scipy.optimize.minimize`` (SLSQP, finite-difference gradients) over the
   independent simulator, on a reduced instance (three tanks, six periods), against
   the optimiser: energy reached and time, and the speed ratio (target >= 20 at equal
   or lower energy);
4. the DO minimum in continuous time: the demo with and without the back-off rounds
   (continuous re-simulated DO margin, energy and time of each);
5. an infeasible layout (the demo with a quarter of Z2's diffusers): the pre-screen's
   time against the 10 s target, and (unless --quick) the optimisation without the
   pre-screen (ladder and elastic solve) on the same layout, side by side.

    python benchmarks/bench_optimize.py [--quick] [--sections 1,2,3,4,5]
"""

from __future__ import annotations

import argparse
import dataclasses
import pathlib
import sys
import tempfile
import time
import warnings

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.layout import load_layout  # noqa: E402
from airtaper.layout.types import DiffuserGrid  # noqa: E402
from airtaper.plant import resolve_plant  # noqa: E402
from airtaper.optimize.compliance import violations  # noqa: E402
from airtaper.optimize.horizon import with_periods  # noqa: E402
from airtaper.optimize.simday import simulate_day  # noqa: E402
from airtaper.optimize.diurnal import StudyOptions, run_optimization  # noqa: E402
from airtaper.report.study_files import write_study_outputs  # noqa: E402

#: An invented diurnal flow shape over six 4-hour periods (x mean), for the reduced instance.
FLOW_SHAPE = (0.6, 0.8, 1.15, 1.5, 1.1, 0.85)


def load(path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_layout(str(ROOT / path))


def zones_variant(layout, n_aerated: int):
    """The demo with its aerated volume split into ``n_aerated`` equal zones, diffusers tapered 1.6 : 0.6."""
    first, aerated = layout.zones[0], layout.zones[1:]
    total_v = sum(z.volume_m3 for z in aerated)
    total_d = sum(z.grid.count for z in aerated)
    taper = np.linspace(1.6, 0.6, n_aerated)
    counts = np.maximum(np.round(total_d * taper / taper.sum()), 1).astype(int)
    proto = aerated[0]
    v = total_v / n_aerated
    zones = [first] + [dataclasses.replace(
        proto, id=f"A{i + 1}", volume_m3=v, area_m2=v / proto.depth_m, valve_capacity_Sm3_h=None, do_max_mg_L=None,
        grid=DiffuserGrid(proto.grid.type_id, int(counts[i]), proto.grid.submergence_m)) for i in range(n_aerated)]
    rec = layout.recycles[0]
    return dataclasses.replace(layout, zones=tuple(zones),
                               recycles=(dataclasses.replace(rec, from_zone=zones[-1].id),))


def solve_time(layout, ipopt_options: dict | None = None) -> tuple[float, dict]:
    res = run_optimization(layout, StudyOptions(verify=False, marginal=False, ipopt_options=ipopt_options or {}))
    t = res.summary["solver"]["timings"]
    solve = t["build_s"] + t["initialise_s"] + t["conversion_derivatives_s"] + t["ipopt_s"]
    return solve, res.summary


def slope(xs, ys) -> float:
    lx, ly = np.log(xs), np.log(ys)
    return float(np.polyfit(lx, ly, 1)[0])


def demo_end_to_end() -> None:
    print("1. demo end to end (6 zones x 24 periods)")
    layout = load("layouts/demo.toml")
    t0 = time.perf_counter()
    res = run_optimization(layout)
    with tempfile.TemporaryDirectory() as out:
        t1 = time.perf_counter()
        write_study_outputs(out, schedule=res.schedule, header=res.header, timeseries=res.timeseries,
                            summary=res.summary)
        write_s = time.perf_counter() - t1
    total = time.perf_counter() - t0
    t = res.summary["solver"]["timings"]
    s = res.summary
    print(f"   status {s['status']}, verified {s['verified']}, energy {s['energy_kWh_per_day']:.1f} kWh/d "
          f"(baseline {s['baseline']['energy_kWh_per_day']:.1f}, saving {s['saving_percent']:.1f} %), "
          f"cost {s['cost_per_day']:.2f} (baseline {s['baseline']['cost_per_day']:.2f}), "
          f"{s['solver']['iterations']} Ipopt iterations, {s['solver']['variables']} variables")
    rows = [("baseline (simulator)", t["baseline_s"]), ("build model", t["build_s"]),
            ("start from baseline", t["initialise_s"]),
            ("conversion + derivatives", t["conversion_derivatives_s"] + t["conversion_s"]),
            ("Ipopt", t["ipopt_s"]), ("verification (simulator)", t.get("verification_s", 0.0)),
            ("write outputs", write_s)]
    for name, v in rows:
        print(f"   {name:<26} {v:6.2f} s  {100 * v / total:5.1f} %")
    print(f"   {'total (in process)':<26} {total:6.2f} s;  target 20 s: ratio {total / 20.0:.2f} "
          f"({'met' if total <= 20.0 else 'NOT met'}; the CLI adds about 3 s of imports)")


def scaling(quick: bool) -> None:
    print("2. scaling of the optimisation (build + start + derivatives + Ipopt)")
    demo = load("layouts/demo.toml")
    zone_counts = (3, 6, 12) if quick else (3, 6, 8, 12, 15, 20)
    period_counts = (12, 24, 48) if quick else (12, 24, 48, 96)
    # (aerated zones, periods, the series it belongs to, layout maker); 5 x 12 is in both series
    cases = [(nz, 12, ("zones",), lambda nz=nz: with_periods(zones_variant(demo, nz), 12)) for nz in zone_counts]
    cases += [(5, npd, ("periods", "zones") if npd == 12 else ("periods",), lambda npd=npd: with_periods(demo, npd))
              for npd in period_counts]
    series = {"zones": ([], [], []), "periods": ([], [], [])}
    all_sizes, all_times = [], []
    print("   aerated zones x periods    solve s   iterations   ms per (zone x period)   derivatives s   Ipopt s"
          "   Ipopt s per iteration")
    for nz, npd, keys, make in cases:
        try:
            sec, s = solve_time(make())
        except Exception as exc:  # the baseline simulation can fail on a synthetic variant
            print(f"   {nz:>5} x {npd:<3}               skipped: {type(exc).__name__}: {exc}")
            continue
        t, its = s["solver"]["timings"], s["solver"]["iterations"]
        per_it = t["ipopt_s"] / max(its, 1)
        for key in keys:
            for lst, v in zip(series[key], (nz * npd, sec, per_it)):
                lst.append(v)
        all_sizes.append(nz * npd)
        all_times.append(sec)
        print(f"   {nz:>5} x {npd:<3}               {sec:7.2f}   {its:>5}        {1000 * sec / (nz * npd):8.1f}"
              f"                {t['conversion_derivatives_s']:7.2f}   {t['ipopt_s']:7.2f}   {per_it:8.3f}"
              f"   ({s['status']})")
    for key, (sizes, times, per_it) in series.items():
        if len(sizes) > 1:
            print(f"   over {key:<8} log-log slope: solve time {slope(sizes, times):.2f}, "
                  f"Ipopt time per iteration {slope(sizes, per_it):.2f}")
    print(f"   log-log slope of solve time against zones x periods, all sizes: {slope(all_sizes, all_times):.2f} "
          f"(1 = linear)")
    orderings(demo, quick)


def orderings(demo, quick: bool) -> None:
    """The optimiser's MUMPS ordering (AMF) against MUMPS's automatic choice, side by side."""
    print("   MUMPS ordering of the KKT matrix: the optimiser's AMF against MUMPS's automatic choice")
    print("   aerated zones x periods    Ipopt s (auto)   Ipopt s (AMF)   auto / AMF   energy kWh/d (auto, AMF)")
    cases = [(12, 12, with_periods(zones_variant(demo, 12), 12)), (5, 48, with_periods(demo, 48))]
    if quick:
        cases = cases[:1]
    for nz, npd, lay in cases:
        _, auto = solve_time(lay, {"mumps_pivot_order": 7})
        _, amf = solve_time(lay, {"mumps_pivot_order": 2})
        ta, tb = auto["solver"]["timings"]["ipopt_s"], amf["solver"]["timings"]["ipopt_s"]
        print(f"   {nz:>5} x {npd:<3}               {ta:8.2f}        {tb:8.2f}        {ta / tb:6.2f}"
              f"       {auto['energy_kWh_per_day']:.2f}, {amf['energy_kWh_per_day']:.2f}")


def reduced_instance():
    lay = with_periods(load("layouts/three_tank.toml"), 6, steps_per_period=2)
    q = lay.influent.flow_m3_d[0]
    return dataclasses.replace(lay, influent=dataclasses.replace(lay.influent,
                                                                 flow_m3_d=tuple(q * f for f in FLOW_SHAPE)))


class _Budget(Exception):
    """The black box ran out of its time budget."""


def black_box(quick: bool) -> None:
    from scipy.optimize import minimize

    print("3. black box (scipy SLSQP over the independent simulator) against the optimiser, "
          "three tanks x 6 periods")
    lay = reduced_instance()
    side = resolve_plant(lay).air
    zones = [z.id for z in side.zones]
    n_p = lay.horizon.n_periods
    t0 = time.perf_counter()
    res = run_optimization(lay, StudyOptions(marginal=False))
    t_opt = time.perf_counter() - t0
    e_opt = res.summary["energy_kWh_per_day"]
    verified = res.summary["verified"]
    start = res.study.baseline.day.period_mean_airflow()
    ranges = {z: lay.zone_airflow_range_Sm3_h(lay.zone(z)) for z in zones}
    scale = np.array([ranges[z][1] for z in zones for _ in range(n_p)])
    x0 = np.array([np.clip(start[z][p], *ranges[z]) for z in zones for p in range(n_p)]) / scale
    budget_s = 120.0 if quick else 600.0
    cache = {}
    best = {"energy": np.inf, "t": None, "reached_t": None}
    t_bb0 = time.perf_counter()

    def day(x):
        key = tuple(np.round(x, 12))
        if key not in cache:
            if time.perf_counter() - t_bb0 > budget_s:
                raise _Budget()
            sched = {z: (x[i * n_p:(i + 1) * n_p] * scale[i * n_p:(i + 1) * n_p]).tolist() for i, z in enumerate(zones)}
            d = simulate_day(lay, schedule=sched)
            cache[key] = d
            ok = not violations(lay, d.figures, effluent_tolerance=0.02, do_tolerance_mg_L=0.05)
            if ok and d.energy_kWh_per_day < best["energy"]:
                best["energy"], best["t"] = d.energy_kWh_per_day, time.perf_counter() - t_bb0
                if best["reached_t"] is None and d.energy_kWh_per_day <= e_opt:
                    best["reached_t"] = best["t"]
        return cache[key]

    def energy(x):
        return day(x).energy_kWh_per_day / 1000.0

    def limits(x):  # >= 0 when met
        f = day(x).figures
        out = [lay.limits.nh4_mean_mg_L - f["nh4_mean_mg_L"], lay.limits.nh4_max_mg_L - f["nh4_max_mg_L"]]
        out.extend(f["do_margin_mg_L"].values())
        return np.array(out)

    bounds = [(ranges[z][0] / ranges[z][1], 1.0) for z in zones for _ in range(n_p)]
    message = ""
    try:
        out = minimize(energy, x0, method="SLSQP", bounds=bounds, constraints=[{"type": "ineq", "fun": limits}],
                       options={"maxiter": 200, "ftol": 1e-7})
        message = f"{out.nit} iterations, {out.message}"
    except _Budget:
        message = f"stopped at the {budget_s:.0f} s budget"
    t_bb = time.perf_counter() - t_bb0
    print(f"   optimiser: {e_opt:8.2f} kWh/d in {t_opt:6.2f} s (incl. baseline and verification; verified {verified})")
    print(f"   black box: best feasible {best['energy']:8.2f} kWh/d (found at {best['t'] or float('nan'):.1f} s), "
          f"{t_bb:.1f} s in all, {len(cache)} simulations, {message}")
    if best["reached_t"] is not None:
        print(f"   black box reached the optimiser's energy after {best['reached_t']:.1f} s: speed ratio "
              f"{best['reached_t'] / t_opt:.1f} (target >= 20)")
    else:
        print(f"   black box never reached the optimiser's energy (best {best['energy'] / e_opt:.4f} x); speed ratio "
              f"at least {t_bb / t_opt:.1f} (target >= 20 at equal or lower energy)")


def do_hold() -> None:
    print("4. DO minimum between the optimiser's time points: the demo with and without the back-off")
    layout = load("layouts/demo.toml")
    for hold in (False, True):
        t0 = time.perf_counter()
        res = run_optimization(layout, StudyOptions(hold_do=hold, marginal=False, prescreen=False))
        total = time.perf_counter() - t0
        s = res.summary
        extra = "" if not hold else f", {s['do_hold']['rounds']} rounds in {s['do_hold']['seconds']:.1f} s"
        print(f"   back-off {'on ' if hold else 'off'}: continuous DO margin {s['min_do_margin_mg_L']:+.4f} mg/L, "
              f"energy {s['energy_kWh_per_day']:.1f} kWh/d, total {total:.1f} s{extra}")


def infeasible(quick: bool) -> None:
    from airtaper.optimize.prescreen import prescreen

    print("5. an infeasible layout (demo, Z2 with 200 of its 800 diffusers): pre-screen against the solve")
    layout = load("layouts/demo.toml")
    layout = dataclasses.replace(layout, zones=tuple(
        dataclasses.replace(z, grid=dataclasses.replace(z.grid, count=200)) if z.id == "Z2" else z
        for z in layout.zones))
    t0 = time.perf_counter()
    screen = prescreen(layout)
    t_screen = time.perf_counter() - t0
    print(f"   pre-screen {t_screen:.2f} s (target 10 s: {'met' if t_screen <= 10 else 'NOT met'}), "
          f"{len(screen['findings'])} finding(s): " + "; ".join(f["message"] for f in screen["findings"]))
    if quick:
        return
    t0 = time.perf_counter()
    res = run_optimization(layout, StudyOptions(prescreen=False, marginal=False))
    t_solve = time.perf_counter() - t0
    print(f"   without the pre-screen: status {res.summary['status']} after {t_solve:.1f} s "
          f"({res.summary['solver']['iterations']} Ipopt iterations); ratio {t_solve / t_screen:.0f}")
    for f in res.summary["infeasibility"]:
        print(f"     {f['message']}")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer sizes and black-box iterations")
    ap.add_argument("--sections", default="1,2,3,4,5", help="which parts to run, e.g. 1,3 (default all)")
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    parts = {int(x) for x in args.sections.split(",") if x.strip()}
    if 1 in parts:
        demo_end_to_end()
    if 2 in parts:
        scaling(args.quick)
    if 3 in parts:
        black_box(args.quick)
    if 4 in parts:
        do_hold()
    if 5 in parts:
        infeasible(args.quick)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
