"""Write the frozen single-axle JSON outputs of the contract test (tests/test_contract.py).

The outputs in ``expected/`` were written by this script from the code *before* the design records
gained the named-slot keys (``units``, ``gear_ratios``, ``shifts``, ``energy``, ``axle``), on a copy
of that day's demo catalogues and problems (``catalogs/``, ``problems/`` here), so that later
changes to the demo data in the top-level ``catalogs/`` cannot move them. Rerun it only when the
JSON contract changes on purpose (and say so in the commit message):

    python tests/data/contract/make_expected.py
"""

from __future__ import annotations

import contextlib
import io
import json
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

# (problem, command arguments after the problem path): the commands whose JSON is frozen
CASES = {
    "solve": ["solve"],
    "shortlist": ["shortlist", "--count", "3"],
    "shortlist_motor": ["shortlist", "--count", "3", "--distinct", "motor"],
    "frontier": ["frontier"],
}
PROBLEMS = ("parcel_van", "campus_shuttle", "farm_utility", "roadster")


def run_json(argv: list[str]) -> dict:
    """The JSON a CLI command prints."""
    from selector.cli.main import run

    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = run(argv)
    if code != 0:
        raise SystemExit(f"{argv}: exit code {code}")
    return json.loads(buf.getvalue())


def main() -> None:
    out = HERE / "expected"
    out.mkdir(exist_ok=True)
    for prob in PROBLEMS:
        path = str(HERE / "problems" / f"{prob}.toml")
        for name, cmd in CASES.items():
            if name == "frontier" and "accel_to_kmh" not in (HERE / "problems" / f"{prob}.toml").read_text():
                continue
            res = run_json([cmd[0], path, *cmd[1:], "--format", "json"])
            (out / f"{prob}.{name}.json").write_text(json.dumps(res, indent=2) + "\n")
            if name == "solve" and res["designs"]:
                d = res["designs"][0]
                sim = run_json(["simulate", path, "--motor", d["motor"], "--reducer", d["reducer"], "--tyre",
                                d["tyre"], "--format", "json"])
                (out / f"{prob}.simulate.json").write_text(json.dumps(sim, indent=2) + "\n")
            print(prob, name, file=sys.stderr)


if __name__ == "__main__":
    main()
