"""The cost-versus-acceleration frontier (or mass-versus-acceleration), exactly, by epsilon-constraint.

A design is on the frontier when it meets every requirement of the problem except
``accel_time_s`` (which becomes the frontier's axis), reaches ``accel_to_kmh`` at all (finite
time), and no other such design is both cheaper (or equally cheap) and faster (or equally fast),
with one of the two strictly.

The frontier is traced with the exact engine, point by point:

1. the least cost subject to time <= t_cap (t_cap = "any finite time" at first) -> c;
2. the fastest design of cost c (within 1e-9; and within the problem's own budget) -> point (c, t):
   the designs cheaper than c are all slower than t_cap, so it is the fastest of cost <= c;
3. t_cap = t (1 - 3e-9), strictly faster than the last point; repeat until step 1 is infeasible.

A single-axle study without [energy] does this in one sweep (`engine.frontier_sweep`). Two-unit and
energy studies do steps 1 and 2 in one exact search per point: the least-cost designs under the
cap, as many as tie on cost (``count`` `TIED_FIRST`, doubled while every returned design ties),
and of those the fastest by exact evaluation. Every search is exact (`engine.search`), so the
frontier is exact: each point is the fastest design at its cost, and no design with a cost
between two consecutive points is faster than the cheaper of them. Times within 2e-9 relative (the
pass tolerance on both sides of ``t_cap``) count as equal, as do costs within 2e-9. Every point is verified by the
independent physics re-check (`api.records`). With ``axis="mass"`` the same holds for the
vehicle mass and ``max_mass_kg`` instead of the cost and ``budget``.
With ``axis="energy"`` (studies with an [energy] table) the axis is the energy per km at the
battery, traced the same way.
"""

from __future__ import annotations

import math
import time
from dataclasses import replace

from selector.api import Study, header, records
from selector.design import Design
from selector.engine.evaluate import evaluate, tie_tolerance
from selector.engine.search import (
    STATUS_INFEASIBLE,
    STATUS_OPTIMAL,
    SearchSession,
    search,
)
from selector.errors import InputError
from selector.records import clean
from selector.requirements import REL_TOL, passes

AXES = {
    # axis: (objective, requirement limiting it, design-record key, label, unit)
    "cost": ("cost", "budget", "cost", "cost", "currency"),
    "mass": ("mass", "max_mass_kg", "mass_kg", "vehicle mass", "kg"),
    "energy": ("energy", None, "energy_wh_per_km", "energy per km at the battery", "Wh/km"),
}
"""Axes a frontier can be traced against the acceleration time."""

ANY_FINITE_TIME_S = 1e9
"""Time cap of the first search: every design that reaches accel_to_kmh at all passes it [s]."""

STRICTLY_FASTER = 3.0 * REL_TOL
"""Relative step below the last point's time: with the 1e-9 pass tolerance on the cap, the next
point is at least 2e-9 relative faster [-]."""

LIMIT_SLACK = REL_TOL
"""Relative slack on the cost (or mass) limit of the min-time search [-]."""


TIED_FIRST = 4
"""Least-energy designs asked for first by a point of the energy frontier (doubled while all are tied) [-]."""


def _requirements_check(study: Study, axis: str):
    if axis not in AXES:
        raise InputError(f"axis {axis!r}: must be one of {', '.join(AXES)}.")
    p = study.parts.problem
    if axis == "energy" and p.energy is None:
        where = f"{p.path}: " if p.path else ""
        raise InputError(f"{where}axis 'energy' needs an [energy] table (the driving cycle the energy per km is "
                         "taken over). Add one, e.g. [energy] cycle = \"wltc_class3b\", or use axis 'cost' or 'mass'.")
    if p.requirements.accel_to_kmh is None:
        where = f"{p.path}: " if p.path else ""
        raise InputError(f"{where}[requirements] accel_to_kmh is missing; the frontier plots the 0-to-accel_to_kmh "
                         "time against cost, so it needs the target speed of the acceleration run. "
                         "Add accel_to_kmh [km/h] to the [requirements] table.")


