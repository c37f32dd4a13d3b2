"""Explain, feasible study: what the gearbox and the energy requirement buy (data only).

Gearboxes (multi-speed reducers in the study's catalogue)
    A multi-speed optimum: the best design with every multi-speed part excluded (re-solve), and what
    it costs or loses against the optimum: the price of the extra gears. A single-speed optimum:
    the best design using multi-speed parts only (re-solve), and whether it comes within the
    near-miss margin of the optimum. In a two-unit study the exclusion (or restriction) applies to
    both axles' reducers.

Energy studies ([energy] table)
    The optimum's energy figures; the price of the range requirement (re-solve without range_km: no
    battery is sized); and the designs that lose on energy: the best few designs of the study without
    the range requirement (cheapest or lightest parts) that, once their battery is counted, either
    fail a requirement or cost (weigh) more than the optimum although their parts alone are cheaper
    (lighter) than the optimum's.
"""

from __future__ import annotations

import numpy as np

from selector.design import Design
from selector.engine.evaluate import OBJECTIVE_METRIC, check_results, evaluate, feasible
from selector.engine.search import STATUS_OPTIMAL
from selector.records import clean
from selector.studies.explain_common import Context, better, dropped

LOSE_ON_ENERGY_COUNT = 5
"""Designs of the study without the range requirement examined for losing on energy [-]."""
BATTERY_PART = {"cost": "battery_cost", "mass": "battery_mass_kg"}
"""The battery's share of each objective metric that a battery changes."""


def _multi_speed(parts, d: Design) -> bool:
    return any(parts.reducers.n_gears[r] > 1 for _, _, r in d.units)


def _alternative(ctx: Context, optimum: Design, reducers) -> dict | None:
    """The optimum with the reducers restricted to ``reducers``, verified, and how much worse it is."""
    if len(reducers) == 0:
        return None
    req = ctx.parts.problem.requirements
    res = ctx.search(req, allowed={**ctx.study.allowed, "reducers": np.asarray(reducers, dtype=np.int64)})
    if res.status != STATUS_OPTIMAL or not res.designs:
        return None
    d = res.designs[0]
    rec = ctx.record(d, req)
    worse = d.value - optimum.value
    return {"design": {k: rec[k] for k in ("motor", "reducer", "tyre", "units")}, "objective": clean(d.value),
            "worse": clean(worse), "worse_pct": clean(100.0 * worse / abs(optimum.value)) if optimum.value else None,
            "gears": [int(ctx.parts.reducers.n_gears[r]) for _, _, r in d.units]}


def gearbox_analysis(ctx: Context, optimum: Design, near_miss_pct: float) -> dict | None:
    """The price of the extra gears (multi-speed optimum) or the nearest multi-speed design
    (single-speed optimum); None when the study's allowed reducers are all single-speed."""
    parts = ctx.parts
    allowed = ctx.study.allowed.get("reducers")
    red = np.arange(parts.sizes[1]) if allowed is None else np.asarray(allowed, dtype=np.int64)
    multi = parts.reducers.n_gears[red] > 1
    if not multi.any():
        return None
    opt_multi = _multi_speed(parts, optimum)
    out = {"optimum_multi_speed": opt_multi, "optimum_gears": [int(parts.reducers.n_gears[r]) for _, _, r in
                                                                optimum.units],
           "near_miss_pct": near_miss_pct, "single_speed_parts": int((~multi).sum()),
           "multi_speed_parts": int(multi.sum()), "best_single_speed": None, "best_multi_speed": None}
    if opt_multi:
        out["best_single_speed"] = _alternative(ctx, optimum, red[~multi])
    else:
        alt = _alternative(ctx, optimum, red[multi])
        if alt is not None:
            alt["within_near_miss"] = bool(alt["worse_pct"] is not None and alt["worse_pct"] <= near_miss_pct)
        out["best_multi_speed"] = alt
    return out


def _energy_figures(metrics: dict, pos: int = 0) -> dict:
    return {k: clean(metrics[k][pos]) for k in ("energy_wh_per_km", "battery_kwh", "battery_mass_kg", "battery_cost")}


def _losers(ctx: Context, optimum: Design, opt_metrics: dict) -> list[dict]:
    """Designs with cheaper (lighter) parts than the optimum that lose once their battery is counted."""
    parts, objective = ctx.parts, ctx.objective
    req = parts.problem.requirements
    metric, battery = OBJECTIVE_METRIC[objective], BATTERY_PART[objective]
    opt_parts = float(opt_metrics[metric][0] - np.nan_to_num(opt_metrics[battery][0]))
    res = ctx.search(dropped(req, "range_km"), count=LOSE_ON_ENERGY_COUNT)
    if res.status != STATUS_OPTIMAL or not res.designs:
        return []
    keys = np.asarray([d.key for d in res.designs], dtype=np.int64)
    m = evaluate(parts, keys)
    ok = feasible(parts, m, objective)
    checks = check_results(parts, m)
    out = []
    for n, d in enumerate(res.designs):
        parts_value = d.value  # the objective without a battery (the range requirement dropped)
        total = float(m[metric][n])
        if d.key == optimum.key or not better(parts_value, opt_parts):
            continue
        if ok[n] and not better(optimum.value, total):
            continue
        out.append({"design": ctx.ids(d), "parts_value": clean(parts_value),
                    "parts_saved": clean(opt_parts - parts_value),
                    "total": clean(total), "unit": "currency" if objective == "cost" else "kg",
                    "dearer_by": clean(total - optimum.value) if np.isfinite(total) else None,
                    "wh_per_km": clean(m["energy_wh_per_km"][n]), "battery_kwh": clean(m["battery_kwh"][n]),
                    "fails": sorted(k for k, v in checks.items() if not bool(v[n]))})
    return out


def energy_analysis(ctx: Context, optimum: Design) -> dict | None:
    """Energy figures of the optimum, the price of the range requirement and the designs that lose on
    energy; None for a study without [energy]."""
    parts = ctx.parts
    energy = parts.problem.energy
    if energy is None:
        return None
    req = parts.problem.requirements
    m = evaluate(parts, [optimum.key], accel=False)
    out = {"cycle": energy.cycle, "range_km": clean(req.range_km), "optimum": _energy_figures(m),
           "price_of_range": None, "lose_on_energy": [], "note": None}
    if req.range_km is None:
        out["note"] = "no range_km: no battery is sized, so energy enters neither cost nor mass"
        return out
    res = ctx.search(dropped(req, "range_km"))
    if res.status == STATUS_OPTIMAL and res.designs:
        d = res.designs[0]
        saved = optimum.value - d.value
        out["price_of_range"] = {"design": ctx.ids(d), "objective": clean(d.value), "saved": clean(max(saved, 0.0)),
                                 "saved_pct": clean(100.0 * max(saved, 0.0) / abs(optimum.value))
                                 if optimum.value else None}
    else:
        out["price_of_range"] = {"design": None, "objective": None, "saved": None, "saved_pct": None}
    if ctx.objective in BATTERY_PART:
        out["lose_on_energy"] = _losers(ctx, optimum, m)
    else:
        out["note"] = "the energy objective ranks designs by energy already: no design loses on energy to the optimum"
    return out
