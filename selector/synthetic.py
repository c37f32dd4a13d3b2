"""Seeded synthetic studies (catalogues + problem): the one generator shared by tests, benchmarks and tools.

All data made here is invented: the parts, suppliers, vehicles and requirement levels are
illustrative and describe no real product. The generator only promises that every value obeys
the catalogue and problem-file rules (so the loaders accept it without errors or warnings):

- motors: cont <= peak (torque and power); corner speed peak_power/peak_torque <= decline speed
  <= max speed; some rows leave ``decline_speed_rpm`` and/or ``decline_exponent`` empty;
- reducers: ratio 3..15, efficiency 90..98.5 %, input torque and speed ratings drawn around the
  motors' peak torque and maximum speed, so some pairs are incompatible;
- tyres: ISO metric sizes (``205/55R16``, also the ``205/55 R16``, ``ZR`` and ``C`` spellings),
  load index 60..130 drawn around what the vehicle needs, speed symbols from the ISO 4000-1
  table (J = 100 km/h .. Y = 300 km/h), rolling resistance 6..12 N/kN;
- now and then a part is duplicated under another part id (same data and price), so ties occur.

Problems: rear or front drive, one of the three objectives, a random subset of the requirements
(top speed, gradeability, launch, acceleration time, maximum mass, budget, speed limiter). Levels
are drawn from the catalogue's own achievable range: the exact metrics of every mechanically
compatible design are enumerated first and a level is a quantile of them (sometimes a design's
exact value, to probe the pass/fail tolerance; sometimes beyond every design, to force
infeasibility). So a good share of instances is feasible and some are infeasible.

Every study is written as real files (three CSVs and a TOML problem) and read back with
`selector.problem.load_study`, the route a user's files take.

Usage::

    study = random_study(seed, tmp_path)
    study.parts            # selector.engine.parts.PartTables
    study.problem_path     # the TOML written

Large catalogues for benchmarks are built in memory instead (no files):
`synthetic_study(n_motors, n_reducers, n_tyres, seed)` -> (Problem, Catalogs), and
`variant_motors(n_rows, ...)` for catalogues of many near-variant motor rows (windings, voltages,
mountings) with exact duplicates, as real supplier catalogues have.

The writers and hand-made blocks live in `selector.synthetic_files`, the in-memory catalogues in
`selector.synthetic_large`; this module re-exports their names, so ``selector.synthetic`` is the one
place to import the generator from.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from selector.engine import evaluate
from selector.engine.parts import PartTables
from selector.inputs import Catalogs, Problem
from selector.io.problem import load_study
from selector.physics.tyres import LOAD_INDEX_KG, SPEED_SYMBOL_KMH
from selector.synthetic_files import HAND_ENVIRONMENT as HAND_ENVIRONMENT
from selector.synthetic_files import HAND_VEHICLE as HAND_VEHICLE
from selector.synthetic_files import HEADER_COMMENT as HEADER_COMMENT
from selector.synthetic_files import motor_row as motor_row
from selector.synthetic_files import part_ids as part_ids
from selector.synthetic_files import reducer_row as reducer_row
from selector.synthetic_files import tyre_row as tyre_row
from selector.synthetic_files import write_and_load as write_and_load
from selector.synthetic_files import write_csv, write_problem
from selector.synthetic_large import SYMBOLS as SYMBOLS
from selector.synthetic_large import synthetic_catalogs as synthetic_catalogs
from selector.synthetic_large import synthetic_problem as synthetic_problem
from selector.synthetic_large import synthetic_study as synthetic_study
from selector.synthetic_large import variant_motors as variant_motors
from selector.synthetic_large import variant_study as variant_study
from selector.units import RPM_TO_RAD_S

OBJECTIVE_WEIGHTS = {"cost": 1 / 3, "mass": 1 / 3, "accel_time": 1 / 3}
"""Default probability of each objective."""
REQUIREMENT_SHARE = {"top_speed_kmh": 0.4, "gradeability_pct": 0.4, "launch_accel_mps2": 0.4, "accel_time_s": 0.35,
                     "max_mass_kg": 0.4, "budget": 0.4, "speed_limiter_kmh": 0.25}
"""Default probability that each requirement family is stated (accel_time_s brings accel_to_kmh)."""
REQUIREMENT_KEYS = tuple(REQUIREMENT_SHARE)

SPEED_SYMBOLS = tuple(s for s, v in SPEED_SYMBOL_KMH.items() if v >= 100.0)
"""ISO 4000-1 speed symbols of road-car tyres used here (J = 100 km/h ... Y = 300 km/h)."""

DEFAULT_SIZES = ((3, 8), (3, 6), (3, 6))
"""Inclusive (min, max) counts of motors, reducers and tyres."""



@dataclass
class Study:
    """One generated study, written to disk and loaded back."""

    seed: int
    problem_path: Path
    problem: Problem
    catalogs: Catalogs
    parts: PartTables
    levels: dict = field(default_factory=dict)
    """How each stated requirement level was drawn: key -> (kind, pass share) for the record."""

    @property
    def objective(self) -> str:
        """Objective of the problem file."""
        return self.problem.objective


# ------------------------------------------------------------------------------------------ parts

def _pick_ids(rng, prefix: str, n: int) -> list[str]:
    """n distinct random part ids (random so that file order differs from part-id order)."""
    nums = rng.choice(np.arange(100, 1000), size=n, replace=False)
    return [f"{prefix}-{int(x)}" for x in nums]


def _duplicate_some(rng, rows: list[dict], prefix: str, share: float = 0.12) -> list[dict]:
    """Replace a few rows by copies of another row under their own part id (ties on purpose)."""
    if len(rows) < 2:
        return rows
    out = [dict(r) for r in rows]
    for i in range(1, len(out)):
        if rng.random() < share:
            src = int(rng.integers(0, i))
            part = out[i]["part"]
            out[i] = dict(out[src])
            out[i]["part"] = part
    return out


def random_motors(rng, n: int) -> list[dict]:
    """Rows of a motors.csv obeying the schema rules (cont <= peak, corner <= decline <= max)."""
    rows = []
    for part in _pick_ids(rng, "M", n):
        max_rpm = float(rng.integers(60, 181) * 100)  # 6000..18000 rpm
        torque = float(rng.integers(60, 451))  # N m
        corner_rpm = max_rpm * rng.uniform(0.18, 0.55)
        # floor the power to 0.1 kW so that the corner speed stays at or below corner_rpm
        power_kw = math.floor(torque * corner_rpm * RPM_TO_RAD_S / 100.0) / 10.0
        corner_rpm = power_kw * 1000.0 / torque / RPM_TO_RAD_S
        decline = ""
        if rng.random() < 0.65:
            decline = str(int(rng.integers(math.ceil(corner_rpm) + 1, int(max_rpm) + 1)))
        exponent = "" if rng.random() < 0.4 else f"{rng.uniform(0.5, 2.0):.2f}"
        rows.append({
            "part": part, "supplier": str(rng.choice(["Volta Drives", "Brightmotion", "Ampere Works"])),
            "peak_torque_nm": f"{torque:g}", "peak_power_kw": f"{power_kw:g}", "max_speed_rpm": f"{max_rpm:g}",
            "cont_torque_nm": f"{math.floor(torque * rng.uniform(0.4, 1.0)):d}",
            "cont_power_kw": f"{math.floor(power_kw * rng.uniform(0.4, 1.0) * 10) / 10:g}",
            "decline_speed_rpm": decline, "decline_exponent": exponent,
            "mass_kg": f"{rng.uniform(15, 110):.1f}", "rotor_inertia_kgm2": f"{rng.uniform(0.004, 0.08):.4f}",
            "unit_cost": f"{int(rng.integers(40, 400)) * 10}", "lead_time_weeks": f"{int(rng.integers(0, 20))}",
        })
    # a cont value floored to 0 would be invalid (> 0 required): lift it to a small positive value
    for r in rows:
        if float(r["cont_torque_nm"]) <= 0:
            r["cont_torque_nm"] = "1"
        if float(r["cont_power_kw"]) <= 0:
            r["cont_power_kw"] = "0.1"
    return _duplicate_some(rng, rows, "M")


def add_gears(rng, rows: list[dict], share: float) -> list[dict]:
    """Make about ``share`` of the reducer rows two- or three-speed gearboxes (steps 1.2..2.6)."""
    out = []
    for r in rows:
        r = dict(r)
        if rng.random() < share:
            g1 = float(r["ratio"])
            g2 = g1 / rng.uniform(1.2, 2.6)
            r["ratio_2"] = f"{g2:.3f}"
            if rng.random() < 0.4:
                r["ratio_3"] = f"{g2 / rng.uniform(1.2, 2.2):.3f}"
                if rng.random() < 0.5:
                    r["efficiency_3_pct"] = f"{rng.uniform(90.0, 98.5):.1f}"
            if rng.random() < 0.5:
                r["efficiency_2_pct"] = f"{rng.uniform(90.0, 98.5):.1f}"
            r["shift_time_s"] = f"{rng.choice([0.0, rng.uniform(0.1, 0.6)]):.3f}"
            r["mass_kg"] = f"{float(r['mass_kg']) + rng.uniform(4, 15):.1f}"
            r["unit_cost"] = str(int(r["unit_cost"]) + int(rng.integers(20, 90)) * 10)
        out.append(r)
    return out


def add_losses(rng, rows: list[dict]) -> list[dict]:
    """Give every motor row a polynomial loss model (invented, plausible: a few per cent of peak power
    as copper loss at peak torque, about 1 % each as iron and windage loss at maximum speed)."""
    out = []
    for r in rows:
        r = dict(r)
        p_w = float(r["peak_power_kw"]) * 1e3
        t_nm = float(r["peak_torque_nm"])
        w_max = float(r["max_speed_rpm"]) * RPM_TO_RAD_S
        r["loss_copper_w_per_nm2"] = f"{rng.uniform(0.05, 0.1) * p_w / t_nm ** 2:.6g}"
        r["loss_iron_nm"] = f"{rng.uniform(0.01, 0.03) * p_w / w_max:.6g}"
        r["loss_windage_w_s3"] = f"{rng.uniform(0.003, 0.012) * p_w / w_max ** 3:.6g}"
        r["loss_constant_w"] = f"{rng.uniform(0.001, 0.004) * p_w:.6g}"
        out.append(r)
    return out


def random_reducers(rng, n: int, motors: list[dict]) -> list[dict]:
    """Rows of a reducers.csv; ratings drawn around the motors' needs so some pairs are incompatible."""
    t_med = float(np.median([float(m["peak_torque_nm"]) for m in motors]))
    n_med = float(np.median([float(m["max_speed_rpm"]) for m in motors]))
    rows = []
    for part in _pick_ids(rng, "R", n):
        rows.append({
            "part": part, "supplier": str(rng.choice(["Geartech", "Kinetic Gears"])),
            "ratio": f"{rng.uniform(3.0, 15.0):.2f}", "efficiency_pct": f"{rng.uniform(90.0, 98.5):.1f}",
            "max_input_torque_nm": f"{int(t_med * rng.uniform(0.7, 1.8))}",
            "max_input_speed_rpm": f"{int(n_med * rng.uniform(0.8, 1.4) / 100) * 100}",
            "mass_kg": f"{rng.uniform(8, 30):.1f}", "unit_cost": f"{int(rng.integers(20, 120)) * 10}",
            "lead_time_weeks": f"{int(rng.integers(0, 16))}",
        })
    return _duplicate_some(rng, rows, "R")


