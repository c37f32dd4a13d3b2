"""Maximum and sustained top speed of designs with one or two drive units and multi-speed gearboxes.

- One unit, one gear: min(gearing limit w_max r/G, the speed where the envelope's wheel force meets
  the level road load, speed limiter); the crossing in closed form (torque branch), by the cubic's
  real root (power branch) and by Newton's method in ln v (decline branch).
- One unit, several gears: the highest speed any gear reaches, max over g of min(limit_g, crossing_g).
- Two units: the largest speed at which the sum of both units' best-gear forces covers the road load,
  capped by the lowest of the two units' tallest-gear gearing limits (no unit may over-speed); the
  summed force is non-increasing and the road load increasing, so the crossing is unique and found
  by bisection to floating-point resolution.

The sustained top speed is the same with the continuous envelopes (best gear on the continuous
envelope). All speeds in m/s; every function is vectorised over designs.
"""

from __future__ import annotations

import numpy as np

from selector.physics.drivetrain import (
    Axles,
    best_gear_force_n,
    gear_limit_mps,
    gear_over_radius,
    speed_cap_mps,
    take_axles,
    take_fields,
)
from selector.units import G_N

NEWTON_STEPS = 40
"""Newton iterations for the decline-branch crossing, at most (converges to machine precision far sooner) [-]."""
NEWTON_ULPS = 4
"""The decline-branch Newton iteration stops when no step exceeds this many units in the last place of
ln v (the relative error of v is then a few 1e-16) [-]."""
BISECT_STEPS = 4 * 64
"""Iterations of the two-unit crossing: every fourth bisects, so 64 halvings at least (2^-64 of the
bracket: below floating-point resolution of the cap's 1e-15 stop) [-]."""


def _cubic_root(a0, q, p_force):
    """Positive real root v of q v^3 + a0 v - p_force = 0 (q > 0, a0 >= 0, p_force >= 0)."""
    p = a0 / q
    s = p_force / q
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ps = np.maximum(p, 1e-300)
        arg = 1.5 * s / ps * np.sqrt(3.0 / ps)
        v_trig = 2.0 * np.sqrt(ps / 3.0) * np.sinh(np.arcsinh(arg) / 3.0)
    v_cbrt = np.cbrt(s)
    return np.where((p <= 0) | ~np.isfinite(v_trig), v_cbrt, v_trig)


def envelope_crossing_mps(e, eta, torque_nm, power_w, decline_rad_s, decline_exponent, a0_n, q_n_s2_m2):
    """Speed where one gear's envelope wheel force equals the level road load a0 + q v^2 [m/s].

    The envelope is the minimum of three decreasing branches (torque, power, decline) and road load
    increases with speed, so the crossing is the smallest of the three branch crossings: torque in
    closed form, power by the cubic's real root, decline by Newton's method in ln v. Ignores the
    gearing limit. 0 if the vehicle cannot move.

    Parameters
    ----------
    e : G/r [1/m]
    eta : gearbox efficiency [-]
    torque_nm, power_w : envelope torque and power limits [N m], [W]
    decline_rad_s, decline_exponent : decline speed [rad/s] and exponent [-]
    a0_n : speed-independent road load m g Crr [N]
    q_n_s2_m2 : 0.5 rho CdA [N s^2/m^2]
    """
    a0, q = a0_n, q_n_s2_m2
    f_t = eta * torque_nm * e
    with np.errstate(divide="ignore", invalid="ignore"):
        v_t = np.sqrt(np.maximum(f_t - a0, 0.0) / q)
    v_p = _cubic_root(a0, q, eta * power_w)
    # Decline branch: f(u) = C - (k+1) u - ln(a0 + q e^{2u}) = 0, u = ln v; f decreasing, concave.
    k = decline_exponent
    c0 = np.log(eta * power_w) + k * np.log(decline_rad_s) - k * np.log(e)
    u = np.log(np.maximum(v_p, 1e-12))
    f0 = c0 - (k + 1) * u - np.log(a0 + q * np.exp(2 * u))
    active = f0 < 0  # otherwise the decline crossing lies beyond the power crossing
    for _ in range(NEWTON_STEPS):
        ex = q * np.exp(2 * u)
        f = c0 - (k + 1) * u - np.log(a0 + ex)
        fp = -(k + 1) - 2 * ex / (a0 + ex)
        u_next = np.where(active, u - f / fp, u)
        step = np.abs(u_next - u)
        u = u_next
        # converged to rounding: quadratic convergence takes a 1e-8 step to ~1e-16, and at that
        # level Newton can alternate between neighbouring floats for ever
        if not (step > NEWTON_ULPS * np.finfo(float).eps * np.maximum(np.abs(u), 1.0)).any():
            break
    v_d = np.where(active, np.exp(u), np.inf)
    return np.minimum(np.minimum(v_t, v_p), v_d)


def _level_a0(body):
    return body.mass_kg * G_N * body.crr


def unit_reach_mps(axles: Axles, body, unit_name: str, continuous: bool = False) -> np.ndarray:
    """Highest speed one unit alone drives the vehicle to: max over its gears of min(limit_g, crossing_g) [m/s].

    Without the speed limiter; 0 where the unit is absent.
    """
    unit = getattr(axles, unit_name)
    a0 = _level_a0(body)
    best = np.zeros(axles.n)
    for g in range(unit.ratio.shape[1]):
        has = unit.n_gears > g
        if not has.any():
            break
        gi = np.where(has, g, 0)
        ratio, eta = unit.gear(gi)
        e = gear_over_radius(ratio, axles.radius_m)
        cross = envelope_crossing_mps(e, eta, unit.cont_torque_nm if continuous else unit.torque_nm,
                                      unit.cont_power_w if continuous else unit.power_w, unit.decline_rad_s,
                                      unit.decline_exponent, a0, body.q_n_s2_m2)
        reach = np.minimum(gear_limit_mps(unit, axles.radius_m, gi), cross)
        best = np.where(has, np.maximum(best, reach) if g else reach, best)
    return best


