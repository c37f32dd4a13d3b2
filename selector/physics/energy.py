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
   wins; ties, to the tolerance of the gear choice below: the first in this order):

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
   interval (ties, within `energy_inputs.CHOICE_TIE_REL` of the lesser plus `CHOICE_TIE_ABS_W`:
   the lowest gear; no look-ahead, no shift-time limits). At a change of gear the
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

Module layout: `selector.physics.energy_inputs` (the input records), `selector.physics.energy_points`
(operating points of one unit in one gear: steps 3-5 per unit), `selector.physics.energy_chunk`
(steps 1-2, the gear and split choice, shift energy and the replay of a chunk of designs) and this
module (the public functions and the per-design sums). `CycleEnergyModel` keeps the part of the work
that does not depend on the vehicle mass, for evaluating the same designs at many masses (battery
sizing); `cycle_energy` is one such evaluation.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.physics.cycles import cycle_steps
from selector.physics.energy_chunk import PreparedChunk, chunks, groups, prepare
from selector.physics.energy_inputs import DEFAULT_SPLIT_FRACTIONS, EnergyParams, EnergyUnit, EnergyVehicle

__all__ = [
    "DEFAULT_SPLIT_FRACTIONS",
    "CycleEnergyModel",
    "EnergyParams",
    "EnergyResult",
    "EnergyTrace",
    "EnergyUnit",
    "EnergyVehicle",
    "cycle_energy",
    "cycle_trace",
]


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
    infeasible_when_heavier : ndarray of bool
        True where an interval the design cannot follow stays unfollowable at every larger vehicle
        mass (one unit, an interval where every term of the wheel force grows with mass): the design
        is then infeasible at any larger mass too.
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
    infeasible_when_heavier: np.ndarray | None = None


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
    n, steps, cyc = prepare(front, rear, vehicle, params, time_s, speed_mps)
    mass = _per_design(vehicle.mass_kg, n)
    sums = _Sums(n, detail)
    for rows, units in groups(front, rear, n):
        for chunk_rows in chunks(rows, len(steps.v), params.chunk_elements, units):
            ch = PreparedChunk(units, chunk_rows, vehicle, params, steps)  # one evaluation: nothing to keep
            sums.add(chunk_rows, ch, ch.evaluate(mass[chunk_rows], detail))
    return sums.result(params, cyc)


class CycleEnergyModel:
    """Designs prepared once for the backward model and evaluated at any vehicle masses.

    What does not depend on the mass (motor speeds, envelopes, rotor torques, spin losses, braking
    limits) is computed when the model is built, so each further evaluation costs roughly half of a
    `cycle_energy` call. The model keeps about 100 bytes per design, moving interval and gear of each
    unit: build it for a batch of designs (a few hundred on a standard cycle), not for thousands.

    Parameters
    ----------
    front, rear, vehicle, params, time_s, speed_mps
        As for `cycle_energy`; ``vehicle.mass_kg`` is the default mass of `energy`.
    """

    def __init__(self, front: EnergyUnit | None, rear: EnergyUnit | None, vehicle: EnergyVehicle,
                 params: EnergyParams, time_s, speed_mps):
        self.n, self.steps, self.cyc = prepare(front, rear, vehicle, params, time_s, speed_mps)
        self.params = params
        self.mass_kg = _per_design(vehicle.mass_kg, self.n)
        self._chunks = [PreparedChunk(units, chunk_rows, vehicle, params, self.steps)
                        for rows, units in groups(front, rear, self.n)
                        for chunk_rows in chunks(rows, len(self.steps.v), params.chunk_elements, units)]
        self._chunk_of = np.empty(self.n, dtype=np.int64)
        self._row_of = np.empty(self.n, dtype=np.int64)
        for c, ch in enumerate(self._chunks):
            self._chunk_of[ch.idx] = c
            self._row_of[ch.idx] = np.arange(ch.idx.size)

    def energy(self, mass_kg=None, designs=None, detail: bool = False) -> EnergyResult:
        """Energy of the designs ``designs`` (positions, default all) at the vehicle masses ``mass_kg``.

        Parameters
        ----------
        mass_kg : array_like or None
            Vehicle mass of each selected design (or one for all) [kg]; default the vehicle's.
        designs : array_like of int or None
            Positions of the designs to evaluate, in the order of the result [-].
        detail : bool
            Also the loss breakdown (as `cycle_energy`).

        Returns
        -------
        EnergyResult
            Arrays in the order of ``designs``; identical to `cycle_energy` of those designs.
        """
        designs = np.arange(self.n) if designs is None else np.asarray(designs, dtype=np.int64).ravel()
        mass = self.mass_kg[designs] if mass_kg is None else \
            np.broadcast_to(np.asarray(mass_kg, dtype=float), designs.shape)
        sums = _Sums(designs.size, detail)
        which = self._chunk_of[designs]
        for c in np.unique(which):
            pos = np.flatnonzero(which == c)
            ch = self._chunks[c]
            rows = self._row_of[designs[pos]]
            if rows.size >= 0.4 * ch.shape[0] and np.unique(rows).size == rows.size:
                m_all = np.full(ch.shape[0], mass[pos[0]])  # rows not asked for: any finite mass
                m_all[rows] = mass[pos]
                sums.add(pos, ch, ch.evaluate(m_all, detail), rows)
            else:
                sub = ch.subset(rows)
                sums.add(pos, sub, sub.evaluate(mass[pos], detail))
        return sums.result(self.params, self.cyc)


