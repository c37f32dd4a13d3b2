"""Solve time of every demo study, with and without the multi-speed gearboxes of the demo catalogue.

For each problem in problems/ the exact search (what `selector solve` runs) is timed twice, each in
its own subprocess: with the whole reducer catalogue, and with the multi-speed gearboxes left out
(only the single-speed reducers allowed). Printed as a table with the ratio of the two times
(wall clock, and CPU time of the searching process, which a loaded machine disturbs less; the
multi-speed parts should cost at most 2x) and whether the optimum uses a multi-speed part.
The demo data are invented and illustrative.

Usage
-----
    python benchmarks/bench_demo.py [--repeat N] [--time-limit S] [problem.toml ...]

Run it on an otherwise idle machine; times on a shared machine vary by +-30 % and more.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

CHILD = r"""
import json, sys, time, warnings
import numpy as np
warnings.simplefilter("ignore")
from selector.api import open_study
from selector.engine.search import search
path, mode, limit = sys.argv[1], sys.argv[2], float(sys.argv[3])
study = open_study(path)
parts = study.parts
allowed = dict(study.allowed)
if mode == "single":
    single = np.flatnonzero(parts.reducers.n_gears == 1)
    allowed["reducers"] = np.intersect1d(allowed.get("reducers", single), single)
t0, c0 = time.perf_counter(), time.process_time()
res = search(parts, allowed=allowed, time_limit_s=limit)
elapsed, cpu = time.perf_counter() - t0, time.process_time() - c0
multi = None
if res.designs:
    multi = any(int(parts.reducers.n_gears[r]) > 1 for _, _, r in res.designs[0].units)
print(json.dumps({"status": res.status, "solve_s": elapsed, "cpu_s": cpu,
                  "value": res.designs[0].value if res.designs else None,
                  "multi": multi, "combinations": int(parts.combinations)}))
"""


def time_one(path: Path, mode: str, limit: float) -> dict:
    """Search time of one study in a fresh interpreter: {status, solve_s, cpu_s, value, multi, combinations}."""
    out = subprocess.run([sys.executable, "-c", CHILD, str(path), mode, str(limit)], capture_output=True,
                         text=True, check=True, cwd=ROOT)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv: list[str] | None = None) -> int:
    """Print the table; return an exit code."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("problems", nargs="*", type=Path, help="problem files (default: problems/*.toml)")
    ap.add_argument("--repeat", type=int, default=1, help="runs per case; the fastest is reported")
    ap.add_argument("--time-limit", type=float, default=600.0, help="search time limit per run [s]")
    args = ap.parse_args(argv)
    paths = args.problems or sorted((ROOT / "problems").glob("*.toml"))
    print("| study | combinations | single-speed only | with multi-speed | ratio | CPU ratio | optimum multi-speed "
          "| same value |")
    print("|---|---|---|---|---|---|---|---|")
    for path in paths:
        res = {}
        for mode in ("single", "all"):
            runs = [time_one(path, mode, args.time_limit) for _ in range(args.repeat)]
            res[mode] = min(runs, key=lambda r: r["solve_s"])
        s, a = res["single"], res["all"]
        same = (s["value"] == a["value"]) if s["value"] is not None and a["value"] is not None else None
        print(f"| {path.stem} | {a['combinations']:.2e} | {s['solve_s']:.2f} s ({s['status']}) | "
              f"{a['solve_s']:.2f} s ({a['status']}) | {a['solve_s'] / max(s['solve_s'], 1e-9):.2f} | "
              f"{a['cpu_s'] / max(s['cpu_s'], 1e-9):.2f} | "
              f"{a['multi']} | {same} |", flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
