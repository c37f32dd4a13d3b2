"""Per-motor optimistic acceleration bounds used by the optimiser.

Acceleration time is not linearised. Instead, for each motor, an *optimistic* time t_i(L) is
computed as a function of L = ln(G/r) only: lightest mass with that motor, best reducer
efficiency for the force, least rotor inertia, lowest rolling resistance, and a traction bound
from the largest driven-axle share any reducer/tyre gives with that motor. Every real design
with motor i and log-gearing L takes at least t_i(L). The optimiser then bounds L by the
widest window where t_i(L) meets the target, and (for the accel_time objective) uses
min_L t_i(L) as motor i's lower bound.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from selector.engine.parts import PartTables
from selector.physics.performance import Body, Drive, accel_time_s
from selector.requirements import REL_TOL
from selector.units import G_N

GRID_POINTS = 24
"""Grid of L values on which t_i(L) is sampled before refinement [-]."""
SUB_POINTS = 8
"""Samples per refinement bracket [-]."""
REFINE_LEVELS = 3
"""Nested refinement levels (each shrinks a bracket by (SUB_POINTS - 1) / 2) [-]."""
BOUND_NODES = 12
"""Gauss-Legendre nodes per piece for optimistic times (max relative error seen ~3e-4, on
near-singular runs; covered by `BOUND_SAFETY`) [-]."""
BOUND_SAFETY = 1e-3
"""Relative safety on optimistic times: windows admit t <= limit (1 + this), minima are lowered
by this factor [-]. Covers quadrature error and sampling of a smooth minimum; the common kinked
minimum (time falling until the gearing limit) is sampled exactly at L_gear."""


@dataclass(frozen=True)
class AccelWindows:
    """Per motor: L window [lo, hi] (lo > hi when empty) and the optimistic minimum time [s]."""

    lo: np.ndarray
    hi: np.ndarray
    t_min_s: np.ndarray


def log_gearing_range(parts: PartTables) -> tuple[float, float]:
    """Smallest and largest L = ln(G/r) over the catalogue [ln(1/m)]."""
    lg = np.log(parts.reducers.ratio)
    lr = np.log(parts.tyres.radius_m)
    return float(lg.min() - lr.max()), float(lg.max() - lr.min())


@dataclass(frozen=True)
class _Usable:
    """Per-motor extremes over the parts a feasible design with that motor can use."""

    has_reducer: np.ndarray
    """Motor i has at least one reducer rated for its torque and speed."""
    eta_max: np.ndarray
    eta_min: np.ndarray
    reducer_mass_min: np.ndarray
    reducer_mass_max: np.ndarray
    tyre_mass_min: float
    tyre_mass_max: float
    crr_min: float


def _usable(parts: PartTables) -> _Usable:
    """Reducers rated for each motor (the staircase rule), and tyres whose load index can carry
    at least the lightest possible axle share (every feasible design uses such parts)."""
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    v = parts.problem.vehicle
    ok = ((mo.torque_nm[:, None] <= re.max_torque_nm[None, :] * (1 + 2 * REL_TOL))
          & (mo.max_speed_rad_s[:, None] <= re.max_speed_rad_s[None, :] * (1 + 2 * REL_TOL)))
    has = ok.any(axis=1)
    eta = np.where(ok, re.efficiency[None, :], np.nan)
    mass = np.where(ok, re.mass_kg[None, :], np.nan)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN rows: motors without a reducer
        eta_max, eta_min = np.nanmax(eta, axis=1), np.nanmin(eta, axis=1)
        mr_min, mr_max = np.nanmin(mass, axis=1), np.nanmax(mass, axis=1)
    # the heavier static axle carries at least max(s, 1 - s) of mass_kg (parts only add to it)
    least_load = max(v.rear_axle_share, 1.0 - v.rear_axle_share) * v.mass_kg / (0.5 * v.tyre_count)
    tyre_ok = ty.load_capacity_kg >= least_load * (1 - 2 * REL_TOL)
    if not tyre_ok.any():
        tyre_ok = np.ones_like(tyre_ok)  # no tyre can work; keep the bounds defined (the model is infeasible)
    fill = lambda a, x: np.where(has, a, x)  # noqa: E731
    return _Usable(has_reducer=has, eta_max=fill(eta_max, re.efficiency.max()),
                   eta_min=fill(eta_min, re.efficiency.min()), reducer_mass_min=fill(mr_min, re.mass_kg.min()),
                   reducer_mass_max=fill(mr_max, re.mass_kg.max()), tyre_mass_min=float(ty.mass_kg[tyre_ok].min()),
                   tyre_mass_max=float(ty.mass_kg[tyre_ok].max()), crr_min=float(ty.crr[tyre_ok].min()))


def max_driven_share(parts: PartTables, motor_mass_kg, reducer_mass_kg, tyre_mass_kg) -> np.ndarray:
    """Largest static driven-axle share per motor mass, over ranges of reducer and tyre masses [-].

    The share is linear-fractional in (reducer mass, tyre mass), so its maximum over the box
    [min, max] x [min, max] of the given masses is at a vertex.

    Parameters
    ----------
    motor_mass_kg : motor masses [kg] (array: one result each)
    reducer_mass_kg, tyre_mass_kg : (lowest, highest) masses, scalars or per-motor arrays [kg]
    """
    v = parts.problem.vehicle
    n = v.tyre_count
    share0 = v.rear_axle_share if parts.rear_drive else 1.0 - v.rear_axle_share
    mm = np.asarray(motor_mass_kg, dtype=float)
    best = np.full(mm.shape, -np.inf)
    for mr in reducer_mass_kg:
        for mt in tyre_mass_kg:
            driven = share0 * v.mass_kg + mm + mr + 0.5 * n * mt
            best = np.maximum(best, driven / (v.mass_kg + mm + mr + n * mt))
    return best


def traction_tan_bound(parts: PartTables, driven_share, crr):
    """tan(theta) = (mu s - Crr) / (1 -+ mu h/L): the steepest grade the driven axle can climb, and
    (times g) the largest launch acceleration it can transmit with m_eff >= m [-].

    Rear drive takes the minus sign. When 1 - mu h/L <= 0 the axle is not traction-limited in
    this bound: +inf (an upper bound in every case, which is all its users need).
    """
    p = parts.problem
    mu = p.environment.road_friction
    hl = p.vehicle.cg_height_m / p.vehicle.wheelbase_m
    den = 1.0 - mu * hl if parts.rear_drive else 1.0 + mu * hl
    num = mu * np.asarray(driven_share, dtype=float) - crr
    if den > 0:
        return num / den
    return np.full(num.shape, np.inf) if num.shape else np.inf


def _optimistic_designs(parts: PartTables, motors: np.ndarray, log_g: np.ndarray):
    """Drive, Body and traction bound of optimistic designs (motor, L) (flattened pairs)."""
    p = parts.problem
    v, env = p.vehicle, p.environment
    mo = parts.motors
    use = parts.cache.get("usable")
    if use is None:
        use = parts.cache["usable"] = _usable(parts)
    eta_max, eta_min = use.eta_max[motors], use.eta_min[motors]
    c_min = use.crr_min
    m_min = v.mass_kg + mo.mass_kg[motors] + use.reducer_mass_min[motors] + v.tyre_count * use.tyre_mass_min
    drive = Drive(torque_nm=mo.torque_nm[motors], power_w=mo.power_w[motors],
                  cont_torque_nm=mo.cont_torque_nm[motors], cont_power_w=mo.cont_power_w[motors],
                  decline_rad_s=mo.decline_rad_s[motors], decline_exponent=mo.decline_exponent[motors],
                  max_speed_rad_s=mo.max_speed_rad_s[motors],
                  rotor_inertia_kgm2=mo.rotor_inertia_kgm2[motors] * eta_min / eta_max,
                  ratio=np.exp(log_g), efficiency=eta_max, radius_m=1.0)
    body = Body(mass_kg=m_min, rear_share=0.5, crr=c_min, q_n_s2_m2=parts.q_n_s2_m2,
                road_friction=env.road_friction, cg_height_m=v.cg_height_m, wheelbase_m=v.wheelbase_m,
                rear_drive=parts.rear_drive, wheel_inertia_total_kgm2=0.0, speed_limit_mps=parts.speed_limit_mps)
    share = max_driven_share(parts, mo.mass_kg[motors],
                             (use.reducer_mass_min[motors], use.reducer_mass_max[motors]),
                             (use.tyre_mass_min, use.tyre_mass_max))
    cap = G_N * traction_tan_bound(parts, share, c_min)
    # a motor no reducer is rated for has no feasible design: no finite time
    cap = np.where(use.has_reducer[motors], cap, -np.inf)
    return drive, body, cap


def optimistic_time_s(parts: PartTables, motors, log_g, target_mps) -> np.ndarray:
    """Optimistic 0-to-target time of motor(s) ``motors`` at log-gearing ``log_g`` [s] (lower bound)."""
    motors, log_g = np.broadcast_arrays(np.asarray(motors, dtype=np.int64), np.asarray(log_g, dtype=float))
    shape = motors.shape
    drive, body, cap = _optimistic_designs(parts, motors.ravel(), log_g.ravel())
    return accel_time_s(drive, body, target_mps, traction_accel_bound_mps2=cap, nodes=BOUND_NODES).reshape(shape)


def accel_windows(parts: PartTables, target_mps: float, time_limit_s: float | None,
                  motors=None) -> AccelWindows:
    """Window of L per motor where the optimistic time meets ``time_limit_s`` (None: finite time).

    t_i(L) is sampled on a grid over the catalogue's L range, then refined by nested grids
    around the minimum and around both edges of the feasible set (each level shrinks the bracket
    to two sub-steps). The window is the hull of every sampled point that meets the limit,
    widened to the nearest sampled point that does not (so it only errs on the wide side, which
    keeps the model a relaxation). Exact when the feasible set is an interval (t_i(L)
    quasi-convex, the usual case: time falls with L until the gearing limit bites); a feasible
    island narrower than the grid spacing away from the minimum could be missed (documented).
    The optimistic minimum time is the smallest sample, lowered by `BOUND_SAFETY`. ``motors``
    restricts the work to some motors (positions); the others get empty windows.
    """
    n_all = parts.sizes[0]
    motors = np.arange(n_all) if motors is None else np.asarray(motors, dtype=np.int64)
    rows = np.arange(motors.size)
    l_lo, l_hi = log_gearing_range(parts)
    pad = 1e-6
    grid = np.linspace(l_lo - pad, l_hi + pad, GRID_POINTS)
    limit = np.inf if time_limit_s is None else time_limit_s * (1 + BOUND_SAFETY)
    t = optimistic_time_s(parts, motors[:, None], grid[None, :], target_mps)  # (motors, G)
    ok = t <= limit
    any_ok = ok.any(axis=1)
    best = np.argmin(t, axis=1)
    t_best = t[rows, best]
    # brackets [a, b] to refine: around the minimum, and across each edge of the feasible set
    first = np.argmax(ok, axis=1)
    last = GRID_POINTS - 1 - np.argmax(ok[:, ::-1], axis=1)
    step = grid[1] - grid[0]
    lo = np.where(any_ok, grid[first] - step, np.inf)   # widened to the neighbouring sample
    hi = np.where(any_ok, grid[last] + step, -np.inf)
    brackets = {
        "min": (grid[np.maximum(best - 1, 0)], grid[np.minimum(best + 1, GRID_POINTS - 1)]),
        "lo": (np.maximum(grid[first] - step, grid[0]), grid[first]),
        "hi": (grid[last], np.minimum(grid[last] + step, grid[-1])),
    }
    min_bracket0 = brackets["min"]
    grid_ok = any_ok.copy()
    frac = np.linspace(0.0, 1.0, SUB_POINTS)[None, :]
    for _ in range(REFINE_LEVELS):
        pts = {k: a[:, None] + (b - a)[:, None] * frac for k, (a, b) in brackets.items()}
        allp = np.concatenate([pts["min"], pts["lo"], pts["hi"]], axis=1)
        tt = optimistic_time_s(parts, motors[:, None], allp, target_mps)
        t_min_pts, t_lo_pts, t_hi_pts = np.split(tt, 3, axis=1)
        # minimum
        k = np.argmin(t_min_pts, axis=1)
        t_best = np.minimum(t_best, t_min_pts[rows, k])
        p = pts["min"]
        brackets["min"] = (p[rows, np.maximum(k - 1, 0)], p[rows, np.minimum(k + 1, SUB_POINTS - 1)])
        # lower edge: first feasible sample in the bracket, keep its infeasible left neighbour
        okl = t_lo_pts <= limit
        fl = np.argmax(okl, axis=1)
        has = okl.any(axis=1)
        p = pts["lo"]
        left = p[rows, np.maximum(fl - 1, 0)]
        lo = np.where(has, left, lo)
        brackets["lo"] = (left, p[rows, fl])
        # upper edge
        okh = t_hi_pts <= limit
        lh = SUB_POINTS - 1 - np.argmax(okh[:, ::-1], axis=1)
        has = okh.any(axis=1)
        p = pts["hi"]
        right = p[rows, np.minimum(lh + 1, SUB_POINTS - 1)]
        hi = np.where(has, right, hi)
        brackets["hi"] = (p[rows, lh], right)
    # a minimum that meets the limit where no grid point did: the feasible set lies between the
    # infeasible grid neighbours of the minimum
    star_only = (t_best <= limit) & ~grid_ok
    lo = np.where(star_only, min_bracket0[0], lo)
    hi = np.where(star_only, min_bracket0[1], hi)
    ok_final = grid_ok | star_only
    lo = np.where(ok_final, lo - pad, np.inf)
    hi = np.where(ok_final, hi + pad, -np.inf)
    # time often falls with L right up to the gearing limit L_gear = ln(w_max / V): sample it
    l_gear = np.log(parts.motors.max_speed_rad_s[motors] / target_mps) * (1 - 1e-13)
    in_range = (l_gear >= grid[0]) & (l_gear <= grid[-1])
    t_gear = optimistic_time_s(parts, motors, np.where(in_range, l_gear, grid[0]), target_mps)
    t_best = np.where(in_range, np.minimum(t_best, t_gear), t_best)
    gear_only = in_range & (t_gear <= limit) & ~ok_final
    lo = np.where(gear_only, l_gear - step - pad, lo)
    hi = np.where(gear_only, l_gear + pad, hi)
    t_min = np.where(np.isfinite(t_best), t_best * (1 - BOUND_SAFETY), np.inf)
    full = AccelWindows(lo=np.full(n_all, np.inf), hi=np.full(n_all, -np.inf), t_min_s=np.full(n_all, np.inf))
    full.lo[motors], full.hi[motors], full.t_min_s[motors] = lo, hi, t_min
    return full
