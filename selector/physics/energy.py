"""Energy at the battery over a driving cycle: backward (quasi-static) model at 1 Hz, many designs at once.

The model
---------
The cycle is cut into its 1-s intervals (`selector.physics.cycles.cycle_steps`): on each interval
the vehicle runs at the mean speed v with the constant acceleration a. Per design and interval:

1. **Wheel force** (all driven wheels together)::

       F = (m + J_wheels / r^2) a + m g (Crr cos(theta) + sin(theta)) + q v^2      (v > 0)

   with q = 0.5 rho CdA and a constant grade theta (`EnergyParams.grade_pct`, 0 for the standard
   cycles). Intervals at standstill (v = 0) need no force; the drive units are idle there.
2. **Split between the drive units.** A design has a front and a rear unit, either of which may be
   absent. A unit alone takes all of F. With both present, the front takes s F and the rear
   (1 - s) F, s chosen per interval among these candidates (the one with the least battery power
   wins; ties: the first in this order):

   - the grid `EnergyParams.split_fractions` (default 0, 0.25, 0.5, 0.75, 1), which holds "front
     only" and "rear only", so a split is never worse than either unit alone at any interval;
   - the *capability split* s = F_f,max / (F_f,max + F_r,max) (each unit's largest wheel force at
     this speed in its strongest gear), which keeps every interval the two units can follow
     together followable;
   - the *stationary split* of the loss model (both motors with the polynomial model): with the
     motor torques linear in s and P_el = T (w + k_c T) + spin losses, dP/ds = 0 has a closed form
     (`_stationary_split`), the exact optimum when both units run in the same direction within
     their limits; each unit in the gear it chose at the grid point nearest 0.5.
3. **Gearbox and gear choice.** For a gear of ratio G and efficiency eta, the unit's share F_u of
   the wheel force gives the motor torque

       T_m = F_u r / (G eta)    when F_u >= 0 (motoring: power flows motor -> wheel)
       T_m = F_u r eta / G      when F_u < 0  (braking: power flows wheel -> motor)
       plus J_rotor a G / r     (the rotor's own angular acceleration, on the motor shaft)

   at the motor speed w = v G / r. The rotor term is the unit's rotor inertia reflected through
   the gear in use, J (G/r)^2, added to the effective mass on the motor side of the gearbox (so
   the gearbox efficiency does not act on it; the energy-exact bookkeeping). A gear is usable when
   the motor does not over-speed (v_high G / r <= w_max, v_high the higher end speed of the
   interval) and, when motoring, T_m does not exceed the peak envelope at w. Among the usable gears
   of a multi-speed gearbox the one with the least electrical power is chosen, interval by
   interval (ties: the lowest gear; no look-ahead, no shift-time limits). At a change of gear the
   rotor's kinetic energy changes by 0.5 J (w_new^2 - w_old^2) at the boundary speed; the motor
   supplies it from the battery (1 / eta_inv) or returns it (x eta_inv), motor losses of the
   synchronisation neglected. Because the choice ignores this shift energy, a gearbox that shifts
   often can come out slightly worse than its best single gear (a controller with hysteresis would
   shift less).
4. **Motor.** Motoring: electrical power P_el = T_m w + P_loss (loss model) or T_m w / eta_map.
   Generating (T_m < 0): the braking torque the motor takes is limited by its peak envelope (the
   same torque and power limits as motoring, `selector.physics.motor.envelope_torque_nm`), by the
   unit's share of `regen_max_w` (the cap on regenerated shaft power, split between the units in
   proportion to their share of the wheel force), for the loss model by T = -w / (2 k_c) (braking
   harder recovers less: d(T w + k_c T^2)/dT = 0 there), and is 0 below `regen_min_speed_mps`;
   friction brakes take the rest. P_el = T_gen w + P_loss (loss model: the spin losses
   k_i w + k_w w^3 + C0 are paid whenever the vehicle moves, so light braking can still draw power)
   or T_gen w eta_map.
5. **Inverter and battery.** Each unit's battery power is P_el / eta_inv when drawing and
   P_el eta_inv when returning; the auxiliary load is drawn at all times, standstill included.

An interval no usable (split, gear) combination can follow (force beyond the envelope in every
gear, or over-speed) makes the design infeasible for the cycle; its count and first time are
reported and its energy is NaN. A map-based motor must cover every operating point within its
envelope that the evaluation visits (any split and gear); points outside the map are counted
and reported per design (``out_of_map``), never extrapolated, and the design's energy is NaN.

Designs are grouped by which units they have and by gear count, and evaluated in chunks of about
`EnergyParams.chunk_elements` (design x interval) elements to bound memory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.physics.cycles import cycle_steps
from selector.physics.losses import EfficiencyGrid, map_efficiency
from selector.physics.motor import envelope_torque_nm
from selector.physics.road import grade_angle_rad
from selector.units import G_N

__all__ = [
    "DEFAULT_SPLIT_FRACTIONS",
    "EnergyParams",
    "EnergyResult",
    "EnergyTrace",
    "EnergyUnit",
    "EnergyVehicle",
    "cycle_energy",
    "cycle_trace",
]

DEFAULT_SPLIT_FRACTIONS = (0.0, 0.25, 0.5, 0.75, 1.0)
"""Front share of the wheel force tried at each interval when a design has two units [-]."""

_TOL = 1e-9  # relative tolerance of the envelope and speed checks (as requirements.REL_TOL)


# --------------------------------------------------------------------------------------------
# inputs


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


# --------------------------------------------------------------------------------------------
# outputs


@dataclass(frozen=True, eq=False)
class EnergyResult:
    """Energy of n designs over one cycle (arrays of shape (n,) unless stated).

    Sign conventions: energies are >= 0 and named by direction. All in Wh over the whole cycle.

    Attributes
    ----------
    wh_per_km : ndarray
        Net battery energy (drive units + auxiliary load) per km of the cycle [Wh/km]; NaN where
        the design is not ``feasible`` or is ``out_of_map``.
    battery_wh : ndarray
        Net battery energy over the cycle, drive units and auxiliary load [Wh] (NaN as above).
    drive_wh : ndarray
        Energy the drive units draw from the battery: the sum over intervals of the units' net
        battery power where it is positive [Wh].
    regen_wh : ndarray
        Energy the drive units return to the battery: the same sum where it is negative, as a
        positive number [Wh].
    regen_share : ndarray
        ``regen_wh / drive_wh``: the share of the drive energy drawn from the battery that
        regeneration gives back (0 without regeneration) [-].
    auxiliary_wh : float
        Auxiliary load over the cycle duration [Wh].
    traction_wh : ndarray
        Positive wheel work, sum of max(F v, 0) dt [Wh].
    braking_wh : ndarray
        Negative wheel work, sum of max(-F v, 0) dt (what the brakes, regenerative and friction,
        must absorb) [Wh].
    distance_km : float
        Trapezoid distance of the cycle [km].
    duration_s : float
        Cycle duration [s].
    feasible : ndarray of bool
        True when every interval can be followed (envelope and speed limits).
    infeasible_steps : ndarray of int
        Number of 1-s intervals the design cannot follow [-].
    first_infeasible_s : ndarray
        Start time of the first such interval; NaN when none [s].
    out_of_map : ndarray of bool
        True when an operating point within the envelope lies outside the motor's efficiency map.
    out_of_map_steps : ndarray of int
        Number of intervals with such a point [-].
    first_out_of_map_s : ndarray
        Start time of the first such interval; NaN when none [s].
    motor_loss_wh, inverter_loss_wh, gearbox_loss_wh, friction_brake_wh : ndarray or None
        Breakdown of the chosen operating points (with ``detail=True`` only, else None): motor
        losses (electrical minus shaft energy), inverter losses, gearbox losses, and wheel work
        absorbed by the friction brakes [Wh]. With the rotor kinetic energy (zero over a cycle
        that starts and ends at rest) they close the balance
        battery = auxiliary + inverter + motor + gearbox + friction + traction - braking.
    """

    wh_per_km: np.ndarray
    battery_wh: np.ndarray
    drive_wh: np.ndarray
    regen_wh: np.ndarray
    regen_share: np.ndarray
    auxiliary_wh: float
    traction_wh: np.ndarray
    braking_wh: np.ndarray
    distance_km: float
    duration_s: float
    feasible: np.ndarray
    infeasible_steps: np.ndarray
    first_infeasible_s: np.ndarray
    out_of_map: np.ndarray
    out_of_map_steps: np.ndarray
    first_out_of_map_s: np.ndarray
    motor_loss_wh: np.ndarray | None = None
    inverter_loss_wh: np.ndarray | None = None
    gearbox_loss_wh: np.ndarray | None = None
    friction_brake_wh: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class EnergyTrace:
    """Operating points of n designs at every 1-s interval of a cycle (arrays (n, steps)).

    Standstill intervals have zero torque and power and gear 0. Unit arrays are indexed
    ``[0]`` = front, ``[1]`` = rear (zeros where the unit is absent).

    Attributes
    ----------
    time_s : ndarray, shape (steps,)
        Start time of each interval [s].
    speed_mps, accel_mps2 : ndarray, shape (steps,)
        Mean speed and acceleration of each interval [m/s], [m/s^2].
    wheel_force_n : ndarray
        Wheel force demanded by the cycle [N].
    front_share : ndarray
        Share of the wheel force given to the front unit [-] (1 or 0 for one-unit designs).
    gear : ndarray of int, shape (2, n, steps)
        Gear in use, 1-based; 0 at standstill, for an absent unit, or where infeasible.
    motor_speed_rad_s, motor_torque_nm : ndarray, shape (2, n, steps)
        Motor operating point (torque after the regeneration limits) [rad/s], [N m].
    electrical_w : ndarray, shape (2, n, steps)
        Electrical power at each motor's terminals [W].
    battery_w : ndarray
        Battery power of the drive units plus the auxiliary load [W].
    friction_brake_w : ndarray
        Power absorbed by the friction brakes [W].
    feasible : ndarray of bool
        False where the interval cannot be followed.
    out_of_map : ndarray of bool
        True where an operating point lies outside an efficiency map.
    """

    time_s: np.ndarray
    speed_mps: np.ndarray
    accel_mps2: np.ndarray
    wheel_force_n: np.ndarray
    front_share: np.ndarray
    gear: np.ndarray
    motor_speed_rad_s: np.ndarray
    motor_torque_nm: np.ndarray
    electrical_w: np.ndarray
    battery_w: np.ndarray
    friction_brake_w: np.ndarray
    feasible: np.ndarray
    out_of_map: np.ndarray


# --------------------------------------------------------------------------------------------
# internal state


@dataclass
class _Steps:
    """The moving intervals of the cycle (standstill intervals dropped), shapes (S,)."""

    dt: np.ndarray
    v: np.ndarray
    a: np.ndarray
    v_high: np.ndarray
    v_end: np.ndarray
    t0: np.ndarray
    regen_ok: np.ndarray
    contiguous: np.ndarray
    """(S - 1,): interval k + 1 starts where interval k ends (no standstill between them)."""


@dataclass
class _Gear:
    """One unit in one gear (or with per-element gears) over a chunk: shapes (D, S) or (D, 1)."""

    ratio: np.ndarray
    eff: np.ndarray
    w: np.ndarray
    t_env: np.ndarray
    t_rot: np.ndarray
    usable: np.ndarray
    """Gear exists and the motor does not over-speed."""
    spin_loss: np.ndarray | None
    """k_i w + k_w w^3 + C0 (polynomial rows), else None."""
    k_c: np.ndarray | None
    r_over_g_eta: np.ndarray
    r_eta_over_g: np.ndarray
    t_env_tol: np.ndarray
    """Envelope torque with the pass tolerance."""
    neg_t_lim: np.ndarray
    """Minus the braking-torque limit of the envelope, 0 where regeneration is off."""
    t_lim_cap: np.ndarray | None
    """regen_max_w / w (0 where regeneration is off), scaled by the unit's share; None = no cap."""
    t1: np.ndarray | None
    """Motor torque through the gearbox for the whole wheel force (share 1), without the rotor term."""


