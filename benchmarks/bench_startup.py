"""Start-up time of the command line: imports and the wall time of short commands.

Each number is the median of several runs, each in a fresh subprocess (nothing cached in this
process), so it is what a user waits for before any work starts:

1. ``python -X importtime -c "import selector.cli"``: the cumulative import time of the CLI
   package, and the heavy third-party packages it pulls in (none should be needed to print help).
2. Which heavy packages (solver stack, plotting, Dask, spreadsheets, progress bars, scipy, pandas,
   numpy) each command imports, and their cumulative import time (``-X importtime`` of the command).
3. Wall time of ``python -c pass`` (the interpreter alone), ``selector --help``,
   ``selector check PROBLEM`` and ``selector solve PROBLEM``.

    python benchmarks/bench_startup.py                 # 7 runs each, problems/parcel_van.toml
    python benchmarks/bench_startup.py --runs 11 --problem problems/roadster.toml

Not a test: speed is read from this output, never asserted in tests.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
HEAVY = ("pyomo", "highspy", "matplotlib", "dask", "distributed", "openpyxl", "tqdm", "scipy", "pandas", "numpy")
"""Third-party packages whose import cost is worth tracking (top-level names)."""


def _selector_command() -> list[str]:
    """The installed console script beside this interpreter, else ``python -m selector``."""
    script = Path(sys.executable).with_name("selector")
    return [str(script)] if script.exists() else [sys.executable, "-m", "selector"]


def _importtime(argv: list[str]) -> tuple[dict[str, int], dict[str, int]]:
    """Import times [us] reported by ``python -X importtime ARGV``, by top-level package name.

    Returns (a) the cumulative time of the imports at nesting depth 0 (the interpreter's own
    start-up imports, those the command triggers, lazy imports inside functions) and (b) for each
    package, the cumulative time of its outermost imports (a module of package P imported from
    outside P), so that numpy imported by pandas counts for numpy, not twice for pandas.
    """
    proc = subprocess.run([sys.executable, "-X", "importtime", *argv], cwd=ROOT, capture_output=True,
                          text=True, check=False)
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(argv)} failed (exit {proc.returncode}):\n{proc.stderr[-2000:]}")
    entries = []  # (depth, package, cumulative us), children listed before their parent
    for line in proc.stderr.splitlines():
        if not line.startswith("import time:") or line.count("|") != 2:
            continue
        _, cumulative, name = line.split("|")
        try:
            us = int(cumulative)
        except ValueError:  # the header line
            continue
        entries.append(((len(name) - len(name.lstrip(" ")) - 1) // 2, name.strip().split(".")[0], us))
    top: dict[str, int] = {}
    outermost: dict[str, int] = {}
    ancestors: list[str] = []  # package of the enclosing import at each depth
    for depth, package, us in reversed(entries):  # parents first
        del ancestors[depth:]
        if depth == 0:
            top[package] = top.get(package, 0) + us
        if package not in ancestors:
            outermost[package] = outermost.get(package, 0) + us
        ancestors.append(package)
    return top, outermost


def _median_importtime(argv: list[str], runs: int) -> tuple[float, float, dict[str, float]]:
    """Medians [s]: all imports, imports of selector's modules (with what they pull in), each heavy package."""
    totals, ours, heavy = [], [], {name: [] for name in HEAVY}
    for _ in range(runs):
        top, outermost = _importtime(argv)
        totals.append(sum(top.values()) / 1e6)
        ours.append(top.get("selector", 0) / 1e6)
        for name in HEAVY:
            if name in outermost:
                heavy[name].append(outermost[name] / 1e6)
    return (statistics.median(totals), statistics.median(ours),
            {k: statistics.median(v) for k, v in heavy.items() if v})


def _wall(argv: list[str], runs: int) -> float:
    """Median wall time [s] of running ARGV (output discarded; a non-zero exit stops the benchmark)."""
    times = []
    for _ in range(runs):
        t0 = time.perf_counter()
        proc = subprocess.run(argv, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, check=False)
        times.append(time.perf_counter() - t0)
        if proc.returncode != 0:
            raise SystemExit(f"{' '.join(argv)} failed (exit {proc.returncode}):\n{proc.stderr.decode()[-2000:]}")
    return statistics.median(times)


def _heavy_text(heavy: dict[str, float]) -> str:
    return ", ".join(f"{k} {v:.3f}" for k, v in sorted(heavy.items(), key=lambda kv: -kv[1])) or "none"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=7, help="runs per measurement (the median is printed)")
    ap.add_argument("--problem", default="problems/parcel_van.toml", help="problem file for check and solve")
    args = ap.parse_args(argv)
    sel = _selector_command()
    print(f"python {sys.version.split()[0]} ({sys.executable}); selector command: {' '.join(sel)}; "
          f"{args.runs} runs each, medians; cores: {os.cpu_count()}\n")

    print("imports (python -X importtime), cumulative [s]: all top-level imports; those of selector's modules;\n"
          "each heavy third-party package that was imported")
    commands = {
        'import selector.cli': ["-c", "import selector.cli"],
        "selector --help": ["-m", "selector", "--help"],
        f"selector check {args.problem}": ["-m", "selector", "check", args.problem],
        f"selector solve {args.problem}": ["-m", "selector", "solve", args.problem],
    }
    for label, cmd in commands.items():
        total, ours, heavy = _median_importtime(cmd, args.runs)
        print(f"  {label:<40} all {total:6.3f}  selector.* {ours:6.3f}  heavy packages: {_heavy_text(heavy)}")

    print("\nwall time [s]")
    walls = {
        "python -c pass": [sys.executable, "-c", "pass"],
        "selector --help": [*sel, "--help"],
        f"selector check {args.problem}": [*sel, "check", args.problem],
        f"selector solve {args.problem}": [*sel, "solve", args.problem],
    }
    for label, cmd in walls.items():
        print(f"  {label:<40} {_wall(cmd, args.runs):6.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
