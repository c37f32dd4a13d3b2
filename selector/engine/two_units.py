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
  of each axle's options, bounded by the certified Riemann bound of `TwoUnitSearch.envelope_bounds`.

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
from selector.physics.drivetrain import best_gear_force_n, top_gear_limit_mps
from selector.requirements import REL_TOL
from selector.units import G_N, kmh_to_mps

REFINE_BATCH = 512
"""Blocks whose bound is refined together [-]."""
FIRST_CHUNK = 128
"""Rear options of a block evaluated in its first chunk (later chunks double) [-]."""
NODES = 48
"""Speed nodes of the certified acceleration bound [-]."""
PAIR_CHUNK = 2_000_000
"""(block, rear option) pairs whose conditions are checked at once [-] (bounds memory)."""


CHUNK = 1 << 18
"""(option, tyre) entries whose per-tyre quantities are computed at once [-] (bounds memory)."""


class _Table:
    """Per (option, tyre) quantities of one axle's options: arrays (options, tyres), plus per option
    the wheel-torque and power bounds of the acceleration envelope (``torque0_nm``, ``power_eta_w``)."""

    def __init__(self, parts: PartTables, options: np.ndarray, tyres: np.ndarray, req, accel_target: float | None):
        mo, re, ty = parts.motors, parts.reducers, parts.tyres
        self.options = options
        mi, rj = options[:, 0], options[:, 1]
        self.cost = mo.cost[mi] + re.cost[rj]
        self.mass = mo.mass_kg[mi] + re.mass_kg[rj]
        no, nt = options.shape[0], tyres.size
        radius_t = ty.radius_m[tyres]
        own = parts.unit(mi, rj)  # per option (radius-free quantities)
        eta_g = np.where(np.isfinite(own.efficiency), own.efficiency, 0.0)
        ratio_g = np.where(np.isfinite(own.ratio), own.ratio, 0.0)
        # F_g(v) = eta_g T(w) G_g / r <= eta_g T_pk G_g / r and F_g(v) v = eta_g T(w) w <= eta_g P_pk
        self.torque0_nm = own.torque_nm * (eta_g * ratio_g).max(axis=1)
        self.power_eta_w = own.power_w * eta_g.max(axis=1)
        # gearing limit w_max r / G_top and least reflected rotor inertia min_g J eta_g G_g^2 / r^2: linear
        # in r and in 1/r^2
        self.lim = top_gear_limit_mps(own, np.ones(no))[:, None] * radius_t[None, :]
        self.j_eta_e2_min = _min_rotor_mass(own, np.ones(no))[:, None] / (radius_t * radius_t)[None, :]
        self.f0 = np.empty((no, nt))
        self.fc_top = None if req.top_speed_kmh is None else np.empty((no, nt))
        self.f_acc = None if accel_target is None else np.empty((no, nt))
        step = max(1, CHUNK // max(nt, 1))
        for s in range(0, no, step):
            rows = slice(s, min(no, s + step))
            n = rows.stop - rows.start
            unit = parts.unit(np.repeat(mi[rows], nt), np.repeat(rj[rows], nt))
            radius = np.tile(radius_t, n)
            self.f0[rows] = best_first_gear_force(unit, radius).reshape(n, nt)
            if self.fc_top is not None:
                v = np.full(n * nt, kmh_to_mps(req.top_speed_kmh))
                self.fc_top[rows] = best_gear_force_n(unit, radius, v, continuous=True).reshape(n, nt)
            if self.f_acc is not None:
                v = np.full(n * nt, accel_target)
                self.f_acc[rows] = best_gear_force_n(unit, radius, v).reshape(n, nt)


def best_first_gear_force(unit, radius) -> np.ndarray:
    """First-gear crawl force eta_1 T G_1 / r of each unit [N]."""
    from selector.physics.drivetrain import unit_force_n

    return unit_force_n(unit, radius, 0, np.zeros(unit.n))


def _min_rotor_mass(unit, radius) -> np.ndarray:
    """Least reflected rotor inertia over the unit's gears, min_g J (G_g/r)^2 eta_g [kg]."""
    from selector.physics.drivetrain import rotor_mass_kg

    best = np.full(unit.n, np.inf)
    for g in range(unit.ratio.shape[1]):
        has = unit.n_gears > g
        best = np.where(has, np.minimum(best, rotor_mass_kg(unit, radius, np.where(has, g, 0))), best)
    return np.where(np.isfinite(best), best, 0.0)


class TwoUnitSearch:
    """One exact search of a two-unit study (see the module docstring)."""

    def __init__(self, parts: PartTables, objective: str, req, allowed: dict, count: int, per_motor: int | None,
                 deadline: float | None, stats: dict):
        self.parts, self.objective, self.req = parts, objective, req
        self.count = count
        self.per_motor = per_motor
        self.deadline = deadline
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

    # ------------------------------------------------------------------ necessary conditions
    def conditions(self, tf: _Table, fi, tr: _Table, ri, kk) -> np.ndarray:
        """Cheap necessary conditions of designs (front option fi, rear option ri, tyre column kk) (broadcast)."""
        p = self.parts
        v = p.problem.vehicle
        req = self.req
        ty = p.tyres
        k = self.tyres[kk]
        n = v.tyre_count
        m = v.mass_kg + tf.mass[fi] + tr.mass[ri] + n * ty.mass_kg[k]
        ok = np.ones(np.broadcast_shapes(np.shape(fi), np.shape(ri), np.shape(kk)), dtype=bool)
        tol = 1 + 4 * REL_TOL
        for spd in self.speeds:
            ok &= (tf.lim[fi, kk] * tol >= spd) & (tr.lim[ri, kk] * tol >= spd)
        crr = ty.crr[k]
        if tf.fc_top is not None:
            vt = kmh_to_mps(req.top_speed_kmh)
            ok &= (tf.fc_top[fi, kk] + tr.fc_top[ri, kk]) * tol >= m * G_N * crr + p.q_n_s2_m2 * vt * vt
        if self.accel:
            va = self.target
            ok &= (tf.f_acc[fi, kk] + tr.f_acc[ri, kk]) * tol > m * G_N * crr + p.q_n_s2_m2 * va * va
        f0 = tf.f0[fi, kk] + tr.f0[ri, kk]
        if req.gradeability_pct is not None:
            th = np.arctan(req.gradeability_pct / 100.0)
            ok &= f0 * tol >= m * G_N * (crr * np.cos(th) + np.sin(th))
        if req.launch_accel_mps2 is not None:
            ok &= (f0 - m * G_N * crr) * tol >= req.launch_accel_mps2 * m
        if req.max_mass_kg is not None:
            ok &= m <= req.max_mass_kg * tol
        if req.budget is not None:
            ok &= tf.cost[fi] + tr.cost[ri] + n * ty.cost[k] <= req.budget * tol
        half = 0.5 * n * ty.mass_kg[k]
        rear = v.rear_axle_share * v.mass_kg + half + tr.mass[ri]
        front = (1.0 - v.rear_axle_share) * v.mass_kg + half + tf.mass[fi]
        ok &= np.maximum(rear, front) / (0.5 * n) <= ty.load_capacity_kg[k] * tol
        return ok

    # ------------------------------------------------------------------ acceleration bound
    def nodes(self):
        """Speed nodes of the certified bound, graded towards the target [m/s]."""
        s = 1.0 - (1.0 - np.arange(NODES + 1) / NODES) ** 2
        return self.target * s

    def envelope_bounds(self, kk, env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min) -> np.ndarray:
        """Certified acceleration-time bound of blocks of designs at tyre column kk [s].

        Each block holds front options whose wheel forces at the nodes are at most ``env_f`` (blocks,
        NODES + 1), masses in [mf_min, mf_max] and reflected rotor inertia at least ``jf_min``, and
        likewise rear options. The bound is the left Riemann sum of dv / a_up, a_up the least of the
        four traction combinations' upper bounds (each axle motor- or traction-limited, see
        `selector.physics.drivetrain.combination_accels`), each non-increasing in v (see `bounds`).
        """
        p = self.parts
        v = p.problem.vehicle
        env = p.problem.environment
        ty = p.tyres
        k = self.tyres[kk]
        n = v.tyre_count
        vv = self.nodes()[None, :]
        dv = np.diff(vv, axis=1)
        col = lambda a: np.asarray(a, dtype=float)[:, None]  # noqa: E731
        m_lo = v.mass_kg + mf_min + mr_min + n * ty.mass_kg[k]
        m_hi = v.mass_kg + mf_max + mr_max + n * ty.mass_kg[k]
        crr = ty.crr[k]
        f_res = col(m_lo) * G_N * col(crr) + p.q_n_s2_m2 * vv * vv
        dj = jf_min + jr_min + n * v.wheel_inertia_kgm2 / ty.radius_m[k] ** 2
        m_eff = col(m_lo + dj)
        mu = env.road_friction
        hl = v.cg_height_m / v.wheelbase_m
        half = 0.5 * n * ty.mass_kg[k]
        w_f_max = G_N * ((1.0 - v.rear_axle_share) * v.mass_kg + half + mf_max)
        w_r_max = G_N * (v.rear_axle_share * v.mass_kg + half + mr_max)
        with np.errstate(divide="ignore", invalid="ignore"):
            mm = (env_f + env_r - f_res) / m_eff
            tm = (mu * col(w_f_max) + env_r - f_res) / (m_eff + mu * col(m_lo) * hl)
            den_mt = m_eff - mu * col(m_hi) * hl
            mt = np.where(den_mt > 0, (env_f + mu * col(w_r_max) - f_res) / den_mt, np.inf)
            tt = G_N * (mu - col(crr)) - p.q_n_s2_m2 * vv * vv / col(m_hi)
        a_up = np.minimum(np.minimum(mm, tm), np.minimum(mt, tt))
        reach = (a_up > 0).all(axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            t = (dv / a_up[:, :-1]).sum(axis=1)
        return np.where(reach, t, np.inf)

    # ------------------------------------------------------------------ search
    def run(self):
        """Returns (status, designs, bound) with status "optimal" | "infeasible" | "time_limit"."""
        if self.tyres.size == 0 or self.options["front"].shape[0] == 0 or self.options["rear"].shape[0] == 0:
            return "infeasible", [], None
        tr = _Table(self.parts, self.options["rear"], self.tyres, self.req, self.target)
        same_options = self.same or np.array_equal(self.options["front"], self.options["rear"])
        tf = tr if same_options else _Table(self.parts, self.options["front"], self.tyres, self.req, self.target)
        if self.same:
            return self._run_same(tf)
        return self._run_pairs(tf, tr)

    def _finish(self, status, heap_min):
        bound = None
        if status == "time_limit":
            best = self.pool_vals.min() if self.pool_vals.size else np.inf
            lo = min(heap_min, best)
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
        bound exceeds the pool's count-th best are skipped without the exact evaluation).
        """
        order = np.lexsort(tuple(keys[:, c] for c in range(4, -1, -1)) + (key_val,))
        keys, key_val = keys[order], key_val[order]
        start, size = 0, FIRST_CHUNK
        while start < keys.shape[0]:
            kth = self.kth()
            if key_val[start] > kth + tie_tolerance(kth):
                break
            stop = min(keys.shape[0], start + size)
            chunk = keys[start:stop]
            chunk = chunk[key_val[start:stop] <= kth + tie_tolerance(kth)]
            if fine is not None and chunk.shape[0]:
                fb = fine(chunk)
                chunk = chunk[fb <= kth + tie_tolerance(kth)]
                if chunk.shape[0]:
                    chunk = chunk[np.lexsort(tuple(chunk[:, c] for c in range(4, -1, -1))
                                             + (fb[fb <= kth + tie_tolerance(kth)],))]
            if chunk.shape[0]:
                cutoff = kth * (1 + 4 * REL_TOL) if self.objective == "accel_time" and np.isfinite(kth) else None
                ok, obj = screen(self.parts, chunk, objective=self.objective, accel_cutoff=cutoff)
                self.stats["evaluated"] += chunk.shape[0]
                self._add(obj[ok], chunk[ok])
            start, size = stop, size * 2

    def _design_energy_lb(self, keys) -> np.ndarray:
        """Per-design certified lower bound of the energy objective (both units exact, no copper loss)."""
        from selector.engine import energy as E

        p = self.parts
        st = E.setup(p)
        v = p.problem.vehicle
        mo, re, ty = p.motors, p.reducers, p.tyres
        k = keys[:, TY]
        ki = kw = c0 = brake = 0.0
        l_a = np.full(keys.shape[0], np.inf)
        for m_col, r_col in ((FM, FR), (RM, RR)):
            mi, rj = keys[:, m_col], keys[:, r_col]
            poly = mo.map_index[mi] < 0
            ki = ki + np.where(poly, np.nan_to_num(mo.loss_iron[mi]), 0.0)
            kw = kw + np.where(poly, np.nan_to_num(mo.loss_windage[mi]), 0.0)
            c0 = c0 + np.where(poly, np.nan_to_num(mo.loss_constant[mi]), 0.0)
            l1 = np.log(re.ratio[rj]) - np.log(ty.radius_m[k])
            l_a = np.minimum(l_a, np.log(re.tallest_ratio[rj]) - np.log(ty.radius_m[k]))
            brake = brake + mo.rotor_inertia_kgm2[mi] * np.exp(2 * l1)
        brake = brake + v.tyre_count * v.wheel_inertia_kgm2 / ty.radius_m[k] ** 2
        mass = p.mass_kg(keys)

        def c_lb(m):
            return E.consumption_lower_bound(st, m, ty.crr[k], l_a, 1.0, ki, kw, c0, brake)

        if st.range_km is None:
            return c_lb(mass)[0]
        return E.battery_lower_bound(st, c_lb, mass, E.MAX_BATTERY_FACTOR * v.mass_kg)[1]

    def _own_value(self, tf, fi, tr, ri, kk) -> np.ndarray:
        p = self.parts
        n = p.problem.vehicle.tyre_count
        k = self.tyres[kk]
        if self.objective == "cost":
            return tf.cost[fi] + tr.cost[ri] + n * p.tyres.cost[k]
        return p.problem.vehicle.mass_kg + tf.mass[fi] + tr.mass[ri] + n * p.tyres.mass_kg[k]

    def _point_bounds(self, keys) -> np.ndarray:
        """Per-design proved lower bound of the acceleration time (the exact-physics left Riemann sum)."""
        from selector.physics.accel_run import time_bracket

        axles, body = self.parts.design(keys)
        lo, _ = time_bracket(axles, body, self.target)
        return lo

    def _point_bounds_staged(self, keys) -> np.ndarray:
        """`_point_bounds`, first on a coarse 12-node partition (also a proved bound) and on the finer one
        only for the designs whose coarse bound does not already exceed the pool's count-th best."""
        from selector.physics.accel_run import time_bracket

        axles, body = self.parts.design(keys)
        lo, _ = time_bracket(axles, body, self.target, nodes=12)
        kth = self.kth()
        rows = np.nonzero(lo <= kth + tie_tolerance(kth))[0]
        if rows.size:
            from selector.physics.drivetrain import take_axles, take_fields

            lo[rows], _ = time_bracket(take_axles(axles, rows), take_fields(body, rows), self.target)
        return lo

    def _run_same(self, t: _Table):
        """same_unit: designs (option, option, tyre), searched directly in order of their bound."""
        no, nt = t.options.shape[0], self.tyres.size
        oi, kk = (a.ravel() for a in np.meshgrid(np.arange(no), np.arange(nt), indexing="ij"))
        ok = self.conditions(t, oi, t, oi, kk)
        oi, kk = oi[ok], kk[ok]
        if oi.size == 0:
            return self._finish("optimal", np.inf)
        keys = self._keys(t, oi, t, oi, kk)
        fine = None
        if self.objective == "accel_time":
            key_val, fine = self._envelope_point_bounds(t, oi, kk), self._point_bounds_staged
        elif self.objective == "energy":
            key_val = self._design_energy_lb(keys)
        else:
            key_val = self._own_value(t, oi, t, oi, kk)
        self.stats["blocks"] += 1
        if self.deadline is not None and time.perf_counter() > self.deadline:
            return self._finish("time_limit", float(key_val.min()))
        self._evaluate(keys, key_val, fine=fine)
        return self._finish("optimal", np.inf)

    def _envelope_point_bounds(self, t: _Table, oi, kk) -> np.ndarray:
        """Certified time bound of same-unit designs (option oi on both axles, tyre column kk) from the
        option's force envelope min(A, B / v) (see `accel_blocks`) [s]; cheap, computed in chunks."""
        radius = self.parts.tyres.radius_m[self.tyres[kk]]
        speeds = self.nodes()
        out = np.empty(oi.size)
        step = max(1, CHUNK // speeds.size)
        for s in range(0, oi.size, step):
            o, c, r = oi[s:s + step], kk[s:s + step], radius[s:s + step]
            with np.errstate(divide="ignore"):
                env = np.minimum((t.torque0_nm[o] / r)[:, None], t.power_eta_w[o][:, None] / speeds[None, :])
            m, j = t.mass[o], t.j_eta_e2_min[o, c]
            out[s:s + step] = self.envelope_bounds(c, env, m, m, j, env, m, m, j)
        return out

    def _rear_static(self, tr: _Table) -> np.ndarray:
        """(rear options, tyres) bool: the rear option alone meets the gearing limits at that tyre."""
        ok = np.ones(tr.lim.shape, dtype=bool)
        for spd in self.speeds:
            ok &= tr.lim * (1 + 4 * REL_TOL) >= spd
        return ok

    def _run_pairs(self, tf: _Table, tr: _Table):
        p = self.parts
        nf, nt = tf.options.shape[0], self.tyres.size
        fi, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nt), indexing="ij"))
        tol = 1 + 4 * REL_TOL
        front_ok = np.ones(fi.size, dtype=bool)
        for spd in self.speeds:
            front_ok &= tf.lim[fi, kk] * tol >= spd
        fi, kk = fi[front_ok], kk[front_ok]
        rear_ok = self._rear_static(tr)
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
            if self.deadline is not None and time.perf_counter() > self.deadline:
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

    def _energy_bounds(self, tf, tr, fi, kk, rear_ok, per_tyre: bool) -> np.ndarray:
        """Certified lower bound of the energy objective of blocks (front option fi, tyre column kk).

        Lightest mass (the front option's, or with ``per_tyre`` the lightest front, and the lightest
        usable rear), the tyre's rolling resistance, every gear at least as tall as the tallest of
        both units, best efficiency 1, the sum of both motors' spin losses at least the front's (or
        the least front's) plus the least rear coefficients, most reflected inertia when braking, no
        copper loss (the split could share it): `selector.engine.energy.consumption_lower_bound`, and
        the battery bound with a range.
        """
        from selector.engine import energy as E

        p = self.parts
        st = E.setup(p)
        v = p.problem.vehicle
        ty, mo = p.tyres, p.motors
        nt = self.tyres.size
        k = self.tyres[kk]

        def spin(table, rows):
            mi = table.options[rows, 0]
            poly = mo.map_index[mi] < 0
            return (np.where(poly, np.nan_to_num(mo.loss_iron[mi]), 0.0),
                    np.where(poly, np.nan_to_num(mo.loss_windage[mi]), 0.0),
                    np.where(poly, np.nan_to_num(mo.loss_constant[mi]), 0.0))

        def l_tall(table, rows, cols):
            rj = table.options[rows, 1]
            log_r = np.log(ty.radius_m[self.tyres[cols]])
            return np.log(p.reducers.tallest_ratio[rj]) - log_r, np.log(p.reducers.ratios[rj, 0]) - log_r

        # rear extremes per tyre column over the usable rear options
        r_mass = np.full(nt, np.inf)
        r_lt = np.full(nt, np.inf)
        r_l1 = np.full(nt, -np.inf)
        r_ki = np.full(nt, np.inf)
        r_kw = np.full(nt, np.inf)
        r_c0 = np.full(nt, np.inf)
        r_j = np.zeros(nt)
        for c in range(nt):
            ro = np.nonzero(rear_ok[:, c])[0]
            if ro.size == 0:
                continue
            lt, l1 = l_tall(tr, ro, np.full(ro.size, c))
            ki, kw, c0 = spin(tr, ro)
            r_mass[c], r_lt[c], r_l1[c] = tr.mass[ro].min(), lt.min(), l1.max()
            r_ki[c], r_kw[c], r_c0[c] = ki.min(), kw.min(), c0.min()
            r_j[c] = (mo.rotor_inertia_kgm2[tr.options[ro, 0]] * np.exp(2 * l1)).max()
        f_lt, f_l1 = l_tall(tf, fi, kk)
        f_ki, f_kw, f_c0 = spin(tf, fi)
        f_mass = tf.mass[fi]
        f_j = mo.rotor_inertia_kgm2[tf.options[fi, 0]] * np.exp(2 * f_l1)
        if per_tyre:  # the least over every front option at that tyre
            out = np.full(fi.size, np.inf)
            for c in np.unique(kk):
                rows = kk == c
                f_mass[rows] = f_mass[rows].min()
                f_lt[rows] = f_lt[rows].min()
                f_ki[rows], f_kw[rows], f_c0[rows] = f_ki[rows].min(), f_kw[rows].min(), f_c0[rows].min()
                f_j[rows] = f_j[rows].max()
            del out
        mass = v.mass_kg + f_mass + r_mass[kk] + v.tyre_count * ty.mass_kg[k]
        l_a = np.minimum(f_lt, r_lt[kk])
        brake = f_j + r_j[kk] + v.tyre_count * v.wheel_inertia_kgm2 / ty.radius_m[k] ** 2
        ok = np.isfinite(mass)
        out = np.full(fi.size, np.inf)
        if not ok.any():
            return out

        def c_lb(m):
            return E.consumption_lower_bound(st, m, ty.crr[k][ok], l_a[ok], 1.0, f_ki[ok] + r_ki[kk][ok],
                                             f_kw[ok] + r_kw[kk][ok], f_c0[ok] + r_c0[kk][ok], brake[ok])

        if st.range_km is None:
            out[ok] = c_lb(mass[ok])[0]
        else:
            out[ok] = E.battery_lower_bound(st, c_lb, mass[ok], E.MAX_BATTERY_FACTOR * v.mass_kg)[1]
        return out

    def _refine_value(self, tf, tr, fi, kk) -> np.ndarray:
        """Cost or mass bound of blocks with the front option fixed: the least own value over the rear
        options that meet every cheap necessary condition with it.

        Rear options are scanned in order of their own value, so a block's bound is its first rear
        option that meets the conditions; a block whose value would exceed the pool's count-th best
        gets the (proved) value of the first rear option not scanned instead.
        """
        order, sval = self._rear_sorted(tr)
        base = self._own_value(tf, fi, tr, np.full(fi.size, order[0]), kk) - sval[0]
        kth = self.kth()
        cap = kth + tie_tolerance(kth) - base  # rear values above cap cannot enter the pool
        out = np.full(fi.size, np.inf)
        stop_at = np.searchsorted(sval, cap, side="right")  # rear positions [0, stop_at) may
        open_ = np.nonzero(stop_at > 0)[0]
        beyond = stop_at < sval.size
        out[beyond] = base[beyond] + sval[np.minimum(stop_at, sval.size - 1)[beyond]]
        start, step = 0, 64
        while open_.size and start < sval.size:
            end = min(sval.size, start + step)
            pos = np.arange(start, end)
            for b0 in range(0, open_.size, max(1, PAIR_CHUNK // pos.size)):
                blk = open_[b0:b0 + max(1, PAIR_CHUNK // pos.size)]
                ok = self.conditions(tf, fi[blk][:, None], tr, order[pos][None, :], kk[blk][:, None])
                ok &= pos[None, :] < stop_at[blk][:, None]
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
        cheap necessary conditions and, for cost and mass, whose value can still enter the pool."""
        nr = tr.options.shape[0]
        if self.objective in ("cost", "mass"):
            order, sval = self._rear_sorted(tr)
            kth = self.kth()
            base = self._own_value(tf, fb, tr, np.full(fb.size, order[0]), kb) - sval[0]
            cnt = np.searchsorted(sval, kth + tie_tolerance(kth) - base, side="right")
        else:
            order, cnt = np.arange(nr), np.full(fb.size, nr)
        bis, ris = [], []
        b0 = 0
        csum = np.concatenate([[0], np.cumsum(cnt)])
        while b0 < fb.size:
            b1 = max(b0 + 1, int(np.searchsorted(csum, csum[b0] + PAIR_CHUNK, side="right")) - 1)
            b1 = min(b1, fb.size)
            c = cnt[b0:b1]
            total = int(c.sum())
            if total:
                bi = np.repeat(np.arange(b0, b1), c)
                pos = np.arange(total) - np.repeat(csum[b0:b1] - csum[b0], c)
                ri = order[pos]
                ok = self.conditions(tf, fb[bi], tr, ri, kb[bi])
                bis.append(bi[ok])
                ris.append(ri[ok])
            b0 = b1
        if not bis:
            return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
        return np.concatenate(bis), np.concatenate(ris)

    def _group_conditions(self, kk, mass_lo, ef, er):
        """Necessary conditions of blocks from the groups' extremes (largest forces, least mass and cost)."""
        p = self.parts
        v = p.problem.vehicle
        req = self.req
        ty = p.tyres
        k = self.tyres[kk]
        crr = ty.crr[k]
        tol = 1 + 4 * REL_TOL
        ok = np.ones(kk.size, dtype=bool)
        if ef["fc"][0] is not None and req.top_speed_kmh is not None:
            vt = kmh_to_mps(req.top_speed_kmh)
            ok &= (ef["fc"] + er["fc"]) * tol >= mass_lo * G_N * crr + p.q_n_s2_m2 * vt * vt
        if ef["fa"][0] is not None:
            va = self.target
            ok &= (ef["fa"] + er["fa"]) * tol > mass_lo * G_N * crr + p.q_n_s2_m2 * va * va
        f0 = ef["f0"] + er["f0"]
        if req.gradeability_pct is not None:
            th = np.arctan(req.gradeability_pct / 100.0)
            ok &= f0 * tol >= mass_lo * G_N * (crr * np.cos(th) + np.sin(th))
        if req.launch_accel_mps2 is not None:
            ok &= (f0 - mass_lo * G_N * crr) * tol >= req.launch_accel_mps2 * mass_lo
        if req.max_mass_kg is not None:
            ok &= mass_lo <= req.max_mass_kg * tol
        if req.budget is not None:
            ok &= ef["cost"] + er["cost"] + v.tyre_count * ty.cost[k] <= req.budget * tol
        return ok

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
