"""The exact cost-versus-time (or mass-versus-time) frontier of a single-axle study in one sweep.

`selector.studies.frontier` defines the frontier by epsilon-constraint: starting from t_cap = "any
finite time", (1) c = the least cost of a design meeting every other requirement with time <= t_cap;
(2) the point is the fastest design with cost <= c (1 + 1e-9) (ties by part id); (3) t_cap = its time
(1 - 3e-9); repeat until (1) finds nothing. This module produces exactly those points with one sweep
over the designs in increasing cost (cost is a sum of per-part values, so the order is known before
any physics): a design is evaluated exactly only when its certified time bound could still make it
qualify (bound <= the current t_cap, or <= the best time of the open cost group), and the sweep ends
when the current t_cap falls below every remaining design's time bound. Both definitions read the
same exact evaluations (`evaluate.screen`, `order_best` tie rules), so their points are the same.
"""

from __future__ import annotations

import heapq
import time

import numpy as np

from selector.engine.best_first import CELLS, SingleAxleSearch
from selector.engine.evaluate import order_best, screen
from selector.engine.parts import PartTables
from selector.requirements import REL_TOL

CHUNK = 4096
"""Designs gathered per sweep step [-]."""
SUB_CHUNK = 1024
"""Designs evaluated together (the caps tighten between sub-chunks) [-]."""


