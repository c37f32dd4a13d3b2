"""One tiny hand-made study per requirement family: the engine must return the hand-derived optimum.

Each test builds a catalogue of 2-3 parts per kind (invented, illustrative data) where a cheaper
(or lighter) design fails exactly one family, so a failing test names the family. The expected
design is derived by hand in the comments, from standard textbook relations
(road load F = m g Crr + 0.5 rho CdA v^2; wheel force F = eta T G / r; grade load
m g (Crr cos + sin); ISO 4000-1 tyre tables), with margins of several percent so that rounding
in the hand arithmetic cannot change the verdict. Every test also checks:

- that exhaustive enumeration (`evaluate.enumerate_designs`) returns the same design;
- the premise: the rejected cheaper design fails the family's check (and only that one), so the
  test exercises the family it is named after.

Common data (unless a test says otherwise):

- vehicle 1500 kg without the parts, CdA 0.8 m^2, wheelbase 2.8 m, CG 0.6 m, rear share 0.5,
  rear drive, 4 tyres; air 1.2 kg/m^3; road friction 0.9;
- tyre 205/55R16: D = 16 x 25.4 mm + 2 x 205 mm x 0.55 = 0.6319 m; rolling radius
  r = 0.97 x D/2 = 0.30647 m (ISO 4000-1 designation; k = 0.97 project default, an assumption);
  LI 91 = 615 kg, V = 240 km/h (ISO 4000-1 tables); 8.0 N/kN; 9 kg; 100 each;
- reducer ratio 8, 97 %, 400 N m, 16000 rpm, 15 kg, 500;
- so G/r = 8 / 0.30647 = 26.10 1/m and, with a 40 kg motor, m = 1500 + 40 + 15 + 4 x 9 = 1591 kg.
"""

from __future__ import annotations

import pytest
from generators import (
    HAND_ENVIRONMENT,
    HAND_VEHICLE,
    motor_row,
    part_ids,
    reducer_row,
    tyre_row,
    write_and_load,
)

from selector.engine import evaluate
from selector.engine import search as engine
from selector.engine.evaluate import check_results

VEHICLE, ENVIRONMENT = HAND_VEHICLE, HAND_ENVIRONMENT
motor, reducer, tyre = motor_row, reducer_row, tyre_row


def study(tmp_path, motors, reducers=None, tyres=None, requirements=None, objective="cost", vehicle=None,
          environment=None):
    return write_and_load(tmp_path, motors, reducers or [reducer("R-8")], tyres or [tyre("T-STD")],
                          {**VEHICLE, **(vehicle or {})}, {**ENVIRONMENT, **(environment or {})},
                          requirements, objective)


def failing(parts, ids):
    """Names of the requirements and checks the design with part ids ``ids`` fails."""
    mi = list(parts.motors.part).index(ids[0])
    rj = list(parts.reducers.part).index(ids[1])
    tk = list(parts.tyres.part).index(ids[2])
    res = check_results(parts, evaluate.evaluate(parts, mi, rj, tk))
    return {name for name, ok in res.items() if not ok[0]}


def assert_optimum(parts, expected, rejected, family):
    """Engine and enumeration both pick ``expected``; ``rejected`` fails exactly ``family``."""
    assert failing(parts, rejected) == {family}, "premise of the hand-made case does not hold"
    assert failing(parts, expected) == set(), "premise: the expected design must meet everything"
    res = engine.search(parts)
    enum = evaluate.enumerate_designs(parts, parts.problem.objective)
    assert res.status == "optimal", f"{family}: engine status {res.status} ({res.reason})"
    assert part_ids(parts, res.designs[0]) == expected, f"{family}: engine picked the wrong design"
    assert enum and part_ids(parts, enum[0]) == expected, f"{family}: enumeration disagrees with the hand result"
    assert res.designs[0][0] == pytest.approx(enum[0][0], rel=1e-12)


