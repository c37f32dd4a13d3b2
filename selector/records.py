"""Design records (the JSON contract documented in README.md) and readable terminal tables.

A design record is built only from a *verified* evaluation (`verify.verify_design`). Infinite
values become JSON null. Requirement names are the problem file's keys.
"""

from __future__ import annotations

import json
import math
import numbers
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from selector.engine.parts import PartTables

# No numpy, pandas or engine import at module level: the command line imports this module to print
# its tables, also for `selector --help`; the record builders below import what they need.

CAUTION = ("Caution: figures are estimates from catalogue data. Confirm ratings with the suppliers, "
           "thermal derating, braking and tyre regulations before ordering; defer to local codes, "
           "homologation rules and licensed engineering practice.")

BINDING_MARGIN_PCT = 1.0
"""A requirement is reported as binding (tight) when its margin is at most this [%]."""
BINDING_RULE = f"margin_pct <= {BINDING_MARGIN_PCT:g}"

PERFORMANCE_UNITS = {
    "max_speed_kmh": "km/h", "sustained_top_speed_kmh": "km/h", "gradeability_pct": "%",
    "launch_accel_mps2": "m/s^2", "accel_time_s": "s",
}


def clean(x):
    """A float for JSON: None for NaN/inf, rounded to 10 significant digits."""
    if x is None:
        return None
    x = float(x)
    if not math.isfinite(x):
        return None
    return float(f"{x:.10g}")


def smallest_margin(rows: list[dict]) -> tuple[float | None, str | None]:
    """The smallest ``margin_pct`` [%] of requirement and check rows and its row's name, leaving out
    `requirements.NO_HEADROOM` (the cycle followed in full, the range the battery is sized for);
    (None, None) without any."""
    from selector.requirements import NO_HEADROOM

    kept = [r for r in rows if r["margin_pct"] is not None and r["name"] not in NO_HEADROOM]
    if not kept:
        return None, None
    r = min(kept, key=lambda r: r["margin_pct"])
    return clean(r["margin_pct"]), r["name"]


def requirement_rows(parts: PartTables, metrics: dict, pos: int = 0) -> list[dict]:
    """Required / achieved / margin / binding of every stated requirement for design ``pos``."""
    from selector.requirements import margin_fraction, passes, stated

    rows = []
    for r, required in stated(parts.problem):
        achieved = float(metrics[r.metric][pos])
        frac = float(margin_fraction(r.sense, required, achieved))
        ok = bool(passes(r.sense, required, achieved))
        margin_pct = 100.0 * frac
        rows.append({
            "name": r.name, "required": clean(required), "achieved": clean(achieved), "unit": r.unit,
            "sense": "at least" if r.sense == "min" else "at most",
            "margin": clean(achieved - required if r.sense == "min" else required - achieved),
            "margin_pct": clean(margin_pct), "met": ok,
            "binding": bool(ok and math.isfinite(margin_pct) and margin_pct <= BINDING_MARGIN_PCT),
        })
    return rows


def check_rows(parts: PartTables, metrics: dict, pos: int = 0, keys=None) -> list[dict]:
    """Part-rating checks: demand (achieved) against the part's rating (required).

    Every row names its ``axle``: the drive unit's axle for the reducer ratings (one row per unit in
    a two-unit study), the heavier static axle for the tyre load (given the design's key row
    ``keys``; None without it), None for the tyre speed symbol and the energy study's cycle check.
    The checks and their metric keys are `requirements.check_rows`, the list `evaluate.feasible` reads.
    """
    from selector.requirements import check_rows as study_checks
    from selector.requirements import margin_fraction, passes

    rows = []
    for c, axle, limit_key, demand_key in study_checks(parts.axles, parts.problem.energy is not None):
        limit = float(metrics[limit_key][pos])
        achieved = float(metrics[demand_key][pos])
        frac = float(margin_fraction(c.sense, limit, achieved))
        if c.per_axle:
            axle = axle or parts.axles[-1]
        elif c.name == "tyre_load_kg" and keys is not None:
            axle = _heavier_axle(parts, keys, metrics, pos)
        rows.append({"name": c.name, "required": clean(limit), "achieved": clean(achieved), "unit": c.unit,
                     "sense": "at least" if c.sense == "min" else "at most",
                     "margin": clean(limit - achieved if c.sense == "max" else achieved - limit),
                     "margin_pct": clean(100.0 * frac), "met": bool(passes(c.sense, limit, achieved)),
                     "binding": bool(math.isfinite(frac) and 100.0 * frac <= BINDING_MARGIN_PCT and frac >= -1e-9),
                     "axle": axle})
    return rows