@dataclass
class _Rows:
    """Per-design data of one chunk for one unit, shapes (D, 1) unless stated."""

    idx: np.ndarray
    torque_nm: np.ndarray
    power_w: np.ndarray
    decline_rad_s: np.ndarray
    decline_exponent: np.ndarray
    max_speed_rad_s: np.ndarray
    rotor_inertia_kgm2: np.ndarray
    ratios: np.ndarray  # (D, g)
    gear_efficiency: np.ndarray  # (D, g)
    k: tuple  # (k_c, k_i, k_w, c0), each (D, 1)
    map_index: np.ndarray  # (D,)
    maps: tuple
    any_map: bool
    all_map: bool


@dataclass
class _Chunk:
    """Vehicle data of one chunk, shapes (D, 1), and the wheel force (D, S)."""

    radius: np.ndarray
    force: np.ndarray
    inv_r: np.ndarray


# --------------------------------------------------------------------------------------------
# public API


def cycle_energy(front: EnergyUnit | None, rear: EnergyUnit | None, vehicle: EnergyVehicle,
                 params: EnergyParams, time_s, speed_mps, detail: bool = False) -> EnergyResult:
    """Battery energy of many designs over a driving cycle (backward model; see the module docstring).

    Parameters
    ----------
    front, rear : EnergyUnit or None
        The front and rear drive units of the n designs (None = absent in every design). Each
        design needs at least one present unit, with a loss model (finite loss coefficients or a
        map) and at least one gear.
    vehicle : EnergyVehicle
        Mass, rolling resistance, aerodynamics, tyre radius and wheel inertia of the designs.
    params : EnergyParams
        Inverter, auxiliary load, regeneration limits, grade, split grid and chunk size.
    time_s : array_like, shape (m,)
        Cycle sample times, 0, 1, 2, ... [s].
    speed_mps : array_like, shape (m,)
        Cycle speeds [m/s].
    detail : bool
        Also compute the loss breakdown (motor, inverter, gearbox, friction brakes); costs about
        one more evaluation of the chosen operating points.

    Returns
    -------
    EnergyResult

    Raises
    ------
    ValueError
        Inconsistent array shapes, a design without a unit, a present unit without a gear or
        without a loss model.
    """
    n, steps, cyc = _prepare(front, rear, vehicle, params, time_s, speed_mps)
    acc = {k: np.zeros(n) for k in ("drive", "regen", "trac", "brake", "motor", "inv", "gear", "fric")}
    infeasible = np.zeros(n, dtype=np.int64)
    first_inf = np.full(n, np.nan)
    oom = np.zeros(n, dtype=np.int64)
    first_oom = np.full(n, np.nan)
    for rows, units in _groups(front, rear, n):
        for chunk_rows in _chunks(rows, len(steps.v), params.chunk_elements, units):
            out = _evaluate_chunk(units, chunk_rows, vehicle, params, steps, detail, trace=False)
            p = out["p_units"]
            om = out["out_of_map"]
            bad = ~np.isfinite(p)
            pf = np.where(bad, 0.0, p)
            dt = steps.dt
            acc["drive"][chunk_rows] = np.sum(np.maximum(pf, 0.0) * dt, axis=1) / 3600.0
            acc["regen"][chunk_rows] = np.sum(np.maximum(-pf, 0.0) * dt, axis=1) / 3600.0
            wheel = out["force"] * steps.v
            acc["trac"][chunk_rows] = np.sum(np.maximum(wheel, 0.0) * dt, axis=1) / 3600.0
            acc["brake"][chunk_rows] = np.sum(np.maximum(-wheel, 0.0) * dt, axis=1) / 3600.0
            infeasible[chunk_rows] = (bad & ~om).sum(axis=1)
            first_inf[chunk_rows] = _first_time(bad & ~om, steps.t0)
            oom[chunk_rows] = om.sum(axis=1)
            first_oom[chunk_rows] = _first_time(om, steps.t0)
            if detail:
                for key in ("motor", "inv", "gear", "fric"):
                    acc[key][chunk_rows] = np.sum(np.where(bad, 0.0, out[key]) * dt, axis=1) / 3600.0
    aux_wh = params.auxiliary_w * cyc["duration"] / 3600.0
    feasible = infeasible == 0
    ok = feasible & (oom == 0)
    battery = np.where(ok, acc["drive"] - acc["regen"] + aux_wh, np.nan)
    dist_km = cyc["distance"] / 1000.0
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(acc["drive"] > 0, acc["regen"] / acc["drive"], 0.0)
        per_km = battery / dist_km if dist_km > 0 else np.full(n, np.nan)
    extra = {}
    if detail:
        extra = dict(motor_loss_wh=acc["motor"], inverter_loss_wh=acc["inv"], gearbox_loss_wh=acc["gear"],
                     friction_brake_wh=acc["fric"])
    return EnergyResult(wh_per_km=per_km, battery_wh=battery, drive_wh=acc["drive"], regen_wh=acc["regen"],
                        regen_share=share, auxiliary_wh=float(aux_wh), traction_wh=acc["trac"],
                        braking_wh=acc["brake"], distance_km=float(dist_km), duration_s=float(cyc["duration"]),
                        feasible=feasible, infeasible_steps=infeasible, first_infeasible_s=first_inf,
                        out_of_map=oom > 0, out_of_map_steps=oom, first_out_of_map_s=first_oom, **extra)


