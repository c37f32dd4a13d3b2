"""Evaluation of a chunk of designs over the cycle's intervals (the battery side of the energy model).

A chunk holds designs of one group (the same units present, the same gear counts). `PreparedChunk`
computes once what does not depend on the vehicle mass (motor speeds, envelopes, rotor torques,
spin losses, braking limits: `selector.physics.energy_points.gear_state`); `PreparedChunk.evaluate`
then gives, at any vehicle masses, the wheel force, the split and gear chosen per interval, the shift
energy and the battery power of the units, and with ``detail`` replays the chosen operating points
for the loss breakdown and the trace. The model is described in `selector.physics.energy`.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from selector.physics.cycles import cycle_steps
from selector.physics.energy_inputs import EnergyParams, check_unit, first_least
from selector.physics.energy_inputs import gear_count as _gear_count
from selector.physics.energy_points import (
    GearState,
    Steps,
    UnitRows,
    capability_split,
    gear_state,
    gearbox_torque,
    stationary_split,
    unit_battery_power,
    unit_power,
    unit_rows,
)
from selector.physics.road import grade_angle_rad
from selector.units import G_N


def prepare(front, rear, vehicle, params, time_s, speed_mps):
    """Validate the inputs; return (n designs, the moving intervals `Steps`, {duration, distance})."""
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
        check_unit(u, n)
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
    steps = Steps(dt=dtm, v=vm[moving], a=a[moving], v_high=vh[moving], v_end=v[1:][moving], t0=t0,
                  regen_ok=regen_ok, contiguous=np.isclose(t0[1:], t0[:-1] + dtm[:-1], rtol=0.0, atol=1e-9))
    cyc = dict(duration=float(t[-1] - t[0]), distance=float(np.sum(vm * dt)))
    return n, steps, cyc


def _mapped(u, n):
    if u is None:
        return np.zeros(n, dtype=np.int64)
    return (np.asarray(u.present, dtype=bool) & (np.asarray(u.map_index) >= 0)).astype(np.int64)


def groups(front, rear, n):
    """Yield (rows, {"front": (unit, gears), "rear": (unit, gears)}) for designs sharing units and gear
    counts, map-based and polynomial-loss motors apart (each kind then runs its own arithmetic path for
    the whole chunk; the results do not depend on the grouping)."""
    gf, gr = _gear_count(front, n), _gear_count(rear, n)
    key = gf * 16 + gr + 256 * _mapped(front, n) + 512 * _mapped(rear, n)
    for k in np.unique(key):
        rows = np.flatnonzero(key == k)
        units = {}
        if (k % 256) // 16 > 0:
            units["front"] = (front, int((k % 256) // 16))
        if k % 16 > 0:
            units["rear"] = (rear, int(k % 16))
        yield rows, units


def chunks(rows, steps, chunk_elements, units):
    """Split ``rows`` into chunks of about ``chunk_elements`` (design x interval) elements."""
    weight = 1 if len(units) == 1 else 4  # two units keep a candidate array per split fraction
    per = max(1, int(chunk_elements // max(1, steps * weight)))
    for s in range(0, len(rows), per):
        yield rows[s:s + per]


def vec(x, idx):
    """Column (D, 1) of a per-design array or scalar at the designs ``idx``."""
    a = np.asarray(x, dtype=float)
    return (a[idx] if a.ndim else np.full(len(idx), float(a)))[:, None]


def _take(obj, sel, d):
    """Copy of a dataclass with every array field whose first axis is the chunk's d designs cut to ``sel``."""
    changes = {}
    for f in dataclasses.fields(obj):
        x = getattr(obj, f.name)
        if isinstance(x, np.ndarray) and x.ndim >= 1 and x.shape[0] == d and d > 1:
            changes[f.name] = x[sel]
        elif isinstance(x, tuple) and x and all(isinstance(y, np.ndarray) and y.shape[:1] == (d,) for y in x):
            changes[f.name] = tuple(y[sel] for y in x)
    return dataclasses.replace(obj, **changes)


