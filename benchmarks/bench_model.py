"""Model build and initialisation time of the cyclic train model, and how it scales.

Prints, side by side in one run: for the 6-zone x 24-period demo, the time to build
the cyclic model, to initialise it (mean-load steady state, then the step march), and
the structural check; then the same for other numbers of aerated zones and periods,
with each time per 1000 variables and as a ratio to the demo's. No solver is run.

    python benchmarks/bench_model.py [--quick] [--scheme radau2|radau3|euler|bdf2]
"""

from __future__ import annotations

import argparse
import dataclasses
import pathlib
import sys
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.layout.parse import load_layout  # noqa: E402
from airtaper.layout.types import DiffuserGrid, Horizon, Recycle  # noqa: E402
from airtaper.model import build_cyclic_model, check_square, initialise_cyclic  # noqa: E402
from airtaper.model.initial_point import march_cyclic  # noqa: E402


def _resampled(values, n):
    k = len(values) // n
    return tuple(sum(values[i * k:(i + 1) * k]) / k for i in range(n))


def variant(layout, n_aerated: int, n_periods: int):
    """The demo with its aerated volume split into ``n_aerated`` equal zones and ``n_periods`` periods."""
    first, aerated = layout.zones[0], layout.zones[1:]
    total_v = sum(z.volume_m3 for z in aerated)
    total_d = sum(z.grid.count for z in aerated)
    proto = aerated[0]
    zones = [first] + [dataclasses.replace(
        proto, id=f"A{i + 1}", volume_m3=total_v / n_aerated, area_m2=total_v / n_aerated / proto.depth_m,
        valve_capacity_Sm3_h=None,
        grid=DiffuserGrid(proto.grid.type_id, max(total_d // n_aerated, 1), proto.grid.submergence_m))
        for i in range(n_aerated)]
    out = dataclasses.replace(layout, zones=tuple(zones))
    rec = layout.recycles[0]
    out = dataclasses.replace(out, recycles=(Recycle(rec.id, zones[-1].id, rec.to_zone, rec.flow_m3_d, rec.ratio),))
    if n_periods != layout.horizon.n_periods:
        inf = layout.influent
        fields = {f: _resampled(getattr(inf, f), n_periods) for f in (
            "flow_m3_d", "cod_total_mg_L", "cod_soluble_mg_L", "tkn_mg_L", "nh4_mg_L", "tss_mg_L", "alkalinity_mol_m3")}
        out = dataclasses.replace(
            out, influent=dataclasses.replace(inf, **fields),
            plant=dataclasses.replace(layout.plant, temperature_C=_resampled(layout.plant.temperature_C, n_periods)),
            recycles=tuple(dataclasses.replace(r, flow_m3_d=_resampled(r.flow_m3_d, n_periods)) for r in out.recycles),
            return_sludge=dataclasses.replace(layout.return_sludge,
                                              flow_m3_d=_resampled(layout.return_sludge.flow_m3_d, n_periods)),
            horizon=Horizon(n_periods, 24.0 / n_periods, layout.horizon.steps_per_period))
    return out


def airflow_for(layout):
    """A plausible constant airflow per grid zone: 0.9 Sm3/h per m3 of zone (invented)."""
    return {z.id: 0.9 * z.volume_m3 for z in layout.zones if z.grid is not None}


def measure(layout, scheme: str, structure: bool):
    t0 = time.perf_counter()
    m = build_cyclic_model(layout, airflow=airflow_for(layout), scheme=scheme)
    t1 = time.perf_counter()
    initialise_cyclic(m)
    t2 = time.perf_counter()
    march_cyclic(m)
    t3 = time.perf_counter()
    n_var = sum(1 for v in m.component_data_objects(ctype=__import__("pyomo.environ").environ.Var) if not v.fixed)
    t_struct = float("nan")
    if structure:
        check_square(m)
        t_struct = time.perf_counter() - t3
    return dict(n_var=n_var, build=t1 - t0, steady=t2 - t1, march=t3 - t2, structure=t_struct)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer variants, no structural check")
    ap.add_argument("--scheme", default="radau2")
    args = ap.parse_args(argv)
    demo = load_layout(str(ROOT / "layouts" / "demo.toml"))
    cases = [("demo 6 zones x 24 periods", demo)]
    variants = [(3, 24), (10, 24), (5, 12)] if args.quick else [(3, 24), (10, 24), (20, 24), (5, 6), (5, 12), (5, 48)]
    for nz, npd in variants:
        if npd == 48 and len(demo.influent.flow_m3_d) < 48:
            continue
        cases.append((f"{nz + 1} zones x {npd} periods", variant(demo, nz, npd)))
    rows = []
    for name, lay in cases:
        rows.append((name, measure(lay, args.scheme, structure=not args.quick)))
    base = rows[0][1]
    print(f"cyclic model, scheme {args.scheme}; times in s, per 1000 free variables in ms, ratio = per-variable time / demo's")
    print(f"{'case':28s} {'vars':>7s} {'build':>7s} {'ms/kv':>6s} {'ratio':>6s} {'steady':>7s} {'march':>7s} "
          f"{'ms/kv':>6s} {'ratio':>6s} {'struct':>7s}")
    for name, r in rows:
        kv = r["n_var"] / 1000.0
        b_kv, m_kv = 1e3 * r["build"] / kv, 1e3 * r["march"] / kv
        b0, m0 = 1e3 * base["build"] / (base["n_var"] / 1e3), 1e3 * base["march"] / (base["n_var"] / 1e3)
        print(f"{name:28s} {r['n_var']:7d} {r['build']:7.2f} {b_kv:6.1f} {b_kv / b0:6.2f} {r['steady']:7.2f} "
              f"{r['march']:7.2f} {m_kv:6.1f} {m_kv / m0:6.2f} {r['structure']:7.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
