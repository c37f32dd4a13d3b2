"""Physical constants and unit conversions used at the edges (SI inside the engine)."""

from __future__ import annotations

import math

G_N = 9.80665
"""Standard acceleration of gravity [m/s^2] (3rd CGPM 1901, exact)."""

KMH_PER_MPS = 3.6
"""km/h in one m/s (hour = 3600 s) [-]."""

RPM_TO_RAD_S = 2.0 * math.pi / 60.0
"""rad/s in one rev/min [-]."""

INCH_M = 0.0254
"""One inch [m] (exact)."""


def kmh_to_mps(v_kmh):
    """Convert a speed from km/h to m/s. [km/h] -> [m/s]"""
    return v_kmh / KMH_PER_MPS


def mps_to_kmh(v_mps):
    """Convert a speed from m/s to km/h. [m/s] -> [km/h]"""
    return v_mps * KMH_PER_MPS


def rpm_to_rad_s(n_rpm):
    """Convert a shaft speed from rev/min to rad/s. [rpm] -> [rad/s]"""
    return n_rpm * RPM_TO_RAD_S


def rad_s_to_rpm(w_rad_s):
    """Convert a shaft speed from rad/s to rev/min. [rad/s] -> [rpm]"""
    return w_rad_s / RPM_TO_RAD_S