def cycle_trace(front: EnergyUnit | None, rear: EnergyUnit | None, vehicle: EnergyVehicle,
                params: EnergyParams, time_s, speed_mps) -> EnergyTrace:
    """Operating points of each design at every interval of a cycle (for plots and checks).

    Same model and arguments as `cycle_energy`; meant for a few designs (the output holds
    about 10 arrays of designs x intervals).

    Returns
    -------
    EnergyTrace
    """
    n, steps, cyc = _prepare(front, rear, vehicle, params, time_s, speed_mps)
    all_dt, all_v, all_a, _ = cycle_steps(time_s, speed_mps)
    moving = all_v > 0
    m = len(all_v)
    shape = (n, m)
    tr = dict(force=np.zeros(shape), share=np.zeros(shape), gear=np.zeros((2,) + shape, dtype=np.int64),
              w=np.zeros((2,) + shape), t=np.zeros((2,) + shape), pe=np.zeros((2,) + shape),
              pb=np.full(shape, params.auxiliary_w), fric=np.zeros(shape), feasible=np.ones(shape, dtype=bool),
              oom=np.zeros(shape, dtype=bool))
    cols = np.flatnonzero(moving)
    for rows, units in _groups(front, rear, n):
        for chunk_rows in _chunks(rows, len(steps.v), params.chunk_elements, units):
            out = _evaluate_chunk(units, chunk_rows, vehicle, params, steps, True, trace=True)
            ix = np.ix_(chunk_rows, cols)
            p = out["p_units"]
            bad = ~np.isfinite(p)
            tr["force"][ix] = out["force"]
            tr["share"][ix] = out["share"]
            tr["pb"][ix] = np.where(bad, np.nan, p + params.auxiliary_w)
            tr["fric"][ix] = np.where(bad, np.nan, out["fric"])
            tr["feasible"][ix] = ~bad | out["out_of_map"]
            tr["oom"][ix] = out["out_of_map"]
            for k, pos in enumerate(("front", "rear")):
                if pos in out["units"]:
                    u = out["units"][pos]
                    tr["gear"][k][ix] = np.where(bad, 0, u["gear"])
                    tr["w"][k][ix] = u["w"]
                    tr["t"][k][ix] = np.where(bad, np.nan, u["t"])
                    tr["pe"][k][ix] = np.where(bad, np.nan, u["pe"])
    return EnergyTrace(time_s=np.asarray(time_s, dtype=float)[:-1], speed_mps=all_v, accel_mps2=all_a,
                       wheel_force_n=tr["force"], front_share=tr["share"], gear=tr["gear"],
                       motor_speed_rad_s=tr["w"], motor_torque_nm=tr["t"], electrical_w=tr["pe"],
                       battery_w=tr["pb"], friction_brake_w=tr["fric"], feasible=tr["feasible"],
                       out_of_map=tr["oom"])


