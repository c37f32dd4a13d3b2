"""Traction bounds that no part choice can exceed (proved upper bounds, used to prune and to rule out).

The driven axle's static share is linear-fractional in the part masses, so its largest value over a
catalogue is at a vertex of the mass box (`max_driven_share`); with it, the steepest grade and the
largest launch acceleration the driven axle can transmit follow from the friction limit with load
transfer (`traction_tan_bound`; both axles driven: mu - Crr, `climb.traction_grade_tan`).
"""

from __future__ import annotations

import numpy as np

from selector.engine.parts import PartTables
from selector.physics.climb import traction_grade_tan
from selector.units import G_N


def max_driven_share(parts: PartTables, motor_mass_kg, reducer_mass_kg, tyre_mass_kg) -> np.ndarray:
    """Largest static driven-axle share per motor mass, over ranges of reducer and tyre masses [-].

    The share is linear-fractional in (reducer mass, tyre mass), so its maximum over the box
    [min, max] x [min, max] of the given masses is at a vertex.

    Parameters
    ----------
    motor_mass_kg : motor masses [kg] (array: one result each)
    reducer_mass_kg, tyre_mass_kg : (lowest, highest) masses, scalars or per-motor arrays [kg]
    """
    v = parts.problem.vehicle
    n = v.tyre_count
    share0 = v.rear_axle_share if parts.rear_drive else 1.0 - v.rear_axle_share
    mm = np.asarray(motor_mass_kg, dtype=float)
    best = np.full(mm.shape, -np.inf)
    for mr in reducer_mass_kg:
        for mt in tyre_mass_kg:
            driven = share0 * v.mass_kg + mm + mr + 0.5 * n * mt
            best = np.maximum(best, driven / (v.mass_kg + mm + mr + n * mt))
    if parts.problem.energy is not None:
        # a battery sits with the vehicle's own share: it moves the driven share towards share0
        best = np.maximum(best, share0)
    return best


def traction_tan_bound(parts: PartTables, driven_share, crr):
    """tan(theta) = (mu s - Crr) / (1 -+ mu h/L): the steepest grade the driven axle can climb, and
    (times g) the largest launch acceleration it can transmit with m_eff >= m [-].

    Rear drive takes the minus sign. When 1 - mu h/L <= 0 the axle is not traction-limited in
    this bound: +inf (an upper bound in every case, which is all its users need).
    """
    p = parts.problem
    mu = p.environment.road_friction
    hl = p.vehicle.cg_height_m / p.vehicle.wheelbase_m
    den = 1.0 - mu * hl if parts.rear_drive else 1.0 + mu * hl
    num = mu * np.asarray(driven_share, dtype=float) - crr
    if den > 0:
        return num / den
    return np.full(num.shape, np.inf) if num.shape else np.inf


def traction_limits(parts: PartTables, allowed: dict) -> dict:
    """Upper bounds on launch acceleration [m/s^2] and gradeability [%] that no part can exceed.

    One driven axle: a_T = (mu W_driven - m g Crr) / ((1 - kappa) m_eff) with kappa = +-mu (m/m_eff)
    h/L is at most (mu s - Crr) g / (1 -+ mu h/L) (m_eff >= m), with the largest driven-axle share s
    over the catalogue and the lowest Crr; gradeability tan(theta) = (mu s - Crr) / (1 -+ mu h/L).
    Both axles driven: s = 1 and the load transfers cancel, tan = mu - Crr (`traction_grade_tan`).
    """
    crr = float(parts.tyres.crr[allowed["tyres"]].min())
    if parts.two_units:
        v = parts.problem.vehicle
        s = 1.0
        tan = float(traction_grade_tan(parts.problem.environment.road_friction, 1.0, crr,
                                       v.cg_height_m / v.wheelbase_m, 0))
    else:
        mr = parts.reducers.mass_kg[allowed["reducers"]]
        mt = parts.tyres.mass_kg[allowed["tyres"]]
        s = float(max_driven_share(parts, parts.motors.mass_kg[allowed["motors"]], (mr.min(), mr.max()),
                                   (mt.min(), mt.max())).max())
        tan = float(traction_tan_bound(parts, s, crr))
    return {"launch_accel_mps2": tan * G_N, "gradeability_pct": 100.0 * tan, "driven_share": s, "crr": crr}
