"""The tractive-effort diagram: files written, and the plotted curves agree with hand formulas."""

from __future__ import annotations

import math

import numpy as np
import pytest

from selector.api import find_part, open_study
from selector.cli import run
from selector.engine.evaluate import evaluate
from selector.errors import InputError
from selector.io.plots import tractive_effort_data, tractive_effort_plot
from selector.physics.vehicle import traction_force_limit_n
from selector.units import G_N

VAN = "problems/parcel_van.toml"
DESIGN = ("BI-M087", "FG-S20-121", "AW-T1606")  # the parcel van's cost optimum (see test_demo_problems)


@pytest.fixture(scope="module")
def van():
    study = open_study(VAN)
    parts = study.parts
    ijk = (find_part(parts, "motor", DESIGN[0]), find_part(parts, "reducer", DESIGN[1]),
           find_part(parts, "tyre", DESIGN[2]))
    return study, ijk, tractive_effort_data(parts, *ijk)


def test_peak_force_at_low_speed_is_eta_torque_ratio_over_radius(van):
    study, (i, j, k), d = van
    p = study.parts
    # F = eta T G / r below the corner speed (textbook wheel force, e.g. Ehsani et al., Modern EV, ch. 2)
    expected = p.reducers.efficiency[j] * p.motors.torque_nm[i] * p.reducers.ratio[j] / p.tyres.radius_m[k]
    assert d["peak_n"][0] == pytest.approx(expected, rel=1e-12)
    assert d["cont_n"][0] == pytest.approx(expected * p.motors.cont_torque_nm[i] / p.motors.torque_nm[i], rel=1e-12)
    # power branch: F v = eta P at a speed between corner and decline
    v_corner = p.motors.power_w[i] / p.motors.torque_nm[i] * p.tyres.radius_m[k] / p.reducers.ratio[j]
    v_decline = p.motors.decline_rad_s[i] * p.tyres.radius_m[k] / p.reducers.ratio[j]
    v = d["speed_mps"]
    sel = (v > v_corner * 1.01) & (v < min(v_decline, d["gearing_limit_mps"]) * 0.99)
    assert sel.any()
    assert d["peak_n"][sel] * v[sel] == pytest.approx(p.reducers.efficiency[j] * p.motors.power_w[i], rel=1e-12)


@pytest.mark.parametrize("axle", ["rear", "front"])
def test_traction_curve_is_mu_times_driven_axle_load_at_its_own_acceleration(van, axle):
    import dataclasses

    from selector.engine.parts import PartTables
    from selector.io.problem import load_study

    study, (i, j, k), _ = van
    problem, catalogs = load_study(VAN)
    problem = dataclasses.replace(problem, vehicle=dataclasses.replace(problem.vehicle, driven_axle=axle))
    parts = PartTables.build(problem, catalogs)
    d = tractive_effort_data(parts, i, j, k)
    m = evaluate(parts, [i], [j], [k])
    mass, m_eff = m["mass_kg"][0], m["effective_mass_kg"][0]
    veh = problem.vehicle
    f = d["traction_n"]
    a = (f - d["road_level_n"]) / m_eff  # the acceleration this force gives
    # mu N_driven, N_rear = m g s_r + m a h/L, N_front = m g (1 - s_r) - m a h/L (Gillespie ch. 2 load transfer)
    mu_n = traction_force_limit_n(problem.environment.road_friction, mass, m["rear_axle_share"][0],
                                  veh.cg_height_m, veh.wheelbase_m, axle == "rear", accel_mps2=a)
    assert np.all(np.isfinite(f))
    assert f == pytest.approx(mu_n, rel=1e-12)