def _heavier_axle(parts: PartTables, keys, metrics: dict, pos: int) -> str:
    """The axle whose static load sets the tyre-load demand ("rear" on a tie)."""
    import numpy as np

    battery = metrics.get("battery_mass_kg")
    extra = None if battery is None else np.nan_to_num(np.asarray([battery[pos]], dtype=float))
    rear, front = parts.axle_masses_kg(np.asarray([keys]), extra)
    return "rear" if rear[0] >= front[0] else "front"


def _part(arr, pos: int, quantity: int, **extra) -> dict:
    return {"part": str(arr.part[pos]), "supplier": str(arr.supplier[pos]), "quantity": quantity, **extra,
            "unit_cost": clean(arr.cost[pos]), "lead_time_weeks": clean(arr.lead_time_weeks[pos])}


def gear_ratios(parts: PartTables, reducer: int) -> list[float]:
    """The gear ratios of a reducer or gearbox, first gear first [-]."""
    re = parts.reducers
    return [clean(r) for r in re.ratios[reducer, : int(re.n_gears[reducer])]]


def part_info(parts: PartTables, design, j: int | None = None, k: int | None = None) -> dict:
    """Catalogue facts of a design's parts (ids, suppliers, costs, lead times, quantities).

    Single-axle designs: keys "motor", "reducer", "tyre" (the single-axle contract). Two-unit
    designs: "front_motor", "front_reducer", "rear_motor", "rear_reducer", "tyre", each unit part
    with its ``axle`` and quantity 1 (the bill of materials merges a part fitted on both axles).
    ``design`` is a `selector.design.Design`, or a motor position with ``j``, ``k`` (single axle).
    """
    design = as_design(parts, design, j, k)
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    out = {}
    for axle, i, r in design.units:
        prefix = f"{axle}_" if design.two_units else ""
        out[prefix + "motor"] = _part(mo, i, 1)
        out[prefix + "reducer"] = _part(re, r, 1, ratio=clean(re.ratio[r]))
        if design.two_units:
            out[prefix + "motor"]["axle"] = out[prefix + "reducer"]["axle"] = axle
    t = design.tyre
    out["tyre"] = _part(ty, t, parts.problem.vehicle.tyre_count)
    out["tyre"]["rolling_radius_m"] = clean(ty.radius_m[t])
    return out


def as_design(parts: PartTables, design, j: int | None = None, k: int | None = None):
    """A `selector.design.Design` from a Design, or from single-axle (motor, reducer, tyre) positions."""
    from selector.design import Design

    if isinstance(design, Design):
        return design
    return Design.of(math.nan, parts.single_keys(int(design), int(j), int(k))[0])


def unit_rows(parts: PartTables, design) -> list[dict]:
    """``units`` of a design record: [{axle, motor, reducer, gear_ratios}] of the present units, front first."""
    return [{"axle": axle, "motor": str(parts.motors.part[i]), "reducer": str(parts.reducers.part[r]),
             "gear_ratios": gear_ratios(parts, r)} for axle, i, r in design.units]


def shift_rows(run, pos: int) -> list[dict]:
    """``shifts`` of a design record from an acceleration run (`physics.accel_run.RunResult`).

    [{axle, from_gear, to_gear, speed_kmh, time_s}] in the order they happen; gears count from 1;
    ``speed_kmh`` and ``time_s`` are the road speed and the elapsed time when the torque
    interruption starts.
    """
    from selector.units import mps_to_kmh

    out = []
    if run is None:
        return out
    for kk in range(run.shift_axle.shape[1]):
        a = int(run.shift_axle[pos, kk])
        if a < 0:
            continue
        g = int(run.shift_from_gear[pos, kk])
        out.append({"axle": "front" if a == 0 else "rear", "from_gear": g + 1, "to_gear": g + 2,
                    "speed_kmh": clean(mps_to_kmh(float(run.shift_speed_mps[pos, kk]))),
                    "time_s": clean(run.shift_time_s[pos, kk])})
    return out


