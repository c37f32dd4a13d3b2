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

import numpy as np

from selector.engine.evaluate import OBJECTIVE_METRIC, as_keys, check_results, evaluate
from selector.engine.parts import AXLE_COLUMNS, TY, PartTables
from selector.engine.verify_run import (  # noqa: F401  (re-exported: the run's tolerances and entry)
    LIMIT_EARLY_REL,
    MAX_RESTARTS,
    ODE_ATOL,
    ODE_RTOL,
    PROBE_REL,
    SHIFT_TIE,
    run_time_s,
)
from selector.engine.verify_speeds import GRADE_SCAN, grade_angle_rad, launch_accel_mps2, top_speed_mps  # noqa: F401
from selector.engine.verify_vehicle import MAX_CUT_REL, VerificationError, _Unit, _Vehicle, _vehicles  # noqa: F401
from selector.requirements import REL_TOL, stated

TIME_REL_TOL = 1e-6
"""Acceleration times agree when they differ by at most this fraction [-] (both integrators are far
more accurate; measured agreement is stated in DEVELOPERS.md)."""
TIME_ABS_TOL_S = 1e-9
"""... or by at most this [s]: the time-domain re-check resolves the speed to its absolute tolerance
(`verify_run.ODE_ATOL`, 1e-12 m/s), which is below 1e-9 s of time at any acceleration above 1e-3 m/s^2;
without this floor a target speed of a few 1e-100 km/h gives 1e-105 s against 0.0."""
SPEED_REL_TOL = 1e-9
"""Maximum and sustained top speed, launch acceleration, tyre capacity, mass and cost agree within this [-]."""
GRADE_ANGLE_TOL_RAD = 1e-9
"""Gradeabilities agree when their grade angles differ by at most this [rad]."""
BORDERLINE_REL = 1e-6
"""A target speed within this fraction of the re-checked maximum speed is borderline: an infinite time
on one side and a finite one on the other are both accepted there (the time is unbounded at the top
speed) [-]."""


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


def _catalogue_figures(parts: PartTables, keys: np.ndarray, metrics: dict) -> list[dict]:
    """Per design from the catalogue rows: ``mass_kg``, ``cost`` and ``tyre_load_kg`` (the heavier axle's
    static load per tyre) [kg], [currency], [kg]; the battery is the evaluator's (not re-checked)."""
    v = parts.problem.vehicle
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
    return [{"mass_kg": mass[i], "cost": cost[i], "tyre_load_kg": load[i]} for i in range(len(keys))]


def _figures(parts: PartTables, veh: _Vehicle, key: np.ndarray, row: dict, t_eng: float | None,
             target_mps: float | None) -> tuple[dict, float, bool]:
    """Re-checked figures of one design (``row``: its catalogue figures; ``t_eng``: the evaluator's time
    [s], sets the integration's cap), its grade angle [rad] and whether the target speed [m/s] is
    borderline."""
    from selector.physics.tyres import load_capacity_factor

    ty = parts.tyres
    vmax = top_speed_mps(veh)
    fig = {"max_speed_kmh": vmax * 3.6, "sustained_top_speed_kmh": top_speed_mps(veh, True) * 3.6,
           "launch_accel_mps2": launch_accel_mps2(veh), **row}
    theta = grade_angle_rad(veh)
    fig["gradeability_pct"] = 100.0 * math.tan(theta) if math.isfinite(theta) else theta
    fig["tyre_load_capacity_kg"] = float(ty.load_capacity_kg[key[TY]]
                                         * load_capacity_factor(ty.speed_symbol[key[TY]], fig["max_speed_kmh"]))
    borderline = False
    if target_mps is None:
        fig["accel_time_s"] = math.nan
    else:
        t_cap = 1e5 if not math.isfinite(t_eng) else 2.0 * t_eng + 10.0
        fig["accel_time_s"] = run_time_s(veh, target_mps, t_cap)
        borderline = abs(target_mps - vmax) <= BORDERLINE_REL * target_mps
    return fig, theta, borderline


