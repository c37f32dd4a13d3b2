"""Changes of the limiting traction combination close together (regression of an independent check).

Two identical motors, one per axle, with equal ratios and slightly different efficiencies on a road
where the launch is traction-limited: the front and rear axles stop being traction-limited 0.45 m/s
apart, closer than the samples that look for such changes. Both kinks must become quadrature
breakpoints; before they did, the time was 1.3e-6 too long and the independent re-check (solve_ivp in
the time domain, `engine.verify`) rejected the design.

Oracle: scipy.integrate.quad of 1/a(v) with the kinks located on a dense grid here, and the CLI's own
independent re-check. Catalogue rows are invented for the test.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from generators import motor_row, reducer_row, tyre_row, write_csv, write_problem
from scipy.integrate import quad

from selector.api import find_part, open_study
from selector.cli import run
from selector.physics import accel_run as ar

MOTOR = motor_row("M-TWIN", peak_torque_nm=162, peak_power_kw=42.5, max_speed_rpm=8500, cont_torque_nm=97,
                  cont_power_kw=26.5, mass_kg=76.8, rotor_inertia_kgm2=0.0244, unit_cost=1400)
REDUCERS = [reducer_row("R-A", ratio=8.9, efficiency_pct=97.4, max_input_torque_nm=200, mass_kg=9.2),
            reducer_row("R-B", ratio=8.9, efficiency_pct=97.1, max_input_torque_nm=450, mass_kg=20.4)]
TYRE = tyre_row("T-18", size="235/45R18", load_index=98, speed_symbol="W", rr_coefficient_n_per_kn=6.3, mass_kg=12)
VEHICLE = {"mass_kg": 675.0, "drag_area_m2": 0.827, "wheelbase_m": 3.311, "cg_height_m": 0.435,
           "rear_axle_share": 0.403, "driven_axle": "both", "tyre_count": 4, "rolling_radius_factor": 0.95}


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    d = tmp_path_factory.mktemp("twin")
    write_csv(d / "motors.csv", "motors", [MOTOR])
    write_csv(d / "reducers.csv", "reducers", REDUCERS)
    write_csv(d / "tyres.csv", "tyres", [TYRE])
    write_problem(d / "problem.toml", "Twin units, close traction changes (invented data)", VEHICLE,
                  {"air_density_kg_m3": 1.139, "road_friction": 0.595}, {"accel_to_kmh": 110.0}, "cost")
    return d / "problem.toml"


def _state(path):
    parts = open_study(path).parts
    m = find_part(parts, "motor", "M-TWIN")
    keys = np.array([[m, find_part(parts, "reducer", "R-B"), m, find_part(parts, "reducer", "R-A"),
                      find_part(parts, "tyre", "T-18")]])
    axles, body = parts.design(keys)
    return axles, body, ar._state(axles, body, np.zeros(1, dtype=int), np.zeros(1, dtype=int))


@pytest.mark.parametrize("frac", [0.5, 0.8, 0.9, 0.96, 0.97, 0.999])
def test_time_agrees_with_quad_when_traction_changes_are_close(study, frac):
    axles, body, st = _state(study)
    v_max = float(ar.speed_cap_mps(axles)[0])
    target = frac * v_max
    vs = np.linspace(0.0, target, 400_001)
    lab = ar.state_accel(st, vs[None, :], labels=True)[1][0]
    kinks = vs[1:][lab[1:] != lab[:-1]]
    assert kinks.size >= 2 and np.diff(kinks).min() < 1.0  # the case: two changes within a sample spacing
    corners = [float(b[0]) for b in ar._unit_breaks(st, np.zeros(1), np.array([target]))]
    points = sorted({float(p) for p in [*kinks, *corners] if 0.0 < p < target})
    ref, err = quad(lambda v: 1.0 / ar.state_accel(st, np.array([[v]]))[0, 0], 0.0, target, points=points,
                    limit=5000, epsabs=0.0, epsrel=1e-13)
    assert err < 1e-11 * ref
    assert ar.accel_time_s(axles, body, target)[0] == pytest.approx(ref, rel=1e-10)


def test_simulate_passes_the_independent_recheck(study, capsys):
    argv = ["simulate", str(study), "--front-motor", "M-TWIN", "--front-reducer", "R-B", "--rear-motor", "M-TWIN",
            "--rear-reducer", "R-A", "--tyre", "T-18", "--format", "json"]
    assert run(argv) == 0
    d = json.loads(capsys.readouterr().out)["design"]
    assert d["performance"]["accel_time_s"] > 0
