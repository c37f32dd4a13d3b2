"""Single-axle exact search: best-first branch and bound over motors with certified bounds.

The design space is partitioned into blocks, one per motor (all its reducer x tyre pairs). Each
block gets a certified lower bound on the objective over its designs that can be feasible:

- the reducer-tyre pairs a motor can use are cut to those whose log-gearing L = ln(G/r) lies in the
  motor's requirement windows (`bounds.requirement_window`) and whose reducer is rated for it;
- cost and mass: the motor's own value plus the smallest pair value among those pairs (a
  range-minimum query over pairs sorted by L, per reducer rating class);
- acceleration time: the certified Riemann bound of `bounds.optimistic_time_s` over L cells
  holding such pairs (first over the motor's whole L range, refined to `CELLS` cells when the motor
  comes up), which also removes the pairs of cells that cannot meet ``accel_time_s``.

Motors are taken in order of their bound; a motor's block is evaluated exactly (`evaluate.screen`,
cheap checks first, the acceleration run last), in the order of its pairs' own bounds, stopping as
soon as no unevaluated pair can improve the pool. The search ends when every remaining motor's
bound exceeds the pool's ``count``-th best value beyond the tie tolerance: every design not
evaluated is then provably worse or infeasible, so the pool is exact (ties broken by part id).
"""

from __future__ import annotations

import heapq
import time
from dataclasses import dataclass

import numpy as np

from selector.design import Design
from selector.engine import bounds as B
from selector.engine.evaluate import OBJECTIVE_METRIC, designs_of, order_best, screen, tie_tolerance
from selector.engine.parts import PartTables
from selector.engine.rmq import RangeMin
from selector.requirements import REL_TOL
from selector.units import kmh_to_mps

CELLS = 32
"""L cells per motor for the refined acceleration bound [-]."""
REFINE_BATCH = 64
"""Motors whose acceleration bound is refined together [-]."""
FIRST_CHUNK = 256
"""Designs of a block evaluated in its first chunk (later chunks double) [-]."""


@dataclass
class _Class:
    """Single-speed pairs of one reducer rating class, sorted by L."""

    torque_nm: float
    speed_rad_s: float
    pairs: np.ndarray
    """Pair positions, sorted by L."""
    l_sorted: np.ndarray
    cost: RangeMin
    mass: RangeMin


@dataclass
class PairTable:
    """Every (reducer, tyre) pair a design can use, with what the bounds need (arrays (P,))."""

    j: np.ndarray
    k: np.ndarray
    gear_l: np.ndarray
    """(P, 3) L = ln(G/r) of each gear, NaN beyond the gear count."""
    l_first: np.ndarray
    l_tall: np.ndarray
    multi: np.ndarray
    cost: np.ndarray
    mass: np.ndarray
    classes: list
    multi_pairs: np.ndarray


def pair_table(parts: PartTables, use: B.Usable, reducers) -> PairTable:
    """Pairs of the allowed reducers and the usable tyres."""
    re, ty = parts.reducers, parts.tyres
    n = parts.problem.vehicle.tyre_count
    rj = np.asarray(reducers, dtype=np.int64)
    jj, kk = np.meshgrid(rj, use.tyres, indexing="ij")
    j, k = jj.ravel(), kk.ravel()
    with np.errstate(invalid="ignore"):
        gear_l = np.log(re.ratios[j]) - np.log(ty.radius_m[k])[:, None]
    l_first = gear_l[:, 0]
    l_tall = gear_l[np.arange(j.size), re.n_gears[j] - 1]
    multi = re.n_gears[j] > 1
    cost = re.cost[j] + n * ty.cost[k]
    mass = re.mass_kg[j] + n * ty.mass_kg[k]
    classes = []
    single = np.nonzero(~multi)[0]
    if single.size:
        rating = np.stack([re.max_torque_nm[j[single]], re.max_speed_rad_s[j[single]]], axis=1)
        uniq, inv = np.unique(rating, axis=0, return_inverse=True)
        inv = np.asarray(inv).ravel()
        for c in range(uniq.shape[0]):
            members = single[inv == c]
            order = members[np.argsort(l_first[members], kind="stable")]
            classes.append(_Class(float(uniq[c, 0]), float(uniq[c, 1]), order, l_first[order],
                                  RangeMin(cost[order]), RangeMin(mass[order])))
    return PairTable(j, k, gear_l, l_first, l_tall, multi, cost, mass, classes, np.nonzero(multi)[0])


