"""Drive units on one or two axles: wheel forces per gear, effective mass and traction combinations.

A design's drivetrain is a front and a rear drive `Unit` (either may be absent) and one rolling
radius for all wheels (`Axles`). A unit is a motor envelope (see `selector.physics.motor`) and a
gearbox of one to three gear ratios, first gear first (gear columns beyond the unit's gear count
hold NaN). Every array has one element (row) per design; gear arrays have one column per gear.

Conventions (DEVELOPERS.md, "Physics of two drive units and gearboxes"):

- Each axle's tractive force is its unit's wheel force, limited by that axle's friction limit
  mu N_axle; the vehicle's force is the sum. The torque split between the axles is the best one
  (each axle up to its own limit), which is what a traction controller delivers.
- Axle loads on the level while accelerating at a: N_r = W_r + m a h/L, N_f = W_f - m a h/L (m a,
  not m_eff a, for the transfer; no aerodynamic lift or pitch moment).
- Effective mass in a gear state: m + sum over units of J (G/r)^2 eta + sum J_wheel / r^2 (the
  eta-multiplied handbook convention), with each unit's current gear.

Acceleration in a gear state. With F_a the motor-limited wheel force of axle a and mu N_a(a) its
friction limit, m_eff a + F_res = sum_a min(F_a, mu N_a(a)). A sum of minima is the minimum over
the "combinations" (each driven axle either motor-limited M or traction-limited T) of the sums, and
each combination is linear in a, so

    a = min over combinations c of (sum_{M} F_a + sum_{T} mu W_a - F_res) / ((1 - sum_{T} kappa_a) m_eff)

with kappa_r = +mu (m/m_eff) h/L, kappa_f = -mu (m/m_eff) h/L (a combination whose denominator is
<= 0 sets no bound). With one unit this is min(a_motor, a_traction), the single-axle formula.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from selector.physics.motor import wheel_force_n
from selector.physics.vehicle import transfer_factor
from selector.units import G_N

MAX_GEARS = 3
"""Largest number of gear ratios of one gearbox [-]."""

COMBINATIONS = ("MM", "TM", "MT", "TT")
"""Traction combinations (front, rear): M motor-limited, T traction-limited."""


@dataclass(frozen=True)
class Unit:
    """One drive unit per design: motor envelope and gearbox (arrays, SI).

    present : bool (n,), False where the axle has no unit (its force is 0, its inertia 0)
    torque_nm, power_w : peak envelope [N m], [W]
    cont_torque_nm, cont_power_w : continuous envelope [N m], [W]
    decline_rad_s, decline_exponent, max_speed_rad_s : shared by both envelopes [rad/s], [-], [rad/s]
    rotor_inertia_kgm2 : [kg m^2]
    ratio : (n, G) gear ratios G_1 > G_2 > ..., NaN beyond the unit's gear count [-]
    efficiency : (n, G) gearbox efficiency per gear [-]
    shift_time_s : torque interruption per upshift [s] (0 for single-speed units)
    """

    present: np.ndarray
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
    shift_time_s: np.ndarray

    @property
    def n(self) -> int:
        """Number of designs."""
        return int(np.shape(self.present)[0])

    @property
    def n_gears(self) -> np.ndarray:
        """Gear count per design (0 where absent) [-]."""
        return np.where(self.present, np.sum(np.isfinite(self.ratio), axis=1), 0)

    def gear(self, g) -> tuple[np.ndarray, np.ndarray]:
        """(ratio, efficiency) of gear index ``g`` (0 = first gear; array (n,) or scalar) per design."""
        rows = np.arange(self.n)
        g = np.broadcast_to(np.asarray(g, dtype=np.int64), (self.n,))
        return self.ratio[rows, g], self.efficiency[rows, g]

    def top_gear(self) -> np.ndarray:
        """Index of the tallest gear (smallest ratio) per design [-] (0 where absent)."""
        return np.maximum(self.n_gears - 1, 0)


@dataclass(frozen=True)
class Axles:
    """Front and rear drive units of each design and the common rolling radius [m]."""

    front: Unit
    rear: Unit
    radius_m: np.ndarray

    @property
    def n(self) -> int:
        """Number of designs."""
        return int(np.shape(self.radius_m)[0])

    def units(self):
        """((name, unit), ...) for the front and the rear axle."""
        return (("front", self.front), ("rear", self.rear))


def absent_unit(n: int, gears: int = 1) -> Unit:
    """A unit that is absent on every design (placeholders that give zero force and zero inertia)."""
    one, zero = np.ones(n), np.zeros(n)
    ratio = np.full((n, gears), np.nan)
    ratio[:, 0] = 1.0
    return Unit(present=np.zeros(n, dtype=bool), torque_nm=one, power_w=one, cont_torque_nm=one, cont_power_w=one,
                decline_rad_s=one, decline_exponent=one, max_speed_rad_s=one, rotor_inertia_kgm2=zero,
                ratio=ratio, efficiency=ratio.copy(), shift_time_s=zero)


def take_fields(obj, mask):
    """The same dataclass with every array field restricted to ``mask``; scalar fields are kept."""
    vals = []
    for f in fields(obj):
        a = getattr(obj, f.name)
        vals.append(np.asarray(a)[mask] if np.ndim(a) else a)
    return type(obj)(*vals)


def take_unit(unit: Unit, mask) -> Unit:
    """The unit restricted to the designs ``mask`` (bool or index array)."""
    return Unit(*[np.asarray(getattr(unit, f.name))[mask] for f in fields(Unit)])


def take_axles(axles: Axles, mask) -> Axles:
    """The axles restricted to the designs ``mask`` (bool or index array)."""
    return Axles(take_unit(axles.front, mask), take_unit(axles.rear, mask), np.asarray(axles.radius_m)[mask])


def pad_gears(unit: Unit, gears: int) -> Unit:
    """The unit with its gear arrays padded with NaN columns to ``gears`` columns."""
    have = unit.ratio.shape[1]
    if have >= gears:
        return unit
    pad = np.full((unit.n, gears - have), np.nan)
    return Unit(**{**{f.name: getattr(unit, f.name) for f in fields(Unit)},
                   "ratio": np.concatenate([unit.ratio, pad], axis=1),
                   "efficiency": np.concatenate([unit.efficiency, pad], axis=1)})


# --------------------------------------------------------------------------------- per-gear quantities

def gear_over_radius(ratio, radius_m):
    """G/r of a gear [1/m]."""
    return ratio / radius_m


def gear_limit_mps(unit: Unit, radius_m, g) -> np.ndarray:
    """Road speed at the motor's maximum speed in gear ``g``, w_max r / G [m/s] (inf where absent)."""
    ratio, _ = unit.gear(g)
    with np.errstate(invalid="ignore"):
        lim = unit.max_speed_rad_s / gear_over_radius(ratio, radius_m)
    return np.where(unit.present, lim, np.inf)


