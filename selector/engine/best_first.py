"""Single-axle exact search: best-first branch and bound over motors with certified bounds.

The design space is partitioned into blocks, one per motor (all its reducer x tyre pairs). Each
block gets a certified lower bound on the objective over its designs that can be feasible:

- the reducer-tyre pairs a motor can use are cut to those whose log-gearing L = ln(G/r) lies in the
  motor's requirement windows (`bounds.requirement_window`) and whose reducer is rated for it, and
  (with a budget or mass limit) to those within both; motors whose cheapest, lightest design
  already exceeds them are out;
- cost and mass: the motor's own value plus the smallest pair value among those pairs (a
  range-minimum query over pairs sorted by L, per reducer rating class);
- acceleration time: the certified Riemann bound of `bounds.optimistic_time_s` over L cells
  holding such pairs (first over the motor's whole L range, refined to `CELLS` cells when the motor
  comes up, from one (rating class, cell) table of the pairs' extremes), which also removes the
  pairs of cells that cannot meet ``accel_time_s``; on small
  studies (`SMALL_DESIGNS`) no cells: each design of a block gets its own bound instead. A
  multi-speed pair is admissible when its first gear lies in the first-gear window (gradeability and
  launch use first gear) and some gear in the speed window; its time bound is taken gear by gear
  (the largest of its gears' acceleration bounds at each speed, `optimistic_time_s` with
  ``gears_l``), not over its whole gear hull.

Motors are taken in order of their bound; a motor's block is evaluated exactly (`evaluate.screen`,
cheap checks first, the acceleration run last), in the order of its pairs' own bounds, stopping as
soon as no unevaluated pair can improve the pool. The search ends when every remaining motor's
bound exceeds the pool's ``count``-th best value beyond the tie tolerance: every design not
evaluated is then provably worse or infeasible, so the pool is exact (ties broken by part id).
"""

from __future__ import annotations

import heapq
import time
from dataclasses import replace

import numpy as np

from selector.design import Design
from selector.engine import bounds as B
from selector.engine.best_first_block import BlockEvaluation
from selector.engine.best_first_bounds import BlockBounds
from selector.engine.best_first_milp import MilpRound
from selector.engine.best_first_probe import SumOrderProbe
from selector.engine.evaluate import OBJECTIVE_METRIC, designs_of, order_best, tie_tolerance
from selector.engine.pair_table import multi_in_windows, pair_table
from selector.engine.parts import PartTables
from selector.requirements import REL_TOL
from selector.units import kmh_to_mps

REFINE_BATCH = 64
"""Motors whose acceleration bound is refined together [-]."""
SMALL_DESIGNS = 200_000
"""Studies with an acceleration requirement and at most this many (motor, pair) designs skip the
per-cell refinement: blocks are ordered by the motor's hull bound and each design gets its own
certified time bound (cheaper than refining cells when blocks are small) [-]."""
DENSE_MAX = 1 << 20
"""Motors x L cells x single-speed pairs up to which bounds use one dense mask instead of range queries [-]."""
CANDIDATE_MASK_MAX = 1 << 15
"""Single-speed pairs up to which a motor's candidates come from one mask over the pairs, not from
per-rating-class range queries (whose tables a small study then never builds) [-]."""
MERGE_BLOCKS = 16
"""accel_time: blocks whose bound is below the incumbent evaluated together, at most [-]."""
MILP_OPEN = 400
"""The MILP relaxation is consulted when more motors than this are still open below the incumbent [-]..."""
MILP_MAX_OPEN = 2000
"""... but not more than this (the model's size and build time grow with them) ..."""
MILP_AFTER_S = 60.0
"""... and the bound search has already run this long [s] (measured, benchmarks/bench_engine.py: on
the synthetic and many-variant catalogues the bound search proves optimality sooner than a MILP
round costs, and a round after 5 s changed no block count while costing 4-14 s for the solver
import and the model; the relaxation can pay off only where per-motor bounds stay weak for long)."""


