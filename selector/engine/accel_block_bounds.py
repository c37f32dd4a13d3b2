"""Certified acceleration-time bounds of two-unit block pairs (read by `selector.engine.accel_blocks`).

A block holds the designs (front option, rear option, tyre) with the front option in one set and the
rear option in another, at one tyre. What the bound needs of each set: an upper bound of every
option's wheel force at the speed nodes (``env``), the least and largest option mass and the least
reflected rotor inertia. `option_force_profile` gives an option's own best-gear wheel force at the
nodes; a set's envelope is the largest over its options (or, for large sets, the cheaper
min(A, B / v) of `accel_blocks`).

Proof. At every speed the run's acceleration is at most the least of the four traction
combinations' accelerations (`selector.physics.drivetrain.combination_accels`) in the gear state it
is in; each combination grows with the units' wheel forces and each force is at most the best-gear
force at that speed, so with the set envelopes in place of the forces and the masses and inertias
taken at their worst for the bound (below), ``a_up(v_i)`` bounds the acceleration of every design of
the block and of every gear state (a unit disengaged in its shift gives no force). Within one gear
state the acceleration is non-increasing in v (`selector.physics.accel_bounds`), so on
[v_i, v_i+1] it is at most a_up(v_i) whatever gear the run is in, and the left Riemann sum of
dv / a_up is at most the run's time (the time the run spends coasting through shifts only adds).
Where a_up <= 0 at a node no design of the block can pass that speed (the bound is inf): each
numerator below bounds the designs' numerators from above, so where it is <= 0 theirs are too.

Mass terms, with m in [m_lo, m_hi] and m_eff = m + dJ, dJ >= dJ_min (least rotor terms plus the
wheels):

- both motor-limited, (F_f + F_r - m g c_rr - q v^2) / m_eff: decreasing in m wherever it is
  positive, so m_lo and dJ_min;
- one axle traction-limited: (mu W_axle + F_other - F_res) / (m_eff (1 -+ kappa)), m_eff (1 -+ kappa)
  = m (1 -+ mu h / L) + dJ, with the largest static axle weight, the least road load and the least
  denominator (linear in m: the lesser of its values at m_lo and m_hi; where that is <= 0 the
  combination sets no bound, as in the exact physics);
- both traction-limited, (m g (mu - c_rr) - q v^2) / m_eff: for fixed m largest at dJ_min where it
  is positive; (m c - d) / (m + e) is monotone in m (its derivative has the sign of c e + d), so the
  larger of its values at m_lo and m_hi bounds it over the block.

The sum is finally multiplied by 1 - `MULTI_BOUND_SAFETY` (the run's shift phases are fixed-step
integrations that may lie that far below the exact integral, see `selector.physics.accel_bounds`).
"""

from __future__ import annotations

import numpy as np

from selector.physics.accel_bounds import MULTI_BOUND_SAFETY
from selector.physics.drivetrain import best_gear_force_n
from selector.units import G_N

BOUND_ROWS = 2048
"""Rows (blocks or designs) of one bound computation [-]: its dozen temporaries of rows x (nodes + 1)
floats then stay within the processor's cache (about 0.8 MB each). Measured on the vineyard AWD
frontier's per-design bounds (400,000 designs, idle 2-core machine): about 1.05 us per design at
1,024-2,048 rows, 1.3-4.2 us at 8,192 (page faults of large temporaries, memory traffic)."""


def option_force_profile(parts, options: np.ndarray, radius_m: np.ndarray, speeds_mps: np.ndarray) -> np.ndarray:
    """Best-gear wheel force of (motor, reducer) options ``options`` (n, 2) on tyres of radius
    ``radius_m`` (n,) at the speeds (s,), (n, s) [N] (0 above every gear's limit)."""
    unit = parts.unit(options[:, 0], options[:, 1])
    v = np.broadcast_to(np.asarray(speeds_mps, dtype=float)[None, :], (options.shape[0], np.size(speeds_mps)))
    return best_gear_force_n(unit, np.asarray(radius_m, dtype=float), v)


