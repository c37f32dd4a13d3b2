"""Explain's sentences: turn the analysis (plain data from `explain` and `explain_infeasible`) into text.

Nothing here computes a physical or optimisation result; every number comes from the analysis dict.
"""

from __future__ import annotations

import math

from selector.api import OBJECTIVE_UNITS as API_UNITS
from selector.io.catalog import distinct_numbers

UNITS = {**API_UNITS, "energy": API_UNITS.get("energy", "Wh/km")}
"""Unit of each objective's value."""


def num(x) -> str:
    """A number for a sentence: 4 significant digits, whole numbers above 1e4, "-" for None."""
    if x is None:
        return "-"
    x = float(x)
    if not math.isfinite(x):
        return "inf"
    return f"{x:.4g}" if abs(x) < 1e4 else f"{x:.0f}"


def design_text(d: dict | None) -> str:
    """Part ids of a design dict: "motor + reducer + tyre", or per axle for a two-unit design."""
    if d is None:
        return "-"
    if d.get("motor") is None and d.get("units"):
        units = " | ".join(f"{u['axle']}: {u['motor']} + {u['reducer']}" for u in d["units"])
        return f"{units} | tyre {d['tyre']}"
    return f"{d['motor']} + {d['reducer']} + {d['tyre']}"


def near_miss_sentence(n: dict, objective: str, optimum_value: float) -> str:
    """One near miss: the design works if the user accepts the value it achieves."""
    return (f"{design_text(n['design'])} works if you accept {n['name']} = {num(n['achieved'])} {n['unit']} "
            f"instead of {num(n['required'])}: {objective} {num(n['objective'])} instead of "
            f"{num(optimum_value)} {UNITS[objective]}")


def feasible_summary(rows: list[dict], driving: list[str], rec: dict, objective: str, step_pct: float) -> list[str]:
    """Plain sentences: which requirements are active, what limits each axle, which drove the motor choice."""
    out = []
    active = [r["name"] for r in rows if r["active"]]
    out.append("active (re-solve): " + (", ".join(active) if active else "none: the optimum is the best design "
                                        "even without any single requirement"))
    for r in rows:
        if r.get("limited_by") and r["active"]:
            out.append(f"{r['limited_by']} limits {r['name']}")
    motor = _motors(rec)
    by_name = {r["name"]: r for r in rows}
    if driving:
        top = by_name[driving[0]]
        best = top["price"]["dropped"]["saved"]
        tied = [n for n in driving if math.isclose(by_name[n]["price"]["dropped"]["saved"] or 0.0, best or 0.0,
                                                    rel_tol=1e-9, abs_tol=1e-12)]
        d = top["price"]["dropped"]["design"]
        out.append(f"motor {motor} is chosen because of {' and '.join(tied)}: dropping it changes the motor "
                   f"(to {_motors(d)}) and saves the most ({num(best)} {UNITS[objective]}, "
                   f"{num(top['price']['dropped']['saved_pct'])} %)")
        for n in driving:
            lo = by_name[n]["price"]["loosened"]
            if lo["changes_motor"]:
                out.append(f"loosening {n} by {step_pct:g} % already changes the motor to {_motors(lo['design'])} "
                           f"and saves {num(lo['saved'])} {UNITS[objective]}")
    else:
        out.append(f"no single requirement drives the motor choice: motor {motor} stays optimal when any "
                   "one requirement is dropped")
    return out


def _motors(d: dict) -> str:
    if d.get("motor") is not None or not d.get("units"):
        return str(d.get("motor"))
    return " / ".join(f"{u['axle']} {u['motor']}" for u in d["units"])


def gearbox_sentences(g: dict | None, objective: str) -> list[str]:
    """The price of the second gear, or how close a multi-speed part came."""
    if not g:
        return []
    unit = UNITS[objective]
    if g["optimum_multi_speed"]:
        alt = g["best_single_speed"]
        if alt is None:
            if not g["single_speed_parts"]:
                return ["every allowed reducer is multi-speed: no single-speed design to compare with"]
            return ["no single-speed design meets the requirements: the gearbox is needed"]
        return [f"price of the extra gears: the best single-speed design {design_text(alt['design'])} has "
                f"{objective} {num(alt['objective'])} {unit}, {num(alt['worse'])} {unit} "
                f"({num(alt['worse_pct'])} %) worse than the multi-speed optimum"]
    alt = g["best_multi_speed"]
    if alt is None:
        return ["no multi-speed design meets the requirements"]
    verdict = (f"within the near-miss margin of {num(g['near_miss_pct'])} %" if alt["within_near_miss"]
               else f"outside the near-miss margin of {num(g['near_miss_pct'])} %")
    return [f"best multi-speed design {design_text(alt['design'])}: {objective} {num(alt['objective'])} {unit}, "
            f"{num(alt['worse'])} {unit} ({num(alt['worse_pct'])} %) worse than the single-speed optimum, {verdict}"]