def cycle_trace(front: EnergyUnit | None, rear: EnergyUnit | None, vehicle: EnergyVehicle,
                params: EnergyParams, time_s, speed_mps) -> EnergyTrace:
    """Operating points of each design at every interval of a cycle (for plots and checks).

    Same model and arguments as `cycle_energy`; meant for a few designs (the output holds
    about 10 arrays of designs x intervals).

    Returns
    -------
    EnergyTrace
    """
    n, steps, _ = prepare(front, rear, vehicle, params, time_s, speed_mps)
    all_dt, all_v, all_a, _ = cycle_steps(time_s, speed_mps)
    shape = (n, len(all_v))
    tr = dict(force=np.zeros(shape), share=np.zeros(shape), gear=np.zeros((2,) + shape, dtype=np.int64),
              w=np.zeros((2,) + shape), t=np.zeros((2,) + shape), pe=np.zeros((2,) + shape),
              pb=np.full(shape, params.auxiliary_w), fric=np.zeros(shape), feasible=np.ones(shape, dtype=bool),
              oom=np.zeros(shape, dtype=bool))
    cols = np.flatnonzero(all_v > 0)
    mass = _per_design(vehicle.mass_kg, n)
    for rows, units in groups(front, rear, n):
        for chunk_rows in chunks(rows, len(steps.v), params.chunk_elements, units):
            out = PreparedChunk(units, chunk_rows, vehicle, params, steps).evaluate(mass[chunk_rows], detail=True)
            _trace_chunk(tr, np.ix_(chunk_rows, cols), out, params)
    return EnergyTrace(time_s=np.asarray(time_s, dtype=float)[:-1], speed_mps=all_v, accel_mps2=all_a,
                       wheel_force_n=tr["force"], front_share=tr["share"], gear=tr["gear"],
                       motor_speed_rad_s=tr["w"], motor_torque_nm=tr["t"], electrical_w=tr["pe"],
                       battery_w=tr["pb"], friction_brake_w=tr["fric"], feasible=tr["feasible"],
                       out_of_map=tr["oom"])


# --------------------------------------------------------------------------------------------
# per-design sums


def _per_design(x, n):
    a = np.asarray(x, dtype=float)
    return a.copy() if a.ndim else np.full(n, float(a))


def _first_time(mask, t0):
    if mask.shape[1] == 0:
        return np.full(mask.shape[0], np.nan)
    any_ = mask.any(axis=1)
    first = np.argmax(mask, axis=1)
    return np.where(any_, t0[first], np.nan)


