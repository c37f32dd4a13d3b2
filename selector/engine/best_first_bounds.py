"""Certified per-motor and per-design bounds of the single-axle search (`best_first.SingleAxleSearch`
inherits them): objective values, energy and battery bounds, the L hull, time bounds per cell,
sub-cell and design, the refinement of a motor's bound.
"""

from __future__ import annotations

import numpy as np

from selector.engine import bounds as B
from selector.engine.evaluate import tie_tolerance
from selector.requirements import REL_TOL
from selector.units import kmh_to_mps

CELLS = 32
"""L cells per motor for the refined acceleration bound [-]."""
SUBCELLS = 8
"""Sub-cells per cell when a motor's block is evaluated [-]."""
HULL_MASK_MAX = 1 << 17
"""Motors x single-speed pairs up to which `hull` uses one mask instead of the rating classes [-]."""
COARSE_NODES = 8
"""Speed nodes of the coarse first pass of the per-design and per-cell time bounds [-]."""
COARSE_MIN = 256
"""... taken when more than this many designs (cells) are bounded against a finite cut-off [-]."""


class BlockBounds:
    """Bounds of `SingleAxleSearch` (a mixin: every method reads the search's own state)."""

    # ------------------------------------------------------------------ bounds
    def value_bounds(self, attr: str | None = None) -> np.ndarray:
        """Cost or mass (``attr``; default: the objective's) lower bound per motor (inf: no admissible pair)."""
        n = self.motors.size
        m_pos = np.arange(n)
        attr = attr or ("cost" if self.objective in ("cost", "accel_time") else "mass")
        best = np.full(n, np.inf)
        for c, a, b in self._single_ranges(m_pos):
            best = np.minimum(best, getattr(c, attr).query(a, b))
        mo = self._multi_ok(m_pos)
        if mo.size:
            vals = getattr(self.pairs, attr)[self.pairs.multi_pairs]
            best = np.minimum(best, np.where(mo, vals[None, :], np.inf).min(axis=1))
        if attr == "cost":
            return self.parts.motors.cost[self.motors] + best
        return self.parts.problem.vehicle.mass_kg + self.parts.motors.mass_kg[self.motors] + best

    def _consumption_bound(self, st, mi, l_a, l_b, crr, eta_max):
        """m -> (consumption lower bound, slope) of single-unit designs with motors ``mi`` (see
        `selector.engine.energy.consumption_lower_bound`): the motors' spin and copper coefficients
        (0 for map-based motors) and the largest reflected inertia when braking."""
        from selector.engine import energy as E

        mo, ty = self.parts.motors, self.parts.tyres
        v = self.parts.problem.vehicle
        mi = np.asarray(mi, dtype=np.int64)
        poly = mo.map_index[mi] < 0
        k_i, k_w, c0, k_c = (np.where(poly, np.nan_to_num(getattr(mo, name)[mi]), 0.0)
                             for name in ("loss_iron", "loss_windage", "loss_constant", "loss_copper"))
        brake = mo.rotor_inertia_kgm2[mi] * np.exp(2.0 * np.asarray(l_b, dtype=float)) \
            + v.tyre_count * v.wheel_inertia_kgm2 / float(ty.radius_m.min()) ** 2

        def c_lb(m):
            return E.consumption_lower_bound(st, m, crr, l_a, eta_max, k_i, k_w, c0, brake, k_c, l_b)

        return c_lb

    def energy_bounds(self, mi, l_a, l_b, mass_kg, crr, eta_max) -> np.ndarray:
        """Certified lower bound of the energy objective (Wh/km at the sized battery) of single-unit
        designs with motors ``mi``, gears in [l_a, l_b], least mass, rolling resistance and best gear
        efficiency given (broadcast), see `selector.engine.energy.consumption_lower_bound`."""
        from selector.engine import energy as E

        st = E.setup(self.parts)
        v = self.parts.problem.vehicle
        c_lb = self._consumption_bound(st, mi, l_a, l_b, crr, eta_max)

        m = np.asarray(mass_kg, dtype=float)
        if st.range_km is None:
            return c_lb(m)[0]
        return E.battery_lower_bound(st, c_lb, m, E.MAX_BATTERY_FACTOR * v.mass_kg)[1]

    def battery_bounds(self, mi, l_a, l_b, mass_kg, crr, eta_max):
        """(least battery mass [kg], least battery cost [currency]) of single-unit designs of blocks
        (as `energy_bounds`); zeros without a range requirement."""
        from selector.engine import energy as E

        st = E.setup(self.parts)
        shape = np.broadcast_shapes(np.shape(mi), np.shape(l_a), np.shape(mass_kg))
        if st is None or st.range_km is None:
            return np.zeros(shape), np.zeros(shape)
        v = self.parts.problem.vehicle
        c_lb = self._consumption_bound(st, mi, l_a, l_b, crr, eta_max)

        mb, _ = E.battery_lower_bound(st, c_lb, np.asarray(mass_kg, dtype=float), E.MAX_BATTERY_FACTOR * v.mass_kg,
                                      rounds=2, consumption=False)
        return mb, mb * st.specific_energy_wh_per_kg / 1000.0 * st.cost_per_kwh

    def hull(self, m_pos):
        """L hull [lo, hi] of each motor's admissible pairs (lo > hi: none)."""
        lo = np.full(m_pos.size, np.inf)
        hi = np.full(m_pos.size, -np.inf)
        # small studies: the exact hull from one mask; else the hull of the motor's occupied L cells
        # clipped to its window (`_cell_occupancy`: it holds every admissible single-speed pair's L)
        dense = self._dense_single(m_pos, 1) if m_pos.size * self.pairs.single_pairs.size <= HULL_MASK_MAX else None
        if dense is not None:
            ok, sp = dense
            l1 = self.pairs.l_first[sp][None, :]
            lo = np.where(ok, l1, np.inf).min(axis=1, initial=np.inf)
            hi = np.where(ok, l1, -np.inf).max(axis=1, initial=-np.inf)
        elif self.pairs.single_pairs.size:
            occupied, _, lo_c, hi_c = self._cell_occupancy(m_pos)
            lo = np.where(occupied, lo_c, np.inf).min(axis=1)
            hi = np.where(occupied, hi_c, -np.inf).max(axis=1)
        mo = self._multi_ok(m_pos)
        if mo.size:
            mp = self.pairs.multi_pairs
            lo = np.minimum(lo, np.where(mo, self.pairs.l_tall[mp][None, :], np.inf).min(axis=1))
            hi = np.maximum(hi, np.where(mo, self.pairs.l_first[mp][None, :], -np.inf).max(axis=1))
        return lo, hi

    def time_bound(self, m_pos, l_a, l_b) -> np.ndarray:
        """Certified acceleration-time bound of motors m_pos over L hulls [l_a, l_b] (broadcast) [s]."""
        return B.motor_time_bound_s(self.parts, self.use, self.motors[m_pos], l_a, l_b, self.target)

    def closed_form_time(self, motors) -> np.ndarray:
        """`bounds.motor_closed_form_time_s` of motor rows ``motors`` with every gear L at most the
        largest any admissible design can have [s]: a single-speed pair's one gear lies below the
        single-speed pairs' largest L and must turn at most at the motor's maximum speed at the
        required top speed and at the acceleration target (L <= ln(w_max / V)); a gearbox pair's
        gears lie below the largest ln G of the gearbox reducers less the least ln r of their tyres."""
        p = self.pairs
        mo = self.parts.motors
        if self._l_caps is None:
            sp, mp = p.single_pairs, p.multi_pairs
            v = max(self.target, 0.0 if self.req.top_speed_kmh is None else kmh_to_mps(self.req.top_speed_kmh))
            l_multi = -np.inf
            if mp.size:
                l_multi = float(np.nanmax(p.log_ratios[np.unique(p.j[mp])]) - p.log_radius[np.unique(p.k[mp])].min())
            self._l_caps = (float(p.l_first[sp].max()) if sp.size else -np.inf, l_multi, v)
        l_single, l_multi, v = self._l_caps
        motors = np.asarray(motors, dtype=np.int64)
        with np.errstate(divide="ignore"):
            l_gear = np.log(mo.max_speed_rad_s[motors] * (1 + 4 * REL_TOL) / v)
        l_hi = np.maximum(np.minimum(l_single, l_gear), l_multi)
        return B.motor_closed_form_time_s(self.parts, self.use, motors, l_hi, self.target)

    def gear_time_bound(self, m_pos, gears_l, nodes: int = B.RIEMANN_NODES) -> np.ndarray:
        """Certified acceleration-time bound of motors m_pos with gear sets ``gears_l`` ((..., G), NaN
        beyond the gear count; broadcast), gear by gear (`bounds.optimistic_time_s`) [s]."""
        return B.motor_time_bound_s(self.parts, self.use, self.motors[m_pos], 0.0, 0.0, self.target,
                                    gears_l=gears_l, nodes=nodes)

    def least_gear_time_bound(self, row, m_pos, gears_l, cap) -> np.ndarray:
        """Per row r: the lesser of ``cap[r]`` and the least `gear_time_bound` of the entries with
        ``row == r`` (motor positions ``m_pos``, gear sets ``gears_l``) [s].

        The same values as bounding every entry, with the fine bound on few of them: each entry's
        bound on `COARSE_NODES` nodes first (a coarser partition of the same graded nodes, so never
        above the fine bound; compared with a 1e-12 relative margin for rounding); entries whose coarse
        bound is not below their row's cap cannot lower it; of the others, the fine bound of each
        row's entry with the least coarse bound, then of the entries whose coarse bound is below the
        row's least so far (the rest cannot be less).
        """
        best = np.array(cap, dtype=float)
        if row.size == 0:
            return best
        coarse = self.gear_time_bound(m_pos, gears_l, nodes=COARSE_NODES) * (1.0 - 1e-12)
        live = np.nonzero(coarse < best[row])[0]
        if live.size == 0:
            return best
        order = live[np.lexsort((coarse[live], row[live]))]
        first = order[np.r_[True, row[order][1:] != row[order][:-1]]]  # per row, its least coarse bound
        np.minimum.at(best, row[first], self.gear_time_bound(m_pos[first], gears_l[first]))
        rest = coarse < best[row]
        rest[first] = False
        if rest.any():
            np.minimum.at(best, row[rest], self.gear_time_bound(m_pos[rest], gears_l[rest]))
        return best

    def cell_edges(self, cells: int = CELLS):
        lo, hi = self.l_range
        return np.linspace(lo - 1e-9, hi + 1e-9, cells + 1)

    def _cell_table(self):
        """(edges (C + 1,), class ratings (R, 2), per (rating class, cell) (R, C): any pair, least pair
        mass, least rolling resistance, least -efficiency) of the single-speed pairs, built once per search.

        A pair belongs to the cell holding its L (a pair on an edge to one of the two cells, whose
        closed intervals both hold it); rating classes: reducers of equal rated torque and speed.
        """
        if self._cells is None:
            p, re = self.pairs, self.parts.reducers
            edges = self.cell_edges()
            sp = p.single_pairs
            cell = np.clip(np.searchsorted(edges, p.l_first[sp], side="right") - 1, 0, edges.size - 2)
            # rating classes of the reducers (few rows), then each pair's
            uniq, cls = np.unique(np.stack([re.max_torque_nm, re.max_speed_rad_s], axis=1), axis=0,
                                  return_inverse=True)
            flat = np.asarray(cls).ravel()[p.j[sp]] * (edges.size - 1) + cell
            shape = (uniq.shape[0], edges.size - 1)
            tables = []
            for vals in (p.mass[sp], p.crr[sp], -p.eta[sp]):
                t = np.full(shape[0] * shape[1], np.inf)
                np.minimum.at(t, flat, vals)
                tables.append(t.reshape(shape))
            any_pair = np.zeros(shape[0] * shape[1], dtype=bool)
            any_pair[flat] = True
            self._cells = (edges, uniq, any_pair.reshape(shape), *tables)
        return self._cells

    def _cell_occupancy(self, m_pos):
        """(occupied (m, C): the cell holds a pair rated for the motor and meets the motor's single-speed
        window; compatible rating classes (m, R); each cell's L interval clipped to the window (m, C)
        lo, hi) of motors ``m_pos`` (`_cell_table`)."""
        edges, ratings, any_pair = self._cell_table()[:3]
        mo = self.parts.motors
        mi = self.motors[m_pos]
        tol = 1 + 2 * REL_TOL
        comp = (mo.torque_nm[mi][:, None] <= ratings[None, :, 0] * tol) \
            & (mo.max_speed_rad_s[mi][:, None] <= ratings[None, :, 1] * tol)
        lo = np.maximum(self.win_speed[0][m_pos], self.win_first[0][m_pos])[:, None]
        hi = np.minimum(self.win_speed[1][m_pos], self.win_first[1][m_pos])[:, None]
        lo_c, hi_c = np.maximum(edges[None, :-1], lo), np.minimum(edges[None, 1:], hi)
        occupied = (lo_c <= hi_c) & (comp[:, :, None] & any_pair[None, :, :]).any(axis=1)
        return occupied, comp, lo_c, hi_c

    def cell_bounds(self, m_pos, what: str = "time") -> np.ndarray:
        """Certified time (``what`` "energy": energy) bound of each motor's single-speed designs in each
        of the `CELLS` L cells, (m, CELLS); inf for cells holding none of them.

        A motor's designs in a cell have their L in the cell clipped to the motor's window (the
        single-speed window `_single_ranges` uses) and their pair among the pairs of the cell whose
        reducer is rated for the motor: the bound takes that L interval, and the lightest pair mass,
        the best efficiency and the least rolling resistance of those pairs (per rating class and
        cell, `_cell_table`: a superset of the motor's admissible pairs there, so the extremes are no
        worse than theirs).
        """
        _, _, _, t_mass, t_crr, t_eta = self._cell_table()
        occupied, comp, lo_c, hi_c = self._cell_occupancy(m_pos)
        c3 = comp[:, :, None]
        mass = np.where(c3, t_mass[None], np.inf).min(axis=1, initial=np.inf)
        crr = np.where(c3, t_crr[None], np.inf).min(axis=1, initial=np.inf)
        eta = np.where(c3, t_eta[None], np.inf).min(axis=1, initial=np.inf)
        shape = occupied.shape
        out = np.full(shape, np.inf)
        if occupied.any():
            r, col = np.nonzero(occupied)
            mi = self.motors[m_pos[r]]
            m_lo = self.parts.problem.vehicle.mass_kg + self.parts.motors.mass_kg[mi] + mass[r, col]
            if what == "energy":
                out[r, col] = self.energy_bounds(mi, lo_c[r, col], hi_c[r, col], m_lo, crr[r, col], -eta[r, col])
            else:
                out[r, col] = B.motor_time_bound_s(self.parts, self.use, mi, lo_c[r, col], hi_c[r, col], self.target,
                                                   mass_min_kg=m_lo, eta_max=-eta[r, col], crr_min=crr[r, col])
        return out

    def _subcell_bounds(self, pos: int, single: np.ndarray, sub: np.ndarray, used: np.ndarray, fine) -> np.ndarray:
        """Certified time bound of motor ``pos``'s single-speed candidate pairs ``single`` in each
        sub-cell ``used`` (``sub``: each pair's sub-cell, edges ``fine``) [s].

        The extremes (least pair mass and rolling resistance, best efficiency) are taken directly
        over the candidates in each sub-cell (one pass over the block's own pairs, no range
        queries); a sub-cell's bound holds for every design whose pair lies in it, since its L lies
        in [fine[s], fine[s + 1]] and its values are no better than those extremes.
        """
        p = self.pairs
        n = fine.size - 1
        mass = np.full(n, np.inf)
        crr = np.full(n, np.inf)
        eta = np.full(n, -np.inf)
        np.minimum.at(mass, sub, p.mass[single])
        np.minimum.at(crr, sub, p.crr[single])
        np.maximum.at(eta, sub, p.eta[single])
        i = int(self.motors[pos])
        m_lo = self.parts.problem.vehicle.mass_kg + self.parts.motors.mass_kg[i] + mass[used]
        return B.motor_time_bound_s(self.parts, self.use, np.full(used.size, i), fine[used], fine[used + 1],
                                    self.target, mass_min_kg=m_lo, eta_max=eta[used], crr_min=crr[used])

    def _design_time_bounds(self, motors: np.ndarray, pairs: np.ndarray, cut: float = np.inf) -> np.ndarray:
        """Certified time bound of single designs (motor rows, pair positions) [s]: `optimistic_time_s`
        at the design's own gear hull (one L for a single-speed pair; a multi-speed pair also gear by
        gear, the larger of the two bounds), mass (as both extremes), static driven-axle share, best
        gear efficiency and rolling resistance (without [energy], where a battery adds mass, the mass
        and share extremes stay the motor's).

        ``cut`` [s] (finite: the caller drops designs whose bound exceeds it): on more than
        `COARSE_MIN` designs the bound is first taken on `COARSE_NODES` speed nodes (a left Riemann
        sum on a coarser partition, also a certified bound, about a sixth of the work); designs
        whose coarse bound already exceeds ``cut`` keep it, the rest get the fine one.
        """
        if np.isfinite(cut) and pairs.size > COARSE_MIN:
            out = self._design_time_bounds_at(motors, pairs, COARSE_NODES)
            fine = np.nonzero(out <= cut)[0]
            if fine.size:
                out[fine] = self._design_time_bounds_at(motors[fine], pairs[fine], B.RIEMANN_NODES)
            return out
        return self._design_time_bounds_at(motors, pairs, B.RIEMANN_NODES)

    def _design_time_bounds_at(self, motors: np.ndarray, pairs: np.ndarray, nodes: int) -> np.ndarray:
        """`_design_time_bounds` on ``nodes`` speed nodes [s]."""
        p, parts = self.pairs, self.parts
        m_motor = parts.motors.mass_kg[motors]
        mass = parts.problem.vehicle.mass_kg + m_motor + p.mass[pairs]
        if parts.problem.energy is not None:  # a battery adds mass: keep the motor-level extremes there
            kw = {"mass_min_kg": mass, "eta_max": p.eta[pairs], "crr_min": p.crr[pairs]}
        else:
            m_red = parts.reducers.mass_kg[p.j[pairs]]
            m_tyre = parts.tyres.mass_kg[p.k[pairs]]
            share = B.max_driven_share(parts, m_motor, (m_red,), (m_tyre,))
            kw = {"mass_min_kg": mass, "eta_max": p.eta[pairs], "crr_min": p.crr[pairs], "mass_max_kg": mass,
                  "driven_share_max": share}
        out = B.motor_time_bound_s(parts, self.use, motors, p.l_tall[pairs], p.l_first[pairs], self.target,
                                   nodes=nodes, **kw)
        multi = np.nonzero(p.multi[pairs])[0]
        if multi.size:  # a multi-speed pair: gear by gear (tighter than its hull; both are bounds)
            kw_m = {key: np.asarray(val)[multi] for key, val in kw.items()}
            t_g = B.motor_time_bound_s(parts, self.use, motors[multi], 0.0, 0.0, self.target, nodes=nodes,
                                       gears_l=p.gear_l[pairs[multi]], **kw_m)
            out[multi] = np.maximum(out[multi], t_g)
        return out

    def refine(self, m_pos) -> tuple[np.ndarray, np.ndarray]:
        """Per motor: certified time bounds of its admissible designs, per L cell and for multi-speed pairs.

        Returns (cell_lb (m, CELLS): bound over the single-speed pairs in each cell, inf for cells
        without admissible pairs; multi_lb (m,): the lesser of the least cell bound and the least bound
        over its admissible multi-speed pairs, each gear by gear with the motor's extremes; inf without
        such pairs). A cell or
        pair whose bound exceeds accel_time_s holds no feasible design.
        """
        t = self.cell_bounds(m_pos)
        multi = np.full(m_pos.size, np.inf)
        mo = self._multi_ok(m_pos)
        if mo.size and mo.any():
            # the bound uses the motor's extremes, so pairs with the same gear set share it: one
            # bound per (motor, distinct admissible gear set)
            g = self.pairs.gear_l[self.pairs.multi_pairs]
            g = np.where(np.isnan(g), g[:, :1], g)  # a missing gear repeats the first, as in the bound
            uniq, inv = np.unique(g, axis=0, return_inverse=True)
            adm = np.zeros((m_pos.size, uniq.shape[0]), dtype=bool)
            r, c = np.nonzero(mo)
            adm[r, inv.ravel()[c]] = True
            r, u = np.nonzero(adm)
            # (only the lesser of the two bounds counts: capped at the least cell bound)
            multi = self.least_gear_time_bound(r, m_pos[r], uniq[u], t.min(axis=1))
        return t, multi

    def _cell_battery(self, pos: int, cand: np.ndarray, what: str) -> np.ndarray:
        """Battery cost or mass lower bound of each candidate pair, from the bound of its L cell (cell
        least pair mass, rolling resistance and best efficiency by range-minimum queries)."""
        p = self.pairs
        i = int(self.motors[pos])
        edges = self.cell_edges(CELLS * SUBCELLS)
        cell = np.clip(np.searchsorted(edges, p.l_first[cand], side="right") - 1, 0, edges.size - 2)
        used = np.unique(cell)
        lo_c, hi_c = edges[used], edges[used + 1]
        mass = np.full(used.size, np.inf)
        crr = np.full(used.size, np.inf)
        eta = np.full(used.size, np.inf)
        for c, a, b in self._single_ranges(np.array([pos])):
            ia = np.maximum(np.searchsorted(c.l_sorted, lo_c, side="left"), a[0])
            ib = np.minimum(np.searchsorted(c.l_sorted, hi_c, side="right"), b[0])
            has = ib > ia
            if has.any():
                mass = np.minimum(mass, c.mass.query(ia, np.where(has, ib, ia)))
                crr = np.minimum(crr, c.crr.query(ia, np.where(has, ib, ia)))
                eta = np.minimum(eta, c.neg_eta.query(ia, np.where(has, ib, ia)))
        val = np.zeros(used.size)
        ok = np.isfinite(mass)
        if ok.any():
            m_lo = self.parts.problem.vehicle.mass_kg + self.parts.motors.mass_kg[i] + mass[ok]
            if what == "energy":
                val[ok] = self.energy_bounds(np.full(int(ok.sum()), i), lo_c[ok], hi_c[ok], m_lo, crr[ok], -eta[ok])
            else:
                mb, mc = self.battery_bounds(np.full(int(ok.sum()), i), lo_c[ok], hi_c[ok], m_lo, crr[ok], -eta[ok])
                val[ok] = mc if what == "cost" else mb
        out = val[np.searchsorted(used, cell)]
        multi = p.multi[cand]
        if multi.any():  # a multi-speed pair: the bound over its gear hull
            mc_ = np.nonzero(multi)[0]
            mass_m = self.parts.problem.vehicle.mass_kg + self.parts.motors.mass_kg[i] + p.mass[cand[mc_]]
            args = (np.full(mc_.size, i), p.l_tall[cand[mc_]], p.l_first[cand[mc_]], mass_m, p.crr[cand[mc_]],
                    p.eta[cand[mc_]])
            if what == "energy":
                out[mc_] = self.energy_bounds(*args)
            else:  # only pairs whose own value can still count need the battery (0 is a bound for the others)
                own = self.parts.motors.cost[i] + p.cost[cand[mc_]] if what == "cost" else mass_m
                kth = self.kth()
                need = np.nonzero(own <= kth + tie_tolerance(kth))[0]
                out[mc_] = 0.0
                if need.size:
                    mb, mc = self.battery_bounds(*(a[need] for a in args))
                    out[mc_[need]] = mc if what == "cost" else mb
        return np.where(np.isfinite(out), out, np.inf)