class SingleAxleSearch:
    """One exact search of a single-axle study (see the module docstring)."""

    def __init__(self, parts: PartTables, objective: str, req, allowed: dict, count: int, per_motor: int | None,
                 deadline: float | None, stats: dict):
        self.parts, self.objective, self.req = parts, objective, req
        self.allowed = allowed
        self.count = count
        self.per_slice = count if per_motor is None else min(count, per_motor)
        self.deadline = deadline
        self.stats = stats
        self.metric = OBJECTIVE_METRIC[objective]
        self.accel = req.accel_to_kmh is not None and (req.accel_time_s is not None or objective == "accel_time")
        self.target = kmh_to_mps(req.accel_to_kmh) if self.accel else None
        self.use = B.cached_usable(parts, allowed)
        reducers = allowed.get("reducers")
        self.pairs = pair_table(parts, self.use, np.arange(parts.sizes[1]) if reducers is None else reducers)
        motors = np.arange(parts.sizes[0]) if allowed.get("motors") is None else np.asarray(allowed["motors"])
        motors = np.asarray(motors, dtype=np.int64)
        motors = motors[B.traction_feasible(parts, self.use, motors, req)]
        self.motors = motors
        lo_s, hi_s = B.requirement_window(parts, self.use, motors, req, first_gear=False,
                                          accel_target_kmh=req.accel_to_kmh if self.accel else None)
        lo_1, hi_1 = B.requirement_window(parts, self.use, motors, req, first_gear=True)
        self.win_speed = (lo_s, hi_s)
        self.win_first = (lo_1, hi_1)
        self.pool_vals = np.empty(0)
        self.pool_keys = np.empty((0, 5), dtype=np.int64)
        self.l_range = (float(np.nanmin(self.pairs.l_tall)) if self.pairs.j.size else 0.0,
                        float(np.nanmax(self.pairs.l_first)) if self.pairs.j.size else 0.0)

    # ------------------------------------------------------------------ candidate pairs
    def _single_ranges(self, m_pos):
        """Per compatible class: (class, lo index, hi index) of admissible single-speed pairs of motors."""
        mo = self.parts.motors
        mi = self.motors[m_pos]
        lo = np.maximum(self.win_speed[0][m_pos], self.win_first[0][m_pos])
        hi = np.minimum(self.win_speed[1][m_pos], self.win_first[1][m_pos])
        tol = 1 + 2 * REL_TOL
        out = []
        for c in self.pairs.classes:
            comp = (mo.torque_nm[mi] <= c.torque_nm * tol) & (mo.max_speed_rad_s[mi] <= c.speed_rad_s * tol)
            a = np.searchsorted(c.l_sorted, lo, side="left")
            b = np.searchsorted(c.l_sorted, hi, side="right")
            b = np.where(comp & (hi >= lo), b, a)
            out.append((c, a, b))
        return out

    def _multi_ok(self, m_pos):
        """(motors, multi-speed pairs) admissible: rated, first gear in its window, some gear in the speed window."""
        p = self.pairs
        mp = p.multi_pairs
        if mp.size == 0:
            return np.zeros((m_pos.size, 0), dtype=bool)
        comp = self.use.compatible[self.motors[m_pos]][:, p.j[mp]]
        l1 = p.l_first[mp][None, :]
        ok = comp & (l1 >= self.win_first[0][m_pos][:, None]) & (l1 <= self.win_first[1][m_pos][:, None])
        lo_s, hi_s = self.win_speed[0][m_pos][:, None, None], self.win_speed[1][m_pos][:, None, None]
        gl = p.gear_l[mp][None, :, :]
        with np.errstate(invalid="ignore"):
            some = ((gl >= lo_s) & (gl <= hi_s)).any(axis=2)
        return ok & some

    def candidates(self, pos: int) -> np.ndarray:
        """Admissible pair positions of one motor (before acceleration bounds)."""
        parts = []
        for c, a, b in self._single_ranges(np.array([pos])):
            if b[0] > a[0]:
                parts.append(c.pairs[a[0]:b[0]])
        mo = self._multi_ok(np.array([pos]))
        if mo.size:
            parts.append(self.pairs.multi_pairs[mo[0]])
        return np.concatenate(parts) if parts else np.empty(0, dtype=np.int64)

    # ------------------------------------------------------------------ bounds
    def value_bounds(self) -> np.ndarray:
        """Cost or mass lower bound per motor (inf: no admissible pair)."""
        n = self.motors.size
        m_pos = np.arange(n)
        attr = "cost" if self.objective in ("cost", "accel_time") else "mass"
        best = np.full(n, np.inf)
        for c, a, b in self._single_ranges(m_pos):
            best = np.minimum(best, getattr(c, attr).query(a, b))
        mo = self._multi_ok(m_pos)
        if mo.size:
            vals = getattr(self.pairs, attr)[self.pairs.multi_pairs]
            best = np.minimum(best, np.where(mo, vals[None, :], np.inf).min(axis=1))
        own = self.parts.motors.cost if attr == "cost" else self.parts.motors.mass_kg
        return own[self.motors] + best

    def hull(self, m_pos):
        """L hull [lo, hi] of each motor's admissible pairs (lo > hi: none)."""
        lo = np.full(m_pos.size, np.inf)
        hi = np.full(m_pos.size, -np.inf)
        for c, a, b in self._single_ranges(m_pos):
            has = b > a
            lo = np.where(has, np.minimum(lo, c.l_sorted[np.minimum(a, c.l_sorted.size - 1)]), lo)
            hi = np.where(has, np.maximum(hi, c.l_sorted[np.maximum(b - 1, 0)]), hi)
        mo = self._multi_ok(m_pos)
        if mo.size:
            mp = self.pairs.multi_pairs
            lo = np.minimum(lo, np.where(mo, self.pairs.l_tall[mp][None, :], np.inf).min(axis=1))
            hi = np.maximum(hi, np.where(mo, self.pairs.l_first[mp][None, :], -np.inf).max(axis=1))
        return lo, hi

    def time_bound(self, m_pos, l_a, l_b) -> np.ndarray:
        """Certified acceleration-time bound of motors m_pos over L hulls [l_a, l_b] (broadcast) [s]."""
        return B.motor_time_bound_s(self.parts, self.use, self.motors[m_pos], l_a, l_b, self.target)

    def cell_edges(self):
        lo, hi = self.l_range
        return np.linspace(lo - 1e-9, hi + 1e-9, CELLS + 1)

    def refine(self, m_pos) -> tuple[np.ndarray, np.ndarray]:
        """Per motor: certified time bounds of its admissible designs, per L cell and for multi-speed pairs.

        Returns (cell_lb (m, CELLS): bound over the single-speed pairs in each cell, inf for cells
        without admissible pairs; multi_lb (m,): least bound over its admissible multi-speed pairs,
        each over its gear hull, inf if none). A cell or pair whose bound exceeds accel_time_s holds
        no feasible design.
        """
        edges = self.cell_edges()
        lo_c, hi_c = edges[:-1], edges[1:]
        occupied = np.zeros((m_pos.size, CELLS), dtype=bool)
        for c, a, b in self._single_ranges(m_pos):
            ia = np.searchsorted(c.l_sorted, lo_c, side="left")
            ib = np.searchsorted(c.l_sorted, hi_c, side="right")
            occupied |= (np.minimum(ib[None, :], b[:, None]) > np.maximum(ia[None, :], a[:, None]))
        t = self.time_bound(m_pos[:, None], lo_c[None, :], hi_c[None, :])
        t = np.where(occupied, t, np.inf)
        multi = np.full(m_pos.size, np.inf)
        mo = self._multi_ok(m_pos)
        if mo.size and mo.any():
            mp = self.pairs.multi_pairs
            tm = self.time_bound(m_pos[:, None], self.pairs.l_tall[mp][None, :], self.pairs.l_first[mp][None, :])
            multi = np.where(mo, tm, np.inf).min(axis=1)
        return t, multi

    # ------------------------------------------------------------------ the pool
    def kth(self) -> float:
        if self.pool_vals.size < self.count:
            return np.inf
        return float(self.pool_vals[order_best(self.pool_vals, self.pool_keys, self.count)[-1]])

    def _add(self, vals, keys):
        if vals.size:
            best = order_best(vals, keys, self.per_slice)
            self.pool_vals = np.concatenate([self.pool_vals, vals[best]])
            self.pool_keys = np.concatenate([self.pool_keys, keys[best]])
            keep = order_best(self.pool_vals, self.pool_keys, self.count)
            self.pool_vals, self.pool_keys = self.pool_vals[keep], self.pool_keys[keep]

    # ------------------------------------------------------------------ one block
    def evaluate_motor(self, pos: int, cell_lb=None):
        """Evaluate motor ``pos``'s admissible designs exactly, best pair bound first, until provably done."""
        parts, p = self.parts, self.pairs
        i = int(self.motors[pos])
        cand = self.candidates(pos)
        if cand.size == 0:
            return
        if self.accel:
            edges = self.cell_edges()
            if cell_lb is not None and self.req.accel_time_s is not None:
                cell = np.clip(np.searchsorted(edges, p.l_first[cand], side="right") - 1, 0, CELLS - 1)
                single = ~p.multi[cand]
                limit = self.req.accel_time_s * (1 + 2 * REL_TOL)
                cand = cand[~single | (cell_lb[cell] <= limit)]
            # pair-level bound: the point L (single speed) or the gear hull (multi-speed)
            t_lb = self.time_bound(np.full(cand.size, pos), p.l_tall[cand], p.l_first[cand])
            if self.req.accel_time_s is not None:
                keep = t_lb <= self.req.accel_time_s * (1 + 2 * REL_TOL)
                cand, t_lb = cand[keep], t_lb[keep]
            else:
                keep = np.isfinite(t_lb)
                cand, t_lb = cand[keep], t_lb[keep]
        if cand.size == 0:
            return
        if self.objective == "cost":
            key_val = parts.motors.cost[i] + p.cost[cand]
        elif self.objective == "mass":
            key_val = parts.motors.mass_kg[i] + p.mass[cand]
        else:
            key_val = t_lb
        order = np.lexsort((p.k[cand], p.j[cand], key_val))
        cand, key_val = cand[order], key_val[order]
        keys = parts.single_keys(i, p.j[cand], p.k[cand])
        found_v, found_k = [], []
        start, size = 0, FIRST_CHUNK
        while start < cand.size:
            nxt = key_val[start]
            kth = self.kth()
            if nxt > kth + tie_tolerance(kth):
                break
            if found_v:
                fv = np.concatenate(found_v)
                if fv.size >= self.per_slice:
                    fk = np.concatenate(found_k)
                    last = fv[order_best(fv, fk, self.per_slice)[-1]]
                    if nxt > last + tie_tolerance(last):
                        break
            stop = min(cand.size, start + size)
            ok, obj = screen(parts, keys[start:stop], objective=self.objective)
            self.stats["evaluated"] += stop - start
            if ok.any():
                found_v.append(obj[ok])
                found_k.append(keys[start:stop][ok])
            start, size = stop, size * 2
        if found_v:
            self._add(np.concatenate(found_v), np.concatenate(found_k))

    # ------------------------------------------------------------------ the loop
    def run(self):
        """Returns (status, designs, bound) with status "optimal" | "infeasible" | "time_limit"."""
        n = self.motors.size
        lb = self.value_bounds() if self.objective != "accel_time" else np.zeros(n)
        if self.objective == "accel_time":
            lo, hi = self.hull(np.arange(n))
            has = np.nonzero(lo <= hi)[0]
            lb = np.full(n, np.inf)
            lb[has] = self.time_bound(has, lo[has], hi[has])
        refined = np.zeros(n, dtype=bool) if self.accel else np.ones(n, dtype=bool)
        cells: dict[int, np.ndarray] = {}
        heap = [(float(v), int(m)) for v, m in zip(lb, self.motors) if np.isfinite(v)]
        pos_of = {int(m): k for k, m in enumerate(self.motors)}
        heapq.heapify(heap)
        status = "optimal"
        while heap:
            kth = self.kth()
            if heap[0][0] > kth + tie_tolerance(kth):
                break
            if self.deadline is not None and time.perf_counter() > self.deadline:
                status = "time_limit"
                break
            v, m = heapq.heappop(heap)
            pos = pos_of[m]
            if not refined[pos]:
                batch = [pos]
                while heap and len(batch) < REFINE_BATCH and heap[0][0] <= kth + tie_tolerance(kth):
                    _, m2 = heapq.heappop(heap)
                    p2 = pos_of[m2]
                    if refined[p2]:
                        heapq.heappush(heap, (float(lb[p2]), m2))
                        break
                    batch.append(p2)
                batch = np.array(batch)
                t_cell, t_multi = self.refine(batch)
                self.stats["refined"] += batch.size
                limit = np.inf if self.req.accel_time_s is None else self.req.accel_time_s * (1 + 2 * REL_TOL)
                for row, p2 in enumerate(batch):
                    cl = t_cell[row]
                    refined[p2] = True
                    cells[int(p2)] = cl
                    best = min(float(cl.min()), float(t_multi[row]))
                    if not best <= limit:
                        lb[p2] = np.inf
                        continue
                    if self.objective == "accel_time":
                        lb[p2] = max(lb[p2], best)
                    heapq.heappush(heap, (float(lb[p2]), int(self.motors[p2])))
                continue
            self.evaluate_motor(pos, cells.get(pos))
            self.stats["blocks"] += 1
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
