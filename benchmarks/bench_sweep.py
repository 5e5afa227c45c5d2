"""Sweeps on Dask: serial against the local cluster, memory per worker, and a scenario's wall time against Ipopt's.

Prints, measured side by side in one run:

1. a 16-scenario sweep of the demo (4 water temperatures x 4 fouling factors), the
   same tasks run one by one in this process (imports paid once, as in a worker) and
   on a local Dask cluster with one worker per core: wall times, speed-up and parallel
   efficiency (serial / (cluster x workers); target: as close to 1 as the machine
   allows), and the peak resident memory of each worker;
2. the demo's wall time against its Ipopt time: ``airtaper optimize`` from the
   command line as a user runs it (a fresh interpreter: imports, report), a scenario
   as a sweep worker runs it (imports paid before the clock starts, ``--no-report``),
   the cold scenario (``--cold T,F``: water temperature and fouling; default 13 C and 0.85,
   where the uniform baseline breaks the NH4-N limit and the complying-setpoint search
   runs; at 10 C the pre-screen finds the limits cannot be met) as a sweep worker, and the scenarios of section 1 (``run_s`` against ``ipopt_s``
   of the rows); target:
   wall <= 1.5 x Ipopt. Ipopt's time is the solver's own, summed over attempts. Each ratio is given twice:
   wall against Ipopt's wall time, and the run's process CPU against Ipopt's process CPU (``ipopt_cpu_s``); on a
   loaded machine the wall times stretch with the other work and only the CPU ratio compares runs. With
   ``--before SRC`` (the ``src`` folder of another checkout, e.g. of main) the same runs
   of that code alternate with this one's, so both see the same load: before and after
   side by side in one run.

    python benchmarks/bench_sweep.py [--quick] [--layout L] [--scenarios N] [--sections 1,2] [--repeats K]
                                     [--before SRC] [--cold T,F]

``--quick``: the three-tank plant on four periods, 8 scenarios. Numbers taken while
other work runs on the machine are noisy; the ratios of one run are what to compare.
"""

from __future__ import annotations

import argparse
import json
import os
import pathlib
import resource
import statistics
import subprocess
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.cli.sweep import optimize_scenario, plan  # noqa: E402
from airtaper.sweep.execute import Execution, machine_workers, run_serial  # noqa: E402
from airtaper.sweep.grid import Grid, Scenario  # noqa: E402
from airtaper.sweep.journal import open_sweep_folder  # noqa: E402


def _grid(n: int, common: dict) -> Grid:
    temps = [10.0, 13.0, 16.0, 19.0, 22.0, 25.0]
    fouls = [0.85, 0.8, 0.7, 0.6, 0.5, 0.45]
    side = 1
    while side * side < n:
        side += 1
    combos = [(t, f) for t in temps[:side] for f in fouls[:side]][:n]
    keys = ("plant.water_temperature_C", "zone_defaults.fouling")
    sc = tuple(Scenario(f"s{i:02d}", {**common, keys[0]: t, keys[1]: f}, keys) for i, (t, f) in enumerate(combos))
    return Grid("<benchmark>", sc, keys, keys)


def _tasks(layout: str, grid: Grid, folder: pathlib.Path) -> list[dict]:
    open_sweep_folder(folder, "sweep", overwrite=True)
    known, tasks = plan(layout, grid, folder, ["--no-report"])
    if known:
        raise SystemExit(f"scenarios refused: {sorted(known)}")
    return tasks


def section_sweep(layout: str, grid: Grid, tmp: pathlib.Path) -> list[dict]:
    n = len(grid.scenarios)
    workers = machine_workers()
    print(f"1. {n} scenarios of {layout}, serial in one process against a local Dask cluster of {workers} workers")
    tasks = _tasks(layout, grid, tmp / "serial")
    t0 = time.perf_counter()
    serial_rows = list(run_serial(tasks, optimize_scenario))
    serial = time.perf_counter() - t0
    tasks = _tasks(layout, grid, tmp / "cluster")
    t0 = time.perf_counter()
    ex = Execution(tasks, optimize_scenario, workers=workers, progress=False)
    cluster_rows = list(ex.rows())
    cluster = time.perf_counter() - t0
    bad = [r["scenario"] for r in serial_rows + cluster_rows if r.get("status") not in ("optimal", "unverified")]
    print(f"   serial  {serial:8.1f} s   ({serial / n:.1f} s per scenario; load {os.getloadavg()[0]:.1f})")
    print(f"   cluster {cluster:8.1f} s   (cluster start and worker imports included; load {os.getloadavg()[0]:.1f})")
    print(f"   speed-up {serial / cluster:.2f} on {workers} workers: parallel efficiency {serial / cluster / workers:.2f}")
    for w, b in sorted(ex.peak_memory_bytes.items()):
        print(f"   peak memory of worker {w}: {b / 2**20:.0f} MB")
    same = all(abs(a["energy_kWh_per_day"] - b["energy_kWh_per_day"]) <= 1e-6 * abs(a["energy_kWh_per_day"])
               for a, b in zip(sorted(serial_rows, key=lambda r: r["scenario"]),
                               sorted(cluster_rows, key=lambda r: r["scenario"]))
               if a.get("energy_kWh_per_day") is not None and b.get("energy_kWh_per_day") is not None)
    print(f"   serial and cluster rows give the same energy: {same}; not optimal: {bad or 'none'}")
    return serial_rows + cluster_rows