def _trace_chunk(tr, ix, out, params):
    """Write one chunk's replayed operating points into the trace arrays ``tr`` at ``ix``."""
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


class _Sums:
    """Per-design sums over the intervals, filled chunk by chunk."""

    KEYS = ("drive", "regen", "trac", "brake", "motor", "inv", "gear", "fric")

    def __init__(self, n: int, detail: bool):
        self.detail = detail
        self.acc = {k: np.zeros(n) for k in self.KEYS}
        self.infeasible = np.zeros(n, dtype=np.int64)
        self.first_inf = np.full(n, np.nan)
        self.oom = np.zeros(n, dtype=np.int64)
        self.first_oom = np.full(n, np.nan)
        self.heavier = np.zeros(n, dtype=bool)

    def add(self, pos, ch: PreparedChunk, out: dict, rows=None):
        """Sums of a chunk's evaluation ``out`` into positions ``pos`` (of the chunk's ``rows``, default all)."""
        sel = slice(None) if rows is None else rows
        p = out["p_units"][sel]
        om = out["out_of_map"][sel]
        bad = ~np.isfinite(p)
        pf = np.where(bad, 0.0, p)
        dt = ch.steps.dt
        self.acc["drive"][pos] = np.sum(np.maximum(pf, 0.0) * dt, axis=1) / 3600.0
        self.acc["regen"][pos] = np.sum(np.maximum(-pf, 0.0) * dt, axis=1) / 3600.0
        wheel = out["force"][sel] * ch.steps.v
        self.acc["trac"][pos] = np.sum(np.maximum(wheel, 0.0) * dt, axis=1) / 3600.0
        self.acc["brake"][pos] = np.sum(np.maximum(-wheel, 0.0) * dt, axis=1) / 3600.0
        stuck = bad & ~om
        self.infeasible[pos] = stuck.sum(axis=1)
        self.first_inf[pos] = _first_time(stuck, ch.steps.t0)
        self.oom[pos] = om.sum(axis=1)
        self.first_oom[pos] = _first_time(om, ch.steps.t0)
        self.heavier[pos] = ch.heavier_stays_infeasible(stuck, rows)
        if self.detail:
            for key in ("motor", "inv", "gear", "fric"):
                self.acc[key][pos] = np.sum(np.where(bad, 0.0, out[key][sel]) * dt, axis=1) / 3600.0

    def result(self, params: EnergyParams, cyc: dict) -> EnergyResult:
        """The `EnergyResult` of the sums."""
        acc = self.acc
        n = self.infeasible.size
        aux_wh = params.auxiliary_w * cyc["duration"] / 3600.0
        feasible = self.infeasible == 0
        ok = feasible & (self.oom == 0)
        battery = np.where(ok, acc["drive"] - acc["regen"] + aux_wh, np.nan)
        dist_km = cyc["distance"] / 1000.0
        with np.errstate(invalid="ignore", divide="ignore"):
            share = np.where(acc["drive"] > 0, acc["regen"] / acc["drive"], 0.0)
            per_km = battery / dist_km if dist_km > 0 else np.full(n, np.nan)
        extra = {}
        if self.detail:
            extra = dict(motor_loss_wh=acc["motor"], inverter_loss_wh=acc["inv"], gearbox_loss_wh=acc["gear"],
                         friction_brake_wh=acc["fric"])
        return EnergyResult(wh_per_km=per_km, battery_wh=battery, drive_wh=acc["drive"], regen_wh=acc["regen"],
                            regen_share=share, auxiliary_wh=float(aux_wh), traction_wh=acc["trac"],
                            braking_wh=acc["brake"], distance_km=float(dist_km), duration_s=float(cyc["duration"]),
                            feasible=feasible, infeasible_steps=self.infeasible, first_infeasible_s=self.first_inf,
                            out_of_map=self.oom > 0, out_of_map_steps=self.oom, first_out_of_map_s=self.first_oom,
                            infeasible_when_heavier=self.heavier & ~feasible, **extra)
