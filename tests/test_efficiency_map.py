"""Efficiency-map files and the motor loss columns of the catalogue (selector.io.efficiency_map, catalog)."""

from __future__ import annotations

import math
import warnings
from pathlib import Path

import numpy as np
import pytest

from selector.errors import InputError
from selector.io.catalog import CatalogWarning, load_catalog, motor_loss_models
from selector.io.efficiency_map import load_efficiency_map
from selector.physics.losses import peak_efficiency
from selector.units import RPM_TO_RAD_S

DATA = Path(__file__).parent / "data"
ENERGY = DATA / "energy"
DEMO = Path(__file__).parents[1] / "catalogs"


def write(tmp_path: Path, text: str, name: str = "map.csv") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_valid_map_any_row_and_column_order():
    g = load_efficiency_map(ENERGY / "maps" / "m_map.csv")
    # 0, 6000, 12000 rpm in rad/s (x 2 pi / 60); torques 0, 100, 200 N m; efficiencies as fractions
    np.testing.assert_allclose(g.speed_rad_s, [0.0, 6000 * RPM_TO_RAD_S, 12000 * RPM_TO_RAD_S])
    np.testing.assert_array_equal(g.torque_nm, [0.0, 100.0, 200.0])
    np.testing.assert_allclose(g.efficiency, [[0, 0, 0], [0, 0.94, 0.92], [0, 0.80, 0.90]])
    assert g.mirrored and g.name == str(ENERGY / "maps" / "m_map.csv")


@pytest.mark.parametrize("text, expected", [
    ("speed_rpm,torque,efficiency_pct\n", 'unknown column "torque" (did you mean "torque_nm"?)'),
    ("speed_rpm,efficiency_pct\n0,0\n", 'column "torque_nm" is missing'),
    ("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n0,1,0\n1,0,0\n1,1,90\n1,1,91\n",
     "line 6: the point speed_rpm = 1, torque_nm = 1 is also on line 5; each grid point must appear once"),
    ("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n0,1,0\n", "1 distinct speed and 2 distinct torques; a map needs "
     "at least 2 of each"),
    ("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n0,1,0.5\n1,0,0.5\n1,1,0.9\n", "they look like fractions"),
    ("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n0,1,0\n1,0,0\n1,1,90,5\n", "line 5: 4 cells but the header has 3 "
     "columns. Fix the row (numbers take a decimal point, not a decimal comma)."),
    ("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n0,1,0\n1,0,0\n1,1,inf\n", "line 5: efficiency_pct = inf; must be "
     "a finite number [%]"),
    ("# only comments\n", "no header row"),
    ("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n0,1,0\n1,0,0\n1,1,\uff19\uff10\n", "line 5: efficiency_pct = "
     "'\uff19\uff10'; must be a number [%]"),  # plain ASCII digits only
])
def test_map_errors(tmp_path, text, expected):
    p = write(tmp_path, text)
    msg = str(pytest.raises(InputError, load_efficiency_map, p).value)
    assert expected in msg
    assert msg.startswith(str(p))


def test_negative_torques_make_a_two_sided_map(tmp_path):
    p = write(tmp_path, "speed_rpm,torque_nm,efficiency_pct\n0,-10,0\n0,10,0\n100,-10,85\n100,10,90\n")
    assert not load_efficiency_map(p).mirrored


# ------------------------------------------------------------------------------ catalogue


def test_catalogue_loads_maps_relative_to_itself_and_reports_loss_models():
    df = load_catalog("motors", ENERGY / "motors.csv").set_index("part")
    assert df.loc["M-MAP", "efficiency_map"] == "maps/m_map.csv"
    grid = df.loc["M-MAP", "efficiency_map_grid"]
    assert grid.efficiency.shape == (3, 3)
    assert df.loc["M-POLY", "efficiency_map_grid"] is None
    assert df.loc["M-POLY", "loss_copper_w_per_nm2"] == 0.05 and df.loc["M-POLY", "loss_constant_w"] == 300.0
    assert math.isnan(df.loc["M-NONE", "loss_iron_nm"])
    kinds = dict(zip(df.index, motor_loss_models(df.reset_index()), strict=True))
    assert kinds == {"M-MAP": "map", "M-NONE": "none", "M-POLY": "polynomial"}


