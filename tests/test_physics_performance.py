"""Vehicle performance (acceleration time, top speeds, gradeability) against outside oracles.

Oracles (outside references: PyPI libraries, closed forms, textbook relations):
- scipy.integrate.solve_ivp (DOP853) integrating the equation of motion in the TIME domain,
  m_eff dv/dt = min(F_w, F_trac) - F_res, with a terminal event at the target speed. The right-hand
  side is written here from first principles: the envelope as the min of its three branches
  T(w) = min(T_pk, P_pk/w, P_pk (w_d/w)^k / w), and the traction limit as the solution of F = mu N_driven(a) with
  a = (F - F_res)/m_eff, solved with scipy.optimize.brentq (not the code's closed form).
- closed forms (worked values computed from the formulas below, each cross-checked with scipy):
  constant force with quadratic drag, t = m/sqrt(F c) artanh(v sqrt(c/F)); constant power without
  resistance, t = m v^2/(2P); top speed of the cubic P/v = m g Crr + c v^2.
- scipy.optimize.brentq and numpy.roots for top speeds and gradeability.
- worked example A (computed from the Gillespie ch. 2 / Wong ch. 3 textbook form, not a published
  answer) for acceleration at the traction limit.

All vehicles are illustrative (a parcel-van-sized car, 1500 kg), not real products.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import printed
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from selector.physics.performance import (
    Body,
    Drive,
    accel_time_s,
    broadcast,
    envelope_road_crossing_mps,
    gradeability_pct,
    launch_accel_mps2,
    max_speed_mps,
    sustained_top_speed_mps,
)
from selector.units import G_N

RPM = 2.0 * math.pi / 60.0  # rad/s per rev/min (ISO 80000-3 omega = 2 pi n, exact)

# Tolerances
IVP_REL = 1e-6
# ^ DOP853 at rtol 1e-11 reproduces the closed forms below to ~1e-10 even across the envelope's kinks;
#   the code's Gauss-Legendre quadrature aims at ~1e-10. 1e-6 is a deliberately generous bound: far above both
#   integration errors, far below any difference that could change a selection.
CLOSED_REL = 1e-9
# ^ closed forms are exact; the code's Gauss-Legendre quadrature is exact to ~1e-12 on these smooth
#   integrands (a rational function and a polynomial), 1e-9 leaves room for the crossover bisection.
ROOT_REL = 1e-10
# ^ brentq with xtol 1e-13 / rtol 4 eps and the code's cubic root / Newton iteration both reach ~1e-14;
#   1e-10 allows for the conditioning of a flat crossing.


# ============================================================================ designs

BASE = dict(
    # Drive: 300 N m / 100 kW motor (corner 3183 rpm), constant power up to 15000 rpm, reducer 9:1
    torque_nm=300.0, power_w=100e3, cont_torque_nm=150.0, cont_power_w=50e3, decline_rad_s=15000 * RPM,
    decline_exponent=1.0, max_speed_rad_s=15000 * RPM, rotor_inertia_kgm2=0.05, ratio=9.0, efficiency=0.95,
    radius_m=0.32,
    # Body: 1500 kg, 50 % rear, Crr 0.010, CdA 0.65 at 1.225 kg/m^3, dry road, rear drive
    mass_kg=1500.0, rear_share=0.5, crr=0.010, q_n_s2_m2=0.5 * 1.225 * 0.65, road_friction=0.9,
    cg_height_m=0.55, wheelbase_m=2.7, rear_drive=True, wheel_inertia_total_kgm2=0.0, speed_limit_mps=math.inf,
)
DRIVE_KEYS = ("torque_nm", "power_w", "cont_torque_nm", "cont_power_w", "decline_rad_s", "decline_exponent",
              "max_speed_rad_s", "rotor_inertia_kgm2", "ratio", "efficiency", "radius_m")


def params(**kw) -> dict:
    """BASE with overrides (plain floats, for the oracles)."""
    unknown = set(kw) - set(BASE)
    assert not unknown, unknown
    return {**BASE, **kw}


def build(p: dict):
    """Drive and Body (1-element arrays) of a parameter dict."""
    drive = Drive(**{k: p[k] for k in DRIVE_KEYS})
    body = Body(**{k: v for k, v in p.items() if k not in DRIVE_KEYS})
    return broadcast(drive, body)


# ============================================================================ oracles (first principles)

def envelope_torque(p: dict, w: float, continuous: bool = False, cut_at_max_speed: bool = True) -> float:
    """Shaft torque: min of the torque, power and decline branches, min(T_pk, P_pk/w, P_pk (w_d/w)^k / w)."""
    t_max = p["cont_torque_nm"] if continuous else p["torque_nm"]
    p_max = p["cont_power_w"] if continuous else p["power_w"]
    if cut_at_max_speed and w > p["max_speed_rad_s"]:
        return 0.0
    if w == 0.0:
        return t_max
    return min(t_max, p_max / w, p_max * (p["decline_rad_s"] / w) ** p["decline_exponent"] / w)


def wheel_force(p: dict, v: float, continuous: bool = False, cut_at_max_speed: bool = True) -> float:
    """F_w = eta T(v G/r) G/r."""
    e = p["ratio"] / p["radius_m"]
    return p["efficiency"] * envelope_torque(p, v * e, continuous, cut_at_max_speed) * e


def road_load(p: dict, v: float) -> float:
    """Level road: m g Crr + 0.5 rho CdA v^2."""
    return p["mass_kg"] * G_N * p["crr"] + p["q_n_s2_m2"] * v * v


def effective_mass(p: dict) -> float:
    """m + J_rotor (G/r)^2 eta + sum J_wheel / r^2 (eta-multiplied, Wong ch. 3, from memory)."""
    e = p["ratio"] / p["radius_m"]
    return p["mass_kg"] + p["rotor_inertia_kgm2"] * e * e * p["efficiency"] + p["wheel_inertia_total_kgm2"] / p[
        "radius_m"] ** 2


def driven_normal_load(p: dict, accel: float) -> float:
    """Driven-axle load on the level: static share +- m a h/L (Gillespie ch. 2, moments about a contact patch)."""
    m, hl = p["mass_kg"], p["cg_height_m"] / p["wheelbase_m"]
    if p["rear_drive"]:
        return m * G_N * p["rear_share"] + m * accel * hl
    return m * G_N * (1.0 - p["rear_share"]) - m * accel * hl


def used_force(p: dict, v: float) -> float:
    """Tractive force actually used at speed v: the motor's, unless the driven tyres would slip.

    If F_w > mu N(a_w) the tyres slip and the force is the F solving F = mu N((F - F_res)/m_eff),
    found by brentq on [0, F_w] (N falls/rises with a, so the implicit equation is solved numerically).
    """
    f_res, f_w, m_eff, mu = road_load(p, v), wheel_force(p, v), effective_mass(p), p["road_friction"]

    def excess(f):
        return f - mu * driven_normal_load(p, (f - f_res) / m_eff)

    if excess(f_w) <= 0.0:
        return f_w
    return brentq(excess, 0.0, f_w, xtol=1e-10, rtol=4 * np.finfo(float).eps)


def ivp_accel_time(p: dict, target_mps: float) -> float:
    """Time to target: scipy.integrate.solve_ivp (DOP853, rtol 1e-11) in the time domain, terminal event."""
    m_eff = effective_mass(p)

    def rhs(_t, y):
        v = y[0]
        return [(used_force(p, v) - road_load(p, v)) / m_eff]

    def reached(_t, y):
        return y[0] - target_mps

    reached.terminal = True
    reached.direction = 1.0
    assert target_mps <= p["max_speed_rad_s"] * p["radius_m"] / p["ratio"], "oracle: target above gearing limit"
    sol = solve_ivp(rhs, (0.0, 1e3), [0.0], method="DOP853", rtol=1e-11, atol=1e-12, events=reached)
    assert sol.status == 1, "the oracle never reached the target"
    return float(sol.t_events[0][0])


def oracle_top_speed(p: dict, continuous: bool = False, cut_at_max_speed: bool = False) -> float:
    """brentq on wheel force = level road load (the envelope's crossing, without the gearing cut)."""
    def gap(v):
        return wheel_force(p, v, continuous, cut_at_max_speed) - road_load(p, v)

    return brentq(gap, 1e-6, 1e3, xtol=1e-13, rtol=4 * np.finfo(float).eps)


def oracle_crossover(p: dict, lo: float, hi: float) -> float:
    """Speed in [lo, hi] where the motor force meets the slip threshold (brentq on the oracle's functions)."""
    m_eff, mu = effective_mass(p), p["road_friction"]

    def slip_margin(v):
        f_w, f_res = wheel_force(p, v), road_load(p, v)
        return f_w - mu * driven_normal_load(p, (f_w - f_res) / m_eff)

    return brentq(slip_margin, lo, hi, xtol=1e-12)


# ============================================================================ acceleration vs solve_ivp

V100 = 100.0 / 3.6  # 0-100 km/h target [m/s]
E9 = 9.0 / 0.32  # G/r of BASE [1/m]


def front_slip_case(over: float) -> dict:
    """Front drive, power declining from 12000 rpm, mu chosen so that mu W_f equals the level road load
    at ``over`` x the motor-limited top speed (so traction binds at speed until just below top speed)."""
    p = params(decline_rad_s=12000 * RPM, rear_drive=False)
    v = over * oracle_top_speed(p)
    w_f = p["mass_kg"] * G_N * (1.0 - p["rear_share"])
    return {**p, "road_friction": road_load(p, v) / w_f}

IVP_CASES = {
    # constant torque only: P so high that the corner speed (1e9/250/28.1 m/s) is far above the target
    "constant torque only": (params(torque_nm=250.0, power_w=1e9, decline_rad_s=1e9, max_speed_rad_s=1e9), V100),
    # constant power from 3183 rpm (11.9 m/s) to 15000 rpm
    "constant power": (params(), V100),
    # early decline: power falls from 5000 rpm (18.6 m/s) with k = 0.5, 1, 1.5
    "early decline k=0.5": (params(decline_rad_s=5000 * RPM, decline_exponent=0.5), V100),
    "early decline k=1": (params(decline_rad_s=5000 * RPM, decline_exponent=1.0), V100),
    "early decline k=1.5": (params(decline_rad_s=5000 * RPM, decline_exponent=1.5), V100),
    # low friction: traction-limited from launch, rear and front drive
    "traction-limited rear": (params(torque_nm=400.0, road_friction=0.3), V100),
    "traction-limited front": (params(torque_nm=400.0, road_friction=0.3, rear_drive=False), V100),
    # front drive, mu = 0.6: slips through the torque region and into the power region (crossover checked below)
    "crossover in power region": (params(torque_nm=400.0, power_w=80e3, road_friction=0.6, rear_drive=False),
                                  V100),
    # rear drive near its limit: motor-limited at launch, traction binds as drag lowers the load transfer,
    # then motor-limited again past the corner (two crossovers)
    "rear drive, traction binds mid-run": (params(torque_nm=152.2, road_friction=0.5, rotor_inertia_kgm2=0.0),
                                           V100),
    # wheel inertia 4 x 1.0 kg m^2 (equivalent mass sum J_wheel / r^2)
    "wheel inertia": (params(wheel_inertia_total_kgm2=4.0), V100),
    # gearing-limited vehicle, target exactly at the gearing limit w_max r/G (8000 rpm -> 29.79 m/s)
    "target at gearing limit": (params(decline_rad_s=8000 * RPM, max_speed_rad_s=8000 * RPM), 8000 * RPM / E9),
    # target near the top speed: 99.9 % of the envelope/road-load crossing (brentq), two envelopes whose
    # decline (from 12000 / 5000 rpm) puts that crossing below the gearing limit (55.85 m/s)
    "target near top speed": (params(decline_rad_s=12000 * RPM), "0.999 top"),
    # targets 97 % and 98.5 % of the top speed (issue: accuracy within ~3 % of the top speed)
    "target at 97 % of top speed": (params(decline_rad_s=12000 * RPM), "0.97 top"),
    "target at 98.5 % of top speed, k=1.5": (params(decline_rad_s=5000 * RPM, decline_exponent=1.5), "0.985 top"),
    "target near top speed, k=0.5": (params(decline_rad_s=5000 * RPM, decline_exponent=0.5), "0.999 top"),
    # front drive, mu = 0.05: the slip threshold, not the motor, sets the top speed (mu W_f = F_res at
    # 23.5 m/s); target 99 % of that
    "near traction-limited top speed": (params(road_friction=0.05, rear_drive=False), "0.99 traction top"),
    # front drive on a low-friction road whose slip threshold meets road load just ABOVE the motor's top
    # speed (x1.0005, x1.002): slipping until a crossover just below a target at 99.99 % / 99.9 % of top
    # speed, so the piece ending at the crossover is as near-singular as the last one
    "crossover just below a target near top speed": (front_slip_case(1.0005), "0.9999 top"),
    "crossover below a target near top speed": (front_slip_case(1.002), "0.999 top"),
}


def resolve_target(p: dict, target):
    if isinstance(target, str) and target.endswith(" top") and not target.endswith("traction top"):
        v_top = oracle_top_speed(p)
        assert v_top < p["max_speed_rad_s"] * p["radius_m"] / p["ratio"], "case must be envelope-limited"
        return float(target.split()[0]) * v_top
    if target == "0.99 traction top":
        w_f = p["mass_kg"] * G_N * (1.0 - p["rear_share"])
        return 0.99 * math.sqrt((p["road_friction"] * w_f - p["mass_kg"] * G_N * p["crr"]) / p["q_n_s2_m2"])
    return target


@pytest.mark.parametrize("name", list(IVP_CASES))
def test_accel_time_against_solve_ivp(name):
    # scipy.integrate.solve_ivp oracle, relative agreement IVP_REL
    p, target = IVP_CASES[name]
    target = resolve_target(p, target)
    expected = ivp_accel_time(p, target)
    assert float(accel_time_s(*build(p), target)[0]) == pytest.approx(expected, rel=IVP_REL)


def test_accel_time_vectorised_over_designs():
    # all IVP cases in ONE call (designs along the array axis, one target each) give the same times as
    # the oracle: the chunked, masked vector code must not mix designs (solve_ivp oracle, IVP_REL)
    ps = [IVP_CASES[n][0] for n in IVP_CASES]
    targets = np.array([resolve_target(*IVP_CASES[n]) for n in IVP_CASES])
    stacked = {k: np.array([p[k] for p in ps]) for k in BASE}
    drive, body = build(stacked)
    got = accel_time_s(drive, body, targets, chunk=4)
    expected = [ivp_accel_time(p, t) for p, t in zip(ps, targets, strict=True)]
    np.testing.assert_allclose(got, expected, rtol=IVP_REL)


def test_case_crossover_lies_in_power_region():
    # the "crossover in power region" case really is one: slipping at the corner speed P/T, gripping at
    # the target, and the crossover (brentq on the oracle's slip margin) between corner and target
    p, _ = IVP_CASES["crossover in power region"]
    e = p["ratio"] / p["radius_m"]
    v_corner = p["power_w"] / p["torque_nm"] / e
    v_cross = oracle_crossover(p, v_corner, V100)
    assert v_corner < v_cross < min(V100, p["decline_rad_s"] / e)
    assert used_force(p, v_corner) < wheel_force(p, v_corner)  # slips at the corner
    assert used_force(p, V100) == wheel_force(p, V100)  # grips at the target


def test_case_rear_drive_has_two_crossovers():
    # the "rear drive, traction binds mid-run" case: grips at launch, slips at the corner, grips at target
    p, _ = IVP_CASES["rear drive, traction binds mid-run"]
    v_corner = p["power_w"] / p["torque_nm"] / (p["ratio"] / p["radius_m"])
    assert used_force(p, 0.0) == wheel_force(p, 0.0)
    assert used_force(p, v_corner) < wheel_force(p, v_corner)
    assert used_force(p, V100) == wheel_force(p, V100)


@pytest.mark.parametrize("name", ["crossover just below a target near top speed",
                                  "crossover below a target near top speed"])
def test_case_crossover_just_below_target(name):
    # the near-top-speed slip cases really have their (last) crossover within 0.5 % below the target
    p, target = IVP_CASES[name]
    target = resolve_target(p, target)
    assert used_force(p, 0.995 * target) < wheel_force(p, 0.995 * target)  # slips
    assert used_force(p, target) == wheel_force(p, target)  # grips at the target
    assert 0.995 * target < oracle_crossover(p, 0.995 * target, target) < target


def test_case_traction_limited_cases_slip_at_launch():
    # the low-mu cases really are traction-limited at launch (oracle: used force below motor force)
    for name in ("traction-limited rear", "traction-limited front", "crossover in power region"):
        p, _ = IVP_CASES[name]
        assert used_force(p, 0.0) < wheel_force(p, 0.0), name


# ============================================================================ acceleration closed forms

def constant_force_design(force_n=5000.0, q=0.398125, mass_kg=1500.0):
    """A drive whose wheel force is exactly constant: G/r = 1, eta = 1, T = F, unlimited power and speed;
    no rolling resistance, no rotor/wheel inertia; front drive on mu = 2, whose slip threshold
    (>= mu W_f / (1 + mu h/L) = 10.4 kN) never binds."""
    return params(torque_nm=force_n, power_w=1e12, decline_rad_s=1e12, max_speed_rad_s=1e12, rotor_inertia_kgm2=0.0,
                  ratio=1.0, radius_m=1.0, efficiency=1.0, mass_kg=mass_kg, crr=0.0, q_n_s2_m2=q,
                  road_friction=2.0, rear_drive=False)


def test_constant_force_quadratic_drag_closed_form():
    # computed from the closed form of m dv/dt = F - c v^2, t(v) = m/sqrt(F c) artanh(v sqrt(c/F));
    # m = 1500, F = 5000 N, c = 0.5 * 1.225 * 0.65 = 0.398125: t(0 -> 100 km/h) = 8.510579 s
    m, f, c = 1500.0, 5000.0, 0.398125
    closed = m / math.sqrt(f * c) * math.atanh(V100 * math.sqrt(c / f))
    assert closed == printed("8.510579")  # copy check: the closed form gives the printed value
    p = constant_force_design(f, c, m)
    assert float(launch_accel_mps2(*build(p))[0]) == pytest.approx(f / m, rel=1e-14)  # traction not binding
    assert float(accel_time_s(*build(p), V100)[0]) == pytest.approx(closed, rel=CLOSED_REL)


def test_constant_force_terminal_speed():
    # closed form: terminal speed sqrt(F/c) = 112.066 m/s is the envelope/road-load crossing
    p = constant_force_design()
    assert float(max_speed_mps(*build(p))[0]) == printed("112.066")


def test_constant_power_no_resistance_closed_form():
    # computed from the closed form t = m v^2 / (2P) (constant power, no resistance): 5.787037 s for 100 kW,
    # m = 1500 kg, 0 -> 100 km/h. A real envelope starts with a constant-torque segment up to the corner
    # v_c = P/(T G/r): there a = T (G/r)/m, so t = m v_c/(T G/r) + m (v^2 - v_c^2)/(2P) = m v^2/(2P) + m P/(2 T^2)
    # with G/r = 1 (derived here). T = 1e6 N m -> v_c = 0.1 m/s, the extra term is 7.5e-5 s.
    m, p_w, t_nm = 1500.0, 100e3, 1e6
    assert m * V100 ** 2 / (2 * p_w) == printed("5.787037")  # closed-form value (leading term)
    expected = m * V100 ** 2 / (2 * p_w) + m * p_w / (2 * t_nm ** 2)
    # No resistance at all; rear drive with mu h/L = 10 * 0.55/2.7 >= 1: the slip threshold is unlimited
    # (vehicle.traction_limited_accel_mps2), needed because the launch at T/m = 667 m/s^2 is unphysical.
    p = params(torque_nm=t_nm, power_w=p_w, decline_rad_s=1e12, max_speed_rad_s=1e12, rotor_inertia_kgm2=0.0,
               ratio=1.0, radius_m=1.0, efficiency=1.0, mass_kg=m, crr=0.0, q_n_s2_m2=0.0, road_friction=10.0)
    assert float(launch_accel_mps2(*build(p))[0]) == pytest.approx(t_nm / m, rel=1e-14)  # motor-limited
    assert float(accel_time_s(*build(p), V100)[0]) == pytest.approx(expected, rel=CLOSED_REL)


@pytest.mark.parametrize("rear_drive, accel, t100", [(True, "4.8033", "5.783"), (False, "4.1437", "6.704")])
def test_accel_time_at_constant_traction_limit(rear_drive, accel, t100):
    # worked example A (computed from the Gillespie ch. 2 textbook form), t 0-100 km/h at constant a:
    # no resistance, strong motor, rotor
    # inertia 0 -> the whole run is at the textbook traction limit a = F/m, t = v/a
    p = params(torque_nm=5000.0, power_w=1e9, decline_rad_s=1e9, max_speed_rad_s=1e9, rotor_inertia_kgm2=0.0,
               crr=0.0, q_n_s2_m2=0.0, rear_share=1.20 / 2.70, cg_height_m=0.55, wheelbase_m=2.70,
               road_friction=0.9, rear_drive=rear_drive)
    assert float(launch_accel_mps2(*build(p))[0]) == printed(accel)
    assert float(accel_time_s(*build(p), V100)[0]) == printed(t100)


# ============================================================================ unreachable targets

def test_accel_time_infinite_above_max_speed():
    # product rule: a target above the vehicle's maximum speed is unreachable (time inf);
    # max speed from the brentq oracle, target 0.1 % above it
    p = params(decline_rad_s=12000 * RPM)
    v_top = oracle_top_speed(p)
    assert v_top < p["max_speed_rad_s"] / E9  # envelope-limited, not gearing-limited
    assert np.isinf(accel_time_s(*build(p), 1.001 * v_top)[0])


def test_accel_time_infinite_above_gearing_limit():
    # envelope definition: above w_max r/G the motor gives nothing; 0.1 % above the gearing limit is unreachable
    p = params(decline_rad_s=8000 * RPM, max_speed_rad_s=8000 * RPM)
    assert np.isinf(accel_time_s(*build(p), 1.001 * 8000 * RPM / E9)[0])


def test_accel_time_infinite_when_limiter_below_target():
    # product rule: the speed limiter caps the maximum speed; limiter 25 m/s, target 100 km/h
    p = params(speed_limit_mps=25.0)
    assert np.isinf(accel_time_s(*build(p), V100)[0])


def test_accel_time_finite_when_limiter_above_target():
    # same vehicle with the limiter above the target: the limiter does not change the run (solve_ivp oracle)
    p = params(speed_limit_mps=30.0)
    assert float(accel_time_s(*build(p), V100)[0]) == pytest.approx(ivp_accel_time(p, V100), rel=IVP_REL)


def test_accel_time_infinite_when_traction_cannot_beat_drag():
    # front drive on mu = 0.05 slips before 100 km/h: mu W_f = F_res at 23.5 m/s (derived here)
    p = params(road_friction=0.05, rear_drive=False)
    assert np.isinf(accel_time_s(*build(p), V100)[0])


# ============================================================================ top speed

def test_top_speed_cubic_reference_value():
    # scipy.optimize.brentq on P/v = m g Crr + c v^2: P_wheel = 150 kW, m = 1500 kg, Crr = 0.010, CdA = 0.65,
    # rho = 1.225 ->
    # v_max = 70.52061 m/s = 253.874 km/h. Realised with eta = 1 (P_wheel = P), corner speed 5 m/s and
    # no gearing cut below 1000 rad/s.
    p = params(torque_nm=150e3 / 5.0, power_w=150e3, decline_rad_s=1e3, max_speed_rad_s=1e3, ratio=1.0,
               radius_m=1.0, efficiency=1.0)
    v = float(max_speed_mps(*build(p))[0])
    assert v == printed("70.52061")
    assert v * 3.6 == printed("253.874")


def test_top_speed_cubic_against_numpy_roots():
    # numpy.roots of c v^3 + F_rr v - P = 0, real positive root
    p = params(torque_nm=150e3 / 5.0, power_w=150e3, decline_rad_s=1e3, max_speed_rad_s=1e3, ratio=1.0,
               radius_m=1.0, efficiency=1.0)
    roots = np.roots([p["q_n_s2_m2"], 0.0, p["mass_kg"] * G_N * p["crr"], -p["power_w"]])
    real = [r.real for r in roots if abs(r.imag) < 1e-9 and r.real > 0]
    assert len(real) == 1
    assert float(max_speed_mps(*build(p))[0]) == pytest.approx(real[0], rel=1e-9)  # np.roots ~1e-12 here


def test_road_load_power_and_top_speed_round_trip():
    # computed from (m g Crr + c v^2) v: road-load power of that vehicle 12.619 kW at 100 km/h, 24.059 kW at 130 km/h;
    # the same vehicle whose P_wheel is exactly that power tops out at that speed (power branch, eta = 1)
    for v_kmh, kw in ((100.0, "12.619"), (130.0, "24.059")):
        v = v_kmh / 3.6
        p_road = road_load(params(), v) * v
        assert p_road / 1000.0 == printed(kw)
        # G/r = 1 and T = P numerically: the corner is at 1 m/s, far below v
        p = params(torque_nm=p_road, power_w=p_road, decline_rad_s=1e3, max_speed_rad_s=1e3, ratio=1.0,
                   radius_m=1.0, efficiency=1.0)
        assert float(max_speed_mps(*build(p))[0]) == pytest.approx(v, rel=ROOT_REL)


TOP_CASES = {
    # torque-limited: 5 GW power, crossing where eta T G/r = road load
    "torque-limited": params(torque_nm=100.0, power_w=5e9, decline_rad_s=1e9, max_speed_rad_s=1e9),
    # power-limited: BASE with no gearing cut
    "power-limited": params(max_speed_rad_s=1e9, decline_rad_s=1e9),
    # decline-limited, k = 0.5, 1, 1.5 (decline from 5000 rpm)
    "decline k=0.5": params(decline_rad_s=5000 * RPM, decline_exponent=0.5),
    "decline k=1": params(decline_rad_s=5000 * RPM, decline_exponent=1.0),
    "decline k=1.5": params(decline_rad_s=5000 * RPM, decline_exponent=1.5),
    # no aerodynamic-sized drag but a small one, heavy vehicle (campus shuttle, 3500 kg)
    "heavy, power-limited": params(mass_kg=3500.0, crr=0.014, q_n_s2_m2=0.5 * 1.225 * 1.4, max_speed_rad_s=1e9,
                                   decline_rad_s=1e9),
}


@pytest.mark.parametrize("name", list(TOP_CASES))
def test_envelope_road_crossing_against_brentq(name):
    # scipy.optimize.brentq on wheel force = road load, ROOT_REL
    p = TOP_CASES[name]
    assert float(envelope_road_crossing_mps(*build(p))[0]) == pytest.approx(oracle_top_speed(p), rel=ROOT_REL)


@pytest.mark.parametrize("name", list(TOP_CASES))
def test_max_speed_against_brentq(name):
    # these cases are envelope-limited (gearing limit above the crossing), so max speed = crossing (brentq)
    p = TOP_CASES[name]
    v = oracle_top_speed(p)
    assert v < p["max_speed_rad_s"] * p["radius_m"] / p["ratio"]
    assert float(max_speed_mps(*build(p))[0]) == pytest.approx(v, rel=ROOT_REL)


def test_torque_limited_top_speed_closed_form():
    # eta T G/r = m g Crr + c v^2 -> v = sqrt((eta T G/r - m g Crr)/c) (derived here; numpy.roots of the
    # quadratic as the second oracle)
    p = TOP_CASES["torque-limited"]
    f0 = p["efficiency"] * p["torque_nm"] * E9
    roots = np.roots([p["q_n_s2_m2"], 0.0, p["mass_kg"] * G_N * p["crr"] - f0])
    assert float(max_speed_mps(*build(p))[0]) == pytest.approx(max(roots.real), rel=1e-12)


def test_decline_k1_top_speed_against_numpy_roots():
    # decline branch with k = 1: F = eta P w_d (r/G) / v^2, so q v^4 + m g Crr v^2 - eta P w_d r/G = 0
    # (derived here from the envelope's decline branch); numpy.roots, real positive root
    p = TOP_CASES["decline k=1"]
    c = p["efficiency"] * p["power_w"] * p["decline_rad_s"] / E9
    roots = np.roots([p["q_n_s2_m2"], 0.0, p["mass_kg"] * G_N * p["crr"], 0.0, -c])
    v = max(r.real for r in roots if abs(r.imag) < 1e-9)
    assert float(max_speed_mps(*build(p))[0]) == pytest.approx(v, rel=1e-9)


def test_max_speed_gearing_limited():
    # envelope crossing above w_max r/G: max speed = w_max r/G exactly (8000 rpm, G 9, r 0.32 = 29.7887 m/s)
    p = params(decline_rad_s=8000 * RPM, max_speed_rad_s=8000 * RPM)
    assert oracle_top_speed(p) > 8000 * RPM / E9  # the envelope alone would go faster (brentq)
    assert float(max_speed_mps(*build(p))[0]) == pytest.approx(8000 * RPM / E9, rel=1e-14)


def test_envelope_crossing_ignores_gearing_limit():
    # envelope_road_crossing_mps docstring: the crossing ignores the gearing limit (brentq without the cut)
    p = params(decline_rad_s=8000 * RPM, max_speed_rad_s=8000 * RPM)
    assert float(envelope_road_crossing_mps(*build(p))[0]) == pytest.approx(oracle_top_speed(p), rel=ROOT_REL)


def test_max_speed_limiter_limited():
    # product rule: max speed = min(gearing, envelope, limiter); limiter 30 m/s below both
    p = params(speed_limit_mps=30.0)
    assert float(max_speed_mps(*build(p))[0]) == 30.0


@pytest.mark.parametrize("k", [0.5, 1.0, 1.5])
def test_sustained_top_speed_against_brentq(k):
    # continuous envelope (150 N m / 50 kW) with the motor's decline speed and exponent (product rule),
    # brentq on continuous wheel force = road load
    p = params(decline_rad_s=5000 * RPM, decline_exponent=k)
    v = oracle_top_speed(p, continuous=True)
    assert float(sustained_top_speed_mps(*build(p))[0]) == pytest.approx(v, rel=ROOT_REL)
    assert v < oracle_top_speed(p)  # below the peak-envelope speed


def test_sustained_top_speed_power_limited_against_numpy_roots():
    # continuous power branch: q v^3 + m g Crr v - eta P_cont = 0 (numpy.roots)
    p = params(max_speed_rad_s=1e9, decline_rad_s=1e9)
    roots = np.roots([p["q_n_s2_m2"], 0.0, p["mass_kg"] * G_N * p["crr"], -p["efficiency"] * p["cont_power_w"]])
    v = max(r.real for r in roots if abs(r.imag) < 1e-9)
    assert float(sustained_top_speed_mps(*build(p))[0]) == pytest.approx(v, rel=1e-9)


def test_sustained_top_speed_capped_by_gearing_and_limiter():
    # product convention: sustained top speed is also capped by gearing and by the limiter
    gear = params(decline_rad_s=5000 * RPM, max_speed_rad_s=5000 * RPM)  # 18.6 m/s, below the cont. crossing
    assert oracle_top_speed(gear, continuous=True) > 5000 * RPM / E9
    assert float(sustained_top_speed_mps(*build(gear))[0]) == pytest.approx(5000 * RPM / E9, rel=1e-14)
    assert float(sustained_top_speed_mps(*build(params(speed_limit_mps=20.0)))[0]) == 20.0


def test_top_speeds_vectorised():
    # all TOP_CASES in one call equal the per-design brentq crossings
    ps = list(TOP_CASES.values())
    stacked = {k: np.array([p[k] for p in ps]) for k in BASE}
    np.testing.assert_allclose(max_speed_mps(*build(stacked)), [oracle_top_speed(p) for p in ps], rtol=ROOT_REL)


# ============================================================================ gradeability

def grade_oracle_motor(p: dict) -> float:
    """brentq on theta: eta T G/r = m g (Crr cos(theta) + sin(theta)) (road load on a grade, crawl speed)."""
    f0 = p["efficiency"] * p["torque_nm"] * p["ratio"] / p["radius_m"]
    if f0 >= p["mass_kg"] * G_N * math.hypot(1.0, p["crr"]):
        return math.inf  # the road load m g (Crr cos + sin) never exceeds m g sqrt(1 + Crr^2)
    th = brentq(lambda t: f0 - p["mass_kg"] * G_N * (p["crr"] * math.cos(t) + math.sin(t)), 0.0, 1.2,
                xtol=1e-15, rtol=4 * np.finfo(float).eps)
    return 100.0 * math.tan(th)


def grade_oracle_traction(p: dict) -> float:
    """brentq on theta: mu N_driven(theta) = m g (Crr cos + sin), axle loads from moments about a contact
    patch on the slope (Gillespie ch. 2): N_r = m g (s_r cos + (h/L) sin), N_f = m g cos - N_r."""
    m, mu, hl, s = p["mass_kg"], p["road_friction"], p["cg_height_m"] / p["wheelbase_m"], p["rear_share"]

    def margin(t):
        n_r = m * G_N * (s * math.cos(t) + hl * math.sin(t))
        n = n_r if p["rear_drive"] else m * G_N * math.cos(t) - n_r
        return mu * n - m * G_N * (p["crr"] * math.cos(t) + math.sin(t))

    th = brentq(margin, 0.0, 1.5, xtol=1e-15, rtol=4 * np.finfo(float).eps)
    return 100.0 * math.tan(th)


def grade_closed_traction(p: dict) -> float:
    """tan(theta) = (mu s - Crr) / (1 -+ mu h/L), solved by hand from the same axle-load equations."""
    mu, hl = p["road_friction"], p["cg_height_m"] / p["wheelbase_m"]
    s = p["rear_share"] if p["rear_drive"] else 1.0 - p["rear_share"]
    return 100.0 * (mu * s - p["crr"]) / (1.0 - mu * hl if p["rear_drive"] else 1.0 + mu * hl)


@pytest.mark.parametrize("torque", [100.0, 150.0, 200.0])
def test_gradeability_motor_limited(torque):
    # brentq oracle on the motor-limited grade; the traction limit on dry road is higher (checked)
    p = params(torque_nm=torque)
    expected = grade_oracle_motor(p)
    assert expected < grade_oracle_traction(p)
    assert float(gradeability_pct(*build(p))[0]) == pytest.approx(expected, rel=ROOT_REL)


@pytest.mark.parametrize("rear_drive, mu", [(True, 0.3), (True, 0.6), (False, 0.3), (False, 0.6)])
def test_gradeability_traction_limited(rear_drive, mu):
    # traction-limited (strong motor): brentq on the axle-load equations, and the hand-solved closed form
    p = params(torque_nm=2000.0, road_friction=mu, rear_drive=rear_drive)
    expected = grade_oracle_traction(p)
    assert expected < grade_oracle_motor(p)
    assert expected == pytest.approx(grade_closed_traction(p), rel=1e-12)  # two oracles agree
    assert float(gradeability_pct(*build(p))[0]) == pytest.approx(expected, rel=ROOT_REL)


def test_gradeability_all_weight_on_driven_axle_equals_mu():
    # closed form (statics): traction-limited grade with every wheel driven and no rolling resistance,
    # tan(theta) = mu -> mu = 0.9 gives 90 % (41.99 deg). Realised as all weight on the driven axle
    # (rear share 1) with h = 0, so no load moves: N_driven = m g cos(theta).
    p = params(torque_nm=5000.0, road_friction=0.9, rear_share=1.0, cg_height_m=0.0, crr=0.0)
    g = float(gradeability_pct(*build(p))[0])
    assert g == pytest.approx(90.0, rel=1e-12)
    assert math.degrees(math.atan(g / 100.0)) == printed("41.99")


def test_gradeability_30pct_needs_the_worked_wheel_torque():
    # computed from m g (Crr cos + sin): 1500 kg on 30 %, Crr 0.010 needs 4367.78 N, i.e. 1397.69 N m at
    # r = 0.32 m. A drive with exactly that wheel torque (G 1, eta 1, r 0.32) climbs 30 % (motor-limited).
    p = params(torque_nm=1397.69, ratio=1.0, efficiency=1.0, radius_m=0.32, road_friction=2.0, rear_share=0.9)
    assert float(gradeability_pct(*build(p))[0]) == pytest.approx(30.0, abs=5e-4)
    # ^ 1397.69 is printed to 0.005 N m: 0.005/1397.69 of the force moves the grade by < 4e-4 %-points


def test_gradeability_vectorised_mixed_limits():
    # motor- and traction-limited designs in one call match their own oracles
    ps = [params(torque_nm=150.0), params(torque_nm=2000.0, road_friction=0.3, rear_drive=False),
          params(torque_nm=2000.0, road_friction=0.6)]
    stacked = {k: np.array([p[k] for p in ps]) for k in BASE}
    expected = [min(grade_oracle_motor(p), grade_oracle_traction(p)) for p in ps]
    np.testing.assert_allclose(gradeability_pct(*build(stacked)), expected, rtol=ROOT_REL)
