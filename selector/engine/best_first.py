"""Single-axle exact search: best-first branch and bound over motors with certified bounds.

The design space is partitioned into blocks, one per motor (all its reducer x tyre pairs). Each
block gets a certified lower bound on the objective over its designs that can be feasible:

- the reducer-tyre pairs a motor can use are cut to those whose log-gearing L = ln(G/r) lies in the
  motor's requirement windows (`bounds.requirement_window`) and whose reducer is rated for it;
- cost and mass: the motor's own value plus the smallest pair value among those pairs (a
  range-minimum query over pairs sorted by L, per reducer rating class);
- acceleration time: the certified Riemann bound of `bounds.optimistic_time_s` over L cells
  holding such pairs (first over the motor's whole L range, refined to `CELLS` cells when the motor
  comes up), which also removes the pairs of cells that cannot meet ``accel_time_s``; on small
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
from dataclasses import dataclass, replace

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
SUBCELLS = 8
"""Sub-cells per cell when a motor's block is evaluated [-]."""
REFINE_BATCH = 64
"""Motors whose acceleration bound is refined together [-]."""
FIRST_CHUNK = 256
"""Designs of a block evaluated in its first chunk (later chunks double) [-]."""
FIRST_CHUNK_TIME = 2048
"""The same for the accel_time objective, where one exact integration call costs about as much for
one design as for a few hundred (measured), and the bracket cut-off drops most designs first [-]."""
SMALL_DESIGNS = 200_000
"""Studies with an acceleration requirement and at most this many (motor, pair) designs skip the
per-cell refinement: blocks are ordered by the motor's hull bound and each design gets its own
certified time bound (cheaper than refining cells when blocks are small) [-]."""
DENSE_MAX = 1 << 20
"""Motors x L cells x single-speed pairs up to which bounds use one dense mask instead of range queries [-]."""
MERGE_BLOCKS = 16
"""accel_time: blocks whose bound is below the incumbent evaluated together, at most [-]."""
PROBE_FIRST_BATCH = 512
"""Designs the sum-order probe pops for its first exact screen (later batches double) [-]: one
`evaluate.screen` call costs about as much as a few hundred designs in it (measured)."""
PROBE_COARSE_NODES = 8
"""Speed nodes of the probe's first, coarse time screen of motors (`bounds.optimistic_time_s`) [-]."""
PROBE_COARSE_MIN = 256
"""... applied to chunks of more motors than this (below, its fixed cost outweighs what it saves) [-]."""
PROBE_CHUNK_MAX = 1024
"""Motors the probe prepares at once, at most (chunks grow from 128; a larger cap overshoots the
motors the walk reaches, a smaller one pays more fixed costs per call) [-]."""
PROBE_DESIGNS = 16384
"""Designs the sum-order probe of cost and mass studies evaluates at most before handing over [-]."""
MILP_OPEN = 400
"""The MILP relaxation is consulted when more motors than this are still open below the incumbent [-]..."""
MILP_MAX_OPEN = 2000
"""... but not more than this (the model's size and build time grow with them) ..."""
MILP_AFTER_S = 60.0
"""... and the bound search has already run this long [s] (measured, benchmarks/bench_engine.py: on
the synthetic and many-variant catalogues the bound search proves optimality sooner than a MILP
round costs, and a round after 5 s changed no block count while costing 4-14 s for the solver
import and the model; the relaxation can pay off only where per-motor bounds stay weak for long)."""


