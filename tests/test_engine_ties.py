"""Deterministic tie-breaking of the engine (the project's tie rule: part ids, motor then reducer then tyre).

"Ties within 1e-9 relative break by part id string order (motor, then reducer, then tyre)", and
"the same input always gives the same answer". Each case duplicates a part under two ids, written
to the CSV with the larger id first (the loader sorts by part id; the file order must not matter).
Invented, illustrative data: the hand-made blocks of generators.py.
"""

from __future__ import annotations

import pytest
from generators import HAND_ENVIRONMENT, HAND_VEHICLE, part_ids, write_and_load
from generators import motor_row as motor
from generators import reducer_row as reducer
from generators import tyre_row as tyre

from selector.engine import evaluate
from selector.engine import search as engine


def load(tmp_path, motors, reducers, tyres, requirements=None, objective="cost"):
    return write_and_load(tmp_path, motors, reducers, tyres, HAND_VEHICLE, HAND_ENVIRONMENT, requirements, objective)


def best_ids(parts, **kw):
    res = engine.search(parts, **kw)
    assert res.status == "optimal", res.reason
    return part_ids(parts, res.designs[0]), res


# Requirements met by every design here, so that requirement rows and the acceleration bounds take
# part in the search without deciding it (hand check in test_engine_families: 250 N m / 80 kW
# reach 50 km/h in <= 4.2 s and climb 30 %).
REQS = {"gradeability_pct": 20, "accel_to_kmh": 50, "accel_time_s": 8}


@pytest.mark.parametrize("objective", ["cost", "mass", "accel_time"])
def test_identical_motors_smaller_id_wins(tmp_path, objective):
    # "M-9" > "M-10" in string order (the id is text, not a number): M-10 must win.
    motors = [motor("M-9"), motor("M-10"), motor("M-X", unit_cost=2500, mass_kg=60, peak_torque_nm=200)]
    parts = load(tmp_path, motors, [reducer("R-8")], [tyre("T-STD")], REQS, objective)
    ids, res = best_ids(parts)
    assert ids == ("M-10", "R-8", "T-STD")
    enum = evaluate.enumerate_designs(parts, objective)
    assert part_ids(parts, enum[0]) == ids
    # the tied runner-up is the same design with the other id, then the different motor
    top = engine.search(parts, count=3)
    assert [part_ids(parts, d) for d in top.designs] == [part_ids(parts, d) for d in
                                                         evaluate.enumerate_designs(parts, objective, count=3)]
    assert [part_ids(parts, d)[0] for d in top.designs][:2] == ["M-10", "M-9"]
    assert top.designs[0][0] == top.designs[1][0]


@pytest.mark.parametrize("objective", ["cost", "mass", "accel_time"])
def test_identical_reducers_smaller_id_wins(tmp_path, objective):
    reducers = [reducer("R-B"), reducer("R-A"), reducer("R-C", ratio=6, unit_cost=700, mass_kg=25)]
    parts = load(tmp_path, [motor("M-1")], reducers, [tyre("T-STD")], REQS, objective)
    ids, _ = best_ids(parts)
    assert ids == ("M-1", "R-A", "T-STD")
    assert part_ids(parts, evaluate.enumerate_designs(parts, objective)[0]) == ids


@pytest.mark.parametrize("objective", ["cost", "mass", "accel_time"])
def test_identical_tyres_smaller_id_wins(tmp_path, objective):
    tyres = [tyre("T-b"), tyre("T-B"), tyre("T-a", rr_coefficient_n_per_kn=11.0, unit_cost=130, mass_kg=12)]
    # string order: "T-B" < "T-a" < "T-b" (upper case sorts first)
    parts = load(tmp_path, [motor("M-1")], [reducer("R-8")], tyres, REQS, objective)
    ids, _ = best_ids(parts)
    assert ids == ("M-1", "R-8", "T-B")
    assert part_ids(parts, evaluate.enumerate_designs(parts, objective)[0]) == ids


