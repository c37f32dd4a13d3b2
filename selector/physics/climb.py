"""Gradeability and launch acceleration of designs with one or two drive units (first gear).

Gradeability: the largest grade theta on which the drive can hold the vehicle from crawl (a = 0, no
aero): sum over driven axles of min(F_a, mu N_a(theta)) >= m g (Crr cos theta + sin theta), with
N_r = m g (s_r cos theta + (h/L) sin theta), N_f = m g ((1 - s_r) cos theta - (h/L) sin theta).
As in `drivetrain.combination_accels`, the sum of minima is the minimum over traction combinations
(each driven axle motor-limited M or traction-limited T), and each combination is a condition
F_M / (m g) >= A cos theta + B sin theta, solved in closed form:

- all M: theta = arcsin(F / (m g sqrt(1 + Crr^2))) - arctan(Crr);
- all T: tan theta = (mu S_T - Crr) / (1 - mu (h/L) sum sigma), sigma_r = +1, sigma_f = -1, S_T the
  static share of the traction-limited axles (one axle: the single-axle textbook form);
- mixed (two units): the first angle above 0 where cos(theta - phi) = F_M / (m g R), R = hypot(A, B).

The gradeability is the smallest combination angle, reported as a grade 100 tan theta [%]: inf when
nothing limits it below 90 degrees, negative when the vehicle cannot even hold on the level.

Launch: the acceleration from rest on the level, min over combinations at v = 0 (see
`drivetrain.combination_accels`) with first gears and the first-gear effective mass.
"""

from __future__ import annotations

import numpy as np

from selector.physics.drivetrain import Axles, combination_accels, state_effective_mass_kg, unit_force_n
from selector.units import G_N


def crawl_forces_n(axles: Axles):
    """(front, rear) first-gear wheel forces at crawl, eta_1 T_pk G_1 / r [N] (0 where absent)."""
    z = np.zeros(axles.n)
    return (unit_force_n(axles.front, axles.radius_m, 0, z), unit_force_n(axles.rear, axles.radius_m, 0, z))


def motor_grade_tan(force_n, mass_kg, crr):
    """tan theta of the steepest grade a crawl force holds, F = m g (Crr cos + sin) [-] (inf if never)."""
    c = crr
    ratio = force_n / (mass_kg * G_N * np.sqrt(1.0 + c * c))
    with np.errstate(invalid="ignore"):
        theta = np.arcsin(np.minimum(ratio, 1.0)) - np.arctan(c)
    return np.where(ratio >= 1.0, np.inf, np.tan(theta))


def traction_grade_tan(road_friction, share, crr, hl, sigma: int):
    """tan theta where the traction-limited axles stop covering the grade, (mu s - Crr) / (1 - sigma mu h/L) [-].

    ``share``: static share of the traction-limited axles [-]; ``sigma``: +1 rear axle alone, -1 front
    axle alone, 0 both axles (their load transfers cancel). inf (or 0 if even the level fails) when the
    denominator is <= 0.
    """
    num = road_friction * share - crr
    den = {1: 1.0 - road_friction * hl, -1: 1.0 + road_friction * hl, 0: 1.0}[sigma]
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, num / den, np.where(num >= 0, np.inf, 0.0))


def mixed_grade_tan(f_hat, a_coef, b_coef):
    """tan of the first angle theta >= 0 at which f_hat >= A cos theta + B sin theta fails [-].

    f_hat: motor-limited force over m g [-]. Negative when it fails already on the level (the angle
    where it would hold, as for the motor-only case); inf when it holds up to 90 degrees.
    """
    r = np.hypot(a_coef, b_coef)
    phi = np.arctan2(b_coef, a_coef)
    with np.errstate(invalid="ignore", divide="ignore"):
        alpha = np.arccos(np.clip(f_hat / r, -1.0, 1.0))
    theta = phi - alpha
    holds_at_0 = f_hat >= a_coef
    theta = np.where(holds_at_0 & (theta < 0), theta + 2.0 * np.pi, theta)
    never = (f_hat >= r) | (theta >= 0.5 * np.pi)
    return np.where(never, np.inf, np.tan(np.maximum(theta, -0.5 * np.pi + 1e-12)))


def gradeability_pct(axles: Axles, body) -> np.ndarray:
    """Largest grade climbable from crawl with peak torque in first gear, traction-checked [%]."""
    f_f, f_r = crawl_forces_n(axles)
    fp, rp = axles.front.present, axles.rear.present
    m, c, mu = body.mass_kg, body.crr, body.road_friction
    hl = body.cg_height_m / body.wheelbase_m
    s = body.rear_share
    tan_mm = motor_grade_tan(f_f + f_r, m, c)
    inf = np.full(axles.n, np.inf)
    tan_tm = np.where(fp & ~rp, traction_grade_tan(mu, 1.0 - s, c, hl, -1), inf)  # front alone, traction-limited
    tan_mt = np.where(rp & ~fp, traction_grade_tan(mu, s, c, hl, 1), inf)  # rear alone, traction-limited
    both = fp & rp
    if both.any():
        w = m * G_N
        tan_tt = np.where(both, traction_grade_tan(mu, 1.0, c, hl, 0), inf)
        # front traction, rear motor: F_r/(m g) >= (Crr - mu (1 - s)) cos + (1 + mu h/L) sin
        tan_tm = np.where(both, mixed_grade_tan(f_r / w, c - mu * (1.0 - s), 1.0 + mu * hl), tan_tm)
        # front motor, rear traction: F_f/(m g) >= (Crr - mu s) cos + (1 - mu h/L) sin
        tan_mt = np.where(both, mixed_grade_tan(f_f / w, c - mu * s, 1.0 - mu * hl), tan_mt)
    else:
        tan_tt = inf
    return 100.0 * np.minimum(np.minimum(tan_mm, np.minimum(tan_tm, tan_mt)), tan_tt)


def launch_accel_mps2(axles: Axles, body) -> np.ndarray:
    """Acceleration from rest on the level in first gear, traction-checked with load transfer [m/s^2]."""
    z = np.zeros(axles.n)
    m_eff = state_effective_mass_kg(axles, body.mass_kg, body.wheel_inertia_total_kgm2, z.astype(np.int64),
                                    z.astype(np.int64))
    f_f, f_r = crawl_forces_n(axles)
    f_res = body.mass_kg * G_N * body.crr
    return combination_accels(f_f, f_r, axles.front.present, axles.rear.present, f_res, body.mass_kg, m_eff,
                              body.rear_share, body.road_friction, body.cg_height_m, body.wheelbase_m)