def _size(rng) -> str:
    width = int(rng.integers(31, 64)) * 5  # 155..315 mm
    aspect = int(rng.integers(7, 17)) * 5  # 35..80 %
    rim = int(rng.integers(13, 21))  # 13..20 in
    style = rng.random()
    if style < 0.15:
        return f"{width}/{aspect} R{rim}"
    if style < 0.25:
        return f"{width}/{aspect}ZR{rim}"
    if style < 0.35:
        return f"{width}/{aspect}R{rim}C"
    return f"{width}/{aspect}R{rim}"


def needed_load_index(load_kg: float) -> int:
    """Smallest load index (ISO 4000-1 / UN ECE R30 table) whose capacity covers ``load_kg``."""
    for li in sorted(LOAD_INDEX_KG):
        if LOAD_INDEX_KG[li] >= load_kg:
            return li
    return max(LOAD_INDEX_KG)


def random_tyres(rng, n: int, tyre_load_kg: float) -> list[dict]:
    """Rows of a tyres.csv; load indices drawn around ``tyre_load_kg`` so some tyres are too weak."""
    li0 = needed_load_index(tyre_load_kg)
    rows = []
    for part in _pick_ids(rng, "T", n):
        li = int(np.clip(li0 + int(rng.integers(-3, 13)), 60, 130))
        rows.append({
            "part": part, "supplier": str(rng.choice(["Roundway", "Treadwell", "Gripline"])),
            "size": _size(rng), "load_index": str(li), "speed_symbol": str(rng.choice(SPEED_SYMBOLS)),
            "rr_coefficient_n_per_kn": f"{rng.uniform(6.0, 12.0):.1f}", "mass_kg": f"{rng.uniform(6, 16):.1f}",
            "unit_cost": f"{int(rng.integers(5, 26)) * 10}", "lead_time_weeks": f"{int(rng.integers(0, 10))}",
        })
    return _duplicate_some(rng, rows, "T")


