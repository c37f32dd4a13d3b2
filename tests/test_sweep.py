"""Parameter sweeps: grid parsing, overrides, monotonicity, oracle agreement, local vs Dask runs."""

from __future__ import annotations

import csv
import io
import json
import math

import numpy as np
import pytest
from generators import random_study

from selector.cli import run
from selector.engine import evaluate
from selector.engine.parts import PartTables
from selector.errors import InputError
from selector.io.problem import load_study
from selector.records import CAUTION
from selector.studies.sweep import (
    apply_overrides,
    grid,
    parse_vary,
    sweep,
    sweep_point,
    to_csv,
)

VAN = "problems/parcel_van.toml"


# ----------------------------------------------------------------------------- parsing

def test_parse_vary_linspace_and_grid_order():
    key, values = parse_vary("requirements.top_speed_kmh=100:130:4")
    assert key == "requirements.top_speed_kmh"
    assert values.tolist() == [100.0, 110.0, 120.0, 130.0]
    pts = grid([("a.x", np.array([1.0, 2.0])), ("b.y", np.array([10.0, 20.0, 30.0]))])
    assert [tuple(p.values()) for p in pts] == [(1, 10), (1, 20), (1, 30), (2, 10), (2, 20), (2, 30)]
    assert parse_vary("vehicle.mass_kg=2000:2000:1")[1].tolist() == [2000.0]


@pytest.mark.parametrize("text, message", [
    ("requirements.top_speed=100:130:4", "Did you mean 'requirements.top_speed_kmh'"),
    ("top_speed_kmh=100:130:4", "Did you mean 'requirements.top_speed_kmh'"),
    ("vehicle.mass=1:2:3", "Did you mean 'vehicle.mass_kg'"),
    ("vehicle.tyre_count=4:6:2", "even whole number"),
    ("requirements.top_speed_kmh=100:130", "START:STOP:N"),
    ("requirements.top_speed_kmh=100:abc:3", "must be numbers"),
    ("requirements.top_speed_kmh=100:130:2.5", "whole number"),
    ("requirements.top_speed_kmh=100:130:0", "N must be >= 1"),
    ("requirements.top_speed_kmh=100:130:1", "N = 1 gives one value"),
    ("requirements.top_speed_kmh", "KEY=START:STOP:N"),
    ("requirements.top_speed_kmh=100:130:1000000000", "N = 1,000,000,000 values; at most 100,000"),
    ("requirements.top_speed_kmh=1_00:130:3", "must be numbers"),
    ("requirements.top_speed_kmh=\uff11\uff10\uff10:130:3", "must be numbers"),
    ("requirements.top_speed_kmh=100:130:\uff13", "whole number"),
])
def test_parse_vary_errors(text, message):
    with pytest.raises(InputError, match=message.replace("(", r"\(").replace("'", "'")):
        parse_vary(text)