def top_gear_limit_mps(unit: Unit, radius_m) -> np.ndarray:
    """Gearing limit of the tallest gear: the unit's road-speed limit [m/s] (inf where absent)."""
    return gear_limit_mps(unit, radius_m, unit.top_gear())


def speed_cap_mps(axles: Axles) -> np.ndarray:
    """No unit may over-speed: the lowest tallest-gear gearing limit of the present units [m/s]."""
    return np.minimum(top_gear_limit_mps(axles.front, axles.radius_m), top_gear_limit_mps(axles.rear, axles.radius_m))


def unit_force_n(unit: Unit, radius_m, g, v, continuous: bool = False) -> np.ndarray:
    """Wheel force of a unit in gear ``g`` at road speed v, eta T(v G/r) G/r [N] (0 where absent).

    ``v`` has shape (n,) or (n, s); ``g`` is a gear index per design.
    """
    ratio, eta = unit.gear(g)
    v = np.asarray(v, dtype=float)
    col = (lambda a: a[:, None]) if v.ndim == 2 else (lambda a: a)  # noqa: E731
    e = gear_over_radius(ratio, radius_m)
    f = wheel_force_n(v, col(e), col(eta), col(unit.cont_torque_nm if continuous else unit.torque_nm),
                      col(unit.cont_power_w if continuous else unit.power_w), col(unit.decline_rad_s),
                      col(unit.decline_exponent), col(unit.max_speed_rad_s))
    return np.where(col(unit.present), f, 0.0)


def best_gear_force_n(unit: Unit, radius_m, v, continuous: bool = False) -> np.ndarray:
    """Largest wheel force over the unit's gears at road speed v [N] (0 above every gear's limit)."""
    v = np.asarray(v, dtype=float)
    best = np.zeros(np.broadcast_shapes(v.shape, (unit.n,) if v.ndim == 1 else (unit.n, 1)))
    for g in range(unit.ratio.shape[1]):
        has = unit.n_gears > g
        if not has.any():
            break
        f = unit_force_n(unit, radius_m, np.where(has, g, 0), v, continuous)
        mask = has if v.ndim == 1 else has[:, None]
        best = np.where(mask, np.maximum(best, f), best)
    return best