STATUS_COMPLETE = "complete"
"""Frontier status: every point traced, the frontier is exact and whole."""

STATUS_TIME_LIMIT = "time_limit"
"""Frontier status: the time limit stopped the tracing; the points listed are exact frontier points, from
the low end of the axis, and the frontier beyond the last one is not traced."""


def _remaining_s(deadline: float | None) -> float | None:
    """Seconds left before ``deadline`` (time.perf_counter), None without one [s]."""
    return None if deadline is None else deadline - time.perf_counter()


def trace(study: Study, axis: str = "cost", time_limit_s: float | None = None) -> tuple[list, dict]:
    """Exact frontier points of a study.

    Parameters
    ----------
    study : the loaded study (procurement filters apply)
    axis : "cost", "mass" or "energy" [-]
    time_limit_s : wall-clock limit of the whole tracing [s] (None = none)

    Returns
    -------
    (points, stats): points as (axis value, accel time, `selector.design.Design`), ordered by the
    axis value (increasing) and the time (decreasing); stats {"status", "searches", "elapsed_s"}.
    With status `STATUS_TIME_LIMIT` the points are the exact frontier's first points (possibly none).
    """
    _requirements_check(study, axis)
    parts = study.parts
    t0 = time.perf_counter()
    deadline = None if time_limit_s is None else t0 + time_limit_s
    if not parts.two_units and parts.problem.energy is None and not any(
            a is not None and len(a) == 0 for a in study.allowed.values()):
        return _trace_sweep(study, axis, deadline, t0)
    return _trace_searches(study, axis, deadline, t0)


def _base_and_limit(study: Study, axis: str):
    """The requirements without accel_time_s, and the problem's own budget (or max_mass_kg) [currency or kg]."""
    req0 = study.parts.problem.requirements
    limit_key = AXES[axis][1]
    return replace(req0, accel_time_s=None), None if limit_key is None else getattr(req0, limit_key)


def _trace_sweep(study: Study, axis: str, deadline: float | None, t0: float) -> tuple[list, dict]:
    """`trace` of a single-axle, non-energy study: one exact sweep (`engine.frontier_sweep`); a sweep
    stopped by ``deadline`` (time.perf_counter) has no exact point to give."""
    from selector.engine.frontier_sweep import sweep_frontier

    base, own_limit = _base_and_limit(study, axis)
    res = sweep_frontier(study.parts, AXES[axis][0], base, study.allowed, own_limit, ANY_FINITE_TIME_S,
                         STRICTLY_FASTER, LIMIT_SLACK, deadline)
    elapsed = round(time.perf_counter() - t0, 3)
    if res is None:
        return [], {"status": STATUS_TIME_LIMIT, "method": "sweep", "searches": 1, "elapsed_s": elapsed}
    pts, st = res
    points = [(v, t, Design.of(t, key)) for v, t, key in pts]
    return points, {"status": STATUS_COMPLETE, "method": "sweep", "searches": 1, "elapsed_s": elapsed,
                    "evaluated": st["evaluated"]}


