"""Engine (MILP relax/verify/cut) versus exhaustive enumeration, measured in one run.

For seeded synthetic catalogues (invented data, `synthetic.py`) of about 1e4 .. 1e8
(motor, reducer, tyre) combinations, prints the engine's model-build, solve and verify times,
the exhaustive evaluator's time, each one's peak resident memory, their ratio, and whether both
found the same optimum. Each measurement runs in a fresh subprocess so peak memory is its own.

    python benchmarks/bench_engine.py                 # all sizes (1e8 enumeration takes minutes)
    python benchmarks/bench_engine.py --max 1e7       # stop at 1e7
    python benchmarks/bench_engine.py --objective mass

Not a test: speed targets are read from this table, never asserted in tests.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
SIZES = {  # approx combinations: (motors, reducers, tyres)
    "1e4": (22, 20, 23),
    "1e5": (46, 44, 50),
    "1e6": (100, 100, 100),
    "1e7": (215, 100, 465),
    "1e8": (1000, 100, 1000),
}


def _child(kind: str, sizes, objective: str, seed: int) -> dict:
    import resource

    sys.path.insert(0, HERE)
    from synthetic import synthetic_study

    from selector.engine.evaluate import enumerate_designs
    from selector.engine.parts import PartTables
    from selector.engine.search import search

    problem, catalogs = synthetic_study(*sizes, seed=seed, objective=objective)
    parts = PartTables.build(problem, catalogs)
    t0 = time.perf_counter()
    if kind == "engine":
        res = search(parts)
        out = {"best": res.designs[:1], "status": res.status, "iterations": res.iterations, **res.timings}
    else:
        best = enumerate_designs(parts, objective, count=1)
        out = {"best": best, "status": "optimal" if best else "infeasible"}
    out["total_s"] = time.perf_counter() - t0
    out["peak_rss_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    return out


def _run(kind, sizes, objective, seed):
    cmd = [sys.executable, os.path.abspath(__file__), "--child", kind, "--sizes", ",".join(map(str, sizes)),
           "--objective", objective, "--seed", str(seed)]
    env = dict(os.environ, OMP_NUM_THREADS="1")
    proc = subprocess.run(cmd, capture_output=True, text=True, env=env, check=True)
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--max", default="1e8", help="largest size to run (1e4 .. 1e8)")
    ap.add_argument("--objective", default="cost", choices=("cost", "mass", "accel_time"))
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--skip-enumeration-above", default="1e8",
                    help="do not enumerate above this size (enumeration at 1e8 takes minutes)")
    ap.add_argument("--child")
    ap.add_argument("--sizes")
    args = ap.parse_args(argv)
    if args.child:
        sizes = tuple(int(s) for s in args.sizes.split(","))
        print(json.dumps(_child(args.child, sizes, args.objective, args.seed)))
        return 0
    limit = float(args.max)
    skip_enum = float(args.skip_enumeration_above)
    print(f"objective: {args.objective}; seed {args.seed}; machine: {os.cpu_count()} cores; "
          "times in s, memory = peak RSS of the measuring process in MiB")
    head = (f"{'size':>5} {'combos':>11} {'build':>7} {'solve':>7} {'verify':>7} {'engine':>7} {'it':>3} "
            f"{'eng MiB':>8} {'enum':>8} {'enum MiB':>8} {'enum/eng':>8} same")
    print(head)
    print("-" * len(head))
    for label, sizes in SIZES.items():
        if float(label) > limit:
            break
        combos = sizes[0] * sizes[1] * sizes[2]
        eng = _run("engine", sizes, args.objective, args.seed)
        if float(label) <= skip_enum:
            enum = _run("enumerate", sizes, args.objective, args.seed)
            same = eng["best"] == enum["best"]
            enum_t, enum_m = f"{enum['total_s']:8.2f}", f"{enum['peak_rss_mib']:8.0f}"
            ratio = f"{enum['total_s'] / eng['total_s']:8.2f}"
        else:
            enum_t = enum_m = ratio = f"{'-':>8}"
            same = "-"
        print(f"{label:>5} {combos:>11,} {eng['build_s']:7.2f} {eng['solve_s']:7.2f} {eng['verify_s']:7.2f} "
              f"{eng['total_s']:7.2f} {eng['iterations']:3d} {eng['peak_rss_mib']:8.0f} {enum_t} {enum_m} {ratio} "
              f"{same}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
