"""Vehicle performance of one or many designs at once: speeds, gradeability, launch, acceleration.

Every function takes numpy arrays that broadcast against each other (one element per design)
and returns arrays. A design's drivetrain is described by a `Drive` (motor envelope, reducer,
tyre) and its vehicle-level data by a `Body` (mass, axle share, road load, traction).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from selector.physics.motor import wheel_force_n
from selector.physics.vehicle import (
    driven_axle_share,
    effective_mass_kg,
    traction_limited_accel_mps2,
    transfer_factor,
)
from selector.units import G_N

# Gauss-Legendre nodes and weights on [-1, 1] for each smooth piece of the acceleration integral.
_GL_NODES = 20
_GL_CACHE = {}


def _gauss_legendre(n):
    if n not in _GL_CACHE:
        _GL_CACHE[n] = np.polynomial.legendre.leggauss(n)
    return _GL_CACHE[n]
_CROSS_SAMPLES = 17
_BISECT_STEPS = 42
_NEWTON_STEPS = 40
_GRADE_TRIGGER = 0.05
_GRADE_RATIO = 0.35
_GRADE_LEVELS = 16


@dataclass(frozen=True)
class Drive:
    """Motor envelope, reducer and tyre of each design (arrays, SI).

    torque_nm, power_w: peak envelope; cont_torque_nm, cont_power_w: continuous envelope;
    decline_rad_s, decline_exponent, max_speed_rad_s: shared by both envelopes;
    rotor_inertia_kgm2; ratio [-]; efficiency [-]; radius_m: rolling radius [m].
    """

    torque_nm: np.ndarray
    power_w: np.ndarray
    cont_torque_nm: np.ndarray
    cont_power_w: np.ndarray
    decline_rad_s: np.ndarray
    decline_exponent: np.ndarray
    max_speed_rad_s: np.ndarray
    rotor_inertia_kgm2: np.ndarray
    ratio: np.ndarray
    efficiency: np.ndarray
    radius_m: np.ndarray

    @property
    def gear_over_radius(self):
        """G/r [1/m]."""
        return self.ratio / self.radius_m


@dataclass(frozen=True)
class Body:
    """Vehicle-level data of each design (arrays or scalars, SI).

    mass_kg: total mass m; rear_share: static rear-axle share of m; crr: rolling-resistance
    coefficient; q_n_s2_m2: 0.5 rho CdA; road_friction: mu; cg_height_m; wheelbase_m;
    rear_drive: bool; wheel_inertia_total_kgm2: sum of wheel inertias; speed_limit_mps:
    speed limiter (inf if none).
    """

    mass_kg: np.ndarray
    rear_share: np.ndarray
    crr: np.ndarray
    q_n_s2_m2: np.ndarray
    road_friction: np.ndarray
    cg_height_m: np.ndarray
    wheelbase_m: np.ndarray
    rear_drive: np.ndarray
    wheel_inertia_total_kgm2: np.ndarray
    speed_limit_mps: np.ndarray


def broadcast(drive: Drive, body: Body) -> tuple[Drive, Body]:
    """Broadcast every field of a drive and a body to one common 1-d shape."""
    names_d = [f.name for f in fields(Drive)]
    names_b = [f.name for f in fields(Body)]
    arrays = np.broadcast_arrays(*[np.asarray(getattr(drive, n)) for n in names_d],
                                 *[np.asarray(getattr(body, n)) for n in names_b])
    arrays = [np.ravel(a) for a in arrays]
    d = Drive(*[a.astype(float) for a in arrays[: len(names_d)]])
    b_vals = arrays[len(names_d):]
    b = Body(*[a.astype(bool) if n == "rear_drive" else a.astype(float) for n, a in zip(names_b, b_vals)])
    return d, b


def take(obj, mask):
    """The same dataclass with every array field restricted to ``mask`` (bool or index array)."""
    return type(obj)(*[np.asarray(getattr(obj, f.name))[mask] for f in fields(obj)])


# --------------------------------------------------------------------------- derived quantities

def effective_mass(drive: Drive, body: Body):
    """m_eff = m + J (G/r)^2 eta + sum(J_wheel)/r^2 [kg] (see `vehicle.effective_mass_kg`)."""
    return effective_mass_kg(body.mass_kg, drive.rotor_inertia_kgm2, drive.gear_over_radius,
                             drive.efficiency, body.wheel_inertia_total_kgm2, drive.radius_m)


def driven_weight_n(body: Body):
    """Static load on the driven axle on the level [N]."""
    return body.mass_kg * G_N * driven_axle_share(body.rear_share, body.rear_drive)


def kappa(drive: Drive, body: Body, m_eff=None):
    """Load-transfer factor +-mu (m/m_eff)(h/L), + rear drive, - front drive [-]."""
    if m_eff is None:
        m_eff = effective_mass(drive, body)
    return transfer_factor(body.road_friction, body.mass_kg, m_eff, body.cg_height_m, body.wheelbase_m,
                           body.rear_drive)


def gearing_speed_limit_mps(drive: Drive):
    """Road speed at the motor's maximum speed, w_max r / G [m/s]."""
    return drive.max_speed_rad_s / drive.gear_over_radius


