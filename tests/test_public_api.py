"""The public Python API: results agree with the command line's JSON, the README example runs.

The oracle for `to_dict()` is the command line itself (`selector COMMAND --format json`, run
in-process through `selector.cli.run`): the library and the CLI must print the same contract,
differing only in wall-clock timings. `Study.from_frames` is checked against the file loader on
the same data (the loader is the reference for validation). Demo data is invented.
"""

from __future__ import annotations

import inspect
import json
import os
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pandas as pd
import pytest

import selector
from selector.cli import run
from selector.cli.args import flag_names

ROOT = Path(__file__).resolve().parent.parent
VAN = str(ROOT / "problems" / "parcel_van.toml")
INFEASIBLE = str(ROOT / "tests" / "data" / "infeasible" / "budget_low.toml")
TIMING_KEYS = {"build_s", "solve_s", "verify_s", "elapsed_s", "search_s", "bound_s", "milp_s", "evaluate_s"}
"""Wall-clock timings [s]: the only fields allowed to differ between two runs of the same study."""


def without_timings(obj):
    """The result with wall-clock timings removed (any key ending in _s inside search/searches/runner)."""
    if isinstance(obj, dict):
        out = {}
        for k, v in obj.items():
            if k in ("search", "searches", "runner") and isinstance(v, dict):
                v = {kk: vv for kk, vv in v.items() if not (kk.endswith("_s") and isinstance(vv, float))}
            out[k] = without_timings(v)
        return out
    if isinstance(obj, list):
        return [without_timings(x) for x in obj]
    return obj


def cli_json(argv: list[str], capsys) -> dict:
    assert run([*argv, "--format", "json"]) == 0
    return json.loads(capsys.readouterr().out)


def api_json(result) -> dict:
    """to_dict() through a JSON round trip (as the CLI prints it: infinite values null)."""
    return json.loads(result.to_json())


@pytest.fixture(scope="module")
def van():
    return selector.open_study(VAN)


# ----------------------------------------------------------------------------- API == CLI

def test_solve_matches_cli(van, capsys):
    res = selector.solve(van)
    assert isinstance(res, selector.SolveResult) and res.status == "optimal"
    assert without_timings(api_json(res)) == without_timings(cli_json(["solve", VAN], capsys))
    assert res.to_dict() == res.data and res.to_dict() is not res.data


def test_infeasible_solve_carries_the_diagnosis_as_the_cli_does(capsys):
    res = selector.solve(selector.open_study(INFEASIBLE))
    assert res.status == "infeasible" and res.designs == []
    assert res.diagnosis is not None and res.diagnosis["summary"]
    assert without_timings(api_json(res)) == without_timings(cli_json(["solve", INFEASIBLE], capsys))
    assert res.to_frame().empty


def test_simulate_matches_cli(van, capsys):
    ids = ["BI-M087", "FG-S20-121", "AW-T1606"]
    res = selector.simulate(van, *ids)
    assert res.status == ("feasible" if res.feasible else "infeasible")
    cli = cli_json(["simulate", VAN, "--motor", ids[0], "--reducer", ids[1], "--tyre", ids[2]], capsys)
    assert api_json(res) == cli
    frame = res.to_frame()
    assert len(frame) == 1 and frame.loc[0, "motor"] == ids[0]


def test_explain_matches_cli(capsys):
    study = selector.open_study(INFEASIBLE)
    res = selector.explain(study)
    assert res.status == "infeasible" and res.designs == [] and res.closest is not None
    assert without_timings(api_json(res)) == without_timings(cli_json(["explain", INFEASIBLE], capsys))
    assert list(res.requirements_frame()["name"]) == [r["name"] for r in res.to_dict()["requirements"]]


def test_feasible_explain_matches_cli(van, capsys):
    res = selector.explain(van)
    assert res.status == "optimal" and len(res.designs) == 1
    assert without_timings(api_json(res)) == without_timings(cli_json(["explain", VAN], capsys))
    frame = res.requirements_frame()
    assert {"saved_when_dropped", "saved_when_loosened", "active", "binding"} <= set(frame.columns)


