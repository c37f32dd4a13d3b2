"""Certified bounds used to prune the search: every bound here is proved, none is sampled.

Log-gearing. A design's gearing is described by L = ln(G/r) of its gears; a single-speed design has
one L, a multi-speed design the interval [L_tallest, L_first] of its gears (its "L-hull").

Requirement windows (`requirement_window`): necessary conditions a motor's designs must meet,
written as an interval of L, with the vehicle mass taken at its lightest, the rolling resistance at
its lowest and the gearbox efficiency at its best over the parts the motor can use, so every
feasible design lies inside the window:

- a required sustained speed V: the continuous shaft power P_c(w) = w T_c(w) at w = V e^L must cover
  V F_res(V) / eta (the gearing limit is the upper end of the envelope's domain);
- the acceleration target V_a: the same with the peak envelope (a(V_a) > 0 is needed to reach it);
- gradeability (first gear): eta T_pk e^L >= m g (Crr cos + sin);
- launch (first gear): eta T e^L - a J eta e^{2L} >= m (a + g Crr) (quadratic in e^L).

Acceleration time (`optimistic_time_s`). For every design of a motor whose gears lie in an L-hull
[L_a, L_b] and every speed v, the net acceleration is at most

    a_up(v) = min( (min(eta_max e^{L_b} T(v e^{L_a}), eta_max P / v) - F_res_min(v)) / (m_min + J eta_min e^{2 L_a}),
                   a_traction_max )

because T is non-increasing in shaft speed, e^L <= e^{L_b}, the wheel power eta T(w) w never exceeds
eta P in any gear (the envelope's power limit), m_eff >= m_min + J eta_min e^{2 L_a}, and
the traction-limited acceleration is at most the driven axle's bound (`traction_tan_bound`). a_up is
non-increasing in v (force non-increasing, road load increasing), so 1/a_up is non-decreasing and
the LEFT Riemann sum sum_k (v_{k+1} - v_k) / a_up(v_k) is a lower bound of integral dv / a_up, hence
of every such design's time (shifts only add time). No quadrature error enters: the bound is exact
arithmetic on a proved inequality. Where a_up <= 0 below the target (or at it), no design of the
block reaches the target: the bound is +inf, which is then exact.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from selector.engine.parts import PartTables
from selector.engine.traction_bounds import max_driven_share, traction_tan_bound
from selector.physics.motor import envelope_torque_nm
from selector.requirements import REL_TOL
from selector.units import G_N, kmh_to_mps

RIEMANN_NODES = 48
"""Speed nodes of the certified Riemann lower bound of the acceleration time [-]."""


@dataclass(frozen=True)
class Usable:
    """Per-motor extremes over the parts a feasible design with that motor can use (SI)."""

    compatible: np.ndarray
    """(n_motors, n_reducers) bool: reducer rated for the motor's torque and speed, and allowed."""
    has_reducer: np.ndarray
    eta_max: np.ndarray
    eta_min: np.ndarray
    reducer_mass_min: np.ndarray
    reducer_mass_max: np.ndarray
    tyres: np.ndarray
    """Positions of the tyres that can carry at least the lightest possible axle share (and are allowed)."""
    tyre_mass_min: float
    tyre_mass_max: float
    crr_min: float
    radius_min: float
    radius_max: float
    reducer_cost_min: np.ndarray
    """Cost of the cheapest reducer rated for each motor (0 without one) [currency]."""
    tyre_cost_min: float
    """Cost of the cheapest usable tyre [currency]."""


def compatible_matrix(parts: PartTables, motors=None, reducers=None) -> np.ndarray:
    """(motors, reducers) bool: the reducer's input ratings cover the motor's peak torque and max speed."""
    mo, re = parts.motors, parts.reducers
    mi = np.arange(len(mo.part)) if motors is None else np.asarray(motors)
    rj = np.arange(len(re.part)) if reducers is None else np.asarray(reducers)
    tol = 1 + 2 * REL_TOL
    return ((mo.torque_nm[mi][:, None] <= re.max_torque_nm[rj][None, :] * tol)
            & (mo.max_speed_rad_s[mi][:, None] <= re.max_speed_rad_s[rj][None, :] * tol))


