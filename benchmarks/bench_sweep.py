"""A sweep measured serial versus parallel: the same grid solved in one process and in local processes.

A grid of ``--points`` values of ``vehicle.mass_kg`` on the parcel-van demo study (invented data)
is solved serially (one process) and in parallel (local processes, one per CPU by default). Prints
both times (after an untimed one-point warm-up), the speed-up and whether the rows agree.

    python benchmarks/bench_sweep.py                 # 32 points, one worker per CPU
    python benchmarks/bench_sweep.py --points 8 --workers 2

The frontier of cost against acceleration time is measured by ``bench_engine.py --only frontier``
(the engine against a frontier built on the baseline search). Not a test: speed is read from this
output, never asserted in tests.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)


def bench_sweep(points: int, workers: int | None) -> None:
    from selector.studies.sweep import sweep

    problem = os.path.join(ROOT, "problems", "parcel_van.toml")
    vary = [f"vehicle.mass_kg=2200:2700:{points}"]
    workers = workers or os.cpu_count() or 1
    print(f"sweep, {points} points of problems/parcel_van.toml ({vary[0]})")
    sweep(problem, ["vehicle.mass_kg=2200:2200:1"], workers=1)  # untimed warm-up: imports, solver start
    t0 = time.perf_counter()
    serial = sweep(problem, vary, workers=1)
    t_serial = time.perf_counter() - t0
    t0 = time.perf_counter()
    par = sweep(problem, vary, workers=workers)
    t_par = time.perf_counter() - t0
    same = serial["rows"] == par["rows"]
    print(f"  serial (1 process):              {t_serial:8.2f} s  ({t_serial / points:.2f} s per point)")
    print(f"  parallel ({par['runner']['mode']}, {par['runner']['workers']} workers):  {t_par:8.2f} s")
    print(f"  speed-up serial / parallel:      {t_serial / t_par:8.2f}   identical rows: {same}"
          f"   (CPUs: {os.cpu_count()})")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=32, help="sweep points (default 32)")
    ap.add_argument("--workers", type=int, help="parallel workers (default: CPU count)")
    args = ap.parse_args(argv)
    sys.path.insert(0, ROOT)
    bench_sweep(args.points, args.workers)


if __name__ == "__main__":
    main()
