"""Traction limit with load transfer, launch acceleration and effective mass.

Sources:
- textbook traction-limited tractive force with longitudinal load transfer (Gillespie, Fundamentals
  of Vehicle Dynamics ch. 2; Wong, Theory of Ground Vehicles ch. 3; the form is confirmed via
  secondary course slides, the chapter and equation numbers are from memory). Worked examples A and B
  are computed from those forms (not published answers).
- equivalent mass of rotating parts (eta-multiplied form confirmed via a secondary formula sheet; the
  Wong / Gillespie attribution is from memory), worked example computed from m_eq = J (G/r)^2 eta.
- wheel force 7125.0 N (computed from F = T G eta / r) against the example A limit.

The code's convention (vehicle.py): the driven-axle normal load is
N = W_driven +- m a h/L with m (not m_eff) and a the actual acceleration; F = mu N. With rotor and
wheel inertia 0 (m_eff = m) this is exactly the textbook model, so the textbook values apply.

Tolerance: worked values are checked to half a unit in their last printed digit (`printed`).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from selector.physics.performance import (
    Body,
    Drive,
    broadcast,
    effective_mass,
    launch_accel_mps2,
)
from selector.physics.vehicle import (
    driven_axle_share,
    effective_mass_kg,
    traction_force_limit_n,
    traction_limited_accel_mps2,
    transfer_factor,
)
from selector.units import G_N


def printed(text: str):
    """pytest.approx for a table value printed as ``text``: half a unit in the last printed digit."""
    decimals = len(text.split(".")[1]) if "." in text else 0
    return pytest.approx(float(text), rel=0.0, abs=0.5 * 10.0 ** (-decimals))


# Worked example A (computed from the textbook forms below, not a published answer): m = 1500 kg,
# L = 2.70 m, b = 1.20 m (CG to FRONT axle), c = 1.50 m (CG to rear axle), h = 0.55 m, mu = 0.9,
# g = 9.80665. Static rear share = b/L.
A = dict(m=1500.0, L=2.70, b=1.20, c=1.50, h=0.55, mu=0.9)


# --------------------------------------------------------------- textbook forms (written out here)

def textbook_rwd_n(m, L, b, c, h, mu, f_r=0.0, g=G_N):
    """Gillespie ch. 2 / Wong ch. 3 RWD traction limit: F = mu W (b - f_r h)/L / (1 - mu h/L)."""
    return mu * m * g * (b - f_r * h) / L / (1.0 - mu * h / L)


def textbook_fwd_n(m, L, b, c, h, mu, f_r=0.0, g=G_N):
    """Gillespie ch. 2 / Wong ch. 3 FWD traction limit: F = mu W (c + f_r h)/L / (1 + mu h/L)."""
    return mu * m * g * (c + f_r * h) / L / (1.0 + mu * h / L)


def test_textbook_forms_reproduce_example_a():
    # copy check of the two forms above: they give the worked example A values
    assert textbook_rwd_n(**A) == printed("7204.9")
    assert textbook_fwd_n(**A) == printed("6215.5")


def make_design(*, mass_kg, rear_share, cg_height_m, wheelbase_m, road_friction, rear_drive, crr=0.0,
                torque_nm=5000.0, rotor_inertia_kgm2=0.0, ratio=9.0, efficiency=0.95, radius_m=0.32):
    """Drive/Body with a (by default) very strong motor so that traction binds at launch."""
    drive = Drive(torque_nm=torque_nm, power_w=1e9, cont_torque_nm=torque_nm, cont_power_w=1e9,
                  decline_rad_s=1e6, decline_exponent=1.0, max_speed_rad_s=1e6,
                  rotor_inertia_kgm2=rotor_inertia_kgm2, ratio=ratio, efficiency=efficiency, radius_m=radius_m)
    body = Body(mass_kg=mass_kg, rear_share=rear_share, crr=crr, q_n_s2_m2=0.0, road_friction=road_friction,
                cg_height_m=cg_height_m, wheelbase_m=wheelbase_m, rear_drive=rear_drive,
                wheel_inertia_total_kgm2=0.0, speed_limit_mps=np.inf)
    return broadcast(drive, body)  # 1-element arrays


def example_a_design(rear_drive, mu=0.9, crr=0.0, **kw):
    return make_design(mass_kg=A["m"], rear_share=A["b"] / A["L"], cg_height_m=A["h"], wheelbase_m=A["L"],
                       road_friction=mu, rear_drive=rear_drive, crr=crr, **kw)


def limit_n(rear_drive, accel, mu=0.9, grade_pct=0.0, mass_kg=A["m"]):
    """selector's traction_force_limit_n with example A geometry."""
    return float(traction_force_limit_n(mu, mass_kg, A["b"] / A["L"], A["h"], A["L"], rear_drive,
                                        accel_mps2=accel, grade_pct=grade_pct))


