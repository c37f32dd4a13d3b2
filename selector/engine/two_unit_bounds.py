"""Two-unit search: per (option, tyre) tables, cheap necessary conditions and certified bounds.

`OptionTable` holds, per axle, what the requirements read of each (motor, reducer) option at each
tyre (gearing limit, best-gear forces at the required speeds, first-gear crawl force, mass, cost,
least reflected inertia) and per option the wheel-torque and power bounds of its force envelope.
`TwoUnitBounds` (a base of `two_units.TwoUnitSearch`) turns them into the necessary conditions of
designs and blocks and into the proved lower bounds of the acceleration time and the energy
objective; the search itself is in `two_units` and `accel_blocks`.
"""

from __future__ import annotations

import numpy as np

from selector.engine.accel_block_bounds import BOUND_ROWS, block_time_bounds
from selector.engine.evaluate import tie_tolerance
from selector.engine.parts import FM, FR, RM, RR, TY, PartTables
from selector.physics.drivetrain import best_gear_force_n, top_gear_limit_mps
from selector.requirements import REL_TOL
from selector.units import G_N, kmh_to_mps

NODES = 48
"""Speed nodes of the certified acceleration bound [-]."""
CHUNK = 1 << 18
"""(option, tyre) entries whose per-tyre quantities are computed at once [-] (bounds memory)."""


class OptionTable:
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
        for rows in _rows_by_gear_count(re.n_gears[rj], step):
            n = rows.size
            unit = parts.unit(np.repeat(mi[rows], nt), np.repeat(rj[rows], nt))
            radius = np.tile(radius_t, n)
            self.f0[rows] = best_first_gear_force(unit, radius).reshape(n, nt)
            if self.fc_top is not None:
                v = np.full(n * nt, kmh_to_mps(req.top_speed_kmh))
                self.fc_top[rows] = best_gear_force_n(unit, radius, v, continuous=True).reshape(n, nt)
            if self.f_acc is not None:
                v = np.full(n * nt, accel_target)
                self.f_acc[rows] = best_gear_force_n(unit, radius, v).reshape(n, nt)


def _rows_by_gear_count(n_gears: np.ndarray, step: int):
    """Option positions in chunks of at most ``step``, each chunk of one gear count: the best-gear
    forces then loop over as many gears as the chunk's units have (a few gearboxes among many
    single-speed reducers would otherwise make every row pay for the longest gearbox's gears)."""
    for g in np.unique(n_gears):
        idx = np.nonzero(n_gears == g)[0]
        for s in range(0, idx.size, step):
            yield idx[s:s + step]


def best_first_gear_force(unit, radius) -> np.ndarray:
    """First-gear crawl force eta_1 T G_1 / r of each unit [N]."""
    from selector.physics.drivetrain import unit_force_n

    return unit_force_n(unit, radius, 0, np.zeros(unit.n))


def _min_rotor_mass(unit, radius) -> np.ndarray:
    """Least reflected rotor inertia of the unit in any state of the run [kg]: min_g J (G_g/r)^2 eta_g
    for a single-speed unit, 0 for a gearbox (its rotor is decoupled while it shifts, and meanwhile the
    other unit keeps accelerating the vehicle without it)."""
    from selector.physics.drivetrain import rotor_mass_kg

    best = np.full(unit.n, np.inf)
    for g in range(unit.ratio.shape[1]):
        has = unit.n_gears > g
        best = np.where(has, np.minimum(best, rotor_mass_kg(unit, radius, np.where(has, g, 0))), best)
    return np.where(np.isfinite(best) & (unit.n_gears <= 1), best, 0.0)


def _option_energy_terms(parts: PartTables, table: OptionTable, rows, tyres) -> dict:
    """What the energy bound reads of options ``rows`` on tyres ``tyres`` (part positions, broadcast):
    mass [kg]; L of the tallest gear, ln(G_top / r) [ln(1/m)]; spin-loss coefficients ki [N m],
    kw [N m s/rad], c0 [W] (0 for a motor with an efficiency map); reflected first-gear rotor inertia
    J (G_1 / r)^2 [kg] (eta 1: the most, for braking)."""
    mo, re = parts.motors, parts.reducers
    mi, rj = table.options[rows, 0], table.options[rows, 1]
    poly = mo.map_index[mi] < 0
    log_r = np.log(parts.tyres.radius_m[tyres])
    l_first = np.log(re.ratios[rj, 0]) - log_r
    return {"mass": np.array(table.mass[rows], dtype=float), "l_tall": np.log(re.tallest_ratio[rj]) - log_r,
            "ki": np.where(poly, np.nan_to_num(mo.loss_iron[mi]), 0.0),
            "kw": np.where(poly, np.nan_to_num(mo.loss_windage[mi]), 0.0),
            "c0": np.where(poly, np.nan_to_num(mo.loss_constant[mi]), 0.0),
            "j": mo.rotor_inertia_kgm2[mi] * np.exp(2 * l_first)}