def sweep_frontier(parts: PartTables, axis_objective: str, base_req, allowed: dict, own_limit: float | None,
                   any_finite_time_s: float, strictly_faster: float, limit_slack: float,
                   deadline: float | None = None):
    """Frontier points (axis value, time, key row) in the order of `studies.frontier.trace`.

    ``axis_objective``: "cost" or "mass"; ``base_req``: the requirements without accel_time_s;
    ``own_limit``: the problem's budget (or max_mass_kg), already in ``base_req`` too.
    Returns (points, stats) or None when the deadline passed.
    """
    stats = {"blocks": 0, "refined": 0, "evaluated": 0}
    s = SingleAxleSearch(parts, "accel_time", base_req, allowed, 1, None, None, stats, milp="never")
    p = s.pairs
    n = s.motors.size
    base_mass = parts.problem.vehicle.mass_kg
    own = parts.motors.cost if axis_objective == "cost" else parts.motors.mass_kg
    pair_val = p.cost if axis_objective == "cost" else p.mass
    extra = 0.0 if axis_objective == "cost" else base_mass
    # certified time bound per motor and cell (and per multi-speed pair, through refine's multi bound)
    t_cell, t_multi = s.refine(np.arange(n)) if n else (np.empty((0, CELLS)), np.empty(0))
    stats["refined"] += n
    edges = s.cell_edges()
    motor_tmin = np.minimum(np.where(np.isfinite(t_cell), t_cell, np.inf).min(axis=1) if n else np.empty(0), t_multi)
    # per motor: candidates sorted by axis value, each with a certified time bound
    cand: dict[int, tuple] = {}

    def load(pos: int):
        c = s.candidates(pos)
        if c.size == 0:
            return None
        cell = np.clip(np.searchsorted(edges, p.l_first[c], side="right") - 1, 0, CELLS - 1)
        tb = np.where(p.multi[c], 0.0, t_cell[pos][cell])
        if p.multi[c].any():
            mc = np.nonzero(p.multi[c])[0]
            tb[mc] = s.time_bound(np.full(mc.size, pos), p.l_tall[c[mc]], p.l_first[c[mc]])
        keep = np.isfinite(tb)
        c, tb = c[keep], tb[keep]
        if c.size == 0:
            return None
        val = extra + own[s.motors[pos]] + pair_val[c]
        order = np.lexsort((p.k[c], p.j[c], val))
        return [c[order], val[order], tb[order], 0]

    heap = []
    lbv = s.value_bounds(axis_objective)
    for pos in range(n):
        if np.isfinite(lbv[pos]) and np.isfinite(motor_tmin[pos]):
            heap.append((float(lbv[pos]), pos, False))
    heapq.heapify(heap)
    points = []
    t_cap = any_finite_time_s
    group = None  # [c, limit, [(t, key)]]
    near = []  # evaluated designs slower than t_cap but within the tie tolerance of it: (val, t, key)
    tol = 1 + REL_TOL

    def group_min():
        return min(x[0] for x in group[2])

    def close_group():
        nonlocal group, t_cap
        ts = np.array([x[0] for x in group[2]])
        ks = np.array([x[1] for x in group[2]], dtype=np.int64)
        b = int(order_best(ts, ks, 1)[0])
        points.append((float(group[0]), float(ts[b]), tuple(int(x) for x in ks[b])))
        t_cap = float(ts[b]) * (1.0 - strictly_faster)
        group = None

    while heap:
        if deadline is not None and time.perf_counter() > deadline:
            return None
        # every design still to come has time >= its motor's bound: stop when none can qualify
        live_tmin = min((motor_tmin[h[1]] for h in heap), default=np.inf)
        if group is None and live_tmin > t_cap * tol:
            break
        # gather the next designs in axis order across motors
        batch = []
        while heap and len(batch) < CHUNK:
            v, pos, loaded = heapq.heappop(heap)
            if not loaded:
                entry = load(pos)
                if entry is None:
                    continue
                cand[pos] = entry
                heapq.heappush(heap, (float(entry[1][0]), pos, True))
                continue
            c, val, tb, i0 = cand[pos]
            i1 = min(c.size, i0 + 64)
            if heap:  # only as far as the next motor's value, to keep the global order
                i1 = max(i0 + 1, min(i1, int(np.searchsorted(val, heap[0][0], side="right"))))
            for q in range(i0, i1):
                batch.append((val[q], pos, c[q], tb[q]))
            cand[pos][3] = i1
            if i1 < c.size:
                heapq.heappush(heap, (float(val[i1]), pos, True))
        if not batch:
            continue
        vals = np.array([b[0] for b in batch])
        poss = np.array([b[1] for b in batch], dtype=np.int64)
        pcs = np.array([b[2] for b in batch], dtype=np.int64)
        tbs = np.array([b[3] for b in batch])
        keys = np.full((vals.size, 5), -1, dtype=np.int64)
        keys[:, 2], keys[:, 3], keys[:, 4] = s.motors[poss], p.j[pcs], p.k[pcs]
        if parts.axles[-1] == "front":
            keys[:, [0, 1]], keys[:, [2, 3]] = keys[:, [2, 3]].copy(), -1
        order = np.lexsort(tuple(keys[:, col] for col in range(4, -1, -1)) + (vals,))
        vals, tbs, keys = vals[order], tbs[order], keys[order]
        # evaluate in sub-chunks so that the caps tighten as points are found
        start = 0
        while start < vals.size:
            stop = min(vals.size, start + SUB_CHUNK)
            cap = t_cap * tol * (1 + 4 * REL_TOL) if group is None else group_min() * tol * tol
            need = tbs[start:stop] <= cap
            idx = np.nonzero(need)[0] + start
            times = np.full(stop - start, np.inf)
            if idx.size:
                ok, obj = screen(parts.with_requirements(base_req), keys[idx], objective="accel_time",
                                 accel_cutoff=cap)
                stats["evaluated"] += idx.size
                times[idx - start] = np.where(ok, obj, np.inf)
            for q in range(start, stop):
                v, tq, key = vals[q], times[q - start], tuple(int(x) for x in keys[q])
                if group is not None and v > group[1] * tol:
                    close_group()
                if not np.isfinite(tq):
                    continue
                if group is None:
                    if tq <= t_cap * tol:
                        limit = v * (1.0 + limit_slack)
                        if own_limit is not None:
                            limit = min(limit, own_limit)
                        group = [v, limit, [(tq, key)]]
                        # cheaper designs just slower than the cap may tie with it on time
                        group[2] += [(nt, nk) for nv, nt, nk in near if nv <= limit * tol]
                        near = []
                    elif tq <= t_cap * tol * (1 + 3 * REL_TOL):
                        near.append((v, tq, key))
                else:
                    group[2].append((tq, key))
            start = stop
    if group is not None:
        close_group()
    return points, stats