class PreparedChunk:
    """Designs ``idx`` of one group with the mass-independent arrays of the evaluation computed once.

    Parameters
    ----------
    units : dict
        {"front" / "rear": (EnergyUnit, gear count)} of the group (one or two entries).
    idx : ndarray of int
        Positions of the chunk's designs in the unit and vehicle arrays.
    vehicle : EnergyVehicle
        Vehicle data (its ``mass_kg`` is not used here: masses are given to `evaluate`).
    params : EnergyParams
    steps : Steps
        The moving intervals of the cycle.
    """

    def __init__(self, units, idx, vehicle, params: EnergyParams, steps: Steps):
        self.idx = np.asarray(idx)
        self.params = params
        self.steps = steps
        radius = vec(vehicle.radius_m, idx)
        crr = vec(vehicle.crr, idx)
        q = vec(vehicle.q_n_s2_m2, idx)
        jw = vec(vehicle.wheel_inertia_total_kgm2, idx)
        theta = float(grade_angle_rad(params.grade_pct))
        self.radius = radius
        self.inv_r = 1.0 / radius
        self.j_r2 = jw / (radius * radius)
        self.climb = crr * np.cos(theta) + np.sin(theta)
        self.aero = q * steps.v * steps.v
        self.rows: dict[str, UnitRows] = {pos: unit_rows(u, idx, gears) for pos, (u, gears) in units.items()}
        self.states: dict[str, list[GearState]] = {
            pos: [gear_state(r, r.ratios[:, gi:gi + 1], r.gear_efficiency[:, gi:gi + 1], radius, steps, params)
                  for gi in range(r.ratios.shape[1])] for pos, r in self.rows.items()}
        self.shape = (len(self.idx), len(steps.v))
        self.cap_split = None
        if len(self.rows) == 2 and params.capability_split:
            self.cap_split = capability_split(self.states, self.shape)

    def subset(self, sel) -> PreparedChunk:
        """The same chunk restricted to its designs at positions ``sel`` (arithmetic paths unchanged)."""
        d = self.shape[0]
        out = object.__new__(PreparedChunk)
        out.__dict__.update(self.__dict__)
        out.idx = self.idx[sel]
        for name in ("radius", "inv_r", "j_r2", "climb", "aero", "cap_split"):
            x = getattr(self, name)
            if x is not None and np.ndim(x) >= 1 and np.shape(x)[0] == d:
                setattr(out, name, x[sel])
        out.rows = {pos: _take(r, sel, d) for pos, r in self.rows.items()}
        out.states = {pos: [_take(g, sel, d) for g in gs] for pos, gs in self.states.items()}
        out.shape = (len(out.idx), self.shape[1])
        return out

    def wheel_force(self, mass):
        """Wheel force of every interval at the vehicle masses ``mass`` (D, 1) [N] (D, S).

        F = (m + J_wheels / r^2) a + m g (Crr cos(theta) + sin(theta)) + q v^2.
        """
        return (mass + self.j_r2) * self.steps.a + mass * G_N * self.climb + self.aero

    def heavier_stays_infeasible(self, bad, rows=None):
        """True where an interval in ``bad`` (of the designs ``rows``, default all) stays unfollowable at
        every larger mass.

        One unit only: where a >= 0 and Crr cos(theta) + sin(theta) >= 0 every term of the wheel force
        is non-decreasing in the mass (in floating point too), so is the motor torque of every gear,
        while the envelope and the speed limits do not depend on the mass.
        """
        if len(self.rows) != 1:
            return np.zeros(bad.shape[0], dtype=bool)
        climb = self.climb if rows is None else self.climb[rows]
        grows = (self.steps.a >= 0.0)[None, :] & (climb >= 0.0)
        return np.any(bad & grows, axis=1)

    # ------------------------------------------------------------------ evaluation at given masses
    def evaluate(self, mass, detail: bool = False) -> dict:
        """Per-interval results of the chunk's designs at vehicle masses ``mass`` ((D,) or scalar) [kg].

        Returns a dict of (D, S) arrays: ``p_units`` (battery power of the units with the shift
        energy; inf where no split and gear can follow the interval) [W], ``force`` (wheel force) [N],
        ``out_of_map`` (bool); with ``detail`` also the loss breakdown and the chosen operating points
        (`_replay`).
        """
        m = np.broadcast_to(np.asarray(mass, dtype=float), (self.shape[0],))[:, None]
        force = self.wheel_force(m)
        oom = np.zeros(self.shape, dtype=bool)
        t1s = {pos: [gearbox_torque(g, force) for g in self.states[pos]] for pos in self.rows}
        total, choice, best, fracs = self._choose(force, t1s, oom)
        total, gsel, shift = self._shift_energy(total, best, choice)
        out = {"p_units": total, "force": force, "out_of_map": oom}
        if detail:
            out.update(self._replay(force, fracs, choice, gsel, shift))
        return out

    def _candidate(self, pos, f, force, t1s, oom):
        """Battery power of unit ``pos`` at share f (scalar or (D, S)) in its best gear, and that gear."""
        r = self.rows[pos]
        pbs = []
        for gi, g in enumerate(self.states[pos]):
            if r.any_map:
                out = unit_power(r, g, force, f, self.params, False)
                pbs.append(out["pb"])
                oom |= out["oom"]
            else:
                pbs.append(unit_battery_power(g, t1s[pos][gi], f, self.params.inverter_efficiency))
        if len(pbs) == 1:
            return pbs[0], np.zeros(self.shape, dtype=np.int8)
        pbs = np.stack(pbs)
        gear_best = first_least(pbs)  # ties (to the tolerance): the lowest gear
        return np.take_along_axis(pbs, gear_best[None], axis=0)[0], gear_best.astype(np.int8)

    def _choose(self, force, t1s, oom):
        """The split and gears of least battery power per interval: (total (D, S), chosen candidate,
        {pos: (battery power per candidate, gear per candidate)}, {pos: share per candidate})."""
        if len(self.rows) == 1:
            pos = next(iter(self.rows))
            pb, gb = self._candidate(pos, 1.0, force, t1s, oom)
            return pb, np.zeros(self.shape, dtype=np.int64), {pos: ([pb], [gb])}, {pos: [1.0]}
        front = [float(x) for x in self.params.split_fractions]
        if self.cap_split is not None:
            front.append(self.cap_split)
        best = {"front": ([], []), "rear": ([], [])}

        def add(s_front):
            for pos, f in (("front", s_front), ("rear", 1.0 - s_front)):
                pb, gb = self._candidate(pos, f, force, t1s, oom)
                best[pos][0].append(pb)
                best[pos][1].append(gb)

        for s_front in front:
            add(s_front)
        if self.params.optimal_split and not (self.rows["front"].all_map or self.rows["rear"].all_map):
            k_half = int(np.argmin([abs(x - 0.5) if np.ndim(x) == 0 else 1.0 for x in front]))
            s_opt = stationary_split(self.states, t1s, {p: best[p][1][k_half] for p in self.rows})
            mapped = (self.rows["front"].map_index >= 0) | (self.rows["rear"].map_index >= 0)
            if mapped.any():  # a map-based unit: no stationary split; a copy of the grid point nearest 0.5
                s_opt = np.where(mapped[:, None], front[k_half], s_opt)  # (never chosen: ties go to the first)
            front.append(s_opt)
            add(s_opt)
        fracs = {"front": front, "rear": [1.0 - x for x in front]}
        totals = np.stack([best["front"][0][k] + best["rear"][0][k] for k in range(len(front))])
        choice = first_least(totals)  # ties (to the tolerance): the first candidate
        total = np.take_along_axis(totals, choice[None], axis=0)[0]
        return total, choice, best, fracs

    def _shift_energy(self, total, best, choice):
        """Add the rotor's kinetic-energy jump at each change of gear to the battery power; returns
        (total, chosen gear per unit (D, S), (energy in, energy out) per interval or None) [W], [-], [J]."""
        steps, shape = self.steps, self.shape
        eta_inv = self.params.inverter_efficiency
        gsel = {}
        shift_in = shift_out = None
        for pos, r in self.rows.items():
            if r.ratios.shape[1] == 1:
                gsel[pos] = np.zeros(shape, dtype=np.int64)
                continue
            gsel[pos] = np.take_along_axis(np.stack(best[pos][1]), choice[None], axis=0)[0].astype(np.int64)
            if shape[1] < 2:
                continue
            ratio = np.take_along_axis(r.ratios, gsel[pos], axis=1)
            both = np.isfinite(total[:, 1:]) & np.isfinite(total[:, :-1]) & steps.contiguous
            w2 = (steps.v_end[:-1] * self.inv_r) ** 2
            jump = np.where(both, 0.5 * r.rotor_inertia_kgm2 * w2 * (ratio[:, 1:] ** 2 - ratio[:, :-1] ** 2), 0.0)
            if shift_in is None:
                shift_in, shift_out = np.zeros(shape), np.zeros(shape)
            shift_in[:, 1:] += np.maximum(jump, 0.0)
            shift_out[:, 1:] += np.maximum(-jump, 0.0)
        if shift_in is None:
            return total, gsel, None
        total = total + (shift_in / eta_inv - shift_out * eta_inv) / steps.dt
        return total, gsel, (shift_in, shift_out)

    def _replay(self, force, fracs, choice, gsel, shift) -> dict:
        """The chosen operating points again, with the loss breakdown (D, S): motor, inverter and gearbox
        losses and friction-brake power [W], and per unit its gear (1-based), speed, torque and
        electrical power; the front share of the wheel force."""
        steps, shape, params = self.steps, self.shape, self.params
        eta_inv = params.inverter_efficiency
        fric_force = force.copy()
        motor = inv = gear_loss = np.zeros(shape)
        unit_out = {}
        share = None
        for pos, r in self.rows.items():
            f_el = _select(fracs[pos], choice, shape)
            gs = gsel[pos]
            g = gear_state(r, np.take_along_axis(r.ratios, gs, axis=1),
                           np.take_along_axis(r.gear_efficiency, gs, axis=1), self.radius, steps, params)
            out = unit_power(r, g, force, f_el, params, True)
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
        if shift is not None:
            shift_in, shift_out = shift
            inv = inv + (shift_in * (1.0 / eta_inv - 1.0) + shift_out * (1.0 - eta_inv)) / steps.dt
        return dict(motor=motor, inv=inv, gear=gear_loss, fric=fric, units=unit_out, share=share)


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
