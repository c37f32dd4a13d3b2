"""The strongest search a skilled engineer would write by hand over the project's exact evaluator.

The yardstick of `bench_engine.py` (issue: the engine must be at least as fast as this). It uses
only `selector.engine.evaluate` (the exact, staged evaluator `screen`, and `order_best` for the
part-id tie rule) and the part tables; none of the engine's bounds, windows or search code.

- cost and mass are sums of per-part values (motor + reducer + tyre_count x tyre [+ vehicle mass]):
  the per-part values are sorted and a heap over index tuples (i, j, k) into the sorted lists yields
  designs in increasing objective order (each tuple pushed once: from (i, j, k) come (i, j, k+1),
  (i, j+1, 0) when k = 0, (i+1, 0, 0) when j = k = 0). Popped designs are evaluated exactly in
  batches (growing from 512); the search stops when the next value exceeds the best feasible value
  found beyond the 1e-9 tie tolerance.
- accel_time: branch and bound over motors. Each motor gets an optimistic time from a closed form
  (no road load, mass at its lightest, the motor's peak torque through the best efficiency and the
  largest first-gear G/r whose tallest gear still reaches the target speed, its peak power, and a
  traction cap mu g / (1 - mu h / L)); motors are taken in that order until the bound exceeds the
  incumbent. Inside a motor, cheap necessary screens (reducer ratings, mass, budget, static tyre
  load, gearing limit against the target and the required top speed, crawl force against the
  required grade, launch force) and a per-design optimistic time (same closed form with the
  design's own mass, ratio, efficiency and static driven-axle share) run before the exact
  evaluation of the survivors in optimistic order, in chunks, with the incumbent as cut-off.

Single-axle, non-energy studies only (what the benchmark's synthetic studies are). Returns the best
design as `selector.design.Design` (ties by part-id order, as the engine), or None if infeasible.
"""

from __future__ import annotations

import heapq
from typing import NamedTuple

import numpy as np

from selector.engine.evaluate import designs_of, order_best, screen, tie_tolerance
from selector.engine.parts import PartTables
from selector.units import kmh_to_mps

G = 9.80665
SLACK = 1e-6
"""Relative slack of the necessary screens (far above the 1e-9 pass tolerance) [-]."""


def _part_screens(parts: PartTables):
    """Boolean masks (motors, tyres) of parts that can be in some feasible design: necessary
    conditions on one part with the rest at their most favourable (lightest parts, best efficiency,
    least rolling resistance, largest usable G/r)."""
    p = parts.problem
    req, veh = p.requirements, p.vehicle
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    eta = float(np.nanmax(re.efficiencies))
    m_min = veh.mass_kg + mo.mass_kg + re.mass_kg.min() + veh.tyre_count * ty.mass_kg.min()
    crr = float(ty.crr.min())
    motors = np.ones(mo.cost.size, dtype=bool)
    if req.top_speed_kmh is not None:
        v = kmh_to_mps(req.top_speed_kmh)
        motors &= eta * mo.cont_power_w >= (m_min * G * crr + parts.q_n_s2_m2 * v * v) * v * (1 - SLACK)
        motors &= mo.max_speed_rad_s * ty.radius_m.max() / re.tallest_ratio.min() >= v * (1 - SLACK)
    gr_max = float((re.ratios[:, 0].max()) / ty.radius_m.min())
    if req.gradeability_pct is not None:
        th = np.arctan(req.gradeability_pct / 100.0)
        motors &= eta * mo.torque_nm * gr_max >= m_min * G * (np.sin(th) + crr * np.cos(th)) * (1 - SLACK)
    if req.launch_accel_mps2 is not None:
        motors &= eta * mo.torque_nm * gr_max - m_min * G * crr >= m_min * req.launch_accel_mps2 * (1 - SLACK)
    if req.max_mass_kg is not None:
        motors &= m_min <= req.max_mass_kg * (1 + SLACK)
    if req.budget is not None:
        motors &= mo.cost + re.cost.min() + veh.tyre_count * ty.cost.min() <= req.budget * (1 + SLACK)
    if req.accel_time_s is not None and req.accel_to_kmh is not None:
        motors &= _motor_times(parts) <= req.accel_time_s * (1 + SLACK)
    # static tyre load: the demand grows with the parts' masses; the lightest motor and reducer give its least
    from selector.engine.evaluate import tyre_load_demand_kg

    keys = parts.single_keys(int(np.argmin(mo.mass_kg)), int(np.argmin(re.mass_kg)), np.arange(ty.cost.size))
    tyres = ty.load_capacity_kg * (1 + SLACK) >= tyre_load_demand_kg(parts, keys)
    return motors, tyres


