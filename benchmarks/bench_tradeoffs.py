"""Trade studies measured in one run: the exact frontier versus enumeration, sweeps serial versus parallel.

1. Frontier: on a seeded synthetic catalogue (invented data, `synthetic.py`) of about 1e6
   (motor, reducer, tyre) combinations, the epsilon-constraint frontier on the engine
   (`selector.frontier.trace`) against the brute-force route: evaluate every design exactly
   (staged, per motor slice), then filter the non-dominated set. Prints both times, their ratio
   and whether both found the same frontier.
2. Sweep: 32 grid points of a demo study solved serially (one process) and in parallel (local
   processes, one per CPU). Prints both times and the speed-up, and whether the rows agree.

    python benchmarks/bench_tradeoffs.py                       # both
    python benchmarks/bench_tradeoffs.py --only frontier --size 1e5
    python benchmarks/bench_tradeoffs.py --only sweep --points 16

Not a test: speed is read from this output, never asserted in tests.
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import os
import sys
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
SIZES = {"1e4": (22, 20, 23), "1e5": (46, 44, 50), "1e6": (100, 100, 100)}
"""Approximate combinations: (motors, reducers, tyres)."""


def _study(size: str, seed: int):
    sys.path.insert(0, HERE)
    from synthetic import synthetic_study

    from selector.api import Study
    from selector.engine.parts import PartTables

    problem, catalogs = synthetic_study(*SIZES[size], seed=seed, objective="cost")
    parts = PartTables.build(problem, catalogs)
    allowed = {k: np.arange(n) for k, n in zip(("motors", "reducers", "tyres"), parts.sizes)}
    return Study(parts, allowed), catalogs


def frontier_by_enumeration(parts) -> list[tuple[float, float]]:
    """(cost, time) of the non-dominated designs: evaluate all designs, then a Pareto filter."""
    from selector.engine.evaluate import screen, slice_indices

    p = parts.problem
    parts = dataclasses.replace(parts, problem=dataclasses.replace(
        p, requirements=dataclasses.replace(p.requirements, accel_time_s=None)))
    costs, times = [], []
    for i in range(parts.sizes[0]):
        mi, rj, tk = slice_indices(parts, i)
        ok, t = screen(parts, mi, rj, tk, "accel_time", need_accel=True)
        costs.append(parts.cost(mi, rj, tk)[ok])
        times.append(t[ok])
    c, t = np.concatenate(costs), np.concatenate(times)
    order = np.lexsort((t, c))
    front, best = [], math.inf
    for q in order:  # increasing cost, then time: keep each strict improvement in time
        if t[q] < best * (1 - 2e-9):
            front.append((float(c[q]), float(t[q])))
            best = t[q]
    return front


def bench_frontier(size: str, seed: int) -> None:
    from selector.studies.frontier import trace

    study, _ = _study(size, seed)
    n = int(np.prod(study.parts.sizes))
    print(f"frontier, synthetic catalogue {study.parts.sizes} = {n:,} combinations (seed {seed})")
    t0 = time.perf_counter()
    pts, stats = trace(study, "cost")
    t_engine = time.perf_counter() - t0
    t0 = time.perf_counter()
    ref = frontier_by_enumeration(study.parts)
    t_enum = time.perf_counter() - t0
    same = len(ref) == len(pts) and all(math.isclose(a, c, rel_tol=2e-9) and math.isclose(b, d, rel_tol=2e-9)
                                        for (a, b, *_), (c, d) in zip(pts, ref))
    print(f"  epsilon-constraint on the engine: {t_engine:8.2f} s  ({len(pts)} points, {stats['searches']} searches, "
          f"{t_engine / max(stats['searches'], 1):.2f} s per search)")
    print(f"  enumerate all + Pareto filter:    {t_enum:8.2f} s  ({len(ref)} points)")
    print(f"  ratio engine / enumeration:       {t_engine / t_enum:8.2f}   same frontier: {same}")


def bench_sweep(points: int, workers: int | None) -> None:
    from selector.studies.sweep import sweep

    problem = os.path.join(ROOT, "problems", "parcel_van.toml")
    vary = [f"vehicle.mass_kg=2200:2700:{points}"]
    workers = workers or os.cpu_count() or 1
    print(f"sweep, {points} points of problems/parcel_van.toml ({vary[0]})")
    t0 = time.perf_counter()
    serial = sweep(problem, vary, workers=1)
    t_serial = time.perf_counter() - t0
    t0 = time.perf_counter()
    par = sweep(problem, vary, workers=workers)
    t_par = time.perf_counter() - t0
    print(f"  serial (1 process):              {t_serial:8.2f} s  ({t_serial / points:.2f} s per point)")
    print(f"  parallel ({par['runner']['mode']}, {par['runner']['workers']} workers):  {t_par:8.2f} s")
    print(f"  speed-up serial / parallel:      {t_serial / t_par:8.2f}   identical rows: {serial['rows'] == par['rows']}"
          f"   (CPUs: {os.cpu_count()})")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", choices=("frontier", "sweep"))
    ap.add_argument("--size", choices=tuple(SIZES), default="1e6", help="frontier catalogue size (default 1e6)")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--points", type=int, default=32, help="sweep points (default 32)")
    ap.add_argument("--workers", type=int, help="parallel workers (default: CPU count)")
    args = ap.parse_args(argv)
    sys.path.insert(0, ROOT)
    if args.only in (None, "frontier"):
        bench_frontier(args.size, args.seed)
    if args.only in (None, "sweep"):
        bench_sweep(args.points, args.workers)


if __name__ == "__main__":
    main()
