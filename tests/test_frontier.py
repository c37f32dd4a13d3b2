"""The cost/acceleration frontier: exact against exhaustive enumeration, JSON, CLI, chart data.

The oracle evaluates every (motor, reducer, tyre) triple of small random catalogues with the
exact physics, keeps the designs meeting every requirement except accel_time_s (with a finite
0-to-accel_to_kmh time), and filters the non-dominated set directly from its definition.
"""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from generators import random_study

from selector.api import Study, open_study
from selector.cli import run
from selector.engine import evaluate
from selector.engine.parts import PartTables
from selector.errors import InputError
from selector.studies.frontier import frontier, trace

SIZES = ((3, 6), (3, 5), (3, 5))
# Seeds whose random studies give frontiers of 0 to 7 points (found by running the oracle once).
SEEDS = (100, 104, 108, 111, 112, 114, 119, 127)
REL = 1e-9  # pass/fail and tie tolerance of the engine (requirements.REL_TOL)


def pareto_by_enumeration(s, axis_metric: str) -> list[tuple[float, float]]:
    """(axis value, time) of every non-dominated design of study ``s``, by brute force over all triples."""
    p = s.problem
    prob = dataclasses.replace(p, requirements=dataclasses.replace(p.requirements, accel_time_s=None))
    parts = PartTables.build(prob, s.catalogs)
    n = parts.sizes
    mi, rj, tk = (a.ravel() for a in np.meshgrid(*[np.arange(k) for k in n], indexing="ij"))
    m = evaluate.evaluate(parts, mi, rj, tk)
    ok = evaluate.feasible(parts, m, "accel_time")
    x, t = m[axis_metric][ok], m["accel_time_s"][ok]
    pts = set(zip(x.tolist(), t.tolist(), strict=True))
    # definition: no other design at most as large on both axes and smaller on one
    front = [(a, b) for a, b in pts if not any(c <= a and d <= b and (c < a or d < b) for c, d in pts)]
    return sorted(front)


def _study(seed, tmp_path):
    s = random_study(seed, tmp_path / str(seed), sizes=SIZES, objective="accel_time")
    allowed = {k: np.arange(n) for k, n in zip(("motors", "reducers", "tyres"), s.parts.sizes, strict=True)}
    return s, Study(s.parts, allowed)


@pytest.mark.parametrize("seed", SEEDS)
def test_cost_frontier_equals_enumeration(seed, tmp_path):
    s, study = _study(seed, tmp_path)
    pts, stats = trace(study, "cost")
    expected = pareto_by_enumeration(s, "cost")
    got = [(c, t) for c, t, *_ in pts]
    assert len(got) == len(expected), (got, expected)
    for (c, t), (ce, te) in zip(got, expected, strict=True):
        assert math.isclose(c, ce, rel_tol=2 * REL) and math.isclose(t, te, rel_tol=2 * REL)
    # one exact sweep (single-axle studies), or one search per point (more where designs tie) plus the last
    if stats.get("method") == "sweep":
        assert stats["searches"] == 1
    else:
        assert stats["searches"] >= len(pts) + 1
    # each point's own design has the reported cost and time (exact re-evaluation)
    for c, t, d in pts:
        m = evaluate.evaluate(s.parts, [d.key])
        assert math.isclose(m["cost"][0], c, rel_tol=2 * REL)
        assert math.isclose(m["accel_time_s"][0], t, rel_tol=1e-12)


@pytest.mark.parametrize("seed", (100, 127))
def test_mass_frontier_equals_enumeration(seed, tmp_path):
    s, study = _study(seed, tmp_path)
    pts, _ = trace(study, "mass")
    expected = pareto_by_enumeration(s, "mass_kg")
    assert len(pts) == len(expected) > 1
    for (x, t, *_), (xe, te) in zip(pts, expected, strict=True):
        assert math.isclose(x, xe, rel_tol=2 * REL) and math.isclose(t, te, rel_tol=2 * REL)


