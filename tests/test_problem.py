"""Problem-file loading and validation (selector.problem)."""

from __future__ import annotations

import warnings
from pathlib import Path

import pytest

from selector.errors import InputError
from selector.inputs import Catalogs, Problem
from selector.io.catalog import CatalogWarning
from selector.io.problem import ProblemWarning, load_problem, load_study

DATA = Path(__file__).parent / "data"
VALID = DATA / "valid"
INVALID = sorted((DATA / "invalid" / "problems").glob("*.toml"))

# ISA, ICAO Doc 7488: R = 287.05287 J/(kg K); p(1000 m geopotential) = 89874.6 Pa
# (computed from the ISA troposphere formula, printed to 0.1 Pa; matches the ambiance package)
R_AIR = 287.05287
P_1000_PA = 89874.6

MINIMAL = """
[catalogs]
motors = "{v}/motors.csv"
reducers = "{v}/reducers.csv"
tyres = "{v}/tyres.csv"

[vehicle]
mass_kg = 2450
drag_area_m2 = 1.55
wheelbase_m = 3.3
cg_height_m = 0.75
rear_axle_share = 0.55
driven_axle = "front"
tyre_count = 6

[environment]
road_friction = 0.8
"""


def expected_lines(path: Path) -> list[str]:
    text = path.with_name(path.stem + ".expected.txt").read_text(encoding="utf-8")
    return [line for line in text.splitlines() if line.strip()]


def minimal(tmp_path: Path, extra: str = "", env: str = "") -> Path:
    text = MINIMAL.format(v=VALID.as_posix()) + env + extra
    p = tmp_path / "study.toml"
    p.write_text(text, encoding="utf-8")
    return p


# ------------------------------------------------------------------------------ valid files


def test_valid_problem():
    p = load_problem(VALID / "problem.toml")
    assert isinstance(p, Problem)
    assert p.name == "Campus shuttle test case (illustrative data)"
    assert p.path == VALID / "problem.toml"
    # paths relative to the problem file
    assert {k: v.resolve() for k, v in p.catalog_paths.items()} == {
        k: (VALID / f"{k}.csv").resolve() for k in ("motors", "reducers", "tyres")}
    v = p.vehicle
    assert v.mass_kg == 1800.0 and v.wheelbase_m == 2.7 and v.cg_height_m == 0.65
    assert v.drag_area_m2 == pytest.approx(0.38 * 2.5, rel=1e-12)  # Cd x A
    assert v.rear_axle_share == 0.5 and v.driven_axle == "rear" and v.tyre_count == 4
    assert v.rolling_radius_factor == 0.97  # project default (r_dyn 0.97-0.98 r0, Gillespie ch. 2, from memory)
    assert v.wheel_inertia_kgm2 == 0.8
    # altitude 1000 m with 25 degC: ISA pressure at 1000 m, ideal gas at 298.15 K
    assert p.environment.air_density_kg_m3 == pytest.approx(P_1000_PA / (R_AIR * 298.15), rel=2e-6)
    assert p.environment.road_friction == 0.7
    r = p.requirements
    assert (r.top_speed_kmh, r.gradeability_pct, r.accel_to_kmh, r.accel_time_s) == (60.0, 15.0, 40.0, 8.0)
    assert r.launch_accel_mps2 is None and r.budget is None and r.max_mass_kg is None
    assert p.objective == "mass"
    assert p.procurement.distinct == "motor"
    assert p.procurement.avoid_suppliers == ("Treadwell",)
    assert p.procurement.max_lead_time_weeks == 12.0


def test_defaults(tmp_path):
    p = load_problem(minimal(tmp_path))
    assert p.name == "study"  # file stem when no name is given
    assert p.objective == "cost"  # project convention: no [objective] means cost
    assert p.environment.air_density_kg_m3 == pytest.approx(1.225, abs=5e-7)  # ISA sea level, ICAO Doc 7488
    assert p.requirements.top_speed_kmh is None
    assert p.procurement.avoid_suppliers == () and p.procurement.distinct is None
    assert p.vehicle.driven_axle == "front" and p.vehicle.tyre_count == 6
    assert p.vehicle.wheel_inertia_kgm2 == 0.0


@pytest.mark.parametrize(
    "env, rho",
    [
        # ideal gas rho = p/(R T) at 101325 Pa, R = 287.05287 (ICAO Doc 7488; computed here)
        ("temperature_c = 25\n", 1.18391),
        ("temperature_c = 0\n", 1.29227),
        # ISA at geopotential altitude (ICAO Doc 7488 troposphere formula, computed here)
        ("altitude_m = 2000\n", 1.00649),
        ("altitude_m = 3000.0\n", 0.90912),
        ("air_density_kg_m3 = 1.17\n", 1.17),  # given directly (40 CFR 1066.310 reference value)
    ],
)
def test_air_density_options(tmp_path, env, rho):
    p = load_problem(minimal(tmp_path, env=env))
    assert p.environment.air_density_kg_m3 == pytest.approx(rho, abs=5e-6)