def _summed_crossing_mps(axles: Axles, body, continuous: bool) -> np.ndarray:
    """Largest v <= the speed cap with sum of best-gear forces >= level road load [m/s].

    The surplus (summed forces minus road load) is non-increasing, so the crossing is bracketed and
    found by the Illinois variant of regula falsi, with a bisection step every fourth iteration to
    guarantee the bracket halves; it stops when the bracket is below 1e-15 of the cap (the answer is
    the bracket's feasible end). The surplus may jump at the root (a unit reaching its gear's speed
    limit and shifting to a much weaker gear); regula falsi then gains little, and the bisections
    alone must close the bracket: `BISECT_STEPS` allows 64 of them, and the iterations run on the
    designs whose bracket is still open only.
    """
    hi = speed_cap_mps(axles)
    a0 = _level_a0(body)
    q = body.q_n_s2_m2

    def surplus(ax, v, rows):
        f = (best_gear_force_n(ax.front, ax.radius_m, v, continuous)
             + best_gear_force_n(ax.rear, ax.radius_m, v, continuous))
        a0_r = a0[rows] if np.ndim(a0) else a0
        q_r = q[rows] if np.ndim(q) else q
        return f - (a0_r + q_r * v * v)

    all_rows = np.arange(axles.n)
    # at the cap itself the force of the limiting gear still counts (limit inclusive)
    f_hi = surplus(axles, hi, all_rows)
    top_ok = f_hi >= 0
    lo_v = np.zeros(axles.n)
    f_lo = surplus(axles, lo_v, all_rows)
    start_ok = f_lo >= 0
    hi_v = hi.copy()
    rows = np.nonzero(start_ok & ~top_ok)[0]
    sub = take_axles(axles, rows)
    side = np.zeros(axles.n)  # Illinois: which end was kept last (-1 lo, +1 hi)
    for it in range(BISECT_STEPS):
        if rows.size == 0:
            break
        a, b, fa, fb = lo_v[rows], hi_v[rows], f_lo[rows], f_hi[rows]
        if it % 4 == 3:
            mid = 0.5 * (a + b)
        else:
            with np.errstate(divide="ignore", invalid="ignore"):
                mid = (a * fb - b * fa) / (fb - fa)
            bad = ~np.isfinite(mid) | (mid <= a) | (mid >= b)
            mid = np.where(bad, 0.5 * (a + b), mid)
        f_mid = surplus(sub, mid, rows)
        ok = f_mid >= 0
        sd = side[rows]
        lo_v[rows] = np.where(ok, mid, a)
        f_lo[rows] = np.where(ok, f_mid, np.where(sd == -1, 0.5 * fa, fa))
        hi_v[rows] = np.where(ok, b, mid)
        f_hi[rows] = np.where(ok, np.where(sd == 1, 0.5 * fb, fb), f_mid)
        side[rows] = np.where(ok, 1.0, -1.0)
        still = (hi_v[rows] - lo_v[rows]) > 1e-15 * np.maximum(hi[rows], 1e-300)
        if not still.all():
            rows = rows[still]
            sub = take_axles(sub, still)
    return np.where(top_ok, hi, np.where(start_ok, lo_v, 0.0))


def top_speed_mps(axles: Axles, body, continuous: bool = False) -> np.ndarray:
    """Maximum speed (peak envelopes) or sustained top speed (``continuous``) on the level [m/s].

    Capped by the speed limiter ``body.speed_limit_mps``. See the module docstring for the rules.
    """
    f_on, r_on = axles.front.present, axles.rear.present
    out = np.zeros(axles.n)
    single = f_on ^ r_on
    for name, on in (("front", f_on), ("rear", r_on)):
        rows = single & on
        if not rows.any():
            continue
        unit = getattr(axles, name)
        one_gear = rows & (unit.n_gears == 1)
        if one_gear.any():
            # one unit, one gear: min(min(gearing limit, crossing), limiter) exactly as the single-axle formula
            ratio, eta = unit.gear(0)
            e = gear_over_radius(ratio, axles.radius_m)
            cross = envelope_crossing_mps(e, eta, unit.cont_torque_nm if continuous else unit.torque_nm,
                                          unit.cont_power_w if continuous else unit.power_w, unit.decline_rad_s,
                                          unit.decline_exponent, _level_a0(body), body.q_n_s2_m2)
            v1 = np.minimum(np.minimum(unit.max_speed_rad_s / e, cross), body.speed_limit_mps)
            out = np.where(one_gear, v1, out)
        multi = np.nonzero(rows & (unit.n_gears > 1))[0]
        if multi.size:
            sub, sb = take_axles(axles, multi), take_fields(body, multi)
            out[multi] = np.minimum(unit_reach_mps(sub, sb, name, continuous), sb.speed_limit_mps)
    both = np.nonzero(f_on & r_on)[0]
    if both.size:
        sub, sb = take_axles(axles, both), take_fields(body, both)
        out[both] = np.minimum(_summed_crossing_mps(sub, sb, continuous), sb.speed_limit_mps)
    return out


def max_speed_mps(axles: Axles, body) -> np.ndarray:
    """Vehicle maximum speed with the peak envelopes, capped by gearing and the limiter [m/s]."""
    return top_speed_mps(axles, body, continuous=False)


def sustained_top_speed_mps(axles: Axles, body) -> np.ndarray:
    """Sustained top speed on the level with the continuous envelopes (best gear), capped [m/s]."""
    return top_speed_mps(axles, body, continuous=True)