def rotor_mass_kg(unit: Unit, radius_m, g) -> np.ndarray:
    """Reflected rotor inertia of a unit in gear ``g``, J (G/r)^2 eta [kg] (0 where absent)."""
    ratio, eta = unit.gear(g)
    e = gear_over_radius(ratio, radius_m)
    return np.where(unit.present, unit.rotor_inertia_kgm2 * e * e * eta, 0.0)


def state_effective_mass_kg(axles: Axles, mass_kg, wheel_inertia_total_kgm2, g_front, g_rear,
                            engaged_front=True, engaged_rear=True) -> np.ndarray:
    """Effective mass in a gear state [kg]: m + each engaged unit's J (G/r)^2 eta + sum J_wheel / r^2.

    A unit that is absent, or disengaged during its shift, adds no rotor term. With one unit this
    is exactly `selector.physics.vehicle.effective_mass_kg`.
    """
    f = np.where(engaged_front, rotor_mass_kg(axles.front, axles.radius_m, g_front), 0.0)
    r = np.where(engaged_rear, rotor_mass_kg(axles.rear, axles.radius_m, g_rear), 0.0)
    # (m + 0.0) + J e^2 eta == m + J e^2 eta exactly: one unit reproduces `effective_mass_kg` bit for bit
    return (mass_kg + f + r) + np.asarray(wheel_inertia_total_kgm2, dtype=float) / np.asarray(axles.radius_m,
                                                                                            dtype=float) ** 2


# --------------------------------------------------------------------------------- traction combinations

def axle_weights_n(mass_kg, rear_share):
    """Static (front, rear) axle weights on the level, W_f = m g (1 - s_r), W_r = m g s_r [N]."""
    return mass_kg * G_N * (1.0 - np.asarray(rear_share, dtype=float)), mass_kg * G_N * rear_share


def combination_accels(f_front, f_rear, front_present, rear_present, f_res, mass_kg, m_eff, rear_share, road_friction,
                       cg_height_m, wheelbase_m, labels: bool = False):
    """Acceleration of the best torque split: the minimum over traction combinations [m/s^2].

    Combinations in the order of `COMBINATIONS` ("MM", "TM", "MT", "TT"): both axles motor-limited;
    front traction-limited, rear motor-limited; and so on. A combination that needs a traction limit
    on an absent axle, or whose denominator (1 - sum kappa) m_eff is <= 0, sets no bound. Arguments
    broadcast together: forces and road load [N], masses [kg], share [-], mu [-], lengths [m];
    ``front_present``/``rear_present`` are bool arrays or Python bools.

    Returns the acceleration, and with ``labels`` also the index of the limiting combination (the
    first one on ties).
    """
    any_f, any_r = bool(np.any(front_present)), bool(np.any(rear_present))
    w_f, w_r = axle_weights_n(mass_kg, rear_share)
    k_r = transfer_factor(road_friction, mass_kg, m_eff, cg_height_m, wheelbase_m, True)

    def bound(num, kappa):
        denom = (1.0 - kappa) * m_eff
        with np.errstate(divide="ignore", invalid="ignore"):
            a = num / denom
        return np.where(denom > 0, a, np.inf)

    with np.errstate(invalid="ignore"):
        best = ((f_front + f_rear) - f_res) / m_eff
    lab = np.zeros(np.shape(best), dtype=np.int8) if labels else None
    combos = []
    if any_f:
        combos.append((1, front_present, lambda: bound((road_friction * w_f + f_rear) - f_res, -k_r)))
    if any_r:
        combos.append((2, rear_present, lambda: bound((f_front + road_friction * w_r) - f_res, k_r)))
    if any_f and any_r:
        combos.append((3, np.logical_and(front_present, rear_present),
                       lambda: bound((road_friction * w_f + road_friction * w_r) - f_res, -k_r + k_r)))
    for idx, valid, fn in combos:
        with np.errstate(invalid="ignore"):
            a = np.where(valid, fn(), np.inf)
        if labels:
            lab = np.where(a < best, np.int8(idx), lab)
        best = np.minimum(best, a)
    return (best, lab) if labels else best