def _rear_extremes(parts: PartTables, tyres, tr: OptionTable, rear_ok) -> dict:
    """Per tyre column, the extremes of `_option_energy_terms` over the usable rear options
    (``rear_ok`` (options, tyre columns)): least mass, L_tall and spin coefficients, most inertia;
    inf mass where no rear option is usable."""
    nt = tyres.size
    out = {name: np.full(nt, np.inf) for name in ("mass", "l_tall", "ki", "kw", "c0")}
    out["j"] = np.zeros(nt)
    for c in range(nt):
        ro = np.nonzero(rear_ok[:, c])[0]
        if ro.size == 0:
            continue
        terms = _option_energy_terms(parts, tr, ro, np.full(ro.size, tyres[c]))
        for name in ("mass", "l_tall", "ki", "kw", "c0"):
            out[name][c] = terms[name].min()
        out["j"][c] = terms["j"].max()
    return out


class TwoUnitBounds:
    """Necessary conditions and certified bounds of a two-unit search (mixed into `TwoUnitSearch`,
    which provides ``parts``, ``req``, ``tyres``, ``target``, ``objective`` and ``kth``)."""

    # ------------------------------------------------------------------ necessary conditions
    def conditions(self, tf: OptionTable, fi, tr: OptionTable, ri, kk) -> np.ndarray:
        """Cheap necessary conditions of designs (front option fi, rear option ri, tyre column kk) (broadcast):
        `requirement_sums` with the designs' own sums, both units' gearing limits and the static tyre load."""
        p = self.parts
        v = p.problem.vehicle
        ty = p.tyres
        k = self.tyres[kk]
        n = v.tyre_count
        m = v.mass_kg + tf.mass[fi] + tr.mass[ri] + n * ty.mass_kg[k]
        f_top = None if tf.fc_top is None else tf.fc_top[fi, kk] + tr.fc_top[ri, kk]
        f_acc = None if tf.f_acc is None else tf.f_acc[fi, kk] + tr.f_acc[ri, kk]
        ok = self.requirement_sums(kk, m, f_top, f_acc, tf.f0[fi, kk] + tr.f0[ri, kk], tf.cost[fi] + tr.cost[ri])
        tol = 1 + 4 * REL_TOL
        for spd in self.speeds:
            ok &= (tf.lim[fi, kk] * tol >= spd) & (tr.lim[ri, kk] * tol >= spd)
        half = 0.5 * n * ty.mass_kg[k]
        rear = v.rear_axle_share * v.mass_kg + half + tr.mass[ri]
        front = (1.0 - v.rear_axle_share) * v.mass_kg + half + tf.mass[fi]
        ok &= np.maximum(rear, front) / (0.5 * n) <= ty.load_capacity_kg[k] * tol
        return ok

    def requirement_sums(self, kk, mass_kg, f_top, f_acc, f0, cost) -> np.ndarray:
        """Necessary conditions on sums over both units, at tyre column kk (arrays broadcast together).

        ``mass_kg`` is the designs' mass (or a lower bound of it), ``f_top`` the summed best-gear
        continuous force at the required top speed, ``f_acc`` the summed best-gear peak force at the
        acceleration target, ``f0`` the summed first-gear crawl force [N] (or upper bounds of them;
        None where not tabulated), ``cost`` both units' cost (or a lower bound). Each condition holds
        for every design the arguments bound: forces only help, mass and cost only hurt.
        """
        p = self.parts
        req = self.req
        ty = p.tyres
        k = self.tyres[kk]
        crr = ty.crr[k]
        tol = 1 + 4 * REL_TOL
        ok = np.ones(np.broadcast_shapes(np.shape(kk), np.shape(mass_kg), np.shape(f0), np.shape(cost)), dtype=bool)
        if f_top is not None and req.top_speed_kmh is not None:
            vt = kmh_to_mps(req.top_speed_kmh)
            ok &= f_top * tol >= mass_kg * G_N * crr + p.q_n_s2_m2 * vt * vt
        if f_acc is not None and self.accel:
            va = self.target
            ok &= f_acc * tol > mass_kg * G_N * crr + p.q_n_s2_m2 * va * va
        if req.gradeability_pct is not None:
            th = np.arctan(req.gradeability_pct / 100.0)
            ok &= f0 * tol >= mass_kg * G_N * (crr * np.cos(th) + np.sin(th))
        if req.launch_accel_mps2 is not None:
            ok &= (f0 - mass_kg * G_N * crr) * tol >= req.launch_accel_mps2 * mass_kg
        if req.max_mass_kg is not None:
            ok &= mass_kg <= req.max_mass_kg * tol
        if req.budget is not None:
            ok &= cost + p.problem.vehicle.tyre_count * ty.cost[k] <= req.budget * tol
        return ok

    # ------------------------------------------------------------------ acceleration bound
    def nodes(self, n: int = NODES):
        """Speed nodes of the certified bound, graded towards the target: target (1 - (1 - i / n)^2),
        i = 0 .. n [m/s]. With n a divisor of `NODES` they are a subset of the default nodes."""
        s = 1.0 - (1.0 - np.arange(n + 1) / n) ** 2
        return self.target * s

    def envelope_bounds(self, kk, env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min,
                        every: int = 1) -> np.ndarray:
        """Certified acceleration-time bound of blocks of designs at tyre column kk [s]:
        `accel_block_bounds.block_time_bounds` (its proof; `MULTI_BOUND_SAFETY` included).

        Each block holds front options whose wheel forces at the nodes ``nodes()[::every]`` are at most
        ``env_f`` (blocks, nodes), masses in [mf_min, mf_max] and reflected rotor inertia at least
        ``jf_min``, and likewise rear options. The bound is the left Riemann sum of dv / a_up, a_up the
        least of the four traction combinations' upper bounds (each axle motor- or traction-limited,
        with the reflected inertias in every term), each non-increasing in v.
        """
        return block_time_bounds(self, kk, env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min,
                                 every=every)

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

    def _envelope_point_bounds(self, t: OptionTable, oi, kk) -> np.ndarray:
        """Certified time bound of same-unit designs (option oi on both axles, tyre column kk) from the
        option's force envelope min(A, B / v) (see `accel_blocks`) [s]; cheap, computed in chunks."""
        radius = self.parts.tyres.radius_m[self.tyres[kk]]
        speeds = self.nodes()
        out = np.empty(oi.size)
        step = BOUND_ROWS
        for s in range(0, oi.size, step):
            o, c, r = oi[s:s + step], kk[s:s + step], radius[s:s + step]
            with np.errstate(divide="ignore"):
                env = np.minimum((t.torque0_nm[o] / r)[:, None], t.power_eta_w[o][:, None] / speeds[None, :])
            m, j = t.mass[o], t.j_eta_e2_min[o, c]
            out[s:s + step] = self.envelope_bounds(c, env, m, m, j, env, m, m, j)
        return out

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
        ty = p.tyres
        k = self.tyres[kk]
        rear = _rear_extremes(p, self.tyres, tr, rear_ok)
        front = _option_energy_terms(p, tf, fi, k)
        if per_tyre:  # the least over every front option at that tyre
            for c in np.unique(kk):
                rows = kk == c
                for name in ("mass", "l_tall", "ki", "kw", "c0"):
                    front[name][rows] = front[name][rows].min()
                front["j"][rows] = front["j"][rows].max()
        mass = v.mass_kg + front["mass"] + rear["mass"][kk] + v.tyre_count * ty.mass_kg[k]
        l_a = np.minimum(front["l_tall"], rear["l_tall"][kk])
        brake = front["j"] + rear["j"][kk] + v.tyre_count * v.wheel_inertia_kgm2 / ty.radius_m[k] ** 2
        ok = np.isfinite(mass)
        out = np.full(fi.size, np.inf)
        if not ok.any():
            return out
        spin = {name: (front[name] + rear[name][kk])[ok] for name in ("ki", "kw", "c0")}

        def c_lb(m):
            return E.consumption_lower_bound(st, m, ty.crr[k][ok], l_a[ok], 1.0, spin["ki"], spin["kw"], spin["c0"],
                                             brake[ok])

        if st.range_km is None:
            out[ok] = c_lb(mass[ok])[0]
        else:
            out[ok] = E.battery_lower_bound(st, c_lb, mass[ok], E.MAX_BATTERY_FACTOR * v.mass_kg)[1]
        return out