def _sum_order_search(parts: PartTables, objective: str, stats: dict):
    v = parts.problem.vehicle
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    ok_m, ok_t = _part_screens(parts)
    if objective == "cost":
        vals = (mo.cost, re.cost, v.tyre_count * ty.cost)
    else:
        vals = (v.mass_kg + mo.mass_kg, re.mass_kg, v.tyre_count * ty.mass_kg)
    orders = [np.argsort(x, kind="stable") for x in vals]
    orders[0] = orders[0][ok_m[orders[0]]]
    orders[2] = orders[2][ok_t[orders[2]]]
    if orders[0].size == 0 or orders[2].size == 0:
        return [], []
    sv = [x[o] for x, o in zip(vals, orders, strict=True)]
    n = [x.size for x in sv]
    heap = [(sv[0][0] + sv[1][0] + sv[2][0], 0, 0, 0)]
    best = np.inf
    found_v, found_k = [], []
    batch = 512
    while heap:
        if heap[0][0] > best + tie_tolerance(best):
            break
        idx = []
        limit = best + tie_tolerance(best)
        while heap and len(idx) < batch and heap[0][0] <= limit:
            _, i, j, k = heapq.heappop(heap)
            idx.append((i, j, k))
            if k + 1 < n[2]:
                heapq.heappush(heap, (sv[0][i] + sv[1][j] + sv[2][k + 1], i, j, k + 1))
            if k == 0 and j + 1 < n[1]:
                heapq.heappush(heap, (sv[0][i] + sv[1][j + 1] + sv[2][0], i, j + 1, 0))
            if j == 0 and k == 0 and i + 1 < n[0]:
                heapq.heappush(heap, (sv[0][i + 1] + sv[1][0] + sv[2][0], i + 1, 0, 0))
        a = np.asarray(idx, dtype=np.int64)
        keys = parts.single_keys(orders[0][a[:, 0]], orders[1][a[:, 1]], orders[2][a[:, 2]])
        ok, obj = screen(parts, keys, objective=objective)
        stats["evaluated"] += keys.shape[0]
        if ok.any():
            found_v.append(obj[ok])
            found_k.append(keys[ok])
            best = min(best, float(obj[ok].min()))
        batch = min(batch * 2, 65536)
    return found_v, found_k


def _closed_form_time(v_t, f1, a_trac, p_w, m):
    """Lower bound of the 0-v_t time [s] of a vehicle of mass >= m [kg] whose tractive force is at most
    f1 [N], whose wheel power is at most p_w [W] and whose acceleration is at most a_trac [m/s^2], with
    no road load: constant acceleration a1 = min(f1 / m, a_trac) up to v1 = p_w / (m a1), then
    constant power (m dv / dt = p_w / v)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        a1 = np.minimum(f1 / m, a_trac)
        v1 = p_w / (m * a1)
        t = np.where(v_t <= v1, v_t / a1, v1 / a1 + m * (v_t ** 2 - v1 ** 2) / (2.0 * p_w))
    return np.where(a1 > 0, t, np.inf)


class _Pairs(NamedTuple):
    """What the accel_time search needs of the study's (reducer, tyre) pairs."""

    v_t: float
    """Target speed of the acceleration run [m/s]."""
    v_gear: float
    """Highest speed the tallest gear must reach (accel_to_kmh or top_speed_kmh) [m/s]."""
    eta_max: np.ndarray
    """Best gear efficiency of each reducer [-]."""
    g1: np.ndarray
    """First (lowest) gear ratio of each reducer [-]."""
    g_tall: np.ndarray
    """Tallest gear ratio of each reducer [-]."""
    jj: np.ndarray
    """Reducer position of each pair [-]."""
    kk: np.ndarray
    """Tyre position of each pair [-]."""


