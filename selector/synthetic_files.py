"""Synthetic studies written as files (invented data): catalogue CSVs and problem TOML, hand-made blocks.

`write_csv` and `write_problem` write what `selector.synthetic.random_study` draws; `write_and_load`
writes hand-made rows (`motor_row`, `reducer_row`, `tyre_row`, `HAND_VEHICLE`, `HAND_ENVIRONMENT`) and
loads them the way a user's files are loaded. Part of the shared generator `selector.synthetic`
(which re-exports these names).
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from selector.engine.parts import PartTables
from selector.io.problem import load_study
from selector.io.schema import columns

__all__ = ["HAND_ENVIRONMENT", "HAND_VEHICLE", "HEADER_COMMENT", "motor_row", "part_ids", "reducer_row", "tyre_row",
           "write_and_load", "write_csv", "write_problem"]

HEADER_COMMENT = "# Invented data for selector's tests ({what}); illustrative, not real products."


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
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
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