def test_frontier_matches_cli(van, capsys):
    res = selector.frontier(van)
    assert res.status == "optimal" and res.designs == res.to_dict()["points"]
    assert without_timings(api_json(res)) == without_timings(cli_json(["frontier", VAN], capsys))
    frame = res.to_frame()
    assert list(frame["accel_time_s"]) == [p["accel_time_s"] for p in res.designs]
    assert frame["chosen"].sum() == sum(p["chosen"] for p in res.designs)


def test_shortlist_matches_cli(van, capsys):
    res = selector.shortlist(van, count=4, distinct="motor", vehicles=3)
    cli = cli_json(["shortlist", VAN, "--count", "4", "--distinct", "motor", "--vehicles", "3"], capsys)
    assert without_timings(api_json(res)) == without_timings(cli)
    frame = res.to_frame()
    assert list(frame["extended_cost"]) == [b["extended_cost"] for b in res.bom]
    assert frame["motor"].is_unique


def test_sweep_matches_cli(van, capsys):
    res = selector.sweep(van, ["requirements.top_speed_kmh=100:140:3"], workers=1)
    cli = cli_json(["sweep", VAN, "--vary", "requirements.top_speed_kmh=100:140:3", "--workers", "1"], capsys)
    assert without_timings(api_json(res)) == without_timings(cli)
    as_dict = selector.sweep(van, {"requirements.top_speed_kmh": [100, 120, 140]}, workers=1)
    assert without_timings(as_dict.to_dict()) == without_timings(res.to_dict())
    frame = res.to_frame()
    assert list(frame.columns[:2]) == ["requirements.top_speed_kmh", "status"]
    assert res.status in ("optimal", "mixed", "infeasible")
    assert res.status == ("optimal" if (frame["status"] == "optimal").all() else
                          "infeasible" if not (frame["status"] == "optimal").any() else "mixed")


# ----------------------------------------------------------------------------- frames

def test_to_frame_columns_and_values(van):
    res = selector.solve(van, count=3)
    frame = res.to_frame()
    assert len(frame) == len(res.designs) == 3
    for col in ("motor", "reducer", "tyre", "cost", "mass_kg", "lead_time_weeks", "max_speed_kmh",
                "sustained_top_speed_kmh", "gradeability_pct", "launch_accel_mps2", "accel_time_s"):
        assert col in frame.columns, col
    for n, d in enumerate(res.designs):
        assert frame.loc[n, "cost"] == d["cost"] and frame.loc[n, "motor"] == d["motor"]
        assert frame.loc[n, "accel_time_s"] == d["performance"]["accel_time_s"]
        for r in d["requirements"] + d["checks"]:
            assert frame.loc[n, f"{r['name']}_margin_pct"] == r["margin_pct"]


# ----------------------------------------------------------------------------- Study.from_frames

def demo_frames() -> tuple[dict, dict]:
    frames = {k: pd.read_csv(ROOT / "catalogs" / f"{k}.csv", comment="#") for k in ("motors", "reducers", "tyres")}
    with open(VAN, "rb") as f:
        problem = tomllib.load(f)
    del problem["catalogs"]
    return frames, problem


def test_from_frames_equals_the_files(van):
    frames, problem = demo_frames()
    study = selector.Study.from_frames(**frames, problem=problem, base_dir=ROOT / "catalogs")
    assert study.problem.path is None and study.parts.sizes == van.parts.sizes
    a, b = selector.solve(study, count=2).to_dict(), selector.solve(van, count=2).to_dict()
    assert a["problem_file"] is None
    assert a["designs"] == b["designs"] and a["objective"] == b["objective"]


