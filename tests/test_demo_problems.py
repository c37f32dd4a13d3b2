"""Every bundled demo problem solves, verifies, matches exhaustive enumeration, and its JSON
follows the JSON contract documented in README.md (the demo data are invented and illustrative)."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from selector.api import open_study
from selector.cli import run
from selector.engine.evaluate import enumerate_designs

PROBLEMS = sorted((Path(__file__).parent.parent / "problems").glob("*.toml"))
PERF_KEYS = {"max_speed_kmh", "sustained_top_speed_kmh", "gradeability_pct", "launch_accel_mps2", "accel_time_s"}
REQ_KEYS = {"name", "required", "achieved", "unit", "margin_pct", "binding"}


def test_demo_problems_exist():
    assert len(PROBLEMS) >= 3




@pytest.mark.parametrize("path", PROBLEMS, ids=[p.stem for p in PROBLEMS])
def test_solve_json_contract_and_enumeration(path, capsys):
    code = run(["solve", str(path), "--format", "json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    res = json.loads(out)
    assert res["status"] == "optimal"
    assert res["objective"]["minimize"] in ("cost", "mass", "accel_time")
    assert res["designs"], "a demo problem must be feasible"
    d = res["designs"][0]
    for key in ("motor", "reducer", "tyre", "cost", "mass_kg", "performance", "requirements"):
        assert key in d
    assert set(d["performance"]) >= PERF_KEYS
    for r in d["requirements"]:
        assert set(r) >= REQ_KEYS
        assert r["met"] is True
    assert "Caution" in res["caution"]
    # The exhaustive oracle over all motor x reducer x tyre triples agrees.
    study = open_study(path)
    best = enumerate_designs(study.parts, study.parts.problem.objective, count=1)[0]
    parts = study.parts
    assert (d["motor"], d["reducer"], d["tyre"]) == (
        parts.motors.part[best[1]], parts.reducers.part[best[2]], parts.tyres.part[best[3]])
    assert math.isclose(res["objective"]["value"], best[0], rel_tol=1e-9)


def test_solve_table_shows_caution(capsys):
    assert run(["solve", str(PROBLEMS[0])]) == 0
    out, _ = capsys.readouterr()
    assert "Caution" in out and "binding" in out


def test_simulate_json_has_performance_and_requirements(capsys):
    # the solve answer of the parcel van, re-evaluated by `simulate` (invented demo data)
    path = str(PROBLEMS[[p.stem for p in PROBLEMS].index("parcel_van")])
    assert run(["solve", path, "--format", "json"]) == 0
    best = json.loads(capsys.readouterr().out)["designs"][0]
    assert run(["simulate", path, "--motor", best["motor"], "--reducer", best["reducer"], "--tyre", best["tyre"],
                "--format", "json"]) == 0
    sim = json.loads(capsys.readouterr().out)
    assert set(sim["performance"]) >= PERF_KEYS
    assert sim["performance"] == best["performance"]
    assert [r["name"] for r in sim["requirements"]] == [r["name"] for r in best["requirements"]]
    assert sim["feasible"] is True