# ------------------------------------------------------------------------------------------ vehicle

def random_vehicle(rng) -> dict:
    """[vehicle] table of an invented vehicle (parcel van, shuttle, utility vehicle, small car)."""
    v = {
        "mass_kg": round(float(rng.uniform(700, 2600)), 0),
        "wheelbase_m": round(float(rng.uniform(2.2, 3.6)), 2),
        "cg_height_m": round(float(rng.uniform(0.45, 0.9)), 2),
        "rear_axle_share": round(float(rng.uniform(0.40, 0.62)), 3),
        "driven_axle": "rear" if rng.random() < 0.5 else "front",
        "tyre_count": 6 if rng.random() < 0.15 else 4,
    }
    if rng.random() < 0.7:
        v["drag_area_m2"] = round(float(rng.uniform(0.45, 1.6)), 3)
    else:
        v["drag_coefficient"] = round(float(rng.uniform(0.25, 0.45)), 3)
        v["frontal_area_m2"] = round(float(rng.uniform(1.8, 3.4)), 2)
    if rng.random() < 0.3:
        v["rolling_radius_factor"] = round(float(rng.uniform(0.95, 0.99)), 3)
    if rng.random() < 0.3:
        v["wheel_inertia_kgm2"] = round(float(rng.uniform(0.3, 1.5)), 2)
    return v


