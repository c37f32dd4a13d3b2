"""Traction-limited acceleration of front, rear and all-wheel drive against closed forms.

Gillespie, Fundamentals of Vehicle Dynamics (SAE, 1992), ch. 2, traction-limited acceleration with
longitudinal load transfer (also Wong, Theory of Ground Vehicles): with wheelbase L, CG height h, the
CG a metres behind the front axle and b = L - a in front of the rear axle, friction mu, no road load
and no rotating inertia,

    rear drive:  a_x = mu g (a / L) / (1 - mu h / L)
    front drive: a_x = mu g (b / L) / (1 + mu h / L)
    both axles:  a_x = mu g

For L = 2.75 m, h = 0.85 m, a = 1.15 m, mu = 0.6: rear 3.02, front 2.89, both 5.88 m/s^2 (the rounded
published arithmetic; 1 % tolerance). A vehicle driving all four wheels can never beat
t(0 -> v) = v / (mu g) (2.833 s for 0-100 km/h at mu = 1.0), whatever its motors.
"""

from __future__ import annotations

import numpy as np
import pytest

from selector.physics.accel_run import accel_run
from selector.physics.drivetrain import Axles, combination_accels
from selector.physics.drivetrain import Unit as DUnit
from selector.physics.performance import Body
from selector.units import G_N, kmh_to_mps

L, H, A_CG, MU, M = 2.75, 0.85, 1.15, 0.6, 1600.0
REAR_SHARE = A_CG / L  # static share on the rear axle: the CG is A_CG behind the front axle
BIG = 1e7  # motor force far above any friction limit [N]


@pytest.mark.parametrize("front,rear,expected", [
    (False, True, 3.02),   # Gillespie 1992, rear drive
    (True, False, 2.89),   # front drive
    (True, True, 5.88),    # all-wheel drive: mu g
])
def test_traction_limited_acceleration_closed_form(front, rear, expected):
    a = combination_accels(BIG if front else 0.0, BIG if rear else 0.0, front, rear, 0.0, M, M, REAR_SHARE,
                           MU, H, L)
    assert float(a) == pytest.approx(expected, rel=0.01)
    # and the exact closed form to rounding
    exact = {(False, True): MU * G_N * (A_CG / L) / (1 - MU * H / L),
             (True, False): MU * G_N * ((L - A_CG) / L) / (1 + MU * H / L),
             (True, True): MU * G_N}[(front, rear)]
    assert float(a) == pytest.approx(exact, rel=1e-12)


def _unit(torque_nm, ratio, j=0.02) -> DUnit:
    one = lambda x: np.full(1, float(x))  # noqa: E731
    return DUnit(present=np.ones(1, dtype=bool), torque_nm=one(torque_nm), power_w=one(torque_nm * 900.0),
                 cont_torque_nm=one(torque_nm), cont_power_w=one(torque_nm * 900.0), decline_rad_s=one(2000.0),
                 decline_exponent=one(1.0), max_speed_rad_s=one(2000.0), rotor_inertia_kgm2=one(j),
                 ratio=np.array([[ratio]]), efficiency=np.array([[0.97]]), shift_time_s=one(0.0))


@pytest.mark.parametrize("torque_nm", [150.0, 400.0, 2000.0])
@pytest.mark.parametrize("rear_share", [0.4, 0.55])
def test_all_wheel_drive_never_beats_v_over_mu_g(torque_nm, rear_share):
    # mu = 1.0: t(0-100 km/h) >= v / (mu g) = 27.78 / 9.80665 = 2.833 s for any pair of units
    one = lambda x: np.full(1, float(x))  # noqa: E731
    body = Body(mass_kg=one(1700.0), rear_share=one(rear_share), crr=one(0.01), q_n_s2_m2=one(0.4),
                road_friction=one(1.0), cg_height_m=one(0.55), wheelbase_m=one(2.9), rear_drive=np.ones(1, bool),
                wheel_inertia_total_kgm2=one(4.0), speed_limit_mps=one(np.inf))
    axles = Axles(front=_unit(torque_nm, 9.0), rear=_unit(torque_nm, 9.0), radius_m=one(0.33))
    target = kmh_to_mps(100.0)
    t = float(accel_run(axles, body, np.full(1, target)).time_s[0])
    assert t >= target / (1.0 * G_N)
    assert target / G_N == pytest.approx(2.833, abs=5e-4)


def test_two_unit_top_speed_at_a_jump_of_the_force_reaches_the_gear_limit():
    # Found by fuzzing (a demo-like saloon, invented data): two-speed units whose second gear is 1.9e4 times
    # taller than the first (almost no force there). The summed continuous force drops below the road load
    # exactly at the front unit's first-gear limit w_max r / G1, with the speed cap (the tallest gears' limit)
    # 1.9e4 times higher; the bracket must still close on that limit (closed form), not 2e-7 short of it
    from selector.physics.speeds import sustained_top_speed_mps

    one = lambda x: np.full(1, float(x))  # noqa: E731
    rpm = 2.0 * np.pi / 60.0

    def unit(torque_nm, max_rpm, j):
        return DUnit(present=np.ones(1, dtype=bool), torque_nm=one(torque_nm), power_w=one(85e3),
                     cont_torque_nm=one(torque_nm), cont_power_w=one(55.5e3), decline_rad_s=one(np.inf),
                     decline_exponent=one(1.0), max_speed_rad_s=one(max_rpm * rpm), rotor_inertia_kgm2=one(j),
                     ratio=np.array([[11.5, 0.000616579]]), efficiency=np.array([[0.959, 0.966]]),
                     shift_time_s=one(0.45))

    body = Body(mass_kg=one(1971.1), rear_share=one(0.52), crr=one(0.0072), q_n_s2_m2=one(0.5 * 1.225 * 0.62),
                road_friction=one(1.0), cg_height_m=one(0.5), wheelbase_m=one(2.9), rear_drive=np.ones(1, bool),
                wheel_inertia_total_kgm2=one(0.0), speed_limit_mps=one(np.inf))
    radius = 0.97 * (15 * 25.4 + 2 * 225 * 0.70) / 2000.0  # 225/70R15 rolling radius [m]
    axles = Axles(front=unit(94.0, 16100.0, 0.0191), rear=unit(126.0, 14300.0, 0.018), radius_m=one(radius))
    v = float(sustained_top_speed_mps(axles, body)[0])
    limit = 16100.0 * rpm * radius / 11.5  # the front unit's first-gear limit [m/s]
    assert v == pytest.approx(limit, rel=1e-12)
