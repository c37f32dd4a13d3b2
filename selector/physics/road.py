"""Road load: rolling resistance, grade and aerodynamic drag; coasting against it."""

from __future__ import annotations

import numpy as np

from selector.units import G_N


def grade_angle_rad(grade_pct):
    """Angle of a grade given as rise over run. [%] -> [rad]"""
    return np.arctan(np.asarray(grade_pct, dtype=float) / 100.0)


def grade_pct_from_angle(theta_rad):
    """Grade (rise over run) of a slope angle. [rad] -> [%]"""
    return 100.0 * np.tan(theta_rad)


def aero_coefficient_n_s2_m2(air_density_kg_m3, drag_area_m2):
    """Quadratic road-load coefficient q = 0.5 rho CdA, so F_aero = q v^2. [N s^2/m^2]"""
    return 0.5 * np.asarray(air_density_kg_m3, dtype=float) * np.asarray(drag_area_m2, dtype=float)


def road_load_n(mass_kg, crr, q_n_s2_m2, speed_mps, grade_pct=0.0):
    """Resistance to steady motion on a grade.

    F_res = m g (Crr cos(theta) + sin(theta)) + q v^2, with tan(theta) = grade/100.

    Parameters
    ----------
    mass_kg : vehicle mass [kg]
    crr : rolling-resistance coefficient [-] (rr_coefficient_n_per_kn / 1000)
    q_n_s2_m2 : 0.5 rho CdA [N s^2/m^2]
    speed_mps : road speed [m/s]
    grade_pct : grade [%]

    Returns
    -------
    Road load [N].
    """
    theta = grade_angle_rad(grade_pct)
    v = np.asarray(speed_mps, dtype=float)
    return mass_kg * G_N * (crr * np.cos(theta) + np.sin(theta)) + q_n_s2_m2 * v * v


def coast_speed_mps(v_start, t_s, mass_kg, a0_n, q_n_s2_m2):
    """Speed after coasting t_s seconds from v_start against road load a0 + q v^2 [m/s] (closed form).

    m dv/dt = -(a0 + q v^2): v = sqrt(a0/q) tan(atan(v0 sqrt(q/a0)) - t sqrt(a0 q)/m), stopping at 0;
    v0 / (1 + q v0 t/m) without rolling resistance; v0 - a0 t/m without drag.
    """
    v0 = np.asarray(v_start, dtype=float)
    a0 = np.asarray(a0_n, dtype=float) + 0.0 * v0
    q = np.asarray(q_n_s2_m2, dtype=float) + 0.0 * v0
    m = np.asarray(mass_kg, dtype=float) + 0.0 * v0
    t = np.asarray(t_s, dtype=float) + 0.0 * v0
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.sqrt(a0 / q)
        both = k * np.tan(np.arctan(v0 / k) - t * np.sqrt(a0 * q) / m)
        stop_both = t * np.sqrt(a0 * q) / m >= np.arctan(v0 / k)
        aero = v0 / (1.0 + q * v0 * t / m)
        rolling = v0 - a0 * t / m
    out = np.where((a0 > 0) & (q > 0), np.where(stop_both, 0.0, both),
                   np.where(q > 0, aero, np.where(a0 > 0, np.maximum(rolling, 0.0), v0)))
    return out
