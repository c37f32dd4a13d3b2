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

from selector.engine.best_first import SingleAxleSearch
from selector.engine.best_first_bounds import CELLS
from selector.engine.evaluate import order_best, screen
from selector.engine.parts import PartTables
from selector.requirements import REL_TOL

CHUNK = 4096
"""Designs gathered per sweep step [-]."""
SUB_CHUNK = 1024
"""Designs evaluated together (the caps tighten between sub-chunks) [-]."""


class _Sweep:
    """State of one sweep: the single-axle search's pairs and certified time bounds, a heap of motors by
    their next axis value (``(value, position, loaded)``), the open cost group ``[value, limit,
    [(time, key)]]``, the designs just slower than the cap (``near``: (value, time, key)), the cap
    ``t_cap`` [s] and the points found."""

    def __init__(self, parts: PartTables, axis_objective: str, base_req, allowed: dict, own_limit: float | None,
                 any_finite_time_s: float, strictly_faster: float, limit_slack: float):
        self.parts, self.base_req = parts, base_req
        self.own_limit, self.strictly_faster, self.limit_slack = own_limit, strictly_faster, limit_slack
        self.stats = {"blocks": 0, "refined": 0, "evaluated": 0}
        s = SingleAxleSearch(parts, "accel_time", base_req, allowed, 1, None, None, self.stats, milp="never")
        # the axis is the cost: of motors equal in all else, the cheapest stands for them (not the first id)
        s.cost_matters = s.cost_matters or axis_objective == "cost"
        self.s, self.p = s, s.pairs
        n = s.motors.size
        self.own = parts.motors.cost if axis_objective == "cost" else parts.motors.mass_kg
        self.pair_val = self.p.cost if axis_objective == "cost" else self.p.mass
        self.extra = 0.0 if axis_objective == "cost" else parts.problem.vehicle.mass_kg
        # certified time bound per motor and cell (and per multi-speed pair, through refine's multi bound)
        self.t_cell, t_multi = s.refine(np.arange(n)) if n else (np.empty((0, CELLS)), np.empty(0))
        self.stats["refined"] += n
        self.edges = s.cell_edges()
        self.motor_tmin = np.minimum(np.where(np.isfinite(self.t_cell), self.t_cell, np.inf).min(axis=1) if n
                                     else np.empty(0), t_multi)
        # per motor: candidates sorted by axis value, each with a certified time bound
        self.cand: dict[int, list] = {}
        lbv = s.value_bounds(axis_objective)
        self.heap = [(float(lbv[pos]), pos, False) for pos in range(n)
                     if np.isfinite(lbv[pos]) and np.isfinite(self.motor_tmin[pos])]
        heapq.heapify(self.heap)
        self.points = []
        self.t_cap = any_finite_time_s
        self.group = None
        self.near = []
        self.tol = 1 + REL_TOL

    def load(self, pos: int):
        """[pairs, axis values, time bounds, next index] of motor ``pos``'s candidates in axis order, or None."""
        s, p = self.s, self.p
        c = s.candidates(pos)
        if c.size == 0:
            return None
        cell = np.clip(np.searchsorted(self.edges, p.l_first[c], side="right") - 1, 0, CELLS - 1)
        tb = np.where(p.multi[c], 0.0, self.t_cell[pos][cell])
        if p.multi[c].any():  # a gearbox: gear by gear (`bounds.optimistic_time_s` with gears_l), not its hull
            mc = np.nonzero(p.multi[c])[0]
            tb[mc] = s.gear_time_bound(np.full(mc.size, pos), p.gear_l[c[mc]])
        keep = np.isfinite(tb)
        c, tb = c[keep], tb[keep]
        if c.size == 0:
            return None
        val = self.extra + self.own[s.motors[pos]] + self.pair_val[c]
        order = np.lexsort((p.k[c], p.j[c], val))
        return [c[order], val[order], tb[order], 0]

    def exhausted(self) -> bool:
        """Every design still to come has time >= its motor's bound: True when none can qualify."""
        live_tmin = min((self.motor_tmin[h[1]] for h in self.heap), default=np.inf)
        return self.group is None and live_tmin > self.t_cap * self.tol

    def gather(self) -> list:
        """The next designs in axis order across motors, as runs (motor position, first, end) of one
        motor's candidates."""
        heap, batch, size = self.heap, [], 0
        while heap and size < CHUNK:
            v, pos, loaded = heapq.heappop(heap)
            if not loaded:
                entry = self.load(pos)
                if entry is None:
                    continue
                self.cand[pos] = entry
                heapq.heappush(heap, (float(entry[1][0]), pos, True))
                continue
            c, val, tb, i0 = self.cand[pos]
            i1 = min(c.size, i0 + 64)
            if heap:  # only as far as the next motor's value, to keep the global order
                i1 = max(i0 + 1, min(i1, int(np.searchsorted(val, heap[0][0], side="right"))))
            batch.append((pos, i0, i1))
            size += i1 - i0
            self.cand[pos][3] = i1
            if i1 < c.size:
                heapq.heappush(heap, (float(val[i1]), pos, True))
        return batch

    def ordered(self, batch: list) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(axis values, time bounds, key rows (n, 5), pair positions) of ``batch``, by value then part ids."""
        runs = [(self.cand[pos], i0, i1) for pos, i0, i1 in batch]
        vals, pcs, tbs = (np.concatenate([e[n][i0:i1] for e, i0, i1 in runs]) for n in (1, 0, 2))
        poss = np.repeat(np.array([b[0] for b in batch], dtype=np.int64), [i1 - i0 for _, i0, i1 in batch])
        keys = np.full((vals.size, 5), -1, dtype=np.int64)
        keys[:, 2], keys[:, 3], keys[:, 4] = self.s.motors[poss], self.p.j[pcs], self.p.k[pcs]
        if self.parts.axles[-1] == "front":
            keys[:, [0, 1]], keys[:, [2, 3]] = keys[:, [2, 3]].copy(), -1
        order = np.lexsort(tuple(keys[:, col] for col in range(4, -1, -1)) + (vals,))
        return vals[order], tbs[order], keys[order], pcs[order]

    def evaluate(self, vals: np.ndarray, tbs: np.ndarray, keys: np.ndarray, pairs: np.ndarray):
        """Evaluate the batch in sub-chunks (the caps tighten as points are found) and take each design.

        A design is evaluated only when its cell (or gear-by-gear) bound and then its own bound
        (`SingleAxleSearch._design_time_bounds`: its L or gears, mass, efficiency, rolling resistance
        and driven-axle share) are both within the cap: the others cannot qualify.
        """
        tol = self.tol
        start = 0
        while start < vals.size:
            stop = min(vals.size, start + SUB_CHUNK)
            cap = self.t_cap * tol * (1 + 4 * REL_TOL) if self.group is None else self._group_min() * tol * tol
            need = tbs[start:stop] <= cap
            idx = np.nonzero(need)[0] + start
            times = np.full(stop - start, np.inf)
            if idx.size:
                motors = keys[idx, 0] if self.parts.axles[-1] == "front" else keys[idx, 2]
                idx = idx[self.s._design_time_bounds(motors, pairs[idx], cut=cap) <= cap]
            if idx.size:
                ok, obj = screen(self.parts.with_requirements(self.base_req), keys[idx], objective="accel_time",
                                 accel_cutoff=cap)
                self.stats["evaluated"] += idx.size
                times[idx - start] = np.where(ok, obj, np.inf)
            # only designs with a time can open or join a group; the others can only close the open
            # group (a value beyond its limit), which the next design taken here, or the last value of
            # the sub-chunk (values ascend), does in the same way
            for q in np.nonzero(np.isfinite(times))[0] + start:
                self._take(vals[q], times[q - start], tuple(int(x) for x in keys[q]))
            if self.group is not None and vals[stop - 1] > self.group[1] * tol:
                self.close_group()
            start = stop

    def _take(self, v, tq, key):
        """One evaluated design (axis value, time [s] or inf, key) in axis order: closes the open group
        beyond its limit, opens a group at a design within the cap, or joins the open group."""
        tol = self.tol
        if self.group is not None and v > self.group[1] * tol:
            self.close_group()
        if not np.isfinite(tq):
            return
        if self.group is not None:
            self.group[2].append((tq, key))
        elif tq <= self.t_cap * tol:
            limit = v * (1.0 + self.limit_slack)
            if self.own_limit is not None:
                limit = min(limit, self.own_limit)
            self.group = [v, limit, [(tq, key)]]
            # cheaper designs just slower than the cap may tie with it on time
            self.group[2] += [(nt, nk) for nv, nt, nk in self.near if nv <= limit * tol]
            self.near = []
        elif tq <= self.t_cap * tol * (1 + 3 * REL_TOL):
            self.near.append((v, tq, key))

    def _group_min(self):
        return min(x[0] for x in self.group[2])

    def close_group(self):
        """The open group's fastest design (ties by part id) is a point; the cap drops below its time."""
        ts = np.array([x[0] for x in self.group[2]])
        ks = np.array([x[1] for x in self.group[2]], dtype=np.int64)
        b = int(order_best(ts, ks, 1)[0])
        self.points.append((float(self.group[0]), float(ts[b]), tuple(int(x) for x in ks[b])))
        self.t_cap = float(ts[b]) * (1.0 - self.strictly_faster)
        self.group = None


def sweep_frontier(parts: PartTables, axis_objective: str, base_req, allowed: dict, own_limit: float | None,
                   any_finite_time_s: float, strictly_faster: float, limit_slack: float,
                   deadline: float | None = None):
    """Frontier points (axis value, time, key row) in the order of `studies.frontier.trace`.

    ``axis_objective``: "cost" or "mass"; ``base_req``: the requirements without accel_time_s;
    ``own_limit``: the problem's budget (or max_mass_kg), already in ``base_req`` too.
    Returns (points, stats) or None when the deadline passed.
    """
    sw = _Sweep(parts, axis_objective, base_req, allowed, own_limit, any_finite_time_s, strictly_faster,
                limit_slack)
    while sw.heap:
        if deadline is not None and time.perf_counter() > deadline:
            return None
        if sw.exhausted():
            break
        batch = sw.gather()
        if batch:
            sw.evaluate(*sw.ordered(batch))
    if sw.group is not None:
        sw.close_group()
    return sw.points, sw.stats
