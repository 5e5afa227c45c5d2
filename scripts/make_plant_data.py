"""Make the synthetic example plant-data file layouts/demo_plant_data.csv (SYNTHETIC, not measured).

The demo plant (layouts/demo.toml, invented) run by the independent simulator over three
days of its diurnal influent (day flows x 1.00, 0.94, 1.07) with these true values:

    alpha x F: Z2 0.30, Z3 0.36, Z4 0.40, Z5 0.45, Z6 0.50 (the layout says 0.36 ... 0.464)
    mu_A: 0.65 1/d at 20 degC (the layout's parameter set says 0.80)

logged every 15 minutes with Gaussian noise, seed 17: DO sd 0.1 mg/L, NH4-N sd 0.2 mg/L,
airflow sd 1 % of the value. Airflows: the uniform-DO-control airflow (2 mg/L) moved by a
random factor (sd 12 %) every hour.

    PYTHONPATH=src python scripts/make_plant_data.py [--days 3] [--out layouts/demo_plant_data.csv]
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from airtaper.calibrate.synthetic import synthetic_plant_data  # noqa: E402
from airtaper.layout import load_layout  # noqa: E402
from airtaper.report.atomic import write_text_atomic  # noqa: E402

TRUE_ALPHA_F = {"Z2": 0.30, "Z3": 0.36, "Z4": 0.40, "Z5": 0.45, "Z6": 0.50}
TRUE_MU_A = 0.65
SEED = 17


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--days", type=int, default=3)
    ap.add_argument("--out", default=str(ROOT / "layouts" / "demo_plant_data.csv"))
    args = ap.parse_args(argv)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        layout = load_layout(ROOT / "layouts" / "demo.toml")
    text, truth, sim = synthetic_plant_data(layout, days=args.days, alpha_F=TRUE_ALPHA_F, mu_A=TRUE_MU_A,
                                            seed=SEED, nh4_zones=("Z6",))
    write_text_atomic(args.out, text)
    print(f"wrote {args.out}: {args.days} days, simulator {sim.days} cycles, converged {sim.converged}, "
          f"{sim.seconds:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
