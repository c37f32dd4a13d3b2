"""Motor torque envelopes and the wheel force they give through a reducer and a tyre.

The envelope at shaft speed w [rad/s] is

    T(w) = min(T_max, P_max / w, P_max (w_d / w)^k / w)   for 0 <= w <= w_max, else 0,

i.e. constant torque up to the corner speed P/T, constant power up to the decline speed w_d,
then power falling as (w_d/w)^k. The continuous envelope uses the continuous torque and power
with the same w_d, k and w_max.
"""

from __future__ import annotations

import numpy as np


def envelope_torque_nm(speed_rad_s, torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s):
    """Envelope torque at a shaft speed.

    Parameters
    ----------
    speed_rad_s : shaft speed w [rad/s] (>= 0)
    torque_nm : torque limit T [N m]
    power_w : power limit P [W]
    decline_rad_s : speed where power starts to decline w_d [rad/s]
    decline_exponent : exponent k of the decline [-]
    max_speed_rad_s : maximum shaft speed w_max [rad/s]

    Returns
    -------
    Available shaft torque [N m]; 0 above w_max.
    """
    w = np.asarray(speed_rad_s, dtype=float)
    shape = np.broadcast_shapes(w.shape, np.shape(torque_nm), np.shape(power_w), np.shape(decline_rad_s),
                                np.shape(decline_exponent), np.shape(max_speed_rad_s))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        p_branch = np.broadcast_to(np.where(w > 0, power_w / w, np.inf), shape)
        ratio = np.broadcast_to(decline_rad_s / w, shape)
    t = np.minimum(torque_nm, p_branch)
    declining = ratio < 1.0  # only there is the decline branch below the power branch
    if declining.any():
        with np.errstate(invalid="ignore", over="ignore"):
            factor = np.power(ratio, np.broadcast_to(decline_exponent, shape), out=np.ones(shape), where=declining)
            t = np.minimum(t, p_branch * factor)
    return np.where(w <= max_speed_rad_s * (1 + 1e-12), t, 0.0)


def wheel_force_n(speed_mps, gear_over_radius_1_m, efficiency, torque_nm, power_w, decline_rad_s,
                  decline_exponent, max_speed_rad_s):
    """Tractive force at the wheels from a motor envelope, F = eta T(v G/r) G/r.

    Parameters
    ----------
    speed_mps : road speed v [m/s]
    gear_over_radius_1_m : reduction ratio over rolling radius G/r [1/m]
    efficiency : reducer efficiency eta [-]
    torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s : envelope (see
        `envelope_torque_nm`) [N m], [W], [rad/s], [-], [rad/s]

    Returns
    -------
    Wheel force [N].
    """
    w = np.asarray(speed_mps, dtype=float) * gear_over_radius_1_m
    t = envelope_torque_nm(w, torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s)
    return efficiency * t * gear_over_radius_1_m