def least_tyre_load_kg(parts: PartTables) -> float:
    """Smallest possible per-tyre share of the heavier static axle (parts only add to it) [kg]."""
    v = parts.problem.vehicle
    return max(v.rear_axle_share, 1.0 - v.rear_axle_share) * v.mass_kg / (0.5 * v.tyre_count)


def rating_classes(parts: PartTables, motors=None):
    """(representatives, inverse): motors grouped by which reducers' input ratings cover them.

    A reducer covers a motor when its rated torque and speed (times the pass tolerance) are at
    least the motor's peak torque and maximum speed; that depends only on the motor's rank among
    the distinct rated torques and among the distinct rated speeds, so motors with equal ranks
    have equal rows of `compatible_matrix`. Returns the position of one representative motor per
    class and each motor's class (``motors[k]`` is in class ``inverse[k]``).
    """
    mo, re = parts.motors, parts.reducers
    mi = np.arange(len(mo.part)) if motors is None else np.asarray(motors, dtype=np.int64)
    tol = 1 + 2 * REL_TOL
    ut = np.unique(re.max_torque_nm * tol)
    us = np.unique(re.max_speed_rad_s * tol)
    code = np.searchsorted(ut, mo.torque_nm[mi], side="left") * (us.size + 1) \
        + np.searchsorted(us, mo.max_speed_rad_s[mi], side="left")
    _, first, inverse = np.unique(code, return_index=True, return_inverse=True)
    return mi[first], np.asarray(inverse).ravel()


def usable(parts: PartTables, allowed: dict | None = None) -> Usable:
    """Usable parts per motor: reducers rated for it (the staircase rule) among the allowed ones, and
    the allowed tyres whose load index can carry the lightest possible axle share.

    The per-reducer extremes are computed once per rating class (`rating_classes`: motors covered
    by the same reducers) and spread to the motors, so the cost grows with the motor rows only
    through one gather.
    """
    allowed = allowed or {}
    re, ty = parts.reducers, parts.tyres
    n_r, n_t = len(re.part), len(ty.part)
    r_ok = np.zeros(n_r, dtype=bool)
    r_ok[np.arange(n_r) if allowed.get("reducers") is None else np.asarray(allowed["reducers"], dtype=np.int64)] = True
    rep, inv = rating_classes(parts)
    ok_c = compatible_matrix(parts, motors=rep) & r_ok[None, :]
    has_c = ok_c.any(axis=1)
    eta_best = np.nanmax(re.efficiencies, axis=1)
    eta_worst = np.nanmin(re.efficiencies, axis=1)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN rows: motors without a reducer
        eta_max = np.nanmax(np.where(ok_c, eta_best[None, :], np.nan), axis=1)[inv]
        eta_min = np.nanmin(np.where(ok_c, eta_worst[None, :], np.nan), axis=1)[inv]
        mr_min = np.nanmin(np.where(ok_c, re.mass_kg[None, :], np.nan), axis=1)[inv]
        mr_max = np.nanmax(np.where(ok_c, re.mass_kg[None, :], np.nan), axis=1)[inv]
        cr_min = np.nanmin(np.where(ok_c, re.cost[None, :], np.nan), axis=1)[inv]
    ok = ok_c[inv]
    has = has_c[inv]
    t_ok = np.zeros(n_t, dtype=bool)
    t_ok[np.arange(n_t) if allowed.get("tyres") is None else np.asarray(allowed["tyres"], dtype=np.int64)] = True
    t_ok &= ty.load_capacity_kg >= least_tyre_load_kg(parts) * (1 - 2 * REL_TOL)
    tyres = np.nonzero(t_ok)[0]
    pick = tyres if tyres.size else np.arange(n_t)  # no tyre can work: keep bounds defined (nothing is feasible)
    fill = lambda a, x: np.where(has, a, x)  # noqa: E731
    return Usable(compatible=ok, has_reducer=has & bool(tyres.size), eta_max=fill(eta_max, 1.0),
                  eta_min=fill(eta_min, 1.0), reducer_mass_min=fill(mr_min, 0.0), reducer_mass_max=fill(mr_max, 0.0),
                  tyres=tyres, tyre_mass_min=float(ty.mass_kg[pick].min()), tyre_mass_max=float(ty.mass_kg[pick].max()),
                  crr_min=float(ty.crr[pick].min()), radius_min=float(ty.radius_m[pick].min()),
                  radius_max=float(ty.radius_m[pick].max()), reducer_cost_min=fill(cr_min, 0.0),
                  tyre_cost_min=float(ty.cost[pick].min()))


