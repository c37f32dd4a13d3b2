"""Install every dependency floor of pyproject.toml together and run the test suite on them.

Reads ``[project].dependencies`` and the ``test`` extra, turns each lower bound (``>=X`` or
``~=X``) into ``==X``, installs those versions (wheels only) into a scratch virtual environment,
installs selector itself without dependencies, then runs the whole test suite and
``selector solve problems/parcel_van.toml`` there. A failure means a floor is too low: raise it.

    python tools/check_floors.py                         # scratch venv in /tmp/selector-floors
    python tools/check_floors.py --venv /tmp/f -- -x -k sweep   # arguments after -- go to pytest

Takes a few minutes (downloads and the whole suite); not part of CI.
"""

from __future__ import annotations

import argparse
import re
import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def floors(pyproject: Path) -> list[str]:
    """``name[extras]==floor`` for every requirement with a lower bound (runtime and ``test``)."""
    project = tomllib.loads(pyproject.read_text(encoding="utf-8"))["project"]
    pins = []
    for req in project["dependencies"] + project["optional-dependencies"]["test"]:
        m = re.fullmatch(r"\s*([A-Za-z0-9_.\-]+(?:\[[^\]]*\])?)\s*(?:>=|~=)\s*([0-9][0-9A-Za-z.]*)\s*(?:,.*)?", req)
        if not m:
            raise SystemExit(f"{pyproject}: no lower bound to test in requirement {req!r}")
        pins.append(f"{m.group(1)}=={m.group(2)}")
    return pins


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--venv", default="/tmp/selector-floors", help="scratch virtual environment (recreated)")
    ap.add_argument("pytest_args", nargs="*", help="extra pytest arguments (after --)")
    args = ap.parse_args(argv)
    venv = Path(args.venv)
    py = venv / "bin" / "python"
    pins = floors(ROOT / "pyproject.toml")
    print("floors:", " ".join(pins), flush=True)

    def run(*cmd: str) -> None:
        print("+", " ".join(cmd), flush=True)
        subprocess.run(cmd, cwd=ROOT, check=True)

    run(sys.executable, "-m", "venv", "--clear", str(venv))
    run(str(py), "-m", "pip", "install", "--quiet", "--only-binary", ":all:", *pins)
    run(str(py), "-m", "pip", "install", "--quiet", "--no-deps", "-e", ".")
    run(str(py), "-m", "pip", "list", "--format", "freeze")
    run(str(py), "-m", "selector", "solve", "problems/parcel_van.toml")
    run(str(py), "-m", "pytest", "-p", "no:cacheprovider", *args.pytest_args)
    print("all floors pass", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
