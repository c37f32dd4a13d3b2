"""Start-up: the command line imports heavy libraries only for the commands that use them.

Each case runs in a fresh interpreter (a subprocess), so modules imported by other tests do not
count. Which modules are loaded is checked, never how long it takes (speed is measured by
`benchmarks/bench_startup.py`). The expectations are project conventions.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
VAN = str(ROOT / "problems" / "parcel_van.toml")

SOLVER = {"pyomo", "highspy"}
OPTIONAL = {"matplotlib", "dask", "distributed", "openpyxl", "tqdm"}
"""Plotting, Dask, spreadsheets, progress bars: needed only by the options that use them."""
RECHECK = {"scipy"}
"""The independent re-check of reported designs (solve_ivp, brentq): only commands that report a design."""
TABLES = {"numpy", "pandas"}

PROBE = """
import contextlib, io, json, sys
from selector.cli import run
with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
    try:
        code = run(sys.argv[1:])
    except SystemExit as exc:  # argparse's --help
        code = exc.code
print(json.dumps({"code": code, "modules": sorted({m.split(".")[0] for m in sys.modules})}))
"""


def loaded(argv: list[str]) -> tuple[int, set[str]]:
    """Exit code of ``selector ARGV`` and the top-level packages imported by then."""
    proc = subprocess.run([sys.executable, "-c", PROBE, *argv], cwd=ROOT, capture_output=True, text=True,
                          check=True)
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    return out["code"], set(out["modules"])


@pytest.mark.parametrize("argv", [["--help"], ["explain", "--help"], ["sweep", "--help"], []],
                         ids=["help", "explain-help", "sweep-help", "no-command"])
def test_help_imports_no_heavy_library(argv):
    code, modules = loaded(argv)
    assert code in (0, 2)
    heavy = SOLVER | OPTIONAL | TABLES | RECHECK
    assert not modules & heavy, sorted(modules & heavy)


@pytest.mark.parametrize("argv", [
    ["check", VAN],
    ["simulate", VAN, "--motor", "BI-M087", "--reducer", "FG-S20-121", "--tyre", "AW-T1606"],
], ids=["check", "simulate"])
def test_commands_without_a_search_do_not_import_the_solver(argv):
    code, modules = loaded(argv)
    assert code == 0
    assert TABLES <= modules  # the catalogues were read: the probe saw the work being done
    assert not modules & (SOLVER | OPTIONAL), sorted(modules & (SOLVER | OPTIONAL))
    # a simulated design is re-checked (scipy); `check` reports no design, so it needs no re-check
    assert (RECHECK <= modules) == (argv[0] == "simulate"), sorted(modules & RECHECK)


def test_solve_imports_no_optional_library():
    # the MILP stage (Pyomo) is imported only when a search needs it; plotting, Dask and the
    # spreadsheet library never on a plain solve
    code, modules = loaded(["solve", VAN])
    assert code == 0
    assert TABLES <= modules
    assert not modules & OPTIONAL, sorted(modules & OPTIONAL)
