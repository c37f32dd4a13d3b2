"""Every bundled demo problem runs through every command, and each demo study shows what it is meant
to show (the demo data are invented and illustrative).

- single-axle studies without an energy table: `solve` matches exhaustive enumeration and follows
  the JSON contract of README.md;
- every problem: `solve`, `simulate` (the solve answer), `explain`, `shortlist` and `frontier`, as
  JSON and as a table, exit 0 (frontier: exit 2 with a clear message when the problem has no
  accel_to_kmh, which the frontier needs);
- the claims of the README's "Examples" section, computed from the tool's own results (the runs
  of tools/demo_examples.py), and the section itself equal to a fresh run.
"""

from __future__ import annotations

import importlib.util
import json
import math
from pathlib import Path

import pytest
from conftest import cli_json

from selector.api import open_study
from selector.cli import run
from selector.engine.evaluate import enumerate_designs
from selector.io.problem import load_problem

ROOT = Path(__file__).parent.parent
PROBLEMS = sorted((ROOT / "problems").glob("*.toml"))
PERF_KEYS = {"max_speed_kmh", "sustained_top_speed_kmh", "gradeability_pct", "launch_accel_mps2", "accel_time_s"}
REQ_KEYS = {"name", "required", "achieved", "unit", "margin_pct", "binding"}


def _problem(path):
    return load_problem(path)


TWO_UNIT = [p for p in PROBLEMS if _problem(p).vehicle.driven_axle == "both"]
SINGLE = [p for p in PROBLEMS if p not in TWO_UNIT]
CLASSIC = [p for p in SINGLE if _problem(p).energy is None]  # small enough for the enumeration oracle

def _cases(paths):
    return [pytest.param(p, id=p.stem) for p in paths]


def _json(runs: dict, capsys, *argv) -> dict:
    """``selector ARGV --format json`` through the session's shared cache (`conftest.cli_json`)."""
    return cli_json(runs, capsys, *argv)


