"""Robustness benchmark: random valid plants, each through `airtaper optimize` with a time limit.

Every plant is invented for the purpose, drawn from a fixed seed: 2-12 zones, with and
without anoxic and swing zones, step feed and internal recycle, an ideal or a layered
clarifier, 10-25 C, 0-1,450 m elevation, loads 0.5-2 x the load the plant was sized for,
12, 24 or 48 periods, a target SRT or a fixed waste flow. A layered clarifier is sized for
the plant's average load as a designer would (:func:`clarifier_design`: overflow rate and
solids flux with a margin, the return ratio raised where the mixed liquor needs it), then
built 0.75-1.25 x that area; plants whose mixed liquor no return ratio up to 1.5 carries
stay overloaded. Each is written as a layout
(influent per period, no CSV) and run as a user would: ``python -m airtaper.cli.main
optimize LAYOUT --out DIR`` in a subprocess with a time limit.

Outcome of each plant, from the exit code and the last message:

* ``verified``   exit 0: the schedule was solved and verified by the simulator;
* ``diagnosed``  exit 2 or 3 with a named reason (limits infeasible, no steady state,
  washout): the tool says why it cannot plan this plant;
* ``unverified`` exit 4: a schedule that broke a limit when re-simulated;
* ``failed``     exit 1, a traceback, the time limit, or an optimiser that used up its
  solve budget (exit 3 with status ``failed`` in summary.json: a bounded ending, but no
  answer, so it is not counted as diagnosed).

The message shown is the first line of ``error:`` on stderr (exit 2, or a plant stopped
before the optimisation), else the summary's first message and, for a diagnosis, where it
came from (pre-screen or elastic solve).

Target (issue 10): at least 98 % verified or diagnosed; no failure.

Usage::

    python benchmarks/bench_robustness.py [--n 50] [--first 0] [--timeout 600] [--cpu] [--keep DIR] [--list]

``--n`` plants from the fixed seed (``--first`` skips the first ones: run a long list in
pieces on a busy machine; ``--plants 3,17`` runs only those, e.g. after a fix); ``AIRTAPER_ROBUSTNESS_SEEDS=1,2,3`` adds plants from more
seeds (``--n`` each); ``--quick``: 3 plants. Times are wall-clock (noisy on a shared
machine), with the CPU seconds of each run beside the message. The full 50 plants take
one to a few hours on two cores: this is not a timing benchmark but a count of outcomes.

``--cpu``: the limit counts the run's CPU seconds, not the wall clock (the child gets
RLIMIT_CPU; the wall clock may run to 8 times the limit). On a machine shared with other
jobs a wall-clock limit measures the load, not the plant: at a load average of 10 runs
were stopped at 300 s wall after 21-42 s of CPU.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.layout.defaults import (SETTLING_FNS, SETTLING_RH_m3_g, SETTLING_RP_m3_g, SETTLING_V0_m_d,  # noqa: E402
                                      SETTLING_V0_MAX_m_d, SI_OF_COD, TSS_PER_COD, XI_OF_COD)
from airtaper.physics.settling import limiting_solids_flux_g_m2_d  # noqa: E402
from airtaper.process.asm1 import ASM1_20C, at_temperature  # noqa: E402
#: The fixed seed of the plant list.
SEED = 20261202

_SOTE = """sote_points = [
  { airflow_per_diffuser_Sm3_h = 1.0, sote_percent = 26.3, density_percent = 8.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 4.0, sote_percent = 22.0, density_percent = 8.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 7.0, sote_percent = 20.4, density_percent = 8.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 1.0, sote_percent = 37.9, density_percent = 8.0, submergence_m = 6.0 },
  { airflow_per_diffuser_Sm3_h = 4.0, sote_percent = 31.8, density_percent = 8.0, submergence_m = 6.0 },
  { airflow_per_diffuser_Sm3_h = 7.0, sote_percent = 29.4, density_percent = 8.0, submergence_m = 6.0 },
  { airflow_per_diffuser_Sm3_h = 1.0, sote_percent = 31.0, density_percent = 20.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 4.0, sote_percent = 26.0, density_percent = 20.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 7.0, sote_percent = 24.1, density_percent = 20.0, submergence_m = 4.0 },
  { airflow_per_diffuser_Sm3_h = 1.0, sote_percent = 44.7, density_percent = 20.0, submergence_m = 6.0 },
  { airflow_per_diffuser_Sm3_h = 4.0, sote_percent = 37.5, density_percent = 20.0, submergence_m = 6.0 },
  { airflow_per_diffuser_Sm3_h = 7.0, sote_percent = 34.7, density_percent = 20.0, submergence_m = 6.0 },
]
headloss_points = [
  { airflow_per_diffuser_Sm3_h = 1.0, headloss_kPa = 2.9 },
  { airflow_per_diffuser_Sm3_h = 4.0, headloss_kPa = 3.6 },
  { airflow_per_diffuser_Sm3_h = 7.0, headloss_kPa = 4.5 },
]
"""


def _per_period(values) -> str:
    return "[" + ", ".join(f"{v:.4g}" for v in values) + "]"


#: Surface overflow rate at the average flow that designers use for a secondary clarifier after air
#: activated sludge: 16-28 m3/(m2 d) (Tchobanoglous, Burton & Stensel 2003, Wastewater Engineering:
#: Treatment and Reuse, 4th ed., Metcalf & Eddy, Table 8-7; from memory).
DESIGN_OVERFLOW_m_d = (16.0, 28.0)
#: Safety factor of the solids flux (state point) design: the area is sized so that the applied
#: solids flux is at most 1 / 1.25 = 80 % of the thickening zone's limiting flux at the underflow
#: velocity (Ekama et al. 1997, IAWQ STR 6, flux design with a margin; the 1.25 from memory).
FLUX_SAFETY = 1.25
#: Return sludge ratios a designer may choose to make the state point work (the drawn ratio is kept
#: when it does): up to 1.5 (common practice (no source)).
RAS_RATIO_MAX = 1.5
#: The lowest overflow rate at the average flow a designer builds for, m3/(m2 d): the low end of
#: the extended-aeration range, 8-16 (Tchobanoglous et al. 2003, Table 8-7; from memory). A larger
#: clarifier is not built; the return ratio is raised instead.
OVERFLOW_FLOOR_m_d = 8.0
#: The built area against the designed one: a uniform factor. Below 1 / FLUX_SAFETY = 0.8 a
#: flux-governed clarifier is built smaller than its limit (overloaded): a few of the drawn plants
#: (about a tenth of those whose area the flux governs) stay undersized on purpose, as real ones are
#: (a plant grown past its design, a sludge that settles worse than designed for), so the benchmark
#: still meets the tool's overload diagnosis.
AREA_FACTOR = (0.75, 1.25)


def mixed_liquor_tss_g_m3(flow_m3_d: float, volume_m3: float, srt_d: float, cod_mg_L: float,
                          temperature_C: float) -> float:
    """A designer's estimate of the mixed liquor's suspended solids at the average load, g/m3.

    The steady sludge balance of a completely mixed reactor with a sludge age ``srt_d``
    (Lawrence & McCarty form): per m3 of influent the heterotrophs grow ``Y S_b / (1 + b SRT)``
    on the biodegradable COD ``S_b``, leave ``f_D b SRT`` of that as endogenous residue, and the
    influent's particulate inert COD accumulates as it is; the solids in the reactor are the
    sludge age over the hydraulic retention time times that production, TSS the layout's
    default fraction of particulate COD. ASM1's death-regeneration ``b_H`` and ``f_P`` (the
    ``asm1_20C`` set at the temperature) are turned into the traditional decay
    ``b = b_H (1 - Y_H (1 - f_P))`` and residue fraction ``f_D = f_P / (1 - Y_H (1 - f_P))``
    (Grady, Daigger & Lim 1999, Biological Wastewater Treatment, 2nd ed., ch. 6; from memory).
    The influent's COD fractions are the layout's defaults. Nitrifiers (a few per cent) are left
    out. On the benchmark's layered plants whose sludge age is held this is within 9 % of the
    simulator's steady state.
    """
    p = at_temperature(ASM1_20C, temperature_C)
    b = p.b_H * (1.0 - p.Y_H * (1.0 - p.f_P))
    f_d = p.f_P / (1.0 - p.Y_H * (1.0 - p.f_P))
    biodegradable = (1.0 - SI_OF_COD - XI_OF_COD) * cod_mg_L
    biomass = p.Y_H * biodegradable / (1.0 + b * srt_d)
    cod_per_m3 = biomass * (1.0 + f_d * b * srt_d) + XI_OF_COD * cod_mg_L
    return TSS_PER_COD * cod_per_m3 * srt_d * flow_m3_d / volume_m3


def _flux_ratio(area_m2: float, flow_m3_d: float, ras_ratio: float, mlss_g_m3: float) -> float:
    """Applied solids flux over the limiting flux of the thickening zone (the layout's default settling)."""
    g_lim, _ = limiting_solids_flux_g_m2_d(ras_ratio * flow_m3_d / area_m2, SETTLING_FNS * mlss_g_m3,
                                           SETTLING_V0_MAX_m_d, SETTLING_V0_m_d, SETTLING_RH_m3_g, SETTLING_RP_m3_g)
    return (1.0 + ras_ratio) * flow_m3_d * mlss_g_m3 / area_m2 / g_lim


def _flux_area_m2(flow_m3_d: float, ras_ratio: float, mlss_g_m3: float, ratio: float) -> float | None:
    """Smallest area whose applied flux is ``ratio`` of the limiting flux (None: no area reaches it).

    The applied over the limiting flux falls as the area grows (the limiting flux over the
    underflow velocity rises as the velocity falls), so a bisection on the area's logarithm finds it.
    """
    lo, hi = flow_m3_d / 200.0, flow_m3_d / 0.5  # overflow rates 200 to 0.5 m/d
    if _flux_ratio(hi, flow_m3_d, ras_ratio, mlss_g_m3) > ratio:
        return None
    for _ in range(40):
        mid = np.sqrt(lo * hi)
        lo, hi = (mid, hi) if _flux_ratio(mid, flow_m3_d, ras_ratio, mlss_g_m3) > ratio else (lo, mid)
    return hi


def clarifier_design(rng: np.random.Generator, flow_m3_d: float, volume_m3: float, ras_ratio: float,
                     srt_d: float, cod_mg_L: float, temperature_C: float) -> dict:
    """The layered clarifier sized for the plant's average load, and the return ratio it needs.

    With the estimated mixed liquor ``X`` (:func:`mixed_liquor_tss_g_m3`) the area is the larger of
    ``Q / SOR`` (a design overflow rate drawn in :data:`DESIGN_OVERFLOW_m_d`) and the state point's
    area, where the applied flux ``Q (1 + R) X / A`` is ``1 / FLUX_SAFETY`` of the limiting flux
    at the underflow velocity ``R Q / A`` (solids flux theory, Ekama et al. 1997). When that area
    would need an overflow rate below :data:`OVERFLOW_FLOOR_m_d` at the drawn return ratio ``R``
    (a mixed liquor too thick for the underflow the sludge can reach), the designer raises ``R``
    in steps of 0.05 up to :data:`RAS_RATIO_MAX`; a plant still beyond that gets the floor's
    area and the largest ratio, and stays overloaded (a tank too small for its load at that
    sludge age). The built area is the designed one times a factor drawn in :data:`AREA_FACTOR`.
    """
    sor = float(rng.uniform(*DESIGN_OVERFLOW_m_d))
    factor = float(rng.uniform(*AREA_FACTOR))
    x = mixed_liquor_tss_g_m3(flow_m3_d, volume_m3, srt_d, cod_mg_L, temperature_C)
    largest = flow_m3_d / OVERFLOW_FLOOR_m_d
    ras = ras_ratio
    while True:
        flux_area = _flux_area_m2(flow_m3_d, ras, x, 1.0 / FLUX_SAFETY)
        if (flux_area is not None and flux_area <= largest) or ras >= RAS_RATIO_MAX - 1e-9:
            break
        ras = round(min(ras + 0.05, RAS_RATIO_MAX), 2)
    held = flux_area is not None and flux_area <= largest
    area = float(factor * max(flow_m3_d / sor, flux_area if held else largest))
    return dict(area_m2=area, ras_ratio=ras, mlss_g_m3=x, factor=factor, overflow_m_d=flow_m3_d / area,
                flux_ratio=_flux_ratio(area, flow_m3_d, ras, x), flux_design=bool(held))


def random_plant(rng: np.random.Generator, index: int) -> tuple[str, dict]:
    """One invented plant as layout text, and a short description of it."""
    n = int(rng.integers(2, 13))
    n_periods = int(rng.choice([12, 24, 48]))
    q_design = float(rng.uniform(2000.0, 30000.0))
    load = float(rng.uniform(0.5, 2.0))
    hrt_h = float(rng.uniform(8.0, 14.0))
    volume = q_design * hrt_h / 24.0
    depth = float(rng.uniform(4.0, 6.5))
    n_anoxic = int(max(1, round(rng.uniform(0.15, 0.35) * n))) if (n >= 3 and rng.random() < 0.6) else 0
    swing = n - n_anoxic >= 3 and rng.random() < 0.3
    kinds = ["anoxic"] * n_anoxic + ["aerated"] * (n - n_anoxic)
    if swing:
        kinds[n_anoxic] = "swing"
    shares = rng.uniform(0.7, 1.3, n)
    vols = volume * shares / shares.sum()
    taper = np.linspace(1.5, 0.7, n)
    density = float(rng.uniform(0.08, 0.2))
    temperature = float(rng.uniform(10.0, 25.0))
    elevation = float(rng.uniform(0.0, 1450.0))
    layered = rng.random() < 0.5
    lines = [f'notes = "Invented plant {index} for the robustness benchmark. Planning estimates only."', "",
             "[plant]", f'name = "Benchmark plant {index}"', f"elevation_m = {elevation:.0f}",
             f"water_temperature_C = {temperature:.1f}", "", "[horizon]", f"n_periods = {n_periods}",
             "steps_per_period = 2", "", "[[diffuser_types]]", 'id = "disc"', "membrane_area_m2 = 0.040",
             "airflow_min_Sm3_h = 1.0", "airflow_max_Sm3_h = 7.0", _SOTE]
    grid_max = 0.0
    for i in range(n):
        area = vols[i] / depth
        lines += ["[[zones]]", f'id = "Z{i + 1}"', f'kind = "{kinds[i]}"', f"volume_m3 = {vols[i]:.1f}",
                  f"depth_m = {depth:.2f}", f"alpha = {0.45 + 0.15 * i / max(n - 1, 1):.3f}"]
        if kinds[i] != "anoxic":
            count = int(max(20, round(density * taper[i] * area / 0.040)))
            count = min(count, int(0.24 * area / 0.040))
            grid_max += 7.0 * count
            lines.append(f'grid = {{ type = "disc", count = {count}, submergence_m = {depth - 0.3:.2f} }}')
        lines.append("")
    step_feed = n >= 3 and rng.random() < 0.3
    lines.append("[flows]")
    if step_feed:
        second = int(rng.integers(1, max(2, n // 2 + 1)))
        lines += ["[[flows.step_feed]]", 'zone = "Z1"', "fraction = 0.6", "[[flows.step_feed]]",
                  f'zone = "Z{second + 1}"', "fraction = 0.4"]
    recycle = n_anoxic > 0 and rng.random() < 0.8
    if recycle:
        lines += ["[[flows.recycles]]", 'id = "IR"', f'from_zone = "Z{n}"', 'to_zone = "Z1"',
                  f"ratio = {rng.uniform(1.0, 4.0):.2f}"]
    ras = float(rng.uniform(0.5, 1.0))
    ras_line = len(lines) + 2
    lines += ["[flows.return_sludge]", 'to_zone = "Z1"', f"ratio = {ras:.2f}", "[flows.waste]"]
    srt = float(rng.uniform(8.0, 20.0))
    fixed_waste = rng.random() >= 0.8
    waste_line = len(lines)
    lines.append(f"flow_m3_d = {volume * ras / (srt * (1.0 + ras)):.1f}" if fixed_waste else f"srt_d = {srt:.1f}")
    lines.append("")
    design = clarifier_rng = None
    if layered:
        # one draw of the main stream seeds the clarifier's own draws (so the plants' other draws stay
        # what they were before the clarifier was sized from the load); the area, which needs the
        # influent drawn below, goes in at this line
        clarifier_rng = np.random.default_rng(int(rng.integers(1 << 62)))
        clarifier_line = len(lines) + 2
        lines += ["[clarifier]", 'kind = "layered"', "", f"height_m = {rng.uniform(3.5, 4.5):.2f}", ""]
    else:
        lines += ["[clarifier]", 'kind = "ideal"', f"effluent_tss_mg_L = {rng.uniform(5.0, 15.0):.1f}", ""]
    n_blowers = int(rng.integers(2, 4))
    each = 1.15 * grid_max / n_blowers
    for b in range(n_blowers):
        lines += ["[[blowers]]", f'id = "B{b + 1}"', 'kind = "centrifugal"', f"airflow_min_Sm3_h = {0.45 * each:.0f}",
                  f"airflow_max_Sm3_h = {each:.0f}", "pressure_max_gauge_kPa = 80.0", "efficiency = 0.68", ""]
    lines += ["[header]", f"loss_k_kPa_per_Sm3_h2 = {2.0 / max(grid_max, 1.0) ** 2:.3g}", ""]
    hours = (np.arange(n_periods) + 0.5) * 24.0 / n_periods
    shape = 1.0 + 0.35 * np.sin(2.0 * np.pi * (hours - 8.0) / 24.0)
    conc = 1.0 + 0.25 * np.sin(2.0 * np.pi * (hours - 9.0) / 24.0)
    cod = float(rng.uniform(350.0, 600.0))
    tkn = float(rng.uniform(35.0, 55.0))
    lines += ["[influent]", f"flow_m3_d = {_per_period(q_design * load * shape)}",
              f"cod_total_mg_L = {_per_period(cod * conc)}", f"cod_soluble_mg_L = {_per_period(0.38 * cod * conc)}",
              f"tkn_mg_L = {_per_period(tkn * conc)}", f"nh4_mg_L = {_per_period(0.67 * tkn * conc)}",
              f"tss_mg_L = {_per_period(0.46 * cod * conc)}", "alkalinity_mol_m3 = 7.0", "",
              "[limits]", "nh4_mean_mg_L = 2.0", "nh4_max_mg_L = 5.0", "do_min_mg_L = 1.0", "",
              "[kinetics]", 'parameter_set = "asm1_20C"', "temperature_correction = true", "",
              "[operation]", 'objective = "energy"', ""]
    if clarifier_rng is not None:
        cod_mean = cod * float((shape * conc).mean() / shape.mean())  # flow-weighted
        design = clarifier_design(clarifier_rng, flow_m3_d=q_design * load, volume_m3=volume, ras_ratio=ras,
                                  srt_d=srt, cod_mg_L=cod_mean, temperature_C=temperature)
        lines[clarifier_line] = f"area_m2 = {design['area_m2']:.0f}"
        if design["ras_ratio"] != ras:  # the designer raised the return ratio (and the fixed waste flow with it)
            ras = design["ras_ratio"]
            lines[ras_line] = f"ratio = {ras:.2f}"
            if fixed_waste:
                lines[waste_line] = f"flow_m3_d = {volume * ras / (srt * (1.0 + ras)):.1f}"
    desc = dict(zones=n, anoxic=n_anoxic, swing=swing, step_feed=step_feed, recycle=recycle,
                clarifier="layered" if layered else "ideal", temperature_C=round(temperature, 1),
                elevation_m=round(elevation), load=round(load, 2), periods=n_periods,
                clarifier_design=design)
    return "\n".join(lines), desc


def _child_cpu_s() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _cpu_limit(seconds: float):
    """preexec_fn of a child whose CPU time is limited to ``seconds`` (SIGXCPU, then SIGKILL)."""
    def limit():
        resource.setrlimit(resource.RLIMIT_CPU, (int(seconds), int(seconds) + 5))
    return limit


def _backoff_tag(hold: dict | None) -> str:
    """" [back-off: zone-periods of each round, CPU s of each round; how the rounds ended]", or "" (no back-off)."""
    if not hold:
        return ""
    costs = hold.get("round_costs") or []
    ended = ("held" if hold.get("held_to_target") else "budget" if hold.get("budget_ended")
             else "stalled" if hold.get("stalled") else "failed" if hold.get("resolve_failed") else "done")
    zp = ",".join(str(c["zone_periods"]) for c in costs) or "-"
    cpu = ",".join(f"{c['resolve_cpu_s'] + c['resimulation_cpu_s']:.0f}" for c in costs) or "-"
    return f" [back-off {hold.get('rounds', len(costs))} rounds: {zp} zone-periods, {cpu} CPU s; {ended}]"


def run_plant(text: str, folder: Path, timeout_s: float, cpu: bool = False) -> tuple[str, int | None, float, str]:
    """(outcome, exit code, seconds, last message line) of `airtaper optimize` on one layout.

    The seconds are wall-clock; the CPU seconds of the run are appended to the message
    (on a shared machine they say more about the work than the wall clock).
    """
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "plant.toml"
    path.write_text(text)
    env = dict(os.environ, PYTHONPATH=str(ROOT / "src"))
    t0 = time.perf_counter()
    cpu0 = _child_cpu_s()
    try:
        p = subprocess.run([sys.executable, "-m", "airtaper.cli.main", "optimize", str(path), "--out",
                            str(folder / "out"), "--quiet", "--no-figure"], capture_output=True, text=True,
                           timeout=8.0 * timeout_s if cpu else timeout_s, env=env,
                           preexec_fn=_cpu_limit(timeout_s) if cpu else None)
    except subprocess.TimeoutExpired:
        return ("failed", None, time.perf_counter() - t0,
                f"[cpu {_child_cpu_s() - cpu0:.0f} s] wall time limit {(8.0 if cpu else 1.0) * timeout_s:.0f} s")
    if cpu and p.returncode in (-signal.SIGXCPU, -signal.SIGKILL):
        return ("failed", None, time.perf_counter() - t0,
                f"[cpu {_child_cpu_s() - cpu0:.0f} s] CPU time limit {timeout_s:.0f} s")
    seconds = time.perf_counter() - t0
    (folder / "stderr.txt").write_text(p.stderr)  # the whole of what the user saw (the table shows a line)
    err = [ln for ln in p.stderr.splitlines() if ln.strip()]
    last = next((ln for ln in reversed(err) if ln.startswith("error:")), "")
    status = None
    rounds = ""
    summary_path = folder / "out" / "summary.json"
    if summary_path.is_file():
        s = json.loads(summary_path.read_text())
        status = s.get("status")
        rounds = _backoff_tag(s.get("do_hold"))
        if not last:
            sources = sorted({f.get("source", "elastic") for f in s.get("infeasibility") or []})
            last = (f"{status}" + (f" ({', '.join(sources)})" if sources else "") + ": "
                    + "; ".join((s.get("messages") or [""])[:2]))
    if not last and err:
        last = err[-1]
    last = f"[cpu {_child_cpu_s() - cpu0:.0f} s]{rounds} {last}"
    if "Traceback" in p.stderr:
        return "failed", p.returncode, seconds, "traceback: " + last
    if status == "failed":  # a bounded ending of the optimiser (or a solver failure): no answer
        return "failed", p.returncode, seconds, last
    outcome = {0: "verified", 2: "diagnosed", 3: "diagnosed", 4: "unverified"}.get(p.returncode, "failed")
    return outcome, p.returncode, seconds, last


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=50, help="plants per seed (default 50)")
    ap.add_argument("--first", type=int, default=0, help="skip this many plants of each seed")
    ap.add_argument("--timeout", type=float, default=600.0, help="time limit per plant, s (default 600)")
    ap.add_argument("--plants", metavar="K,K,...", help="run only these plants (0-based, of each seed)")
    ap.add_argument("--clarifier", choices=("ideal", "layered"), help="run only the plants with this clarifier")
    ap.add_argument("--cpu", action="store_true", help="the time limit counts CPU seconds (a shared machine)")
    ap.add_argument("--keep", metavar="DIR", help="keep the layouts and outputs in DIR")
    ap.add_argument("--quick", action="store_true", help="3 plants, 300 s each (benchmarks/run_all.py --quick)")
    ap.add_argument("--list", action="store_true", help="print the drawn plants (and each layered clarifier's "
                    "design), run nothing")
    args = ap.parse_args(argv)
    if args.quick:
        args.n, args.timeout = 3, 300.0
    only = {int(k) for k in args.plants.split(",")} if args.plants else None
    if only:
        args.first, args.n = 0, max(only) + 1
    seeds = [SEED] + [int(s) for s in os.environ.get("AIRTAPER_ROBUSTNESS_SEEDS", "").split(",") if s.strip()]
    base = Path(args.keep) if args.keep else None if args.list else Path(tempfile.mkdtemp(prefix="airtaper-robustness-"))
    counts: dict[str, int] = {}
    total = 0
    if not args.list:
        print(f"{'plant':>12} {'zones':>5} {'clar':>7} {'load':>5} {'T_C':>5} {'exit':>4} {'s':>7} {'load':>5}  outcome: message")
    for seed in seeds:
        rng = np.random.default_rng(seed)
        for k in range(args.first + args.n):
            text, desc = random_plant(rng, k)
            if k < args.first or (only and k not in only) or (args.clarifier and desc["clarifier"] != args.clarifier):
                continue
            if args.list:
                print(f"{seed % 1000:>5}-{k:<6d} " + json.dumps(desc, default=float), flush=True)
                continue
            outcome, code, seconds, msg = run_plant(text, base / f"{seed}-{k:03d}", args.timeout, args.cpu)
            counts[outcome] = counts.get(outcome, 0) + 1
            total += 1
            load1 = os.getloadavg()[0]
            print(f"{seed % 1000:>5}-{k:<6d} {desc['zones']:>5} {desc['clarifier']:>7} {desc['load']:>5} "
                  f"{desc['temperature_C']:>5} {code if code is not None else '-':>4} {seconds:>7.1f} "
                  f"{load1:>5.1f}  {outcome}: {msg[:220]}", flush=True)
    if args.list:
        return 0
    good = counts.get("verified", 0) + counts.get("diagnosed", 0)
    print(f"\n{total} plants: " + ", ".join(f"{k} {v}" for k, v in sorted(counts.items()))
          + f"; verified or diagnosed {100.0 * good / max(total, 1):.0f} % (target >= 98 %, no failure)")
    print(f"layouts and outputs in {base}")
    return 0 if counts.get("failed", 0) == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
