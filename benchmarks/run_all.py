"""Run every benchmark in this folder, one after another, and echo their output.

Usage: python benchmarks/run_all.py [--quick]

Each benchmark times two ways of doing the same work in the same run and prints
the ratio, so the numbers compare fairly on a shared, noisy machine. Speed targets
live here, never in the test suite.
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="pass --quick to every benchmark")
    args = ap.parse_args()
    failed = []
    for script in sorted(HERE.glob("bench_*.py")):
        cmd = [sys.executable, str(script)] + (["--quick"] if args.quick else [])
        print(f"=== {script.name}", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call(cmd)
        print(f"=== {script.name}: exit {rc}, {time.perf_counter() - t0:.1f} s\n", flush=True)
        if rc:
            failed.append(script.name)
    if failed:
        print("failed: " + ", ".join(failed))
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
