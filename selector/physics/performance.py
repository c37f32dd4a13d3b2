"""Vehicle performance of single-unit, single-speed designs: speeds, gradeability, launch, acceleration.

The single-axle view of the general drivetrain physics: a `Drive` (one motor envelope, one reducer
ratio, a tyre) on the axle ``Body.rear_drive`` names, and a `Body` (mass, axle share, road load,
traction). Every function converts to `selector.physics.drivetrain.Axles` (the unit on the driven
axle, the other axle empty) and calls the general function, so the single-axle figures are by
construction those of the general physics with one axle empty. Arrays broadcast against each other
(one element per design).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np

from selector.physics import accel_run, climb, speeds
from selector.physics.drivetrain import Axles, Unit, absent_unit
from selector.physics.motor import wheel_force_n
from selector.physics.vehicle import driven_axle_share, effective_mass_kg, transfer_factor
from selector.units import G_N


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
    b = Body(*[a.astype(bool) if n == "rear_drive" else a.astype(float) for n, a in zip(names_b, b_vals, strict=False)])
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


# --------------------------------------------------------------------------- general form

def axles_of(drive: Drive, body: Body) -> Axles:
    """The general drivetrain of single-axle designs: the unit on the driven axle, the other axle empty."""
    drive, body = broadcast(drive, body)
    n = drive.ratio.shape[0]
    unit = Unit(present=np.ones(n, dtype=bool), torque_nm=drive.torque_nm, power_w=drive.power_w,
                cont_torque_nm=drive.cont_torque_nm, cont_power_w=drive.cont_power_w,
                decline_rad_s=drive.decline_rad_s, decline_exponent=drive.decline_exponent,
                max_speed_rad_s=drive.max_speed_rad_s, rotor_inertia_kgm2=drive.rotor_inertia_kgm2,
                ratio=drive.ratio[:, None], efficiency=drive.efficiency[:, None], shift_time_s=np.zeros(n))
    empty = absent_unit(n)
    rear = body.rear_drive
    pick = lambda a, b: Unit(*[np.where(rear.reshape((-1,) + (1,) * (np.ndim(x) - 1)), x, y)  # noqa: E731
                               for x, y in zip(_fields(a), _fields(b), strict=False)])
    return Axles(front=pick(empty, unit), rear=pick(unit, empty), radius_m=drive.radius_m), body


def _fields(obj):
    return [getattr(obj, f.name) for f in fields(obj)]


# --------------------------------------------------------------------------- speeds

def envelope_road_crossing_mps(drive: Drive, body: Body, continuous=False):
    """Speed where the envelope's wheel force equals the level road load [m/s] (no gearing cut).

    See `selector.physics.speeds.envelope_crossing_mps`. 0 if the vehicle cannot move.
    """
    return speeds.envelope_crossing_mps(drive.gear_over_radius, drive.efficiency,
                                        drive.cont_torque_nm if continuous else drive.torque_nm,
                                        drive.cont_power_w if continuous else drive.power_w, drive.decline_rad_s,
                                        drive.decline_exponent, body.mass_kg * G_N * body.crr, body.q_n_s2_m2)


def max_speed_mps(drive: Drive, body: Body):
    """Vehicle maximum speed: min(gearing limit, peak envelope meets road load, limiter) [m/s]."""
    return speeds.max_speed_mps(*axles_of(drive, body))


def sustained_top_speed_mps(drive: Drive, body: Body):
    """Sustained top speed on the level with the continuous envelope, capped by gearing and limiter [m/s]."""
    return speeds.sustained_top_speed_mps(*axles_of(drive, body))


# --------------------------------------------------------------------------- grade and launch

def gradeability_pct(drive: Drive, body: Body):
    """Largest grade climbable from crawl with peak torque, traction-checked [%] (see `climb`)."""
    return climb.gradeability_pct(*axles_of(drive, body))


def launch_accel_mps2(drive: Drive, body: Body):
    """Acceleration from rest on the level: min of motor-limited and traction-limited [m/s^2]."""
    return climb.launch_accel_mps2(*axles_of(drive, body))


# --------------------------------------------------------------------------- acceleration run

def accel_time_s(drive: Drive, body: Body, target_mps, chunk=20000):
    """Time from rest to ``target_mps`` on the level, with traction limit and load transfer [s].

    Integrated in speed with Gauss-Legendre quadrature on smooth pieces (see
    `selector.physics.accel_run`). Infinite when the target exceeds the vehicle's maximum speed or
    the net force vanishes before it.
    """
    return accel_run.accel_time_s(*axles_of(drive, body), target_mps, chunk=chunk)
