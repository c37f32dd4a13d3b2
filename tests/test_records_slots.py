"""Design records by named slots: two-unit designs, multi-speed shifts, energy entries, per-axle plots.

Hand-made invented catalogues (tests/generators.py building blocks). Expected values come from the
catalogue rows by hand, from closed forms written out here, or from SciPy (an independent root
finder and quadrature of the acceleration equation), never from the records' own code.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
from pathlib import Path

import numpy as np
import pytest
from generators import (
    HAND_ENVIRONMENT,
    HAND_VEHICLE,
    motor_row,
    reducer_row,
    tyre_row,
    write_csv,
    write_problem,
)

from selector.api import open_study, problem_summary, simulate, solve
from selector.cli import run
from selector.errors import InputError
from selector.physics import battery
from selector.studies.frontier import frontier
from selector.studies.shortlist import shortlist
from selector.units import G_N, rpm_to_rad_s

MOTORS = [motor_row("M-A"),
          motor_row("M-B", peak_torque_nm=300, peak_power_kw=100, cont_torque_nm=150, cont_power_kw=50, mass_kg=45,
                    unit_cost=2600, rotor_inertia_kgm2=0.03)]
REDUCERS = [reducer_row("R-08"), reducer_row("R-10", ratio=10, unit_cost=520),
            reducer_row("G-2S", ratio=10, ratio_2=6, shift_time_s=0.3, mass_kg=22, unit_cost=900)]
TYRES = [tyre_row("T-16"), tyre_row("T-17", size="225/45R17", load_index=94, mass_kg=10, unit_cost=120)]
REQUIREMENTS = {"top_speed_kmh": 120, "gradeability_pct": 20, "accel_to_kmh": 100, "accel_time_s": 20}


def write_study(directory: Path, driven_axle: str = "both", drive: dict | None = None, motors=MOTORS,
                reducers=REDUCERS, tyres=TYRES, requirements=REQUIREMENTS, objective: str = "cost",
                energy: dict | None = None, vehicle: dict | None = None) -> Path:
    """Write a hand-made study (invented data) and return the problem path."""
    directory.mkdir(parents=True, exist_ok=True)
    for kind, rows in (("motors", motors), ("reducers", reducers), ("tyres", tyres)):
        write_csv(directory / f"{kind}.csv", kind, rows)
    path = directory / "problem.toml"
    veh = {**HAND_VEHICLE, "driven_axle": driven_axle, **(vehicle or {})}
    write_problem(path, "Slots study (invented data)", veh, HAND_ENVIRONMENT, requirements, objective,
                  drive=drive, energy=energy)
    return path


def cli_json(argv: list[str]) -> tuple[int, dict | None]:
    buf = io.StringIO()
    with contextlib.redirect_stdout(buf):
        code = run([*argv, "--format", "json"])
    return code, (json.loads(buf.getvalue()) if code == 0 else None)


def row(rows, part):
    return next(r for r in rows if r["part"] == part)


@pytest.fixture(scope="module")
def awd(tmp_path_factory):
    return write_study(tmp_path_factory.mktemp("awd"))


@pytest.fixture(scope="module")
def same(tmp_path_factory):
    return write_study(tmp_path_factory.mktemp("same"), drive={"same_unit": True})


# ----------------------------------------------------------------------------------------- two units

def test_two_unit_records_units_null_top_level_and_per_axle_checks(awd):
    res = solve(open_study(awd), count=4)
    assert res["status"] == "optimal" and len(res["designs"]) == 4
    assert res["search"]["combinations"] == (2 * 3) ** 2 * 2  # (motors x reducers)^2 x tyres
    for d in res["designs"]:
        assert d["motor"] is None and d["reducer"] is None and d["gear_ratios"] is None
        assert [u["axle"] for u in d["units"]] == ["front", "rear"]
        parts = d["parts"]
        assert set(parts) == {"front_motor", "front_reducer", "rear_motor", "rear_reducer", "tyre"}
        for u in d["units"]:
            m, r = row(MOTORS, u["motor"]), row(REDUCERS, u["reducer"])
            assert parts[f"{u['axle']}_motor"]["part"] == u["motor"]
            assert parts[f"{u['axle']}_reducer"]["axle"] == u["axle"]
            assert u["gear_ratios"] == [float(r["ratio"])] + ([float(r["ratio_2"])] if "ratio_2" in r else [])
            checks = {c["name"]: c for c in d["checks"] if c["axle"] == u["axle"]}
            # demand = the motor's catalogue peak torque / maximum speed; rating = the reducer's
            assert checks["reducer_torque_nm"]["achieved"] == m["peak_torque_nm"]
            assert checks["reducer_torque_nm"]["required"] == r["max_input_torque_nm"]
            assert checks["reducer_speed_rpm"]["achieved"] == pytest.approx(m["max_speed_rpm"], rel=1e-12)
        assert sum(c["name"] == "reducer_torque_nm" for c in d["checks"]) == 2
        # vehicle mass = own mass + both units + 4 tyres (catalogue rows)
        t = row(TYRES, d["tyre"])
        unit_kg = {u["axle"]: row(MOTORS, u["motor"])["mass_kg"] + row(REDUCERS, u["reducer"])["mass_kg"]
                   for u in d["units"]}
        assert d["mass_kg"] == pytest.approx(HAND_VEHICLE["mass_kg"] + sum(unit_kg.values()) + 4 * t["mass_kg"])
        # the tyre-load row names the heavier static axle: own share + its unit + half the tyres
        rear = HAND_VEHICLE["rear_axle_share"] * HAND_VEHICLE["mass_kg"] + unit_kg["rear"]
        front = (1 - HAND_VEHICLE["rear_axle_share"]) * HAND_VEHICLE["mass_kg"] + unit_kg["front"]
        (load,) = [c for c in d["checks"] if c["name"] == "tyre_load_kg"]
        assert load["axle"] == ("rear" if rear >= front else "front")
        assert load["achieved"] == pytest.approx((max(rear, front) + 2 * t["mass_kg"]) / 2, rel=1e-12)
        cost = sum(row(MOTORS, u["motor"])["unit_cost"] + row(REDUCERS, u["reducer"])["unit_cost"]
                   for u in d["units"]) + 4 * t["unit_cost"]
        assert d["cost"] == pytest.approx(cost)


def test_simulate_by_slots_gives_the_solve_record(awd):
    study = open_study(awd)
    best = solve(study)["designs"][0]
    f, r = best["units"]
    sim = simulate(study, tyre=best["tyre"], front_motor=f["motor"], front_reducer=f["reducer"],
                   rear_motor=r["motor"], rear_reducer=r["reducer"])
    assert sim["feasible"] is True and sim["unmet"] == []
    for key, value in best.items():
        assert sim[key] == value, key
    code, cli = cli_json(["simulate", str(awd), "--tyre", best["tyre"], "--front-motor", f["motor"],
                          "--front-reducer", f["reducer"], "--rear-motor", r["motor"], "--rear-reducer", r["reducer"]])
    assert code == 0 and cli["units"] == best["units"] and cli["motor"] is None
    assert cli["details"]["gear_over_radius_1_m_per_axle"].keys() == {"front", "rear"}


def test_simulate_slot_errors(awd, tmp_path, capsys):
    study = open_study(awd)
    with pytest.raises(InputError, match="front_motor=, front_reducer="):  # the library names its parameters
        simulate(study, "M-A", "R-08", "T-16")  # single-axle form in a two-unit study
    with pytest.raises(InputError, match="rear_motor, rear_reducer: missing"):  # the library names parameters
        simulate(study, tyre="T-16", front_motor="M-A", front_reducer="R-08")
    with pytest.raises(InputError, match="rear_reducer: missing"):
        simulate(study, tyre="T-16", front_motor="M-A", front_reducer="R-08", rear_motor="M-A")
    with pytest.raises(InputError, match="not both"):
        simulate(study, motor="M-A", reducer="R-08", tyre="T-16", front_motor="M-A", front_reducer="R-08")
    with pytest.raises(InputError, match="rear_motor 'M-Z': no such part"):
        simulate(study, tyre="T-16", front_motor="M-A", front_reducer="R-08", rear_motor="M-Z", rear_reducer="R-08")
    single = write_study(tmp_path / "rwd", driven_axle="rear")
    with pytest.raises(InputError, match="no front drive unit"):
        simulate(open_study(single), tyre="T-16", front_motor="M-A", front_reducer="R-08")
    # the slot form of the driven axle is the single-axle form
    a = simulate(open_study(single), "M-A", "R-08", "T-16")
    b = simulate(open_study(single), tyre="T-16", rear_motor="M-A", rear_reducer="R-08")
    assert a == b and a["motor"] == "M-A" and a["units"] == [{"axle": "rear", "motor": "M-A", "reducer": "R-08",
                                                              "gear_ratios": [8.0]}]
    assert run(["simulate", str(awd), "--motor", "M-A", "--reducer", "R-08", "--tyre", "T-16"]) == 2
    assert "--front-motor, --front-reducer" in capsys.readouterr().err  # the command line names its flags
    assert run(["simulate", str(awd), "--front-motor", "M-A", "--front-reducer", "R-08", "--tyre", "T-16"]) == 2
    assert "error: --rear-motor, --rear-reducer: missing" in capsys.readouterr().err


def test_same_unit_bom_one_line_quantity_two(same):
    study = open_study(same)
    res = shortlist(study, 2, vehicles=3)
    assert res["designs"]
    for d, b in zip(res["designs"], res["bom"], strict=True):
        f, r = d["units"]
        assert (f["motor"], f["reducer"]) == (r["motor"], r["reducer"])
        lines = {ln["item"]: ln for ln in b["lines"]}
        assert set(lines) == {"motor (both axles)", "reducer (both axles)", "tyre"}
        assert lines["motor (both axles)"]["part"] == f["motor"]
        assert lines["motor (both axles)"]["quantity_per_vehicle"] == 2
        assert lines["motor (both axles)"]["quantity"] == 6 and lines["motor (both axles)"]["axle"] == "both"
        assert lines["reducer (both axles)"]["quantity_per_vehicle"] == 2
        assert lines["tyre"]["quantity_per_vehicle"] == 4 and lines["tyre"]["axle"] is None
        assert sum(ln["extended_cost"] for ln in b["lines"]) == pytest.approx(3 * d["cost"])
        assert b["motor"] is None and b["ratio"] is None and b["units"] == d["units"]
    # a design that breaks same_unit: not feasible for simulate either (solve never proposes it)
    sim = simulate(study, tyre="T-16", front_motor="M-A", front_reducer="R-08", rear_motor="M-A",
                   rear_reducer="R-10")
    assert sim["feasible"] is False and [u["name"] for u in sim["unmet"]] == ["same_unit"]


def test_two_unit_bom_lines_per_axle_and_distinct_motor_pairs(awd, tmp_path):
    study = open_study(awd)
    res = shortlist(study, 3, distinct="motor")
    pairs = [tuple(u["motor"] for u in d["units"]) for d in res["designs"]]
    assert len(pairs) == len(set(pairs)) == 3  # 2 motors: 4 (front, rear) pairs, each at most once
    assert res["options"]["distinct_rule"].startswith("motor: each (front motor, rear motor) pair")
    for d, b in zip(res["designs"], res["bom"], strict=True):
        f, r = d["units"]
        items = [ln["item"] for ln in b["lines"]]
        if f["motor"] == r["motor"]:
            assert "motor (both axles)" in items
        else:
            assert {"front motor", "rear motor"} <= set(items)
        qty = sum(ln["quantity_per_vehicle"] for ln in b["lines"] if ln["item"] != "tyre")
        assert qty == 4  # two motors and two reducers, however they are grouped
    out = tmp_path / "bom.csv"
    assert run(["shortlist", str(awd), "--count", "2", "--out", str(out)]) == 0
    text = out.read_text()
    assert "rear reducer" in text or "reducer (both axles)" in text
    # greedy distinct reducer: no later design uses a reducer of an earlier one, on either axle
    res = shortlist(study, 3, distinct="reducer")
    seen: set = set()
    for d in res["designs"]:
        used = {u["reducer"] for u in d["units"]}
        assert not used & seen
        seen |= used


def test_check_reports_the_layout(awd, same, capsys):
    s = problem_summary(open_study(awd))
    assert s["layout"] == {"driven_axle": "both", "units": ["front", "rear"], "same_unit": False,
                           "motors_per_axle": {"front": 2, "rear": 2}, "multi_speed_reducers": 1}
    assert problem_summary(open_study(same))["layout"]["same_unit"] is True
    assert problem_summary(open_study(same))["combinations"] == 2 * 3 * 2
    assert run(["check", str(same)]) == 0
    assert "same unit on both axles" in capsys.readouterr().out


def test_two_unit_frontier_and_tables(awd, capsys):
    res = frontier(open_study(awd))
    assert res["points"]
    for q in res["points"]:
        assert q["motor"] is None and len(q["units"]) == 2
    assert res["chosen"]["motor"] is None and len(res["chosen"]["units"]) == 2
    assert sum(q["chosen"] for q in res["points"]) <= 1
    for argv in (["frontier", str(awd)], ["solve", str(awd)], ["shortlist", str(awd), "--count", "2"],
                 ["sweep", str(awd), "--vary", "requirements.top_speed_kmh=110:120:2", "--workers", "1"]):
        assert run(argv) == 0, argv
        out = capsys.readouterr().out
        assert "None" not in out, argv
        assert "front" in out and "rear" in out, argv


def test_two_unit_sweep_rows_name_both_units(awd):
    code, res = cli_json(["sweep", str(awd), "--vary", "requirements.top_speed_kmh=110:120:2", "--workers", "1"])
    assert code == 0
    assert res["columns"][-4:] == ["front_motor", "front_reducer", "rear_motor", "rear_reducer"]
    for r in res["rows"]:
        assert r["status"] == "optimal" and r["motor"] is None
        assert r["front_motor"] in ("M-A", "M-B") and r["rear_reducer"] in ("R-08", "R-10", "G-2S")


# ----------------------------------------------------------------------------------------- multi-speed

def _motor_force(m: dict, ratio: float, eta: float, r_m: float, v):
    """Wheel force of a motor without decline: eta min(T, P/w) G/r for w <= w_max, w = v G/r [N]."""
    w = v * ratio / r_m
    t = min(m["peak_torque_nm"], m["peak_power_kw"] * 1e3 / w) if w > 0 else m["peak_torque_nm"]
    return eta * t * ratio / r_m if w <= rpm_to_rad_s(m["max_speed_rpm"]) else 0.0


def test_multi_speed_shift_record_against_scipy(tmp_path):
    from scipy.integrate import quad
    from scipy.optimize import brentq

    mo = {**MOTORS[0], "peak_torque_nm": 180}  # first gear below the rear axle's static friction limit
    path = write_study(tmp_path / "gb", driven_axle="rear", reducers=[REDUCERS[2]], motors=[mo], tyres=[TYRES[0]])
    study = open_study(path)
    sim = simulate(study, "M-A", "G-2S", "T-16")
    assert sim["gear_ratios"] == [10.0, 6.0] and sim["units"][0]["gear_ratios"] == [10.0, 6.0]
    (shift,) = sim["shifts"]
    assert (shift["axle"], shift["from_gear"], shift["to_gear"]) == ("rear", 1, 2)
    # independent: a_g(v) = (F_g(v) - F_res(v)) / (m + J G_g^2 eta / r^2) (rotor inertia, handbook
    # convention; no wheel inertia here), shift where a_1 = a_2 (or at gear 1's gearing limit)
    p = study.parts
    m_kg = sim["mass_kg"]
    r_m = float(p.tyres.radius_m[0])
    crr = TYRES[0]["rr_coefficient_n_per_kn"] / 1000
    q = 0.5 * HAND_ENVIRONMENT["air_density_kg_m3"] * HAND_VEHICLE["drag_area_m2"]

    def accel(v, g):
        ratio = (10.0, 6.0)[g]
        f = _motor_force(mo, ratio, 0.97, r_m, v)
        m_eff = m_kg + mo["rotor_inertia_kgm2"] * ratio ** 2 * 0.97 / r_m ** 2
        return (f - m_kg * G_N * crr - q * v * v) / m_eff

    v_lim1 = rpm_to_rad_s(mo["max_speed_rpm"]) * r_m / 10.0
    diff = lambda v: accel(v, 1) - accel(v, 0)  # noqa: E731
    v_shift = brentq(diff, 1.0, v_lim1 * (1 - 1e-12), xtol=1e-14) if diff(v_lim1 * (1 - 1e-12)) > 0 else v_lim1
    assert shift["speed_kmh"] == pytest.approx(v_shift * 3.6, rel=1e-7)
    # traction never binds here: mu N_rear at rest exceeds first gear's force
    assert HAND_ENVIRONMENT["road_friction"] * HAND_VEHICLE["rear_axle_share"] * m_kg * G_N > \
        _motor_force(mo, 10.0, 0.97, r_m, 0.0)
    v_corner = mo["peak_power_kw"] * 1e3 / mo["peak_torque_nm"] * r_m / 10.0
    t_shift, _ = quad(lambda v: 1.0 / accel(v, 0), 0.0, v_shift, points=[v_corner], epsabs=0, epsrel=1e-12,
                      limit=200)
    assert shift["time_s"] == pytest.approx(t_shift, rel=1e-7)
    assert 0 < shift["time_s"] < sim["performance"]["accel_time_s"]
    # the same shift in solve's record and in the table output
    best = solve(study)["designs"][0]
    assert best["shifts"] == sim["shifts"]


# ----------------------------------------------------------------------------------------- energy

LOSSES = {"loss_copper_w_per_nm2": 0.05, "loss_iron_nm": 0.8, "loss_windage_w_s3": 2e-7, "loss_constant_w": 150}


@pytest.mark.parametrize("with_range", [True, False])
def test_energy_entry_fields(tmp_path, with_range):
    energy = {"cycle": "udds"}
    if with_range:
        energy.update({"range_km": 150, "specific_energy_wh_per_kg": 160, "cost_per_kwh": 130})
    path = write_study(tmp_path / "e", driven_axle="rear", motors=[{**m, **LOSSES} for m in MOTORS],
                       reducers=REDUCERS[:2], energy=energy, requirements={"top_speed_kmh": 100})
    res = solve(open_study(path), count=2)
    assert res["status"] == "optimal"
    for d in res["designs"]:
        e = d["energy"]
        assert e["cycle"] == "udds" and 0 <= e["regen_share"] < 1 and e["wh_per_km"] > 0
        assert "cycle_followed_pct" in [c["name"] for c in d["checks"]]
        if not with_range:
            assert e["battery_kwh"] == e["battery_mass_kg"] == e["battery_cost"] == 0
            continue
        wh = e["battery_kwh"] * 1e3
        # battery mass and cost from the battery's energy (physics.battery, published arithmetic)
        assert e["battery_mass_kg"] == pytest.approx(float(battery.battery_mass_kg(wh, 160)), rel=1e-9)
        assert e["battery_cost"] == pytest.approx(float(battery.battery_cost(wh, 130)), rel=1e-9)
        # the sized battery covers the range at its own consumption: usable energy = R c(m) (mass spiral)
        assert 0.9 * wh == pytest.approx(150 * e["wh_per_km"], rel=1e-6)
        # its mass is in the vehicle's mass and its cost in the cost
        parts_kg = HAND_VEHICLE["mass_kg"] + sum(row(MOTORS, u["motor"])["mass_kg"] +
                                                 row(REDUCERS, u["reducer"])["mass_kg"] for u in d["units"]) \
            + 4 * row(TYRES, d["tyre"])["mass_kg"]
        assert d["mass_kg"] == pytest.approx(parts_kg + e["battery_mass_kg"], rel=1e-9)
        assert d["cost"] == pytest.approx(sum(p["unit_cost"] * p["quantity"] for p in d["parts"].values())
                                          + e["battery_cost"], rel=1e-9)


# ----------------------------------------------------------------------------------------- plots

def test_two_unit_plot_axle_forces_limits_and_sum(awd, tmp_path):
    from selector.io.plots import slot_tractive_effort_data, tractive_effort_plot

    study = open_study(awd)
    ids = dict(tyre="T-16", front_motor="M-A", front_reducer="R-08", rear_motor="M-B", rear_reducer="R-10")
    out = tmp_path / "awd.png"
    fig = tractive_effort_plot(study, path=out, **ids)
    assert out.stat().st_size > 0
    labels = {ln.get_label() for ln in fig.axes[0].get_lines()}
    assert {"front friction limit, level", "rear friction limit, level", "sum of axle forces (delivered)",
            "front peak envelope", "rear peak envelope"} <= labels
    from selector.api import design_from_ids

    d = slot_tractive_effort_data(study.parts, design_from_ids(study.parts, **ids))
    f, r = d["units"]
    delivered = np.minimum(f["force_n"], f["limit_n"]) + np.minimum(r["force_n"], r["limit_n"])
    assert d["total_n"] == pytest.approx(delivered, rel=1e-12)
    # friction limits: mu N_axle at the vehicle's acceleration, N_f + N_r = m g (load transfer cancels)
    m = simulate(study, **ids)["mass_kg"]
    assert f["limit_n"] + r["limit_n"] == pytest.approx(HAND_ENVIRONMENT["road_friction"] * m * G_N, rel=1e-9)
    sim = simulate(study, **ids)
    assert d["run_time_s"][-1] == pytest.approx(sim["performance"]["accel_time_s"], rel=1e-9)
    code, _ = cli_json(["simulate", str(awd), "--tyre", "T-16", "--front-motor", "M-A", "--front-reducer", "R-08",
                        "--rear-motor", "M-B", "--rear-reducer", "R-10", "--plot", str(tmp_path / "cli.svg")])
    assert code == 0 and (tmp_path / "cli.svg").stat().st_size > 0


def test_multi_speed_plot_one_envelope_per_gear_and_shift_marks(tmp_path):
    path = write_study(tmp_path / "gb", driven_axle="rear")
    study = open_study(path)
    out = tmp_path / "gb.png"
    from selector.io.plots import tractive_effort_plot

    fig = tractive_effort_plot(study, "M-A", "G-2S", "T-16", out)
    assert out.stat().st_size > 0
    lines = {ln.get_label(): ln for ln in fig.axes[0].get_lines()}
    assert {"unit peak envelope, gear 1", "unit peak envelope, gear 2", "shift points (acceleration run)"} <= set(lines)
    (shift,) = simulate(study, "M-A", "G-2S", "T-16")["shifts"]
    assert lines["shift points (acceleration run)"].get_xdata()[0] == pytest.approx(shift["speed_kmh"])
    assert any(ln.get_label() == "shifts" for ln in fig.axes[1].get_lines())
    # gear 2's envelope ends at its gearing limit w_max r / G2
    g2 = lines["unit peak envelope, gear 2"]
    x, y = np.asarray(g2.get_xdata()), np.asarray(g2.get_ydata())
    r_m = float(study.parts.tyres.radius_m[0])
    assert np.nanmax(x[np.isfinite(y)]) <= rpm_to_rad_s(12000) * r_m / 6.0 * 3.6 + 1e-9


def test_axle_forces_single_unit_matches_single_axle_traction_curve():
    """One unit: the friction limit at the traction-limited acceleration is the single-axle traction force."""
    from selector.physics.drivetrain import Axles, absent_unit
    from selector.physics.tractive_effort import axle_forces_n, traction_limited_force_n

    n = 3
    rear = absent_unit(n)
    rear = type(rear)(**{**rear.__dict__, "present": np.ones(n, dtype=bool), "torque_nm": np.full(n, 900.0),
                         "power_w": np.full(n, 3e5), "max_speed_rad_s": np.full(n, 2000.0),
                         "decline_rad_s": np.full(n, np.inf), "ratio": np.full((n, 1), 9.0),
                         "efficiency": np.full((n, 1), 0.95), "rotor_inertia_kgm2": np.full(n, 0.05)})
    axles = Axles(absent_unit(n), rear, np.full(n, 0.32))

    class Body:
        mass_kg = np.full(n, 1600.0)
        crr = np.full(n, 0.01)
        q_n_s2_m2 = np.full(n, 0.4)
        rear_share = np.full(n, 0.5)
        road_friction = np.full(n, 0.6)
        cg_height_m = np.full(n, 0.55)
        wheelbase_m = np.full(n, 2.7)
        wheel_inertia_total_kgm2 = np.zeros(n)

    v = np.array([0.0, 2.0, 5.0])
    g = np.zeros(n, dtype=np.int64)
    out = axle_forces_n(axles, Body, v, g, g)
    # 900 N m x 9 x 0.95 / 0.32 = 24 kN: traction-limited at these speeds
    m_eff = out["effective_mass_kg"]
    kappa = 0.6 * (1600.0 / m_eff) * 0.55 / 2.7  # Gillespie load transfer, rear drive
    trac = traction_limited_force_n(0.6, 0.5 * 1600.0 * G_N, kappa, out["road_load_n"])
    assert out["rear_limit_n"] == pytest.approx(trac, rel=1e-12)
    assert out["total_n"] == pytest.approx(m_eff * out["accel_mps2"] + out["road_load_n"], rel=1e-12)
    assert np.all(np.isnan(out["front_limit_n"])) and np.all(out["front_delivered_n"] == 0)
    assert math.isclose(float(trac[0]), (0.6 * 0.5 * 1600 * G_N - kappa[0] * 1600 * G_N * 0.01) / (1 - kappa[0]))


def test_solve_infeasible_two_unit_study_is_diagnosed(tmp_path, capsys):
    # explain supports two-unit studies: solve attaches its diagnosis (here the budget is below every
    # pair of units)
    path = write_study(tmp_path / "inf", requirements={**REQUIREMENTS, "budget": 1000})
    code, res = cli_json(["solve", str(path)])
    assert code == 0 and res["status"] == "infeasible" and res["designs"] == []
    assert any("budget" in line for line in res["diagnosis"]["summary"])
    assert run(["solve", str(path)]) == 0
    assert "meets every requirement" in capsys.readouterr().out


def test_two_unit_gearbox_shifts_name_their_axle(awd, tmp_path):
    study = open_study(awd)
    sim = simulate(study, tyre="T-16", front_motor="M-A", front_reducer="G-2S", rear_motor="M-A",
                   rear_reducer="R-08")
    assert sim["units"][0]["gear_ratios"] == [10.0, 6.0] and sim["units"][1]["gear_ratios"] == [8.0]
    assert [(s["axle"], s["from_gear"], s["to_gear"]) for s in sim["shifts"]] == [("front", 1, 2)]
    (s,) = sim["shifts"]
    # the front unit shifts no later than its motor reaches its maximum speed in first gear (w_max r / G1)
    r_m = float(study.parts.tyres.radius_m[0])
    assert 0 < s["speed_kmh"] <= rpm_to_rad_s(12000) * r_m / 10.0 * 3.6 * (1 + 1e-12)
    assert 0 < s["time_s"] < sim["performance"]["accel_time_s"]


def test_two_unit_sweep_plot_written(awd, tmp_path):
    out = tmp_path / "sweep.png"
    assert run(["sweep", str(awd), "--vary", "requirements.top_speed_kmh=110:150:3", "--workers", "1",
                "--plot", str(out)]) == 0
    assert out.stat().st_size > 0


def test_two_unit_shortlist_xlsx_rows_per_axle(same, tmp_path):
    import openpyxl

    out = tmp_path / "s.xlsx"
    assert run(["shortlist", str(same), "--count", "2", "--out", str(out)]) == 0
    wb = openpyxl.load_workbook(out)
    head, *rows = list(wb["Shortlist"].values)
    assert rows and all(r[head.index("motor")].startswith("both: ") for r in rows)
    bom_head, *bom = list(wb["BOM"].values)
    motor_lines = [r for r in bom if r[bom_head.index("item")] == "motor (both axles)"]
    assert len(motor_lines) == len(rows) and all(r[bom_head.index("quantity_per_vehicle")] == 2 for r in motor_lines)


@pytest.mark.parametrize("same_unit", [False, True])
def test_check_counts_the_designs_in_play(tmp_path, same_unit):
    # Project convention: `combinations` counts every catalogue choice; `combinations_in_play` only those
    # that pass the procurement filter and the [drive] motor filters, counted here by enumeration.
    motors = MOTORS + [motor_row("M-C", supplier="Far Away Motors", lead_time_weeks=20)]
    path = write_study(tmp_path, drive={"same_unit": same_unit, "front_motors": ["M-A", "M-C"]}, motors=motors)
    path.write_text(path.read_text() + "\n[procurement]\nmax_lead_time_weeks = 10\n")
    s = problem_summary(open_study(path))
    ok = [m["part"] for m in motors if m["lead_time_weeks"] <= 10]
    front = [m for m in ok if m in ("M-A", "M-C")]
    units_f = [(m, r["part"]) for m in front for r in REDUCERS]
    units_r = [(m, r["part"]) for m in ok for r in REDUCERS]
    designs = [(f, r, t["part"]) for f in units_f for r in units_r for t in TYRES if not same_unit or f == r]
    assert s["combinations"] == (3 * 3) ** (1 if same_unit else 2) * 2
    assert s["combinations_in_play"] == len(designs) == (3 * 2 if same_unit else 3 * 6 * 2)


def test_frontier_time_limit_keeps_the_exact_points_traced(awd, monkeypatch):
    # Project convention: a frontier stopped by its time limit lists the exact frontier's first points
    # (from the low end of the axis) with status "time_limit". The limit is simulated by letting the
    # third search stop, so the test does not depend on the machine's speed.
    import selector.studies.frontier as fr
    from selector.engine.search import SearchResult

    study = open_study(awd)
    whole = frontier(study)
    assert whole["status"] == "optimal" and len(whole["points"]) >= 3
    real, calls = fr.search, []

    def stops_at_the_third(*args, **kw):
        calls.append(kw.get("time_limit_s"))
        if len(calls) == 3:
            return SearchResult(status="time_limit", objective=kw.get("objective") or "cost")
        return real(*args, **kw)

    monkeypatch.setattr(fr, "search", stops_at_the_third)
    part = frontier(study, time_limit_s=3600.0)
    assert part["status"] == "time_limit"
    # time was left for the problem's own optimum; on_frontier is True only if it is among the points
    # traced, else unknown (None), never False
    assert part["chosen"]["on_frontier"] in (True, None)
    assert {k: v for k, v in part["chosen"].items() if k != "on_frontier"} == \
        {k: v for k, v in whole["chosen"].items() if k != "on_frontier"}
    assert 1 <= len(part["points"]) < len(whole["points"])
    key = lambda q: (q["cost"], q["accel_time_s"], q["tyre"], [(u["motor"], u["reducer"]) for u in q["units"]])  # noqa: E731
    assert [key(q) for q in part["points"]] == [key(q) for q in whole["points"][:len(part["points"])]]
    assert all(0.0 < left <= 3600.0 for left in calls)  # each search gets what is left of the whole limit
    assert run(["frontier", str(awd), "--time-limit", "1e-9"]) == 0  # nothing traced: an honest empty answer


def test_frontier_time_limit_on_a_single_axle_sweep(tmp_path, capsys):
    # The one-sweep frontier of a single-axle study has no exact point until it ends: none are listed.
    path = write_study(tmp_path, driven_axle="rear")
    res = frontier(open_study(path), time_limit_s=1e-9)
    assert res["status"] == "time_limit" and res["points"] == [] and res["chosen"] is None
    assert run(["frontier", str(path), "--time-limit", "1e-9"]) == 0
    out = capsys.readouterr().out
    assert "stopped at the time limit after 0 points" in out and "frontier is empty" not in out
    assert frontier(open_study(path))["status"] == "optimal"


def test_grade_beyond_all_wheel_traction_is_infeasible_before_any_search(tmp_path, monkeypatch):
    # Wong, Theory of Ground Vehicles: with every wheel driven the traction-limited grade is
    # tan(theta) = mu - f_r whatever the load transfer (mu = 0.9, f_r = 8 N/kN -> 89.2 %).
    import selector.studies.explain_relax as relax
    from selector.studies.explain import explain

    limit_pct = 100.0 * (0.9 - 8.0 / 1000.0)
    path = write_study(tmp_path, requirements={**REQUIREMENTS, "gradeability_pct": 95})
    res = solve(open_study(path))
    assert res["status"] == "infeasible"
    assert "traction of both axles" in res["reason"] and f"{limit_pct:.4g} %" in res["reason"]
    # explain on a study above its enumeration limit: the impossibility, its own conflict, and the
    # relaxation to the limit confirmed by a re-solve, without a closest design
    monkeypatch.setattr(relax, "EXPLAIN_MAX_DESIGNS", 1)
    ex = explain(open_study(path))
    assert [d["name"] for d in ex["impossible"]] == ["gradeability_pct"]
    assert ex["impossible"][0]["limit"] == pytest.approx(limit_pct, rel=1e-12)
    assert ex["conflicts"] == [["gradeability_pct"]] and ex["closest"] is None
    assert "enumeration limit" in ex["closest_note"]
    relaxed = ex["relaxation"]["gradeability_pct"]
    assert relaxed <= limit_pct and relaxed == pytest.approx(limit_pct, rel=1e-3)
    assert ex["relaxation_verified"] is True
    check = solve(open_study(write_study(tmp_path / "relaxed", requirements={**REQUIREMENTS,
                                                                             "gradeability_pct": relaxed})))
    assert check["status"] == "optimal" and check["objective"]["value"] == ex["relaxed_optimum"]["objective"]


def test_filters_that_leave_an_axle_without_motors_are_named(tmp_path, capsys):
    # Project convention: when the procurement filter and [drive] front_motors together leave the front
    # axle no motor, check warns and solve and explain name both rules (not "no design passes").
    from selector.studies.explain import explain

    motors = MOTORS + [motor_row("M-C", supplier="Far Away Motors", lead_time_weeks=20)]
    path = write_study(tmp_path, drive={"front_motors": ["M-C"]}, motors=motors)
    path.write_text(path.read_text() + "\n[procurement]\nmax_lead_time_weeks = 10\n")
    study = open_study(path)
    s = problem_summary(study)
    assert s["combinations_in_play"] == 0
    assert "no motor is left for the front axle" in s["no_design_left"]
    assert run(["check", str(path)]) == 0 and "warning: no motor is left" in capsys.readouterr().out
    res = solve(study)
    assert res["status"] == "infeasible" and "procurement filters" in res["reason"]
    assert "[drive] front_motors" in res["reason"]
    ex = explain(study)
    assert ex["closest"] is None and "no motor is left for the front axle" in ex["closest_note"]