def test_from_frames_errors_name_frame_row_and_column():
    frames, problem = demo_frames()
    motors = frames["motors"].copy()
    motors["mass_kg"] = motors["mass_kg"].astype(object)
    motors.loc[4, "mass_kg"] = "heavy"
    part = motors.loc[4, "part"]
    with pytest.raises(selector.InputError) as exc:
        selector.Study.from_frames(motors, frames["reducers"], frames["tyres"], problem, base_dir=ROOT / "catalogs")
    msg = str(exc.value)
    assert f'motors frame row 4 (part "{part}"): mass_kg = "heavy"; must be a number' in msg
    assert "selector-frames-" not in msg  # no temporary file names

    tyres = frames["tyres"].set_index("part", drop=False)
    tyres.loc[tyres.index[0], "load_index"] = 200  # ISO 4000-1 load indices stop well below 200
    with pytest.raises(selector.InputError, match=rf"tyres frame row '{tyres.index[0]}' .*load_index = 200"):
        selector.Study.from_frames(frames["motors"], frames["reducers"], tyres, problem, base_dir=ROOT / "catalogs")

    with pytest.raises(selector.InputError, match=r"motors frame columns: required column \"supplier\" is missing"):
        selector.Study.from_frames(frames["motors"].drop(columns=["supplier"]), frames["reducers"], frames["tyres"],
                                   problem, base_dir=ROOT / "catalogs")


def test_from_frames_problem_dict_errors():
    frames, problem = demo_frames()
    bad = {**problem, "vehicle": {**problem["vehicle"], "mass_kgg": 3}}
    unknown = r'problem dict \[vehicle\] mass_kgg: unknown key. Did you mean "mass_kg"'
    with pytest.raises(selector.InputError, match=unknown):
        selector.Study.from_frames(**frames, problem=bad, base_dir=ROOT / "catalogs")
    with pytest.raises(selector.InputError, match=r"\[catalogs\]"):
        selector.Study.from_frames(**frames, problem={**problem, "catalogs": {}}, base_dir=ROOT / "catalogs")
    with pytest.raises(selector.InputError, match="^motors: expected a pandas DataFrame"):
        selector.Study.from_frames([], frames["reducers"], frames["tyres"], problem)


def test_from_frames_sweep_keeps_the_dicts_fixed_isa_value_as_a_file_does(tmp_path):
    # the file loader is the reference: the same tables written as a problem file sweep identically
    frames, problem = demo_frames()
    problem["environment"] = {"altitude_m": 1000.0, "temperature_c": 30.0, "road_friction": 0.8}
    memory = selector.Study.from_frames(**frames, problem=problem, base_dir=ROOT / "catalogs")
    cat = ROOT / "catalogs"
    text = (van_text_without_environment()
            .replace('"../catalogs/', f'"{cat.as_posix()}/')
            + "\n[environment]\naltitude_m = 1000.0\ntemperature_c = 30.0\nroad_friction = 0.8\n")
    (tmp_path / "van.toml").write_text(text, encoding="utf-8")
    on_file = selector.open_study(tmp_path / "van.toml")
    vary = {"environment.altitude_m": [0.0, 2000.0]}
    a, b = selector.sweep(memory, vary, workers=1), selector.sweep(on_file, vary, workers=1)
    assert a.to_dict()["rows"] == b.to_dict()["rows"]
    assert "temperature_c = 30" in a.to_dict()["notes"][0] and "problem dict" in a.to_dict()["notes"][0]


def van_text_without_environment() -> str:
    """The demo problem file's text without its [environment] table."""
    text = Path(VAN).read_text(encoding="utf-8")
    head, _, rest = text.partition("[environment]")
    return head + rest[rest.index("\n["):] if "\n[" in rest else head


# ----------------------------------------------------------------------------- parameter names