def test_motor_decides_before_reducer_and_tyre(tmp_path):
    # Two cost-tied designs whose id orders disagree: (M-A, R-Z) and (M-B, R-A). Motor ids are
    # compared first, so M-A's design wins although its reducer id is the larger one.
    #   M-A: 250 N m, 9000 rpm, 2000.   M-B: 180 N m, 12000 rpm, 2100.
    #   R-A: rated 200 N m / 16000 rpm, 500: cannot take M-A (250 N m > 200 N m).
    #   R-Z: rated 400 N m / 10000 rpm, 600: cannot take M-B (12000 rpm > 10000 rpm).
    #   (M-A, R-Z) = 2000 + 600 = 2600 = 2100 + 500 = (M-B, R-A), plus 4 x 100 for either tyre.
    # The two tyres are identical too, so T-A (< T-Z) goes first within each pair.
    motors = [motor("M-B", peak_torque_nm=180, unit_cost=2100), motor("M-A", max_speed_rpm=9000, unit_cost=2000)]
    reducers = [reducer("R-Z", unit_cost=600, max_input_speed_rpm=10000),
                reducer("R-A", unit_cost=500, max_input_torque_nm=200)]
    parts = load(tmp_path, motors, reducers, [tyre("T-Z"), tyre("T-A")])
    expected = [("M-A", "R-Z", "T-A"), ("M-A", "R-Z", "T-Z"), ("M-B", "R-A", "T-A"), ("M-B", "R-A", "T-Z")]
    enum = evaluate.enumerate_designs(parts, "cost", count=5)
    assert [part_ids(parts, d) for d in enum] == expected  # and no other feasible design
    assert [d[0] for d in enum] == [3000.0] * 4
    res = engine.search(parts, count=5)
    assert res.status == "optimal"
    assert [part_ids(parts, d) for d in res.designs] == expected


def test_relative_tie_tolerance(tmp_path):
    # Mass objective. M-B is lighter than M-A by 1e-7 kg in ~1591 kg (6e-11 relative, inside the
    # 1e-9 tie tolerance): a tie, so the smaller id M-A wins. With 1e-4 kg (6e-8 relative, outside
    # the tolerance), M-B is really lighter and wins.
    for gap, expected in ((1e-7, "M-A"), (1e-4, "M-B")):
        d = tmp_path / f"gap{gap:g}"
        parts = load(d, [motor("M-B", mass_kg=40 - gap), motor("M-A", mass_kg=40)], [reducer("R-8")],
                     [tyre("T-STD")], objective="mass")
        ids, _ = best_ids(parts)
        assert ids[0] == expected, f"mass gap {gap:g} kg"
        assert part_ids(parts, evaluate.enumerate_designs(parts, "mass")[0])[0] == expected


def test_repeatable(tmp_path):
    # Same input twice (and the same catalogue rows in another file order): identical answers.
    motors = [motor("M-2"), motor("M-1"), motor("M-3", unit_cost=1900, peak_torque_nm=150, cont_torque_nm=100)]
    reducers = [reducer("R-2"), reducer("R-1", ratio=9)]
    tyres = [tyre("T-2"), tyre("T-1"), tyre("T-3", unit_cost=90, load_index=86)]
    reqs = {"gradeability_pct": 25, "top_speed_kmh": 100}
    a = load(tmp_path / "a", motors, reducers, tyres, reqs)
    b = load(tmp_path / "b", motors[::-1], reducers[::-1], tyres[::-1], reqs)
    runs = [(p, engine.search(p, count=4)) for p in (a, a, b)]
    first = [(d[0], part_ids(a, d)) for d in runs[0][1].designs]
    assert runs[0][1].status == "optimal" and len(first) == 4
    for p, r in runs[1:]:
        assert r.status == "optimal"
        assert [(d[0], part_ids(p, d)) for d in r.designs] == first