def test_top_speed(tmp_path):
    # Road load at 120 km/h = 33.33 m/s, m ~ 1591 kg: 1591 x 9.807 x 0.008 = 125 N rolling
    # + 0.5 x 1.2 x 0.8 x 33.33^2 = 533 N aero = 658 N, i.e. 21.9 kW at the wheels.
    # Shaft speed 33.33 x 26.10 = 870 rad/s (8309 rpm < 12000: gearing allows 173 km/h), where the
    # continuous envelope is power-limited (130 N m x 870 rad/s = 113 kW > P_cont).
    # M-A (1500) gives 0.97 x 18 kW = 17.5 kW < 21.9 kW: cannot hold 120 km/h.
    # M-B (2000) gives 0.97 x 30 kW = 29.1 kW > 21.9 kW: holds it. So M-B.
    parts = study(tmp_path,
                  [motor("M-A", peak_power_kw=50, cont_power_kw=18, mass_kg=35, unit_cost=1500),
                   motor("M-B", peak_power_kw=80, cont_power_kw=30, mass_kg=45, unit_cost=2000)],
                  requirements={"top_speed_kmh": 120})
    assert_optimum(parts, ("M-B", "R-8", "T-STD"), ("M-A", "R-8", "T-STD"), "top_speed_kmh")


def test_gradeability_motor_limited(tmp_path):
    # 30 % grade: theta = atan 0.3, sin = 0.2873, cos = 0.9578; load = 1591 x 9.807 x
    # (0.008 x 0.9578 + 0.2873) = 4603 N. Peak wheel force at crawl = 0.97 x T x 26.10:
    # M-A 150 N m -> 3798 N < 4603 N (fails); M-B 250 N m -> 6330 N (passes).
    # Traction (rear drive, mu 0.9): rear share (750 + 18 + 40 + 15)/1591 = 0.517,
    # tan limit = (0.9 x 0.517 - 0.008)/(1 - 0.9 x 0.6/2.8) = 0.567 -> 56.7 % > 30 %: not binding.
    # So M-B, although M-A is cheaper.
    parts = study(tmp_path,
                  [motor("M-A", peak_torque_nm=150, peak_power_kw=50, cont_torque_nm=100, unit_cost=1500),
                   motor("M-B", unit_cost=2000)],
                  requirements={"gradeability_pct": 30})
    assert_optimum(parts, ("M-B", "R-8", "T-STD"), ("M-A", "R-8", "T-STD"), "gradeability_pct")


def test_gradeability_traction_limited(tmp_path):
    # Front drive on a slippery road (mu 0.5), 1000 kg vehicle with 40 % of it on the front axle.
    # Both motors have 250 N m: wheel force 6330 N, motor-limited grade > 60 % for both.
    # Traction limit, front drive: tan theta <= (mu s_f - Crr) / (1 + mu h/L), h/L = 0.6/2.8 = 0.214:
    #   M-A (30 kg, 2000):  m = 1000 + 30 + 15 + 36 = 1081 kg, front 400 + 30 + 15 + 18 = 463 kg,
    #       s_f = 0.428 -> (0.5 x 0.428 - 0.008)/1.107 = 0.186 -> 18.6 % < 20 %: fails;
    #   M-B (150 kg, 2600): m = 1201 kg, front 583 kg, s_f = 0.485 -> 0.212 -> 21.2 % >= 20 %.
    # The heavier motor sits on the driven axle and buys the grip. So M-B.
    parts = study(tmp_path,
                  [motor("M-A", mass_kg=30, unit_cost=2000), motor("M-B", mass_kg=150, unit_cost=2600)],
                  requirements={"gradeability_pct": 20},
                  vehicle={"mass_kg": 1000.0, "rear_axle_share": 0.6, "driven_axle": "front"},
                  environment={"road_friction": 0.5})
    assert_optimum(parts, ("M-B", "R-8", "T-STD"), ("M-A", "R-8", "T-STD"), "gradeability_pct")
    # premise: traction, not torque, limits M-A (its motor-limited grade is far above 20 %)
    m_a = evaluate.evaluate(parts, 0, 0, 0)
    assert 18.0 < float(m_a["gradeability_pct"][0]) < 19.2  # hand value 18.6 %


def test_launch(tmp_path):
    # One motor (200 N m, J = 0.02 kg m^2), two ratios. Launch from rest:
    # a = (eta T G/r - m g Crr) / (m + J (G/r)^2 eta), m = 1591 kg, rolling 125 N.
    #   R-5 (ratio 5, 450): G/r = 16.31, F = 0.97 x 200 x 16.31 = 3165 N, m_eff = 1596 kg
    #       -> a = (3165 - 125)/1596 = 1.90 m/s^2 < 2.5: fails;
    #   R-9 (ratio 9, 520): G/r = 29.37, F = 5697 N, m_eff = 1608 kg -> 3.47 m/s^2 >= 2.5.
    # Traction (rear, mu 0.9): (mu W_r - F_res)/((1 - kappa) m_eff) ~ 5.5 m/s^2, not binding.
    # Gearing: 12000 rpm at ratio 9 is 154 km/h, no speed requirement. So R-9.
    parts = study(tmp_path, [motor("M-A", peak_torque_nm=200, cont_torque_nm=100)],
                  reducers=[reducer("R-5", ratio=5, unit_cost=450), reducer("R-9", ratio=9, unit_cost=520)],
                  requirements={"launch_accel_mps2": 2.5})
    assert_optimum(parts, ("M-A", "R-9", "T-STD"), ("M-A", "R-5", "T-STD"), "launch_accel_mps2")