def random_environment(rng) -> dict:
    """[environment] table: friction 0.4..1.1 (wet to dry road), air by density, ISA altitude or default."""
    env = {"road_friction": round(float(rng.uniform(0.4, 1.1)), 2)}
    u = rng.random()
    if u < 0.4:
        env["air_density_kg_m3"] = round(float(rng.uniform(1.0, 1.3)), 3)
    elif u < 0.7:
        env["altitude_m"] = float(int(rng.integers(0, 31)) * 100)
    return env


# ------------------------------------------------------------------------------------------ levels

def _sig(x: float, digits: int = 4) -> float:
    """x rounded to ``digits`` significant figures."""
    if x == 0 or not math.isfinite(x):
        return x
    return round(x, digits - 1 - int(math.floor(math.log10(abs(x)))))


def draw_level(rng, values: np.ndarray, sense: str):
    """A requirement level drawn from the achieved ``values`` of the candidate designs.

    ``sense`` "min" (achieved >= level) or "max" (achieved <= level). Returns (level, kind) or
    (None, reason) when no positive finite value exists. Kinds: "quantile" (rounded to 4
    significant figures, a share of designs passes), "exact" (a design's exact value: a boundary
    case of the 1e-9 pass tolerance), "beyond" (no design can pass).
    """
    vals = np.asarray(values, dtype=float)
    vals = vals[np.isfinite(vals) & (vals > 0)]
    if vals.size == 0:
        return None, "no positive finite value"
    u = rng.random()
    if u < 0.07:
        level = float(vals.max()) * 1.05 if sense == "min" else float(vals.min()) * 0.95
        return _sig(level), "beyond"
    if u < 0.20:
        return float(rng.choice(vals)), "exact"
    share = rng.uniform(0.2, 0.97)  # share of designs meeting this level on its own
    q = 1.0 - share if sense == "min" else share
    level = _sig(float(np.quantile(vals, q)))
    return (level if level > 0 else None), f"quantile {share:.2f}"


def _all_triples(parts: PartTables):
    n_m, n_r, n_t = parts.sizes
    mi, rj, tk = np.meshgrid(np.arange(n_m), np.arange(n_r), np.arange(n_t), indexing="ij")
    return mi.ravel(), rj.ravel(), tk.ravel()