def energy_sentences(e: dict | None, objective: str) -> list[str]:
    """The price of the range requirement and the designs that lose on energy."""
    if not e:
        return []
    out = []
    unit = UNITS[objective]
    p = e.get("price_of_range")
    if p is not None:
        if p["design"] is None:
            out.append("without the range requirement no design is feasible either")
        else:
            out.append(f"price of range_km = {num(e['range_km'])} km: without it (no battery sized) the optimum is "
                       f"{design_text(p['design'])} at {objective} {num(p['objective'])} {unit}; the range costs "
                       f"{num(p['saved'])} {unit} ({num(p['saved_pct'])} %)")
    for d in e.get("lose_on_energy", []):
        fate = (f"fails {', '.join(d['fails'])} once its battery is counted" if d["fails"]
                else f"comes to {num(d['total'])} {d['unit']} in all, {num(d['dearer_by'])} more than the optimum")
        out.append(f"{design_text(d['design'])} has parts {num(d['parts_saved'])} {d['unit']} below the optimum's "
                   f"({num(d['wh_per_km'])} Wh/km, battery {num(d['battery_kwh'])} kWh) but {fate}")
    if e.get("note"):
        out.append(e["note"])
    return out


SET_SIZES = {1: "one", 2: "two", 3: "three"}


def infeasible_summary(inf: dict, max_conflict_size: int = 3) -> list[str]:
    """Plain sentences for an infeasible study (``max_conflict_size``: the largest conflict sets tested)."""
    out = []
    for d in inf["impossible"]:
        req, lim = distinct_numbers(d["required"], d["limit"], digits=(4, 4))
        out.append(f"impossible: {d['name']} = {req} {d['unit']}; "
                   f"{'limit' if d['bound'] == 'exact' else 'at most'} {lim} {d['unit']} ({d['why']})")
    if inf["conflicts"]:
        out.append("cannot be met together: " + "; ".join(" + ".join(c) for c in inf["conflicts"]))
    elif inf.get("closest") is not None:
        size = SET_SIZES.get(max_conflict_size, str(max_conflict_size))
        out.append(f"no set of {size} or fewer requirements conflicts (sets up to {size} were tested): the "
                   "conflict takes more of them together")
    if inf.get("closest_note"):
        out.append(inf["closest_note"])
    if inf.get("closest"):
        c = inf["closest"]
        misses = [miss_text(r) for r in c["shortfalls"] if not r["met"]]
        if misses:
            out.append(f"closest design {design_text(c)} misses " + "; ".join(misses))
        else:
            out.append(f"closest design {design_text(c)} meets every stated value once "
                       "the vehicle-level impossibilities are relaxed")
        if inf["relaxation_verified"]:
            out.append(f"relax to {relax_text(inf['relaxation'])}: a re-solve confirms the study becomes feasible")
            for o in inf.get("relaxation_options", []):
                if o["verified"] and o["relaxation"] != inf["relaxation"]:
                    out.append(f"or relax to {relax_text(o['relaxation'])}: also confirmed by a re-solve")
        else:
            out.append(inf.get("relaxation_note") or "no confirmed relaxation")
    return out


def relax_text(relax: dict) -> str:
    """A relaxation as "name = value, ..." ("dropped" for None)."""
    return ", ".join(f"{k} = {'dropped' if v is None else num(v)}" for k, v in relax.items())


def miss_text(r: dict) -> str:
    """One shortfall row as text; an acceleration target never reached says how far the run gets; a
    traction-limited shortfall names the axle."""
    if "reach_kmh" in r and (r["name"] == "accel_to_kmh" or r["achieved"] is None):
        return (f"{r['name']}: never reaches {num(r['accel_to_kmh'])} km/h (its acceleration run ends at "
                f"{num(r['reach_kmh'])} km/h, {r['reach_limit']} limit)")
    why = f"; {r['limited_by']} limits {r['name']}" if r.get("limited_by") else ""
    achieved, required = (distinct_numbers(r["achieved"], r["required"], digits=(4, 4))
                          if r["achieved"] is not None else (num(None), num(r["required"])))
    return (f"{r['name']} {achieved} vs {required} {r['unit']} "
            f"({num(r['shortfall_pct'])} % short{why})")