# --------------------------------------------------------------------------------------------
# preparation


def _prepare(front, rear, vehicle, params, time_s, speed_mps):
    t = np.asarray(time_s, dtype=float)
    v = np.asarray(speed_mps, dtype=float)
    if t.ndim != 1 or t.shape != v.shape or len(t) < 2:
        raise ValueError("time_s and speed_mps must be 1-D arrays of the same length >= 2")
    if not (np.all(np.diff(t) > 0) and np.all(np.isfinite(v)) and np.all(v >= 0)):
        raise ValueError("time_s must increase and speed_mps must be finite and >= 0")
    units = [u for u in (front, rear) if u is not None]
    if not units:
        raise ValueError("a design needs a front or a rear drive unit; both are None")
    n = len(units[0])
    for u in units:
        _check_unit(u, n)
    for name in ("mass_kg", "crr", "q_n_s2_m2", "radius_m", "wheel_inertia_total_kgm2"):
        shape = np.shape(getattr(vehicle, name))
        if shape not in ((), (n,)):
            raise ValueError(f"vehicle.{name} has shape {shape}; expected () or ({n},)")
    present = np.zeros(n, dtype=bool)
    for u in units:
        present |= np.asarray(u.present, dtype=bool)
    if not present.all():
        raise ValueError(f"designs {np.flatnonzero(~present)[:10].tolist()} have no drive unit")
    dt, vm, a, vh = cycle_steps(t, v)
    moving = vm > 0
    regen_ok = vm[moving] >= params.regen_min_speed_mps
    t0 = t[:-1][moving]
    dtm = dt[moving]
    steps = _Steps(dt=dtm, v=vm[moving], a=a[moving], v_high=vh[moving], v_end=v[1:][moving], t0=t0,
                   regen_ok=regen_ok, contiguous=np.isclose(t0[1:], t0[:-1] + dtm[:-1], rtol=0.0, atol=1e-9))
    cyc = dict(duration=float(t[-1] - t[0]), distance=float(np.sum(vm * dt)))
    return n, steps, cyc


