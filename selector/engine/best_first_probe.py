"""The sum-order probe of the single-axle search (`best_first.SingleAxleSearch` inherits it): cost and mass
objectives evaluated in increasing objective order until a proof or a hand-over to the block search.
"""

from __future__ import annotations

import numpy as np

from selector.engine import bounds as B
from selector.engine.evaluate import order_best, screen, tie_tolerance
from selector.engine.pair_table import multi_in_windows
from selector.engine.sum_order import SumOrderWalk

PROBE_FIRST_BATCH = 512
"""Designs the sum-order probe takes for its first exact screen (later batches double) [-]: one
`evaluate.screen` call costs about as much as a few hundred designs in it (measured)."""
PROBE_COARSE_NODES = 8
"""Speed nodes of the probe's first, coarse time screen of motors (`bounds.optimistic_time_s`) [-]."""
PROBE_COARSE_MIN = 256
"""... applied to chunks of more motors than this (below, its fixed cost outweighs what it saves) [-]."""
PROBE_CLOSED_FORM_MIN = 64
"""The closed-form time screen of motors is applied to chunks of more motors than this [-]."""
PROBE_CHUNK_FIRST = 1024
"""Motors prepared in the walk's first chunk (later chunks double) [-]: with the closed-form time
screen first, preparing a motor costs far less than the fixed costs of a call (measured: 10,000
near-variant motor rows, where the walk reaches about 3,000)."""
PROBE_CHUNK_MAX = 4096
"""Motors the probe prepares at once, at most (a larger cap overshoots the motors the walk
reaches, a smaller one pays more fixed costs per call) [-]."""
PROBE_DESIGNS = 16384
"""Designs the sum-order probe of cost and mass studies evaluates at most before handing over [-]."""