def test_library_errors_name_parameters_and_cli_names_flags(van, capsys):
    with pytest.raises(selector.InputError, match="^count 0"):
        selector.solve(van, count=0)
    with pytest.raises(selector.InputError, match="^count"):
        selector.shortlist(van, count=0)
    with pytest.raises(selector.InputError, match="^time_limit_s"):
        selector.solve(van, time_limit_s=-1)
    with pytest.raises(selector.InputError, match="^step_pct"):
        selector.explain(van, step_pct=150)
    with pytest.raises(selector.InputError, match="^vary 'vehicle.mass'"):
        selector.sweep(van, {"vehicle.mass": [1, 2]})
    with pytest.raises(selector.InputError, match="^motor 'NOPE'"):
        selector.simulate(van, "NOPE", "FG-S20-121", "AW-T1606")
    assert run(["simulate", VAN, "--motor", "NOPE", "--reducer", "FG-S20-121", "--tyre", "AW-T1606"]) == 2
    assert "error: --motor 'NOPE': no such part" in capsys.readouterr().err
    assert run(["sweep", VAN, "--vary", "vehicle.mass=1:2:2"]) == 2
    assert "error: --vary 'vehicle.mass'" in capsys.readouterr().err


@pytest.mark.parametrize("message, expected", [
    ("count 0: must be >= 1.", "--count 0: must be >= 1."),
    ("vary: give at least one key", "--vary: give at least one key"),
    ("max_lead_time_weeks -2.0: must be >= 0 [weeks].", "--max-lead-time-weeks -2.0: must be >= 0 [weeks]."),
    ("motors.csv line 3: bad", "motors.csv line 3: bad"),  # a file name is not a parameter
    ("counts 3", "counts 3"),
])
def test_flag_names(message, expected):
    assert flag_names(message) == expected


# ----------------------------------------------------------------------------- package surface

def test_import_is_lazy_and_exports_resolve():
    code = ("import sys, selector; heavy = {'numpy', 'pandas', 'pyomo', 'highspy'} & "
            "{m.split('.')[0] for m in sys.modules}; print(sorted(heavy))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT)
    assert out.stdout.strip() == "[]"
    assert set(selector.__all__) == {"__version__", *selector._EXPORTS}
    for name in selector._EXPORTS:
        assert getattr(selector, name) is not None
    with pytest.raises(AttributeError):
        selector.no_such_name  # noqa: B018


PUBLIC_FUNCTIONS = ("open_study", "solve", "simulate", "explain", "frontier", "sweep", "shortlist")


@pytest.mark.parametrize("name", PUBLIC_FUNCTIONS)
def test_public_functions_are_typed_and_documented(name):
    fn = getattr(selector, name)
    sig = inspect.signature(fn)
    assert sig.return_annotation is not inspect.Signature.empty
    doc = inspect.getdoc(fn) or ""
    assert "Parameters\n----------" in doc and "Returns\n-------" in doc
    for p in sig.parameters.values():
        assert p.annotation is not inspect.Parameter.empty, p.name
        assert re.search(rf"^\**{p.name}\b", doc, flags=re.M) or re.search(rf"\b{p.name}\b.*:", doc), p.name


def test_python_dash_m_selector_runs_the_cli():
    out = subprocess.run([sys.executable, "-m", "selector", "--help"], capture_output=True, text=True, cwd=ROOT)
    assert out.returncode == 0 and "solve" in out.stdout and "explain" in out.stdout
    out = subprocess.run([sys.executable, "-m", "selector", "check", VAN, "--format", "json"],
                         capture_output=True, text=True, cwd=ROOT)
    assert out.returncode == 0 and json.loads(out.stdout)["combinations"] > 0


# ----------------------------------------------------------------------------- README

def readme_example() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("\n## Python API\n", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```python\n(.*?)```", section, flags=re.S)
    assert len(blocks) == 1, "the Python API section has one worked example"
    return blocks[0]


def test_readme_python_example_runs_as_written(tmp_path):
    script = tmp_path / "example.py"
    script.write_text(readme_example(), encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    out = subprocess.run([sys.executable, str(script)], capture_output=True, text=True, cwd=ROOT, env=env)
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert lines[0] == "optimal"
    assert any(line.startswith("feasible ") for line in lines)
    assert selector.CAUTION in out.stdout