def test_frontier_json_ordered_verified_and_chosen(tmp_path):
    s, _ = _study(127, tmp_path)
    res = frontier(open_study(s.problem_path))
    pts = res["points"]
    assert len(pts) == len(pareto_by_enumeration(s, "cost"))
    costs = [q["cost"] for q in pts]
    times = [q["accel_time_s"] for q in pts]
    assert costs == sorted(costs) and times == sorted(times, reverse=True)
    for q in pts:
        assert {"motor", "reducer", "tyre", "cost", "mass_kg", "accel_time_s", "requirements", "checks"} <= set(q)
        assert "accel_time_s" not in [r["name"] for r in q["requirements"]]  # the frontier's axis, not a constraint
        assert all(r["met"] for r in q["requirements"] + q["checks"])
    # the problem minimises the acceleration time: its optimum is the frontier's fastest point
    ch = res["chosen"]
    assert ch["on_frontier"] and pts[-1]["chosen"]
    assert math.isclose(ch["accel_time_s"], times[-1], rel_tol=2 * REL)
    assert res["axis"] == "cost" and res["caution"]
    json.dumps(res, allow_nan=False)


def test_cost_objective_under_accel_requirement_picks_cheapest_frontier_point_meeting_it(tmp_path):
    s, study = _study(127, tmp_path)
    pts, _ = trace(study)
    limit = pts[len(pts) // 2][1] * 1.0001  # a requirement between two frontier times
    p = s.problem
    prob = dataclasses.replace(p, objective="cost",
                               requirements=dataclasses.replace(p.requirements, accel_time_s=limit))
    res = frontier(Study(PartTables.build(prob, s.catalogs), study.allowed))
    ch = res["chosen"]
    assert ch is not None and ch["on_frontier"] and res["requirement"] == pytest.approx(limit, rel=1e-9)
    first_ok = next(q for q in res["points"] if q["meets_accel_time_s"])
    assert first_ok["cost"] == ch["cost"]
    assert all(q["accel_time_s"] > limit for q in res["points"] if q["cost"] < ch["cost"])
    # JSON: 10 digits
    assert [q["accel_time_s"] for q in res["points"]] == pytest.approx([t for _, t, *_ in pts], rel=1e-9)


def test_missing_accel_to_kmh_is_a_clear_input_error(capsys):
    with pytest.raises(InputError, match="accel_to_kmh is missing"):
        frontier(open_study("problems/campus_shuttle.toml"))
    assert run(["frontier", "problems/campus_shuttle.toml"]) == 2
    err = capsys.readouterr().err
    assert "accel_to_kmh" in err and "Add accel_to_kmh" in err and "Traceback" not in err


def test_cli_json_and_plot_data_match(tmp_path, capsys):
    import matplotlib.image

    from selector.io.plots import frontier_plot

    s, _ = _study(100, tmp_path)
    png = tmp_path / "frontier.png"
    assert run(["frontier", str(s.problem_path), "--format", "json", "--plot", str(png)]) == 0
    res = json.loads(capsys.readouterr().out)
    assert png.stat().st_size > 0
    img = matplotlib.image.imread(png)
    assert img.ndim == 3 and img.shape[0] > 100 and img.shape[1] > 100
    fig = frontier_plot(res, tmp_path / "again.svg")
    (line,) = [ln for ln in fig.axes[0].get_lines() if ln.get_label() == "frontier"]
    xy = line.get_xydata()
    assert len(xy) == len(res["points"]) >= 2
    for (x, y), q in zip(xy, res["points"], strict=True):
        assert x == q["cost"] and y == q["accel_time_s"]
    assert (tmp_path / "again.svg").read_text(encoding="utf-8").lstrip().startswith("<?xml")
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]  # atomic writes leave no temp file


def test_cli_table_and_bad_axis(tmp_path, capsys):
    s, _ = _study(111, tmp_path)
    assert run(["frontier", str(s.problem_path), "--axis", "mass"]) == 0
    out = capsys.readouterr().out
    assert "mass_kg [kg]" in out and "non-dominated" in out
    assert run(["frontier", str(s.problem_path), "--axis", "price"]) == 2
    assert run(["frontier", str(s.problem_path), "--plot", str(tmp_path / "x.jpg")]) == 2
    assert "not a known output format" in capsys.readouterr().err


