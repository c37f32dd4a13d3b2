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
"""

from __future__ import annotations

import csv
import dataclasses
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from selector.engine import evaluate
from selector.engine.parts import PartTables
from selector.inputs import Catalogs, Environment, Problem, Requirements, Vehicle
from selector.io.problem import load_study
from selector.io.schema import columns
from selector.physics.tyres import (
    LOAD_INDEX_KG,
    SPEED_SYMBOL_KMH,
    load_capacity_kg,
    speed_rating_kmh,
    unloaded_diameter_m,
)
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

HEADER_COMMENT = "# Invented data for selector's tests ({what}); illustrative, not real products."


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


# ------------------------------------------------------------------------------------------ files

def write_csv(path: Path, kind: str, rows: list[dict], what: str = "hand-made") -> None:
    """Write one catalogue CSV with the canonical header and an invented-data comment naming ``what``.

    Missing keys of a row are written as empty cells (optional columns take their defaults).
    """
    names = [c.name for c in columns(kind)]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        fh.write(HEADER_COMMENT.format(what=what) + "\n")
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(names)
        for r in rows:
            w.writerow([r.get(n, "") for n in names])


def _toml_value(v) -> str:
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    f = float(v)
    if not math.isfinite(f):
        raise ValueError(f"cannot write {f!r} to TOML")
    return repr(f)


def write_problem(path: Path, name: str, vehicle: dict, environment: dict, requirements: dict,
                  objective: str, what: str = "hand-made", drive: dict | None = None,
                  energy: dict | None = None) -> None:
    """Write a problem TOML naming motors.csv, reducers.csv and tyres.csv beside it."""
    lines = [HEADER_COMMENT.format(what=what), f"name = {_toml_value(name)}", "", "[catalogs]",
             'motors = "motors.csv"', 'reducers = "reducers.csv"', 'tyres = "tyres.csv"', "", "[vehicle]"]
    lines += [f"{k} = {_toml_value(x)}" for k, x in vehicle.items()]
    if drive:
        lines += ["", "[drive]"] + [f"{k} = {_toml_value(x)}" for k, x in drive.items()]
    lines += ["", "[environment]"] + [f"{k} = {_toml_value(x)}" for k, x in environment.items()]
    if requirements:
        lines += ["", "[requirements]"] + [f"{k} = {_toml_value(x)}" for k, x in requirements.items()]
    if energy:
        lines += ["", "[energy]"] + [f"{k} = {_toml_value(x)}" for k, x in energy.items()]
    lines += ["", "[objective]", f"minimize = {_toml_value(objective)}", ""]
    path.write_text("\n".join(lines), encoding="utf-8")


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
    objective_arg = objective
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    counts = [s if isinstance(s, (int, np.integer)) else int(rng.integers(s[0], s[1] + 1)) for s in sizes]
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
    weights = OBJECTIVE_WEIGHTS if objective_weights is None else objective_weights
    names = sorted(weights)
    p = np.array([weights[k] for k in names], dtype=float)
    drawn = str(rng.choice(names, p=p / p.sum()))
    objective = objective or drawn
    share = REQUIREMENT_SHARE if requirement_share is None else requirement_share
    if not isinstance(share, dict):
        share = {k: float(share) for k in REQUIREMENT_KEYS}
    stated = [k for k in REQUIREMENT_KEYS if rng.random() < share.get(k, 0.0)]

    # calibration: load the catalogues with the requirement-free problem, enumerate every design
    path = directory / "problem.toml"
    name = f"Random study {seed} (invented data)"
    write_problem(path, name, vehicle, environment, {}, "cost", f"seed {seed}", drive, energy_table)
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
    families = {"top_speed_kmh": ("sustained_top_speed_kmh", "min"), "gradeability_pct": ("gradeability_pct", "min"),
                "launch_accel_mps2": ("launch_accel_mps2", "min"), "accel_time_s": ("accel_time_s", "max"),
                "max_mass_kg": ("mass_kg", "max"), "budget": ("cost", "max")}
    for key, (metric, sense) in families.items():
        if key not in stated:
            continue
        level, kind = draw_level(rng, met[metric][pool], sense)
        if level is not None:
            req[key] = level
        levels[key] = kind

    if energy and objective_arg is None and np.random.default_rng([seed, 19]).random() < 0.4:
        objective = "energy"
    write_problem(path, name, vehicle, environment, req, objective, f"seed {seed}", drive, energy_table)
    problem, catalogs = load_study(path)
    return Study(seed=seed, problem_path=path, problem=problem, catalogs=catalogs,
                 parts=PartTables.build(problem, catalogs), levels=levels)


def write_and_load(directory, motors: list[dict], reducers: list[dict], tyres: list[dict], vehicle: dict,
                   environment: dict, requirements: dict | None = None, objective: str = "cost",
                   name: str = "Hand-made study (invented data)") -> PartTables:
    """Write hand-made catalogue rows and a problem to ``directory``, load them, return the part tables.

    Rows are dicts keyed by catalogue column (missing optional columns are left empty).
    """
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    for kind, rows in (("motors", motors), ("reducers", reducers), ("tyres", tyres)):
        write_csv(directory / f"{kind}.csv", kind, rows)
    path = directory / "problem.toml"
    write_problem(path, name, vehicle, environment, requirements or {}, objective)
    problem, catalogs = load_study(path)
    return PartTables.build(problem, catalogs)


def part_ids(parts: PartTables, design) -> tuple[str, str, str]:
    """(motor, reducer, tyre) part ids of a design (value, mi, rj, tk)."""
    _, i, j, k = design
    return str(parts.motors.part[i]), str(parts.reducers.part[j]), str(parts.tyres.part[k])


# ------------------------------------------------------------------------------------------ hand-made blocks
# Building blocks of the hand-made engine tests (test_engine_families.py, test_engine_ties.py):
# an invented 1500 kg vehicle and one part of each kind, overridable field by field.

HAND_VEHICLE = {"mass_kg": 1500.0, "drag_area_m2": 0.8, "wheelbase_m": 2.8, "cg_height_m": 0.6,
                "rear_axle_share": 0.5, "driven_axle": "rear", "tyre_count": 4}
HAND_ENVIRONMENT = {"road_friction": 0.9, "air_density_kg_m3": 1.2}


def motor_row(part, **kw):
    """Motor row: 250 N m / 80 kW peak, 130 N m / 40 kW continuous, 12000 rpm, no decline, 40 kg, 2000."""
    row = {"part": part, "supplier": "Volta Drives", "peak_torque_nm": 250, "peak_power_kw": 80,
           "max_speed_rpm": 12000, "cont_torque_nm": 130, "cont_power_kw": 40, "decline_speed_rpm": "",
           "decline_exponent": "", "mass_kg": 40, "rotor_inertia_kgm2": 0.02, "unit_cost": 2000,
           "lead_time_weeks": 4}
    row.update(kw)
    return row


def reducer_row(part, **kw):
    """Reducer row: ratio 8, 97 %, 400 N m, 16000 rpm, 15 kg, 500."""
    row = {"part": part, "supplier": "Geartech", "ratio": 8, "efficiency_pct": 97, "max_input_torque_nm": 400,
           "max_input_speed_rpm": 16000, "mass_kg": 15, "unit_cost": 500, "lead_time_weeks": 2}
    row.update(kw)
    return row


def tyre_row(part, **kw):
    """Tyre row: 205/55R16 91V, 8.0 N/kN, 9 kg, 100."""
    row = {"part": part, "supplier": "Roundway", "size": "205/55R16", "load_index": 91, "speed_symbol": "V",
           "rr_coefficient_n_per_kn": 8.0, "mass_kg": 9, "unit_cost": 100, "lead_time_weeks": 1}
    row.update(kw)
    return row


# ------------------------------------------------------------------------------------------ large, in memory
# Benchmark-size catalogues built in memory (no files, no calibration pass).

SYMBOLS = np.array(["Q", "R", "S", "T", "H", "V", "W", "Y"])


def synthetic_catalogs(n_motors: int, n_reducers: int, n_tyres: int, seed: int = 0) -> Catalogs:
    """Random but rule-abiding motor, reducer and tyre tables (sorted by part id)."""
    rng = np.random.default_rng(seed)
    p_kw = np.exp(rng.uniform(np.log(40), np.log(250), n_motors))
    t_nm = p_kw * rng.uniform(1.6, 3.2, n_motors)
    corner_rpm = p_kw * 1000 / t_nm * 60 / (2 * np.pi)
    max_rpm = np.maximum(corner_rpm * rng.uniform(2.0, 4.0, n_motors), rng.uniform(8000, 16000, n_motors))
    decline = np.where(rng.random(n_motors) < 0.3, rng.uniform(corner_rpm, max_rpm), np.nan)
    motors = pd.DataFrame({
        "part": [f"SM-{i:05d}" for i in range(n_motors)],
        "supplier": [f"Synthetic Motors {i % 7}" for i in range(n_motors)],
        "peak_torque_nm": t_nm.round(1), "peak_power_kw": p_kw.round(2), "max_speed_rpm": max_rpm.round(0),
        "cont_torque_nm": (t_nm * rng.uniform(0.45, 0.7, n_motors)).round(1),
        "cont_power_kw": (p_kw * rng.uniform(0.45, 0.7, n_motors)).round(2),
        "decline_speed_rpm": np.where(np.isnan(decline), max_rpm.round(0), np.ceil(decline)),
        "decline_exponent": np.where(np.isnan(decline), 1.0, rng.uniform(0.5, 1.5, n_motors).round(2)),
        "mass_kg": (p_kw * rng.uniform(0.4, 1.2, n_motors) + 10).round(1),
        "rotor_inertia_kgm2": (t_nm * rng.uniform(1e-4, 3e-4, n_motors)).round(5),
        "unit_cost": (p_kw * rng.uniform(25, 60, n_motors) + 300).round(0),
        "lead_time_weeks": rng.integers(2, 30, n_motors).astype(float),
    })
    reducers = pd.DataFrame({
        "part": [f"SR-{j:05d}" for j in range(n_reducers)],
        "supplier": [f"Synthetic Gears {j % 4}" for j in range(n_reducers)],
        "ratio": rng.uniform(4.0, 14.0, n_reducers).round(3),
        "efficiency_pct": rng.uniform(94.0, 98.0, n_reducers).round(1),
        "max_input_torque_nm": rng.choice([250, 400, 600, 800, 1000], n_reducers).astype(float),
        "max_input_speed_rpm": rng.choice([10000, 14000, 18000, 20000], n_reducers).astype(float),
        "mass_kg": rng.uniform(8, 50, n_reducers).round(1),
        "unit_cost": rng.uniform(400, 3000, n_reducers).round(0),
        "lead_time_weeks": rng.integers(2, 20, n_reducers).astype(float),
    })
    width = rng.choice(np.arange(165, 306, 10), n_tyres)
    aspect = rng.choice(np.arange(35, 81, 5), n_tyres)
    rim = rng.integers(14, 21, n_tyres)
    li = rng.integers(80, 121, n_tyres)
    sym = rng.choice(SYMBOLS, n_tyres)
    tyres = pd.DataFrame({
        "part": [f"ST-{k:05d}" for k in range(n_tyres)],
        "supplier": [f"Synthetic Tyres {k % 5}" for k in range(n_tyres)],
        "size": [f"{w}/{a}R{r}" for w, a, r in zip(width, aspect, rim, strict=True)],
        "load_index": li, "speed_symbol": sym,
        "rr_coefficient_n_per_kn": rng.uniform(6.0, 12.0, n_tyres).round(1),
        "mass_kg": rng.uniform(7, 16, n_tyres).round(1),
        "unit_cost": rng.uniform(60, 300, n_tyres).round(0),
        "lead_time_weeks": rng.integers(1, 12, n_tyres).astype(float),
    })
    tyres["diameter_m"] = unloaded_diameter_m(width.astype(float), aspect.astype(float), rim.astype(float))
    tyres["speed_rating_kmh"] = speed_rating_kmh(sym)
    tyres["load_capacity_kg"] = load_capacity_kg(li)
    return Catalogs(motors=motors, reducers=reducers, tyres=tyres)


def synthetic_problem(objective: str = "cost") -> Problem:
    """A light commercial van study (illustrative) with all requirement families stated."""
    return Problem(
        name="Synthetic van benchmark (illustrative data)", path=None, catalog_paths={},
        vehicle=Vehicle(mass_kg=1900.0, drag_area_m2=1.1, wheelbase_m=3.0, cg_height_m=0.65,
                        rear_axle_share=0.5, driven_axle="rear", tyre_count=4),
        environment=Environment(air_density_kg_m3=1.2, road_friction=0.85),
        requirements=Requirements(top_speed_kmh=130, gradeability_pct=25, launch_accel_mps2=2.5,
                                  accel_to_kmh=100, accel_time_s=11.0, max_mass_kg=2300, budget=12000),
        objective=objective)


def synthetic_study(n_motors: int, n_reducers: int, n_tyres: int, seed: int = 0, objective: str = "cost"):
    """(Problem, Catalogs) of the given sizes."""
    return synthetic_problem(objective), synthetic_catalogs(n_motors, n_reducers, n_tyres, seed)


def variant_motors(motors: pd.DataFrame, n_rows: int, seed: int = 0) -> pd.DataFrame:
    """``n_rows`` motor rows made as near-variants of the rows of ``motors`` (invented data).

    Each row copies a random base row and then, at random: stays an exact copy (a duplicate under
    its own part id, 25 %), costs 0-15 % more and weighs 0-5 % more (a dominated copy, 35 %), or is
    another winding (peak and continuous torque times f, every speed divided by f, f in 0.95..1.05,
    the same powers; price within +-5 %; 40 %). Part ids are drawn at random so that file order and
    part-id order differ from the base order.
    """
    rng = np.random.default_rng([seed, 23])
    base = motors.reset_index(drop=True)
    src = rng.integers(0, len(base), n_rows)
    out = base.iloc[src].reset_index(drop=True).copy()
    kind = rng.random(n_rows)
    dom = (kind >= 0.25) & (kind < 0.6)
    wind = kind >= 0.6
    out.loc[dom, "unit_cost"] = (out.loc[dom, "unit_cost"] * rng.uniform(1.0, 1.15, dom.sum())).round(0)
    out.loc[dom, "mass_kg"] = (out.loc[dom, "mass_kg"] * rng.uniform(1.0, 1.05, dom.sum())).round(1)
    f = rng.uniform(0.95, 1.05, wind.sum())
    for col in ("peak_torque_nm", "cont_torque_nm"):
        out.loc[wind, col] = (out.loc[wind, col] * f).round(1)
    out.loc[wind, "max_speed_rpm"] = (out.loc[wind, "max_speed_rpm"] / f).round(0)
    corner = out["peak_power_kw"] * 1000 / out["peak_torque_nm"] * 60 / (2 * np.pi)
    fw = np.ones(n_rows)
    fw[wind] = f
    decline = np.minimum(np.maximum(np.ceil(out["decline_speed_rpm"] / fw), np.ceil(corner)), out["max_speed_rpm"])
    out["decline_speed_rpm"] = np.where(wind, decline, out["decline_speed_rpm"])
    out.loc[wind, "unit_cost"] = (out.loc[wind, "unit_cost"] * rng.uniform(0.95, 1.05, wind.sum())).round(0)
    ids = rng.choice(np.arange(10 * n_rows), n_rows, replace=False)
    out["part"] = [f"SV-{int(x):07d}" for x in ids]
    return out.sort_values("part", kind="stable").reset_index(drop=True)


def variant_study(n_rows: int, n_reducers: int, n_tyres: int, families: int | None = None, seed: int = 0,
                  objective: str = "cost"):
    """(Problem, Catalogs): ``n_rows`` motor rows, near-variants of ``families`` base motors (default
    n_rows / 10), with the synthetic reducers and tyres (invented data)."""
    families = families or max(1, n_rows // 10)
    cat = synthetic_catalogs(families, n_reducers, n_tyres, seed)
    motors = variant_motors(cat.motors, n_rows, seed)
    return synthetic_problem(objective), Catalogs(motors=motors, reducers=cat.reducers, tyres=cat.tyres)