def _pairs(parts: PartTables) -> _Pairs:
    req, re = parts.problem.requirements, parts.reducers
    v_t = kmh_to_mps(req.accel_to_kmh)
    v_gear = max(v_t, kmh_to_mps(req.top_speed_kmh) if req.top_speed_kmh is not None else 0.0)
    n_r = re.cost.size
    jj, kk = np.meshgrid(np.arange(n_r), np.arange(parts.tyres.cost.size), indexing="ij")
    return _Pairs(v_t, v_gear, np.nanmax(re.efficiencies, axis=1), re.ratios[:, 0],
                  re.ratios[np.arange(n_r), re.n_gears - 1], jj.ravel(), kk.ravel())


def _motor_times(parts: PartTables) -> np.ndarray:
    """Optimistic 0-accel_to_kmh time of each motor [s] (see the module docstring)."""
    p = parts.problem
    veh, env = p.vehicle, p.environment
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    v_t, v_gear, eta_max, g1, g_tall, jj, kk = _pairs(parts)
    mu = env.road_friction
    hl = veh.cg_height_m / veh.wheelbase_m
    if parts.rear_drive:
        a_trac_all = mu * G / (1 - mu * hl) if mu * hl < 1 else np.inf
    else:
        a_trac_all = mu * G
    # pairs sorted by the tallest gear's G/r, with the running maximum of the first gear's G/r
    tall = g_tall[jj] / ty.radius_m[kk]
    order = np.argsort(tall, kind="stable")
    tall_sorted = tall[order]
    first_max = np.maximum.accumulate((g1[jj] / ty.radius_m[kk])[order])
    cap = mo.max_speed_rad_s / v_gear  # G_tall / r must not exceed this
    pos = np.searchsorted(tall_sorted, cap * (1 + SLACK), side="right")
    gr_max = np.where(pos > 0, first_max[np.maximum(pos - 1, 0)], 0.0)
    m_min = veh.mass_kg + mo.mass_kg + re.mass_kg.min() + veh.tyre_count * ty.mass_kg.min()
    f1 = float(eta_max.max()) * mo.torque_nm * gr_max
    return _closed_form_time(v_t, f1, a_trac_all, float(eta_max.max()) * mo.power_w, m_min)