def block_time_bounds(search, kk, env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min,
                      every: int = 1) -> np.ndarray:
    """Certified acceleration-time bound of blocks at tyre column kk (see the module docstring) [s].

    ``env_f`` (blocks, nodes + 1): upper bounds of every front option's wheel force at the speed nodes
    `search.nodes()` [N]; ``mf_min``, ``mf_max``: least and largest front option mass [kg];
    ``jf_min``: least reflected front rotor inertia [kg]; likewise the rear. With ``every`` > 1 only
    every ``every``-th speed node is used (``env_f``, ``env_r`` given at those nodes): a coarser
    partition, cheaper and still a lower bound (a_up at a node bounds the acceleration up to the next
    one; where ``every`` does not divide the node count the partition stops short of the target,
    which only lowers the sum).
    """
    kk = np.asarray(kk)
    n = kk.size
    if n <= BOUND_ROWS:
        return _block_time_bounds(search, kk, env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min, every)
    out = np.empty(n)
    args = [np.broadcast_to(np.asarray(a, dtype=float), (n,) + np.shape(a)[1:]) if np.ndim(a) else a
            for a in (env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min)]
    for s0 in range(0, n, BOUND_ROWS):
        sl = slice(s0, s0 + BOUND_ROWS)
        out[sl] = _block_time_bounds(search, kk[sl], *(a[sl] if np.ndim(a) else a for a in args), every)
    return out


def _block_time_bounds(search, kk, env_f, mf_min, mf_max, jf_min, env_r, mr_min, mr_max, jr_min, every):
    """`block_time_bounds` of at most `BOUND_ROWS` rows."""
    p = search.parts
    v = p.problem.vehicle
    env = p.problem.environment
    ty = p.tyres
    k = search.tyres[kk]
    n = v.tyre_count
    vv = search.nodes()[None, ::every]
    dv = np.diff(vv, axis=1)
    col = lambda a: np.asarray(a, dtype=float)[:, None]  # noqa: E731
    m_lo = col(v.mass_kg + mf_min + mr_min + n * ty.mass_kg[k])
    m_hi = col(v.mass_kg + mf_max + mr_max + n * ty.mass_kg[k])
    crr = col(ty.crr[k])
    drag = p.q_n_s2_m2 * vv * vv
    f_res = m_lo * G_N * crr + drag
    dj = col(jf_min + jr_min + n * v.wheel_inertia_kgm2 / ty.radius_m[k] ** 2)
    m_eff = m_lo + dj
    mu = env.road_friction
    hl = v.cg_height_m / v.wheelbase_m
    half = 0.5 * n * ty.mass_kg[k]
    w_f_max = col(G_N * ((1.0 - v.rear_axle_share) * v.mass_kg + half + mf_max))
    w_r_max = col(G_N * (v.rear_axle_share * v.mass_kg + half + mr_max))
    with np.errstate(divide="ignore", invalid="ignore"):
        mm = (env_f + env_r - f_res) / m_eff
        tm = (mu * w_f_max + env_r - f_res) / (m_eff + mu * m_lo * hl)
        den_mt = np.minimum(m_lo * (1.0 - mu * hl), m_hi * (1.0 - mu * hl)) + dj
        mt = np.where(den_mt > 0, (env_f + mu * w_r_max - f_res) / den_mt, np.inf)
        tt = np.maximum((m_lo * G_N * (mu - crr) - drag) / (m_lo + dj), (m_hi * G_N * (mu - crr) - drag) / (m_hi + dj))
    a_up = np.minimum(np.minimum(mm, tm), np.minimum(mt, tt))
    reach = (a_up > 0).all(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = (dv / a_up[:, :-1]).sum(axis=1)
    return np.where(reach, t * (1.0 - MULTI_BOUND_SAFETY), np.inf)