def _all_keys(parts: PartTables) -> np.ndarray:
    """Key rows of every two-unit design of a study (every front unit, rear unit and tyre; the
    same unit on both axles with same_unit)."""
    n_m, n_r, n_t = parts.sizes
    mm, rr = np.meshgrid(np.arange(n_m), np.arange(n_r), indexing="ij")
    units = np.stack([mm.ravel(), rr.ravel()], axis=1)
    if parts.problem.drive.same_unit:
        u, t = np.meshgrid(np.arange(units.shape[0]), np.arange(n_t), indexing="ij")
        f = r = units[u.ravel()]
        tk = t.ravel()
    else:
        a, b, t = np.meshgrid(np.arange(units.shape[0]), np.arange(units.shape[0]), np.arange(n_t), indexing="ij")
        f, r, tk = units[a.ravel()], units[b.ravel()], t.ravel()
    return np.stack([f[:, 0], f[:, 1], r[:, 0], r[:, 1], tk], axis=1)


def _compatible(parts: PartTables, metrics: dict) -> np.ndarray:
    """Designs passing the reducer-rating and tyre-load checks (the mechanically possible ones)."""
    res = evaluate.check_results(parts, metrics)
    ok = res["reducer_torque_nm"] & res["reducer_speed_rpm"] & res["tyre_load_kg"]
    return ok if ok.any() else np.ones_like(ok)


# ------------------------------------------------------------------------------------------ studies

def random_study(seed: int, directory, sizes=DEFAULT_SIZES, objective: str | None = None,
                 objective_weights: dict | None = None, requirement_share: dict | float | None = None,
                 layout: str = "single", gearbox_share: float = 0.0, energy: bool = False) -> Study:
    """Generate, write and load one random study.

    Parameters
    ----------
    seed : seed of `numpy.random.default_rng`; same seed, same files [-]
    directory : folder to write motors.csv, reducers.csv, tyres.csv and problem.toml into
    sizes : ((min, max) motors, (min, max) reducers, (min, max) tyres), inclusive; or three ints
    objective : force an objective (default: drawn with ``objective_weights``)
    objective_weights : {objective: probability} (default `OBJECTIVE_WEIGHTS`)
    requirement_share : probability that each requirement family is stated, one number for all or
        {key: probability} (default `REQUIREMENT_SHARE`) [-]
    layout : "single" (front or rear drive, drawn), "both" (a unit on each axle) or "same" (both
        axles, same_unit = true)
    gearbox_share : share of reducer rows made two- or three-speed gearboxes [-]
    energy : add loss models to the motors and an [energy] table (UDDS, a range, battery data)

    Returns
    -------
    Study
    """
    rng = np.random.default_rng(seed)
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    counts = [s if isinstance(s, (int, np.integer)) else int(rng.integers(s[0], s[1] + 1)) for s in sizes]
    vehicle, environment, drive, energy_table = _write_random_catalogues(rng, seed, counts, directory, layout,
                                                                         gearbox_share, energy)
    weights = OBJECTIVE_WEIGHTS if objective_weights is None else objective_weights
    names = sorted(weights)
    p = np.array([weights[k] for k in names], dtype=float)
    drawn = str(rng.choice(names, p=p / p.sum()))
    chosen = objective or drawn
    share = REQUIREMENT_SHARE if requirement_share is None else requirement_share
    if not isinstance(share, dict):
        share = {k: float(share) for k in REQUIREMENT_KEYS}
    stated = [k for k in REQUIREMENT_KEYS if rng.random() < share.get(k, 0.0)]

    # calibration: load the catalogues with the requirement-free problem, enumerate every design
    path = directory / "problem.toml"
    name = f"Random study {seed} (invented data)"
    write_problem(path, name, vehicle, environment, {}, "cost", f"seed {seed}", drive, energy_table)
    req, levels = _calibrated_levels(rng, path, layout, stated, chosen)
    if energy and objective is None and np.random.default_rng([seed, 19]).random() < 0.4:
        chosen = "energy"
    write_problem(path, name, vehicle, environment, req, chosen, f"seed {seed}", drive, energy_table)
    problem, catalogs = load_study(path)
    return Study(seed=seed, problem_path=path, problem=problem, catalogs=catalogs,
                 parts=PartTables.build(problem, catalogs), levels=levels)