# --------------------------------------------------------------- static and transferred axle loads

def test_example_a_static_front_axle_load():
    # example A (computed): W_f = W c/L = 8172.2 N (mu = 1 turns mu N into N)
    assert limit_n(False, 0.0, mu=1.0) == printed("8172.2")


def test_example_a_static_rear_axle_load():
    # example A (computed): W_r = W b/L = 6537.8 N
    assert limit_n(True, 0.0, mu=1.0) == printed("6537.8")


def test_example_a_rear_load_at_rwd_limit():
    # example A (computed): at the RWD limit (a = 4.8033 m/s^2) W_r = 8005.4 N
    assert limit_n(True, 4.8033, mu=1.0) == printed("8005.4")


# --------------------------------------------------------------- traction_force_limit_n at the fixed point

def test_rwd_limit_is_fixed_point_of_axle_load_equation():
    # example A RWD (textbook form, computed): F = 7204.9 N; mu N_r(a = F/m) reproduces F (self-check)
    f = textbook_rwd_n(**A)
    assert limit_n(True, f / A["m"]) == printed("7204.9")


def test_fwd_limit_is_fixed_point_of_axle_load_equation():
    # example A FWD (textbook form, computed): F = 6215.5 N
    f = textbook_fwd_n(**A)
    assert limit_n(False, f / A["m"]) == printed("6215.5")


def test_rwd_limit_with_rolling_resistance_fixed_point():
    # example A variant f_r = 0.012 (textbook form, computed): RWD F = 7165.3 N; the acceleration is the NET one,
    # a = (F - f_r W)/m, which is the code's "a = actual acceleration" convention
    f = textbook_rwd_n(**A, f_r=0.012)
    assert f == printed("7165.3")
    assert limit_n(True, (f - 0.012 * A["m"] * G_N) / A["m"]) == printed("7165.3")


def test_fwd_limit_with_rolling_resistance_fixed_point():
    # example A variant f_r = 0.012 (textbook form, computed): FWD F = 6242.8 N
    f = textbook_fwd_n(**A, f_r=0.012)
    assert f == printed("6242.8")
    assert limit_n(False, (f - 0.012 * A["m"] * G_N) / A["m"]) == printed("6242.8")


def test_wet_rwd_force_for_section_11_check():
    # textbook RWD form, computed: on mu = 0.5 the limit is 3639.6 N, so the case is traction-limited (example A)
    f = textbook_rwd_n(**{**A, "mu": 0.5})
    assert limit_n(True, f / A["m"], mu=0.5) == printed("3639.6")


@pytest.mark.parametrize("grade", [0.0, 10.0, 30.0, 60.0])
@pytest.mark.parametrize("accel", [0.0, 2.5])
def test_axle_loads_on_grade_from_moment_balance(grade, accel):
    # first principles (Gillespie ch. 2 axle loads on a grade): moments about the front contact patch,
    # N_r L = W cos(theta) b + W sin(theta) h + m a h; N_f = W cos(theta) - N_r. mu = 1 gives N itself.
    # Exact relations, so rel 1e-12 (rounding only).
    m, L, b, h = A["m"], A["L"], A["b"], A["h"]
    th = math.atan(grade / 100.0)
    n_r = (m * G_N * math.cos(th) * b + m * G_N * math.sin(th) * h + m * accel * h) / L
    n_f = m * G_N * math.cos(th) - n_r
    assert limit_n(True, accel, mu=1.0, grade_pct=grade) == pytest.approx(n_r, rel=1e-12)
    assert limit_n(False, accel, mu=1.0, grade_pct=grade) == pytest.approx(n_f, rel=1e-12)


