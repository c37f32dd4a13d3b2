"""The independent re-check (`selector.engine.verify`) against outside references and the evaluator.

- Closed forms (computed from the formulas, cross-checked in tests/test_physics_performance.py):
  constant force with quadratic drag, t = m / sqrt(F c) artanh(v sqrt(c/F)); constant power without
  resistance, t = m v^2 / (2 P). The re-check's solve_ivp run must reproduce them (1e-9).
- The evaluator's speed-domain quadrature (`physics.accel_run`) and the re-check's time-domain
  solve_ivp run agree to 1e-6 relative or better (measured: about 1e-8 at worst) on random designs:
  one unit single-speed, multi-speed gearboxes with shift times, two units; and for targets at 97 %
  to 99.5 % of the maximum speed, where 1/a grows without bound (issue: accuracy near top speed).
- Every other figure (top speeds, gradeability, launch, tyre load and capacity, mass, cost) agrees
  to 1e-9.
- A disagreement is an internal error (`VerificationError`, a `SelectorError`), never a silent answer.
- UN Regulation No. 30 load-capacity reduction above 210 km/h for V tyres, through evaluation and re-check.

All studies are invented, illustrative data (tests/generators.py).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from generators import motor_row, random_study, reducer_row, tyre_row, write_and_load

from selector.engine import evaluate
from selector.engine import verify as V
from selector.engine.parts import FR, RR
from selector.errors import SelectorError
from selector.physics import accel_run, speeds

IVP_REL = 1e-6
"""Agreement asked of the quadrature against solve_ivp (the issue's requirement) [-]."""


def vehicle(torque=300.0, power=1e9, decline=1e9, k=1.0, w_max=1e9, inertia=0.0, ratio=10.0, eta=1.0, r=0.3,
            mass=1500.0, crr=0.0, q=0.0, mu=10.0, rear=True) -> V._Vehicle:
    unit = V._Unit(torque, power, torque, power, decline, k, w_max, inertia, [ratio], [eta], 0.0)
    return V._Vehicle({"rear" if rear else "front": unit}, r, mass, 0.5, crr, q, mu, 0.2, 0.0, math.inf)


# ------------------------------------------------------------------------------------------ closed forms

def test_run_constant_force_quadratic_drag_closed_form():
    # m dv/dt = F - c v^2: t(v) = m / sqrt(F c) artanh(v sqrt(c / F)) (closed form)
    veh = vehicle(torque=300.0, ratio=10.0, r=0.3, q=0.4, mass=1500.0)
    f = 300.0 * 10.0 / 0.3
    v = 30.0
    t = 1500.0 / math.sqrt(f * 0.4) * math.atanh(v * math.sqrt(0.4 / f))
    assert V.run_time_s(veh, v, 1e3) == pytest.approx(t, rel=1e-9)


def test_run_constant_power_closed_form():
    # m dv/dt = P / v (no resistance): t = m v^2 / (2 P); a torque cap far above the launch force
    # would make the start singular, so integrate from the corner speed onwards by subtracting it
    p, torque, ratio, r, m = 50e3, 1e6, 10.0, 0.3, 1200.0
    veh = vehicle(torque=torque, power=p, ratio=ratio, r=r, mass=m)
    v_c = p / (torque * ratio / r)  # corner speed [m/s]
    t_c = v_c / (torque * ratio / r / m)  # constant force up to the corner
    v = 25.0
    expected = t_c + m * (v * v - v_c * v_c) / (2 * p)
    assert V.run_time_s(veh, v, 1e3) == pytest.approx(expected, rel=1e-9)


def test_run_traction_limited_closed_form():
    # rear drive slipping from launch: a = (mu W_r - F_res) / ((1 - kappa) m), kappa = mu h/L (textbook form)
    veh = vehicle(torque=2000.0, mu=0.3)
    w_r = 1500.0 * 9.80665 * 0.5
    a = 0.3 * w_r / ((1 - 0.3 * 0.2) * 1500.0)
    assert V.launch_accel_mps2(veh) == pytest.approx(a, rel=1e-12)
    assert V.run_time_s(veh, 20.0, 1e3) == pytest.approx(20.0 / a, rel=1e-9)


def test_top_speed_and_grade_by_root_finding():
    # torque-limited top speed sqrt((F - A) / q); grade from F = m g (Crr cos + sin) (closed forms)
    veh = vehicle(torque=200.0, ratio=8.0, r=0.3, q=0.5, crr=0.01, mass=1400.0)
    f = 200.0 * 8.0 / 0.3
    a0 = 1400.0 * 9.80665 * 0.01
    assert V.top_speed_mps(veh) == pytest.approx(math.sqrt((f - a0) / 0.5), rel=1e-12)
    theta = math.asin(f / (1400.0 * 9.80665 * math.sqrt(1 + 0.01 ** 2))) - math.atan(0.01)
    assert V.grade_angle_rad(veh) == pytest.approx(theta, abs=1e-12)


# ------------------------------------------------------------------------------------------ random designs

def sample_keys(parts, layout, multi_only, count, seed):
    from generators import _all_keys, _all_triples

    if layout == "single":
        keys = parts.single_keys(*_all_triples(parts))
    else:
        keys = _all_keys(parts)
    if multi_only:
        ng = parts.reducers.n_gears
        multi = np.zeros(len(keys), dtype=bool)
        for col in (FR, RR):
            multi |= (keys[:, col] >= 0) & (ng[np.maximum(keys[:, col], 0)] > 1)
        keys = keys[multi]
    rng = np.random.default_rng(seed)
    return keys[rng.choice(len(keys), size=min(count, len(keys)), replace=False)] if len(keys) else keys


CASES = [("single", 0.0, False), ("single", 0.8, True), ("both", 0.5, False), ("both", 0.6, True)]


@pytest.mark.parametrize("layout,gearbox_share,multi_only", CASES,
                         ids=["one unit", "one unit multi-speed", "two units", "two units multi-speed"])
def test_recheck_agrees_with_the_evaluator(layout, gearbox_share, multi_only, tmp_path):
    checked = 0
    for seed in range(6000, 6004):
        st = random_study(seed, tmp_path / str(seed), layout=layout, gearbox_share=gearbox_share,
                          requirement_share={"accel_time_s": 1.0})
        keys = sample_keys(st.parts, layout, multi_only, 4, seed)
        if not len(keys):
            continue
        m = evaluate.evaluate(st.parts, keys)
        figs = V.recheck(st.parts, keys, m)
        for f in figs:
            assert not f["disagreements"], (seed, f["disagreements"])
        checked += sum(math.isfinite(f["accel_time_s"]) for f in figs)
    assert checked >= 6, checked


@pytest.mark.parametrize("layout,gearbox_share,multi_only", CASES,
                         ids=["one unit", "one unit multi-speed", "two units", "two units multi-speed"])
def test_accel_time_near_top_speed_against_solve_ivp(layout, gearbox_share, multi_only, tmp_path):
    # targets at 97 % .. 99.5 % of the maximum speed: the quadrature's error bound must hold up to the pole
    worst = 0.0
    runs = 0
    for seed in range(6100, 6103):
        st = random_study(seed, tmp_path / str(seed), layout=layout, gearbox_share=gearbox_share, requirement_share=0)
        parts = st.parts
        keys = sample_keys(parts, layout, multi_only, 3, seed)
        if not len(keys):
            continue
        axles, body = parts.design(keys)
        vmax = speeds.max_speed_mps(axles, body)
        vehicles = V._vehicles(parts, keys, body.mass_kg)
        for frac in (0.97, 0.98, 0.99, 0.995):
            t_quad = accel_run.accel_time_s(axles, body, frac * vmax)
            for i, veh in enumerate(vehicles):
                if not math.isfinite(t_quad[i]):
                    continue
                t_ivp = V.run_time_s(veh, float(frac * vmax[i]), 2 * t_quad[i] + 10)
                worst = max(worst, abs(t_ivp - t_quad[i]) / t_ivp)
                runs += 1
    assert runs >= 12, runs
    assert worst <= IVP_REL, worst


# ------------------------------------------------------------------------------------------ the gate

def small_study(tmp_path, **requirements):
    motors = [motor_row("M-1", peak_torque_nm=250, peak_power_kw=90, max_speed_rpm=12000)]
    reducers = [reducer_row("R-1", ratio=9.0)]
    tyres = [tyre_row("T-1")]
    vehicle_ = {"mass_kg": 1400, "drag_area_m2": 0.7, "wheelbase_m": 2.7, "cg_height_m": 0.55,
                "rear_axle_share": 0.5, "driven_axle": "rear", "tyre_count": 4}
    req = {"accel_to_kmh": 100.0, **requirements}
    return write_and_load(tmp_path, motors, reducers, tyres, vehicle_, {"road_friction": 0.9}, req)


def test_verify_designs_accepts_a_consistent_design(tmp_path):
    parts = small_study(tmp_path)
    t = float(evaluate.evaluate(parts, [0], [0], [0])["accel_time_s"][0])
    metrics = V.verify_designs(parts, [(t, 0, 0, 0)], "accel_time")
    assert metrics["accel_time_s"][0] == t


@pytest.mark.parametrize("metric,factor", [("accel_time_s", 1 + 1e-5), ("max_speed_kmh", 1 + 1e-7),
                                           ("gradeability_pct", 1.001), ("launch_accel_mps2", 1 - 1e-6),
                                           ("tyre_load_capacity_kg", 1.01)])
def test_a_disagreement_is_an_internal_error(metric, factor, tmp_path, monkeypatch):
    parts = small_study(tmp_path)
    real = V.evaluate

    def skewed(*args, **kw):
        out = real(*args, **kw)
        out[metric] = np.asarray(out[metric]) * factor
        return out

    monkeypatch.setattr(V, "evaluate", skewed)
    with pytest.raises(V.VerificationError, match=metric) as info:
        V.verify_designs(parts, [(math.nan, 0, 0, 0)], "cost", expect_feasible=False)
    assert isinstance(info.value, SelectorError)
    assert "bug in selector" in str(info.value)


def test_a_claimed_value_that_differs_is_an_internal_error(tmp_path):
    parts = small_study(tmp_path)
    cost = float(evaluate.evaluate(parts, [0], [0], [0])["cost"][0])
    with pytest.raises(V.VerificationError, match="objective cost"):
        V.verify_designs(parts, [(cost * 0.9, 0, 0, 0)], "cost")


def test_an_infeasible_design_reported_as_feasible_is_an_internal_error(tmp_path):
    parts = small_study(tmp_path, accel_time_s=1.0)  # no design reaches 100 km/h in 1 s
    t = float(evaluate.evaluate(parts, [0], [0], [0])["accel_time_s"][0])
    with pytest.raises(V.VerificationError, match="accel_time_s"):
        V.verify_designs(parts, [(t, 0, 0, 0)], "accel_time")


# ------------------------------------------------------------------------------------------ UN R30 tyre load

def test_v_tyre_capacity_reduced_above_210_kmh(tmp_path):
    # UN Regulation No. 30 (as reproduced in a handbook page on tyre load capacity): a V tyre carries
    # its load index's capacity up to 210 km/h and 91 % at 240 km/h, linear in between. A fast
    # vehicle (gearing-limited at 9000 rpm, ratio 4.6, r ~0.31 m: about 227 km/h) on a V tyre
    # of load index 91 (615 kg, ISO 4000-1 table).
    motors = [motor_row("M-1", peak_torque_nm=400, peak_power_kw=300, max_speed_rpm=9000)]
    reducers = [reducer_row("R-1", ratio=4.6)]
    tyres = [tyre_row("T-1", size="225/45R17", load_index=91, speed_symbol="V")]
    vehicle_ = {"mass_kg": 1400, "drag_area_m2": 0.6, "wheelbase_m": 2.7, "cg_height_m": 0.5,
                "rear_axle_share": 0.5, "driven_axle": "rear", "tyre_count": 4}
    parts = write_and_load(tmp_path, motors, reducers, tyres, vehicle_, {"road_friction": 0.9}, {})
    m = evaluate.evaluate(parts, [0], [0], [0])
    v = float(m["max_speed_kmh"][0])
    assert 210.0 < v < 240.0, v
    share = 1.0 - 0.09 * (v - 210.0) / 30.0  # linear between the regulation's two points
    assert float(m["tyre_load_capacity_kg"][0]) == pytest.approx(615.0 * share, rel=1e-12)
    fig = V.recheck(parts, parts.single_keys([0], [0], [0]), m)[0]
    assert fig["tyre_load_capacity_kg"] == pytest.approx(615.0 * share, rel=1e-9)
    assert not fig["disagreements"]


def test_identical_gearbox_units_pass_the_recheck(tmp_path):
    # Found by an independent audit: the same two-speed unit on both axles (demo parts KM-M182 + SP-D50-110,
    # invented data) reaches both shift points at the same speed; the search and the re-check let rounding
    # decide which axle shifts first and disagreed on the time (exit 1). Both now shift the front first.
    from conftest import demo_catalogue_study

    from selector.api import simulate

    study = demo_catalogue_study(tmp_path, "Identical units", [
        "[vehicle]", "mass_kg = 1520.0", "drag_area_m2 = 1.709", "wheelbase_m = 3.103", "cg_height_m = 0.403",
        "rear_axle_share = 0.543", 'driven_axle = "both"', "tyre_count = 4",
        "[environment]", "air_density_kg_m3 = 1.0158", "road_friction = 0.452",
        "[requirements]", "accel_to_kmh = 109.817", "[drive]", "same_unit = true"])
    rec = simulate(study, front_motor="KM-M182", front_reducer="SP-D50-110", rear_motor="KM-M182",
                   rear_reducer="SP-D50-110", tyre="TR-T1406")
    assert [s["axle"] for s in rec["shifts"]][:2] == ["front", "rear"]


def test_recheck_passes_an_axle_touching_its_friction_limit(tmp_path):
    # Found by an independent audit (demo parts BI-M200 + FG-S45-044 front, BI-M200 + AT-T10-124 rear, invented
    # data): near 6.69 km/h the rear axle's force touches its friction limit with zero slope, the slip event
    # fired again at the same speed on every restart and the re-check gave up after 400 (exit 1). Reference:
    # 11.754 s from the audit's own time-domain integration (scipy solve_ivp DOP853 with events at every
    # regime change, written apart from selector; not kept in the repository), checked to its 5 digits.
    from conftest import demo_catalogue_study

    from selector.api import simulate

    study = demo_catalogue_study(tmp_path, "Friction touch", [
        "[vehicle]", "mass_kg = 2406.6", "drag_area_m2 = 0.925", "wheelbase_m = 3.358", "cg_height_m = 0.677",
        "rear_axle_share = 0.53", 'driven_axle = "both"', "tyre_count = 4",
        "[environment]", "air_density_kg_m3 = 1.0553", "road_friction = 0.898",
        "[requirements]", "accel_to_kmh = 171.983"])
    rec = simulate(study, front_motor="BI-M200", front_reducer="FG-S45-044", rear_motor="BI-M200",
                   rear_reducer="AT-T10-124", tyre="GR-T1613")
    assert rec["performance"]["accel_time_s"] == pytest.approx(11.754, abs=5e-4)  # audit's figure, 5 digits