def cached_usable(parts: PartTables, allowed: dict | None) -> Usable:
    """`usable`, memoised per part tables and allowed parts."""
    key = ("usable",) + tuple(None if (allowed or {}).get(k) is None else tuple(int(a) for a in allowed[k])
                              for k in ("reducers", "tyres"))
    if key not in parts.cache:
        parts.cache[key] = usable(parts, allowed)
    return parts.cache[key]


def lightest_mass_kg(parts: PartTables, use: Usable, motors) -> np.ndarray:
    """Lightest vehicle mass of any design with each motor (single unit) [kg]."""
    v = parts.problem.vehicle
    return v.mass_kg + parts.motors.mass_kg[motors] + use.reducer_mass_min[motors] + v.tyre_count * use.tyre_mass_min


def least_cost(parts: PartTables, use: Usable, motors) -> np.ndarray:
    """Least cost of any design with each motor (single unit; a battery only adds) [currency]."""
    n = parts.problem.vehicle.tyre_count
    return parts.motors.cost[motors] + use.reducer_cost_min[motors] + n * use.tyre_cost_min


def heaviest_mass_kg(parts: PartTables, use: Usable, motors) -> np.ndarray:
    """Heaviest vehicle mass of any design with each motor (single unit; with the largest battery an
    energy study considers) [kg]."""
    v = parts.problem.vehicle
    m = v.mass_kg + parts.motors.mass_kg[motors] + use.reducer_mass_max[motors] + v.tyre_count * use.tyre_mass_max
    if parts.problem.energy is not None and parts.problem.requirements.range_km is not None:
        from selector.engine.energy import MAX_BATTERY_FACTOR

        m = m + MAX_BATTERY_FACTOR * v.mass_kg
    return m


def equivalent_motors(parts: PartTables, motors, keep: int, cost_matters: bool) -> np.ndarray:
    """The motors worth searching: of every group of motors equal on every attribute the study
    reads (envelopes, maximum speed, rotor inertia, mass, ratings needs, loss model), only the
    ``keep`` cheapest (ties: part-id order) when cost matters, else the first ``keep`` in part-id
    order. Any other member is beaten or tied-and-outranked by ``keep`` members on every design
    (same feasibility, same objective or a better cost), so it can appear in no list of ``keep``
    best designs; with count = N the first N members of each group are kept.
    """
    motors = np.asarray(motors, dtype=np.int64)
    if motors.size == 0:
        return motors
    bits = equivalence_bits(parts, motors)
    h = np.zeros(motors.size, dtype=np.uint64)
    for c in range(bits.shape[1]):  # a 64-bit hash of each row (FNV-style mixing, wrapping arithmetic)
        h = (h ^ bits[:, c]) * np.uint64(0x100000001B3)
    cost = parts.motors.cost[motors] if cost_matters else np.zeros(motors.size)
    order = np.lexsort((motors, cost, h))
    b_sorted = bits[order]
    # a group starts where the row differs from the previous one (rows of equal hash are adjacent;
    # a hash collision can only split a group, which keeps more motors: never unsound)
    start = np.ones(order.size, dtype=bool)
    start[1:] = (b_sorted[1:] != b_sorted[:-1]).any(axis=1)
    first = np.maximum.accumulate(np.where(start, np.arange(order.size), 0))
    rank = np.arange(order.size) - first
    return np.sort(motors[order[rank < keep]])