ENERGY_KEYS = {"wh_per_km": "energy_wh_per_km", "battery_kwh": "battery_kwh", "battery_mass_kg": "battery_mass_kg",
               "battery_cost": "battery_cost", "regen_share": "regen_share"}
"""``energy`` entry of a design record: record key -> metric key (energy studies only)."""


def energy_entry(parts: PartTables, metrics: dict, pos: int) -> dict:
    """``energy`` of a design record in an energy study: the cycle, energy per km at the battery
    [Wh/km], the battery sized for ``range_km`` (kWh, kg, cost; 0 without a range) and the share of
    the traction energy recovered by regeneration [-]."""
    e = parts.problem.energy
    return {"cycle": str(e.cycle), **{k: clean(metrics[m][pos]) for k, m in ENERGY_KEYS.items()}}


def design_record(parts: PartTables, design, *args, run=None) -> dict:
    """The JSON record of one verified design.

    ``design_record(parts, design, metrics, pos=0)`` with a `selector.design.Design` (or the
    single-axle form ``design_record(parts, i, j, k, metrics, pos=0)``). ``run``: the acceleration
    run with its shifts (`physics.accel_run.RunResult`, rows aligned with ``metrics``), for the
    ``shifts`` of multi-speed designs.

    Single-axle designs carry ``motor`` and ``reducer`` at the top level; two-unit designs have null
    there, and so for ``gear_ratios`` (the reducer's ratios, first gear first). Every design lists
    ``units`` [{axle, motor, reducer, gear_ratios}] and ``shifts`` of its acceleration run ([]
    without shifts); an energy study adds ``energy``.
    """
    from selector.design import Design

    if isinstance(design, Design):
        metrics, pos = args[0], (args[1] if len(args) > 1 else 0)
    else:
        design = as_design(parts, design, args[0], args[1])
        metrics, pos = args[2], (args[3] if len(args) > 3 else 0)
    info = part_info(parts, design)
    rows = requirement_rows(parts, metrics, pos)
    checks = check_rows(parts, metrics, pos, design.key)
    units = unit_rows(parts, design)
    single = not design.two_units and len(units) == 1
    rec = {
        "motor": units[0]["motor"] if single else None, "reducer": units[0]["reducer"] if single else None,
        "tyre": info["tyre"]["part"],
        "cost": clean(metrics["cost"][pos]), "mass_kg": clean(metrics["mass_kg"][pos]),
        "lead_time_weeks": clean(max(info[p]["lead_time_weeks"] for p in info)),
        "performance": {key: clean(metrics[key][pos]) for key in PERFORMANCE_UNITS},
        "requirements": rows,
        "checks": checks,
        "smallest_margin_pct": smallest_margin(rows + checks)[0],
        "parts": info,
        "units": units,
        "gear_ratios": units[0]["gear_ratios"] if single else None,
        "shifts": shift_rows(run, pos),
    }
    if parts.problem.energy is not None:
        rec["energy"] = energy_entry(parts, metrics, pos)
    return rec


def design_name(rec: dict) -> str:
    """Parts of a design record in one line: "motor + reducer + tyre", or per axle for two units."""
    if rec.get("motor") is not None or not rec.get("units"):
        return f"{rec['motor']} + {rec['reducer']} + {rec['tyre']}"
    return " | ".join(f"{u['axle']}: {u['motor']} + {u['reducer']}" for u in rec["units"]) + f" | tyre {rec['tyre']}"


# ----------------------------------------------------------------------------- text output

def fmt(x, digits=4) -> str:
    """A number for a table cell ("-" for None, "inf" for infinite)."""
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, numbers.Integral):  # int and numpy's integer types
        return str(x)
    x = float(x)
    if math.isinf(x):
        return "inf"
    if math.isnan(x):
        return "-"
    if abs(x) >= 10 ** digits:
        return f"{x:.0f}"
    return f"{x:.{digits}g}"


