"""Motor losses: the polynomial loss model, efficiency from losses, and measured efficiency maps.

Polynomial loss model (Larminie and Lowry, Electric Vehicle Technology Explained, 2nd ed., 2012,
ch. 7, losses of an electric motor)::

    P_loss = k_c T^2 + k_i w + k_w w^3 + C0

with k_c the copper-loss coefficient [W/(N m)^2], k_i the iron-loss coefficient [W/(rad/s) = N m],
k_w the windage (friction and windage) coefficient [W/(rad/s)^3 = W s^3] and C0 a constant loss [W].
The model holds for motoring and for generating (T may be negative; T^2 and |w| are used).

Sign convention of mechanical power P = T w: positive when the motor drives (motoring),
negative when it brakes (generating). Electrical power at the motor terminals is positive when the
motor draws power:

- loss model:        P_el = P + P_loss                  (both directions)
- efficiency map:    P_el = P / eta  when motoring,   P_el = P eta  when generating.

An efficiency map is a rectangular grid of efficiencies over shaft speed and torque, read with
bilinear interpolation; points outside the grid are reported, never extrapolated.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "EfficiencyGrid",
    "bilinear_interpolate",
    "efficiency_from_loss",
    "electrical_power_from_efficiency_w",
    "electrical_power_from_loss_w",
    "map_efficiency",
    "motor_loss_w",
    "peak_efficiency",
]


def motor_loss_w(torque_nm, speed_rad_s, k_c, k_i, k_w, c0):
    """Motor power loss of the polynomial model, P_loss = k_c T^2 + k_i w + k_w w^3 + C0.

    Parameters
    ----------
    torque_nm : array_like
        Shaft torque T, either sign [N m].
    speed_rad_s : array_like
        Shaft speed w (its magnitude is used) [rad/s].
    k_c : array_like
        Copper-loss coefficient [W/(N m)^2].
    k_i : array_like
        Iron-loss coefficient [W s/rad = N m].
    k_w : array_like
        Windage-loss coefficient [W s^3/rad^3].
    c0 : array_like
        Constant loss [W].

    Returns
    -------
    ndarray
        Power loss [W].

    References
    ----------
    Larminie and Lowry, Electric Vehicle Technology Explained, 2nd ed., Wiley, 2012, ch. 7.
    """
    t = np.asarray(torque_nm, dtype=float)
    w = np.abs(np.asarray(speed_rad_s, dtype=float))
    return k_c * t * t + k_i * w + k_w * w * w * w + c0


def electrical_power_from_loss_w(mech_power_w, loss_w):
    """Electrical power at the motor terminals from the mechanical power and the loss, P + P_loss.

    Parameters
    ----------
    mech_power_w : array_like
        Shaft power T w, > 0 motoring, < 0 generating [W].
    loss_w : array_like
        Motor loss [W].

    Returns
    -------
    ndarray
        Electrical power, > 0 drawn, < 0 delivered [W].
    """
    return np.asarray(mech_power_w, dtype=float) + loss_w


def efficiency_from_loss(mech_power_w, loss_w):
    """Motor efficiency from its loss, motoring or generating.

    Motoring (P > 0): eta = P / (P + P_loss). Generating (P < 0): eta = (|P| - P_loss) / |P|
    (negative when the losses exceed the braking power: the motor then draws power).

    Parameters
    ----------
    mech_power_w : array_like
        Shaft power T w [W].
    loss_w : array_like
        Motor loss [W].

    Returns
    -------
    ndarray
        Efficiency [-]; NaN where the shaft power is 0.
    """
    p = np.asarray(mech_power_w, dtype=float)
    loss = np.asarray(loss_w, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        motoring = p / (p + loss)
        generating = (np.abs(p) - loss) / np.abs(p)
    return np.where(p > 0, motoring, np.where(p < 0, generating, np.nan))


def electrical_power_from_efficiency_w(mech_power_w, efficiency):
    """Electrical power at the motor terminals from a (map) efficiency.

    Motoring (P >= 0): P_el = P / eta. Generating (P < 0): P_el = P eta.

    Parameters
    ----------
    mech_power_w : array_like
        Shaft power T w [W].
    efficiency : array_like
        Efficiency at the operating point, in (0, 1] [-].

    Returns
    -------
    ndarray
        Electrical power [W]; 0 where the shaft power is 0.
    """
    p = np.asarray(mech_power_w, dtype=float)
    eta = np.asarray(efficiency, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        motoring = np.where(p > 0, p / eta, 0.0)
    return np.where(p < 0, p * eta, motoring)


def peak_efficiency(k_c, k_i, k_w, c0, torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s,
                    n_speed=200, n_torque=200):
    """Highest motoring efficiency of the loss model under a motor's torque envelope (grid search).

    Parameters
    ----------
    k_c, k_i, k_w, c0 : float
        Loss coefficients (see `motor_loss_w`) [W/(N m)^2], [N m], [W s^3], [W].
    torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s : float
        Peak envelope (see `selector.physics.motor.envelope_torque_nm`) [N m], [W], [rad/s], [-], [rad/s].
    n_speed, n_torque : int
        Grid points over (0, max speed] and over (0, envelope torque] [-].

    Returns
    -------
    float
        Peak efficiency on the grid [-].
    """
    from selector.physics.motor import envelope_torque_nm

    w = np.linspace(max_speed_rad_s / n_speed, max_speed_rad_s, n_speed)[:, None]
    t_env = envelope_torque_nm(w, torque_nm, power_w, decline_rad_s, decline_exponent, max_speed_rad_s)
    t = t_env * np.linspace(1.0 / n_torque, 1.0, n_torque)[None, :]
    p = t * w
    eta = efficiency_from_loss(p, motor_loss_w(t, w, k_c, k_i, k_w, c0))
    return float(np.nanmax(eta))


@dataclass(frozen=True, eq=False)
class EfficiencyGrid:
    """A motor efficiency map on a rectangular grid (SI).

    Attributes
    ----------
    speed_rad_s : ndarray, shape (ns,)
        Grid speeds, strictly increasing, >= 0 [rad/s].
    torque_nm : ndarray, shape (nt,)
        Grid torques, strictly increasing [N m]. When every grid torque is >= 0 the map is read at
        |T| for generating points too (the same efficiency in both directions); a map with negative
        torques is read at the signed torque.
    efficiency : ndarray, shape (ns, nt)
        Efficiency at each (speed, torque), in [0, 1] [-].
    name : str
        Where the map came from (file as given), for messages.
    """

    speed_rad_s: np.ndarray
    torque_nm: np.ndarray
    efficiency: np.ndarray
    name: str = ""

    @property
    def mirrored(self) -> bool:
        """True when generating points are read at |T| (no negative torques in the grid)."""
        return bool(self.torque_nm[0] >= 0.0)


def bilinear_interpolate(x_grid, y_grid, values, x, y):
    """Bilinear interpolation on a rectangular grid, with a mask of the points outside it.

    Parameters
    ----------
    x_grid : array_like, shape (nx,)
        Strictly increasing grid coordinates along the first axis [any unit].
    y_grid : array_like, shape (ny,)
        Strictly increasing grid coordinates along the second axis [any unit].
    values : array_like, shape (nx, ny)
        Values at the grid nodes [any unit].
    x, y : array_like
        Query points (broadcast together) [units of x_grid, y_grid].

    Returns
    -------
    value : ndarray
        Interpolated values; NaN outside the grid [unit of values].
    outside : ndarray of bool
        True where (x, y) lies outside [x0, x_last] x [y0, y_last] (or is NaN).
    """
    xg = np.asarray(x_grid, dtype=float)
    yg = np.asarray(y_grid, dtype=float)
    z = np.asarray(values, dtype=float)
    x, y = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
    outside = ~((x >= xg[0]) & (x <= xg[-1]) & (y >= yg[0]) & (y <= yg[-1]))
    i = np.clip(np.searchsorted(xg, x, side="right") - 1, 0, len(xg) - 2)
    j = np.clip(np.searchsorted(yg, y, side="right") - 1, 0, len(yg) - 2)
    with np.errstate(invalid="ignore"):
        fx = np.clip((x - xg[i]) / (xg[i + 1] - xg[i]), 0.0, 1.0)
        fy = np.clip((y - yg[j]) / (yg[j + 1] - yg[j]), 0.0, 1.0)
    v = ((1 - fx) * (1 - fy) * z[i, j] + fx * (1 - fy) * z[i + 1, j]
         + (1 - fx) * fy * z[i, j + 1] + fx * fy * z[i + 1, j + 1])
    return np.where(outside, np.nan, v), outside


def map_efficiency(grid: EfficiencyGrid, speed_rad_s, torque_nm):
    """Efficiency of a map at operating points; motoring or generating.

    Parameters
    ----------
    grid : EfficiencyGrid
        The map.
    speed_rad_s : array_like
        Shaft speed (its magnitude is used) [rad/s].
    torque_nm : array_like
        Shaft torque, > 0 motoring, < 0 generating [N m]; read at |T| when the map is mirrored.

    Returns
    -------
    efficiency : ndarray
        Interpolated efficiency [-]; NaN outside the map.
    outside : ndarray of bool
        True where the point is outside the map.
    """
    t = np.asarray(torque_nm, dtype=float)
    if grid.mirrored:
        t = np.abs(t)
    return bilinear_interpolate(grid.speed_rad_s, grid.torque_nm, grid.efficiency,
                                np.abs(np.asarray(speed_rad_s, dtype=float)), t)