def wheel_force(drive: Drive, v, continuous=False):
    """Wheel force of the peak (or continuous) envelope at road speed v [m/s] -> [N].

    Above the gearing limit the force is 0.
    """
    return wheel_force_n(v, drive.gear_over_radius, drive.efficiency,
                         drive.cont_torque_nm if continuous else drive.torque_nm,
                         drive.cont_power_w if continuous else drive.power_w,
                         drive.decline_rad_s, drive.decline_exponent, drive.max_speed_rad_s)


def level_road_load(body: Body, v):
    """Road load on the level at speed v [m/s] -> [N]."""
    return body.mass_kg * G_N * body.crr + body.q_n_s2_m2 * v * v


# --------------------------------------------------------------------------- speeds

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


def envelope_road_crossing_mps(drive: Drive, body: Body, continuous=False):
    """Speed where the envelope's wheel force equals the level road load [m/s].

    The envelope is the minimum of three decreasing branches (torque, power, decline), and road
    load increases with speed, so the crossing is the smallest of the three branch crossings:
    torque in closed form, power by the cubic's real root, decline by Newton's method in ln v.
    Ignores the gearing limit (see `max_speed_mps`). 0 if the vehicle cannot move.
    """
    e = drive.gear_over_radius
    eta = drive.efficiency
    t_lim = drive.cont_torque_nm if continuous else drive.torque_nm
    p_lim = drive.cont_power_w if continuous else drive.power_w
    a0 = body.mass_kg * G_N * body.crr
    q = body.q_n_s2_m2
    f_t = eta * t_lim * e
    with np.errstate(divide="ignore", invalid="ignore"):
        v_t = np.sqrt(np.maximum(f_t - a0, 0.0) / q)
    v_p = _cubic_root(a0, q, eta * p_lim)
    # Decline branch: f(u) = C - (k+1) u - ln(a0 + q e^{2u}) = 0, u = ln v; f decreasing, concave.
    k = drive.decline_exponent
    c0 = np.log(eta * p_lim) + k * np.log(drive.decline_rad_s) - k * np.log(e)
    u = np.log(np.maximum(v_p, 1e-12))
    f0 = c0 - (k + 1) * u - np.log(a0 + q * np.exp(2 * u))
    active = f0 < 0  # otherwise the decline crossing lies beyond the power crossing
    for _ in range(_NEWTON_STEPS):
        ex = q * np.exp(2 * u)
        f = c0 - (k + 1) * u - np.log(a0 + ex)
        fp = -(k + 1) - 2 * ex / (a0 + ex)
        u = np.where(active, u - f / fp, u)
    v_d = np.where(active, np.exp(u), np.inf)
    return np.minimum(np.minimum(v_t, v_p), v_d)


def max_speed_mps(drive: Drive, body: Body):
    """Vehicle maximum speed: min(gearing limit, peak envelope meets road load, limiter) [m/s]."""
    return np.minimum(np.minimum(gearing_speed_limit_mps(drive), envelope_road_crossing_mps(drive, body)),
                      body.speed_limit_mps)


def sustained_top_speed_mps(drive: Drive, body: Body):
    """Sustained top speed on the level with the continuous envelope, capped by gearing and limiter [m/s]."""
    return np.minimum(np.minimum(gearing_speed_limit_mps(drive),
                                 envelope_road_crossing_mps(drive, body, continuous=True)),
                      body.speed_limit_mps)


# --------------------------------------------------------------------------- grade and launch

