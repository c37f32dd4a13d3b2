"""`simulate --plot` of an energy study: the cycle's operating points over the motor's envelope (and map)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from selector.api import design_from_ids, open_study
from selector.cli import run
from selector.engine.energy import energy_unit, setup
from selector.engine.evaluate import evaluate
from selector.io.cycle_plot import cycle_plot_path, cycle_points_data, cycle_points_plot
from selector.physics.energy import EnergyVehicle, cycle_trace
from selector.physics.motor import envelope_torque_nm
from selector.units import rpm_to_rad_s

ROOT = Path(__file__).resolve().parents[1]
VAN = ROOT / "problems" / "delivery_van_energy.toml"
DESIGN = {"motor": "HD-M124", "reducer": "CG-C35-115", "tyre": "GR-T1407"}  # a polynomial-loss motor
MAPPED = {"motor": "KM-M118", "reducer": "CG-C35-115", "tyre": "GR-T1407"}  # a motor with an efficiency map


@pytest.fixture(scope="module")
def van():
    return open_study(VAN)


def _physics_points(study, ids):
    """The operating points straight from the physics function (independent of the plot module)."""
    parts = study.parts
    design = design_from_ids(parts, **ids)
    (_, m, r), = design.units
    mass = evaluate(parts, np.asarray(design.key)[None, :], accel=False)["mass_kg"]
    unit = energy_unit(parts, [m], [r])
    st = setup(parts)
    veh = EnergyVehicle(mass_kg=mass, crr=parts.tyres.crr[[design.tyre]], q_n_s2_m2=parts.q_n_s2_m2,
                        radius_m=parts.tyres.radius_m[[design.tyre]],
                        wheel_inertia_total_kgm2=(parts.problem.vehicle.tyre_count
                                                  * parts.problem.vehicle.wheel_inertia_kgm2))
    axle = "front" if design.key[0] >= 0 else "rear"
    front, rear = (unit, None) if axle == "front" else (None, unit)
    tr = cycle_trace(front, rear, veh, st.params, st.time_s, st.speed_mps)
    u = 0 if axle == "front" else 1
    ok = (tr.speed_mps > 0) & (tr.gear[u, 0] > 0) & np.isfinite(tr.motor_torque_nm[u, 0])
    return tr.motor_speed_rad_s[u, 0][ok], tr.motor_torque_nm[u, 0][ok]


@pytest.mark.parametrize("ids", [DESIGN, MAPPED], ids=["loss model", "map"])
def test_plotted_points_are_the_physics_points(van, tmp_path, ids):
    w, t = _physics_points(van, ids)
    assert w.size > 1000  # WLTC class 3b: 1800 s, most of it moving
    fig = cycle_points_plot(van, design_from_ids(van.parts, **ids), tmp_path / "c.png")
    ax = fig.axes[0]
    offsets = np.concatenate([np.asarray(c.get_offsets(), dtype=float) for c in ax.collections
                              if c.get_label().startswith("cycle points")])
    assert offsets.shape == (w.size, 2)
    assert np.sort(rpm_to_rad_s(offsets[:, 0])) == pytest.approx(np.sort(w), rel=1e-12)
    assert np.sort(offsets[:, 1]) == pytest.approx(np.sort(t), rel=1e-12, abs=1e-9)
    assert (tmp_path / "c.png").stat().st_size > 0


def test_envelope_and_map_drawn(van):
    d = cycle_points_data(van, design_from_ids(van.parts, **MAPPED))
    q, = d["units"]
    mo = van.parts.motors
    m = int(np.flatnonzero(mo.part == MAPPED["motor"])[0])
    w = rpm_to_rad_s(q["env_speed_rpm"])
    peak = envelope_torque_nm(w, mo.torque_nm[m], mo.power_w[m], mo.decline_rad_s[m], mo.decline_exponent[m],
                              mo.max_speed_rad_s[m])
    assert q["peak_nm"] == pytest.approx(peak, rel=1e-12)
    assert q["peak_nm"][0] == pytest.approx(mo.torque_nm[m])  # constant-torque region from rest
    assert q["map"] is not None and q["map"]["efficiency_pct"].max() <= 100.0
    # every point lies within the peak envelope (the cycle is followed, regeneration within the envelope)
    env = np.interp(q["speed_rpm"], q["env_speed_rpm"], q["peak_nm"])
    assert np.all(np.abs(q["torque_nm"]) <= env * (1 + 1e-6) + 1e-9)


def test_simulate_writes_the_sibling_file_and_lists_it(tmp_path, capsys):
    plot = tmp_path / "van.svg"
    code = run(["simulate", str(VAN), "--motor", DESIGN["motor"], "--reducer", DESIGN["reducer"], "--tyre",
                DESIGN["tyre"], "--plot", str(plot), "--format", "json"])
    assert code == 0
    out = json.loads(capsys.readouterr().out)
    assert out["plot"] == str(plot)
    assert out["cycle_plot"] == str(tmp_path / "van-cycle.svg") == str(cycle_plot_path(plot))
    assert (tmp_path / "van-cycle.svg").read_text().startswith("<?xml")
    assert plot.exists()


def test_no_cycle_chart_without_energy(tmp_path, capsys):
    plot = tmp_path / "pv.png"
    code = run(["simulate", str(ROOT / "problems" / "parcel_van.toml"), "--motor", "BI-M087", "--reducer",
                "FG-S20-121", "--tyre", "AW-T1606", "--plot", str(plot), "--format", "json"])
    assert code == 0
    out = json.loads(capsys.readouterr().out)
    assert "cycle_plot" not in out and not (tmp_path / "pv-cycle.png").exists()


def test_cycle_chart_never_overwrites_an_input(tmp_path, capsys):
    text = VAN.read_text().replace('"../catalogs/', f'"{ROOT / "catalogs"}/')
    problem = tmp_path / "van-cycle.svg"  # the chart of --plot van.svg would go exactly here
    problem.write_text(text)
    before = problem.read_bytes()
    code = run(["simulate", str(problem), "--motor", DESIGN["motor"], "--reducer", DESIGN["reducer"], "--tyre",
                DESIGN["tyre"], "--plot", str(tmp_path / "van.svg"), "--format", "json"])
    err = capsys.readouterr().err
    assert code == 2
    assert "input file" in err
    assert problem.read_bytes() == before
    assert not (tmp_path / "van.svg").exists()  # nothing half-written