def _accel_search(parts: PartTables, stats: dict):
    p = parts.problem
    req, veh, env = p.requirements, p.vehicle, p.environment
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    if parts.speed_limit_mps < kmh_to_mps(req.accel_to_kmh) * (1 - 1e-9):
        return [], []
    v_t, v_gear, eta_max, g1, g_tall, jj, kk = _pairs(parts)
    mu = env.road_friction
    hl = veh.cg_height_m / veh.wheelbase_m
    cap = mo.max_speed_rad_s / v_gear  # G_tall / r must not exceed this
    t_motor = _motor_times(parts)
    ok_m, ok_t = _part_screens(parts)
    t_motor = np.where(ok_m, t_motor, np.inf)
    limit = np.inf if req.accel_time_s is None else req.accel_time_s * (1 + SLACK)
    motors = np.nonzero(np.isfinite(t_motor) & (t_motor <= limit))[0]
    motors = motors[np.lexsort((motors, t_motor[motors]))]
    theta = None if req.gradeability_pct is None else np.arctan(req.gradeability_pct / 100.0)
    best = np.inf
    found_v, found_k = [], []
    for i in motors:
        if t_motor[i] > best * (1 + SLACK):
            break
        stats["blocks"] += 1
        j, k = jj, kk
        ok = (mo.torque_nm[i] <= re.max_torque_nm[j] * (1 + SLACK)) \
            & (mo.max_speed_rad_s[i] <= re.max_speed_rad_s[j] * (1 + SLACK))
        ok &= (g_tall[j] / ty.radius_m[k] <= cap[i] * (1 + SLACK)) & ok_t[k]
        j, k = j[ok], k[ok]
        keys = parts.single_keys(i, j, k)
        mass = parts.mass_kg(keys)
        ok = np.ones(j.size, dtype=bool)
        if req.max_mass_kg is not None:
            ok &= mass <= req.max_mass_kg * (1 + SLACK)
        if req.budget is not None:
            ok &= parts.cost(keys) <= req.budget * (1 + SLACK)
        crr = ty.crr[k]
        f_crawl = eta_max[j] * mo.torque_nm[i] * g1[j] / ty.radius_m[k]
        if theta is not None:
            ok &= f_crawl >= mass * G * (np.sin(theta) + crr * np.cos(theta)) * (1 - SLACK)
        if req.launch_accel_mps2 is not None:
            ok &= f_crawl - mass * G * crr >= mass * req.launch_accel_mps2 * (1 - SLACK)
        ok &= ty.load_capacity_kg[k] * (1 + SLACK) >= _static_tyre_load(parts, keys)
        keys, j, k, mass, f_crawl = keys[ok], j[ok], k[ok], mass[ok], f_crawl[ok]
        if keys.shape[0] == 0:
            continue
        share = parts.body(keys).rear_share
        driven = share if parts.rear_drive else 1 - share
        a_trac = mu * G * driven / (1 - mu * hl) if parts.rear_drive else mu * G * driven
        if parts.rear_drive and mu * hl >= 1:
            a_trac = np.full(keys.shape[0], np.inf)
        t_lo = _closed_form_time(v_t, f_crawl, a_trac, eta_max[j] * mo.power_w[i], mass)
        keep = t_lo <= min(best, limit) * (1 + SLACK)
        keys, t_lo = keys[keep], t_lo[keep]
        o = np.lexsort((keys[:, 4], keys[:, 3], keys[:, 1], t_lo))
        keys, t_lo = keys[o], t_lo[o]
        start, size = 0, 256
        while start < keys.shape[0] and t_lo[start] <= best * (1 + SLACK):
            chunk = keys[start:start + size]
            cutoff = best * (1 + 4e-9) if np.isfinite(best) else None
            okc, obj = screen(parts, chunk, objective="accel_time", accel_cutoff=cutoff)
            stats["evaluated"] += chunk.shape[0]
            if okc.any():
                found_v.append(obj[okc])
                found_k.append(chunk[okc])
                best = min(best, float(obj[okc].min()))
            start += size
            size *= 2
    return found_v, found_k


def _static_tyre_load(parts, keys):
    from selector.engine.evaluate import tyre_load_demand_kg

    return tyre_load_demand_kg(parts, keys)


def baseline_search(parts: PartTables, objective: str | None = None, stats: dict | None = None):
    """Best design of a single-axle, non-energy study by the hand-written search (None: infeasible).

    ``stats`` (optional dict) receives counters: "evaluated" designs, "blocks" (motors opened).
    """
    objective = objective or parts.problem.objective
    if parts.two_units or parts.problem.energy is not None:
        raise ValueError("the baseline handles single-axle studies without [energy] only")
    stats = {} if stats is None else stats
    stats.setdefault("evaluated", 0)
    stats.setdefault("blocks", 0)
    if objective in ("cost", "mass"):
        fv, fk = _sum_order_search(parts, objective, stats)
    elif objective == "accel_time":
        fv, fk = _accel_search(parts, stats)
    else:
        raise ValueError(f"objective {objective!r}: the baseline handles cost, mass and accel_time")
    if not fv:
        return None
    vals, keys = np.concatenate(fv), np.concatenate(fk)
    return designs_of(vals, keys, order_best(vals, keys, 1))[0]
