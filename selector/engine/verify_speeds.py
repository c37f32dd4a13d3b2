"""The re-check's static figures: top speeds and gradeability by `scipy.optimize.brentq`, launch
acceleration by the force balance at rest (see `verify.py`)."""

from __future__ import annotations

import math

import numpy as np

from selector.engine.verify_vehicle import _accel, _force, _gear_limit, _road_load, _Vehicle
from selector.units import G_N

GRADE_SCAN = 2048
"""Grid of grade angles scanned for the sign change of the crawl force balance before brentq [-]."""

def top_speed_mps(veh: _Vehicle, continuous: bool = False) -> float:
    """Maximum (peak envelopes) or sustained (continuous) top speed by brentq on the force balance [m/s]."""
    from scipy.optimize import brentq

    def crossing(surplus, hi):
        if surplus(hi) >= 0.0:
            return hi
        if surplus(0.0) < 0.0:
            return 0.0
        return brentq(surplus, 0.0, hi, xtol=1e-13, rtol=4 * np.finfo(float).eps, maxiter=400)

    units = list(veh.units.values())
    if len(units) == 1:
        u = units[0]
        best = 0.0
        for g in range(len(u.ratios)):
            best = max(best, crossing(lambda v, g=g: _force(veh, u, g, v, continuous) - _road_load(veh, v),
                                      _gear_limit(veh, u, g)))
    else:
        cap = min(_gear_limit(veh, u, len(u.ratios) - 1) for u in units)

        def surplus(v):
            return sum(max(_force(veh, u, g, v, continuous) for g in range(len(u.ratios))) for u in units) \
                - _road_load(veh, v)

        best = crossing(surplus, cap)
    return min(best, veh.v_limit)


def grade_angle_rad(veh: _Vehicle) -> float:
    """Steepest grade angle held from crawl in first gear (brentq on the crawl balance) [rad].

    Negative when the vehicle cannot hold on the level; inf when it holds up to 90 degrees.
    """
    from scipy.optimize import brentq

    w = veh.mass * G_N
    crawl = {name: _force(veh, u, 0, 0.0) for name, u in veh.units.items()}

    def surplus(th):
        c, s = math.cos(th), math.sin(th)
        n_axle = {"rear": w * (veh.rear_share * c + veh.hl * s), "front": w * ((1.0 - veh.rear_share) * c - veh.hl * s)}
        return sum(min(f, veh.mu * n_axle[name]) for name, f in crawl.items()) - w * (veh.crr * c + s)

    edge = 0.5 * math.pi - 1e-9
    holds0 = surplus(0.0) >= 0.0
    grid = np.linspace(0.0, edge if holds0 else -edge, GRADE_SCAN + 1)
    prev = 0.0
    for th in grid[1:]:
        th = float(th)
        if (surplus(th) >= 0.0) != holds0:
            lo, hi = (prev, th) if holds0 else (th, prev)
            return brentq(surplus, lo, hi, xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=400)
        prev = th
    return math.inf if holds0 else -math.inf


def launch_accel_mps2(veh: _Vehicle) -> float:
    """Acceleration from rest on the level in first gear (force balance with the traction limit) [m/s^2]."""
    gears = {n: 0 for n in veh.units}
    return _accel(veh, gears, {n: True for n in veh.units}, 0.0)