def test_absolute_catalog_paths_and_cwd_independence(tmp_path, monkeypatch):
    path = minimal(tmp_path)
    monkeypatch.chdir(tmp_path.anchor)
    p = load_problem(path)
    assert p.catalog_paths["motors"] == VALID / "motors.csv"


def test_relative_catalog_paths_are_normalised(tmp_path, monkeypatch):
    (tmp_path / "problems").mkdir()
    (tmp_path / "catalogs").mkdir()
    for kind in ("motors", "reducers", "tyres"):
        (tmp_path / "catalogs" / f"{kind}.csv").write_text((VALID / f"{kind}.csv").read_text(encoding="utf-8"))
    text = MINIMAL.format(v="../catalogs")
    (tmp_path / "problems" / "van.toml").write_text(text, encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    p = load_problem("problems/van.toml")
    assert p.catalog_paths == {k: Path(f"catalogs/{k}.csv") for k in ("motors", "reducers", "tyres")}


def test_load_study():
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the valid fixtures raise no warning
        problem, cats = load_study(VALID / "problem.toml")
    assert isinstance(problem, Problem) and isinstance(cats, Catalogs)
    assert list(cats.motors["part"]) == ["M-090", "M-150", "M-250"]
    assert cats.paths == problem.catalog_paths


def test_unknown_supplier_to_avoid_warns(tmp_path):
    path = minimal(tmp_path, extra='\n[procurement]\navoid_suppliers = ["Geartek"]\n')
    with pytest.warns(ProblemWarning, match=r'supplier "Geartek" is in none of the catalogues, so it excludes '
                                            r'nothing\. Did you mean "Geartech"\?'):
        load_study(path)


def test_load_study_reports_catalog_errors(tmp_path):
    bad = tmp_path / "motors.csv"
    bad.write_text((VALID / "motors.csv").read_text(encoding="utf-8").replace("M-150,Volta Drives,150,45",
                                                                            "M-150,Volta Drives,150,-45"))
    text = minimal(tmp_path).read_text(encoding="utf-8").replace(f"{VALID.as_posix()}/motors.csv", "motors.csv")
    path = tmp_path / "study.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError, match=r'motors\.csv line 4 \(part "M-150"\): peak_power_kw = -45; must be > 0 '
                                         r'\[kW\]\. Fix the value in the file\.'):
        load_study(path)


def test_load_study_passes_catalog_warnings_on(tmp_path):
    heavy = tmp_path / "motors.csv"
    heavy.write_text((VALID / "motors.csv").read_text(encoding="utf-8").replace(",32,0.012,", ",650,0.012,"))
    text = minimal(tmp_path).read_text(encoding="utf-8").replace(f"{VALID.as_posix()}/motors.csv", "motors.csv")
    (tmp_path / "study.toml").write_text(text, encoding="utf-8")
    with pytest.warns(CatalogWarning, match="mass_kg = 650; above 500 kg"):
        load_study(tmp_path / "study.toml")


# ------------------------------------------------------------------------------ invalid corpus


@pytest.mark.parametrize("path", INVALID, ids=[p.stem for p in INVALID])
def test_invalid_problem_corpus(path):
    with pytest.raises(InputError) as info:
        load_problem(path)
    msg = str(info.value)
    assert msg.splitlines()[0].startswith(str(path))
    for line in expected_lines(path):
        assert line in msg, f"expected line not in message:\n{line}\n--- message ---\n{msg}"


def test_corpus_is_large_enough():
    assert len(INVALID) >= 12


def test_missing_problem_file(tmp_path):
    with pytest.raises(InputError, match=r"nope\.toml: problem file not found"):
        load_problem(tmp_path / "nope.toml")


@pytest.mark.parametrize(
    "extra, message",
    [
        ("\n[requirements]\naccel_to_kmh = 50\naccel_time_s = -4\n", "accel_time_s = -4; must be > 0 [s]"),
        ("\n[requirements]\nbudget = inf\n", "budget = inf; must be a finite number [currency]"),
        ("\n[requirements]\nspeed_limiter_kmh = 0\n", "speed_limiter_kmh = 0; must be > 0 [km/h]"),
        ("\n[vehicle.extra]\nx = 1\n", 'extra: unknown key.'),
        ("\nname = 3\n", "[environment] name: unknown key."),  # after [environment], name is in that table
        ('\n[procurement]\navoid_suppliers = ["A", 3]\n', "must be a list of non-empty texts"),
    ],
)
def test_more_rules(tmp_path, extra, message):
    with pytest.raises(InputError) as info:
        load_problem(minimal(tmp_path, extra=extra))
    assert message in str(info.value)