# --------------------------------------------------------------- launch acceleration (traction-limited)

def _launch(rear_drive, **kw):
    return float(launch_accel_mps2(*example_a_design(rear_drive, **kw))[0])


def test_launch_rwd_example_a():
    # example A RWD a = F/m = 4.8033 m/s^2 (textbook form, computed) (rotor inertia 0, so m_eff = m)
    assert _launch(True) == printed("4.8033")


def test_launch_fwd_example_a():
    # example A FWD a = F/m = 4.1437 m/s^2 (textbook form, computed)
    assert _launch(False) == printed("4.1437")


def test_launch_rwd_with_rolling_resistance():
    # example A variant f_r = 0.012 (textbook form, computed): RWD net a = 4.6592 m/s^2
    assert _launch(True, crr=0.012) == printed("4.6592")


def test_launch_fwd_with_rolling_resistance():
    # example A variant f_r = 0.012 (textbook form, computed): FWD net a = 4.0442 m/s^2
    assert _launch(False, crr=0.012) == printed("4.0442")


def test_launch_rwd_wet():
    # example A variant mu = 0.5 (textbook form, computed): RWD a = 2.4264 m/s^2
    assert _launch(True, mu=0.5) == printed("2.4264")


def test_launch_fwd_wet():
    # example A variant mu = 0.5 (textbook form, computed): FWD a = 2.4723 m/s^2
    assert _launch(False, mu=0.5) == printed("2.4723")


# Worked example B (problem data of a published course example via secondary slides; the answers are
# computed here from the textbook forms with g = 9.81, not the slides' answers): 1800 kg, L = 2.6 m,
# CG midway, h = 0.7 m, mu = 0.7.
B = dict(m=1800.0, L=2.6, b=1.3, c=1.3, h=0.7, mu=0.7)


def test_textbook_forms_reproduce_example_b_with_g_981():
    # the worked answers use g = 9.81: textbook form with g = 9.81, a = F/m
    assert textbook_fwd_n(**B, g=9.81) / B["m"] == printed("2.8890")
    assert textbook_rwd_n(**B, g=9.81) / B["m"] == printed("4.2309")


@pytest.mark.parametrize("rear_drive, expected", [(False, "2.8890"), (True, "4.2309")])
def test_launch_example_b(rear_drive, expected):
    # example B (textbook form, computed). With no rolling resistance every force is proportional to g, so
    # a = mu g s / (1 -+ mu h/L) scales exactly with g: convert selector's g_n result to g = 9.81.
    d, b = make_design(mass_kg=B["m"], rear_share=0.5, cg_height_m=B["h"], wheelbase_m=B["L"],
                       road_friction=B["mu"], rear_drive=rear_drive)
    assert float(launch_accel_mps2(d, b)[0]) * 9.81 / G_N == printed(expected)


def test_launch_motor_limited_below_rwd_limit():
    # computed from F = T G eta / r: T = 300 N m, G = 8, eta = 0.95, r = 0.32 gives 7125.0 N, just below the
    # RWD traction limit of example A (7204.9 N), so the launch is not traction-limited: a = 7125.0 / 1500
    d, b = example_a_design(True, torque_nm=300.0, ratio=8.0)
    assert float(launch_accel_mps2(d, b)[0]) == pytest.approx(7125.0 / 1500.0, rel=1e-12)


def test_launch_traction_limited_on_wet():
    # textbook RWD form, computed: the same case on mu = 0.5 (3639.6 N) is traction-limited: a = 3639.6/1500
    d, b = example_a_design(True, mu=0.5, torque_nm=300.0, ratio=8.0)
    assert float(launch_accel_mps2(d, b)[0]) * A["m"] == printed("3639.6")


def test_launch_traction_uses_m_not_m_eff_for_transfer():
    # project convention: transfer uses m a; acceleration a = (F - F_res)/m_eff. With rotor inertia the
    # fixed point F = mu (W_r + m a h/L), a = F/m_eff gives a = mu W_r / (m_eff - mu m h/L) (derived
    # here from those two lines); rel 1e-12, exact algebra.
    d, b = example_a_design(True, rotor_inertia_kgm2=0.05)
    m_eff = A["m"] + 0.05 * (9.0 / 0.32) ** 2 * 0.95  # eta-multiplied convention (Wong ch. 3, from memory)
    expected = A["mu"] * A["m"] * G_N * A["b"] / A["L"] / (m_eff - A["mu"] * A["m"] * A["h"] / A["L"])
    assert float(launch_accel_mps2(d, b)[0]) == pytest.approx(expected, rel=1e-12)