def test_catalogue_without_the_new_columns_has_no_loss_models():
    df = load_catalog("motors", DATA / "valid" / "motors.csv")
    assert list(motor_loss_models(df)) == ["none"] * 3
    assert df["efficiency_map_grid"].isna().all()


def test_implausible_loss_model_warns(tmp_path):
    head = (ENERGY / "motors.csv").read_text(encoding="utf-8").splitlines()[3]
    # k_c = 50 W/(N m)^2 (a unit slip): at any speed the best torque sqrt(L0 / k_c) is a few N m, so the
    # peak efficiency is about 71 % (by hand at 12000 rpm = 1256.6 rad/s: L0 = 1325 W, T = 5.15 N m,
    # eta = 6.47 / (6.47 + 2 x 1.325) kW = 0.709)
    p = write(tmp_path, head + "\nM-BAD,Volta Drives,200,60,12000,100,35,,,40,0.02,1500,6,50,0.5,2e-7,300,\n",
              "motors.csv")
    with pytest.warns(CatalogWarning, match=r"line 2 \(part \"M-BAD\"\): the loss model gives a peak efficiency "
                                            r"of \d+\.\d % under the torque envelope; outside 80..99 %"):
        load_catalog("motors", p)


def test_map_shared_by_two_motors_is_read_once_and_errors_name_each_motor(tmp_path):
    head = (ENERGY / "motors.csv").read_text(encoding="utf-8").splitlines()[3]
    (tmp_path / "bad.csv").write_text("speed_rpm,torque_nm,efficiency_pct\n0,0,0\n", encoding="utf-8")
    p = write(tmp_path, head + "\nM-1,V,200,60,12000,100,35,,,40,0.02,1500,6,,,,,bad.csv"
                               "\nM-2,V,200,60,12000,100,35,,,40,0.02,1500,6,,,,,bad.csv\n", "motors.csv")
    msg = str(pytest.raises(InputError, load_catalog, "motors", p).value)
    assert 'line 2 (part "M-1"): efficiency_map = "bad.csv" cannot be used' in msg
    assert 'line 3 (part "M-2"): efficiency_map = "bad.csv" cannot be used' in msg


# ------------------------------------------------------------------------------ demo data


def test_demo_motors_have_plausible_loss_models_and_maps():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        df = load_catalog("motors", DEMO / "motors.csv")
    kinds = motor_loss_models(df)
    assert set(kinds) == {"polynomial", "map"} and list(kinds).count("map") == 3
    for r in df.itertuples():
        # invented demo data: peak efficiency 90-96 % (common practice for traction motors, no published source)
        peak = peak_efficiency(r.loss_copper_w_per_nm2, r.loss_iron_nm, r.loss_windage_w_s3, r.loss_constant_w,
                               r.peak_torque_nm, r.peak_power_kw * 1e3, r.decline_speed_rpm * RPM_TO_RAD_S,
                               r.decline_exponent, r.max_speed_rpm * RPM_TO_RAD_S)
        assert 0.90 <= peak <= 0.961, (r.part, peak)
        g = r.efficiency_map_grid
        if g is not None:  # the map covers the whole envelope
            assert g.speed_rad_s[0] == 0.0 and g.speed_rad_s[-1] == pytest.approx(r.max_speed_rpm * RPM_TO_RAD_S)
            assert g.torque_nm[0] == 0.0 and g.torque_nm[-1] == pytest.approx(r.peak_torque_nm)
            assert 0.90 <= g.efficiency.max() <= 0.965
        assert "illustrative" in (DEMO / "maps" / f"{r.part}.csv").read_text(encoding="utf-8").splitlines()[0] \
            if g is not None else True


