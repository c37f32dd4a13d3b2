"""Independent re-check of every design before it is reported.

`verify_designs` is the one gate every reported design passes (solve, shortlist, frontier, sweep,
simulate and explain all reach it, through `api.records` or directly). It does two things:

1. It evaluates the designs with the exact, unstaged evaluator (`evaluate.evaluate`) and, for
   designs the search called feasible, checks every requirement and part rating and the claimed
   objective value (1e-9 relative): the search's staged screening and bounds are not trusted.
2. It recomputes the physical figures by a second computation that shares no numerical method with
   the evaluator (`recheck`), design by design, in plain scalar Python:

   - the acceleration run is integrated in the TIME domain with `scipy.integrate.solve_ivp` (DOP853,
     rtol `ODE_RTOL`) with event detection: the target speed (terminal), each unit's upshift point
     (where its next gear gives at least as much acceleration) and its gear limit, the torque
     interruption of every shift (no tractive force from that unit, its rotor decoupled, integrated
     by solve_ivp as well), and at every speed the traction limit with load transfer of both axles,
     solved as the root of the force balance m_eff a + F_res = sum_axles min(F_axle, mu N_axle(a))
     (piecewise linear in a: its breakpoints are located and the root is taken on the bracketing
     piece), not by the evaluator's minimum over traction combinations. Each call to solve_ivp
     integrates one smooth regime (envelope branch per unit, set of slipping axles) and stops at an
     event where the regime changes, so no step straddles a kink;
   - maximum and sustained top speed by `scipy.optimize.brentq` on the force balance
     (wheel force - road load) per gear, or on the summed best-gear forces of two units;
   - gradeability by `brentq` on the crawl force balance in the grade angle (axle loads on the
     grade, each axle's force limited by mu N), launch acceleration by the same force balance at
     v = 0; the tyre load demand, its speed-reduced capacity, the mass and the cost from the
     catalogue rows.

   Every figure must agree with the evaluator's within the tolerances below; then every stated
   requirement and check is re-decided on the re-checked figures. A disagreement raises
   `VerificationError` (the package's own error type: an internal error, never a user error and
   never a silent answer).

What the re-check shares with the evaluator: the catalogue rows converted to SI (`PartTables`), the
model's definitions (the motor envelope, m_eff, load transfer with m a h/L, the shift rule and the
tie rules) and the tyre tables. Energy figures (consumption, battery, range) are not re-checked.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from selector.engine.evaluate import OBJECTIVE_METRIC, as_keys, check_results, evaluate
from selector.engine.parts import AXLE_COLUMNS, TY, PartTables
from selector.errors import SelectorError
from selector.requirements import REL_TOL, stated
from selector.units import G_N

ODE_RTOL = 1e-11
"""Relative tolerance of solve_ivp in the re-check [-]."""
ODE_ATOL = 1e-12
"""Absolute tolerance of solve_ivp in the re-check [m/s]."""
TIME_REL_TOL = 1e-6
"""Acceleration times agree when they differ by at most this fraction [-] (both integrators are far
more accurate; measured agreement is stated in DEVELOPERS.md)."""
SPEED_REL_TOL = 1e-9
"""Maximum and sustained top speed, launch acceleration, tyre capacity, mass and cost agree within this [-]."""
GRADE_ANGLE_TOL_RAD = 1e-9
"""Gradeabilities agree when their grade angles differ by at most this [rad]."""
BORDERLINE_REL = 1e-6
"""A target speed within this fraction of the re-checked maximum speed is borderline: an infinite time
on one side and a finite one on the other are both accepted there (the time is unbounded at the top
speed) [-]."""
GRADE_SCAN = 2048
"""Grid of grade angles scanned for the sign change of the crawl force balance before brentq [-]."""
MAX_CUT_REL = 1e-12
"""The envelope's force is counted up to w_max (1 + this), as in `physics.motor` (the model's definition) [-]."""
SHIFT_TIE = 1e-12
"""A unit upshifts where a_next >= a_now - SHIFT_TIE |a_now| (the model's tie rule) [-]."""
PROBE_REL = 1e-12
"""A restarted integration takes the regime found this fraction above the restart speed [-]."""
LIMIT_EARLY_REL = 1e-10
"""The forced shift at a gear's speed limit fires this fraction below it, so that an envelope corner
at the same speed (decline speed = maximum speed) cannot end the gear's force first [-]."""
MAX_RESTARTS = 400
"""Most regime changes of one integration phase before the re-check gives up (an internal error) [-]."""


class VerificationError(SelectorError):
    """A reported design failed the independent re-check (internal error: please report it)."""


# ------------------------------------------------------------------------------------------ one design

@dataclass
class _Unit:
    """One drive unit of one design (plain floats, SI)."""

    torque: float
    power: float
    cont_torque: float
    cont_power: float
    decline: float
    exponent: float
    w_max: float
    inertia: float
    ratios: list
    effs: list
    shift_s: float


@dataclass
class _Vehicle:
    """One design: its units by axle ("front", "rear") and the vehicle data (plain floats, SI)."""

    units: dict
    radius: float
    mass: float
    rear_share: float
    crr: float
    q: float
    mu: float
    hl: float
    wheel_inertia: float
    v_limit: float


def _vehicles(parts: PartTables, keys, mass_kg) -> list[_Vehicle]:
    axles, body = parts.design(keys, mass_kg=mass_kg)
    out = []
    for i in range(keys.shape[0]):
        units = {}
        for name, u in axles.units():
            if not bool(u.present[i]):
                continue
            ratios = [float(x) for x in u.ratio[i] if np.isfinite(x)]
            units[name] = _Unit(float(u.torque_nm[i]), float(u.power_w[i]), float(u.cont_torque_nm[i]),
                                float(u.cont_power_w[i]), float(u.decline_rad_s[i]), float(u.decline_exponent[i]),
                                float(u.max_speed_rad_s[i]), float(u.rotor_inertia_kgm2[i]), ratios,
                                [float(x) for x in u.efficiency[i][: len(ratios)]], float(u.shift_time_s[i]))
        out.append(_Vehicle(units, float(axles.radius_m[i]), float(body.mass_kg[i]), float(body.rear_share[i]),
                            float(body.crr[i]), float(body.q_n_s2_m2[i]), float(body.road_friction[i]),
                            float(body.cg_height_m[i]) / float(body.wheelbase_m[i]),
                            float(body.wheel_inertia_total_kgm2[i]), float(body.speed_limit_mps[i])))
    return out


def _torque(u: _Unit, w: float, continuous: bool = False) -> float:
    """Envelope torque at shaft speed w: min(T, P/w, P (w_d/w)^k / w), 0 above w_max [N m]."""
    if w > u.w_max * (1.0 + MAX_CUT_REL):
        return 0.0
    t, p = (u.cont_torque, u.cont_power) if continuous else (u.torque, u.power)
    if w > 0.0:
        t = min(t, p / w)
        if w > u.decline:
            t = min(t, p / w * (u.decline / w) ** u.exponent)
    return t


def _force(veh: _Vehicle, u: _Unit, g: int, v: float, continuous: bool = False) -> float:
    """Wheel force of unit u in gear g at road speed v, eta T(v G/r) G/r [N]."""
    e = u.ratios[g] / veh.radius
    return u.effs[g] * _torque(u, v * e, continuous) * e


def _gear_limit(veh: _Vehicle, u: _Unit, g: int) -> float:
    return u.w_max * veh.radius / u.ratios[g]


def _road_load(veh: _Vehicle, v: float) -> float:
    return veh.mass * G_N * veh.crr + veh.q * v * v


def _m_eff(veh: _Vehicle, gears: dict, engaged: dict) -> float:
    m = veh.mass
    for name, u in veh.units.items():
        if engaged[name]:
            e = u.ratios[gears[name]] / veh.radius
            m += u.inertia * e * e * u.effs[gears[name]]
    return m + veh.wheel_inertia / veh.radius ** 2


def _balance_accel(veh: _Vehicle, forces: dict, f_res: float, m_eff: float) -> float:
    """Root a of m_eff a + F_res = sum over driving axles of min(F_axle, mu N_axle(a)) [m/s^2].

    N_rear = m g s_r + m a h/L, N_front = m g (1 - s_r) - m a h/L. The balance is piecewise linear in a
    with a breakpoint where an axle's force meets its friction limit; the physical root is the largest
    one (the balance decreases above it), taken exactly on its linear piece.
    """
    m, mu, hl = veh.mass, veh.mu, veh.hl
    static = {"rear": m * G_N * veh.rear_share, "front": m * G_N * (1.0 - veh.rear_share)}
    sign = {"rear": 1.0, "front": -1.0}

    def balance(a):
        tot = 0.0
        for name, f in forces.items():
            tot += min(f, mu * (static[name] + sign[name] * m * a * hl))
        return tot - f_res - m_eff * a

    hi = (sum(forces.values()) - f_res) / m_eff
    lo = min(-f_res / m_eff, hi)
    step = 1.0
    for _ in range(200):
        if balance(lo) >= 0.0:
            break
        lo -= step
        step *= 2.0
    pts = {lo, hi}
    if mu > 0.0 and hl > 0.0:
        for name, f in forces.items():
            a = (f / mu - static[name]) / (sign[name] * m * hl)
            if lo < a < hi:
                pts.add(a)
    pts = sorted(pts)
    vals = [balance(a) for a in pts]
    top = max(i for i, val in enumerate(vals) if val >= 0.0) if vals[0] >= 0.0 else 0
    if top == len(pts) - 1 or vals[top] == 0.0:
        return pts[top]
    a0, a1, b0, b1 = pts[top], pts[top + 1], vals[top], vals[top + 1]
    return a0 + b0 * (a1 - a0) / (b0 - b1)


def _accel(veh: _Vehicle, gears: dict, engaged: dict, v: float) -> float:
    """Acceleration in a gear state at road speed v (only engaged units drive) [m/s^2]."""
    forces = {name: _force(veh, u, gears[name], v) for name, u in veh.units.items() if engaged[name]}
    return _balance_accel(veh, forces, _road_load(veh, v), _m_eff(veh, gears, engaged))


def _motor_accel(veh: _Vehicle, gears: dict, engaged: dict, v: float) -> float:
    """Acceleration the engaged units' motors give at road speed v, traction limits aside [m/s^2]
    (the model's shift rule compares gears by it)."""
    forces = [_force(veh, u, gears[name], v) for name, u in veh.units.items() if engaged[name]]
    return (sum(forces) - _road_load(veh, v)) / _m_eff(veh, gears, engaged)


# ------------------------------------------------------------------------------------------ the run

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


def _regime_at(veh: _Vehicle, gears: dict, engaged: dict, v: float) -> _Regime:
    """The regime just above speed v (probed `PROBE_REL` ahead, so a run restarted at a switch continues
    in the new regime)."""
    vp = v + PROBE_REL * max(v, 1.0)
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
    for _ in range(MAX_RESTARTS):
        # at a (re)start, an event whose condition already holds fires (e.g. a gear's speed limit that
        # coincides with an envelope corner), and a run that cannot accelerate here has stalled
        if v >= target:
            return "reach", t, v
        for name, fn, _direction in events:
            if fn(v) >= 0.0:
                return name, t, v
        reg = _regime_at(veh, gears, engaged, v)
        if v > 0.0 and _regime_accel(veh, gears, engaged, reg, v)[0] <= 0.0:
            return "stall", t, v

        def rhs(_t, y, reg=reg):
            x = y[0]
            a = _regime_accel(veh, gears, engaged, reg, max(x, 0.0))[0]
            return [0.0 if (x <= 0.0 and a < 0.0) else a]

        fns, names = [], []

        def add(name, fn, direction, fns=fns, names=names):
            def ev(_t, y):
                return fn(y[0])

            ev.terminal, ev.direction = True, direction
            fns.append(ev)
            names.append(name)

        add("reach", lambda x: x - target, 1.0)
        add("stall", lambda x, reg=reg: _regime_accel(veh, gears, engaged, reg, x)[0] if x > 0.0 else 1.0, -1.0)
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

            def slip_margin(x, name=name, reg=reg):
                a, forces = _regime_accel(veh, gears, engaged, reg, x)
                margin = forces[name] - veh.mu * _normal_load(veh, name, a)
                return -margin if name in reg.slipping else margin

            add("regime", slip_margin, 1.0)
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
        t, v = best[1], best[2]
    raise VerificationError("internal error: the re-check's integration changed regime more than "
                            f"{MAX_RESTARTS} times")


def run_time_s(veh: _Vehicle, target: float, t_cap: float) -> float:
    """Time from rest to ``target`` [m/s] by solve_ivp in the time domain (inf if not reached by t_cap) [s].

    Every unit starts in first gear; a unit upshifts where its next gear gives at least as much
    acceleration from the motors, traction limits aside (an event on a_next - a_now) or at its gear's
    speed limit; during its shift time it
    gives no force and its rotor is decoupled (integrated as well); no downshifts.
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
        # the shift: that unit gives no tractive force and its rotor is decoupled for its shift time
        shift_s = units[which].shift_s
        if shift_s > 0.0:
            engaged[which] = False
            what, t_end, v_end = _integrate(veh, gears, engaged, t, v, t + shift_s, target, [])
            engaged[which] = True
            if what == "reach":
                return t_end
            if what == "stall":  # coasting down: the speed after the shift, by the same integration
                what, t_end, v_end = _coast(veh, gears, {**engaged, which: False}, t_end, v_end, t + shift_s)
            t, v = t + shift_s, max(v_end, 0.0)
        gears[which] += 1
    return math.inf


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


# ------------------------------------------------------------------------------------------ speeds, grade

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


# ------------------------------------------------------------------------------------------ the gate

def _design_name(parts: PartTables, key) -> str:
    names = []
    for axle, (m_col, r_col) in AXLE_COLUMNS.items():
        if key[m_col] >= 0:
            unit = f"{parts.motors.part[key[m_col]]} + {parts.reducers.part[key[r_col]]}"
            names.append(f"{axle} {unit}" if parts.two_units else unit)
    return " / ".join(names + [f"tyre {parts.tyres.part[key[TY]]}"])


def _as_key_rows(parts: PartTables, designs) -> tuple[np.ndarray, np.ndarray]:
    """(claimed values, key rows (n, 5)) of `Design` objects or (value, motor, reducer, tyre) tuples."""
    vals, rows = [], []
    for d in designs:
        key = getattr(d, "key", None)
        if key is not None:
            vals.append(d.value)
            rows.append(np.asarray(key, dtype=np.int64))
        else:
            vals.append(d[0])
            rows.append(as_keys(parts, [d[1]], [d[2]], [d[3]])[0])
    return np.asarray(vals, dtype=float), np.stack(rows)


def _close(a: float, b: float, rel: float, abs_tol: float = 0.0) -> bool:
    if math.isinf(a) or math.isinf(b) or math.isnan(a) or math.isnan(b):
        return (a == b) or (math.isnan(a) and math.isnan(b))
    return abs(a - b) <= rel * max(abs(a), abs(b)) + abs_tol


def recheck(parts: PartTables, keys, metrics: dict) -> list[dict]:
    """Independent figures of the designs ``keys`` (n, 5), compared with the evaluator's ``metrics``.

    Returns one dict per design: the re-checked figures (``max_speed_kmh``, ``sustained_top_speed_kmh``,
    ``gradeability_pct``, ``launch_accel_mps2``, ``accel_time_s`` (NaN without accel_to_kmh),
    ``tyre_load_kg``, ``tyre_load_capacity_kg``, ``mass_kg``, ``cost``), ``disagreements`` (messages; empty
    when every figure agrees within its tolerance) and ``borderline`` (the target speed is within
    `BORDERLINE_REL` of the maximum speed, where finite and infinite times are both accepted).
    """
    from selector.physics.tyres import load_capacity_factor

    keys = np.asarray(keys, dtype=np.int64)
    p = parts.problem
    v = p.vehicle
    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    battery_kg = np.nan_to_num(np.asarray(metrics.get("battery_mass_kg", np.zeros(len(keys))), dtype=float))
    battery_cost = np.nan_to_num(np.asarray(metrics.get("battery_cost", np.zeros(len(keys))), dtype=float))
    mass = np.zeros(len(keys))
    cost = np.zeros(len(keys))
    load = np.zeros(len(keys))
    for i, key in enumerate(keys):
        axle_kg = {"rear": v.rear_axle_share * v.mass_kg, "front": (1.0 - v.rear_axle_share) * v.mass_kg}
        c = 0.0
        for axle, (m_col, r_col) in AXLE_COLUMNS.items():
            if key[m_col] >= 0:
                axle_kg[axle] += float(mo.mass_kg[key[m_col]]) + float(re.mass_kg[key[r_col]])
                c += float(mo.cost[key[m_col]]) + float(re.cost[key[r_col]])
        tyres_kg = v.tyre_count * float(ty.mass_kg[key[TY]])
        axle_kg = {a: kg + 0.5 * tyres_kg for a, kg in axle_kg.items()}
        axle_kg["rear"] += v.rear_axle_share * battery_kg[i]
        axle_kg["front"] += (1.0 - v.rear_axle_share) * battery_kg[i]
        mass[i] = axle_kg["rear"] + axle_kg["front"]
        cost[i] = c + v.tyre_count * float(ty.cost[key[TY]]) + battery_cost[i]
        load[i] = max(axle_kg.values()) / (0.5 * v.tyre_count)
    vehicles = _vehicles(parts, keys, mass)
    target = p.requirements.accel_to_kmh
    target_mps = None if target is None else target / 3.6
    out = []
    for i, veh in enumerate(vehicles):
        vmax = top_speed_mps(veh)
        fig = {"max_speed_kmh": vmax * 3.6, "sustained_top_speed_kmh": top_speed_mps(veh, True) * 3.6,
               "launch_accel_mps2": launch_accel_mps2(veh), "mass_kg": mass[i], "cost": cost[i],
               "tyre_load_kg": load[i]}
        theta = grade_angle_rad(veh)
        fig["gradeability_pct"] = 100.0 * math.tan(theta) if math.isfinite(theta) else theta
        fig["tyre_load_capacity_kg"] = float(ty.load_capacity_kg[keys[i, TY]]
                                             * load_capacity_factor(ty.speed_symbol[keys[i, TY]], fig["max_speed_kmh"]))
        borderline = False
        if target_mps is None:
            fig["accel_time_s"] = math.nan
        else:
            t_eng = float(metrics["accel_time_s"][i])
            t_cap = 1e5 if not math.isfinite(t_eng) else 2.0 * t_eng + 10.0
            fig["accel_time_s"] = run_time_s(veh, target_mps, t_cap)
            borderline = abs(target_mps - vmax) <= BORDERLINE_REL * target_mps
        bad = []

        def compare(name, got, want, ok, bad=bad):
            if not ok:
                bad.append(f"{name} = {want!r} from the search's evaluation but {got!r} from the independent "
                           "re-check")

        for name in ("max_speed_kmh", "sustained_top_speed_kmh", "mass_kg", "cost", "tyre_load_kg",
                     "tyre_load_capacity_kg"):
            compare(name, fig[name], float(metrics[name][i]), _close(fig[name], float(metrics[name][i]),
                                                                     SPEED_REL_TOL, 1e-12))
        compare("launch_accel_mps2", fig["launch_accel_mps2"], float(metrics["launch_accel_mps2"][i]),
                _close(fig["launch_accel_mps2"], float(metrics["launch_accel_mps2"][i]), SPEED_REL_TOL, 1e-12))
        g_eng = float(metrics["gradeability_pct"][i])
        th_eng = math.atan(g_eng / 100.0) if math.isfinite(g_eng) else math.copysign(math.inf, g_eng)
        if math.isfinite(theta) and math.isfinite(th_eng):
            compare("gradeability_pct", fig["gradeability_pct"], g_eng, abs(theta - th_eng) <= GRADE_ANGLE_TOL_RAD)
        else:
            # the grade is unbounded on one side: both must be, or both within the tolerance of 90 degrees
            near = abs(abs(theta if math.isfinite(theta) else th_eng) - 0.5 * math.pi) <= 1e-6
            compare("gradeability_pct", fig["gradeability_pct"], g_eng, theta == th_eng or near)
        if target_mps is not None:
            t_eng, t_ode = float(metrics["accel_time_s"][i]), fig["accel_time_s"]
            ok = _close(t_ode, t_eng, TIME_REL_TOL) or (borderline and not (math.isfinite(t_ode)
                                                                             and math.isfinite(t_eng)))
            compare("accel_time_s", t_ode, t_eng, ok)
        out.append({**fig, "disagreements": bad, "borderline": borderline})
    return out


def _recheck_passes(parts: PartTables, fig: dict, metrics: dict, i: int, objective: str) -> list[str]:
    """Requirements and checks that fail on the re-checked figures (within each figure's tolerance)."""
    tol = {"accel_time_s": TIME_REL_TOL}
    failed = []
    for r, required in stated(parts.problem):
        got = fig.get(r.metric, float(metrics[r.metric][i]))
        slack = max(REL_TOL, tol.get(r.metric, SPEED_REL_TOL)) * abs(required)
        if r.metric == "gradeability_pct" and math.isfinite(got):
            slack = max(slack, 100.0 * GRADE_ANGLE_TOL_RAD * (1.0 + (got / 100.0) ** 2))
        ok = got >= required - slack if r.sense == "min" else got <= required + slack
        if not ok:
            failed.append(f"{r.name}: re-checked {got!r}, required {r.sense} {required!r}")
    rating = float(metrics["tyre_speed_rating_kmh"][i])
    if fig["max_speed_kmh"] > rating * (1.0 + max(REL_TOL, SPEED_REL_TOL)):
        failed.append(f"tyre_speed_kmh: re-checked maximum speed {fig['max_speed_kmh']!r} km/h above {rating!r}")
    if fig["tyre_load_kg"] > fig["tyre_load_capacity_kg"] * (1.0 + max(REL_TOL, SPEED_REL_TOL)):
        failed.append(f"tyre_load_kg: re-checked load {fig['tyre_load_kg']!r} kg above the capacity "
                      f"{fig['tyre_load_capacity_kg']!r} kg")
    if objective == "accel_time" and not math.isfinite(fig["accel_time_s"]) and not fig["borderline"]:
        failed.append("accel_to_kmh: never reached on the re-check (the accel_time objective needs a finite time)")
    return failed


def verify_designs(parts: PartTables, designs, objective: str, expect_feasible: bool = True) -> dict:
    """Metrics of ``designs`` (`Design` objects or (value, motor, reducer, tyre)), re-checked.

    Returns the evaluator's metrics dict (arrays aligned with ``designs``). Raises `VerificationError`
    when the independent re-check disagrees with the evaluator on any figure, and, with
    ``expect_feasible``, when a design fails a requirement or check (on either computation) or its
    objective value differs from the claimed one.
    """
    if not designs:
        return {}
    claimed, keys = _as_key_rows(parts, designs)
    metrics = evaluate(parts, keys)
    problems = []
    if expect_feasible:
        for name, ok in check_results(parts, metrics).items():
            for b in np.nonzero(~ok)[0]:
                problems.append((b, f"fails {name} on the exact evaluation"))
        vals = np.asarray(metrics[OBJECTIVE_METRIC[objective]], dtype=float)
        for b in range(len(keys)):
            if not _close(float(vals[b]), float(claimed[b]), REL_TOL):
                problems.append((b, f"objective {objective} = {claimed[b]!r} from the search but {vals[b]!r} "
                                    "on the exact evaluation"))
    figs = recheck(parts, keys, metrics)
    for b, fig in enumerate(figs):
        problems += [(b, msg) for msg in fig["disagreements"]]
        if expect_feasible:
            problems += [(b, msg) for msg in _recheck_passes(parts, fig, metrics, b, objective)]
    if parts.problem.energy is not None:
        from selector.engine.verify_energy import energy_disagreements

        problems += energy_disagreements(parts, keys, metrics)
    if problems:
        b, msg = problems[0]
        more = f" (and {len(problems) - 1} more disagreement(s))" if len(problems) > 1 else ""
        raise VerificationError(
            f"internal error: the independent re-check rejects design {_design_name(parts, keys[b])}: {msg}{more}. "
            "This is a bug in selector, not in your input; please report it with the problem file and catalogues.")
    return metrics


def design_keys(parts: PartTables, designs) -> np.ndarray:
    """Key rows (n, 5) of designs given as `Design` objects or single-axle (value, i, j, k) sequences."""
    rows = []
    for d in designs:
        key = getattr(d, "key", None)
        rows.append(key if key is not None else parts.single_keys(d[1], d[2], d[3])[0])
    return np.asarray(rows, dtype=np.int64).reshape(-1, 5)


def _name(parts: PartTables, key) -> str:
    names = [f"{parts.motors.part[key[m]]}/{parts.reducers.part[key[r]]}" for m, r in AXLE_COLUMNS.values()
             if key[m] >= 0]
    return "/".join(names + [str(parts.tyres.part[key[TY]])])