def gradeability_pct(drive: Drive, body: Body):
    """Largest grade climbable from crawl with peak torque, traction-checked [%].

    Motor: eta T_pk G/r >= m g (Crr cos(theta) + sin(theta)), solved in closed form.
    Traction (a = 0): rear drive tan(theta) <= (mu s_r - Crr) / (1 - mu h/L); front drive
    tan(theta) <= (mu (1 - s_r) - Crr) / (1 + mu h/L). Returns min of both (inf if unlimited;
    negative when the vehicle cannot even start on the level).
    """
    f0 = drive.efficiency * drive.torque_nm * drive.gear_over_radius
    c = body.crr
    ratio = f0 / (body.mass_kg * G_N * np.sqrt(1.0 + c * c))
    with np.errstate(invalid="ignore"):
        theta = np.arcsin(np.minimum(ratio, 1.0)) - np.arctan(c)
    tan_motor = np.where(ratio >= 1.0, np.inf, np.tan(theta))
    mu = body.road_friction
    hl = body.cg_height_m / body.wheelbase_m
    share = np.where(body.rear_drive, body.rear_share, 1.0 - body.rear_share)
    num = mu * share - c
    den = np.where(body.rear_drive, 1.0 - mu * hl, 1.0 + mu * hl)
    with np.errstate(divide="ignore", invalid="ignore"):
        tan_trac = np.where(den > 0, num / den, np.where(num >= 0, np.inf, 0.0))
    return 100.0 * np.minimum(tan_motor, tan_trac)


def launch_accel_mps2(drive: Drive, body: Body):
    """Acceleration from rest on the level: min of motor-limited and traction-limited [m/s^2].

    Motor: (eta T_pk G/r - m g Crr) / m_eff. Traction: (mu W_driven - m g Crr) / ((1 - kappa) m_eff).
    """
    m_eff = effective_mass(drive, body)
    f_res = body.mass_kg * G_N * body.crr
    a_motor = (drive.efficiency * drive.torque_nm * drive.gear_over_radius - f_res) / m_eff
    kap = kappa(drive, body, m_eff)
    a_trac = traction_limited_accel_mps2(body.road_friction, driven_weight_n(body), f_res, m_eff, kap)
    return np.minimum(a_motor, a_trac)


# --------------------------------------------------------------------------- acceleration run

def _accel_parts(drive: Drive, body: Body, m_eff, kap, wd_n, v, a_cap=None):
    """Motor-limited and traction-limited acceleration at speeds v (shape (n, s)) [m/s^2].

    Designs are broadcast along axis 0. ``a_cap`` (n,) replaces the traction-limited acceleration
    by a given bound (used for optimistic bounds); None = load-transfer physics.
    """
    col = lambda a: np.asarray(a)[:, None]  # noqa: E731
    f_res = col(body.mass_kg) * G_N * col(body.crr) + col(body.q_n_s2_m2) * v * v
    dcol = Drive(*[col(getattr(drive, f.name)) for f in fields(Drive)])
    f_w = wheel_force(dcol, v)
    if a_cap is None:
        a_trac = traction_limited_accel_mps2(col(body.road_friction), col(wd_n), f_res, col(m_eff), col(kap))
    else:
        a_trac = np.broadcast_to(col(a_cap), f_res.shape)
    a_motor = (f_w - f_res) / col(m_eff)
    return a_motor, a_trac


def accel_time_s(drive: Drive, body: Body, target_mps, chunk=20000, traction_accel_bound_mps2=None,
                 nodes=_GL_NODES):
    """Time from rest to ``target_mps`` on the level, with traction limit and load transfer [s].

    t = integral over v of m_eff / (min(F_w, F_trac) - F_res) dv, integrated in speed and split
    at the envelope's corner and decline speeds and at every motor/traction crossover (found by
    sampling and bisection), with Gauss-Legendre quadrature on each smooth piece. Infinite when
    the target exceeds the vehicle's maximum speed or the net force vanishes before it.
    ``traction_accel_bound_mps2`` (optional, per design) replaces the traction-limited
    acceleration by a given value (optimistic bounds in the optimiser). ``nodes``: Gauss-Legendre
    nodes per smooth piece (20 by default; fewer only for bounds that carry a safety factor).
    """
    drive, body = broadcast(drive, body)
    n = drive.ratio.shape[0]
    target = np.broadcast_to(np.asarray(target_mps, dtype=float), (n,)).copy()
    cap = None
    if traction_accel_bound_mps2 is not None:
        cap = np.broadcast_to(np.asarray(traction_accel_bound_mps2, dtype=float), (n,)).copy()
    out = np.empty(n)
    for s in range(0, n, chunk):
        sl = slice(s, min(n, s + chunk))
        out[sl] = _accel_time_chunk(take(drive, sl), take(body, sl), target[sl], None if cap is None else cap[sl],
                                    nodes)
    return out