def multi_in_windows(gear_l, lo_1, hi_1, *speed_windows, rows: bool = False) -> np.ndarray:
    """(motors, pairs) bool: the pair's first gear in the motor's [lo_1, hi_1] and, for each (lo, hi)
    of ``speed_windows``, some gear of the pair in [lo, hi] (window arrays (motors,); ``gear_l``
    (pairs, G), L of each gear, NaN beyond the gear count). ``rows``: (n,) for n (motor, pair) rows
    (``gear_l`` (n, G), windows (n,))."""
    gl = np.asarray(gear_l, dtype=float)
    if not rows:
        gl = gl[None, :, :]
        lo_1, hi_1 = np.asarray(lo_1)[:, None], np.asarray(hi_1)[:, None]
        speed_windows = tuple((np.asarray(lo)[:, None], np.asarray(hi)[:, None]) for lo, hi in speed_windows)
    l1 = gl[..., 0]
    ok = (l1 >= lo_1) & (l1 <= hi_1)
    with np.errstate(invalid="ignore"):
        for lo, hi in speed_windows:
            ok &= ((gl >= lo[..., None]) & (gl <= hi[..., None])).any(axis=-1)
    return ok


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
    crr: RangeMin
    neg_eta: RangeMin
    """-(best gear efficiency), so that its range minimum is the best efficiency's negative."""


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
    crr: np.ndarray
    eta: np.ndarray
    build_classes: object
    """Callable building the rating classes (sorted pairs and range-minimum tables) on first use."""
    multi_pairs: np.ndarray
    single_pairs: np.ndarray
    """Positions of the single-speed pairs."""
    _classes: list | None = None

    @property
    def classes(self) -> list:
        """Single-speed pairs per reducer rating class (`_Class`), built on first use (the sum-order
        probe of cost and mass studies often proves the result without them)."""
        if self._classes is None:
            self._classes = self.build_classes()
        return self._classes


def pair_table(parts: PartTables, use: B.Usable, reducers) -> PairTable:
    """Pairs of the allowed reducers and the usable tyres."""
    re, ty = parts.reducers, parts.tyres
    n = parts.problem.vehicle.tyre_count
    rj = np.asarray(reducers, dtype=np.int64)
    jj, kk = np.meshgrid(rj, use.tyres, indexing="ij")
    j, k = jj.ravel(), kk.ravel()
    # logarithms and maxima per part (few rows), then indexed per pair (same values, less work)
    with np.errstate(invalid="ignore", divide="ignore"):
        log_g = np.log(re.ratios)
    log_r = np.log(ty.radius_m)
    gear_l = log_g[j] - log_r[k][:, None]
    l_first = gear_l[:, 0]
    l_tall = gear_l[np.arange(j.size), re.n_gears[j] - 1]
    multi = re.n_gears[j] > 1
    cost = re.cost[j] + n * ty.cost[k]
    mass = re.mass_kg[j] + n * ty.mass_kg[k]
    crr = ty.crr[k]
    eta = np.nanmax(re.efficiencies, axis=1)[j]

    def build_classes():
        classes = []
        single = np.nonzero(~multi)[0]
        if single.size:
            # rating classes from the reducers (few rows), then every single-speed pair's class; one
            # stable sort of the pairs by L, split per class (each class keeps L order, ties pair order)
            rating = np.stack([re.max_torque_nm[rj], re.max_speed_rad_s[rj]], axis=1)
            uniq, inv_r = np.unique(rating, axis=0, return_inverse=True)
            inv_r = np.asarray(inv_r).ravel()
            pos_r = np.full(re.max_torque_nm.size, -1, dtype=np.int64)
            pos_r[rj] = np.arange(rj.size)
            inv = inv_r[pos_r[j[single]]]
            by_l = np.argsort(l_first[single], kind="stable")
            single_l, inv_l = single[by_l], inv[by_l]
            for c in range(uniq.shape[0]):
                order = single_l[inv_l == c]
                if order.size == 0:
                    continue
                classes.append(_Class(float(uniq[c, 0]), float(uniq[c, 1]), order, l_first[order],
                                      RangeMin(cost[order]), RangeMin(mass[order]), RangeMin(crr[order]),
                                      RangeMin(-eta[order])))
        return classes

    return PairTable(j, k, gear_l, l_first, l_tall, multi, cost, mass, crr, eta, build_classes, np.nonzero(multi)[0],
                     np.nonzero(~multi)[0])