def _trace_searches(study: Study, axis: str, deadline: float | None, t0: float) -> tuple[list, dict]:
    """`trace` by one exact search per point (two-unit and energy studies; module docstring)."""
    objective = AXES[axis][0]
    parts = study.parts
    base, _ = _base_and_limit(study, axis)  # (the problem's own budget or max_mass_kg stays in base)
    t_cap = ANY_FINITE_TIME_S
    points, searches, status = [], 0, STATUS_COMPLETE
    session = SearchSession()  # slices and models shared by every search below (they differ only in limits)
    # Each loop adds one point strictly faster than the last, so it ends after at most (designs) loops.
    while True:
        req = replace(base, accel_time_s=t_cap)
        count = TIED_FIRST
        while True:
            left = _remaining_s(deadline)
            if left is not None and left <= 0.0:
                status = STATUS_TIME_LIMIT
                break
            res = search(parts, objective=objective, count=count, requirements=req, allowed=study.allowed,
                         time_limit_s=left, session=session)
            searches += 1
            if res.status not in (STATUS_OPTIMAL, STATUS_INFEASIBLE):
                status = STATUS_TIME_LIMIT
                break
            tied = [d for d in res.designs if d.value <= res.designs[0].value + tie_tolerance(res.designs[0].value)]
            if len(tied) < count:
                break
            count *= 2
        if status == STATUS_TIME_LIMIT or res.status == STATUS_INFEASIBLE:
            break
        times = evaluate(parts.with_requirements(req), [d.key for d in tied])["accel_time_s"]
        n = int(min(range(len(tied)), key=lambda q: (times[q], q)))  # the fastest; ties in the search's order
        best = Design(float(times[n]), tied[n].key)
        points.append((float(tied[n].value), best.value, best))
        t_cap = best.value * (1.0 - STRICTLY_FASTER)
    return points, {"status": status, "searches": searches, "elapsed_s": round(time.perf_counter() - t0, 3)}


def _chosen(study: Study, time_limit_s: float | None) -> tuple[Design | None, bool]:
    """The problem's own optimum (its objective and all its requirements), or None if infeasible, and
    whether its search ran to proof (False: no time left, or the time limit stopped it; design None)."""
    if time_limit_s is not None and time_limit_s <= 0.0:
        return None, False
    res = search(study.parts, allowed=study.allowed, time_limit_s=time_limit_s)
    if res.status not in (STATUS_OPTIMAL, STATUS_INFEASIBLE):
        return None, False
    return (res.designs[0] if res.status == STATUS_OPTIMAL and res.designs else None), True


def frontier(study: Study, axis: str = "cost", time_limit_s: float | None = None) -> dict:
    """The frontier as the JSON-ready result.

    Keys: the common head (selector_version, problem, problem_file, caution), ``axis``,
    ``axis_unit``, ``accel_to_kmh``, ``requirement`` (the problem's accel_time_s [s] or None),
    ``points`` (ordered by the axis value; each a verified design record plus ``accel_time_s``,
    ``meets_accel_time_s`` and ``chosen``), ``chosen`` (the problem's optimum design ids with its
    cost, mass and time, and ``on_frontier``; None when the problem is infeasible or the time limit
    left no time for it), ``status`` ("optimal": the whole exact frontier; "infeasible": it is empty;
    "time_limit": ``time_limit_s`` [s], the wall-clock limit of the whole frontier, stopped the tracing
    and ``points`` are the exact frontier's first points from the low end of the axis) and ``search``
    (searches, elapsed_s).
    """
    _requirements_check(study, axis)
    _, limit_key, key, label, unit = AXES[axis]
    parts = study.parts
    problem = parts.problem
    req_t = problem.requirements.accel_time_s
    t_start = time.perf_counter()
    pts, stats = trace(study, axis, time_limit_s)
    status = stats.pop("status")
    base_parts = replace(parts, problem=replace(problem, requirements=replace(problem.requirements,
                                                                              accel_time_s=None)))
    designs = [Design(t, d.key) for _, t, d in pts]
    recs = records(base_parts, designs, "accel_time")
    t0 = time.perf_counter()
    left = None if time_limit_s is None else time_limit_s - (t0 - t_start)
    chosen_ids, proved = _chosen(study, left)
    stats["searches"] += int(left is None or left > 0.0)
    if not proved:
        status = STATUS_TIME_LIMIT
    stats["elapsed_s"] = round(stats["elapsed_s"] + time.perf_counter() - t0, 3)
    chosen = None if chosen_ids is None else _chosen_record(parts, chosen_ids, recs, key,
                                                            status == STATUS_COMPLETE)
    out_points = [_point_record(rec, t_exact, req_t, chosen) for rec, (_, t_exact, _) in zip(recs, pts, strict=False)]
    if status == STATUS_COMPLETE:
        status = STATUS_OPTIMAL if pts else STATUS_INFEASIBLE
    out = header(parts)
    out.update({
        "status": status, "axis": axis, "axis_key": key, "axis_label": label, "axis_unit": unit,
        "accel_to_kmh": clean(problem.requirements.accel_to_kmh),
        "requirement": clean(req_t),
        "limit": {"name": limit_key,
                  "required": None if limit_key is None else clean(getattr(problem.requirements, limit_key))},
        "points": out_points,
        "chosen": chosen,
        "search": {**stats, "catalogue_sizes": dict(zip(("motors", "reducers", "tyres"), parts.sizes, strict=False)),
                   "combinations": int(parts.combinations), "procurement_filters": list(study.filter_notes)},
        "definition": (f"designs meeting every requirement except accel_time_s, non-dominated in ({key}, "
                       f"0-{problem.requirements.accel_to_kmh:g} km/h time); values within 2e-9 relative are equal"),
    })
    return out