def _accel_time_chunk(drive: Drive, body: Body, v_a, a_cap=None, nodes=_GL_NODES):
    gl_x, gl_w = _gauss_legendre(nodes)
    n = v_a.shape[0]
    m_eff = effective_mass(drive, body)
    kap = kappa(drive, body, m_eff)
    wd_n = driven_weight_n(body)
    e = drive.gear_over_radius
    reach = (v_a <= gearing_speed_limit_mps(drive) * (1 + 1e-12)) & (v_a <= body.speed_limit_mps)

    def net(sub, v):
        a_m, a_t = _accel_parts(*sub[:5], v, sub[5])
        return np.minimum(a_m, a_t), a_m - a_t

    full = (drive, body, m_eff, kap, wd_n, a_cap)
    a_end, _ = net(full, v_a[:, None])
    reach &= a_end[:, 0] > 0
    # Envelope breakpoints clipped to [0, v_a].
    v_c = np.clip(drive.power_w / drive.torque_nm / e, 0.0, v_a)
    v_d = np.clip(drive.decline_rad_s / e, 0.0, v_a)
    edges = [np.zeros(n), v_c, v_d, v_a]
    # Motor/traction crossovers: sign changes of a_motor - a_traction on each smooth piece.
    col = lambda a: a[:, None]  # noqa: E731
    frac = np.linspace(0.0, 1.0, _CROSS_SAMPLES)[None, :]
    for lo, hi in ((np.zeros(n), v_c), (v_c, v_d), (v_d, v_a)):
        vs = col(lo) + (col(hi) - col(lo)) * frac
        _, dv = net(full, vs)
        sg = dv > 0
        change = (sg[:, 1:] != sg[:, :-1]) & np.isfinite(dv[:, 1:]) & np.isfinite(dv[:, :-1])
        has = change.any(axis=1) & (hi > lo)
        first = np.argmax(change, axis=1)
        last = change.shape[1] - 1 - np.argmax(change[:, ::-1], axis=1)
        for idx, use in ((first, has), (last, has & (last != first))):
            rows = np.nonzero(use)[0]
            cross = v_a.copy()
            if rows.size:
                sub = (take(drive, rows), take(body, rows), m_eff[rows], kap[rows], wd_n[rows],
                       None if a_cap is None else a_cap[rows])
                a = vs[rows, idx[rows]].copy()
                b = vs[rows, idx[rows] + 1].copy()
                s_a = sg[rows, idx[rows]]
                for _ in range(_BISECT_STEPS):
                    mid = 0.5 * (a + b)
                    _, d_mid = net(sub, mid[:, None])
                    same = (d_mid[:, 0] > 0) == s_a
                    a = np.where(same, mid, a)
                    b = np.where(same, b, mid)
                cross[rows] = 0.5 * (a + b)
            edges.append(cross)
    br = np.sort(np.stack(edges, axis=1), axis=1)
    # Near-singular end: when the net acceleration at the target is small against the launch
    # acceleration, 1/a has a pole just beyond the target (top speed, or where the slip threshold
    # meets road load). Every piece near the target is then split at v_a (1 - rho^m), m = 1..M, not
    # only the last one: a crossover can sit just below the target, and the piece ending there is as
    # near-singular as the last. Each sub-piece then lies at least rho/(1-rho) of its length from v_a.
    a_zero, _ = net(full, np.zeros((n, 1)))
    graded = reach & (a_end[:, 0] < _GRADE_TRIGGER * a_zero[:, 0])
    ok = reach.copy()

    def integrate(sub, a, b):
        half = 0.5 * (b - a)
        v = col(0.5 * (a + b)) + col(half) * gl_x[None, :]
        acc, _ = net(sub, v)
        width_pos = half > 0
        bad = width_pos & (acc <= 0).any(axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            contrib = half * (gl_w[None, :] / acc).sum(axis=1)
        return np.where(width_pos, contrib, 0.0), bad

    def integrate_pieces(sub, edges_):
        tot = np.zeros(edges_.shape[0])
        bad_any = np.zeros(edges_.shape[0], dtype=bool)
        for i in range(edges_.shape[1] - 1):
            c, bad = integrate(sub, edges_[:, i], edges_[:, i + 1])
            tot += c
            bad_any |= bad
        return tot, bad_any

    total, bad = integrate_pieces(full, br)
    ok &= ~bad
    rows = np.nonzero(graded)[0]
    if rows.size:
        sub = (take(drive, rows), take(body, rows), m_eff[rows], kap[rows], wd_n[rows],
               None if a_cap is None else a_cap[rows])
        end = v_a[rows]
        grading = [col(end * (1.0 - _GRADE_RATIO ** m)) for m in range(1, _GRADE_LEVELS + 1)]
        edges_g = np.sort(np.concatenate([br[rows]] + grading, axis=1), axis=1)
        total[rows], bad = integrate_pieces(sub, edges_g)
        ok[rows] &= ~bad
    return np.where(ok, total, np.inf)
