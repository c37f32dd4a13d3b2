"""The re-check's acceleration run: time-domain integration with `scipy.integrate.solve_ivp`.

See `verify.py` (module docstring) for the method: one smooth regime per call to solve_ivp (envelope
branch per unit, set of friction-limited axles), events at every regime change, upshift and target.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from selector.engine.verify_vehicle import (
    MAX_CUT_REL,
    VerificationError,
    _accel,
    _balance_accel,
    _gear_limit,
    _m_eff,
    _motor_accel,
    _road_load,
    _Unit,
    _Vehicle,
)
from selector.units import G_N

ODE_RTOL = 1e-11
"""Relative tolerance of solve_ivp in the re-check [-]."""
ODE_ATOL = 1e-12
"""Absolute tolerance of solve_ivp in the re-check [m/s]."""
SHIFT_TIE = 1e-12
"""A unit upshifts where a_next >= a_now - SHIFT_TIE |a_now| (the model's tie rule) [-]."""
SHIFT_ORDER_TIE = 1e-9
"""Shift points of two units within this share of each other: the front shifts first (the model's rule) [-]."""
PROBE_REL = 1e-12
"""A restarted integration takes the regime found this fraction above the restart speed [-]."""
LIMIT_EARLY_REL = 1e-10
"""The forced shift at a gear's speed limit fires this fraction below it, so that an envelope corner
at the same speed (decline speed = maximum speed) cannot end the gear's force first [-]."""
STUCK_PROBE_GROWTH = 1000.0
"""Each restart in a row without progress probes the next regime this many times further ahead [-]."""
STUCK_PROBE_MAX = 1e-6
"""... up to this share of the speed [-]."""
MAX_RESTARTS = 400
"""Most regime changes of one integration phase before the re-check gives up (an internal error) [-]."""

_BRANCHES = ("torque", "power", "decline")


def _branch_force(veh: _Vehicle, u: _Unit, g: int, v: float, branch: str) -> float:
    """Wheel force of one envelope branch, continued smoothly beyond where it is the least [N]."""
    e = u.ratios[g] / veh.radius
    w = v * e
    if branch == "cut":
        return 0.0
    if branch == "torque":
        t = u.torque
    elif w <= 0.0:
        return math.inf
    elif branch == "power":
        t = u.power / w
    else:
        t = u.power / w * (u.decline / w) ** u.exponent
    return u.effs[g] * t * e


@dataclass(frozen=True)
class _Regime:
    """Where the run's right-hand side is smooth: each driving unit's envelope branch and the set of
    axles whose force is friction-limited."""

    branch: tuple
    slipping: frozenset


def _regime_at(veh: _Vehicle, gears: dict, engaged: dict, v: float, probe_rel: float = PROBE_REL) -> _Regime:
    """The regime just above speed v (probed ``probe_rel`` ahead, so a run restarted at a switch continues
    in the new regime)."""
    vp = v + probe_rel * max(v, 1.0)
    branch = []
    forces = {}
    for name, u in veh.units.items():
        if not engaged[name]:
            continue
        g = gears[name]
        if vp * u.ratios[g] / veh.radius > u.w_max * (1.0 + MAX_CUT_REL):
            b = "cut"
        else:
            b = min(_BRANCHES, key=lambda br, u=u, g=g: _branch_force(veh, u, g, vp, br))
        branch.append((name, b))
        forces[name] = _branch_force(veh, u, g, vp, b)
    a = _balance_accel(veh, forces, _road_load(veh, vp), _m_eff(veh, gears, engaged))
    slipping = frozenset(n for n, f in forces.items() if veh.mu * _normal_load(veh, n, a) < f)
    return _Regime(tuple(branch), slipping)


def _normal_load(veh: _Vehicle, axle: str, a: float) -> float:
    """Axle load on the level while accelerating at a, static +- m a h/L [N]."""
    if axle == "rear":
        return veh.mass * G_N * veh.rear_share + veh.mass * a * veh.hl
    return veh.mass * G_N * (1.0 - veh.rear_share) - veh.mass * a * veh.hl


def _regime_accel(veh: _Vehicle, gears: dict, engaged: dict, reg: _Regime, v: float) -> tuple[float, dict]:
    """Acceleration within a regime (linear force balance, smooth in v) and each driving axle's force [m/s^2], [N]."""
    m_eff = _m_eff(veh, gears, engaged)
    num = -_road_load(veh, v)
    den = m_eff
    forces = {}
    for name, b in reg.branch:
        f = _branch_force(veh, veh.units[name], gears[name], v, b)
        forces[name] = f
        if name in reg.slipping:
            static = _normal_load(veh, name, 0.0)
            num += veh.mu * static
            den -= veh.mu * veh.mass * veh.hl * (1.0 if name == "rear" else -1.0)
        else:
            num += f
    return num / den, forces


def _ivp_events(veh: _Vehicle, gears: dict, engaged: dict, reg: _Regime, target: float,
                events: list) -> tuple[list, list]:
    """solve_ivp event functions (terminal) and their names for one regime: the target, a stall, the
    caller's ``events`` and, per driving unit, every change of regime (another envelope branch becomes
    the least, the force cut at w_max, the axle starts or stops slipping, all named "regime")."""
    fns, names = [], []

    def add(name, fn, direction):
        def ev(_t, y):
            return fn(y[0])

        ev.terminal, ev.direction = True, direction
        fns.append(ev)
        names.append(name)

    add("reach", lambda x: x - target, 1.0)
    add("stall", lambda x: _regime_accel(veh, gears, engaged, reg, x)[0] if x > 0.0 else 1.0, -1.0)
    for name, fn, direction in events:
        add(name, fn, direction)
    for name, b in reg.branch:
        u, g = veh.units[name], gears[name]
        if b == "cut":
            continue
        for other in _BRANCHES:
            if other != b:  # the current branch stops being the least
                add("regime", lambda x, u=u, g=g, b=b, o=other: _branch_force(veh, u, g, x, b)
                    - _branch_force(veh, u, g, x, o), 1.0)
        add("regime", lambda x, u=u, g=g: x * u.ratios[g] / veh.radius - u.w_max * (1.0 + MAX_CUT_REL), 1.0)

        def slip_margin(x, name=name):
            a, forces = _regime_accel(veh, gears, engaged, reg, x)
            margin = forces[name] - veh.mu * _normal_load(veh, name, a)
            return -margin if name in reg.slipping else margin

        add("regime", slip_margin, 1.0)
    return fns, names


def _integrate(veh: _Vehicle, gears: dict, engaged: dict, t0: float, v0: float, t1: float, target: float,
               events: list) -> tuple[str, float, float]:
    """Integrate dv/dt = a(v) with solve_ivp from (t0, v0) until ``target``, t1 or an event of ``events``
    [(name, g(v), direction)], restarting wherever the regime changes (an envelope corner, a change
    of the friction-limited axles), so that every call to solve_ivp has a smooth right-hand side.

    Returns (what, t, v): what is "reach", "stall" (a <= 0 before the target), "end" (t1 reached) or
    the name of the event that fired first.
    """
    from scipy.integrate import solve_ivp

    t, v = t0, v0
    stuck = 0  # restarts in a row that made no progress in speed
    for _ in range(MAX_RESTARTS):
        # at a (re)start, an event whose condition already holds fires (e.g. a gear's speed limit that
        # coincides with an envelope corner), and a run that cannot accelerate here has stalled
        if v >= target:
            return "reach", t, v
        for name, fn, _direction in events:
            if fn(v) >= 0.0:
                return name, t, v
        # where a switch keeps firing at the same speed (an axle's force touching its friction limit:
        # the margin is zero there with zero slope), take the regime probed further ahead; both regimes
        # give the same acceleration at the switch, so the time does not depend on the choice
        reg = _regime_at(veh, gears, engaged, v, min(PROBE_REL * STUCK_PROBE_GROWTH ** stuck, STUCK_PROBE_MAX))
        if v > 0.0 and _regime_accel(veh, gears, engaged, reg, v)[0] <= 0.0:
            return "stall", t, v

        def rhs(_t, y, reg=reg):
            x = y[0]
            a = _regime_accel(veh, gears, engaged, reg, max(x, 0.0))[0]
            return [0.0 if (x <= 0.0 and a < 0.0) else a]

        fns, names = _ivp_events(veh, gears, engaged, reg, target, events)
        if t1 <= t:
            return "end", t, v
        sol = solve_ivp(rhs, (t, t1), [v], method="DOP853", rtol=ODE_RTOL, atol=ODE_ATOL, events=fns)
        best = None
        for name, te, ye in zip(names, sol.t_events, sol.y_events, strict=True):
            if len(te) and (best is None or te[0] < best[1]):
                best = (name, float(te[0]), float(ye[0][0]))
        if best is None:
            if sol.status != 0:
                raise VerificationError(f"internal error: the re-check's integration failed ({sol.message})")
            return "end", float(sol.t[-1]), float(sol.y[0][-1])
        if best[0] != "regime":
            return best
        stuck = stuck + 1 if best[2] <= v + PROBE_REL * max(v, 1.0) else 0
        t, v = best[1], best[2]
    raise VerificationError("internal error: the re-check's integration changed regime more than "
                            f"{MAX_RESTARTS} times")


def _front_due(veh: _Vehicle, units: dict, gears: dict, holds, v: float) -> bool:
    """True when the front unit's own shift point (its shift rule, or its forced shift at the gear's
    speed limit) is within SHIFT_ORDER_TIE above ``v`` [m/s]."""
    up = v * (1.0 + SHIFT_ORDER_TIE)
    lim = _gear_limit(veh, units["front"], gears["front"]) * (1.0 - LIMIT_EARLY_REL)
    return holds("front", up) or lim <= up


def run_time_s(veh: _Vehicle, target: float, t_cap: float) -> float:
    """Time from rest to ``target`` [m/s] by solve_ivp in the time domain (inf if not reached by t_cap) [s].

    Every unit starts in first gear; a unit upshifts where its next gear gives at least as much
    acceleration from the motors, traction limits aside (an event on a_next - a_now) or at its gear's
    speed limit; during its shift time it gives no force and its rotor is decoupled (integrated as
    well, `_shift`); no downshifts. Two units never shift at once: a unit whose shift point passed
    during the other's shift shifts when that one ends; coinciding points go front first.
    """
    units = veh.units
    cap = min(_gear_limit(veh, u, len(u.ratios) - 1) for u in units.values())
    if target > veh.v_limit or target > cap * (1.0 + MAX_CUT_REL):
        return math.inf
    gears = {name: 0 for name in units}
    engaged = {name: True for name in units}
    t, v = 0.0, 0.0
    for _ in range(sum(len(u.ratios) for u in units.values()) + 1):
        g_now = dict(gears)
        can = [n for n in ("front", "rear") if n in units and gears[n] < len(units[n].ratios) - 1]

        def a_now(x, g_now=g_now):
            return _motor_accel(veh, g_now, engaged, x)

        def a_next(x, name, g_now=g_now):
            return _motor_accel(veh, {**g_now, name: g_now[name] + 1}, engaged, x)

        def holds(name, x):
            a1 = a_now(x)
            return a_next(x, name) >= a1 - SHIFT_TIE * abs(a1)

        now = [n for n in can if holds(n, v)]
        if now:
            which = now[0]
        else:
            events = []
            for n in can:
                events.append((n, lambda x, n=n: a_next(x, n) - a_now(x), 1.0))
                lim = _gear_limit(veh, units[n], gears[n])
                if lim < target:  # forced shift at the gear's speed limit (a hair early: before the force cut)
                    events.append((n, lambda x, lim=lim: x - lim * (1.0 - LIMIT_EARLY_REL), 1.0))
            what, t, v = _integrate(veh, gears, engaged, t, v, t_cap, target, events)
            if what in ("stall", "end"):
                return math.inf
            if what == "reach" or v >= target:
                return t
            which = what
            if which == "rear" and "front" in can and _front_due(veh, units, gears, holds, v):
                which = "front"  # shift points within SHIFT_ORDER_TIE of each other: the front first
        reached, t, v = _shift(veh, gears, engaged, which, t, v, target)
        if reached:
            return t
        gears[which] += 1
    return math.inf


def _shift(veh: _Vehicle, gears: dict, engaged: dict, which: str, t: float, v: float,
           target: float) -> tuple[bool, float, float]:
    """The shift of unit ``which`` from (t [s], v [m/s]): that unit gives no tractive force and its rotor
    is decoupled for its shift time. Returns (reached, t, v) after it; ``reached`` when the target speed
    is reached during the shift (t is then the time it is reached)."""
    shift_s = veh.units[which].shift_s
    if not shift_s > 0.0:
        return False, t, v
    engaged[which] = False
    what, t_end, v_end = _integrate(veh, gears, engaged, t, v, t + shift_s, target, [])
    engaged[which] = True
    if what == "reach":
        return True, t_end, v_end
    if what == "stall":  # coasting down: the speed after the shift, by the same integration
        what, t_end, v_end = _coast(veh, gears, {**engaged, which: False}, t_end, v_end, t + shift_s)
    return False, t + shift_s, max(v_end, 0.0)


def _coast(veh: _Vehicle, gears: dict, engaged: dict, t0: float, v0: float, t1: float):
    """Integrate a phase in which the vehicle may slow down (a <= 0 allowed) until t1 (solve_ivp)."""
    from scipy.integrate import solve_ivp

    def rhs(_t, y):
        x = y[0]
        a = _accel(veh, gears, engaged, max(x, 0.0))
        return [0.0 if (x <= 0.0 and a < 0.0) else a]

    if t1 <= t0:
        return "end", t0, v0
    sol = solve_ivp(rhs, (t0, t1), [v0], method="DOP853", rtol=ODE_RTOL, atol=ODE_ATOL)
    return "end", float(sol.t[-1]), float(sol.y[0][-1])