def _disagreements(fig: dict, theta: float, metrics: dict, i: int, timed: bool, borderline: bool) -> list[str]:
    """Messages for the figures of design ``i`` where the re-check and the evaluator disagree beyond the
    tolerances (``timed``: the acceleration time is compared too)."""
    bad = []

    def compare(name, got, want, ok):
        if not ok:
            bad.append(f"{name} = {want!r} from the search's evaluation but {got!r} from the independent "
                       "re-check")

    for name in ("max_speed_kmh", "sustained_top_speed_kmh", "mass_kg", "cost", "tyre_load_kg",
                 "tyre_load_capacity_kg", "launch_accel_mps2"):
        compare(name, fig[name], float(metrics[name][i]), _close(fig[name], float(metrics[name][i]),
                                                                 SPEED_REL_TOL, 1e-12))
    g_eng = float(metrics["gradeability_pct"][i])
    th_eng = math.atan(g_eng / 100.0) if math.isfinite(g_eng) else math.copysign(math.inf, g_eng)
    if math.isfinite(theta) and math.isfinite(th_eng):
        compare("gradeability_pct", fig["gradeability_pct"], g_eng, abs(theta - th_eng) <= GRADE_ANGLE_TOL_RAD)
    else:
        # the grade is unbounded on one side: both must be, or both within the tolerance of 90 degrees
        near = abs(abs(theta if math.isfinite(theta) else th_eng) - 0.5 * math.pi) <= 1e-6
        compare("gradeability_pct", fig["gradeability_pct"], g_eng, theta == th_eng or near)
    if timed:
        t_eng, t_ode = float(metrics["accel_time_s"][i]), fig["accel_time_s"]
        ok = _close(t_ode, t_eng, TIME_REL_TOL, TIME_ABS_TOL_S) or (borderline and not (math.isfinite(t_ode)
                                                                         and math.isfinite(t_eng)))
        compare("accel_time_s", t_ode, t_eng, ok)
    return bad


def recheck(parts: PartTables, keys, metrics: dict) -> list[dict]:
    """Independent figures of the designs ``keys`` (n, 5), compared with the evaluator's ``metrics``.

    Returns one dict per design: the re-checked figures (``max_speed_kmh``, ``sustained_top_speed_kmh``,
    ``gradeability_pct``, ``launch_accel_mps2``, ``accel_time_s`` (NaN without accel_to_kmh),
    ``tyre_load_kg``, ``tyre_load_capacity_kg``, ``mass_kg``, ``cost``), ``disagreements`` (messages; empty
    when every figure agrees within its tolerance) and ``borderline`` (the target speed is within
    `BORDERLINE_REL` of the maximum speed, where finite and infinite times are both accepted).
    """
    keys = np.asarray(keys, dtype=np.int64)
    rows = _catalogue_figures(parts, keys, metrics)
    vehicles = _vehicles(parts, keys, np.array([r["mass_kg"] for r in rows]))
    target = parts.problem.requirements.accel_to_kmh
    target_mps = None if target is None else target / 3.6
    out = []
    for i, veh in enumerate(vehicles):
        t_eng = None if target_mps is None else float(metrics["accel_time_s"][i])
        fig, theta, borderline = _figures(parts, veh, keys[i], rows[i], t_eng, target_mps)
        bad = _disagreements(fig, theta, metrics, i, target_mps is not None, borderline)
        out.append({**fig, "disagreements": bad, "borderline": borderline})
    return out


def _recheck_passes(parts: PartTables, fig: dict, metrics: dict, i: int, objective: str) -> list[str]:
    """Requirements and checks that fail on the re-checked figures (within each figure's tolerance)."""
    tol = {"accel_time_s": TIME_REL_TOL}
    failed = []
    for r, required in stated(parts.problem):
        got = fig.get(r.metric, float(metrics[r.metric][i]))
        slack = max(REL_TOL, tol.get(r.metric, SPEED_REL_TOL)) * abs(required)
        if r.metric == "accel_time_s":
            slack += TIME_ABS_TOL_S
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