def test_temperature_range_and_density_with_temperature(tmp_path):
    with pytest.raises(InputError, match=r"temperature_c = 80; must be >= -70 and <= 60 \[degC\]"):
        load_problem(minimal(tmp_path, env="temperature_c = 80\n"))
    with pytest.raises(InputError, match="give either air_density_kg_m3 or temperature_c"):
        load_problem(minimal(tmp_path, env="temperature_c = 20\nair_density_kg_m3 = 1.2\n"))


def test_road_friction_defaults_to_dry_asphalt_with_a_warning(tmp_path):
    # 0.8: dry asphalt/concrete peak friction 0.8-0.9 (Wong ch. 1, table of road adhesion, from memory)
    from selector.io.problem import ProblemWarning, load_problem

    text = (VALID / "problem.toml").read_text(encoding="utf-8").replace("road_friction = 0.7\n", "")
    for name in ("motors", "reducers", "tyres"):
        text = text.replace(f'{name} = "{name}.csv"', f'{name} = "{(VALID / (name + ".csv")).as_posix()}"')
    path = tmp_path / "no_friction.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.warns(ProblemWarning, match="road_friction not given; assuming 0.8"):
        p = load_problem(path)
    assert p.environment.road_friction == 0.8


# ------------------------------------------------------------------------------ [energy]


def test_no_energy_table_means_no_energy_study(tmp_path):
    assert load_problem(minimal(tmp_path)).energy is None


def test_energy_table_defaults_and_builtin_cycle(tmp_path):
    p = load_problem(minimal(tmp_path, '\n[energy]\ncycle = "WLTC_class3b"\n'))
    e = p.energy
    assert e.cycle == "wltc_class3b" and e.cycle_data.name == "wltc_class3b"
    assert e.range_km is None and e.specific_energy_wh_per_kg is None and e.cost_per_kwh is None
    # project defaults (common practice, no published source), documented in selector.io.problem.ENERGY_DEFAULTS
    assert (e.usable_fraction, e.inverter_efficiency_pct, e.auxiliary_w) == (0.9, 97.0, 300.0)
    assert e.regen_min_speed_kmh == 5.0
    assert e.regen_max_kw is None


def test_energy_table_all_keys_and_a_user_cycle(tmp_path):
    (tmp_path / "loop.csv").write_text("# my loop (illustrative)\ntime_s,speed_kmh\n0,0\n1,400\n2,0\n",
                                       encoding="utf-8")
    text = ('\n[energy]\ncycle = "loop.csv"\nrange_km = 220\nspecific_energy_wh_per_kg = 155\ncost_per_kwh = 130\n'
            'usable_fraction = 0.92\ninverter_efficiency_pct = 96.5\nauxiliary_w = 450\nregen_max_kw = 0\n'
            'regen_min_speed_kmh = 8\n')
    e = load_problem(minimal(tmp_path, text)).energy
    assert Path(e.cycle) == tmp_path / "loop.csv" and e.cycle_data.duration_s == 2.0
    assert (e.range_km, e.specific_energy_wh_per_kg, e.cost_per_kwh, e.usable_fraction) == (220.0, 155.0, 130.0, 0.92)
    assert (e.inverter_efficiency_pct, e.auxiliary_w, e.regen_max_kw, e.regen_min_speed_kmh) == (96.5, 450.0, 0.0, 8.0)


def test_battery_keys_without_range_warn(tmp_path):
    with pytest.warns(ProblemWarning, match="specific_energy_wh_per_kg given without range_km: no battery is sized"):
        load_problem(minimal(tmp_path, '\n[energy]\ncycle = "udds"\nspecific_energy_wh_per_kg = 150\n'))


def test_readme_lists_every_problem_key_range():
    """The README's table of problem-key ranges is the `RANGES` data (project convention: docs from data)."""
    from selector.io.problem import RANGES, TABLES

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")

    def span(bounds):
        return "" if bounds is None else f"{bounds[0]:g} .. {bounds[1]:g}"

    for table, keys in RANGES.items():
        for key, (limits, usual) in keys.items():
            row = f"| `[{table}] {key}` | {TABLES[table][key].unit or '-'} | {span(limits)} | {span(usual)} |"
            assert row in readme, f"README lacks the range row: {row}"


def test_energy_fractions_given_as_percent_warn(tmp_path):
    # found by fuzzing: inverter_efficiency_pct = 0.97 (a fraction) passed without a word
    with pytest.warns(ProblemWarning, match=r"inverter_efficiency_pct = 0.97; outside 80..100 \[%\], unusual"):
        load_problem(minimal(tmp_path, '\n[energy]\ncycle = "udds"\ninverter_efficiency_pct = 0.97\n'))
