"""The single-axle JSON contract: solve, simulate, shortlist and frontier give byte-identical JSON to the
outputs frozen before the design records gained named slots, apart from the new keys.

The frozen outputs (``tests/data/contract/expected``) were written by
``tests/data/contract/make_expected.py`` on a copy of that day's demo catalogues and problems
(``tests/data/contract/catalogs``, ``problems``), so the demo data in ``catalogs/`` may change
without moving them. Volatile values (timings, absolute paths, version) are compared by type only.
"""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import pytest

from selector.cli.main import run

HERE = Path(__file__).resolve().parent / "data" / "contract"
EXPECTED = sorted((HERE / "expected").glob("*.json"))

NEW_DESIGN_KEYS = {"units", "gear_ratios", "shifts", "energy"}
"""Keys the named-slot records added to every design record."""
NEW_CHECK_KEYS = {"axle"}
"""Keys added to every part-rating check row."""
NEW_TOP_KEYS = {"layout", "gear_over_radius_1_m_per_axle"}
VOLATILE = {"selector_version", "problem_file", "build_s", "solve_s", "verify_s", "elapsed_s", "bound_s",
            "path", "evaluated", "iterations"}
"""Values that depend on the machine, the checkout or the version, or on how the engine searched (its
iteration count), not on the contract."""


def _command(name: str) -> list[str]:
    prob, kind = name.split(".")[:2]
    path = str(HERE / "problems" / f"{prob}.toml")
    if kind == "solve":
        return ["solve", path]
    if kind == "shortlist":
        return ["shortlist", path, "--count", "3"]
    if kind == "shortlist_motor":
        return ["shortlist", path, "--count", "3", "--distinct", "motor"]
    if kind == "frontier":
        return ["frontier", path]
    raise AssertionError(name)


def _json(argv: list[str]) -> dict:
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = run([*argv, "--format", "json"])
    assert code == 0, argv
    return json.loads(buf.getvalue())


def strip_new(obj, drop_new: bool = True):
    """The object without the keys added by the named-slot records, volatile values replaced by their type."""
    if isinstance(obj, dict):
        out = {}
        for k, v in obj.items():
            if k in VOLATILE:
                out[k] = type(v).__name__
                continue
            if drop_new and k in NEW_DESIGN_KEYS | NEW_CHECK_KEYS | NEW_TOP_KEYS:
                continue
            out[k] = strip_new(v, drop_new)
        return out
    if isinstance(obj, list):
        return [strip_new(v, drop_new) for v in obj]
    return obj


def _simulate_argv(prob: str, solved: dict) -> list[str]:
    d = solved["designs"][0]
    return ["simulate", str(HERE / "problems" / f"{prob}.toml"), "--motor", d["motor"], "--reducer", d["reducer"],
            "--tyre", d["tyre"]]


@pytest.mark.parametrize("path", EXPECTED, ids=[p.stem for p in EXPECTED])
def test_single_axle_json_unchanged(path):
    expected = json.loads(path.read_text())
    prob, kind = path.stem.split(".")
    if kind == "simulate":
        solved = json.loads((HERE / "expected" / f"{prob}.solve.json").read_text())
        argv = _simulate_argv(prob, solved)
    else:
        argv = _command(path.stem)
    got = _json(argv)
    if kind == "frontier":  # added with the frontier's --time-limit
        assert got.pop("status") == "optimal" and "status" not in expected
    # the frozen file has none of the new keys: stripping them from both sides must leave equal text
    assert json.dumps(strip_new(expected, drop_new=False), indent=2) == json.dumps(strip_new(expected), indent=2)
    assert json.dumps(strip_new(got), indent=2) == json.dumps(strip_new(expected, drop_new=False), indent=2)


def test_contract_covers_the_commands():
    kinds = {p.stem.split(".")[1] for p in EXPECTED}
    assert {"solve", "simulate", "shortlist", "shortlist_motor", "frontier"} <= kinds
    assert len(EXPECTED) >= 15


@pytest.mark.parametrize("prob", ["parcel_van", "roadster"])
def test_new_keys_of_single_axle_designs(prob):
    """Single-axle designs: motor and reducer at the top level and the same unit in ``units``."""
    solved = _json(["solve", str(HERE / "problems" / f"{prob}.toml")])
    for d in solved["designs"]:
        assert d["units"] == [{"axle": "rear", "motor": d["motor"], "reducer": d["reducer"],
                               "gear_ratios": [d["parts"]["reducer"]["ratio"]]}]
        assert d["gear_ratios"] == [d["parts"]["reducer"]["ratio"]]
        assert d["shifts"] == []
        assert "energy" not in d
        by = {c["name"]: c["axle"] for c in d["checks"]}
        assert by["reducer_torque_nm"] == by["reducer_speed_rpm"] == "rear"
        assert by["tyre_speed_kmh"] is None
        assert by["tyre_load_kg"] in ("front", "rear")
