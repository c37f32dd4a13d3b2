"""Exact, vectorised evaluation of designs, and exhaustive enumeration over whole catalogues.

This is the single place where a design's performance and feasibility are decided. The
verifier, the brute-force oracle, the optimiser's exact slice evaluation and the reports all
call it.
"""

from __future__ import annotations

import numpy as np

from selector.engine.parts import PartTables
from selector.physics import performance as perf
from selector.requirements import CHECK_LIMIT_METRIC, CHECKS, REL_TOL, passes, stated
from selector.units import kmh_to_mps, mps_to_kmh, rad_s_to_rpm

OBJECTIVE_METRIC = {"cost": "cost", "mass": "mass_kg", "accel_time": "accel_time_s"}
"""Metric minimised by each objective."""


def _idx(a):
    return np.atleast_1d(np.asarray(a, dtype=np.int64))


def evaluate(parts: PartTables, mi, rj, tk, accel: bool = True) -> dict[str, np.ndarray]:
    """All metrics of the designs (mi[n], rj[n], tk[n]).

    Returns a dict of arrays: mass_kg, cost, max_speed_kmh, sustained_top_speed_kmh,
    gradeability_pct, launch_accel_mps2, accel_time_s (NaN when the problem has no accel_to_kmh
    or ``accel`` is False), tyre_load_kg, the part ratings and demands used by the checks, and
    rear_axle_share, effective_mass_kg, gear_over_radius_1_m.
    """
    mi, rj, tk = np.broadcast_arrays(_idx(mi), _idx(rj), _idx(tk))
    drive, body = parts.design(mi, rj, tk)
    drive, body = perf.broadcast(drive, body)
    p = parts.problem
    rear, front = parts.axle_masses_kg(mi, rj, tk)
    out = {
        "mass_kg": body.mass_kg,
        "cost": parts.cost(mi, rj, tk),
        "max_speed_kmh": mps_to_kmh(perf.max_speed_mps(drive, body)),
        "sustained_top_speed_kmh": mps_to_kmh(perf.sustained_top_speed_mps(drive, body)),
        "gradeability_pct": perf.gradeability_pct(drive, body),
        "launch_accel_mps2": perf.launch_accel_mps2(drive, body),
        "tyre_load_kg": np.maximum(rear, front) / (0.5 * p.vehicle.tyre_count),
        "motor_peak_torque_nm": parts.motors.torque_nm[mi],
        "motor_max_speed_rpm": rad_s_to_rpm(parts.motors.max_speed_rad_s[mi]),
        "reducer_max_torque_nm": parts.reducers.max_torque_nm[rj],
        "reducer_max_speed_rpm": rad_s_to_rpm(parts.reducers.max_speed_rad_s[rj]),
        "tyre_speed_rating_kmh": parts.tyres.speed_rating_kmh[tk],
        "tyre_load_capacity_kg": parts.tyres.load_capacity_kg[tk],
        "rear_axle_share": rear / body.mass_kg,
        "effective_mass_kg": perf.effective_mass(drive, body),
        "gear_over_radius_1_m": drive.gear_over_radius,
    }
    target = p.requirements.accel_to_kmh
    if accel and target is not None:
        out["accel_time_s"] = perf.accel_time_s(drive, body, kmh_to_mps(target))
    else:
        out["accel_time_s"] = np.full(mi.shape, np.nan)
    return out


def check_results(parts: PartTables, metrics: dict) -> dict[str, np.ndarray]:
    """Pass/fail of every stated requirement and every part-rating check (name -> bool array)."""
    res = {}
    for r, required in stated(parts.problem):
        res[r.name] = passes(r.sense, required, metrics[r.metric])
    for c in CHECKS:
        res[c.name] = passes(c.sense, metrics[CHECK_LIMIT_METRIC[c.name]], metrics[c.metric])
    return res


def feasible(parts: PartTables, metrics: dict, objective: str | None = None) -> np.ndarray:
    """True where every requirement and check passes (and the objective is finite)."""
    ok = np.ones(len(metrics["mass_kg"]), dtype=bool)
    for v in check_results(parts, metrics).values():
        ok &= v
    if objective is not None:
        ok &= np.isfinite(metrics[OBJECTIVE_METRIC[objective]])
    return ok