@pytest.mark.parametrize("argv, message", [
    (["--vary", "environment.road_friction=0.5:2.5:3"], "must be > 0 and <= 2"),
    (["--vary", "vehicle.rear_axle_share=0:1:3"], "between 0 and 1"),
    (["--vary", "vehicle.mass_kg=1:2:2", "--vary", "vehicle.mass_kg=3:4:2"], "given more than once"),
    (["--vary", "environment.altitude_m=0:100:2", "--vary", "environment.air_density_kg_m3=1:1.2:2"], "ISA"),
    (["--vary", "requirements.speed_limitr_kmh=1:2:2"], "Did you mean 'requirements.speed_limiter_kmh'"),
    (["--vary", "vehicle.mass_kg=1:2:2", "--out", "nowhere/x.csv"], "does not exist"),
])
def test_cli_bad_sweeps_exit_2(argv, message, capsys):
    assert run(["sweep", VAN, *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


ENERGY_VAN = "problems/delivery_van_energy.toml"


@pytest.mark.parametrize("problem, argv, message", [
    (VAN, ["--vary", "energy.range_km=100:200:2"], "has no [energy] table"),
    (ENERGY_VAN, ["--vary", "energy.range_km=0:200:2"], "must be > 0"),
    (ENERGY_VAN, ["--vary", "energy.rang_km=100:200:2"], "Did you mean 'energy.range_km'"),
])
def test_cli_bad_energy_sweeps_exit_2(problem, argv, message, capsys):
    assert run(["sweep", problem, *argv]) == 2
    err = capsys.readouterr().err
    assert message in err and "Traceback" not in err


def test_battery_keys_without_a_range_are_refused():
    import dataclasses

    problem = load_study(ENERGY_VAN)[0]
    no_range = dataclasses.replace(problem, energy=dataclasses.replace(problem.energy, range_km=None),
                                   requirements=dataclasses.replace(problem.requirements, range_km=None))
    with pytest.raises(InputError, match="no range_km, so no battery is sized"):
        apply_overrides(no_range, {"energy.cost_per_kwh": 100.0})


def test_range_sweep_points_equal_enumeration_and_size_the_battery(tmp_path):
    # every point's optimum equals the exhaustive optimum of the problem with that range, and its battery
    # holds the range: usable energy = range x consumption at the vehicle's mass with it (mass spiral)
    s = random_study(216, tmp_path / "s", sizes=((3, 6), (3, 5), (3, 5)), objective="cost", energy=True)
    assert s.problem.energy.range_km is not None
    for range_km in (60.0, 150.0, 300.0):
        row = sweep_point(s.problem, {"energy.range_km": range_km}, s.catalogs)
        prob = apply_overrides(s.problem, {"energy.range_km": range_km})
        assert prob.requirements.range_km == prob.energy.range_km == range_km
        parts = PartTables.build(prob, s.catalogs)
        best = evaluate.enumerate_designs(parts, "cost", 1)
        if not best:
            assert row["status"] == "infeasible"
            continue
        assert row["status"] == "optimal"
        assert row["objective"] == pytest.approx(best[0][0], rel=1e-9)
        e = prob.energy
        usable_kwh = row["battery_kwh"] * e.usable_fraction
        assert usable_kwh == pytest.approx(range_km * row["energy_wh_per_km"] / 1000.0, rel=1e-6)
        assert row["battery_mass_kg"] == pytest.approx(row["battery_kwh"] * 1000.0 / e.specific_energy_wh_per_kg,
                                                       rel=1e-9)
        assert row["battery_cost"] == pytest.approx(row["battery_kwh"] * e.cost_per_kwh, rel=1e-9)


def test_accel_time_sweep_needs_accel_to_kmh(capsys):
    assert run(["sweep", "problems/campus_shuttle.toml", "--vary", "requirements.accel_time_s=5:6:2"]) == 2
    assert "accel_to_kmh" in capsys.readouterr().err


# ----------------------------------------------------------------------------- overrides

def test_altitude_override_uses_isa_density():
    from ambiance import Atmosphere

    problem, _ = load_study(VAN)
    for h_geopotential in (0.0, 1500.0, 3000.0):
        p = apply_overrides(problem, {"environment.altitude_m": h_geopotential})
        # ambiance takes geometric altitude: h = r0 H / (r0 - H), r0 = 6356766 m (ICAO Doc 7488)
        r0 = 6356766.0
        h_geometric = r0 * h_geopotential / (r0 - h_geopotential)
        assert p.environment.air_density_kg_m3 == pytest.approx(float(Atmosphere(h_geometric).density[0]), rel=1e-6)
    # sea level: 1.225 kg/m^3 (ISA, ICAO Doc 7488)
    assert apply_overrides(problem, {"environment.altitude_m": 0.0}).environment.air_density_kg_m3 == \
        pytest.approx(1.225, rel=1e-4)
    p = apply_overrides(problem, {"vehicle.mass_kg": 1234.0, "requirements.budget": 7000.0,
                                  "environment.road_friction": 0.5})
    assert (p.vehicle.mass_kg, p.requirements.budget, p.environment.road_friction) == (1234.0, 7000.0, 0.5)
    assert p.vehicle.drag_area_m2 == problem.vehicle.drag_area_m2  # untouched fields stay


def test_sweep_points_equal_enumeration_on_random_studies(tmp_path):
    # every grid point's optimum equals the exhaustive optimum of the modified problem
    for seed in (100, 127):
        s = random_study(seed, tmp_path / str(seed), sizes=((3, 6), (3, 5), (3, 5)), objective="cost")
        base = s.problem.vehicle.mass_kg
        for mass in (0.8 * base, base, 1.2 * base):
            row = sweep_point(s.problem, {"vehicle.mass_kg": mass}, s.catalogs)
            prob = apply_overrides(s.problem, {"vehicle.mass_kg": mass})
            best = evaluate.enumerate_designs(PartTables.build(prob, s.catalogs), "cost", 1)
            if not best:
                assert row["status"] == "infeasible" and row["motor"] is None
                continue
            parts = PartTables.build(prob, s.catalogs)
            assert row["status"] == "optimal"
            assert row["objective"] == pytest.approx(best[0][0], rel=1e-9)
            assert (row["motor"], row["reducer"], row["tyre"]) == (
                parts.motors.part[best[0][1]], parts.reducers.part[best[0][2]], parts.tyres.part[best[0][3]])


# ----------------------------------------------------------------------------- runs

@pytest.fixture(scope="module")
def van_local():
    """A 2 x 2 sweep of the parcel van on local processes (tightening top speed and gradeability)."""
    return sweep(VAN, ["requirements.top_speed_kmh=110:135:2", "requirements.gradeability_pct=25:32:2"], workers=2)


def test_tightening_requirements_never_lowers_the_optimal_cost(van_local):
    rows = van_local["rows"]
    assert van_local["runner"]["mode"] == "processes"
    assert [(r["requirements.top_speed_kmh"], r["requirements.gradeability_pct"]) for r in rows] == \
        [(110, 25), (110, 32), (135, 25), (135, 32)]
    cost = {(r["requirements.top_speed_kmh"], r["requirements.gradeability_pct"]):
            (r["objective"] if r["status"] == "optimal" else math.inf) for r in rows}
    assert cost[(110, 25)] <= cost[(110, 32)] <= cost[(135, 32)]
    assert cost[(110, 25)] <= cost[(135, 25)] <= cost[(135, 32)]
    # the tightest corner really costs more here (the sweep is not flat)
    assert cost[(135, 32)] > cost[(110, 25)]
    for r in rows:
        if r["status"] == "optimal":
            assert r["cost"] == r["objective"] and r["motor"] and r["mass_kg"] > 0


def test_dask_cluster_gives_identical_rows(van_local):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, processes=False, threads_per_worker=1,
                                  dashboard_address=None) as cluster:
        res = sweep(VAN, ["requirements.top_speed_kmh=110:135:2", "requirements.gradeability_pct=25:32:2"],
                    scheduler=cluster.scheduler_address)
    assert res["runner"]["mode"] == "dask" and res["runner"]["workers"] == 2
    assert res["rows"] == van_local["rows"]
    assert json.dumps(res["rows"]) == json.dumps(van_local["rows"])


def test_unreachable_scheduler_is_a_clear_error(capsys, monkeypatch):
    monkeypatch.setattr("selector.studies.sweep.DASK_CONNECT_TIMEOUT_S", 1)
    code = run(["sweep", VAN, "--vary", "vehicle.mass_kg=2400:2400:1", "--scheduler", "tcp://127.0.0.1:9"])
    assert code == 2
    assert "cannot connect to a Dask scheduler" in capsys.readouterr().err


def test_cli_json_csv_and_plot(tmp_path, capsys):
    import matplotlib.image

    from selector.io.plots import sweep_plot

    out_csv, png = tmp_path / "sweep.csv", tmp_path / "sweep.png"
    code = run(["sweep", VAN, "--vary", "requirements.top_speed_kmh=125:135:3", "--workers", "1",
                "--format", "json", "--out", str(out_csv), "--plot", str(png)])
    assert code == 0
    res = json.loads(capsys.readouterr().out)
    rows = res["rows"]
    assert res["runner"]["mode"] == "serial" and len(rows) == 3
    assert res["columns"] == ["requirements.top_speed_kmh", "status", "objective", "motor", "reducer", "tyre",
                              "cost", "mass_kg", "accel_time_s"]
    assert "infeasible" in [r["status"] for r in rows]  # 135 km/h is beyond the demo catalogue here
    back = list(csv.DictReader(io.StringIO(out_csv.read_text(encoding="utf-8"))))
    assert len(back) == 3
    for r, b in zip(rows, back, strict=True):
        assert b["status"] == r["status"] and float(b["requirements.top_speed_kmh"]) == r["requirements.top_speed_kmh"]
        assert b["caution"] == CAUTION  # the safety caution on every row of the file
        assert (b["objective"] == "") == (r["objective"] is None)
        if r["objective"] is not None:
            assert float(b["objective"]) == r["objective"] and b["motor"] == r["motor"]
    assert to_csv(res) == out_csv.read_text(encoding="utf-8")
    assert png.stat().st_size > 0 and matplotlib.image.imread(png).ndim == 3
    fig = sweep_plot(res, tmp_path / "again.png")
    (line,) = [ln for ln in fig.axes[0].get_lines() if not ln.get_label().startswith("_")]
    ok = [r for r in rows if r["status"] == "optimal"]
    assert line.get_xydata().tolist() == [[r["requirements.top_speed_kmh"], r["objective"]] for r in ok]
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_time_limited_points_keep_the_best_design_found(monkeypatch, capsys):
    # Project convention: a point stopped by --time-limit has status time_limit and shows its incumbent.
    # The stop is simulated (the real search runs, its answer is relabelled) so the test does not
    # depend on the machine's speed; every search must receive the limit.
    import selector.engine.search as engine_search
    from selector.engine.search import SearchResult

    real, limits = engine_search.search, []

    def stopped_above_110(parts, **kw):
        limits.append(kw.get("time_limit_s"))
        res = real(parts, **kw)
        if parts.problem.requirements.top_speed_kmh > 110:
            return SearchResult(status="time_limit", objective=res.objective, designs=res.designs,
                                bound=0.0, reason="time limit reached; gap not closed")
        return res

    vary = ["requirements.top_speed_kmh=100:120:2"]
    whole = sweep(VAN, vary, workers=1)
    monkeypatch.setattr(engine_search, "search", stopped_above_110)
    res = sweep(VAN, vary, workers=1, time_limit_s=30.0)
    assert limits == [30.0, 30.0]
    assert [r["status"] for r in res["rows"]] == ["optimal", "time_limit"]
    assert res["time_limit"] == 1 and res["infeasible"] == 0
    stopped, full = res["rows"][1], whole["rows"][1]
    assert stopped["reason"] == "time limit reached; gap not closed"
    assert {k: v for k, v in stopped.items() if k not in ("status", "reason")} == \
        {k: v for k, v in full.items() if k not in ("status", "reason")}
    assert "time_limit" in to_csv(res)
    assert run(["sweep", VAN, "--vary", vary[0], "--workers", "1", "--time-limit", "30"]) == 0
    assert "1 stopped at the time limit" in capsys.readouterr().out
    from selector.results import SweepResult

    assert SweepResult(res).status == "mixed" and SweepResult(whole).status == "optimal"
