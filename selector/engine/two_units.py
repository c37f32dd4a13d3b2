"""Two-unit exact search (a drive unit on each axle): best-first over front-unit blocks.

A block is one front drive-unit option (motor, reducer) with every rear option and every tyre.
Blocks are evaluated exactly in order of a lower bound of their objective and the search stops
when the next bound exceeds the pool's ``count``-th best value (beyond the tie tolerance).
"""

from __future__ import annotations

import heapq
import time

import numpy as np

from selector.design import Design
from selector.engine import bounds as B
from selector.engine.evaluate import OBJECTIVE_METRIC, designs_of, order_best, screen, tie_tolerance
from selector.engine.parts import FM, FR, RM, RR, TY, PartTables


class TwoUnitSearch:
    """One exact search of a two-unit study."""

    def __init__(self, parts: PartTables, objective: str, req, allowed: dict, count: int, per_motor: int | None,
                 deadline: float | None, stats: dict):
        self.parts, self.objective, self.req = parts, objective, req
        self.count = count
        self.per_motor = per_motor
        self.deadline = deadline
        self.stats = stats
        self.metric = OBJECTIVE_METRIC[objective]
        self.same = parts.problem.drive.same_unit
        use = B.cached_usable(parts, allowed)
        self.tyres = use.tyres
        motors = np.arange(parts.sizes[0]) if allowed.get("motors") is None else np.asarray(allowed["motors"])
        reducers = np.arange(parts.sizes[1]) if allowed.get("reducers") is None else np.asarray(allowed["reducers"])
        self.options = {}
        for axle in ("front", "rear"):
            m = np.asarray(motors, dtype=np.int64)
            if axle in parts.axle_motors:
                m = m[np.isin(m, parts.axle_motors[axle])]
            comp = B.compatible_matrix(parts, m, reducers)
            mi, rj = np.nonzero(comp)
            self.options[axle] = np.stack([m[mi], np.asarray(reducers)[rj]], axis=1)
        if self.same:
            f, r = self.options["front"], self.options["rear"]
            both = {tuple(x) for x in r}
            self.options["front"] = np.array([x for x in f if tuple(x) in both], dtype=np.int64).reshape(-1, 2)
        self.pool_vals = np.empty(0)
        self.pool_keys = np.empty((0, 5), dtype=np.int64)

    def kth(self) -> float:
        if self.pool_vals.size < self.count:
            return np.inf
        return float(self.pool_vals[order_best(self.pool_vals, self.pool_keys, self.count)[-1]])

    def _add(self, vals, keys):
        if not vals.size:
            return
        if self.per_motor is not None:
            # one group per (front motor, rear motor) pair: at most per_motor designs each
            pairs = keys[:, FM] * (self.parts.sizes[0] + 1) + keys[:, RM]
            keep = []
            for g in np.unique(pairs):
                idx = np.nonzero(pairs == g)[0]
                keep.extend(idx[order_best(vals[idx], keys[idx], self.per_motor)])
            keep = np.asarray(keep, dtype=np.int64)
            vals, keys = vals[keep], keys[keep]
            allv = np.concatenate([self.pool_vals, vals])
            allk = np.concatenate([self.pool_keys, keys])
            pairs = allk[:, FM] * (self.parts.sizes[0] + 1) + allk[:, RM]
            keep = []
            for g in np.unique(pairs):
                idx = np.nonzero(pairs == g)[0]
                keep.extend(idx[order_best(allv[idx], allk[idx], self.per_motor)])
            keep = np.asarray(keep, dtype=np.int64)
            self.pool_vals, self.pool_keys = allv[keep], allk[keep]
        else:
            self.pool_vals = np.concatenate([self.pool_vals, vals])
            self.pool_keys = np.concatenate([self.pool_keys, keys])
        best = order_best(self.pool_vals, self.pool_keys, self.count if self.per_motor is None else
                          self.pool_vals.size)
        self.pool_vals, self.pool_keys = self.pool_vals[best], self.pool_keys[best]

    def block_keys(self, f: np.ndarray) -> np.ndarray:
        """Key rows of front option f with every rear option (or the same one) and every usable tyre."""
        rear = f[None, :] if self.same else self.options["rear"]
        n_r, n_t = rear.shape[0], self.tyres.size
        keys = np.empty((n_r * n_t, 5), dtype=np.int64)
        keys[:, FM], keys[:, FR] = f[0], f[1]
        keys[:, RM] = np.repeat(rear[:, 0], n_t)
        keys[:, RR] = np.repeat(rear[:, 1], n_t)
        keys[:, TY] = np.tile(self.tyres, n_r)
        return keys

    def value_bounds(self) -> np.ndarray:
        """Cost or mass lower bound of every front block (0 for the time objective)."""
        p = self.parts
        f = self.options["front"]
        if self.objective == "accel_time":
            return np.zeros(f.shape[0])
        n = p.problem.vehicle.tyre_count
        if self.objective == "cost":
            own = p.motors.cost[f[:, 0]] + p.reducers.cost[f[:, 1]]
            rear = own if self.same else np.full(f.shape[0], (p.motors.cost[self.options["rear"][:, 0]]
                                                                + p.reducers.cost[self.options["rear"][:, 1]]).min())
            return own + rear + n * p.tyres.cost[self.tyres].min()
        own = p.motors.mass_kg[f[:, 0]] + p.reducers.mass_kg[f[:, 1]]
        rear = own if self.same else np.full(f.shape[0], (p.motors.mass_kg[self.options["rear"][:, 0]]
                                                            + p.reducers.mass_kg[self.options["rear"][:, 1]]).min())
        return p.problem.vehicle.mass_kg + own + rear + n * p.tyres.mass_kg[self.tyres].min()

    def run(self):
        """Returns (status, designs, bound)."""
        f_opts = self.options["front"]
        if f_opts.shape[0] == 0 or self.tyres.size == 0 or (not self.same and self.options["rear"].shape[0] == 0):
            return "infeasible", [], None
        lb = self.value_bounds()
        heap = [(float(v), int(b)) for b, v in enumerate(lb)]
        heapq.heapify(heap)
        status = "optimal"
        while heap:
            kth = self.kth()
            if heap[0][0] > kth + tie_tolerance(kth):
                break
            if self.deadline is not None and time.perf_counter() > self.deadline:
                status = "time_limit"
                break
            _, b = heapq.heappop(heap)
            keys = self.block_keys(f_opts[b])
            ok, obj = screen(self.parts, keys, objective=self.objective)
            self.stats["evaluated"] += keys.shape[0]
            self.stats["blocks"] += 1
            self._add(obj[ok], keys[ok])
        bound = None
        if status == "time_limit":
            rest = min((h[0] for h in heap), default=np.inf)
            best = self.pool_vals.min() if self.pool_vals.size else np.inf
            bound = float(min(rest, best)) if np.isfinite(min(rest, best)) else None
        order = order_best(self.pool_vals, self.pool_keys, self.count)
        designs: list[Design] = designs_of(self.pool_vals, self.pool_keys, order)
        if status == "optimal" and not designs:
            status = "infeasible"
        return status, designs, bound