def screen(parts: PartTables, mi, rj, tk, objective: str, need_accel: bool | None = None):
    """Feasibility and objective of many designs, computing expensive metrics only for survivors.

    Same decisions as `evaluate` + `feasible`, staged: mass, cost and ratings first, then speeds,
    grade and launch, then the acceleration run. Returns (feasible[n], objective[n]) with the
    objective +inf where infeasible.
    """
    mi, rj, tk = np.broadcast_arrays(_idx(mi), _idx(rj), _idx(tk))
    p = parts.problem
    req = p.requirements
    obj = np.full(mi.shape, np.inf)
    ok = passes("max", parts.reducers.max_torque_nm[rj], parts.motors.torque_nm[mi])
    ok &= passes("max", parts.reducers.max_speed_rad_s[rj], parts.motors.max_speed_rad_s[mi])
    mass = parts.mass_kg(mi, rj, tk)
    if req.max_mass_kg is not None:
        ok &= passes("max", req.max_mass_kg, mass)
    cost = parts.cost(mi, rj, tk)
    if req.budget is not None:
        ok &= passes("max", req.budget, cost)
    rear, front = parts.axle_masses_kg(mi, rj, tk)
    ok &= passes("max", parts.tyres.load_capacity_kg[tk], np.maximum(rear, front) / (0.5 * p.vehicle.tyre_count))
    sel = np.nonzero(ok)[0]
    if sel.size == 0:
        return ok, obj
    if need_accel is None:
        need_accel = req.accel_time_s is not None or objective == "accel_time"
    m = evaluate(parts, mi[sel], rj[sel], tk[sel], accel=False)
    sub_ok = np.ones(sel.size, dtype=bool)
    for name, v in check_results(parts, m).items():
        if name != "accel_time_s":
            sub_ok &= v
    if need_accel:
        idx = np.nonzero(sub_ok)[0]
        t = np.full(sel.size, np.inf)
        if idx.size:
            drive, body = parts.design(mi[sel][idx], rj[sel][idx], tk[sel][idx])
            t[idx] = perf.accel_time_s(drive, body, kmh_to_mps(req.accel_to_kmh))
        m["accel_time_s"] = t
        if req.accel_time_s is not None:
            sub_ok &= passes("max", req.accel_time_s, t)
    val = m[OBJECTIVE_METRIC[objective]]
    sub_ok &= np.isfinite(val)
    ok[sel] = sub_ok
    obj[sel] = np.where(sub_ok, val, np.inf)
    return ok, obj


def tie_tolerance(best: float) -> float:
    """Objective values within this of the best count as tied (1e-9 relative)."""
    return REL_TOL * max(abs(best), 1e-300)


def order_best(obj: np.ndarray, keys: np.ndarray, count: int) -> np.ndarray:
    """Positions of the ``count`` best finite entries, best first, ties broken by ``keys``.

    ``keys`` is an (n, 3) integer array (motor, reducer, tyre positions = part-id order). Values
    within `tie_tolerance` of the current best are tied and the smallest key wins.
    """
    finite = np.nonzero(np.isfinite(obj))[0]
    if finite.size == 0 or count <= 0:
        return np.empty(0, dtype=np.int64)
    order = np.lexsort((keys[finite, 2], keys[finite, 1], keys[finite, 0], obj[finite]))
    cand = finite[order]
    chosen = []
    remaining = cand
    while remaining.size and len(chosen) < count:
        best = obj[remaining[0]]
        tied = remaining[obj[remaining] <= best + tie_tolerance(best)]
        k = keys[tied]
        pick = tied[np.lexsort((k[:, 2], k[:, 1], k[:, 0]))[0]]
        chosen.append(pick)
        remaining = remaining[remaining != pick]
    return np.asarray(chosen, dtype=np.int64)


def slice_indices(parts: PartTables, motor: int, reducers=None, tyres=None):
    """Index arrays of every (reducer, tyre) pair for one motor, in (reducer, tyre) order."""
    n_m, n_r, n_t = parts.sizes
    rj = np.arange(n_r) if reducers is None else np.asarray(reducers, dtype=np.int64)
    tk = np.arange(n_t) if tyres is None else np.asarray(tyres, dtype=np.int64)
    rr, tt = np.meshgrid(rj, tk, indexing="ij")
    return np.full(rr.size, motor, dtype=np.int64), rr.ravel(), tt.ravel()


def enumerate_designs(parts: PartTables, objective: str, count: int = 1, motors=None, reducers=None, tyres=None,
                      progress=None):
    """Exhaustive search: the ``count`` best feasible designs over the given parts (default all).

    Returns a list of (objective value, motor idx, reducer idx, tyre idx), best first, ties broken
    by part-id order. ``progress`` is an optional callable taking the number of motors done.
    """
    n_m, _, _ = parts.sizes
    motors = range(n_m) if motors is None else motors
    pool_obj, pool_keys = [], []
    for done, i in enumerate(motors, 1):
        mi, rj, tk = slice_indices(parts, i, reducers, tyres)
        ok, obj = screen(parts, mi, rj, tk, objective)
        if ok.any():
            keys = np.stack([mi[ok], rj[ok], tk[ok]], axis=1)
            vals = obj[ok]
            best = order_best(vals, keys, count)
            pool_obj.append(vals[best])
            pool_keys.append(keys[best])
        if progress is not None:
            progress(done)
    if not pool_obj:
        return []
    vals = np.concatenate(pool_obj)
    keys = np.concatenate(pool_keys)
    best = order_best(vals, keys, count)
    return [(float(vals[b]), int(keys[b, 0]), int(keys[b, 1]), int(keys[b, 2])) for b in best]
