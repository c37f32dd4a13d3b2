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


def check_rows(parts: PartTables, metrics: dict, pos: int = 0) -> list[dict]:
    """Part-rating checks: demand (achieved) against the part's rating (required)."""
    from selector.requirements import CHECK_LIMIT_METRIC, CHECKS, margin_fraction, passes

    rows = []
    for c in CHECKS:
        limit = float(metrics[CHECK_LIMIT_METRIC[c.name]][pos])
        achieved = float(metrics[c.metric][pos])
        frac = float(margin_fraction("max", limit, achieved))
        rows.append({"name": c.name, "required": clean(limit), "achieved": clean(achieved), "unit": c.unit,
                     "sense": "at most", "margin": clean(limit - achieved), "margin_pct": clean(100.0 * frac),
                     "met": bool(passes("max", limit, achieved)),
                     "binding": bool(math.isfinite(frac) and 100.0 * frac <= BINDING_MARGIN_PCT and frac >= -1e-9)})
    return rows


def part_info(parts: PartTables, i: int, j: int, k: int) -> dict:
    """Catalogue facts of the three parts (ids, suppliers, costs, lead times, quantities)."""
    n = parts.problem.vehicle.tyre_count
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    return {
        "motor": {"part": str(mo.part[i]), "supplier": str(mo.supplier[i]), "quantity": 1,
                  "unit_cost": clean(mo.cost[i]), "lead_time_weeks": clean(mo.lead_time_weeks[i])},
        "reducer": {"part": str(re.part[j]), "supplier": str(re.supplier[j]), "quantity": 1,
                    "ratio": clean(re.ratio[j]), "unit_cost": clean(re.cost[j]),
                    "lead_time_weeks": clean(re.lead_time_weeks[j])},
        "tyre": {"part": str(ty.part[k]), "supplier": str(ty.supplier[k]), "quantity": n,
                 "unit_cost": clean(ty.cost[k]), "lead_time_weeks": clean(ty.lead_time_weeks[k]),
                 "rolling_radius_m": clean(ty.radius_m[k])},
    }


def design_record(parts: PartTables, i: int, j: int, k: int, metrics: dict, pos: int = 0) -> dict:
    """The JSON record of one verified design."""
    info = part_info(parts, i, j, k)
    rows = requirement_rows(parts, metrics, pos)
    checks = check_rows(parts, metrics, pos)
    margins = [r["margin_pct"] for r in rows + checks if r["margin_pct"] is not None]
    return {
        "motor": info["motor"]["part"], "reducer": info["reducer"]["part"], "tyre": info["tyre"]["part"],
        "cost": clean(metrics["cost"][pos]), "mass_kg": clean(metrics["mass_kg"][pos]),
        "lead_time_weeks": clean(max(info[p]["lead_time_weeks"] for p in info)),
        "performance": {key: clean(metrics[key][pos]) for key in PERFORMANCE_UNITS},
        "requirements": rows,
        "checks": checks,
        "smallest_margin_pct": clean(min(margins)) if margins else None,
        "parts": info,
    }


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
    for r in rec["checks"]:
        rows.append([r["name"], r["sense"], fmt(r["required"]), fmt(r["achieved"]), r["unit"],
                     fmt(r["margin_pct"], 3), "yes" if r["met"] else "NO", "yes" if r["binding"] else ""])
    return table(["requirement / check", "sense", "required", "achieved", "unit", "margin %", "met",
                  "binding"], rows, "llrrlrll")


def parts_table(rec: dict) -> str:
    """The three parts of a design record as a table."""
    rows = []
    for kind in ("motor", "reducer", "tyre"):
        p = rec["parts"][kind]
        rows.append([kind, p["part"], p["supplier"], p["quantity"], fmt(p["unit_cost"]),
                     fmt(p["unit_cost"] * p["quantity"]), fmt(p["lead_time_weeks"])])
    return table(["part", "id", "supplier", "qty", "unit cost", "cost", "lead time wk"], rows, "lllrrrr")


def performance_table(rec: dict) -> str:
    """Performance figures of a design record as a table."""
    rows = [[k, fmt(v), PERFORMANCE_UNITS[k]] for k, v in rec["performance"].items()]
    rows += [["mass_kg", fmt(rec["mass_kg"]), "kg"], ["cost", fmt(rec["cost"]), "currency"]]
    return table(["figure", "value", "unit"], rows, "lrl")


def dumps(obj) -> str:
    """JSON text with NaN/inf already replaced by null."""
    return json.dumps(obj, indent=2, allow_nan=False)
