"""Two-unit exact search (a drive unit on each axle): best-first branch and bound over blocks.

Drive-unit options are the (motor, reducer) pairs allowed on an axle (reducer rated for the motor,
[drive] motor filters, procurement filters). A block is one front option with one tyre, holding every
rear option; with ``same_unit`` the designs are (option, option, tyre) and are searched directly.

Per (option, tyre) the search precomputes what the requirements read: the tallest gear's gearing
limit, the best-gear continuous force at the required top speed, the best-gear peak force at the
acceleration target, the first-gear crawl force, mass and cost. From these, every design's
necessary conditions are cheap sums (top speed: summed continuous forces at V cover the road load at
V with the design's exact mass; acceleration target: summed peak forces exceed the road load there;
gradeability and launch: summed first-gear crawl forces with every axle motor-limited; mass, budget,
tyre load, gearing limits). A block's lower bound:

- cost, mass: the front option's and the tyre's value plus the least rear value among the rear
  options that can meet the conditions at that tyre (first over the rear options alone, refined
  lazily with the front option fixed, scanning the rear options in order of their own value and
  stopping at the first that meets the conditions or at the value the pool can still accept);
- energy: the certified consumption (and battery) bound of `selector.engine.energy` with the
  block's extremes;
- acceleration time: `selector.engine.accel_blocks`, a best-first search over blocks of a k-d tree
  of each axle's options, bounded by the certified Riemann bound of
  `selector.engine.accel_block_bounds.block_time_bounds`.

Blocks are evaluated in order of their bound (each rear option exactly through `evaluate.screen`,
best first) until the next bound exceeds the pool's ``count``-th best value: every design not
evaluated is then provably worse or infeasible. Tables and condition checks are built in chunks
(`CHUNK`, `PAIR_CHUNK`), so memory stays bounded for studies of 1e11 designs.
"""

from __future__ import annotations

import heapq
import time

import numpy as np

from selector.design import Design
from selector.engine import bounds as B
from selector.engine.evaluate import OBJECTIVE_METRIC, designs_of, order_best, screen, tie_tolerance
from selector.engine.parts import FM, FR, RM, RR, TY, PartTables
from selector.engine.two_unit_bounds import OptionTable, TwoUnitBounds
from selector.engine.two_unit_time import TimeBounds, meets
from selector.requirements import REL_TOL
from selector.units import kmh_to_mps

REFINE_BATCH = 512
"""Blocks whose bound is refined together [-]."""
FIRST_CHUNK = 128
"""Rear options of a block evaluated in its first chunk (later chunks double) [-]."""
PAIR_CHUNK = 2_000_000
"""(block, rear option) pairs whose conditions are checked at once [-] (bounds memory)."""