def _tools_module():
    spec = importlib.util.spec_from_file_location("demo_examples", ROOT / "tools" / "demo_examples.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_demo_problems_exist():
    assert len(PROBLEMS) >= 9
    assert len(TWO_UNIT) >= 2 and len(CLASSIC) >= 4
    for p in PROBLEMS:
        assert "illustrative" in p.read_text(encoding="utf-8").lower(), p.name


# ------------------------------------------------------------------------------ solve vs enumeration
@pytest.mark.parametrize("path", CLASSIC, ids=[p.stem for p in CLASSIC])
def test_solve_json_contract_and_enumeration(path, capsys, json_runs):
    res = _json(json_runs, capsys, "solve", path)
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


def test_simulate_json_has_performance_and_requirements(capsys, json_runs):
    # the solve answer of the parcel van, re-evaluated by `simulate` (invented demo data)
    path = str(PROBLEMS[[p.stem for p in PROBLEMS].index("parcel_van")])
    best = _json(json_runs, capsys, "solve", path)["designs"][0]
    assert run(["simulate", path, "--motor", best["motor"], "--reducer", best["reducer"], "--tyre", best["tyre"],
                "--format", "json"]) == 0
    sim = json.loads(capsys.readouterr().out)
    assert set(sim["performance"]) >= PERF_KEYS
    assert sim["performance"] == best["performance"]
    assert [r["name"] for r in sim["requirements"]] == [r["name"] for r in best["requirements"]]
    assert sim["feasible"] is True


# ------------------------------------------------------------------------------ every command
def _design_flags(design: dict) -> list[str]:
    """simulate's part flags for a solve design record (single axle: top level; two units: `units`)."""
    if design.get("motor") is not None:
        return ["--motor", design["motor"], "--reducer", design["reducer"], "--tyre", design["tyre"]]
    flags = []
    for unit in design["units"]:
        flags += [f"--{unit['axle']}-motor", unit["motor"], f"--{unit['axle']}-reducer", unit["reducer"]]
    return flags + ["--tyre", design["tyre"]]


@pytest.mark.parametrize("path", _cases(PROBLEMS))
def test_every_command_json_and_table(path, capsys, json_runs):
    """solve, simulate, explain, shortlist and frontier, as JSON and as a table (demo data invented).

    Each command runs once through the command line as JSON; its table is the renderer the command
    prints with, applied to the same result (the command line's table branch itself is run by
    test_solve_table_shows_caution and the CLI tests), so no demo study is solved twice here.
    """
    from selector.cli.explain import render_feasible
    from selector.cli.main import print_search_result
    from selector.cli.shortlist import print_shortlist

    problem = _problem(path)
    res = _json(json_runs, capsys, "solve", path)
    assert res["status"] == "optimal" and res["designs"], res.get("reason")
    best = res["designs"][0]
    assert all(r["met"] for r in best["requirements"])
    assert "Caution" in res["caution"]
    if problem.vehicle.driven_axle == "both":
        assert best["motor"] is None and best["reducer"] is None
        assert [u["axle"] for u in best["units"]] == ["front", "rear"]
    # the table of solve names the same parts
    print_search_result(res, diagnosis=res.get("diagnosis", {}).get("summary"))
    table = capsys.readouterr().out
    assert "Caution" in table and best["tyre"] in table

    flags = _design_flags(best)
    assert run(["simulate", str(path), *flags, "--format", "json"]) == 0
    sim = json.loads(capsys.readouterr().out)
    assert sim["feasible"] is True and sim["unmet"] == []
    assert math.isclose(sim["cost"], best["cost"], rel_tol=1e-9)
    assert run(["simulate", str(path), *flags]) == 0
    assert best["tyre"] in capsys.readouterr().out

    exp = _json(json_runs, capsys, "explain", path)
    assert exp["status"] == "optimal"
    assert math.isclose(exp["objective"]["value"], res["objective"]["value"], rel_tol=1e-9)
    # the explain table (what the command prints between the problem's title and the caution)
    assert best["tyre"] in render_feasible(exp) and exp["caution"].startswith("Caution")

    sl = _json(json_runs, capsys, "shortlist", path, "--count", "3")
    assert sl["designs"] and math.isclose(sl["designs"][0]["cost"], best["cost"], rel_tol=1e-9)
    print_shortlist(sl)
    assert "Caution" in capsys.readouterr().out

    if problem.requirements.accel_to_kmh is None:  # the frontier's time axis needs a target speed
        assert run(["frontier", str(path), "--format", "json"]) == 2
        assert "accel_to_kmh" in capsys.readouterr().err
        return
    if problem.vehicle.driven_axle == "both":
        # Left out here: the exact frontier of a 1e9-design two-unit demo study takes minutes (one
        # epsilon-constraint search per point). The two-unit frontier, JSON and table, is tested on a
        # small two-unit study in test_records_slots.py::test_two_unit_frontier_and_tables.
        return
    from selector.cli.frontier import render

    assert run(["frontier", str(path), "--format", "json"]) == 0
    fr = json.loads(capsys.readouterr().out)
    assert fr["points"], "a feasible study has at least one frontier point"
    times = [p["accel_time_s"] for p in fr["points"]]
    assert times == sorted(times, reverse=True)
    assert "Caution" in render(fr)  # the table the command prints for the same result


# ------------------------------------------------------------------------------ scenario claims
@pytest.fixture(scope="module")
def tools():
    return _tools_module()


@pytest.fixture(scope="module")
def examples(tools):
    """The runs behind the README's Examples section (exact searches through the engine)."""
    return tools.run_all()


def _by_name(group, name):
    return next(s for s in group if s["name"] == name)


def test_examples_cover_the_new_problems(examples, tools):
    names = {s["name"] for g in examples.values() for s in g}
    assert names == set(tools.TWO_AXLE_STUDIES + tools.GEARBOX_STUDIES + tools.ENERGY_STUDIES)
    assert names <= {p.stem for p in PROBLEMS}


def test_second_axle_beats_every_single_axle_design(examples):
    """With both axles driven the optimum is better than the best front-only and rear-only designs
    of the same study (or those studies have no design at all)."""
    for s in examples["two_axles"]:
        both = s["both"]
        assert both["status"] == "optimal", s["name"]
        assert both["design"]["front"] is not None and both["design"]["rear"] is not None
        singles = [s[a]["value"] for a in ("front", "rear") if s[a]["status"] == "optimal"]
        assert all(v > both["value"] for v in singles), s["name"]
        for a in ("front", "rear"):
            assert s[a]["status"] in ("optimal", "infeasible"), (s["name"], a)


def test_vineyard_traction_decides(examples):
    s = _by_name(examples["two_axles"], "vineyard_awd")
    # at least one single-axle layout cannot meet the study at all on this surface
    assert "infeasible" in (s["front"]["status"], s["rear"]["status"])
    assert s["both"]["objective"] == "cost"


def test_saloon_uses_different_ratios_front_and_rear(examples, tools):
    s = _by_name(examples["two_axles"], "sports_saloon_awd")
    assert s["objective"] == "accel_time"
    both = s["both"]["design"]
    problem, catalogs = tools.load("sports_saloon_awd")
    parts = tools.tables(problem, catalogs)
    ratio = dict(zip(parts.reducers.part, parts.reducers.ratio, strict=True))
    assert ratio[both["front"][1]] != ratio[both["rear"][1]]


def test_two_speed_wins_on_the_mountain_route(examples):
    s = _by_name(examples["gearbox"], "mountain_van")
    assert s["all"]["status"] == "optimal" and s["all"]["multi_speed"] is True
    assert s["single"]["status"] == "optimal" and s["single"]["value"] > s["all"]["value"]
    assert s["second_gear_price"] < 0  # the gearbox saves money


def test_two_speed_loses_in_the_lowland(examples):
    s = _by_name(examples["gearbox"], "lowland_van")
    assert s["all"]["status"] == "optimal" and s["all"]["multi_speed"] is False
    assert s["multi"]["status"] == "optimal"  # a two-speed design exists, it is just dearer
    assert s["multi"]["value"] > s["all"]["value"]
    assert s["second_gear_price"] > 0


def test_energy_cheapest_parts_are_not_the_cheapest_vehicle(examples):
    s = _by_name(examples["energy"], "delivery_van_energy")
    opt, cheap = s["optimum"], s["cheapest_parts"]
    assert opt["status"] == "optimal" and cheap["status"] == "optimal"
    o, c = opt["figures"], cheap["figures"]
    for f in (o, c):  # a sized battery, not a missing one
        assert f["battery_kwh"] is not None and f["battery_kwh"] > 0
        assert f["energy_wh_per_km"] is not None and f["energy_wh_per_km"] > 0
    assert opt["design"] != cheap["design"]
    assert c["parts_cost"] < o["parts_cost"]
    assert c["cost"] > o["cost"]  # parts + battery
    assert math.isclose(o["cost"], o["parts_cost"] + o["battery_cost"], rel_tol=1e-9)


def test_energy_solve_json_reports_the_battery(capsys, json_runs):
    path = ROOT / "problems" / "delivery_van_energy.toml"
    res = _json(json_runs, capsys, "solve", path)
    assert res["status"] == "optimal"
    d = res["designs"][0]
    energy = d["energy"]
    assert energy["battery_kwh"] > 0 and energy["wh_per_km"] > 0 and energy["battery_cost"] > 0


def test_readme_examples_match_a_fresh_run(examples, tools):
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert tools.splice(readme, tools.markdown(examples)) == readme, (
        "README.md examples differ from a fresh run: python tools/demo_examples.py --write")
