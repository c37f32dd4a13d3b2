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

from dataclasses import dataclass

import numpy as np

from .parts import PartTables
from .physics.performance import Body, Drive, accel_time_s
from .units import G_N

GRID_POINTS = 64
"""Grid of L values on which t_i(L) is sampled before refinement [-]."""
REFINE_STEPS = 30
"""Bisection / golden-section steps refining window edges and minima [-]."""


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


def _max_driven_share(parts: PartTables) -> np.ndarray:
    """Largest static driven-axle share over reducers and tyres, per motor [-].

    The share is linear-fractional in (reducer mass, tyre mass), so its maximum over the box of
    catalogue masses is at a vertex.
    """
    v = parts.problem.vehicle
    n = v.tyre_count
    share0 = v.rear_axle_share if parts.rear_drive else 1.0 - v.rear_axle_share
    mm = parts.motors.mass_kg
    best = np.full(mm.shape, -np.inf)
    for mr in (parts.reducers.mass_kg.min(), parts.reducers.mass_kg.max()):
        for mt in (parts.tyres.mass_kg.min(), parts.tyres.mass_kg.max()):
            driven = share0 * v.mass_kg + mm + mr + 0.5 * n * mt
            total = v.mass_kg + mm + mr + n * mt
            best = np.maximum(best, driven / total)
    return best


def _optimistic_designs(parts: PartTables, motors: np.ndarray, log_g: np.ndarray):
    """Drive, Body and traction bound of optimistic designs (motor, L) (flattened pairs)."""
    p = parts.problem
    v, env = p.vehicle, p.environment
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    eta_max, eta_min = re.efficiency.max(), re.efficiency.min()
    c_min = ty.crr.min()
    m_min = v.mass_kg + mo.mass_kg[motors] + re.mass_kg.min() + v.tyre_count * ty.mass_kg.min()
    drive = Drive(torque_nm=mo.torque_nm[motors], power_w=mo.power_w[motors],
                  cont_torque_nm=mo.cont_torque_nm[motors], cont_power_w=mo.cont_power_w[motors],
                  decline_rad_s=mo.decline_rad_s[motors], decline_exponent=mo.decline_exponent[motors],
                  max_speed_rad_s=mo.max_speed_rad_s[motors],
                  rotor_inertia_kgm2=mo.rotor_inertia_kgm2[motors] * eta_min / eta_max,
                  ratio=np.exp(log_g), efficiency=eta_max, radius_m=1.0)
    body = Body(mass_kg=m_min, rear_share=0.5, crr=c_min, q_n_s2_m2=parts.q_n_s2_m2,
                road_friction=env.road_friction, cg_height_m=v.cg_height_m, wheelbase_m=v.wheelbase_m,
                rear_drive=parts.rear_drive, wheel_inertia_total_kgm2=0.0, speed_limit_mps=parts.speed_limit_mps)
    hl = v.cg_height_m / v.wheelbase_m
    mu = env.road_friction
    den = 1.0 - mu * hl if parts.rear_drive else 1.0 + mu * hl
    share = _max_driven_share(parts)[motors]
    cap = np.where(den > 0, (mu * G_N * share - G_N * c_min) / den if den > 0 else np.inf, np.inf)
    return drive, body, cap


def optimistic_time_s(parts: PartTables, motors, log_g, target_mps) -> np.ndarray:
    """Optimistic 0-to-target time of motor(s) ``motors`` at log-gearing ``log_g`` [s] (lower bound)."""
    motors, log_g = np.broadcast_arrays(np.asarray(motors, dtype=np.int64), np.asarray(log_g, dtype=float))
    shape = motors.shape
    drive, body, cap = _optimistic_designs(parts, motors.ravel(), log_g.ravel())
    return accel_time_s(drive, body, target_mps, traction_accel_bound_mps2=cap).reshape(shape)