class TwoUnitSearch(TwoUnitBounds):
    """One exact search of a two-unit study (see the module docstring)."""

    def __init__(self, parts: PartTables, objective: str, req, allowed: dict, count: int, per_motor: int | None,
                 deadline: float | None, stats: dict):
        self.parts, self.objective, self.req = parts, objective, req
        self.count = count
        self.per_motor = per_motor
        self.deadline = deadline
        self.cut_short = np.inf  # least bound of the designs a chunk loop left at the deadline
        self.stats = stats
        self.metric = OBJECTIVE_METRIC[objective]
        self.same = parts.problem.drive.same_unit
        self.accel = req.accel_to_kmh is not None and (req.accel_time_s is not None or objective == "accel_time")
        self.target = kmh_to_mps(req.accel_to_kmh) if self.accel else None
        use = B.cached_usable(parts, allowed)
        self.tyres = use.tyres
        motors = np.arange(parts.sizes[0]) if allowed.get("motors") is None else np.asarray(allowed["motors"])
        reducers = np.arange(parts.sizes[1]) if allowed.get("reducers") is None else np.asarray(allowed["reducers"])
        self.options = {}
        for axle in ("front", "rear"):
            m = np.asarray(motors, dtype=np.int64)
            if axle in parts.axle_motors:
                m = m[np.isin(m, parts.axle_motors[axle])]
            if parts.problem.energy is not None:  # only motors with a loss model can drive an energy study
                m = m[parts.motors.has_loss_model[m]]
            comp = B.compatible_matrix(parts, m, reducers)
            mi, rj = np.nonzero(comp)
            self.options[axle] = np.stack([m[mi], np.asarray(reducers, dtype=np.int64)[rj]], axis=1)
        if self.same:
            f, r = self.options["front"], self.options["rear"]
            both = {tuple(x) for x in r.tolist()}
            keep = np.array([tuple(x) in both for x in f.tolist()], dtype=bool)
            self.options["front"] = self.options["rear"] = f[keep] if f.size else f
        self.allowed = allowed
        self.floor = -np.inf  # cost (mass) below which every design is known infeasible (`_floor_memo`)
        self.time: TimeBounds | None = None  # time bounds of a cost (mass) search under accel_time_s
        self.pool_vals = np.empty(0)
        self.pool_keys = np.empty((0, 5), dtype=np.int64)
        self.speeds = [kmh_to_mps(v) for v in (req.top_speed_kmh, req.accel_to_kmh if self.accel else None)
                       if v is not None]

    # ------------------------------------------------------------------ pool
    def kth(self) -> float:
        if self.pool_vals.size < self.count:
            return np.inf
        return float(self.pool_vals[order_best(self.pool_vals, self.pool_keys, self.count)[-1]])

    def _group(self, keys):
        return keys[:, FM] * (self.parts.sizes[0] + 1) + keys[:, RM]

    def _add(self, vals, keys):
        if not vals.size:
            return
        allv = np.concatenate([self.pool_vals, vals])
        allk = np.concatenate([self.pool_keys, keys])
        if self.per_motor is not None:
            # one group per (front motor, rear motor) pair: at most per_motor designs each
            g = self._group(allk)
            keep = []
            for key in np.unique(g):
                idx = np.nonzero(g == key)[0]
                keep.extend(idx[order_best(allv[idx], allk[idx], self.per_motor)])
            keep = np.asarray(keep, dtype=np.int64)
            allv, allk = allv[keep], allk[keep]
        best = order_best(allv, allk, self.count)
        self.pool_vals, self.pool_keys = allv[best], allk[best]


    # ------------------------------------------------------------------ search
    def run(self):
        """Returns (status, designs, bound) with status "optimal" | "infeasible" | "time_limit"."""
        if self.tyres.size == 0 or self.options["front"].shape[0] == 0 or self.options["rear"].shape[0] == 0:
            return "infeasible", [], None
        memo = self._floor_memo()
        if memo is not None:
            self.floor = max((v for cap, v in memo.items() if cap >= self.req.accel_time_s), default=-np.inf)
            if self.floor == np.inf:  # infeasible under a looser time limit: infeasible under this one
                return "infeasible", [], None
        tr = self._table(self.options["rear"])
        same_options = self.same or np.array_equal(self.options["front"], self.options["rear"])
        tf = tr if same_options else self._table(self.options["front"])
        result = self._run_same(tf) if self.same else self._run_pairs(tf, tr)
        if memo is not None and result[0] in ("optimal", "infeasible"):
            best = result[1][0].value if result[1] else np.inf
            memo[self.req.accel_time_s] = best * (1 - 4 * REL_TOL) if np.isfinite(best) else np.inf
        return result

    def _table(self, options: np.ndarray) -> OptionTable:
        """The `OptionTable` of an axle's options, memoised in the part tables' cache (a frontier or a
        sweep repeats searches that differ only in limits the tables do not read)."""
        key = ("two_unit_table", options.tobytes(), self.tyres.tobytes(), self.req.top_speed_kmh, self.target)
        if key not in self.parts.cache:
            self.parts.cache[key] = OptionTable(self.parts, options, self.tyres, self.req, self.target)
        return self.parts.cache[key]

    def _floor_memo(self) -> dict | None:
        """Proved optima of earlier cost (mass) searches of these part tables with the same requirements
        apart from ``accel_time_s`` and the same allowed parts: {time limit [s]: optimum less the tie
        tolerance (inf: infeasible)}; None when the search is of another kind.

        A tighter time limit only removes designs, so every design whose value lies below the optimum
        under a looser (or equal) limit is infeasible here: the search skips them (``floor``). This is
        what the frontier's epsilon steps (min cost under ever tighter time limits) repeat.
        """
        if self.objective not in ("cost", "mass") or self.req.accel_time_s is None or \
                self.parts.problem.energy is not None:
            return None
        from dataclasses import replace

        allowed = tuple((k, None if a is None else np.asarray(a, dtype=np.int64).tobytes())
                        for k, a in sorted(self.allowed.items()))
        key = ("two_unit_floor", self.objective, repr(replace(self.req, accel_time_s=None)), allowed)
        return self.parts.cache.setdefault(key, {})

    def expired(self) -> bool:
        """True once the search's deadline has passed."""
        return self.deadline is not None and time.perf_counter() > self.deadline

    def _finish(self, status, heap_min):
        bound = None
        if status == "optimal" and self.cut_short < np.inf:
            status = "time_limit"  # a chunk loop stopped at the deadline
        if status == "time_limit":
            best = self.pool_vals.min() if self.pool_vals.size else np.inf
            lo = min(heap_min, best, self.cut_short)
            bound = float(lo) if np.isfinite(lo) else None
        order = order_best(self.pool_vals, self.pool_keys, self.count)
        designs: list[Design] = designs_of(self.pool_vals, self.pool_keys, order)
        if status == "optimal" and not designs:
            status = "infeasible"
        return status, designs, bound

    def _keys(self, tf, fi, tr, ri, kk) -> np.ndarray:
        keys = np.empty((np.size(ri), 5), dtype=np.int64)
        keys[:, FM], keys[:, FR] = tf.options[fi, 0], tf.options[fi, 1]
        keys[:, RM], keys[:, RR] = tr.options[ri, 0], tr.options[ri, 1]
        keys[:, TY] = self.tyres[kk]
        return keys

    def _evaluate(self, keys, key_val, fine=None):
        """Evaluate candidate designs exactly in the order of their bound ``key_val``, stopping when done.

        ``fine(keys) -> bounds``: an optional tighter bound computed chunk by chunk (designs whose fine
        bound exceeds the pool's count-th best are skipped without the exact evaluation). With time
        bounds (`TimeBounds`), designs whose time bound misses ``accel_time_s`` are skipped too, chunk
        by chunk.
        """
        order = np.lexsort(tuple(keys[:, c] for c in range(4, -1, -1)) + (key_val,))
        keys, key_val = keys[order], key_val[order]
        start, size = 0, FIRST_CHUNK
        while start < keys.shape[0]:
            kth = self.kth()
            if key_val[start] > kth + tie_tolerance(kth):
                break
            if start and self.expired():
                self.cut_short = min(self.cut_short, float(key_val[start]))  # (sorted: the rest's least bound)
                break
            stop = min(keys.shape[0], start + size)
            t_chunk = time.perf_counter()
            chunk = keys[start:stop]
            chunk = chunk[key_val[start:stop] <= kth + tie_tolerance(kth)]
            if self.time is not None and chunk.shape[0]:
                fast = meets(self.time.design_s(chunk, self.req.accel_time_s), self.req.accel_time_s)
                self.stats["time_skipped"] = self.stats.get("time_skipped", 0) + int((~fast).sum())
                chunk = chunk[fast]
            if fine is not None and chunk.shape[0]:
                fb = fine(chunk)
                chunk = chunk[fb <= kth + tie_tolerance(kth)]
                if chunk.shape[0]:
                    chunk = chunk[np.lexsort(tuple(chunk[:, c] for c in range(4, -1, -1))
                                             + (fb[fb <= kth + tie_tolerance(kth)],))]
            if chunk.shape[0]:
                cutoff = kth * (1 + 4 * REL_TOL) if self.objective == "accel_time" and np.isfinite(kth) else None
                ok, obj = screen(self.parts, chunk, objective=self.objective, accel_cutoff=cutoff,
                                 keep_best=self._keep_best())
                self.stats["evaluated"] += chunk.shape[0]
                self._add(obj[ok], chunk[ok])
            start, size = stop, self._next_chunk(size, stop - start, time.perf_counter() - t_chunk)


    def _next_chunk(self, size: int, done: int, took_s: float) -> int:
        """The next chunk's size: twice the last; under a deadline at most what half the time left
        allows at the last chunk's pace (energy studies evaluate a cycle per design: a doubled chunk
        could overrun the limit by seconds)."""
        if self.deadline is None or done <= 0:
            return size * 2
        left = self.deadline - time.perf_counter()
        pace = max(took_s / done, 1e-9)
        return max(1, min(size * 2, int(max(left, 0.0) / pace / 2)))

    def _keep_best(self) -> int | None:
        """``keep_best`` of `evaluate.screen` for a chunk: with a cost (mass) objective a design whose
        time is still undecided after its proved bracket (every design with a gearbox: its bracket has
        no upper bound) is not integrated when ``count`` designs of the chunk are already proved
        feasible at a lower value (it cannot be among the ``count`` best). Not with ``per_motor``: the
        designs that beat it may all belong to other motor pairs."""
        return self.count if self.objective in ("cost", "mass") and self.per_motor is None else None

    def _time_bounds(self, tf, tr) -> TimeBounds | None:
        """`TimeBounds` of a cost (mass) search under ``accel_time_s`` (not with [energy]: the battery's
        mass would raise the traction limits the bounds take from the parts' masses), else None."""
        if self.objective not in ("cost", "mass") or not self.accel or self.req.accel_time_s is None or \
                self.parts.problem.energy is not None:
            return None
        return TimeBounds(self, tf, tr, self._rear_sorted(tr)[0])

    def _own_value(self, tf, fi, tr, ri, kk) -> np.ndarray:
        p = self.parts
        n = p.problem.vehicle.tyre_count
        k = self.tyres[kk]
        if self.objective == "cost":
            return tf.cost[fi] + tr.cost[ri] + n * p.tyres.cost[k]
        return p.problem.vehicle.mass_kg + tf.mass[fi] + tr.mass[ri] + n * p.tyres.mass_kg[k]


    def _run_same(self, t: OptionTable):
        """same_unit: designs (option, option, tyre), searched directly in order of their bound."""
        no, nt = t.options.shape[0], self.tyres.size
        oi, kk = (a.ravel() for a in np.meshgrid(np.arange(no), np.arange(nt), indexing="ij"))
        ok = self.conditions(t, oi, t, oi, kk)
        oi, kk = oi[ok], kk[ok]
        if oi.size == 0:
            return self._finish("optimal", np.inf)
        keys = self._keys(t, oi, t, oi, kk)
        self.time = self._time_bounds(t, t)
        fine = None
        if self.objective == "accel_time":
            key_val, fine = self._envelope_point_bounds(t, oi, kk), self._point_bounds_staged
        elif self.objective == "energy":
            key_val = self._design_energy_lb(keys)
        else:
            key_val = self._own_value(t, oi, t, oi, kk)
        self.stats["blocks"] += 1
        if self.expired():
            return self._finish("time_limit", float(key_val.min()))
        self._evaluate(keys, key_val, fine=fine)
        return self._finish("optimal", np.inf)


    def _rear_static(self, tr: OptionTable) -> np.ndarray:
        """(rear options, tyres) bool: the rear option alone meets the gearing limits at that tyre."""
        ok = np.ones(tr.lim.shape, dtype=bool)
        for spd in self.speeds:
            ok &= tr.lim * (1 + 4 * REL_TOL) >= spd
        return ok

    def _run_pairs(self, tf: OptionTable, tr: OptionTable):
        p = self.parts
        nf, nt = tf.options.shape[0], self.tyres.size
        fi, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nt), indexing="ij"))
        tol = 1 + 4 * REL_TOL
        front_ok = np.ones(fi.size, dtype=bool)
        for spd in self.speeds:
            front_ok &= tf.lim[fi, kk] * tol >= spd
        fi, kk = fi[front_ok], kk[front_ok]
        rear_ok = self._rear_static(tr)
        self.time = self._time_bounds(tf, tr)
        if self.objective == "accel_time":
            from selector.engine.accel_blocks import run_accel_blocks

            f_ok = np.zeros((nf, nt), dtype=bool)
            f_ok[fi, kk] = True
            return run_accel_blocks(self, tf, tr, f_ok, rear_ok)
        if self.objective == "energy":
            lb = self._energy_bounds(tf, tr, fi, kk, rear_ok, per_tyre=True)
            return self._best_first(tf, tr, fi, kk, lb)
        attr = tr.cost if self.objective == "cost" else tr.mass
        rear_min = np.where(rear_ok, attr[:, None], np.inf).min(axis=0)
        own = tf.cost[fi] if self.objective == "cost" else tf.mass[fi]
        n = p.problem.vehicle.tyre_count
        tyre_val = (p.tyres.cost if self.objective == "cost" else p.tyres.mass_kg)[self.tyres[kk]]
        base = 0.0 if self.objective == "cost" else p.problem.vehicle.mass_kg
        lb = base + own + rear_min[kk] + n * tyre_val
        return self._best_first(tf, tr, fi, kk, lb)

    def _best_first(self, tf, tr, fi, kk, lb):
        """Best-first over (front option, tyre) blocks with lazily refined bounds.

        Blocks wait in one array sorted by their first bound; a refined block moves to a heap keyed by
        its refined bound. Each round either refines the next waiting blocks (growing batches) or
        evaluates the refined blocks at the top of the heap together (their designs merged in the
        order of their own bounds), whichever holds the least bound; the search ends when the least
        bound of both exceeds the pool's ``count``-th best (plus the tie tolerance).
        """
        rear_ok = self._rear_static(tr)
        order = np.argsort(lb, kind="stable")
        order = order[np.isfinite(lb[order])]
        waiting = 0  # order[waiting:] are not refined yet
        heap: list[tuple[float, int]] = []
        status = "optimal"
        rounds = refines = 0
        while True:
            kth = self.kth()
            limit = kth + tie_tolerance(kth)
            next_wait = lb[order[waiting]] if waiting < order.size else np.inf
            next_heap = heap[0][0] if heap else np.inf
            if (waiting >= order.size and not heap) or min(next_wait, next_heap) > limit:
                break
            if self.expired():
                status = "time_limit"
                break
            if waiting < order.size and next_wait <= next_heap:
                size = min(REFINE_BATCH, 32 * 2 ** min(refines, 10))
                stop = min(order.size, waiting + size)
                stop = waiting + int(np.searchsorted(lb[order[waiting:stop]], limit, side="right"))
                batch = order[waiting:max(stop, waiting + 1)]
                waiting += batch.size
                refines += 1
                if self.objective == "energy":
                    new = self._energy_bounds(tf, tr, fi[batch], kk[batch], rear_ok, per_tyre=False)
                else:
                    new = self._refine_value(tf, tr, fi[batch], kk[batch])
                self.stats["refined"] += batch.size
                lb[batch] = np.maximum(lb[batch], new)
                for bb in batch[np.isfinite(lb[batch])]:
                    heapq.heappush(heap, (float(lb[bb]), int(bb)))
                continue
            size = min(REFINE_BATCH, 4 * 2 ** min(rounds, 7))
            batch = []
            while heap and len(batch) < size and heap[0][0] <= min(limit, next_wait):
                batch.append(heapq.heappop(heap)[1])
            if not batch:
                batch.append(heapq.heappop(heap)[1])
            rounds += 1
            batch = np.array(batch)
            self._evaluate_blocks(tf, tr, fi[batch], kk[batch])
            self.stats["blocks"] += batch.size
        rest = min(lb[order[waiting]] if waiting < order.size else np.inf, heap[0][0] if heap else np.inf)
        return self._finish(status, rest)


    def _refine_value(self, tf, tr, fi, kk) -> np.ndarray:
        """Cost or mass bound of blocks with the front option fixed: the least own value over the rear
        options that meet every cheap necessary condition with it.

        Rear options are scanned in order of their own value, so a block's bound is its first rear
        option that meets the conditions; a block whose value would exceed the pool's count-th best
        gets the (proved) value of the first rear option not scanned instead. Rear options whose
        value lies below the floor (`_floor_memo`) are known infeasible and not scanned, nor, with time
        bounds (`TimeBounds.first_fast`), the leading rear options proved too slow with the front option.
        """
        order, sval = self._rear_sorted(tr)
        base = self._own_value(tf, fi, tr, np.full(fi.size, order[0]), kk) - sval[0]
        kth = self.kth()
        cap = kth + tie_tolerance(kth) - base  # rear values above cap cannot enter the pool
        out = np.full(fi.size, np.inf)
        stop_at = np.searchsorted(sval, cap, side="right")  # rear positions [first, stop_at) may
        first_at = np.searchsorted(sval, self.floor - base, side="left")  # below the floor: infeasible
        beyond = stop_at < sval.size
        out[beyond] = base[beyond] + sval[np.minimum(stop_at, sval.size - 1)[beyond]]
        if self.time is not None:  # rear positions before first_at are proved too slow with the front option
            first_at = self.time.first_fast(fi, kk, first_at, stop_at, self.req.accel_time_s)
            out[first_at >= sval.size] = np.inf
        open_ = np.nonzero(stop_at > first_at)[0]
        start, step = int(first_at[open_].min()) if open_.size else 0, 64
        while open_.size and start < sval.size:
            end = min(sval.size, start + step)
            pos = np.arange(start, end)
            for b0 in range(0, open_.size, max(1, PAIR_CHUNK // pos.size)):
                blk = open_[b0:b0 + max(1, PAIR_CHUNK // pos.size)]
                ok = self.conditions(tf, fi[blk][:, None], tr, order[pos][None, :], kk[blk][:, None])
                ok &= (pos[None, :] < stop_at[blk][:, None]) & (pos[None, :] >= first_at[blk][:, None])
                hit = ok.any(axis=1)
                first = ok.argmax(axis=1)
                out[blk[hit]] = base[blk[hit]] + sval[pos[first[hit]]]
                stop_at[blk[hit]] = 0  # resolved
            open_ = open_[stop_at[open_] > end]
            start, step = end, step * 2
        return out

    def _rear_sorted(self, tr):
        """(rear options in order of their own cost or mass, those values)."""
        if getattr(self, "_rsort", None) is None:
            val = tr.cost if self.objective == "cost" else tr.mass
            order = np.argsort(val, kind="stable")
            self._rsort = (order, val[order])
        return self._rsort

    def _rear_pairs(self, tf, tr, fb, kb):
        """(block index, rear option) pairs of blocks (front option fb, tyre column kb) that meet the
        cheap necessary conditions and, for cost and mass, whose value can still enter the pool (and,
        with time bounds, whose window of rear positions is not proved too slow)."""
        nr = tr.options.shape[0]
        if self.objective in ("cost", "mass"):
            order, sval = self._rear_sorted(tr)
            kth = self.kth()
            base = self._own_value(tf, fb, tr, np.full(fb.size, order[0]), kb) - sval[0]
            first = np.searchsorted(sval, self.floor - base, side="left")  # below the floor: known infeasible
            cnt = np.maximum(np.searchsorted(sval, kth + tie_tolerance(kth) - base, side="right") - first, 0)
        else:
            order, first, cnt = np.arange(nr), np.zeros(fb.size, dtype=np.int64), np.full(fb.size, nr)
        owner = np.arange(fb.size)  # the block of each row (first, cnt)
        if self.time is not None:  # windows of rear positions proved too slow with the front option: dropped
            owner, first, cnt = self.time.open_windows(fb, kb, first, cnt, self.req.accel_time_s)
        bis, ris = [], []
        b0 = 0
        csum = np.concatenate([[0], np.cumsum(cnt)])
        while b0 < owner.size:
            b1 = max(b0 + 1, int(np.searchsorted(csum, csum[b0] + PAIR_CHUNK, side="right")) - 1)
            b1 = min(b1, owner.size)
            c = cnt[b0:b1]
            total = int(c.sum())
            if total:
                bi = owner[np.repeat(np.arange(b0, b1), c)]
                pos = np.arange(total) - np.repeat(csum[b0:b1] - csum[b0], c) + np.repeat(first[b0:b1], c)
                ri = order[pos]
                ok = self.conditions(tf, fb[bi], tr, ri, kb[bi])
                bis.append(bi[ok])
                ris.append(ri[ok])
            b0 = b1
        if not bis:
            return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
        return np.concatenate(bis), np.concatenate(ris)


    def _evaluate_blocks(self, tf, tr, fb: np.ndarray, kb: np.ndarray):
        """Evaluate the designs of several (front option, tyre) blocks together, best bound first."""
        bi, ri = self._rear_pairs(tf, tr, fb, kb)
        if bi.size == 0:
            return
        fi, kk = fb[bi], kb[bi]
        keys = self._keys(tf, fi, tr, ri, kk)
        if self.objective == "accel_time":
            key_val = self._point_bounds(keys)
        elif self.objective == "energy":
            key_val = self._design_energy_lb(keys)
        else:
            key_val = self._own_value(tf, fi, tr, ri, kk)
        self._evaluate(keys, key_val)