def _printable(text: str) -> str:
    """Text for a terminal: control characters (escape sequences, line breaks) shown escaped, never sent raw."""
    from selector.io.files import control_char, shown

    return text if control_char(text) is None else shown(text, limit=len(text))


def table(headers: list[str], rows: list[list], align: str | None = None) -> str:
    """A plain monospace table; ``align`` is a string of 'l'/'r' per column (default: first l)."""
    cells = [[_printable(str(h)) for h in headers]] + [[_printable(c) if isinstance(c, str) else fmt(c) for c in r]
                                                      for r in rows]
    widths = [max(len(r[c]) for r in cells) for c in range(len(headers))]
    align = align or ("l" + "r" * (len(headers) - 1))
    out = []
    for n, r in enumerate(cells):
        line = "  ".join(c.ljust(w) if a == "l" else c.rjust(w) for c, w, a in zip(r, widths, align, strict=False))
        out.append(line.rstrip())
        if n == 0:
            out.append("  ".join("-" * w for w in widths))
    return "\n".join(out)


def requirement_table(rec: dict) -> str:
    """Requirements and part-rating checks of a design record as a table."""
    rows = []
    for r in rec["requirements"]:
        rows.append([r["name"], r["sense"], fmt(r["required"]), fmt(r["achieved"]), r["unit"],
                     fmt(r["margin_pct"], 3), "yes" if r["met"] else "NO", "yes" if r["binding"] else ""])
    two = rec.get("motor") is None and len(rec.get("units") or ()) > 1
    for r in rec["checks"]:
        name = f"{r['name']} ({r['axle']})" if two and r.get("axle") else r["name"]
        rows.append([name, r["sense"], fmt(r["required"]), fmt(r["achieved"]), r["unit"],
                     fmt(r["margin_pct"], 3), "yes" if r["met"] else "NO", "yes" if r["binding"] else ""])
    return table(["requirement / check", "sense", "required", "achieved", "unit", "margin %", "met",
                  "binding"], rows, "llrrlrll")


def parts_table(rec: dict) -> str:
    """The parts of a design record as a table (one line per unit part and axle, then the tyre)."""
    rows = []
    for kind, p in rec["parts"].items():
        rows.append([kind.replace("_", " "), p["part"], p["supplier"], p["quantity"], fmt(p["unit_cost"]),
                     fmt(p["unit_cost"] * p["quantity"]), fmt(p["lead_time_weeks"])])
    return table(["part", "id", "supplier", "qty", "unit cost", "cost", "lead time wk"], rows, "lllrrrr")


def units_table(rec: dict) -> str:
    """Drive units of a design record (axle, motor, reducer, gear ratios) and the run's shifts."""
    rows = [[u["axle"], u["motor"], u["reducer"], " / ".join(fmt(g) for g in u["gear_ratios"])] for u in rec["units"]]
    out = table(["axle", "motor", "reducer", "gear ratios"], rows, "llll")
    if rec.get("shifts"):
        out += "\n\n" + table(["axle", "shift", "speed km/h", "time s"],
                               [[s["axle"], f"{s['from_gear']} -> {s['to_gear']}", fmt(s["speed_kmh"]),
                                 fmt(s["time_s"])] for s in rec["shifts"]], "llrr")
    return out


def energy_table(rec: dict) -> str:
    """The ``energy`` entry of a design record as a table."""
    e = rec["energy"]
    units = {"wh_per_km": "Wh/km", "battery_kwh": "kWh", "battery_mass_kg": "kg", "battery_cost": "currency",
             "regen_share": "-"}
    return table(["energy (" + e["cycle"] + ")", "value", "unit"], [[k, fmt(e[k]), u] for k, u in units.items()],
                 "lrl")


def performance_table(rec: dict) -> str:
    """Performance figures of a design record as a table."""
    rows = [[k, fmt(v), PERFORMANCE_UNITS[k]] for k, v in rec["performance"].items()]
    rows += [["mass_kg", fmt(rec["mass_kg"]), "kg"], ["cost", fmt(rec["cost"]), "currency"]]
    return table(["figure", "value", "unit"], rows, "lrl")


def dumps(obj) -> str:
    """JSON text with NaN/inf already replaced by null."""
    return json.dumps(obj, indent=2, allow_nan=False)
