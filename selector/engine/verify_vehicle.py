"""The independent re-check's model of one design in plain scalar Python (SI floats).

Shared by the acceleration run (`verify_run`) and the static figures (`verify_speeds`); see
`verify.py` for what the re-check is and what it shares with the evaluator. Names with a leading
underscore are private to the ``verify*`` modules.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.engine.parts import PartTables
from selector.errors import SelectorError
from selector.units import G_N

MAX_CUT_REL = 1e-12
"""The envelope's force is counted up to w_max (1 + this), as in `physics.motor` (the model's definition) [-]."""


class VerificationError(SelectorError):
    """A reported design failed the independent re-check (internal error: please report it)."""


# ------------------------------------------------------------------------------------------ one design

@dataclass
class _Unit:
    """One drive unit of one design (plain floats, SI)."""

    torque: float
    power: float
    cont_torque: float
    cont_power: float
    decline: float
    exponent: float
    w_max: float
    inertia: float
    ratios: list
    effs: list
    shift_s: float


@dataclass
class _Vehicle:
    """One design: its units by axle ("front", "rear") and the vehicle data (plain floats, SI)."""

    units: dict
    radius: float
    mass: float
    rear_share: float
    crr: float
    q: float
    mu: float
    hl: float
    wheel_inertia: float
    v_limit: float


def _vehicles(parts: PartTables, keys, mass_kg) -> list[_Vehicle]:
    axles, body = parts.design(keys, mass_kg=mass_kg)
    out = []
    for i in range(keys.shape[0]):
        units = {}
        for name, u in axles.units():
            if not bool(u.present[i]):
                continue
            ratios = [float(x) for x in u.ratio[i] if np.isfinite(x)]
            units[name] = _Unit(float(u.torque_nm[i]), float(u.power_w[i]), float(u.cont_torque_nm[i]),
                                float(u.cont_power_w[i]), float(u.decline_rad_s[i]), float(u.decline_exponent[i]),
                                float(u.max_speed_rad_s[i]), float(u.rotor_inertia_kgm2[i]), ratios,
                                [float(x) for x in u.efficiency[i][: len(ratios)]], float(u.shift_time_s[i]))
        out.append(_Vehicle(units, float(axles.radius_m[i]), float(body.mass_kg[i]), float(body.rear_share[i]),
                            float(body.crr[i]), float(body.q_n_s2_m2[i]), float(body.road_friction[i]),
                            float(body.cg_height_m[i]) / float(body.wheelbase_m[i]),
                            float(body.wheel_inertia_total_kgm2[i]), float(body.speed_limit_mps[i])))
    return out


def _torque(u: _Unit, w: float, continuous: bool = False) -> float:
    """Envelope torque at shaft speed w: min(T, P/w, P (w_d/w)^k / w), 0 above w_max [N m]."""
    if w > u.w_max * (1.0 + MAX_CUT_REL):
        return 0.0
    t, p = (u.cont_torque, u.cont_power) if continuous else (u.torque, u.power)
    if w > 0.0:
        t = min(t, p / w)
        if w > u.decline:
            t = min(t, p / w * (u.decline / w) ** u.exponent)
    return t


def _force(veh: _Vehicle, u: _Unit, g: int, v: float, continuous: bool = False) -> float:
    """Wheel force of unit u in gear g at road speed v, eta T(v G/r) G/r [N]."""
    e = u.ratios[g] / veh.radius
    return u.effs[g] * _torque(u, v * e, continuous) * e


def _gear_limit(veh: _Vehicle, u: _Unit, g: int) -> float:
    return u.w_max * veh.radius / u.ratios[g]


def _road_load(veh: _Vehicle, v: float) -> float:
    return veh.mass * G_N * veh.crr + veh.q * v * v


def _m_eff(veh: _Vehicle, gears: dict, engaged: dict) -> float:
    m = veh.mass
    for name, u in veh.units.items():
        if engaged[name]:
            e = u.ratios[gears[name]] / veh.radius
            m += u.inertia * e * e * u.effs[gears[name]]
    return m + veh.wheel_inertia / veh.radius ** 2


def _balance_accel(veh: _Vehicle, forces: dict, f_res: float, m_eff: float) -> float:
    """Root a of m_eff a + F_res = sum over driving axles of min(F_axle, mu N_axle(a)) [m/s^2].

    N_rear = m g s_r + m a h/L, N_front = m g (1 - s_r) - m a h/L. The balance is piecewise linear in a
    with a breakpoint where an axle's force meets its friction limit; the physical root is the largest
    one (the balance decreases above it), taken exactly on its linear piece.
    """
    m, mu, hl = veh.mass, veh.mu, veh.hl
    static = {"rear": m * G_N * veh.rear_share, "front": m * G_N * (1.0 - veh.rear_share)}
    sign = {"rear": 1.0, "front": -1.0}

    def balance(a):
        tot = 0.0
        for name, f in forces.items():
            tot += min(f, mu * (static[name] + sign[name] * m * a * hl))
        return tot - f_res - m_eff * a

    hi = (sum(forces.values()) - f_res) / m_eff
    lo = min(-f_res / m_eff, hi)
    step = 1.0
    for _ in range(200):
        if balance(lo) >= 0.0:
            break
        lo -= step
        step *= 2.0
    pts = {lo, hi}
    if mu > 0.0 and hl > 0.0:
        for name, f in forces.items():
            a = (f / mu - static[name]) / (sign[name] * m * hl)
            if lo < a < hi:
                pts.add(a)
    pts = sorted(pts)
    vals = [balance(a) for a in pts]
    top = max(i for i, val in enumerate(vals) if val >= 0.0) if vals[0] >= 0.0 else 0
    if top == len(pts) - 1 or vals[top] == 0.0:
        return pts[top]
    a0, a1, b0, b1 = pts[top], pts[top + 1], vals[top], vals[top + 1]
    return a0 + b0 * (a1 - a0) / (b0 - b1)


def _accel(veh: _Vehicle, gears: dict, engaged: dict, v: float) -> float:
    """Acceleration in a gear state at road speed v (only engaged units drive) [m/s^2]."""
    forces = {name: _force(veh, u, gears[name], v) for name, u in veh.units.items() if engaged[name]}
    return _balance_accel(veh, forces, _road_load(veh, v), _m_eff(veh, gears, engaged))


def _motor_accel(veh: _Vehicle, gears: dict, engaged: dict, v: float) -> float:
    """Acceleration the engaged units' motors give at road speed v, traction limits aside [m/s^2]
    (the model's shift rule compares gears by it)."""
    forces = [_force(veh, u, gears[name], v) for name, u in veh.units.items() if engaged[name]]
    return (sum(forces) - _road_load(veh, v)) / _m_eff(veh, gears, engaged)