#: A scenario as a sweep worker runs it: the imports before the clock, then the optimize command in-process
#: with --no-report; prints the wall time and the process CPU time of the command.
_WORKER = """
import sys, time
import airtaper.cli.main as cli, airtaper.cli.optimize, airtaper.optimize.diurnal
t0, c0 = time.perf_counter(), time.process_time()
cli.main(sys.argv[1:])
print(time.perf_counter() - t0, time.process_time() - c0)
"""


def _children_cpu_s() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _run(src: pathlib.Path, argv: list[str], worker: bool) -> tuple[float, dict]:
    """(wall s, summary) of one optimize run with the code of ``src``; the summary gains the run's CPU seconds
    (``cpu_s``: from the command line the whole process, imports and teardown; as a worker, the command only)."""
    env = dict(os.environ, PYTHONPATH=str(src) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    out = pathlib.Path(argv[argv.index("--out") + 1])
    t0, c0 = time.perf_counter(), _children_cpu_s()
    if worker:
        r = subprocess.run([sys.executable, "-c", _WORKER, *argv, "--no-report"], env=env, capture_output=True,
                           text=True, check=False)
        wall, cpu = (float(v) for v in r.stdout.strip().splitlines()[-1].split())
    else:
        subprocess.run([sys.executable, "-m", "airtaper.cli.main", *argv], env=env, stdout=subprocess.DEVNULL,
                       check=False)
        wall, cpu = time.perf_counter() - t0, _children_cpu_s() - c0
    return wall, dict(json.loads((out / "summary.json").read_text()), cpu_s=cpu)


def _overrides(tmp: pathlib.Path, name: str, values: dict) -> list[str]:
    """``--overrides FILE`` with ``values`` (none when empty)."""
    if not values:
        return []
    from airtaper.layout.overrides import overrides_to_toml

    (tmp / f"{name}.toml").write_text(overrides_to_toml(values))
    return ["--overrides", str(tmp / f"{name}.toml")]


def section_ratio(layout: str, rows: list[dict], tmp: pathlib.Path, repeats: int, common: dict,
                  before: pathlib.Path | None, cold: dict | None = None) -> None:
    print(f"2. wall time against Ipopt time, {layout}" + (f" with {common}" if common else ""))
    extra = _overrides(tmp, "common", common)
    codes = [("this", ROOT / "src")] + ([("before", before)] if before is not None else [])
    modes = [("c", False, extra), ("w", True, extra)] + ([("cold", True, _overrides(tmp, "cold", {**common, **cold}))]
                                                         if cold else [])
    for mode, worker, ov in modes if repeats else ():  # --repeats 0: the sweep rows of section 1 only
        runs = {name: [] for name, _ in codes}
        for i in range(repeats if mode != "cold" else 1):
            for name, src in codes:  # alternating: both versions see the same load
                out = tmp / f"{name}-{mode}{i}"
                wall, s = _run(src, ["optimize", layout, "--out", str(out), "--quiet", *ov], worker)
                if not s["solver"]["timings"].get("ipopt_s"):  # screened out or failed before Ipopt ran
                    print(f"     ({name} {mode}{i}: {s.get('status')}, no Ipopt time: {s.get('messages', [''])[:1]})")
                    continue
                t = s["solver"]["timings"]
                runs[name].append((wall, t["ipopt_s"], t, s["energy_kWh_per_day"], s.get("cost_per_day"),
                                   s.get("status"), s["cpu_s"], t.get("ipopt_cpu_s")))
                print(f"     ({name} {mode}{i}: wall {wall:.1f} s, Ipopt {t['ipopt_s']:.1f} s; process CPU "
                      f"{s['cpu_s']:.1f} s, Ipopt CPU {_fmt(t.get('ipopt_cpu_s'))} s; load "
                      f"{os.getloadavg()[0]:.1f})", flush=True)
        how = f"cold scenario {cold} as a sweep worker, one run" if mode == "cold" else \
            "as a sweep worker runs it (imports paid, --no-report)" if worker else \
            "command line (fresh interpreter, report)"
        print(f"   {how}" + ("" if mode == "cold" else f", median of {repeats}") + ":")
        for name, _ in codes:
            r = runs[name]
            if not r:
                continue
            wall = statistics.median(c[0] for c in r)
            ipopt = statistics.median(c[1] for c in r)
            mid = sorted(r, key=lambda c: c[0])[len(r) // 2]
            cpu = statistics.median(c[6] for c in r)
            ipcpu = [c[7] for c in r if c[7]]  # (code from before ipopt_cpu_s was measured has none)
            on_cpu = f", ratio {cpu / statistics.median(ipcpu):.2f}" if ipcpu else ""
            print(f"     {name:6s}: wall {wall:6.1f} s, Ipopt {ipopt:6.1f} s, ratio {wall / ipopt:.2f}; process CPU "
                  f"{cpu:6.1f} s, Ipopt CPU {_fmt(statistics.median(ipcpu) if ipcpu else None)} s{on_cpu}; "
                  f"{mid[5]}, {mid[3]:,.1f} kWh/d" + (f", cost {mid[4]:,.2f}/d" if mid[4] is not None else ""))
            parts = ", ".join(f"{k} {v:.1f}" for k, v in mid[2].items() if isinstance(v, float) and v >= 0.05)
            print(f"             inside the run (s): {parts}")
    ok = [r for r in rows if r.get("ipopt_s")]  # (a worker's first scenario pays its imports: read the median)
    if ok:
        ratios = sorted(r["run_s"] / r["ipopt_s"] for r in ok)
        print(f"   sweep scenarios of section 1 ({len(ok)}): run_s / ipopt_s median {statistics.median(ratios):.2f}, "
              f"min {ratios[0]:.2f}, max {ratios[-1]:.2f} (target <= 1.5); median run_s "
              f"{statistics.median(r['run_s'] for r in ok):.1f} s, ipopt_s {statistics.median(r['ipopt_s'] for r in ok):.1f} s")
    ok = [r for r in ok if r.get("ipopt_cpu_s") and r.get("run_cpu_s")]
    if ok:
        ratios = sorted(r["run_cpu_s"] / r["ipopt_cpu_s"] for r in ok)
        print(f"   the same on process CPU: run_cpu_s / ipopt_cpu_s median {statistics.median(ratios):.2f}, "
              f"min {ratios[0]:.2f}, max {ratios[-1]:.2f}")


def _fmt(v) -> str:
    return "-" if v is None else f"{v:.1f}"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--layout", default=None)
    ap.add_argument("--scenarios", type=int, default=None)
    ap.add_argument("--sections", default="1,2")
    ap.add_argument("--repeats", type=int, default=None,
                    help="runs per version in section 2 (default 3, quick 1; 0: only the rows of section 1)")
    ap.add_argument("--before", type=pathlib.Path, default=None,
                    help="src folder of the code to compare with in section 2 (e.g. a checkout of main)")
    ap.add_argument("--cold", default="13,0.85",
                    help="water temperature C and fouling of the cold scenario of section 2 ('' to skip)")
    args = ap.parse_args()
    cold = None
    if args.cold:
        t, f = (float(v) for v in args.cold.split(","))
        cold = {"plant.water_temperature_C": t, "zone_defaults.fouling": f}
    layout = args.layout or str(ROOT / "layouts" / ("three_tank.toml" if args.quick else "demo.toml"))
    n = args.scenarios or (8 if args.quick else 16)
    common = {"horizon.n_periods": 4, "horizon.steps_per_period": 2} if args.quick else {}
    sections = {int(s) for s in args.sections.split(",")}
    with tempfile.TemporaryDirectory() as d:
        tmp = pathlib.Path(d)
        rows = section_sweep(layout, _grid(n, common), tmp) if 1 in sections else []
        if 2 in sections:
            section_ratio(layout, rows, tmp, args.repeats if args.repeats is not None else (1 if args.quick else 3),
                          common, None if args.before is None else args.before.resolve(), cold)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