class SingleAxleSearch:
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
        self.use = B.cached_usable(parts, allowed)
        reducers = allowed.get("reducers")
        self.pairs = pair_table(parts, self.use, np.arange(parts.sizes[1]) if reducers is None else reducers)
        self.cost_matters = objective == "cost" or req.budget is not None or parts.problem.energy is not None
        self._motors = None
        self._windows = None
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
        for c, a, b in self._single_ranges(np.array([pos])):
            if b[0] > a[0]:
                parts.append(c.pairs[a[0]:b[0]])
        mo = self._multi_ok(np.array([pos]))
        if mo.size:
            parts.append(self.pairs.multi_pairs[mo[0]])
        return np.concatenate(parts) if parts else np.empty(0, dtype=np.int64)

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

    def energy_bounds(self, mi, l_a, l_b, mass_kg, crr, eta_max) -> np.ndarray:
        """Certified lower bound of the energy objective (Wh/km at the sized battery) of single-unit
        designs with motors ``mi``, gears in [l_a, l_b], least mass, rolling resistance and best gear
        efficiency given (broadcast), see `selector.engine.energy.consumption_lower_bound`."""
        from selector.engine import energy as E

        st = E.setup(self.parts)
        mo, ty = self.parts.motors, self.parts.tyres
        v = self.parts.problem.vehicle
        mi = np.asarray(mi, dtype=np.int64)
        poly = mo.map_index[mi] < 0
        k_i = np.where(poly, np.nan_to_num(mo.loss_iron[mi]), 0.0)
        k_w = np.where(poly, np.nan_to_num(mo.loss_windage[mi]), 0.0)
        c0 = np.where(poly, np.nan_to_num(mo.loss_constant[mi]), 0.0)
        brake = mo.rotor_inertia_kgm2[mi] * np.exp(2.0 * np.asarray(l_b, dtype=float)) \
            + v.tyre_count * v.wheel_inertia_kgm2 / float(ty.radius_m.min()) ** 2

        k_c = np.where(poly, np.nan_to_num(mo.loss_copper[mi]), 0.0)

        def c_lb(m):
            return E.consumption_lower_bound(st, m, crr, l_a, eta_max, k_i, k_w, c0, brake, k_c, l_b)

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
        mo, ty = self.parts.motors, self.parts.tyres
        v = self.parts.problem.vehicle
        mi = np.asarray(mi, dtype=np.int64)
        poly = mo.map_index[mi] < 0
        k_i = np.where(poly, np.nan_to_num(mo.loss_iron[mi]), 0.0)
        k_w = np.where(poly, np.nan_to_num(mo.loss_windage[mi]), 0.0)
        c0 = np.where(poly, np.nan_to_num(mo.loss_constant[mi]), 0.0)
        brake = mo.rotor_inertia_kgm2[mi] * np.exp(2.0 * np.asarray(l_b, dtype=float)) \
            + v.tyre_count * v.wheel_inertia_kgm2 / float(ty.radius_m.min()) ** 2

        k_c = np.where(poly, np.nan_to_num(mo.loss_copper[mi]), 0.0)

        def c_lb(m):
            return E.consumption_lower_bound(st, m, crr, l_a, eta_max, k_i, k_w, c0, brake, k_c, l_b)

        mb, _ = E.battery_lower_bound(st, c_lb, np.asarray(mass_kg, dtype=float), E.MAX_BATTERY_FACTOR * v.mass_kg,
                                      rounds=2, consumption=False)
        return mb, mb * st.specific_energy_wh_per_kg / 1000.0 * st.cost_per_kwh

    def hull(self, m_pos):
        """L hull [lo, hi] of each motor's admissible pairs (lo > hi: none)."""
        lo = np.full(m_pos.size, np.inf)
        hi = np.full(m_pos.size, -np.inf)
        dense = self._dense_single(m_pos, 1)
        if dense is not None:
            ok, sp = dense
            l1 = self.pairs.l_first[sp][None, :]
            lo = np.where(ok, l1, np.inf).min(axis=1, initial=np.inf)
            hi = np.where(ok, l1, -np.inf).max(axis=1, initial=-np.inf)
        else:
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

    def gear_time_bound(self, m_pos, gears_l) -> np.ndarray:
        """Certified acceleration-time bound of motors m_pos with gear sets ``gears_l`` ((..., G), NaN
        beyond the gear count; broadcast), gear by gear (`bounds.optimistic_time_s`) [s]."""
        return B.motor_time_bound_s(self.parts, self.use, self.motors[m_pos], 0.0, 0.0, self.target,
                                    gears_l=gears_l)

    def cell_edges(self, cells: int = CELLS):
        lo, hi = self.l_range
        return np.linspace(lo - 1e-9, hi + 1e-9, cells + 1)

    def cell_bounds(self, m_pos, lo_c, hi_c, what: str = "time") -> np.ndarray:
        """Certified time bound of each motor's single-speed designs in each L cell [lo_c, hi_c] [s].

        ``lo_c``, ``hi_c``: (C,) or (m, C). Each cell's bound uses the lightest pair mass, the best
        gearbox efficiency and the lowest rolling resistance among the motor's admissible pairs in
        the cell (range-minimum queries); inf for cells without such pairs.
        """
        lo_c = np.broadcast_to(lo_c, (m_pos.size,) + np.shape(lo_c)[-1:])
        hi_c = np.broadcast_to(hi_c, lo_c.shape)
        shape = lo_c.shape
        occupied = np.zeros(shape, dtype=bool)
        mass = np.full(shape, np.inf)
        crr = np.full(shape, np.inf)
        eta = np.full(shape, np.inf)  # minimum of -eta
        dense = self._dense_single(m_pos, shape[1])
        if dense is not None:
            ok, sp = dense
            p = self.pairs
            l1 = p.l_first[sp][None, None, :]
            inc = ok[:, None, :] & (l1 >= lo_c[:, :, None]) & (l1 <= hi_c[:, :, None])
            occupied = inc.any(axis=2)
            mass = np.where(inc, p.mass[sp], np.inf).min(axis=2, initial=np.inf)
            crr = np.where(inc, p.crr[sp], np.inf).min(axis=2, initial=np.inf)
            eta = np.where(inc, -p.eta[sp], np.inf).min(axis=2, initial=np.inf)
        for c, a, b in (() if dense is not None else self._single_ranges(m_pos)):
            ia = np.maximum(np.searchsorted(c.l_sorted, lo_c, side="left"), a[:, None])
            ib = np.minimum(np.searchsorted(c.l_sorted, hi_c, side="right"), b[:, None])
            has = ib > ia
            if not has.any():
                continue
            occupied |= has
            mass = np.minimum(mass, c.mass.query(ia, np.where(has, ib, ia)))
            crr = np.minimum(crr, c.crr.query(ia, np.where(has, ib, ia)))
            eta = np.minimum(eta, c.neg_eta.query(ia, np.where(has, ib, ia)))
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

    def _design_time_bounds(self, motors: np.ndarray, pairs: np.ndarray) -> np.ndarray:
        """Certified time bound of single designs (motor rows, pair positions) [s]: `optimistic_time_s`
        at the design's own gear hull (one L for a single-speed pair; a multi-speed pair also gear by
        gear, the larger of the two bounds), mass (as both extremes), static driven-axle share, best
        gear efficiency and rolling resistance (without [energy], where a battery adds mass, the mass
        and share extremes stay the motor's)."""
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
        out = B.motor_time_bound_s(parts, self.use, motors, p.l_tall[pairs], p.l_first[pairs], self.target, **kw)
        multi = np.nonzero(p.multi[pairs])[0]
        if multi.size:  # a multi-speed pair: gear by gear (tighter than its hull; both are bounds)
            kw_m = {key: np.asarray(val)[multi] for key, val in kw.items()}
            t_g = B.motor_time_bound_s(parts, self.use, motors[multi], 0.0, 0.0, self.target,
                                       gears_l=p.gear_l[pairs[multi]], **kw_m)
            out[multi] = np.maximum(out[multi], t_g)
        return out

    def refine(self, m_pos) -> tuple[np.ndarray, np.ndarray]:
        """Per motor: certified time bounds of its admissible designs, per L cell and for multi-speed pairs.

        Returns (cell_lb (m, CELLS): bound over the single-speed pairs in each cell, inf for cells
        without admissible pairs; multi_lb (m,): least bound over its admissible multi-speed pairs,
        each gear by gear with the motor's extremes, inf if none). A cell or pair whose bound exceeds accel_time_s holds
        no feasible design.
        """
        edges = self.cell_edges()
        t = self.cell_bounds(m_pos, edges[:-1], edges[1:])
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
            np.minimum.at(multi, r, self.gear_time_bound(m_pos[r], uniq[u]))
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
    def _block(self, pos: int, cell_lb=None):
        """(candidate pairs, key values) of motor ``pos``'s admissible designs that can still count:
        cost and mass: exact values; time: the bound of their sub-cell, or their gear-by-gear bound
        for a multi-speed pair (pairs whose bound misses accel_time_s dropped). None when none is left."""
        parts, p = self.parts, self.pairs
        i = int(self.motors[pos])
        cand = self.candidates(pos)
        if cand.size == 0:
            return None
        limit = np.inf if self.req.accel_time_s is None else self.req.accel_time_s * (1 + 2 * REL_TOL)
        if self.accel and self.small:
            # a small study: each design's own certified bound (no cells; see `SMALL_DESIGNS`)
            t_cell = self._design_time_bounds(np.full(cand.size, i, dtype=np.int64), cand)
            keep = t_cell <= limit
            cand, t_cell = cand[keep], t_cell[keep]
        elif self.accel:
            # sub-cell bounds: SUBCELLS per cell of the refinement grid, only where the cell can count
            fine = self.cell_edges(CELLS * SUBCELLS)
            sub = np.clip(np.searchsorted(fine, p.l_first[cand], side="right") - 1, 0, CELLS * SUBCELLS - 1)
            multi = p.multi[cand]
            used = np.unique(sub[~multi])
            t_sub = np.full(CELLS * SUBCELLS, np.inf)
            if used.size:
                if cell_lb is not None:
                    used = used[cell_lb[used // SUBCELLS] <= limit]
                if used.size:
                    t_sub[used] = self._subcell_bounds(pos, cand[~multi], sub[~multi], used, fine)
            t_cell = np.where(multi, 0.0, t_sub[sub])
            if multi.any():
                mc = np.nonzero(multi)[0]
                t_cell[mc] = self.gear_time_bound(np.full(mc.size, pos), p.gear_l[cand[mc]])
            keep = t_cell <= limit
            cand, t_cell = cand[keep], t_cell[keep]
        if cand.size == 0:
            return None
        if self.objective == "cost":
            key_val = parts.motors.cost[i] + p.cost[cand]
        elif self.objective == "mass":
            key_val = parts.problem.vehicle.mass_kg + parts.motors.mass_kg[i] + p.mass[cand]
        if self.objective in ("cost", "mass") and parts.problem.energy is not None \
                and parts.problem.requirements.range_km is not None:
            key_val = key_val + self._cell_battery(pos, cand, "cost" if self.objective == "cost" else "mass")
        if self.objective in ("cost", "mass"):
            pass
        elif self.objective == "energy":
            key_val = self._cell_battery(pos, cand, "energy")
        else:
            key_val = t_cell
        return cand, key_val

    def evaluate_motor(self, pos: int, cell_lb=None):
        """Evaluate motor ``pos``'s admissible designs exactly, best pair bound first, until provably done
        (with the blocks in ``self.pending``, (pos, cell bounds) pairs, merged into one block).

        Pairs are ordered by a lower bound of their objective (cost and mass: exact; time: the bound
        of their sub-cell, or the gear-by-gear bound for a multi-speed pair) and evaluated in growing
        chunks by `evaluate.screen` (with the accel_time objective, the best time found so far as
        its cut-off). The loop stops when the next key value exceeds the pool's ``count``-th best (or
        this block's ``per_motor``-th best) beyond the tie tolerance: every pair after it is no better.
        Merging blocks (accel_time only, where one exact integration call costs about as much for
        one design as for a few hundred) evaluates their pairs in one order; it changes no bound.
        """
        parts, p = self.parts, self.pairs
        blocks = [(pos, cell_lb)] + list(self.pending)
        self.pending = []
        mot, cands, vals = [], [], []
        for q, cl in blocks:
            got = self._block(q, cl)
            if got is not None:
                mot.append(np.full(got[0].size, int(self.motors[q]), dtype=np.int64))
                cands.append(got[0])
                vals.append(got[1])
        if not cands:
            return
        mot, cand, key_val = np.concatenate(mot), np.concatenate(cands), np.concatenate(vals)
        order = np.lexsort((p.k[cand], p.j[cand], mot, key_val))
        mot, cand, key_val = mot[order], cand[order], key_val[order]
        found_v, found_k = [], []
        start, size = 0, FIRST_CHUNK if self.objective != "accel_time" else FIRST_CHUNK_TIME
        limit = np.inf if self.req.accel_time_s is None else self.req.accel_time_s * (1 + 2 * REL_TOL)
        while start < cand.size:
            nxt = key_val[start]
            kth = self.kth()
            if nxt > kth + tie_tolerance(kth):
                break
            if start > 0 and self.expired():  # the rest of the block is bounded by its next key value
                self.unfinished = min(self.unfinished, float(nxt))
                break
            slice_kth = np.inf
            if found_v:
                fv = np.concatenate(found_v)
                if fv.size >= self.per_slice:
                    fk = np.concatenate(found_k)
                    slice_kth = float(fv[order_best(fv, fk, self.per_slice)[-1]])
                    if nxt > slice_kth + tie_tolerance(slice_kth):
                        break
            stop = min(cand.size, start + size)
            chunk = cand[start:stop]
            ok_chunk = None
            if self.objective in ("accel_time", "energy"):
                # the chunk's key values are not sorted beyond their cell bound: keep those that can still count
                ok_chunk = key_val[start:stop] <= min(kth, slice_kth) * (1 + 4 * REL_TOL)
                chunk = chunk[ok_chunk]
            cutoff = None
            if self.objective == "accel_time" and np.isfinite(min(kth, slice_kth)):
                cutoff = min(kth, slice_kth) * (1 + 4 * REL_TOL)
            mot_c = mot[start:stop][ok_chunk] if ok_chunk is not None else mot[start:stop]
            if self.accel and not self.small and chunk.size and (cutoff is not None or np.isfinite(limit)):
                # each design's own certified time bound (its L, mass, efficiency and rolling
                # resistance): designs above the cut-off or accel_time_s cannot count
                t_own = self._design_time_bounds(mot_c, chunk)
                keep = t_own <= min(limit, np.inf if cutoff is None else cutoff)
                chunk, mot_c = chunk[keep], mot_c[keep]
            if chunk.size:
                keys = parts.single_keys(mot_c, p.j[chunk], p.k[chunk])
                ok, obj = screen(parts, keys, objective=self.objective, accel_cutoff=cutoff)
                self.stats["evaluated"] += chunk.size
                if ok.any():
                    found_v.append(obj[ok])
                    found_k.append(keys[ok])
            start, size = stop, size * 2
        if found_v:
            self._add(np.concatenate(found_v), np.concatenate(found_k))

    # ------------------------------------------------------------------ the MILP relaxation
    def milp_round(self, open_pos: np.ndarray, lb: np.ndarray, cells: dict):
        """Ask the MILP relaxation over the open motors: None when it is infeasible under the incumbent
        cutoff (no open motor can beat the pool: a proof), else the position of the motor it picks.

        Each open motor's first-gear L window is the hull of its admissible pairs (and, once its
        acceleration bound is refined, of the pairs in cells that can still count); the accel_time
        objective uses each motor's certified bound as its coefficient. Every row of the model is a
        relaxation (`model.py`), so infeasibility proves that no unevaluated design beats the cutoff.
        """
        from selector.engine.model import AccelWindows, SelectionModel

        parts = self.parts
        n_all = parts.sizes[0]
        lo = np.full(n_all, np.inf)
        hi = np.full(n_all, -np.inf)
        tmin = np.full(n_all, np.inf)
        h_lo, h_hi = self.hull(open_pos)
        limit = np.inf if self.req.accel_time_s is None else self.req.accel_time_s * (1 + 2 * REL_TOL)
        edges = self.cell_edges()
        for n, pos in enumerate(open_pos):
            a, b = h_lo[n], h_hi[n]
            cl = cells.get(int(pos))
            if cl is not None and self.pairs.multi_pairs.size == 0:
                ok = np.nonzero(cl <= min(limit, np.inf if self.objective != "accel_time" else lb[pos] * 1e9))[0]
                if ok.size:
                    a, b = max(a, edges[ok.min()]), min(b, edges[ok.max() + 1])
            i = int(self.motors[pos])
            lo[i], hi[i] = a - 1e-9, b + 1e-9
            tmin[i] = lb[pos]
        # a model over the parts still in play only (open motors, allowed reducers, usable tyres)
        m_rows = np.sort(self.motors[open_pos])
        r_rows = np.arange(parts.sizes[1]) if self.allowed.get("reducers") is None else \
            np.sort(np.asarray(self.allowed["reducers"], dtype=np.int64))
        sub = parts.subset(motors=m_rows, reducers=r_rows, tyres=self.use.tyres)
        windows = AccelWindows(lo=lo[m_rows], hi=hi[m_rows], t_min_s=tmin[m_rows])
        model = SelectionModel(sub, self.objective, windows=windows,
                               accel_target_kmh=self.req.accel_to_kmh if self.accel else None,
                               accel_limit_s=self.req.accel_time_s, deadline=self.deadline)
        self.stats["milp"] = self.stats.get("milp", 0) + 1
        if model.expired:
            return -1  # the deadline passed while building: the loop's next check returns time_limit
        if model.infeasible_reason:
            return None
        kth = self.kth()
        if np.isfinite(kth):
            model.set_cutoff((kth + tie_tolerance(kth)) * model.objective_scale())
        from pyomo.contrib.solver.common.results import TerminationCondition as TC

        from selector.engine.search import solver

        options = {"mip_rel_gap": 0.0, "mip_abs_gap": 1e-9, "presolve": "off", "threads": 1}
        if self.deadline is not None:  # HiGHS stops at the deadline too (no verdict: -1 below)
            options["time_limit"] = max(self.deadline - time.perf_counter(), 0.01)
        res = solver().solve(model.m, load_solutions=False, raise_exception_on_nonoptimal_result=False,
                             solver_options=options)
        if res.termination_condition in (TC.provenInfeasible, TC.infeasibleOrUnbounded, TC.locallyInfeasible):
            return None
        if res.termination_condition != TC.convergenceCriteriaSatisfied:
            return -1  # no verdict (e.g. the solver stopped early): keep the bound search going
        res.solution_loader.load_vars()
        i, _, _ = model.chosen()
        i = int(m_rows[i])
        return int(np.nonzero(self.motors == i)[0][0])

    # ------------------------------------------------------------------ the sum-order probe
    def sum_order_probe(self) -> str:
        """Cost and mass objectives (no [energy]): evaluate designs in increasing objective order.

        The objective is a sum of a motor value and a pair value (reducer + tyre_count x tyre), so a
        heap over (motor rank, pair rank) into both lists sorted by value yields designs in
        increasing objective order (from (a, b) come (a, b + 1) and, when b = 0, (a' , 0) with a'
        the next motor rank still in play). Popped designs whose pair is outside the motor's
        requirement windows or whose reducer is not rated for the motor fail a necessary condition;
        the rest go to `evaluate.screen` in batches. When the next value exceeds the ``count``-th
        best feasible value beyond the tie tolerance (or the heap is empty), every design not
        evaluated is provably worse or infeasible: a complete proof and the pool is set ("proved").
        Otherwise, after `PROBE_DESIGNS` designs, it hands over to the block search ("handover",
        keeping its best design when ``count`` is 1, where a design seen twice does no harm). At the
        deadline it stops ("time_limit") with the heap's least value as the proved bound of every
        design not evaluated (``self.probe_bound``).

        Motors are prepared lazily, in chunks of growing size in the walk's motor order, only as far
        as the walk reaches (the set-up over all motors would dominate when the optimum sits among
        the first designs in objective order): `motor_screen`, the requirement windows (a motor
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
        m_sorted, p_sorted = c_val[m_ord].tolist(), p_val[p_ord].tolist()
        n_m, n_p = cand.size, len(p_sorted)
        valid = np.zeros(n_m, dtype=bool)
        lo_r = np.full(n_m, np.inf)
        hi_r = np.full(n_m, -np.inf)
        win = np.empty((6, n_m))  # first-gear, top-speed, acceleration-target windows lo, hi (multi-speed pairs)
        seen: dict[bytes, list] = {}
        state = {"prepared": 0, "chunk": 128}
        mp = p.multi_pairs
        limit_t = None if self.req.accel_time_s is None else self.req.accel_time_s * (1 + 2 * REL_TOL)

        def prepare():
            a0 = state["prepared"]
            a1 = min(n_m, a0 + state["chunk"])
            state["prepared"], state["chunk"] = a1, min(2 * state["chunk"], PROBE_CHUNK_MAX)
            mi = cand[a0:a1]
            ok = self.motor_screen(mi)
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
            valid[a0:a1] = ok
            lo_r[a0:a1], hi_r[a0:a1] = lo, hi
            win[:, a0:a1] = l1, h1, w_top[0], w_top[1], w_acc[0], w_acc[1]

        def next_valid(a):
            while a < n_m:
                while state["prepared"] <= a:
                    prepare()
                hit = np.flatnonzero(valid[a:state["prepared"]])
                if hit.size:
                    return a + int(hit[0])
                a = state["prepared"]
            return None

        a_first = next_valid(0)
        if a_first is None:
            return "proved"
        heap = [(m_sorted[a_first] + p_sorted[0], a_first, 0)]
        found_v, found_k = [], []
        kth = np.inf
        evaluated = 0
        batch = PROBE_FIRST_BATCH
        outcome = "proved"
        while heap:
            if heap[0][0] > kth + tie_tolerance(kth):
                break
            if evaluated >= PROBE_DESIGNS:
                if self.count == 1 and found_v:
                    self._add(np.concatenate(found_v), np.concatenate(found_k))
                self.stats["probe"] = evaluated
                return "handover"
            if evaluated and self.expired():  # (after one batch: some progress in any case)
                outcome = "time_limit"
                self.probe_bound = heap[0][0]
                break
            a_l, b_l = [], []
            limit = kth + tie_tolerance(kth)
            while heap and len(a_l) < batch and heap[0][0] <= limit:
                _, a, b = heapq.heappop(heap)
                a_l.append(a)
                b_l.append(b)
                if b + 1 < n_p:
                    heapq.heappush(heap, (m_sorted[a] + p_sorted[b + 1], a, b + 1))
                if b == 0:
                    a2 = next_valid(a + 1)
                    if a2 is not None:
                        heapq.heappush(heap, (m_sorted[a2] + p_sorted[0], a2, 0))
            ranks = np.asarray(a_l, dtype=np.int64)
            pair = p_ord[np.asarray(b_l, dtype=np.int64)]
            motor = cand[ranks]
            ok = self.use.compatible[motor, p.j[pair]]
            single = ~p.multi[pair]
            lf = p.l_first[pair]
            ok &= ~single | ((lf >= lo_r[ranks]) & (lf <= hi_r[ranks]))
            if not single.all():  # a multi-speed pair: first gear in the first-gear window, a gear in each speed one
                w = win[:, ranks]
                ok &= single | multi_in_windows(p.gear_l[pair], w[0], w[1], (w[2], w[3]), (w[4], w[5]), rows=True)
            evaluated += len(a_l)
            batch = min(2 * batch, 8192)
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
        self.stats["probe"] = evaluated
        self.stats["probe_motors"] = state["prepared"]
        return outcome

    # ------------------------------------------------------------------ the loop
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
        self.small = self.accel and n * self.pairs.j.size <= SMALL_DESIGNS
        refined = np.zeros(n, dtype=bool) if self.accel and not self.small else np.ones(n, dtype=bool)
        if self.objective == "energy":
            # the motor-level energy bound refined over L cells (least pair mass per cell), in batches
            fin = np.nonzero(np.isfinite(lb))[0]
            edges = self.cell_edges()
            for s0 in range(0, fin.size, REFINE_BATCH):
                if self.expired():  # the coarser bounds of the rest stay valid
                    break
                b = fin[s0:s0 + REFINE_BATCH]
                cl = self.cell_bounds(b, edges[:-1], edges[1:], what="energy")
                lb[b] = np.maximum(lb[b], np.where(self._multi_ok(b).any(axis=1) if self.pairs.multi_pairs.size
                                                   else False, lb[b], cl.min(axis=1)))
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
