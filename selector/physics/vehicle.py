"""Vehicle-level relations: axle loads, effective mass and the traction limit with load transfer.

Sign convention for the driven axle: ``rear_drive`` is a boolean array (True = rear axle driven).
Load transfer uses m a (not m_eff a) and ignores aerodynamic lift and pitch moments.
"""

from __future__ import annotations

import numpy as np

from selector.units import G_N


def effective_mass_kg(mass_kg, rotor_inertia_kgm2, gear_over_radius_1_m, efficiency,
                      wheel_inertia_total_kgm2=0.0, radius_m=1.0):
    """Translational mass equivalent of the vehicle and its rotating parts.

    m_eff = m + J_rotor (G/r)^2 eta + sum(J_wheel) / r^2 (the eta-multiplied convention of the
    handbooks: Wong, Theory of Ground Vehicles ch. 3; Gillespie ch. 2, from memory).

    Parameters
    ----------
    mass_kg : vehicle mass m [kg]
    rotor_inertia_kgm2 : motor rotor inertia J_rotor [kg m^2]
    gear_over_radius_1_m : G/r [1/m]
    efficiency : reducer efficiency eta [-]
    wheel_inertia_total_kgm2 : sum of the wheels' inertias [kg m^2]
    radius_m : rolling radius r [m] (only used for the wheel term)

    Returns
    -------
    Effective mass [kg].
    """
    e = np.asarray(gear_over_radius_1_m, dtype=float)
    return (mass_kg + rotor_inertia_kgm2 * e * e * efficiency
            + np.asarray(wheel_inertia_total_kgm2, dtype=float) / np.asarray(radius_m, dtype=float) ** 2)


def driven_axle_share(rear_share, rear_drive):
    """Static share of the vehicle weight on the driven axle. [-] -> [-]"""
    return np.where(rear_drive, rear_share, 1.0 - np.asarray(rear_share, dtype=float))


def transfer_factor(road_friction, mass_kg, effective_mass_kg_, cg_height_m, wheelbase_m, rear_drive):
    """Load-transfer factor kappa = +-mu (m/m_eff) (h/L), + for rear drive, - for front drive. [-]"""
    k = road_friction * (mass_kg / effective_mass_kg_) * (cg_height_m / wheelbase_m)
    return np.where(rear_drive, k, -k)


def traction_limited_accel_mps2(road_friction, driven_weight_n, road_load_n_, effective_mass_kg_, kappa):
    """Acceleration when the driven tyres slip at peak friction (level road).

    With N_driven = W_driven +- m a h/L and F = mu N_driven, the acceleration
    a = (F - F_res)/m_eff solves to a = (mu W_driven - F_res) / ((1 - kappa) m_eff).
    For rear drive with kappa >= 1 the axle can transmit any force: +inf.

    Parameters
    ----------
    road_friction : peak friction coefficient mu [-]
    driven_weight_n : static load on the driven axle [N]
    road_load_n_ : road load at this speed [N]
    effective_mass_kg_ : m_eff [kg]
    kappa : `transfer_factor` [-]

    Returns
    -------
    Traction-limited acceleration [m/s^2].
    """
    denom = (1.0 - kappa) * effective_mass_kg_
    with np.errstate(divide="ignore", invalid="ignore"):
        a = (road_friction * driven_weight_n - road_load_n_) / denom
    return np.where(denom > 0, a, np.inf)


def traction_force_limit_n(road_friction, mass_kg, rear_share, cg_height_m, wheelbase_m, rear_drive,
                           accel_mps2=0.0, grade_pct=0.0):
    """Largest tractive force the driven axle can transmit, mu N_driven, at a given acceleration.

    Rear drive:  N_r = m g (s_r cos(theta) + (h/L) sin(theta)) + m a h/L
    Front drive: N_f = m g ((1 - s_r) cos(theta) - (h/L) sin(theta)) - m a h/L

    Parameters
    ----------
    road_friction : mu [-]
    mass_kg : m [kg]
    rear_share : static rear-axle share s_r [-]
    cg_height_m : h [m]
    wheelbase_m : L [m]
    rear_drive : True for rear drive
    accel_mps2 : a [m/s^2]
    grade_pct : grade [%]

    Returns
    -------
    Force [N].
    """
    theta = np.arctan(np.asarray(grade_pct, dtype=float) / 100.0)
    hl = np.asarray(cg_height_m, dtype=float) / wheelbase_m
    c, s = np.cos(theta), np.sin(theta)
    n_rear = mass_kg * G_N * (rear_share * c + hl * s) + mass_kg * accel_mps2 * hl
    n_front = mass_kg * G_N * ((1.0 - rear_share) * c - hl * s) - mass_kg * accel_mps2 * hl
    return road_friction * np.where(rear_drive, n_rear, n_front)