def _write_random_catalogues(rng, seed: int, counts: list[int], directory: Path, layout: str, gearbox_share: float,
                             energy: bool):
    """Draw the vehicle and the parts, write the three catalogues; return (vehicle, environment, drive table,
    energy table) for the problem file (the draws from ``rng`` in a fixed order: same seed, same study)."""
    vehicle = random_vehicle(rng)
    environment = random_environment(rng)
    motors = random_motors(rng, counts[0])
    reducers = random_reducers(rng, counts[1], motors)
    if gearbox_share > 0:
        reducers = add_gears(np.random.default_rng([seed, 13]), reducers, gearbox_share)
    energy_table = None
    if energy:
        erng = np.random.default_rng([seed, 17])
        motors = add_losses(erng, motors)
        energy_table = {"cycle": "udds"}
        if erng.random() < 0.75:
            energy_table.update({"range_km": round(float(erng.uniform(40, 400)), 0),
                                 "specific_energy_wh_per_kg": round(float(erng.uniform(120, 220)), 0),
                                 "cost_per_kwh": round(float(erng.uniform(90, 250)), 0)})
    drive = None
    if layout != "single":
        vehicle["driven_axle"] = "both"
        if layout == "same":
            drive = {"same_unit": True}
    # a rough tyre load (heavier static axle with ~100 kg of drive parts) to centre the load indices
    axle_share = max(vehicle["rear_axle_share"], 1 - vehicle["rear_axle_share"])
    tyre_load = (axle_share * vehicle["mass_kg"] + 100.0) / (vehicle["tyre_count"] / 2)
    tyres = random_tyres(rng, counts[2], tyre_load)
    for kind, rows in (("motors", motors), ("reducers", reducers), ("tyres", tyres)):
        write_csv(directory / f"{kind}.csv", kind, rows, f"seed {seed}")
    return vehicle, environment, drive, energy_table


def _calibrated_levels(rng, path: Path, layout: str, stated: list[str], objective: str) -> tuple[dict, dict]:
    """Requirement levels of the ``stated`` families drawn from the exact metrics of every compatible design of
    the requirement-free problem at ``path``; returns (requirements, how each level was drawn)."""
    base, catalogs = load_study(path)
    parts = PartTables.build(base, catalogs)
    mi, rj, tk = _all_triples(parts)
    if layout != "single":
        mi = _all_keys(parts)
        rj = tk = None
    met = evaluate.evaluate(parts, mi, rj, tk, accel=False)
    pool = _compatible(parts, met)
    req: dict = {}
    levels: dict = {}

    def calibrated(reqs: dict) -> PartTables:
        prob = dataclasses.replace(base, requirements=dataclasses.replace(base.requirements, **reqs))
        return PartTables.build(prob, catalogs)

    if "speed_limiter_kmh" in stated:
        # a limiter somewhere in the range of the designs' maximum speeds (whole km/h)
        vmax = met["max_speed_kmh"][pool]
        q = rng.uniform(0.1, 0.9)
        req["speed_limiter_kmh"] = float(max(5, round(float(np.quantile(vmax, q)))))
        levels["speed_limiter_kmh"] = f"quantile {q:.2f} of max speed"
        parts = calibrated(req)
        met = evaluate.evaluate(parts, mi, rj, tk, accel=False)
    if "accel_time_s" in stated or objective == "accel_time":
        vmax = met["max_speed_kmh"][pool]
        vmax = vmax[np.isfinite(vmax) & (vmax > 0)]
        top = float(np.quantile(vmax, rng.uniform(0.3, 0.8))) if vmax.size else 50.0
        req["accel_to_kmh"] = float(max(10, int(top * rng.uniform(0.35, 0.85) / 5) * 5))
        parts = calibrated(req)
        met = evaluate.evaluate(parts, mi, rj, tk, accel=True)
    for key, (metric, sense) in _FAMILIES.items():
        if key not in stated:
            continue
        level, kind = draw_level(rng, met[metric][pool], sense)
        if level is not None:
            req[key] = level
        levels[key] = kind
    return req, levels


_FAMILIES = {"top_speed_kmh": ("sustained_top_speed_kmh", "min"), "gradeability_pct": ("gradeability_pct", "min"),
             "launch_accel_mps2": ("launch_accel_mps2", "min"), "accel_time_s": ("accel_time_s", "max"),
             "max_mass_kg": ("mass_kg", "max"), "budget": ("cost", "max")}
"""Requirement key -> (metric it bounds, "min" = achieved >= level or "max" = achieved <= level)."""