def test_accel_time(tmp_path):
    # 0 -> 50 km/h (13.89 m/s) within 6 s, m = 1591 kg.
    # M-A (200 N m, 20 kW, 1500): energy bound t >= m v^2 / (2 eta P) = 1591 x 13.89^2 /
    #   (2 x 0.97 x 20000) = 7.9 s > 6 s: fails, whatever the traction.
    # M-B (250 N m, 80 kW, 2000): wheel force >= min(6330 N, 0.97 x 80 kW / 13.89 m/s = 5587 N)
    #   up to 50 km/h; road load <= 125 + 0.48 x 13.89^2 = 217 N; m_eff = 1591 + 0.02 x 26.10^2 x
    #   0.97 = 1604 kg; traction-limited acceleration ~5.5 m/s^2 is above the motor's ~3.8 m/s^2.
    #   So a >= (5587 - 217)/1604 = 3.35 m/s^2 and t <= 13.89/3.35 = 4.1 s <= 6 s: passes. So M-B.
    parts = study(tmp_path,
                  [motor("M-A", peak_torque_nm=200, peak_power_kw=20, cont_torque_nm=150, cont_power_kw=15,
                         unit_cost=1500),
                   motor("M-B", unit_cost=2000)],
                  requirements={"accel_to_kmh": 50, "accel_time_s": 6})
    assert_optimum(parts, ("M-B", "R-8", "T-STD"), ("M-A", "R-8", "T-STD"), "accel_time_s")
    # the hand bounds themselves
    t = evaluate.evaluate(parts, [0, 1], [0, 0], [0, 0])["accel_time_s"]
    assert t[0] >= 7.9 and t[1] <= 4.15


def test_max_mass(tmp_path):
    # M-A: 90 kg, 1500 -> m = 1500 + 90 + 15 + 36 = 1641 kg > 1620 kg: fails.
    # M-B: 40 kg, 2000 -> m = 1591 kg <= 1620 kg. So M-B.
    parts = study(tmp_path, [motor("M-A", mass_kg=90, unit_cost=1500), motor("M-B", mass_kg=40, unit_cost=2000)],
                  requirements={"max_mass_kg": 1620})
    assert_optimum(parts, ("M-B", "R-8", "T-STD"), ("M-A", "R-8", "T-STD"), "max_mass_kg")


def test_budget(tmp_path):
    # Minimise mass. M-A: 60 kg, 1000 -> m = 1611 kg, cost 1000 + 500 + 4 x 100 = 1900.
    # M-B: 40 kg, 2500 -> m = 1591 kg (lighter), cost 3400 > budget 2500: fails.
    # Without a budget M-B wins on mass; with it, M-A.
    reqs = {"budget": 2500}
    motors = [motor("M-A", mass_kg=60, unit_cost=1000), motor("M-B", mass_kg=40, unit_cost=2500)]
    free = study(tmp_path / "free", motors, objective="mass")
    assert part_ids(free, engine.search(free).designs[0]) == ("M-B", "R-8", "T-STD")
    parts = study(tmp_path / "budget", motors, requirements=reqs, objective="mass")
    assert_optimum(parts, ("M-A", "R-8", "T-STD"), ("M-B", "R-8", "T-STD"), "budget")


def test_tyre_load_index(tmp_path):
    # 2000 kg vehicle, 55 % on the rear (driven) axle: rear axle 1100 + 40 + 15 + 2 x 9 = 1173 kg,
    # 586.5 kg per rear tyre (front 459 kg). ISO 4000-1 load index: LI 86 = 530 kg < 586.5 (fails),
    # LI 91 = 615 kg (passes). T-86 is cheaper (80 vs 100), so T-91.
    parts = study(tmp_path, [motor("M-A")],
                  tyres=[tyre("T-86", load_index=86, unit_cost=80), tyre("T-91", load_index=91, unit_cost=100)],
                  vehicle={"mass_kg": 2000.0, "rear_axle_share": 0.55})
    assert_optimum(parts, ("M-A", "R-8", "T-91"), ("M-A", "R-8", "T-86"), "tyre_load_kg")