def test_road_load_and_acceleration_run(van):
    study, (i, j, k), d = van
    p = study.parts
    m = evaluate(p, [i], [j], [k])
    # road load on the level at rest is m g Crr
    assert d["road_level_n"][0] == pytest.approx(m["mass_kg"][0] * G_N * p.tyres.crr[k], rel=1e-12)
    # on the grade: m g (Crr cos(theta) + sin(theta)) at rest, tan(theta) = 25 %
    th = math.atan(0.25)
    assert d["road_grade_n"][0] == pytest.approx(m["mass_kg"][0] * G_N * (p.tyres.crr[k] * math.cos(th) + math.sin(th)),
                                                 rel=1e-12)
    t, vs = d["run_time_s"], d["run_speed_mps"]
    assert t[0] == 0 and np.all(np.diff(t) > 0) and np.all(np.diff(vs) > 0)
    assert vs[-1] == pytest.approx(50 / 3.6, rel=1e-12)
    assert t[-1] == pytest.approx(m["accel_time_s"][0], rel=1e-12)
    # the first speed step at constant acceleration: t = v / a_launch (launch is force-limited here)
    assert t[1] == pytest.approx(vs[1] / m["launch_accel_mps2"][0], rel=1e-3)


def test_plot_files_png_and_svg(van, tmp_path):
    import matplotlib.image

    study, _, d = van
    png = tmp_path / "te.png"
    fig = tractive_effort_plot(study, *DESIGN, png)
    assert png.stat().st_size > 0
    img = matplotlib.image.imread(png)
    assert img.ndim == 3 and img.shape[1] > img.shape[0] > 100
    ax, ax2 = fig.axes
    assert ax.get_xlabel() == "road speed [km/h]" and ax.get_ylabel() == "wheel force [kN]"
    assert ax2.get_xlabel() == "time [s]" and ax2.get_ylabel() == "road speed [km/h]"
    (peak,) = [ln for ln in ax.get_lines() if ln.get_label() == "peak envelope"]
    assert peak.get_ydata() == pytest.approx(d["peak_n"] / 1e3, rel=1e-12)
    assert any("top_speed_kmh required" in ln.get_label() for ln in ax.get_lines())
    svg = tmp_path / "te.svg"
    tractive_effort_plot(study, *DESIGN, svg)
    assert "<svg" in svg.read_text(encoding="utf-8")[:2000]
    assert any("Caution: figures are estimates" in t.get_text() for t in fig.texts)  # printed on every chart
    assert sorted(p.name for p in tmp_path.iterdir()) == ["te.png", "te.svg"]  # no temporary files left


def test_plot_bad_paths_and_cli(van, tmp_path, capsys):
    study, _, _ = van
    with pytest.raises(InputError, match="not a known output format"):
        tractive_effort_plot(study, *DESIGN, tmp_path / "te.bmp")
    with pytest.raises(InputError, match="does not exist"):
        tractive_effort_plot(study, *DESIGN, tmp_path / "missing" / "te.png")
    with pytest.raises(InputError, match="no such part"):
        tractive_effort_plot(study, "NOPE", DESIGN[1], DESIGN[2], tmp_path / "te.png")
    out = tmp_path / "cli.png"
    argv = ["simulate", VAN, "--motor", DESIGN[0], "--reducer", DESIGN[1], "--tyre", DESIGN[2], "--plot", str(out)]
    assert run(argv) == 0
    assert out.stat().st_size > 0 and "plot written to" in capsys.readouterr().out


def test_no_grade_requirement_no_grade_curve(tmp_path):
    # the roadster states no gradeability: no grade curve; its acceleration run ends at 100 km/h
    study = open_study("problems/roadster.toml")
    p = study.parts
    ijk = (find_part(p, "motor", "BI-M200"), find_part(p, "reducer", "AT-A10-056"), find_part(p, "tyre", "PT-T1712"))
    d = tractive_effort_data(p, *ijk)
    assert d["road_grade_n"] is None and d["grade_pct"] is None
    assert d["run_speed_mps"][-1] == pytest.approx(100 / 3.6, rel=1e-12)
    fig = tractive_effort_plot(study, "BI-M200", "AT-A10-056", "PT-T1712", tmp_path / "r.png")
    assert not any("grade" in ln.get_label() for ln in fig.axes[0].get_lines())
