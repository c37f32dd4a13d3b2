"""Inputs of the cycle-energy model: drive units, vehicle and settings of many designs at once.

The model itself is described in `selector.physics.energy`; this module holds its input records
and their validation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.physics.losses import EfficiencyGrid

__all__ = ["CHOICE_TIE_ABS_W", "CHOICE_TIE_REL", "DEFAULT_SPLIT_FRACTIONS", "EnergyParams", "EnergyUnit",
           "EnergyVehicle", "check_unit", "first_least", "gear_count"]

DEFAULT_SPLIT_FRACTIONS = (0.0, 0.25, 0.5, 0.75, 1.0)
"""Front share of the wheel force tried at each interval when a design has two units [-]."""
CHOICE_TIE_REL = 1e-9
"""Battery powers of two gears (or splits) within this share of the lesser, plus `CHOICE_TIE_ABS_W`,
are tied, and the first in order wins [-]: equal in exact arithmetic (a map's plateau, braking
without regeneration) they differ in the last digits, and a gear chosen by rounding changes the
shift energy."""
CHOICE_TIE_ABS_W = 1e-6
"""Absolute part of the tie tolerance of the gear and split choice [W]."""


def first_least(values) -> np.ndarray:
    """Index of the least of ``values`` along axis 0, the first one within the tie tolerance
    (`CHOICE_TIE_REL`, `CHOICE_TIE_ABS_W`) of the least winning; 0 where none is finite.

    Parameters
    ----------
    values : array_like, shape (K, ...)
        Battery power of K candidates in order [W] (inf: not usable).
    """
    v = np.asarray(values, dtype=float)
    least = v.min(axis=0)
    with np.errstate(invalid="ignore"):
        tied = v <= least + CHOICE_TIE_REL * np.abs(least) + CHOICE_TIE_ABS_W
    return np.argmax(tied, axis=0)


@dataclass(frozen=True, eq=False)
class EnergyUnit:
    """One drive unit position (front or rear) of n designs: motor, gearbox and loss model.

    All arrays have one row per design. Where ``present`` is False the unit does not exist for
    that design and its other values are ignored (they may be NaN).

    Attributes
    ----------
    present : ndarray of bool, shape (n,)
        True where the design has this unit.
    torque_nm : ndarray, shape (n,)
        Motor peak torque [N m].
    power_w : ndarray, shape (n,)
        Motor peak power [W].
    decline_rad_s : ndarray, shape (n,)
        Speed where the peak power starts to decline [rad/s] (= max speed for none).
    decline_exponent : ndarray, shape (n,)
        Exponent of the power decline [-].
    max_speed_rad_s : ndarray, shape (n,)
        Motor maximum speed [rad/s].
    rotor_inertia_kgm2 : ndarray, shape (n,)
        Rotor polar moment of inertia [kg m^2].
    ratios : ndarray, shape (n, g)
        Gear ratios G = motor speed / wheel speed, g >= 1 columns (3 for a 1-3 speed gearbox),
        NaN-padded at the end for fewer gears [-]. A present unit has at least the first.
    gear_efficiency : ndarray, shape (n, g)
        Mechanical efficiency of each gear, in (0, 1], NaN where no gear [-].
    loss_copper_w_per_nm2, loss_iron_nm, loss_windage_w_s3, loss_constant_w : ndarray, shape (n,)
        Polynomial loss model k_c [W/(N m)^2], k_i [N m], k_w [W s^3], C0 [W]
        (`selector.physics.losses.motor_loss_w`); used where ``map_index`` is -1.
    map_index : ndarray of int, shape (n,)
        Index into `maps` of the motor's efficiency map, -1 for the polynomial model.
    maps : tuple of EfficiencyGrid
        The efficiency maps referred to by ``map_index`` (may be shared between units).
    """

    present: np.ndarray
    torque_nm: np.ndarray
    power_w: np.ndarray
    decline_rad_s: np.ndarray
    decline_exponent: np.ndarray
    max_speed_rad_s: np.ndarray
    rotor_inertia_kgm2: np.ndarray
    ratios: np.ndarray
    gear_efficiency: np.ndarray
    loss_copper_w_per_nm2: np.ndarray
    loss_iron_nm: np.ndarray
    loss_windage_w_s3: np.ndarray
    loss_constant_w: np.ndarray
    map_index: np.ndarray
    maps: tuple[EfficiencyGrid, ...] = ()

    def __len__(self) -> int:
        return len(np.asarray(self.present))


@dataclass(frozen=True, eq=False)
class EnergyVehicle:
    """Vehicle data of n designs for the energy model (arrays of shape (n,) or scalars).

    Attributes
    ----------
    mass_kg : array_like
        Vehicle mass with every part (and the battery, where sized) [kg].
    crr : array_like
        Rolling-resistance coefficient [-].
    q_n_s2_m2 : array_like
        Aerodynamic coefficient 0.5 rho CdA, F_aero = q v^2 [N s^2/m^2].
    radius_m : array_like
        Rolling radius of the tyres (one size on every wheel) [m].
    wheel_inertia_total_kgm2 : array_like
        Sum of the polar moments of inertia of all wheels and tyres [kg m^2].
    """

    mass_kg: np.ndarray
    crr: np.ndarray
    q_n_s2_m2: np.ndarray
    radius_m: np.ndarray
    wheel_inertia_total_kgm2: np.ndarray = 0.0


@dataclass(frozen=True)
class EnergyParams:
    """Energy-study settings shared by all designs.

    Attributes
    ----------
    inverter_efficiency : float
        Inverter efficiency, in (0, 1] [-] (the same in both directions).
    auxiliary_w : float
        Auxiliary load drawn from the battery at all times [W].
    regen_max_w : float
        Cap on the total regenerated shaft power of the motors [W]; ``inf`` = envelope only,
        0 = no regeneration.
    regen_min_speed_mps : float
        Below this vehicle speed there is no regeneration (friction brakes only) [m/s].
    grade_pct : float
        Constant road grade over the whole cycle [%] (0 for the standard cycles).
    split_fractions : tuple of float
        Front shares of the wheel force tried for two-unit designs, in [0, 1] [-].
    capability_split : bool
        Also try the capability split (see the module docstring) for two-unit designs; False
        restricts the split to `split_fractions` (e.g. ``(1.0,)`` forces front-only traction).
    optimal_split : bool
        Also try the stationary split of the loss-model power (see the module docstring) for
        two-unit designs whose motors both have the polynomial loss model.
    chunk_elements : int
        Designs per chunk x intervals of the cycle; bounds the memory (about 100 bytes per
        element and unit) [-].
    """

    inverter_efficiency: float
    auxiliary_w: float
    regen_max_w: float = float("inf")
    regen_min_speed_mps: float = 0.0
    grade_pct: float = 0.0
    split_fractions: tuple[float, ...] = DEFAULT_SPLIT_FRACTIONS
    capability_split: bool = True
    optimal_split: bool = True
    chunk_elements: int = 1 << 17

    def __post_init__(self):
        if not 0.0 < self.inverter_efficiency <= 1.0:
            raise ValueError(f"inverter_efficiency = {self.inverter_efficiency}; must be in (0, 1]")
        if not self.auxiliary_w >= 0.0:
            raise ValueError(f"auxiliary_w = {self.auxiliary_w}; must be >= 0 [W]")
        if not self.regen_max_w >= 0.0:
            raise ValueError(f"regen_max_w = {self.regen_max_w}; must be >= 0 [W]")
        if not self.regen_min_speed_mps >= 0.0:
            raise ValueError(f"regen_min_speed_mps = {self.regen_min_speed_mps}; must be >= 0 [m/s]")
        if not self.split_fractions or not all(0.0 <= s <= 1.0 for s in self.split_fractions):
            raise ValueError(f"split_fractions = {self.split_fractions}; must be values in [0, 1]")
        if self.chunk_elements < 1:
            raise ValueError(f"chunk_elements = {self.chunk_elements}; must be >= 1")


def check_unit(u: EnergyUnit, n: int):
    """Raise ValueError when the unit's arrays do not describe ``n`` designs or a present unit lacks a
    first gear or a loss model."""
    if len(u) != n:
        raise ValueError(f"the front and rear units describe {len(u)} and {n} designs; they must match")
    for name in ("torque_nm", "power_w", "decline_rad_s", "decline_exponent", "max_speed_rad_s",
                 "rotor_inertia_kgm2", "loss_copper_w_per_nm2", "loss_iron_nm", "loss_windage_w_s3",
                 "loss_constant_w", "map_index"):
        if np.shape(getattr(u, name)) != (n,):
            raise ValueError(f"EnergyUnit.{name} has shape {np.shape(getattr(u, name))}; expected ({n},)")
    ratios = np.asarray(u.ratios, dtype=float)
    if ratios.ndim != 2 or ratios.shape[0] != n or np.shape(u.gear_efficiency) != ratios.shape:
        raise ValueError("EnergyUnit.ratios and gear_efficiency must have the same shape (designs, gears)")
    pres = np.asarray(u.present, dtype=bool)
    has = np.isfinite(ratios)
    if np.any(pres & ~has[:, 0]):
        raise ValueError(f"designs {np.flatnonzero(pres & ~has[:, 0])[:10].tolist()} have a drive unit without "
                         "a first gear (ratios[:, 0] is NaN)")
    gaps = has[:, 1:] & ~has[:, :-1]
    if np.any(pres[:, None] & gaps):
        raise ValueError("EnergyUnit.ratios must be NaN-padded at the end (a gear after a missing gear)")
    mi = np.asarray(u.map_index)
    if np.any(pres & (mi >= len(u.maps))):
        raise ValueError("EnergyUnit.map_index refers past the end of maps")
    poly = np.isfinite(np.stack([u.loss_copper_w_per_nm2, u.loss_iron_nm, u.loss_windage_w_s3,
                                 u.loss_constant_w])).all(axis=0)
    missing = pres & (mi < 0) & ~poly
    if np.any(missing):
        raise ValueError(f"designs {np.flatnonzero(missing)[:10].tolist()} have a motor with neither loss "
                         "coefficients nor an efficiency map")


def gear_count(u: EnergyUnit | None, n: int) -> np.ndarray:
    """Gears of the unit in each of the n designs (0 where absent) [-]."""
    if u is None:
        return np.zeros(n, dtype=np.int64)
    return np.where(np.asarray(u.present, dtype=bool), np.isfinite(np.asarray(u.ratios, dtype=float)).sum(axis=1), 0)