def accel_windows(parts: PartTables, target_mps: float, time_limit_s: float | None) -> AccelWindows:
    """Window of L per motor where the optimistic time meets ``time_limit_s`` (None: finite time).

    The window is the hull of the grid points that meet the limit and of the refined minimiser,
    extended outward by bisection to the edge of feasibility. This is exact when t_i(L) is
    quasi-convex in L (constant-torque/power envelopes: time falls with L until the gearing
    limit bites); a feasible island narrower than the grid spacing away from the minimum could be
    missed (documented limitation).
    """
    n_m = parts.sizes[0]
    l_lo, l_hi = log_gearing_range(parts)
    pad = 1e-6
    grid = np.linspace(l_lo - pad, l_hi + pad, GRID_POINTS)
    motors = np.arange(n_m)
    t = optimistic_time_s(parts, motors[:, None], grid[None, :], target_mps)  # (n_m, G)
    limit = np.inf if time_limit_s is None else time_limit_s * (1 + 1e-7)

    # Golden-section refinement of the minimum around the best grid point.
    best = np.argmin(t, axis=1)
    a = grid[np.maximum(best - 1, 0)]
    b = grid[np.minimum(best + 1, GRID_POINTS - 1)]
    gr = (np.sqrt(5) - 1) / 2
    c = b - gr * (b - a)
    d = a + gr * (b - a)
    fc = optimistic_time_s(parts, motors, c, target_mps)
    fd = optimistic_time_s(parts, motors, d, target_mps)
    for _ in range(REFINE_STEPS):
        left = fc < fd  # minimum in [a, d]: drop (d, b]
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        x_new = np.where(left, b - gr * (b - a), a + gr * (b - a))
        f_new = optimistic_time_s(parts, motors, x_new, target_mps)
        c, d, fc, fd = (np.where(left, x_new, d), np.where(left, c, x_new),
                        np.where(left, f_new, fd), np.where(left, fc, f_new))
    l_star = np.where(fc < fd, c, d)
    t_star = np.minimum(np.minimum(fc, fd), t[np.arange(n_m), best])
    l_star = np.where(t[np.arange(n_m), best] <= np.minimum(fc, fd), grid[best], l_star)

    ok_grid = t <= limit
    star_ok = t_star <= limit
    any_ok = ok_grid.any(axis=1) | star_ok
    first = np.where(ok_grid.any(axis=1), grid[np.argmax(ok_grid, axis=1)], np.inf)
    last = np.where(ok_grid.any(axis=1), grid[GRID_POINTS - 1 - np.argmax(ok_grid[:, ::-1], axis=1)], -np.inf)
    lo = np.where(star_ok, np.minimum(first, l_star), first)
    hi = np.where(star_ok, np.maximum(last, l_star), last)
    # Extend each edge outward to the next infeasible grid point by bisection.
    step = grid[1] - grid[0]
    lo = np.where(any_ok, lo, grid[0])
    hi = np.where(any_ok, hi, grid[0])
    for edge, direction in ((lo, -1.0), (hi, 1.0)):
        inside = edge.copy()
        outside = edge + direction * step
        active = any_ok & (outside >= grid[0]) & (outside <= grid[-1])
        for _ in range(REFINE_STEPS):
            mid = 0.5 * (inside + outside)
            tm = optimistic_time_s(parts, motors, np.where(active, mid, inside), target_mps)
            good = tm <= limit
            inside = np.where(active & good, mid, inside)
            outside = np.where(active & ~good, mid, outside)
        # keep the outer point: the window may only grow (a relaxation)
        edge[:] = np.where(active, outside, np.where(any_ok, edge + direction * step, edge))
    lo = np.where(any_ok, lo - pad, np.inf)
    hi = np.where(any_ok, hi + pad, -np.inf)
    t_min = np.where(np.isfinite(t_star), t_star * (1 - 1e-7), np.inf)
    return AccelWindows(lo=lo, hi=hi, t_min_s=t_min)