EQUIVALENCE_COLUMNS = ("torque_nm", "power_w", "cont_torque_nm", "cont_power_w", "decline_rad_s",
                       "decline_exponent", "max_speed_rad_s", "rotor_inertia_kgm2", "mass_kg", "loss_copper",
                       "loss_iron", "loss_windage", "loss_constant", "map_index")
"""Motor attributes a single-unit study reads besides cost (equal on all: equivalent motors)."""


def equivalence_bits(parts: PartTables, motors) -> np.ndarray:
    """(n, c) uint64: the bit patterns of `EQUIVALENCE_COLUMNS` of ``motors`` (-0.0 as 0.0, one NaN),
    equal rows exactly when the motors are equal on every attribute the study reads."""
    mo = parts.motors
    motors = np.asarray(motors, dtype=np.int64)
    cols = [np.asarray(getattr(mo, c), dtype=float)[motors] for c in EQUIVALENCE_COLUMNS if getattr(mo, c) is not None]
    table = np.stack(cols, axis=1) + 0.0
    table = np.where(np.isnan(table), np.nan, table)
    return np.ascontiguousarray(table).view(np.uint64)


# ------------------------------------------------------------------------------------------ windows

def power_window(torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s, shaft_power_w):
    """Shaft speeds where the envelope's power w T(w) reaches ``shaft_power_w``: [w_lo, w_hi] [rad/s].

    P(w) = min(T w, P, P (w_d/w)^k) up to w_max rises, stays flat, then declines, so the set is an
    interval: w >= X/T, and w <= min(w_max, w_d (P/X)^(1/k)) (empty, lo > hi, when X > P).
    """
    x = np.asarray(shaft_power_w, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        lo = x / torque_nm
        hi = np.minimum(max_speed_rad_s, decline_rad_s * np.power(power_w / x, 1.0 / decline_exponent))
    hi = np.where(x <= power_w * (1 + 2 * REL_TOL), hi, -np.inf)
    return lo, hi


def requirement_window(parts: PartTables, use: Usable, motors, req, first_gear: bool,
                       accel_target_kmh: float | None = None):
    """Necessary L = ln(G/r) window [lo, hi] per motor from the requirements (see module docstring).

    ``first_gear`` True: the window of the first gear (gradeability, launch); False: the window some
    gear must lie in to reach the required sustained speed and ``accel_target_kmh`` (the acceleration
    run's target, when the run matters to the search).
    """
    mo = parts.motors
    motors = np.asarray(motors, dtype=np.int64)
    m_lo = lightest_mass_kg(parts, use, motors)
    eta = use.eta_max[motors]
    c = use.crr_min
    q = parts.q_n_s2_m2
    lo = np.full(motors.shape, -np.inf)
    hi = np.full(motors.shape, np.inf)
    tol = 1 + 4 * REL_TOL
    if not first_gear:
        for v_kmh, cont in ((req.top_speed_kmh, True), (accel_target_kmh, False)):
            if v_kmh is None:
                continue
            v = kmh_to_mps(v_kmh)
            need = v * (m_lo * G_N * c + q * v * v) / eta / tol
            w_lo, w_hi = power_window(mo.cont_torque_nm[motors] if cont else mo.torque_nm[motors],
                                      mo.cont_power_w[motors] if cont else mo.power_w[motors],
                                      mo.decline_rad_s[motors], mo.decline_exponent[motors],
                                      mo.max_speed_rad_s[motors] * tol, need)
            with np.errstate(divide="ignore", invalid="ignore"):
                lo = np.maximum(lo, np.log(w_lo / v))
                hi = np.minimum(hi, np.where(w_hi > 0, np.log(np.maximum(w_hi, 1e-300) / v), -np.inf))
        return lo, hi
    if req.gradeability_pct is not None:
        th = np.arctan(req.gradeability_pct / 100.0)
        need = m_lo * G_N * (c * np.cos(th) + np.sin(th)) / tol
        lo = np.maximum(lo, np.log(need / (eta * mo.torque_nm[motors])))
    if req.launch_accel_mps2 is not None:
        a = req.launch_accel_mps2
        j_eta = mo.rotor_inertia_kgm2[motors] * use.eta_min[motors]
        b = eta * mo.torque_nm[motors]
        cc = m_lo * (a + G_N * c) / tol
        # a J eta x^2 - eta T x + m (a + g Crr) <= 0, x = e^L
        disc = b * b - 4.0 * a * j_eta * cc
        with np.errstate(divide="ignore", invalid="ignore"):
            sq = np.sqrt(np.maximum(disc, 0.0))
            x1 = np.where(j_eta > 0, (2.0 * cc) / (b + sq), cc / b)  # the smaller root, stable form
            x2 = np.where(j_eta > 0, (b + sq) / (2.0 * a * j_eta), np.inf)
        x1 = np.where(disc >= 0, x1, np.inf)
        x2 = np.where(disc >= 0, x2, -np.inf)
        with np.errstate(divide="ignore"):
            lo = np.maximum(lo, np.log(x1))
            hi = np.minimum(hi, np.where(x2 > 0, np.log(np.maximum(x2, 1e-300)), -np.inf))
    return lo, hi


def traction_feasible(parts: PartTables, use: Usable, motors, req) -> np.ndarray:
    """False for motors with which no design can meet gradeability or launch by traction alone."""
    motors = np.asarray(motors, dtype=np.int64)
    ok = use.has_reducer[motors].copy()
    if req.gradeability_pct is None and req.launch_accel_mps2 is None:
        return ok
    share = max_driven_share(parts, parts.motors.mass_kg[motors],
                             (use.reducer_mass_min[motors], use.reducer_mass_max[motors]),
                             (use.tyre_mass_min, use.tyre_mass_max))
    tan = traction_tan_bound(parts, share, use.crr_min)
    if req.gradeability_pct is not None:
        ok &= 100.0 * tan >= req.gradeability_pct * (1 - 4 * REL_TOL)
    if req.launch_accel_mps2 is not None:
        ok &= G_N * tan >= req.launch_accel_mps2 * (1 - 4 * REL_TOL)
    return ok


# ------------------------------------------------------------------------------------------ acceleration

def riemann_speeds(target_mps, nodes: int = RIEMANN_NODES):
    """Left nodes v_k and widths of a partition of [0, V], graded towards V (1/a grows there) [m/s]."""
    s = 1.0 - (1.0 - np.arange(nodes + 1) / nodes) ** 2
    v = np.asarray(target_mps, dtype=float)[..., None] * s
    return v[..., :-1], np.diff(v, axis=-1)


def optimistic_time_s(torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s, rotor_inertia_kgm2,
                      eta_max, eta_min, mass_min_kg, mass_max_kg, crr_min, q_n_s2_m2, road_friction, driven_share_max,
                      hl, transfer_sign, l_a, l_b, target_mps, nodes: int = RIEMANN_NODES, gears_l=None):
    """Certified lower bound of the 0-to-target time over every single-unit design in the block [s].

    Block: a motor (envelope arrays), gears with L = ln(G/r) in [l_a, l_b], gearbox efficiency in
    [eta_min, eta_max], vehicle mass in [mass_min_kg, mass_max_kg], rolling resistance at least
    ``crr_min``, static driven-axle share at most ``driven_share_max``, ``hl`` = h/L and
    ``transfer_sign`` +1 for rear drive, -1 for front drive. All arguments broadcast to one shape
    (blocks); see the module docstring for the proof. The traction-limited acceleration per unit
    mass, (g (mu s - Crr) - q v^2/m) / (1 + J eta e^{2L}/m - sign mu h/L), is bounded above by taking
    s, Crr, m, eta and L at their extremes. inf when no design of the block can reach the target.

    ``gears_l`` (optional, shape (..., G), NaN beyond a design's gear count): the blocks are single
    designs with these gears (``l_a``, ``l_b`` ignored), and a_up(v) is the largest of the gears'
    own a_up(v) (each gear's block [L_g, L_g]), tighter than the hull's: at every moment the run is
    in one of its gears, or coasts through a shift (v' < 0 < a_up), and the maximum of
    non-increasing functions is non-increasing, so the same Riemann argument holds.
    """
    if gears_l is not None:
        g = np.asarray(gears_l, dtype=float)
        g = np.where(np.isnan(g), g[..., :1], g)  # a missing gear repeats the first (no new state)
        a_up = None
        for n_g in range(g.shape[-1]):
            a_g, dv = _accel_up(torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s,
                                rotor_inertia_kgm2, eta_max, eta_min, mass_min_kg, mass_max_kg, crr_min, q_n_s2_m2,
                                road_friction, driven_share_max, hl, transfer_sign, g[..., n_g], g[..., n_g],
                                target_mps, nodes)
            a_up = a_g if a_up is None else np.maximum(a_up, a_g)
    else:
        a_up, dv = _accel_up(torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s,
                             rotor_inertia_kgm2, eta_max, eta_min, mass_min_kg, mass_max_kg, crr_min, q_n_s2_m2,
                             road_friction, driven_share_max, hl, transfer_sign, l_a, l_b, target_mps, nodes)
    reach = (a_up > 0).all(axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (dv / a_up[..., :-1]).sum(axis=-1)
    return np.where(reach, t, np.inf)


def closed_form_time_s(force_n, accel_cap_mps2, power_w, mass_kg, target_mps):
    """Least 0-to-target time [s] of a vehicle whose acceleration is at most
    a_up(v) = min(force_n / mass_kg, accel_cap_mps2, power_w / (mass_kg v)) at every speed v (broadcast).

    a_up is non-increasing, and t = integral dv / a(v) >= integral dv / a_up(v), which is exact in
    closed form: constant acceleration a1 = min(F / m, a_cap) up to v1 = P / (m a1), then constant
    power (m v dv = P dt). inf where a1 <= 0 (the target is not reached).
    """
    v = np.asarray(target_mps, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        a1 = np.minimum(np.asarray(force_n, dtype=float) / mass_kg, accel_cap_mps2)
        v1 = power_w / (mass_kg * a1)
        t = np.where(v <= v1, v / a1, v1 / a1 + mass_kg * (v * v - v1 * v1) / (2.0 * power_w))
    return np.where(a1 > 0, t, np.inf)


def motor_closed_form_time_s(parts: PartTables, use: Usable, motors, l_hi, target_mps) -> np.ndarray:
    """`closed_form_time_s` of every single-unit design with ``motors`` whose gears all have L <= ``l_hi``
    (broadcast) [s]: a cheap, weaker relative of `optimistic_time_s` (no road load, no inertia).

    Force at most eta_max T_max e^{l_hi} (the envelope never exceeds its torque limit), wheel power
    at most eta_max P, mass at least the lightest design's, and the traction bound of
    `traction_tan_bound` times g (the same bound `optimistic_time_s` takes before its road-load and
    inertia terms, which only lower it).
    """
    mo = parts.motors
    motors = np.asarray(motors, dtype=np.int64)
    share = max_driven_share(parts, mo.mass_kg[motors], (use.reducer_mass_min[motors], use.reducer_mass_max[motors]),
                             (use.tyre_mass_min, use.tyre_mass_max))
    eta = use.eta_max[motors]
    a_cap = G_N * traction_tan_bound(parts, share, use.crr_min)
    return closed_form_time_s(eta * mo.torque_nm[motors] * np.exp(l_hi), a_cap, eta * mo.power_w[motors],
                              lightest_mass_kg(parts, use, motors), target_mps)


def _accel_up(torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s, rotor_inertia_kgm2,
              eta_max, eta_min, mass_min_kg, mass_max_kg, crr_min, q_n_s2_m2, road_friction, driven_share_max,
              hl, transfer_sign, l_a, l_b, target_mps, nodes):
    """(a_up at the Riemann nodes and the target, shape (..., nodes + 1) [m/s^2]; node widths (..., nodes)
    [m/s]) of the blocks of `optimistic_time_s`."""
    args = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (
        torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s, rotor_inertia_kgm2, eta_max, eta_min,
        mass_min_kg, mass_max_kg, crr_min, q_n_s2_m2, road_friction, driven_share_max, hl, transfer_sign, l_a, l_b,
        target_mps)))
    t_, p_, wd, k, wm, j, e_hi, e_lo, m, m_hi, c, q, mu, s_max, hl_, sg, la, lb, vt = (a[..., None] for a in args)
    target = np.asarray(target_mps, dtype=float)
    if target.ndim == 0:  # one target for every block: the nodes once, (nodes + 1,), broadcast below
        v, dv = riemann_speeds(target, nodes)
        vv = np.append(v, target)
    else:
        v, dv = riemann_speeds(args[-1], nodes)
        vv = np.concatenate([v, args[-1][..., None]], axis=-1)  # the target itself: a_up(V) > 0 is necessary
    ea, eb = np.exp(la), np.exp(lb)
    torque = envelope_torque_nm(vv * ea, t_, p_, wd, k, wm)
    # every gear: wheel power eta T(w) w <= eta P, the envelope's power limit; so the force is also
    # at most eta P / v (tighter than the L-hull product e^{L_b} T(v e^{L_a}) in the power region)
    with np.errstate(divide="ignore"):
        f_up = np.minimum(e_hi * eb * torque, np.where(vv > 0, e_hi * p_ / np.where(vv > 0, vv, 1.0), np.inf))
    f_res = m * G_N * c + q * vv * vv
    dj = j * e_lo * ea * ea
    m_eff = m + dj
    with np.errstate(divide="ignore", invalid="ignore"):
        den = 1.0 + dj / m_hi - sg * mu * hl_
        a_trac = np.where(den > 0, (G_N * (mu * s_max - c) - q * vv * vv / m_hi) / den, np.inf)
        a_up = np.minimum((f_up - f_res) / m_eff, a_trac)
    return a_up, dv


def motor_time_bound_s(parts: PartTables, use: Usable, motors, l_a, l_b, target_mps, mass_min_kg=None, eta_max=None,
                       crr_min=None, nodes: int = RIEMANN_NODES, mass_max_kg=None, driven_share_max=None,
                       gears_l=None):
    """`optimistic_time_s` of single-unit designs with ``motors`` and gears in [l_a, l_b] (broadcast) [s].

    ``gears_l`` (optional, (..., G), NaN beyond the gear count): single designs with these gears,
    bounded gear by gear instead of over their hull (see `optimistic_time_s`).

    ``mass_min_kg``, ``eta_max``, ``crr_min``, ``mass_max_kg``, ``driven_share_max`` (optional,
    broadcast): tighter extremes over the block's designs than the motor's usable parts give (e.g.
    over the pairs in an L cell, or one design's own values).
    """
    mo = parts.motors
    p = parts.problem
    motors = np.asarray(motors, dtype=np.int64)
    share = driven_share_max
    if share is None:
        share = max_driven_share(parts, mo.mass_kg[motors],
                                 (use.reducer_mass_min[motors], use.reducer_mass_max[motors]),
                                 (use.tyre_mass_min, use.tyre_mass_max))
    m_lo = lightest_mass_kg(parts, use, motors) if mass_min_kg is None else mass_min_kg
    m_hi = heaviest_mass_kg(parts, use, motors) if mass_max_kg is None else mass_max_kg
    return optimistic_time_s(mo.torque_nm[motors], mo.power_w[motors], mo.decline_rad_s[motors],
                             mo.decline_exponent[motors], mo.max_speed_rad_s[motors], mo.rotor_inertia_kgm2[motors],
                             use.eta_max[motors] if eta_max is None else eta_max, use.eta_min[motors], m_lo,
                             m_hi, use.crr_min if crr_min is None else crr_min,
                             parts.q_n_s2_m2, p.environment.road_friction, share,
                             p.vehicle.cg_height_m / p.vehicle.wheelbase_m, 1.0 if parts.rear_drive else -1.0,
                             l_a, l_b, target_mps, nodes, gears_l=gears_l)