# ----------------------------------------------------------------------------- energy axis

@pytest.mark.parametrize("seed", (203, 216, 217, 224))
def test_energy_frontier_equals_enumeration(seed, tmp_path):
    # energy per km at the battery against time; random energy studies (UDDS, with or without a range)
    s = random_study(seed, tmp_path / str(seed), sizes=SIZES, objective="accel_time", energy=True)
    allowed = {k: np.arange(n) for k, n in zip(("motors", "reducers", "tyres"), s.parts.sizes, strict=True)}
    pts, stats = trace(Study(s.parts, allowed), "energy")
    expected = pareto_by_enumeration(s, "energy_wh_per_km")
    assert len(pts) == len(expected) >= 2
    for (e, t, d), (ee, te) in zip(pts, expected, strict=True):
        assert math.isclose(e, ee, rel_tol=2 * REL) and math.isclose(t, te, rel_tol=2 * REL)
        m = evaluate.evaluate(s.parts, [d.key])
        assert math.isclose(m["energy_wh_per_km"][0], e, rel_tol=2 * REL)
    assert stats["searches"] >= len(pts) + 1  # one search per point (more where designs tie), the last infeasible


def test_energy_axis_json_and_cli(tmp_path, capsys):
    s = random_study(216, tmp_path / "s", sizes=SIZES, objective="cost", energy=True)
    assert run(["frontier", str(s.problem_path), "--axis", "energy", "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert (res["axis"], res["axis_key"], res["axis_unit"]) == ("energy", "energy_wh_per_km", "Wh/km")
    assert res["limit"] == {"name": None, "required": None}
    pts = res["points"]
    energies = [q["energy_wh_per_km"] for q in pts]
    assert len(pts) >= 2 and energies == sorted(energies)
    assert [q["accel_time_s"] for q in pts] == sorted((q["accel_time_s"] for q in pts), reverse=True)
    assert all(q["energy"]["wh_per_km"] == q["energy_wh_per_km"] for q in pts)
    assert res["chosen"]["energy_wh_per_km"] is not None
    # a study without [energy] has no energy axis: a clear input error naming what to add
    assert run(["frontier", "problems/roadster.toml", "--axis", "energy"]) == 2
    err = capsys.readouterr().err
    assert "needs an [energy] table" in err and "Traceback" not in err


@pytest.mark.parametrize("seed", (100, 127))
def test_cheaper_clone_with_a_later_id_is_the_frontier_point(seed, tmp_path):
    # Regression (independent check): every motor gets a copy, identical but 1 cheaper, whose part id
    # sorts last. Equal times, so the frontier point at each cost is the copy; the one-sweep frontier
    # had kept the first id of the equal motors, as a time-only search may, and reported a dearer point.
    import pandas as pd

    from selector.io.problem import load_study

    s = random_study(seed, tmp_path / str(seed), sizes=SIZES, objective="accel_time")
    path = tmp_path / str(seed) / "motors.csv"
    head = [ln for ln in path.read_text().splitlines() if ln.startswith("#")]
    motors = pd.read_csv(path, comment="#", dtype=str, keep_default_na=False)
    clones = motors.copy()
    clones["part"] = "ZZ-" + clones["part"]
    clones["unit_cost"] = (clones["unit_cost"].astype(float) - 1.0).map(repr)
    path.write_text("\n".join(head) + "\n" + pd.concat([motors, clones]).to_csv(index=False))
    problem, catalogs = load_study(tmp_path / str(seed) / "problem.toml")
    s2 = dataclasses.replace(s, problem=problem, catalogs=catalogs, parts=PartTables.build(problem, catalogs))
    study = open_study(tmp_path / str(seed) / "problem.toml")
    pts, _ = trace(study, "cost")
    expected = pareto_by_enumeration(s2, "cost")
    assert [round(c, 6) for c, *_ in pts] == [round(c, 6) for c, _ in expected] and pts
    for _, _, d in pts:
        assert study.parts.motors.part[d.units[0][1]].startswith("ZZ-")