class SumOrderProbe:
    """The probe of `SingleAxleSearch` (a mixin: it reads and updates the search's own state)."""

    # ------------------------------------------------------------------ the sum-order probe
    # Long on purpose: one walk whose state (prepared motor chunks and their windows, batch, pool, proof
    # value) every step reads and updates; split into methods it would pass a dozen locals back and forth.
    def sum_order_probe(self) -> str:
        """Cost and mass objectives (no [energy]): evaluate designs in increasing objective order.

        The objective is a sum of a motor value and a pair value (reducer + tyre_count x tyre), so a
        walk over (motor rank, pair rank) into both lists sorted by value takes designs in bands of
        increasing objective value (`sum_order.SumOrderWalk`, vectorised; the band of the first
        batch holds about `PROBE_FIRST_BATCH` designs, later ones double). Taken designs whose pair
        is outside the motor's requirement windows or whose reducer is not rated for the motor fail a
        necessary condition; the rest go to `evaluate.screen` one band at a time. When the least
        value not taken (`SumOrderWalk.next_value`, from the actual sums) exceeds the ``count``-th
        best feasible value beyond the tie tolerance (or no design is left), every design not
        evaluated is provably worse or infeasible: a complete proof and the pool is set ("proved").
        Otherwise, after `PROBE_DESIGNS` designs, it hands over to the block search ("handover",
        keeping its best design when ``count`` is 1, where a design seen twice does no harm). At the
        deadline it stops ("time_limit") with the least value not taken as the proved bound of every
        design not evaluated (``self.probe_bound``).

        Motors are prepared lazily, in chunks of growing size in the walk's motor order, only as far
        as the walk reaches (the set-up over all motors would dominate when the optimum sits among
        the first designs in objective order): `motor_screen`, with ``accel_time_s`` stated the
        closed-form time bound (`BlockBounds.closed_form_time`, on chunks of more than
        `PROBE_CLOSED_FORM_MIN` motors), the requirement windows (a motor
        stays only with an admissible single-speed L or an admissible multi-speed pair, as
        `_multi_ok`; with ``accel_time_s`` stated, the least of the certified time bounds over its
        single-speed window and over the gear hull of its admissible multi-speed pairs must meet
        it), and equivalent motors: a motor is skipped when ``count`` motors equal to it on
        every attribute the study reads (`bounds.EQUIVALENCE_COLUMNS`) came earlier in the walk
        with no higher cost (when cost matters). Each of those beats it or ties and precedes it in
        part-id order on every design (same feasibility; the walk is in (value, part id) order, and
        equal motors have equal mass), so it is in no list of ``count`` best designs.
        """
        parts, p = self.parts, self.pairs
        v = parts.problem.vehicle
        self.probe_bound = None
        cand = self.allowed_motors()
        if cand.size == 0 or p.j.size == 0:
            return "proved"
        if self.objective == "cost":
            c_val, p_val = parts.motors.cost[cand], p.cost
        else:
            c_val, p_val = v.mass_kg + parts.motors.mass_kg[cand], p.mass
        m_ord = np.lexsort((cand, c_val))
        cand = cand[m_ord]
        p_ord = np.argsort(p_val, kind="stable")  # pairs are stored in (reducer, tyre) order: ties keep it
        m_sorted, p_sorted = c_val[m_ord], p_val[p_ord]
        n_m = cand.size
        valid = np.zeros(n_m, dtype=bool)
        lo_r = np.full(n_m, np.inf)
        hi_r = np.full(n_m, -np.inf)
        win = np.empty((6, n_m))  # first-gear, top-speed, acceleration-target windows lo, hi (multi-speed pairs)
        seen: dict[bytes, list] = {}
        state = {"prepared": 0, "chunk": PROBE_CHUNK_FIRST}
        mp = p.multi_pairs
        limit_t = self.time_limit_s if np.isfinite(self.time_limit_s) else None

        def prepare() -> int:
            """Prepare the next chunk of motors (filling ``valid`` and their windows); returns how many
            motors are prepared so far (`SumOrderWalk`'s ``prepare``)."""
            a0 = state["prepared"]
            a1 = min(n_m, a0 + state["chunk"])
            state["prepared"], state["chunk"] = a1, min(2 * state["chunk"], PROBE_CHUNK_MAX)
            ok = self.motor_screen(cand[a0:a1])
            if self.accel and limit_t is not None and a1 - a0 > PROBE_CLOSED_FORM_MIN and ok.any():
                # the closed-form time bound first (a few operations per motor; most motors that miss
                # accel_time_s miss it there already): windows and Riemann bounds only for the rest
                k = np.nonzero(ok)[0]
                ok[k[~(self.closed_form_time(cand[a0:a1][k]) <= limit_t)]] = False
            sub = np.nonzero(ok)[0]
            if sub.size == 0:  # (valid stays False)
                return a1
            mi, ok = cand[a0:a1][sub], ok[sub]
            (ls, hs), (l1, h1), w_top, w_acc = self.windows(mi, split=True)
            lo, hi = np.maximum(ls, l1), np.minimum(hs, h1)
            # some admissible L: the single-speed window (clipped to the pairs' L range), or any
            # multi-speed pair (their gears are checked per design by `screen`)
            lo_c, hi_c = np.maximum(lo, self.l_range[0] - 1e-9), np.minimum(hi, self.l_range[1] + 1e-9)
            has_s = lo_c <= hi_c
            # multi-speed pairs the motor can use: rated, first gear in the first-gear window (gradeability
            # and launch use first gear), some gear in the speed window (as `_multi_ok`); their hull
            # [least tallest-gear L, largest first-gear L] holds every gear of them
            m_lo, m_hi = np.full(mi.size, np.inf), np.full(mi.size, -np.inf)
            if mp.size:
                mo_ok = self.use.compatible[mi][:, p.j[mp]] & multi_in_windows(p.gear_l[mp], l1, h1, w_top, w_acc)
                m_lo = np.where(mo_ok, p.l_tall[mp][None, :], np.inf).min(axis=1)
                m_hi = np.where(mo_ok, p.l_first[mp][None, :], -np.inf).max(axis=1)
            has_m = m_lo <= m_hi
            ok &= has_s | has_m
            if self.accel and limit_t is not None and ok.any():
                # motors whose certified time bound over their admissible L intervals misses
                # accel_time_s are out (the single-speed window holds every admissible single-speed
                # pair's L, the multi-speed hull every gear of every admissible multi-speed pair)
                # (a coarse Riemann sum first: also a certified bound, cheaper, and most motors that
                # miss the limit already miss it there)
                for nodes in (PROBE_COARSE_NODES, B.RIEMANN_NODES):
                    k = np.nonzero(ok)[0]
                    if k.size > (0 if nodes == B.RIEMANN_NODES else PROBE_COARSE_MIN):
                        t = np.full(k.size, np.inf)
                        for has, a_l, b_l in ((has_s, lo_c, hi_c), (has_m, m_lo, m_hi)):
                            r = np.nonzero(has[k])[0]
                            if r.size:
                                t_r = B.motor_time_bound_s(parts, self.use, mi[k[r]], a_l[k[r]], b_l[k[r]],
                                                           self.target, nodes=nodes)
                                t[r] = np.minimum(t[r], t_r)
                        ok[k[~(t <= limit_t)]] = False
            k = np.nonzero(ok)[0]
            if k.size:
                rows = B.equivalence_bits(parts, mi[k])
                costs = parts.motors.cost[mi[k]].tolist()
                for n_k, row in enumerate(rows):
                    key = row.tobytes()
                    prior = seen.setdefault(key, [])
                    own = costs[n_k]
                    better = sum(1 for c in prior if c <= own) if self.cost_matters else len(prior)
                    prior.append(own)
                    if better >= self.count:
                        ok[k[n_k]] = False
            valid[a0 + sub] = ok
            lo_r[a0 + sub], hi_r[a0 + sub] = lo, hi
            win[:, a0 + sub] = l1, h1, w_top[0], w_top[1], w_acc[0], w_acc[1]
            return a1

        walk = SumOrderWalk(m_sorted, p_sorted, valid, prepare)
        found_v, found_k = [], []
        kth = np.inf
        batch = PROBE_FIRST_BATCH
        outcome = "proved"
        while True:
            nxt = walk.next_value()
            if nxt == np.inf or not nxt <= kth + tie_tolerance(kth):  # no design left, or every one is worse
                break
            if walk.n_taken >= PROBE_DESIGNS:
                if self.count == 1 and found_v:
                    self._add(np.concatenate(found_v), np.concatenate(found_k))
                self.stats["probe"] = walk.n_taken
                return "handover"
            if walk.n_taken and self.expired():  # (after one batch: some progress in any case)
                outcome = "time_limit"
                self.probe_bound = nxt
                break
            ranks, b_r = walk.take(batch, kth + tie_tolerance(kth))
            batch = min(2 * batch, 8192)
            pair = p_ord[b_r]
            motor = cand[ranks]
            ok = self.use.compatible[motor, p.j[pair]]
            single = ~p.multi[pair]
            lf = p.l_first[pair]
            ok &= ~single | ((lf >= lo_r[ranks]) & (lf <= hi_r[ranks]))
            if not single.all():  # a multi-speed pair: first gear in the first-gear window, a gear in each speed one
                w = win[:, ranks]
                ok &= single | multi_in_windows(p.gear_l[pair], w[0], w[1], (w[2], w[3]), (w[4], w[5]), rows=True)
            if not ok.any():
                continue
            keys = parts.single_keys(motor[ok], p.j[pair[ok]], p.k[pair[ok]])
            good, obj = screen(parts, keys, objective=self.objective, keep_best=self.count)
            self.stats["evaluated"] += keys.shape[0]
            if good.any():
                found_v.append(obj[good])
                found_k.append(keys[good])
                fv = np.concatenate(found_v)
                if fv.size >= self.count:
                    fk = np.concatenate(found_k)
                    kth = float(fv[order_best(fv, fk, self.count)[-1]])
        if found_v:
            self._add(np.concatenate(found_v), np.concatenate(found_k))
        self.stats["probe"] = walk.n_taken
        self.stats["probe_motors"] = state["prepared"]
        return outcome