def test_tyre_speed_symbol(tmp_path):
    # Gearing limit 12000 rpm x 0.30647 m / 8 = 48.14 m/s = 173.3 km/h. At that speed road load is
    # 125 + 0.48 x 48.14^2 = 1237 N, 59.6 kW, less than 0.97 x 80 kW = 77.6 kW: the peak envelope
    # would go faster, so the vehicle's maximum speed is the gearing limit, 173.3 km/h.
    # ISO 4000-1 speed symbols: Q = 160 km/h < 173.3 (fails), S = 180 km/h (passes). So T-S.
    parts = study(tmp_path, [motor("M-A")],
                  tyres=[tyre("T-Q", speed_symbol="Q", unit_cost=80), tyre("T-S", speed_symbol="S", unit_cost=100)])
    assert_optimum(parts, ("M-A", "R-8", "T-S"), ("M-A", "R-8", "T-Q"), "tyre_speed_kmh")


def test_reducer_torque_rating(tmp_path):
    # Motor peak torque 250 N m. R-LT rated 200 N m input (cheaper, 400): 250 > 200 fails;
    # R-HT rated 400 N m (500) passes. Same ratio, so nothing else differs. So R-HT.
    parts = study(tmp_path, [motor("M-A")],
                  reducers=[reducer("R-LT", max_input_torque_nm=200, unit_cost=400),
                            reducer("R-HT", max_input_torque_nm=400, unit_cost=500)])
    assert_optimum(parts, ("M-A", "R-HT", "T-STD"), ("M-A", "R-LT", "T-STD"), "reducer_torque_nm")


def test_reducer_speed_rating(tmp_path):
    # Motor maximum speed 12000 rpm. R-LS rated 10000 rpm input (cheaper, 400) fails;
    # R-HS rated 16000 rpm (500) passes. So R-HS.
    parts = study(tmp_path, [motor("M-A")],
                  reducers=[reducer("R-LS", max_input_speed_rpm=10000, unit_cost=400),
                            reducer("R-HS", max_input_speed_rpm=16000, unit_cost=500)])
    assert_optimum(parts, ("M-A", "R-HS", "T-STD"), ("M-A", "R-LS", "T-STD"), "reducer_speed_rpm")


def test_speed_limiter_admits_slower_tyre(tmp_path):
    # As test_tyre_speed_symbol (maximum speed 173.3 km/h by gearing), plus a 150 km/h limiter:
    # the vehicle's maximum speed becomes 150 km/h <= Q = 160 km/h (ISO 4000-1), so the cheaper
    # T-Q is now allowed. So T-Q.
    tyres = [tyre("T-Q", speed_symbol="Q", unit_cost=80), tyre("T-S", speed_symbol="S", unit_cost=100)]
    parts = study(tmp_path, [motor("M-A")], tyres=tyres, requirements={"speed_limiter_kmh": 150})
    res = engine.search(parts)
    enum = evaluate.enumerate_designs(parts, "cost")
    assert res.status == "optimal"
    assert part_ids(parts, res.designs[0]) == ("M-A", "R-8", "T-Q")
    assert enum and part_ids(parts, enum[0]) == ("M-A", "R-8", "T-Q")
    assert float(evaluate.evaluate(parts, 0, 0, 0)["max_speed_kmh"][0]) == pytest.approx(150.0, rel=1e-12)


def test_speed_limiter_below_top_speed_is_infeasible(tmp_path):
    # The sustained top speed is capped by the limiter (product rule): a 155 km/h top-speed
    # requirement with a 150 km/h limiter cannot be met by any design, although the motor could
    # hold 155 km/h (43.06 m/s: 125 + 0.48 x 43.06^2 = 1015 N, 43.7 kW <= 0.97 x 60 kW).
    parts = study(tmp_path, [motor("M-A", cont_power_kw=60)],
                  requirements={"top_speed_kmh": 155, "speed_limiter_kmh": 150})
    res = engine.search(parts)
    assert res.status == "infeasible" and res.designs == []
    assert evaluate.enumerate_designs(parts, "cost") == []
    # without the limiter the same study is feasible (the limiter is what rules it out)
    free = study(tmp_path / "free", [motor("M-A", cont_power_kw=60)], requirements={"top_speed_kmh": 155})
    assert engine.search(free).status == "optimal"