def _chosen_record(parts, chosen_ids: Design, recs: list[dict], key: str, complete: bool = True) -> dict:
    """The problem's optimum as the frontier result's ``chosen`` (ids, cost, mass, time, ``on_frontier``;
    None when it is not among the points of a frontier the time limit stopped: not known)."""
    m = evaluate(parts, [chosen_ids.key])
    two = chosen_ids.two_units
    units = [{"axle": a, "motor": str(parts.motors.part[i]), "reducer": str(parts.reducers.part[r])}
             for a, i, r in chosen_ids.units]
    chosen = {"motor": None if two else units[0]["motor"], "reducer": None if two else units[0]["reducer"],
              "tyre": str(parts.tyres.part[chosen_ids.tyre]), "cost": clean(m["cost"][0]),
              "mass_kg": clean(m["mass_kg"][0]), "accel_time_s": clean(m["accel_time_s"][0]),
              "objective": parts.problem.objective}
    if "energy_wh_per_km" in m:
        chosen["energy_wh_per_km"] = clean(m["energy_wh_per_km"][0])
    chosen["on_frontier"] = any(_same(_axis_value(r, key), chosen[key])
                                and _same(r["performance"]["accel_time_s"], chosen["accel_time_s"]) for r in recs)
    if not chosen["on_frontier"] and not complete:
        chosen["on_frontier"] = None
    chosen["units"] = units
    return chosen


def _axis_value(rec: dict, key: str):
    """A design record's value on the axis ``key`` (the energy per km sits in its ``energy`` entry)."""
    if key == "energy_wh_per_km":
        return (rec.get("energy") or {}).get("wh_per_km")
    return rec[key]


def _point_record(rec: dict, t_exact: float, req_t: float | None, chosen: dict | None) -> dict:
    """One frontier point: the verified design record reordered, with ``meets_accel_time_s`` and ``chosen``
    (and ``energy_wh_per_km`` in energy studies)."""
    energy = {} if not rec.get("energy") else {"energy_wh_per_km": rec["energy"]["wh_per_km"]}
    return {"motor": rec["motor"], "reducer": rec["reducer"], "tyre": rec["tyre"], "cost": rec["cost"],
            "mass_kg": rec["mass_kg"], **energy, "accel_time_s": rec["performance"]["accel_time_s"],
            "meets_accel_time_s": None if req_t is None else bool(passes("max", req_t, t_exact)),
            "chosen": bool(chosen is not None and rec["tyre"] == chosen["tyre"]
                           and [(u["axle"], u["motor"], u["reducer"]) for u in rec["units"]]
                           == [(u["axle"], u["motor"], u["reducer"]) for u in chosen["units"]]),
            **{k: v for k, v in rec.items() if k not in ("motor", "reducer", "tyre", "cost", "mass_kg")}}


def _same(a, b) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=4 * REL_TOL, abs_tol=0.0)
