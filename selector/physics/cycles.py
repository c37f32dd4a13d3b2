"""Driving-cycle arithmetic: distance, the 1-s steps of the backward model, label weighting.

A cycle is speed against time sampled at whole seconds. The backward (quasi-static) energy model
works on the intervals between samples: on interval k (from t_k to t_k+1) the vehicle runs at the
mean speed (v_k + v_k+1) / 2 with the constant acceleration (v_k+1 - v_k) / dt. With these two
choices the distance of the interval is the trapezoid rule and the inertial work m a v dt equals
the change of kinetic energy m (v_k+1^2 - v_k^2) / 2 exactly.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "CITY_WEIGHT",
    "HIGHWAY_WEIGHT",
    "combined_consumption",
    "combined_fuel_economy",
    "cycle_distance_m",
    "cycle_steps",
]

CITY_WEIGHT = 0.55
"""Weight of the city (UDDS-based) result in the US fuel-economy label's combined value (40 CFR 600)."""
HIGHWAY_WEIGHT = 0.45
"""Weight of the highway (HWFET-based) result in the combined value (40 CFR 600)."""


def cycle_distance_m(time_s, speed_mps):
    """Distance driven over a sampled cycle, by the trapezoid rule.

    Parameters
    ----------
    time_s : array_like, shape (n,)
        Sample times, increasing [s].
    speed_mps : array_like, shape (n,)
        Speeds at the sample times [m/s].

    Returns
    -------
    float
        Distance [m].
    """
    t = np.asarray(time_s, dtype=float)
    v = np.asarray(speed_mps, dtype=float)
    return float(np.sum(0.5 * (v[1:] + v[:-1]) * np.diff(t)))


def cycle_steps(time_s, speed_mps):
    """The intervals of the backward model: duration, mean speed, acceleration, highest speed.

    Parameters
    ----------
    time_s : array_like, shape (n,)
        Sample times, increasing [s].
    speed_mps : array_like, shape (n,)
        Speeds at the sample times [m/s].

    Returns
    -------
    dt_s : ndarray, shape (n - 1,)
        Interval durations [s].
    mean_speed_mps : ndarray, shape (n - 1,)
        (v_k + v_k+1) / 2 [m/s].
    accel_mps2 : ndarray, shape (n - 1,)
        (v_k+1 - v_k) / dt [m/s^2].
    high_speed_mps : ndarray, shape (n - 1,)
        max(v_k, v_k+1), the highest speed reached in the interval [m/s].
    """
    t = np.asarray(time_s, dtype=float)
    v = np.asarray(speed_mps, dtype=float)
    dt = np.diff(t)
    return dt, 0.5 * (v[1:] + v[:-1]), np.diff(v) / dt, np.maximum(v[1:], v[:-1])


def combined_fuel_economy(city, highway):
    """Combined city/highway fuel economy of the US label: distance-weighted harmonic mean.

    combined = 1 / (0.55 / city + 0.45 / highway) (40 CFR 600, 55 % city and 45 % highway
    driving). Use it for figures of distance per energy or fuel (mpg, km/kWh, mi/kWh).

    Parameters
    ----------
    city : array_like
        City (UDDS-based) fuel economy [distance per energy or fuel, any unit].
    highway : array_like
        Highway (HWFET-based) fuel economy [same unit as city].

    Returns
    -------
    ndarray or float
        Combined fuel economy [same unit as the inputs].
    """
    return 1.0 / (CITY_WEIGHT / np.asarray(city, dtype=float) + HIGHWAY_WEIGHT / np.asarray(highway, dtype=float))


def combined_consumption(city, highway):
    """Combined city/highway consumption (energy per distance), the same weighting as the label.

    The harmonic mean of economies is the arithmetic mean of consumptions:
    combined = 0.55 city + 0.45 highway (40 CFR 600 weights), so that
    ``combined_consumption(c, h) == 1 / combined_fuel_economy(1 / c, 1 / h)``.

    Parameters
    ----------
    city : array_like
        City consumption [energy per distance, any unit, e.g. Wh/km].
    highway : array_like
        Highway consumption [same unit as city].

    Returns
    -------
    ndarray or float
        Combined consumption [same unit as the inputs].
    """
    return CITY_WEIGHT * np.asarray(city, dtype=float) + HIGHWAY_WEIGHT * np.asarray(highway, dtype=float)