def test_traction_unlimited_when_transfer_factor_reaches_one():
    # vehicle.traction_limited_accel_mps2 docstring: rear drive with kappa >= 1 can transmit any force
    # (N_r grows faster than the force it must carry): +inf; front drive stays finite.
    assert np.isinf(traction_limited_accel_mps2(10.0, 7000.0, 0.0, 1500.0, 1.5))
    assert np.isfinite(traction_limited_accel_mps2(10.0, 7000.0, 0.0, 1500.0, -1.5))


def test_transfer_factor_sign_and_value():
    # vehicle.py convention: kappa = +mu (m/m_eff) h/L rear, -... front (hand value 0.9*0.55/2.7)
    k = transfer_factor(0.9, 1500.0, 1500.0, 0.55, 2.7, np.array([True, False]))
    np.testing.assert_allclose(k, [0.9 * 0.55 / 2.7, -0.9 * 0.55 / 2.7], rtol=1e-14)


def test_driven_axle_share():
    # definition: the driven axle carries s_r (rear drive) or 1 - s_r (front drive)
    np.testing.assert_allclose(driven_axle_share(0.4, np.array([True, False])), [0.4, 0.6], rtol=1e-15)


# --------------------------------------------- effective mass (m_eq = J (G/r)^2 eta + sum J_w / r^2, computed)
# J_motor = 0.05 kg m^2, G = 9.0, r = 0.32 m, eta = 0.95, four wheels of 1.0 kg m^2, m = 1500 kg.
E = 9.0 / 0.32


def test_effective_mass_motor_term_is_eta_multiplied():
    # motor term with x eta, computed from J (G/r)^2 eta: 37.5732 kg; the code uses the eta-MULTIPLIED
    # convention m_eq = J (G/r)^2 eta (not /eta = 41.6324 kg, nor without eta = 39.5508 kg)
    assert float(effective_mass_kg(0.0, 0.05, E, 0.95)) == printed("37.5732")


def test_effective_mass_motor_term_without_eta():
    # motor term without eta, computed from J (G/r)^2: 39.5508 kg (eta = 1)
    assert float(effective_mass_kg(0.0, 0.05, E, 1.0)) == printed("39.5508")


def test_effective_mass_wheel_term():
    # wheels sum J_w / r^2 = 4 * 1.0 / 0.32^2 = 39.0625 kg (exact decimal)
    assert float(effective_mass_kg(0.0, 0.0, E, 0.95, 4.0, 0.32)) == pytest.approx(39.0625, rel=1e-14)


def test_effective_mass_total_and_mass_factor():
    # mass factor delta = 1 + m_eq/m (motor term without eta) = 1.05241 (computed)
    assert float(effective_mass_kg(1500.0, 0.05, E, 1.0, 4.0, 0.32)) / 1500.0 == printed("1.05241")


def test_effective_mass_second_check():
    # second check, J (G/r)^2: J = 0.04, G = 8.0, r = 0.32 -> exactly 25.0 kg (no eta)
    assert float(effective_mass_kg(0.0, 0.04, 8.0 / 0.32, 1.0)) == pytest.approx(25.0, rel=1e-14)


def test_effective_mass_through_drive_and_body():
    # same worked example through performance.effective_mass: 1500 + 37.5732 + 39.0625 kg
    d, b = make_design(mass_kg=1500.0, rear_share=0.5, cg_height_m=0.5, wheelbase_m=2.7, road_friction=0.9,
                       rear_drive=True, rotor_inertia_kgm2=0.05, ratio=9.0, efficiency=0.95, radius_m=0.32)
    b = Body(**{**b.__dict__, "wheel_inertia_total_kgm2": np.array([4.0])})
    assert float(effective_mass(d, b)[0]) == pytest.approx(1500.0 + 37.5732 + 39.0625, abs=5e-5)