def _check_unit(u: EnergyUnit, n: int):
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


def _gear_count(u: EnergyUnit | None, n: int) -> np.ndarray:
    if u is None:
        return np.zeros(n, dtype=np.int64)
    return np.where(np.asarray(u.present, dtype=bool), np.isfinite(np.asarray(u.ratios, dtype=float)).sum(axis=1), 0)


def _groups(front, rear, n):
    """Yield (rows, {"front": unit, "rear": unit}) for designs sharing units and gear counts."""
    gf, gr = _gear_count(front, n), _gear_count(rear, n)
    key = gf * 16 + gr
    for k in np.unique(key):
        rows = np.flatnonzero(key == k)
        units = {}
        if k // 16 > 0:
            units["front"] = (front, int(k // 16))
        if k % 16 > 0:
            units["rear"] = (rear, int(k % 16))
        yield rows, units


def _chunks(rows, steps, chunk_elements, units):
    weight = 1 if len(units) == 1 else 4  # two units keep a candidate array per split fraction
    per = max(1, int(chunk_elements // max(1, steps * weight)))
    for s in range(0, len(rows), per):
        yield rows[s:s + per]


def _rows(u: EnergyUnit, idx: np.ndarray, gears: int) -> _Rows:
    def col(a):
        return np.asarray(a, dtype=float)[idx][:, None]
    mi = np.asarray(u.map_index, dtype=np.int64)[idx]
    return _Rows(idx=idx, torque_nm=col(u.torque_nm), power_w=col(u.power_w), decline_rad_s=col(u.decline_rad_s),
                 decline_exponent=col(u.decline_exponent), max_speed_rad_s=col(u.max_speed_rad_s),
                 rotor_inertia_kgm2=col(u.rotor_inertia_kgm2),
                 ratios=np.asarray(u.ratios, dtype=float)[idx, :gears],
                 gear_efficiency=np.asarray(u.gear_efficiency, dtype=float)[idx, :gears],
                 k=(col(u.loss_copper_w_per_nm2), col(u.loss_iron_nm), col(u.loss_windage_w_s3),
                    col(u.loss_constant_w)),
                 map_index=mi, maps=tuple(u.maps), any_map=bool(np.any(mi >= 0)), all_map=bool(np.all(mi >= 0)))


def _vec(x, idx):
    a = np.asarray(x, dtype=float)
    return (a[idx] if a.ndim else np.full(len(idx), float(a)))[:, None]


def _first_time(mask, t0):
    if mask.shape[1] == 0:
        return np.full(mask.shape[0], np.nan)
    any_ = mask.any(axis=1)
    first = np.argmax(mask, axis=1)
    return np.where(any_, t0[first], np.nan)


# --------------------------------------------------------------------------------------------
# one chunk


def _gear_state(r: _Rows, ratio, eff, ch: _Chunk, steps: _Steps, params: EnergyParams,
                with_force: bool = False) -> _Gear:
    """Motor speed, envelope and rotor torque of one unit in a gear (ratio/eff (D,1) or (D,S))."""
    g_over_r = ratio * ch.inv_r
    w = steps.v * g_over_r
    exists = np.isfinite(ratio)
    with np.errstate(invalid="ignore"):
        usable = exists & (steps.v_high * g_over_r <= r.max_speed_rad_s * (1.0 + _TOL))
    w_safe = np.where(exists, w, 0.0)
    t_env = envelope_torque_nm(w_safe, r.torque_nm, r.power_w, r.decline_rad_s, r.decline_exponent,
                               r.max_speed_rad_s)
    t_rot = r.rotor_inertia_kgm2 * steps.a * np.where(exists, g_over_r, 0.0)
    spin = k_c = None
    if not r.all_map:
        k_c, k_i, k_w, c0 = r.k
        spin = k_i * w_safe + k_w * w_safe * w_safe * w_safe + c0
    with np.errstate(invalid="ignore", divide="ignore"):
        r_over_g_eta = ch.radius / (ratio * eff)
        r_eta_over_g = ch.radius * eff / ratio
    neg_t_lim = -t_env
    if k_c is not None:
        # loss model: braking harder than T = -w / (2 k_c) recovers less (copper loss grows faster than the
        # recovered power), so the controller stops there and the friction brakes take the rest
        with np.errstate(divide="ignore", invalid="ignore"):
            neg_t_lim = np.fmax(neg_t_lim, -w_safe / (2.0 * k_c))
    neg_t_lim = np.where(steps.regen_ok, neg_t_lim, 0.0)
    t_lim_cap = t1 = None
    if np.isfinite(params.regen_max_w):
        with np.errstate(divide="ignore", invalid="ignore"):
            t_lim_cap = np.where(steps.regen_ok & (w_safe > 0), params.regen_max_w / w_safe, 0.0)
    if with_force:
        t1 = ch.force * np.where(ch.force >= 0.0, r_over_g_eta, r_eta_over_g)
    return _Gear(ratio=ratio, eff=eff, w=w_safe, t_env=t_env, t_rot=t_rot, usable=usable, spin_loss=spin, k_c=k_c,
                 r_over_g_eta=r_over_g_eta, r_eta_over_g=r_eta_over_g, t_env_tol=t_env * (1.0 + _TOL),
                 neg_t_lim=neg_t_lim, t_lim_cap=t_lim_cap, t1=t1)


def _unit_pb(g: _Gear, f: float, eta_inv: float):
    """Battery power of a polynomial-loss unit taking the share f of the wheel force (fast path).

    Same result as `_unit_power` (which it must match): motor torque f T1 + T_rot; braking torque
    limited by the envelope, the loss optimum -w / (2 k_c), the unit's share of the regeneration cap
    and the minimum speed; inf where the gear is unusable.
    """
    t_m = g.t1.copy() if np.ndim(f) == 0 and f == 1.0 else g.t1 * f
    t_m += g.t_rot
    if g.t_lim_cap is None:
        t_act = np.maximum(t_m, g.neg_t_lim)
    else:
        t_act = np.maximum(t_m, np.maximum(g.neg_t_lim, -f * g.t_lim_cap))
    pe = g.k_c * t_act
    pe += g.w
    pe *= t_act
    pe += g.spin_loss
    pb = pe / eta_inv
    np.multiply(pe, eta_inv, out=pb, where=pe < 0.0)
    feasible = t_m <= g.t_env_tol
    feasible &= g.usable
    np.copyto(pb, np.inf, where=~feasible)
    return pb


def _unit_power(r: _Rows, g: _Gear, force, share, params: EnergyParams, detail: bool):
    """Battery power of one unit carrying the wheel force force_u in gear state g.

    Returns a dict: ``pb`` (battery power, inf where unusable), ``oom`` (envelope-feasible points
    outside the map) and, with detail, the motor torque, electrical and shaft power and the
    gearbox loss and the wheel force the unit delivers.
    """
    force_u = force * share
    t_gb = np.where(force_u >= 0.0, force_u * g.r_over_g_eta, force_u * g.r_eta_over_g)
    t_m = t_gb + g.t_rot
    motoring = t_m >= 0.0
    feasible = g.usable & (t_m <= g.t_env_tol)
    # generating: limits of the envelope, the regeneration cap and the minimum speed
    neg_lim = g.neg_t_lim if g.t_lim_cap is None else np.maximum(g.neg_t_lim, -share * g.t_lim_cap)
    t_act = np.where(motoring, t_m, np.maximum(t_m, neg_lim))
    p_shaft = t_act * g.w
    pe = np.empty_like(p_shaft)
    oom = None
    if not r.all_map:
        pe = p_shaft + g.k_c * t_act * t_act + g.spin_loss
    if r.any_map:
        oom = np.zeros(p_shaft.shape, dtype=bool)
        for m in np.unique(r.map_index[r.map_index >= 0]):
            sel = np.flatnonzero(r.map_index == m)
            eta, outside = map_efficiency(r.maps[m], g.w[sel], t_act[sel])
            p_s = p_shaft[sel]
            zero_eta = (p_s > 0) & ~outside & ~(eta > 0)
            bad = (outside & (p_s != 0)) | zero_eta
            with np.errstate(divide="ignore", invalid="ignore"):
                pe_s = np.where(p_s > 0, p_s / eta, np.where(p_s < 0, p_s * eta, 0.0))
            pe[sel] = np.where(bad, np.inf, pe_s)
            oom[sel] = bad & feasible[sel]
    eta_inv = params.inverter_efficiency
    pb = np.where(pe >= 0.0, pe / eta_inv, pe * eta_inv)
    pb = np.where(feasible, pb, np.inf)
    if oom is not None:
        pb = np.where(oom, np.inf, pb)
    out = {"pb": pb, "oom": oom}
    if detail:
        t_through = t_act - g.t_rot  # torque the motor sends into the gearbox
        w_mot = g.w
        gear_loss = np.where(t_through >= 0.0, t_through * w_mot * (1.0 - g.eff),
                             -t_through * w_mot * (1.0 / g.eff - 1.0))
        with np.errstate(invalid="ignore", divide="ignore"):
            wheel_force = np.where(t_through >= 0.0, t_through / g.r_over_g_eta, t_through / g.r_eta_over_g)
        out.update(t=t_act, pe=pe, p_shaft=p_shaft, gear_loss=np.where(feasible, gear_loss, 0.0),
                   wheel_force=np.where(feasible, wheel_force, 0.0))
    return out


def _evaluate_chunk(units, idx, vehicle, params, steps, detail, trace):
    """Evaluate one chunk of designs; returns per-interval arrays (D, S)."""
    radius = _vec(vehicle.radius_m, idx)
    mass = _vec(vehicle.mass_kg, idx)
    crr = _vec(vehicle.crr, idx)
    q = _vec(vehicle.q_n_s2_m2, idx)
    jw = _vec(vehicle.wheel_inertia_total_kgm2, idx)
    theta = float(grade_angle_rad(params.grade_pct))
    force = ((mass + jw / (radius * radius)) * steps.a
             + mass * G_N * (crr * np.cos(theta) + np.sin(theta)) + q * steps.v * steps.v)
    ch = _Chunk(radius=radius, force=force, inv_r=1.0 / radius)
    rows = {pos: _rows(u, idx, gears) for pos, (u, gears) in units.items()}
    shape = force.shape
    # gear states of every unit in every gear, shared by all candidate splits
    states = {pos: [_gear_state(r, r.ratios[:, gi:gi + 1], r.gear_efficiency[:, gi:gi + 1], ch, steps, params,
                                with_force=not r.any_map) for gi in range(r.ratios.shape[1])]
              for pos, r in rows.items()}
    oom = np.zeros(shape, dtype=bool)

    def candidate(pos, f):
        """Battery power of unit `pos` at share f (scalar or (D, S)) in its best gear, and that gear."""
        r = rows[pos]
        pb_best = gear_best = None
        for gi, g in enumerate(states[pos]):
            if r.any_map:
                out = _unit_power(r, g, force, f, params, False)
                pb = out["pb"]
                oom[...] |= out["oom"]
            else:
                pb = _unit_pb(g, f, params.inverter_efficiency)
            if gi == 0:
                pb_best, gear_best = pb, np.zeros(shape, dtype=np.int8)
            else:
                better = pb < pb_best
                np.copyto(pb_best, pb, where=better)
                gear_best[better] = gi
        return pb_best, gear_best

    if len(rows) == 1:
        pos = next(iter(rows))
        frac_values = {pos: [1.0]}
        pb, gb = candidate(pos, 1.0)
        best = {pos: ([pb], [gb])}
        total = pb
        choice = np.zeros(shape, dtype=np.int64)
    else:
        front = [float(x) for x in params.split_fractions]
        if params.capability_split:
            front.append(_capability_split(states, ch))
        best = {"front": ([], []), "rear": ([], [])}

        def add(s_front):
            for pos, f in (("front", s_front), ("rear", 1.0 - s_front)):
                pb, gb = candidate(pos, f)
                best[pos][0].append(pb)
                best[pos][1].append(gb)

        for s_front in front:
            add(s_front)
        if params.optimal_split and not (rows["front"].any_map or rows["rear"].any_map):
            k_half = int(np.argmin([abs(x - 0.5) if np.ndim(x) == 0 else 1.0 for x in front]))
            s_opt = _stationary_split(states, {p: best[p][1][k_half] for p in rows})
            front.append(s_opt)
            add(s_opt)
        frac_values = {"front": front, "rear": [1.0 - x for x in front]}
        totals = np.stack([best["front"][0][k] + best["rear"][0][k] for k in range(len(front))])
        choice = np.argmin(totals, axis=0)
        total = np.take_along_axis(totals, choice[None], axis=0)[0]
    # gear changes: the rotor's kinetic energy jumps with the ratio at the shift
    eta_inv = params.inverter_efficiency
    gsel = {}
    shift_in = shift_out = None
    for pos, r in rows.items():
        if r.ratios.shape[1] == 1:
            gsel[pos] = np.zeros(shape, dtype=np.int64)
            continue
        gsel[pos] = np.take_along_axis(np.stack(best[pos][1]), choice[None], axis=0)[0].astype(np.int64)
        if shape[1] < 2:
            continue
        ratio = np.take_along_axis(r.ratios, gsel[pos], axis=1)
        both = np.isfinite(total[:, 1:]) & np.isfinite(total[:, :-1]) & steps.contiguous
        w2 = (steps.v_end[:-1] * ch.inv_r) ** 2
        jump = np.where(both, 0.5 * r.rotor_inertia_kgm2 * w2 * (ratio[:, 1:] ** 2 - ratio[:, :-1] ** 2), 0.0)
        if shift_in is None:
            shift_in, shift_out = np.zeros(shape), np.zeros(shape)
        shift_in[:, 1:] += np.maximum(jump, 0.0)
        shift_out[:, 1:] += np.maximum(-jump, 0.0)
    if shift_in is not None:
        total = total + (shift_in / eta_inv - shift_out * eta_inv) / steps.dt
    result = {"p_units": total, "force": force, "out_of_map": oom}
    if not (detail or trace):
        return result
    # replay the chosen operating points
    fric_force = force.copy()
    motor = inv = gear_loss = np.zeros(shape)
    unit_out = {}
    share = None
    for pos, r in rows.items():
        fr = frac_values[pos]
        f_el = _select(fr, choice, shape)
        gs = gsel[pos]
        g = _gear_state(r, np.take_along_axis(r.ratios, gs, axis=1), np.take_along_axis(r.gear_efficiency, gs, axis=1),
                        ch, steps, params)
        out = _unit_power(r, g, force, f_el, params, True)
        pe = np.where(np.isfinite(out["pb"]), out["pe"], 0.0)
        pb = np.where(pe >= 0.0, pe / eta_inv, pe * eta_inv)
        motor = motor + np.where(np.isfinite(out["pb"]), out["pe"] - out["p_shaft"], 0.0)
        inv = inv + (pb - pe)
        gear_loss = gear_loss + out["gear_loss"]
        fric_force = fric_force - out["wheel_force"]
        unit_out[pos] = {"gear": gs + 1, "w": g.w, "t": out["t"], "pe": out["pe"]}
        if pos == "front":
            share = f_el if np.ndim(f_el) == 2 else np.full(shape, float(f_el))
    if share is None:
        share = np.zeros(shape)
    fric = np.maximum(-fric_force * steps.v, 0.0)
    if shift_in is not None:
        inv = inv + (shift_in * (1.0 / eta_inv - 1.0) + shift_out * (1.0 - eta_inv)) / steps.dt
    result.update(motor=motor, inv=inv, gear=gear_loss, fric=fric, units=unit_out, share=share)
    return result


def _select(values, choice, shape):
    """Per-element value of the chosen candidate; values are scalars or (D, S) arrays."""
    if len(values) == 1:
        v = values[0]
        return np.broadcast_to(np.asarray(v, dtype=float), shape) if np.ndim(v) else float(v)
    out = np.empty(shape)
    for k, v in enumerate(values):
        mask = choice == k
        out[mask] = v[mask] if np.ndim(v) == 2 else v
    return out


def _capability_split(states, ch: _Chunk):
    """Front share F_f,max / (F_f,max + F_r,max) of each interval (D, S), each unit in its strongest gear."""
    fmax = {}
    for pos, gears in states.items():
        best = np.zeros(ch.force.shape)
        for g in gears:
            with np.errstate(invalid="ignore"):
                f = np.where(g.usable, (g.t_env - g.t_rot) / g.r_over_g_eta, 0.0)
            best = np.maximum(best, f)
        fmax[pos] = best
    tot = fmax["front"] + fmax["rear"]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(tot > 0, fmax["front"] / tot, 0.5)


def _stationary_split(states, gears):
    """Front share where the loss-model battery power of the two units is stationary, clipped to [0, 1].

    With the motor torques T_f = s a_f + b_f and T_r = (1 - s) a_r + b_r (a: torque for the whole wheel
    force through the gear, b: rotor term) and P_el = T (w + k_c T) + spin losses, dP/ds = 0 gives

        s = (a_r w_r + 2 k_r a_r (a_r + b_r) - a_f w_f - 2 k_f a_f b_f) / (2 (k_f a_f^2 + k_r a_r^2)),

    the optimum when both units run in the same direction within their limits (the inverter factor is
    then common). Each unit uses the gear given per interval in `gears`.
    """
    terms = {}
    for pos, gear in gears.items():
        gs = states[pos]
        a, b, w, k = gs[0].t1, gs[0].t_rot, gs[0].w, gs[0].k_c
        if len(gs) > 1:
            a, b, w, k = (np.array(np.broadcast_to(x, gear.shape)) for x in (a, b, w, k))
            for gi in range(1, len(gs)):
                m = gear == gi
                for arr, src in ((a, gs[gi].t1), (b, gs[gi].t_rot), (w, gs[gi].w),
                                 (k, np.broadcast_to(gs[gi].k_c, gear.shape))):
                    arr[m] = np.broadcast_to(src, gear.shape)[m]
        terms[pos] = (a, b, w, k)
    af, bf, wf, kf = terms["front"]
    ar, br, wr, kr = terms["rear"]
    num = ar * wr + 2.0 * kr * ar * (ar + br) - af * wf - 2.0 * kf * af * bf
    den = 2.0 * (kf * af * af + kr * ar * ar)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = np.where(den > 0, num / den, 0.5)
    return np.clip(np.nan_to_num(s, nan=0.5), 0.0, 1.0)