class SingleAxleSearch(BlockBounds, BlockEvaluation, SumOrderProbe, MilpRound):
    """One exact search of a single-axle study (see the module docstring)."""

    def __init__(self, parts: PartTables, objective: str, req, allowed: dict, count: int, per_motor: int | None,
                 deadline: float | None, stats: dict, milp: str = "auto"):
        self.parts, self.objective, self.req = parts, objective, req
        self.milp = milp
        self.model = None
        self.allowed = allowed
        self.count = count
        self.per_slice = count if per_motor is None else min(count, per_motor)
        self.deadline = deadline
        self.stats = stats
        self.metric = OBJECTIVE_METRIC[objective]
        self.accel = req.accel_to_kmh is not None and (req.accel_time_s is not None or objective == "accel_time")
        self.target = kmh_to_mps(req.accel_to_kmh) if self.accel else None
        self.time_limit_s = np.inf if req.accel_time_s is None else req.accel_time_s * (1 + 2 * REL_TOL)
        """accel_time_s with the pass tolerance (inf when not stated): a bound above it rules a design out [s]."""
        self.use = B.cached_usable(parts, allowed)
        reducers = allowed.get("reducers")
        self.pairs = pair_table(parts, self.use, np.arange(parts.sizes[1]) if reducers is None else reducers)
        self.cost_matters = objective == "cost" or req.budget is not None or parts.problem.energy is not None
        self._motors = None
        self._windows = None
        self._cells = None
        """`BlockBounds._cell_table`, built on first use."""
        self._l_caps = None
        """`BlockBounds.closed_form_time`'s largest L of any gear, built on first use."""
        self.unfinished = np.inf
        """Least bound of designs of blocks left unfinished at the time limit."""
        self.small = False
        """Small study (`SMALL_DESIGNS`): no per-cell refinement, each design's own bound instead."""
        self.pending = []
        """Further (motor position, cell bounds) blocks `evaluate_motor` evaluates with the next one."""
        self.probe_bound = None
        self.pool_vals = np.empty(0)
        self.pool_keys = np.empty((0, 5), dtype=np.int64)
        self.l_range = (float(np.nanmin(self.pairs.l_tall)) if self.pairs.j.size else 0.0,
                        float(np.nanmax(self.pairs.l_first)) if self.pairs.j.size else 0.0)

    # ------------------------------------------------------------------ motors and windows (on first use)
    def allowed_motors(self) -> np.ndarray:
        """Positions of the allowed motors (every motor without a procurement filter)."""
        m = self.allowed.get("motors")
        return np.arange(self.parts.sizes[0]) if m is None else np.asarray(m, dtype=np.int64)

    def motor_screen(self, motors: np.ndarray) -> np.ndarray:
        """True for motors that can be in a feasible design: a rated reducer and a usable tyre,
        traction for gradeability and launch, a loss model in an energy study (necessary conditions)."""
        ok = B.traction_feasible(self.parts, self.use, motors, self.req)
        if self.parts.problem.energy is not None:  # only motors with a loss model can drive an energy study
            ok &= self.parts.motors.has_loss_model[motors]
        return ok

    def windows(self, motors: np.ndarray, split: bool = False):
        """((speed lo, hi), (first-gear lo, hi)): the requirement windows of ``motors`` on L.

        ``split``: also ((top-speed lo, hi), (acceleration-target lo, hi)), the two windows whose
        intersection is the speed window. A single-speed pair's one gear must lie in both; a
        multi-speed pair needs some gear in each, not necessarily the same one (a run may reach an
        acceleration target above the required sustained speed in a taller gear than the one that
        sustains that speed).
        """
        req = self.req
        w_1 = B.requirement_window(self.parts, self.use, motors, req, first_gear=True)
        w_top = B.requirement_window(self.parts, self.use, motors, req, first_gear=False)
        w_acc = B.requirement_window(self.parts, self.use, motors, replace(req, top_speed_kmh=None),
                                     first_gear=False, accel_target_kmh=req.accel_to_kmh if self.accel else None)
        w_s = (np.maximum(w_top[0], w_acc[0]), np.minimum(w_top[1], w_acc[1]))
        if split:
            return w_s, w_1, w_top, w_acc
        return w_s, w_1

    @property
    def motors(self) -> np.ndarray:
        """Motors of the block search: allowed, passing `motor_screen`, and of every group of
        equivalent motors only the ``count`` worth searching (`bounds.equivalent_motors`). Computed
        on first use: the sum-order probe prepares only the motors its walk reaches."""
        if self._motors is None:
            motors = self.allowed_motors()
            motors = motors[self.motor_screen(motors)]
            motors = B.equivalent_motors(self.parts, motors, self.count, self.cost_matters)
            self.stats["motors"] = int(motors.size)
            self._motors = motors
        return self._motors

    @property
    def win_speed(self):
        """Speed windows (lo, hi) on L of `motors` (a single-speed pair's L must lie in them)."""
        if self._windows is None:
            self._windows = self.windows(self.motors, split=True)
        return self._windows[0]

    @property
    def win_first(self):
        """First-gear windows (lo, hi) on L of `motors`."""
        if self._windows is None:
            self._windows = self.windows(self.motors, split=True)
        return self._windows[1]

    @property
    def win_multi(self):
        """((top-speed lo, hi), (acceleration-target lo, hi)) windows on L of `motors` (some gear of a
        multi-speed pair must lie in each, see `windows`)."""
        if self._windows is None:
            self._windows = self.windows(self.motors, split=True)
        return self._windows[2:]

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

    def _dense_single(self, m_pos, cells: int):
        """(admissible (m, S), single-speed pair positions (S,)) of motors ``m_pos`` as one dense mask,
        when motors x cells x pairs stays below `DENSE_MAX` (small studies, where the per-class range
        queries cost more than the mask); else None. Admissible: rated for the motor and first-gear
        L in both requirement windows, exactly the pairs `_single_ranges` selects."""
        p = self.pairs
        sp = p.single_pairs
        if m_pos.size * cells * sp.size > DENSE_MAX:
            return None
        lo = np.maximum(self.win_speed[0][m_pos], self.win_first[0][m_pos])[:, None]
        hi = np.minimum(self.win_speed[1][m_pos], self.win_first[1][m_pos])[:, None]
        l1 = p.l_first[sp][None, :]
        ok = self.use.compatible[self.motors[m_pos]][:, p.j[sp]] & (l1 >= lo) & (l1 <= hi)
        return ok, sp

    def _multi_ok(self, m_pos):
        """(motors, multi-speed pairs) admissible: rated, first gear in its window, some gear in the
        top-speed window and some gear in the acceleration-target window (`windows`)."""
        p = self.pairs
        mp = p.multi_pairs
        if mp.size == 0:
            return np.zeros((m_pos.size, 0), dtype=bool)
        comp = self.use.compatible[self.motors[m_pos]][:, p.j[mp]]
        w_top, w_acc = self.win_multi
        return comp & multi_in_windows(p.gear_l[mp], self.win_first[0][m_pos], self.win_first[1][m_pos],
                                       (w_top[0][m_pos], w_top[1][m_pos]), (w_acc[0][m_pos], w_acc[1][m_pos]))

    def candidates(self, pos: int) -> np.ndarray:
        """Admissible pair positions of one motor (before acceleration bounds)."""
        parts = []
        dense = self._dense_single(np.array([pos]), 1) if self.pairs.single_pairs.size <= CANDIDATE_MASK_MAX else None
        if dense is not None:  # one mask over the pairs (the same pairs as the range queries)
            parts.append(dense[1][dense[0][0]])
        else:
            for c, a, b in self._single_ranges(np.array([pos])):
                if b[0] > a[0]:
                    parts.append(c.pairs[a[0]:b[0]])
        mo = self._multi_ok(np.array([pos]))
        if mo.size:
            parts.append(self.pairs.multi_pairs[mo[0]])
        return np.concatenate(parts) if parts else np.empty(0, dtype=np.int64)

    def affordable(self, i: int, cand: np.ndarray) -> np.ndarray:
        """The pairs ``cand`` of motor row ``i`` whose design can meet the budget and the mass limit
        (motor and pair values: the design's exact cost and mass without [energy], a lower bound with
        a battery; `evaluate.screen` would reject the others)."""
        req, p = self.req, self.pairs
        ok = None
        if req.budget is not None:
            ok = self.parts.motors.cost[i] + p.cost[cand] <= req.budget * (1 + 4 * REL_TOL)
        if req.max_mass_kg is not None:
            m = self.parts.problem.vehicle.mass_kg + self.parts.motors.mass_kg[i] + p.mass[cand]
            ok = (m <= req.max_mass_kg * (1 + 4 * REL_TOL)) & (True if ok is None else ok)
        return cand if ok is None else cand[ok]

    def affordable_motors(self) -> np.ndarray:
        """False for `motors` whose every design exceeds the budget or the mass limit (the motor with
        the cheapest, lightest usable reducer and tyre: `bounds.least_cost`, `bounds.lightest_mass_kg`)."""
        ok = np.ones(self.motors.size, dtype=bool)
        if self.req.budget is not None:
            ok &= B.least_cost(self.parts, self.use, self.motors) <= self.req.budget * (1 + 4 * REL_TOL)
        if self.req.max_mass_kg is not None:
            ok &= B.lightest_mass_kg(self.parts, self.use, self.motors) <= self.req.max_mass_kg * (1 + 4 * REL_TOL)
        return ok

    # ------------------------------------------------------------------ the pool
    def expired(self) -> bool:
        """True once the deadline (``time_limit_s``) has passed."""
        return self.deadline is not None and time.perf_counter() > self.deadline

    def _stop_bound(self, rest) -> float | None:
        """Proved lower bound when the search stops at the time limit: the least of ``rest`` (the
        least bound of the designs not evaluated) and the best design found (None when not finite)."""
        best = self.pool_vals.min() if self.pool_vals.size else np.inf
        rest = np.inf if rest is None else rest
        val = min(float(rest), float(best))
        return val if np.isfinite(val) else None

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
    def motor_bounds(self) -> np.ndarray:
        """Lower bound of the objective of every design of each motor (position in ``self.motors``; inf
        where none can be feasible): part sums (+ the battery's least cost or mass with a range) for
        cost and mass, the certified time bound over the motor's admissible L hull for accel_time,
        the energy bound (refined over L cells, in batches until the deadline) for energy."""
        n = self.motors.size
        lb = self.value_bounds() if self.objective in ("cost", "mass") else np.zeros(n)
        if self.objective in ("cost", "mass") and self.parts.problem.requirements.range_km is not None \
                and self.parts.problem.energy is not None:
            lo, hi = self.hull(np.arange(n))
            has = np.nonzero((lo <= hi) & np.isfinite(lb))[0]
            mi = self.motors[has]
            mb, mc = self.battery_bounds(mi, lo[has], hi[has], B.lightest_mass_kg(self.parts, self.use, mi),
                                         self.use.crr_min, self.use.eta_max[mi])
            lb[has] = lb[has] + (mc if self.objective == "cost" else mb)
        if self.objective == "accel_time":
            lo, hi = self.hull(np.arange(n))
            has = np.nonzero(lo <= hi)[0]
            lb = np.full(n, np.inf)
            lb[has] = self.time_bound(has, lo[has], hi[has])
        if self.objective == "energy":
            lo, hi = self.hull(np.arange(n))
            has = np.nonzero(lo <= hi)[0]
            lb = np.full(n, np.inf)
            mi = self.motors[has]
            lb[has] = self.energy_bounds(mi, lo[has], hi[has], B.lightest_mass_kg(self.parts, self.use, mi),
                                         self.use.crr_min, self.use.eta_max[mi])
        lb = np.where(self.affordable_motors(), lb, np.inf)
        if self.objective == "energy":
            # the motor-level energy bound refined over L cells (least pair mass per cell), in batches
            fin = np.nonzero(np.isfinite(lb))[0]
            for s0 in range(0, fin.size, REFINE_BATCH):
                if self.expired():  # the coarser bounds of the rest stay valid
                    break
                b = fin[s0:s0 + REFINE_BATCH]
                cl = self.cell_bounds(b, what="energy")
                lb[b] = np.maximum(lb[b], np.where(self._multi_ok(b).any(axis=1) if self.pairs.multi_pairs.size
                                                   else False, lb[b], cl.min(axis=1)))
        return lb

    def _refine_popped(self, pos: int, heap: list, pos_of: dict, refined, lb, cells: dict, kth: float) -> None:
        """Refine the popped motor ``pos`` with the next unrefined motors on the heap (a batch of up to
        `REFINE_BATCH` within the tie tolerance of ``kth``): per-cell time bounds (kept in ``cells``),
        motors whose best cell misses accel_time_s get bound inf and leave, the rest go back on the
        heap (under the accel_time objective with the refined bound)."""
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
        limit = self.time_limit_s
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

    # ------------------------------------------------------------------ the loop
    # Long on purpose: the block loop (probe hand-over, refinement batches, merged blocks, MILP rounds, the
    # deadline and the stop rule) keeps its heap and counters in locals that every branch reads.
    def run(self):
        """Returns (status, designs, bound) with status "optimal" | "infeasible" | "time_limit"."""
        if self.objective in ("cost", "mass") and self.parts.problem.energy is None and self.per_slice == self.count:
            outcome = self.sum_order_probe()
            if outcome != "handover":
                order = order_best(self.pool_vals, self.pool_keys, self.count)
                designs = designs_of(self.pool_vals, self.pool_keys, order)
                if outcome == "time_limit":
                    return "time_limit", designs, self._stop_bound(self.probe_bound)
                return ("optimal" if designs else "infeasible"), designs, None
        n = self.motors.size
        lb = self.motor_bounds()
        self.small = self.accel and n * self.pairs.j.size <= SMALL_DESIGNS
        refined = np.zeros(n, dtype=bool) if self.accel and not self.small else np.ones(n, dtype=bool)
        cells: dict[int, np.ndarray] = {}
        heap = [(float(v), int(m)) for v, m in zip(lb, self.motors, strict=False) if np.isfinite(v)]
        pos_of = {int(m): k for k, m in enumerate(self.motors)}
        heapq.heapify(heap)
        status = "optimal"
        milp_tried = False
        t_start = time.perf_counter()
        done = np.zeros(n, dtype=bool)
        while heap:
            kth = self.kth()
            if heap[0][0] > kth + tie_tolerance(kth):
                break
            if self.expired() or self.unfinished < np.inf:
                status = "time_limit"
                break
            v, m = heapq.heappop(heap)
            pos = pos_of[m]
            if done[pos]:
                continue
            if not refined[pos]:
                self._refine_popped(pos, heap, pos_of, refined, lb, cells, kth)
                continue
            late = time.perf_counter() - t_start > MILP_AFTER_S
            if self.milp == "always" or (self.milp == "auto" and late and np.isfinite(kth) and not milp_tried):
                open_pos = np.array(sorted({pos_of[m2] for _, m2 in heap if not done[pos_of[m2]]
                                            and lb[pos_of[m2]] <= kth + tie_tolerance(kth)} | {pos}))
                if self.milp == "always" or MILP_OPEN < open_pos.size <= MILP_MAX_OPEN:
                    milp_tried = True
                    pick = self.milp_round(open_pos, lb, cells)
                    if pick is None:  # the relaxation proves that no open motor beats the pool
                        heap = []
                        break
                    if pick >= 0 and done[pick]:  # the model excludes evaluated motors: a repeat is a bug
                        raise RuntimeError(f"the MILP relaxation proposed motor row {pick} a second time; the "
                                           "search stops instead of looping")
                    if pick >= 0 and pick != pos:  # evaluate the relaxation's motor first
                        heapq.heappush(heap, (float(lb[pos]), int(self.motors[pos])))
                        pos = pick
                        if not refined[pos]:
                            t_cell, t_multi = self.refine(np.array([pos]))
                            refined[pos] = True
                            cells[int(pos)] = t_cell[0]
            if done[pos]:
                continue
            done[pos] = True
            if self.objective == "accel_time" and self.per_slice == self.count and self.milp != "always" \
                    and np.isfinite(kth):
                # the next refined blocks whose bound is below the incumbent go with this one
                while heap and len(self.pending) < MERGE_BLOCKS - 1 and heap[0][0] <= kth + tie_tolerance(kth):
                    p2 = pos_of[heap[0][1]]
                    if not done[p2] and not refined[p2]:
                        break
                    heapq.heappop(heap)
                    if not done[p2]:
                        done[p2] = True
                        self.pending.append((p2, cells.get(p2)))
            self.stats["blocks"] += 1 + len(self.pending)
            self.evaluate_motor(pos, cells.get(pos))
        if status == "optimal" and self.unfinished < np.inf:
            status = "time_limit"  # a block was cut short at the deadline
        bound = None
        if status == "time_limit":
            rest = min((h[0] for h in heap), default=np.inf)
            bound = self._stop_bound(min(rest, self.unfinished))
        order = order_best(self.pool_vals, self.pool_keys, self.count)
        designs: list[Design] = designs_of(self.pool_vals, self.pool_keys, order)
        if status == "optimal" and not designs:
            status = "infeasible"
        return status, designs, bound