def _energy_study(tmp_path: Path):
    """Three motors (invented data): one with the loss model, one without loss data, one with a map that ends at
    60 N m (the cycle needs more torque at some intervals); a rear-drive van on the WLTC, 200 km."""
    from selector.synthetic_files import motor_row, reducer_row, tyre_row, write_csv, write_problem

    speeds, torques = [0, 3000, 6000, 9000, 12000], [0, 30, 60]
    lines = ["speed_rpm,torque_nm,efficiency_pct"] + [f"{w},{t},{0 if w == 0 or t == 0 else 92}"
                                                      for w in speeds for t in torques]
    (tmp_path / "small.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    loss = {"loss_copper_w_per_nm2": 0.05, "loss_iron_nm": 0.6, "loss_windage_w_s3": 1e-7,
            "loss_constant_w": 100}
    write_csv(tmp_path / "motors.csv", "motors", [motor_row("M-LOSS", **loss), motor_row("M-NONE"),
                                                  motor_row("M-MAP", efficiency_map="small.csv")])
    write_csv(tmp_path / "reducers.csv", "reducers", [reducer_row("R-1")])
    write_csv(tmp_path / "tyres.csv", "tyres", [tyre_row("T-1")])
    vehicle = {"mass_kg": 1500.0, "drag_area_m2": 0.8, "wheelbase_m": 2.8, "cg_height_m": 0.6,
               "rear_axle_share": 0.5, "driven_axle": "rear", "tyre_count": 4}
    write_problem(tmp_path / "problem.toml", "Energy diagnostics (invented data)", vehicle, {"road_friction": 0.9},
                  {}, "cost", energy={"cycle": "wltc_class3b", "range_km": 200, "specific_energy_wh_per_kg": 160,
                                      "cost_per_kwh": 140})
    return tmp_path / "problem.toml"


def test_energy_study_names_motors_without_loss_data_and_points_outside_a_map(tmp_path, capsys):
    from selector.api import open_study, simulate
    from selector.cli import run

    path = _energy_study(tmp_path)
    assert run(["check", str(path)]) == 0
    captured = capsys.readouterr()
    out = captured.out
    assert 'efficiency_map = "small.csv" reaches 12000 rpm and 60 N m' in captured.err
    assert "1 motor without loss data" in out and "M-NONE" in out and "M-LOSS" not in out.split("loss data")[1]
    # the map that ends at 60 N m is warned about when the catalogue is read (found by fuzzing: silent before)
    with pytest.warns(CatalogWarning, match=r'"M-MAP"\): efficiency_map = "small.csv" reaches 12000 rpm and 60 N m'):
        study = open_study(path)
    rec = simulate(study, motor="M-NONE", reducer="R-1", tyre="T-1")
    assert not rec["feasible"] and "motor_loss_data" in [u["name"] for u in rec["unmet"]]
    rec = simulate(study, motor="M-MAP", reducer="R-1", tyre="T-1")
    why = {u["name"]: u["why"] for u in rec["unmet"]}
    assert "efficiency_map" in why and "outside the motor's efficiency map" in why["efficiency_map"]
    rec = simulate(study, motor="M-LOSS", reducer="R-1", tyre="T-1")
    assert not {"motor_loss_data", "efficiency_map"} & {u["name"] for u in rec["unmet"]}


def test_map_with_implausible_efficiency_warns(tmp_path):
    from selector.synthetic_files import motor_row, write_csv

    lines = ["speed_rpm,torque_nm,efficiency_pct"] + [f"{w},{t},99.5" for w in (0, 6000, 12000) for t in (0, 125, 250)]
    (tmp_path / "perfect.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    write_csv(tmp_path / "motors.csv", "motors", [motor_row("M-1", efficiency_map="perfect.csv")])
    with pytest.warns(CatalogWarning, match=r"has efficiencies up to 99.5 %; at or above 99 %"):
        load_catalog("motors", tmp_path / "motors.csv")


@pytest.mark.parametrize("value, expected", [
    (5.0, r"peaks at 5 % efficiency; below 80 %"),  # common practice: traction motors peak at 90-97 %
    (0.0, r"reads 0 % at 4 grid points with speed and torque above zero"),
])
def test_map_with_low_or_zero_efficiency_warns(tmp_path, value, expected):
    from selector.synthetic_files import motor_row, write_csv

    # 5 %: every point (a map in fractions?); 0 %: the four points with speed and torque above zero
    eff = {(w, t): (value if value > 0 or (w > 0 and t > 0) else 90.0) for w in (0, 6000, 12000) for t in (0, 125, 250)}
    lines = ["speed_rpm,torque_nm,efficiency_pct"] + [f"{w},{t},{e}" for (w, t), e in eff.items()]
    (tmp_path / "odd.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    write_csv(tmp_path / "motors.csv", "motors", [motor_row("M-1", efficiency_map="odd.csv")])
    with pytest.warns(CatalogWarning, match=expected):
        load_catalog("motors", tmp_path / "motors.csv")
