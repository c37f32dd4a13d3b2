"""Exact, vectorised evaluation of designs, and exhaustive enumeration over whole catalogues.

This is the single place where a design's performance and feasibility are decided. The search,
the brute-force oracle, the bounds' callers and the reports all call it; the independent re-check
(`verify.py`) recomputes the same quantities another way.

Designs are key rows (see `selector.engine.parts`): (front motor, front reducer, rear motor, rear
reducer, tyre), -1 for an empty slot. For single-axle callers every function also accepts the
(motor, reducer, tyre) index arrays of the driven axle.
"""

from __future__ import annotations

import numpy as np

from selector.design import Design
from selector.engine.parts import AXLE_COLUMNS, TY, PartTables
from selector.physics import accel_run, climb, speeds
from selector.physics.tyres import load_capacity_factor
from selector.requirements import REL_TOL, check_rows, passes, stated
from selector.units import kmh_to_mps, mps_to_kmh, rad_s_to_rpm

COARSE_FIRST = 256
"""`screen` bounds the time of more designs than this on `COARSE_NODES` speed nodes first [-]."""
COARSE_NODES = 12
"""Speed nodes of the coarse time bound (a left Riemann sum on any partition is a proved bound) [-]."""

OBJECTIVE_METRIC = {"cost": "cost", "mass": "mass_kg", "accel_time": "accel_time_s", "energy": "energy_wh_per_km"}
"""Metric minimised by each objective."""


def as_keys(parts: PartTables, keys, rj=None, tk=None) -> np.ndarray:
    """Key rows (n, 5) from key rows, or from single-axle (motor, reducer, tyre) index arrays."""
    if rj is not None or tk is not None:
        return parts.single_keys(np.asarray(keys, dtype=np.int64), np.asarray(rj, dtype=np.int64),
                                 np.asarray(tk, dtype=np.int64))
    keys = np.asarray(keys, dtype=np.int64)
    if keys.ndim == 1:
        keys = keys[None, :]
    return keys


def _unit_ratings(parts: PartTables, keys, out: dict):
    """Reducer-rating metrics (demand and rating) per unit, keyed as `requirements.check_rows` reads them."""
    mo, re = parts.motors, parts.reducers
    two = parts.two_units
    for axle in parts.axles:
        m_col, r_col = AXLE_COLUMNS[axle]
        mi, rj = np.maximum(keys[:, m_col], 0), np.maximum(keys[:, r_col], 0)
        on = keys[:, m_col] >= 0
        sfx = f"@{axle}" if two else ""
        # an empty slot demands nothing of a rating it does not have
        out["motor_peak_torque_nm" + sfx] = np.where(on, mo.torque_nm[mi], 0.0)
        out["motor_max_speed_rpm" + sfx] = np.where(on, rad_s_to_rpm(mo.max_speed_rad_s[mi]), 0.0)
        out["reducer_max_torque_nm" + sfx] = np.where(on, re.max_torque_nm[rj], 1.0)
        out["reducer_max_speed_rpm" + sfx] = np.where(on, rad_s_to_rpm(re.max_speed_rad_s[rj]), 1.0)


def tyre_load_demand_kg(parts: PartTables, keys, extra_kg=None) -> np.ndarray:
    """Each tyre's share of the heavier static axle load [kg] (``extra_kg``: a battery, see `parts`)."""
    rear, front = parts.axle_masses_kg(keys, extra_kg)
    return np.maximum(rear, front) / (0.5 * parts.problem.vehicle.tyre_count)


def tyre_capacity_kg(parts: PartTables, keys, max_speed_kmh) -> np.ndarray:
    """Load capacity per tyre at the vehicle's maximum speed (UN R30 reduction above 210 km/h) [kg]."""
    tk = np.asarray(keys)[:, TY]
    return parts.tyres.load_capacity_kg[tk] * load_capacity_factor(parts.tyres.speed_symbol[tk], max_speed_kmh)


def evaluate(parts: PartTables, keys, rj=None, tk=None, accel: bool = True, shifts: bool = False) -> dict:
    """All metrics of the designs ``keys`` (or single-axle index arrays ``keys, rj, tk``).

    Returns a dict of arrays: mass_kg, cost, lead_time_weeks, max_speed_kmh,
    sustained_top_speed_kmh, gradeability_pct, launch_accel_mps2, accel_time_s (NaN when the problem
    has no accel_to_kmh or ``accel`` is False), tyre_load_kg and tyre_load_capacity_kg, the
    reducer ratings and demands, rear_axle_share, effective_mass_kg (first gears),
    gear_over_radius_1_m (first gear of the driven unit; single-axle studies). With ``shifts`` the
    acceleration run's shifts are added (``run``: `selector.physics.accel_run.RunResult`).
    """
    keys = as_keys(parts, keys, rj, tk)
    p = parts.problem
    energy = None
    battery_kg = None
    if p.energy is not None:
        from selector.engine import energy as E

        energy = E.energy_metrics(parts, keys, parts.mass_kg(keys))
        battery_kg = np.nan_to_num(energy["battery_mass_kg"])
        axles, body = parts.design(keys, mass_kg=parts.mass_kg(keys) + battery_kg)
    else:
        axles, body = parts.design(keys)
    max_kmh = mps_to_kmh(speeds.max_speed_mps(axles, body))
    cost = parts.cost(keys)
    if energy is not None:
        cost = cost + np.nan_to_num(energy["battery_cost"])
    out = {
        "mass_kg": body.mass_kg,
        "cost": cost,
        "lead_time_weeks": parts.lead_time_weeks(keys),
        "max_speed_kmh": max_kmh,
        "sustained_top_speed_kmh": mps_to_kmh(speeds.sustained_top_speed_mps(axles, body)),
        "gradeability_pct": climb.gradeability_pct(axles, body),
        "launch_accel_mps2": climb.launch_accel_mps2(axles, body),
        "tyre_load_kg": tyre_load_demand_kg(parts, keys, battery_kg),
        "tyre_speed_rating_kmh": parts.tyres.speed_rating_kmh[keys[:, TY]],
        "tyre_load_capacity_kg": tyre_capacity_kg(parts, keys, max_kmh),
        "rear_axle_share": body.rear_share,
    }
    _unit_ratings(parts, keys, out)
    if energy is not None:
        out.update(energy)
    from selector.physics.drivetrain import gear_over_radius, state_effective_mass_kg

    z = np.zeros(keys.shape[0], dtype=np.int64)
    out["effective_mass_kg"] = state_effective_mass_kg(axles, body.mass_kg, body.wheel_inertia_total_kgm2, z, z)
    driven = axles.rear if parts.axles[-1] == "rear" else axles.front
    out["gear_over_radius_1_m"] = gear_over_radius(driven.gear(0)[0], axles.radius_m)
    target = p.requirements.accel_to_kmh
    if accel and target is not None:
        run = accel_run.accel_run(axles, body, kmh_to_mps(target))
        out["accel_time_s"] = run.time_s
        if shifts:
            out["run"] = run
    else:
        out["accel_time_s"] = np.full(keys.shape[0], np.nan)
    return out


def check_results(parts: PartTables, metrics: dict) -> dict[str, np.ndarray]:
    """Pass/fail of every stated requirement and every part-rating check (name -> bool array).

    Per-axle checks of a two-unit study are combined: a check passes when it passes on every unit.
    """
    res = {}
    for r, required in stated(parts.problem):
        res[r.name] = passes(r.sense, required, metrics[r.metric])
    for c, _axle, limit, demand in check_rows(parts.axles, parts.problem.energy is not None):
        ok = passes(c.sense, metrics[limit], metrics[demand])
        res[c.name] = res[c.name] & ok if c.name in res else ok
    return res


def feasible(parts: PartTables, metrics: dict, objective: str | None = None) -> np.ndarray:
    """The one definition of a feasible design: every stated requirement and every part-rating
    check passes, and (given an objective) its objective value is finite: under the accel_time
    objective a design that never reaches accel_to_kmh is infeasible."""
    ok = np.ones(len(metrics["mass_kg"]), dtype=bool)
    for v in check_results(parts, metrics).values():
        ok &= v
    if objective is not None:
        ok &= np.isfinite(metrics[OBJECTIVE_METRIC[objective]])
    return ok


def screen(parts: PartTables, keys, rj=None, tk=None, objective: str = "cost", need_accel: bool | None = None,
           accel_cutoff: float | None = None, keep_best: int | None = None):
    """Feasibility and objective of many designs, computing expensive metrics only for survivors.

    Same decisions as `evaluate` + `feasible`, staged: mass, cost, ratings and the static tyre
    load first (`_cheap_checks`), then speeds, grade, launch and the speed-dependent tyre checks,
    then the acceleration run (`_accel_stage`: proved time brackets first, see there). With the
    accel_time objective, ``accel_cutoff`` [s] drops designs whose lower bound exceeds it (they
    cannot improve on a known design; reported as not feasible here). With ``keep_best`` = N, a
    design that cannot be among the N best of this call is not integrated (reported as not feasible
    here): under cost and mass, one still undecided on ``accel_time_s`` whose objective exceeds the
    N-th best design already proved feasible in this call (beyond the tie tolerance); under
    accel_time, one whose proved lower time bound exceeds the N-th least proved upper bound of the
    designs proved feasible in this call (beyond the tie tolerance).
    Returns (feasible[n], objective[n]) with the objective +inf where infeasible.
    """
    keys = as_keys(parts, keys, rj, tk)
    p = parts.problem
    req = p.requirements
    obj = np.full(keys.shape[0], np.inf)
    ok = _cheap_checks(parts, keys)
    sel = np.nonzero(ok)[0]
    if sel.size and p.energy is not None and req.top_speed_kmh is not None:
        # the battery only adds mass, and the sustained top speed falls with mass: a design that
        # misses it without the battery misses it with one (spares the energy evaluation)
        axles, body = parts.design(keys[sel])
        keep = passes("min", req.top_speed_kmh, mps_to_kmh(speeds.sustained_top_speed_mps(axles, body)))
        ok[sel[~keep]] = False
        sel = sel[keep]
    if need_accel is None:
        need_accel = req.accel_time_s is not None or objective == "accel_time"
    bracket = None
    if sel.size and need_accel and p.energy is None:
        # the proved time bracket before the speeds: designs whose lower bound already fails the time
        # limit (or the cutoff) are out without the top-speed evaluation (the mass needs no battery here)
        target = kmh_to_mps(req.accel_to_kmh)
        if sel.size > COARSE_FIRST:  # a coarse partition first (also a proved bound), the fine one for the rest
            axles, body = parts.design(keys[sel])
            lo, _ = accel_run.time_bracket(axles, body, target, nodes=COARSE_NODES)
            keep = ~_time_out(lo, req.accel_time_s, objective, accel_cutoff)
            ok[sel[~keep]] = False
            sel = sel[keep]
        axles, body = parts.design(keys[sel])
        lo, hi = accel_run.time_bracket(axles, body, target)
        keep = ~_time_out(lo, req.accel_time_s, objective, accel_cutoff)
        ok[sel[~keep]] = False
        sel, bracket = sel[keep], (lo[keep], hi[keep])
    if sel.size == 0:
        return ok, obj
    m = evaluate(parts, keys[sel], accel=False)
    sub_ok = np.ones(sel.size, dtype=bool)
    for name, v in check_results(parts, m).items():
        if name != "accel_time_s":
            sub_ok &= v
    if need_accel:
        m["accel_time_s"] = _accel_stage(parts, keys[sel], m, sub_ok, objective, accel_cutoff, keep_best, bracket)
        if req.accel_time_s is not None:
            sub_ok &= passes("max", req.accel_time_s, m["accel_time_s"])
    val = m[OBJECTIVE_METRIC[objective]]
    sub_ok &= np.isfinite(val)
    ok[sel] = sub_ok
    obj[sel] = np.where(sub_ok, val, np.inf)
    return ok, obj


def _cheap_checks(parts: PartTables, keys) -> np.ndarray:
    """Necessary checks that need no physics: per-axle reducer ratings, mass, budget and the static
    tyre load against the load index's full capacity (an upper bound of the speed-reduced one)."""
    req = parts.problem.requirements
    cheap: dict = {}
    _unit_ratings(parts, keys, cheap)
    ok = np.ones(keys.shape[0], dtype=bool)
    for c, _axle, limit, demand in check_rows(parts.axles):
        if c.per_axle:
            ok &= passes("max", cheap[limit], cheap[demand])
    if req.max_mass_kg is not None:
        ok &= passes("max", req.max_mass_kg, parts.mass_kg(keys))
    if req.budget is not None:
        ok &= passes("max", req.budget, parts.cost(keys))
    ok &= passes("max", parts.tyres.load_capacity_kg[keys[:, TY]], tyre_load_demand_kg(parts, keys))
    return ok


def _time_out(lo, limit, objective: str, accel_cutoff) -> np.ndarray:
    """Designs whose proved lower time bound ``lo`` [s] settles them without the exact run: the target
    is unreachable while a time is needed (a stated ``limit`` or the accel_time objective), the bound
    fails ``limit`` [s], or under the accel_time objective it exceeds ``accel_cutoff`` [s]."""
    tol = 1 + 2 * REL_TOL
    out = np.zeros(np.shape(lo), dtype=bool)
    if limit is not None or objective == "accel_time":
        out |= ~np.isfinite(lo)
    if limit is not None:
        out |= ~(lo <= limit * tol)
    if objective == "accel_time" and accel_cutoff is not None:
        out |= ~(lo <= accel_cutoff * tol)
    return out


def _accel_stage(parts: PartTables, keys, m: dict, sub_ok, objective: str, accel_cutoff, keep_best,
                 bracket=None) -> np.ndarray:
    """Acceleration times of the designs ``keys`` that passed every other check (``sub_ok``) [s].

    Every design first gets a proved bracket of its time (`accel_run.time_bracket`; designs with a
    gearbox a lower bound only): one whose lower bound already fails ``accel_time_s`` (or, under the
    accel_time objective, exceeds ``accel_cutoff``) gets inf without the exact run; one whose upper
    bound meets ``accel_time_s`` gets that upper bound (feasible, its time is not the objective); the
    rest are integrated exactly (with ``keep_best``, only those that can still be among the N best).
    Designs not integrated carry inf or their proved upper bound. ``bracket``: (lo, hi) of every row
    of ``keys`` when the caller has it already.
    """
    req = parts.problem.requirements
    t = np.full(keys.shape[0], np.inf)
    idx = np.nonzero(sub_ok)[0]
    if idx.size == 0:
        return t
    mass = None if parts.problem.energy is None else m["mass_kg"][idx]
    axles, body = parts.design(keys[idx], mass_kg=mass)
    target = kmh_to_mps(req.accel_to_kmh)
    if bracket is None:
        lo, hi = accel_run.time_bracket(axles, body, target)
    else:
        lo, hi = bracket[0][idx], bracket[1][idx]
    exact = np.isfinite(lo)
    limit = req.accel_time_s
    exact &= ~_time_out(lo, limit, objective, accel_cutoff)
    if objective != "accel_time" and limit is not None:
        sure = exact & (hi <= limit)
        t[idx[sure]] = hi[sure]  # an upper bound that meets the limit: feasible, no exact time needed
        exact &= ~sure
        if keep_best is not None and objective in ("cost", "mass") and int(sure.sum()) >= keep_best:
            vals = m[OBJECTIVE_METRIC[objective]][idx]
            cut = float(np.partition(vals[sure], keep_best - 1)[keep_best - 1])
            exact &= ~(vals > cut + tie_tolerance(cut))
    if objective == "accel_time" and keep_best is not None:
        # the keep_best-th least proved upper bound among designs proved feasible (every other check
        # passed, upper bound within accel_time_s): a design whose lower bound exceeds it beyond the
        # tie tolerance is not among the keep_best fastest
        proved = exact & np.isfinite(hi) & (True if limit is None else hi <= limit)
        if int(proved.sum()) >= keep_best:
            cut = float(np.partition(hi[proved], keep_best - 1)[keep_best - 1])
            exact &= ~(lo > cut * (1 + 2 * REL_TOL))
    rows = np.nonzero(exact)[0]
    if rows.size:
        from selector.physics.drivetrain import take_axles, take_fields

        t[idx[rows]] = accel_run.accel_time_s(take_axles(axles, rows), take_fields(body, rows), target)
    return t


def tie_tolerance(best: float) -> float:
    """Objective values within this of the best count as tied (1e-9 relative)."""
    return REL_TOL * max(abs(best), 1e-300)


def _lex(keys: np.ndarray, first=None):
    cols = [keys[:, c] for c in range(keys.shape[1] - 1, -1, -1)]
    return np.lexsort(tuple(cols) + (() if first is None else (first,)))


def order_best(obj: np.ndarray, keys: np.ndarray, count: int) -> np.ndarray:
    """Positions of the ``count`` best finite entries, best first, ties broken by ``keys``.

    ``keys`` is an (n, k) integer array of part positions (part-id order). Values within
    `tie_tolerance` of the current best are tied and the lexicographically smallest key wins.
    """
    keys = np.asarray(keys)
    finite = np.nonzero(np.isfinite(obj))[0]
    if finite.size == 0 or count <= 0:
        return np.empty(0, dtype=np.int64)
    cand = finite[_lex(keys[finite], obj[finite])]
    chosen = []
    remaining = cand
    while remaining.size and len(chosen) < count:
        best = obj[remaining[0]]
        tied = remaining[obj[remaining] <= best + tie_tolerance(best)]
        pick = tied[_lex(keys[tied])[0]]
        chosen.append(pick)
        remaining = remaining[remaining != pick]
    return np.asarray(chosen, dtype=np.int64)


def designs_of(vals: np.ndarray, keys: np.ndarray, positions) -> list[Design]:
    """`Design` objects of the given positions of (values, key rows)."""
    return [Design.of(vals[b], keys[b]) for b in positions]


# ------------------------------------------------------------------------------------------ enumeration

def unit_options(parts: PartTables, axle: str, motors=None, reducers=None) -> np.ndarray:
    """(motor, reducer) pairs allowed on ``axle``, in part-id order: array (k, 2)."""
    n_m, n_r, _ = parts.sizes
    mi = np.arange(n_m) if motors is None else np.asarray(motors, dtype=np.int64)
    rj = np.arange(n_r) if reducers is None else np.asarray(reducers, dtype=np.int64)
    allowed = parts.axle_motors.get(axle)
    if allowed is not None:
        mi = mi[np.isin(mi, allowed)]
    mm, rr = np.meshgrid(mi, rj, indexing="ij")
    return np.stack([mm.ravel(), rr.ravel()], axis=1)


def slice_keys(parts: PartTables, motor: int, reducers=None, tyres=None, axle: str | None = None,
               other: np.ndarray | None = None) -> np.ndarray:
    """Key rows of every (reducer, tyre) for one motor on ``axle`` (default: the driven axle), in
    part-id order; ``other`` (k, 2) adds each (motor, reducer) option on the other axle (two-unit studies)."""
    n_m, n_r, n_t = parts.sizes
    axle = axle or parts.axles[-1]
    rj = np.arange(n_r) if reducers is None else np.asarray(reducers, dtype=np.int64)
    tk = np.arange(n_t) if tyres is None else np.asarray(tyres, dtype=np.int64)
    m_col, r_col = AXLE_COLUMNS[axle]
    if other is None:
        rr, tt = np.meshgrid(rj, tk, indexing="ij")
        keys = np.full((rr.size, 5), -1, dtype=np.int64)
        keys[:, m_col], keys[:, r_col], keys[:, TY] = motor, rr.ravel(), tt.ravel()
        return keys
    o_m, o_r = AXLE_COLUMNS["rear" if axle == "front" else "front"]
    other = np.asarray(other, dtype=np.int64).reshape(-1, 2)
    ri, oi, ti = np.meshgrid(np.arange(rj.size), np.arange(other.shape[0]), np.arange(tk.size), indexing="ij")
    keys = np.full((ri.size, 5), -1, dtype=np.int64)
    keys[:, m_col], keys[:, r_col] = motor, rj[ri.ravel()]
    keys[:, o_m], keys[:, o_r] = other[oi.ravel(), 0], other[oi.ravel(), 1]
    keys[:, TY] = tk[ti.ravel()]
    return keys


def slice_indices(parts: PartTables, motor: int, reducers=None, tyres=None):
    """Single-axle (motor, reducer, tyre) index arrays of one motor's slice, in (reducer, tyre) order."""
    n_m, n_r, n_t = parts.sizes
    rj = np.arange(n_r) if reducers is None else np.asarray(reducers, dtype=np.int64)
    tk = np.arange(n_t) if tyres is None else np.asarray(tyres, dtype=np.int64)
    rr, tt = np.meshgrid(rj, tk, indexing="ij")
    return np.full(rr.size, motor, dtype=np.int64), rr.ravel(), tt.ravel()


def enumerate_designs(parts: PartTables, objective: str, count: int = 1, motors=None, reducers=None, tyres=None,
                      progress=None) -> list[Design]:
    """Exhaustive search: the ``count`` best feasible designs over the given parts (default all).

    Every design of the study's layout is evaluated exactly: single-axle studies every (motor,
    reducer, tyre); two-unit studies every (front unit, rear unit, tyre) allowed by [drive]
    (``same_unit``: the same motor and reducer on both axles). Returns `Design` objects, best first,
    ties broken by part-id order. ``progress`` is an optional callable taking the number of motors done.
    """
    n_m, _, _ = parts.sizes
    motors = range(n_m) if motors is None else motors
    pool_obj, pool_keys = [], []
    same = parts.two_units and parts.problem.drive.same_unit
    rear_options = None
    if parts.two_units and not same:
        rear_options = unit_options(parts, "rear", motors, reducers)
    for done, i in enumerate(motors, 1):
        if not parts.two_units:
            keys = slice_keys(parts, int(i), reducers, tyres)
        elif same:
            keys = slice_keys(parts, int(i), reducers, tyres, axle="front")
            keys[:, 2], keys[:, 3] = keys[:, 0], keys[:, 1]
            keys = keys[_axle_allowed(parts, keys)]
        else:
            keys = slice_keys(parts, int(i), reducers, tyres, axle="front", other=rear_options)
            keys = keys[_axle_allowed(parts, keys)]
        if keys.shape[0]:
            ok, obj = screen(parts, keys, objective=objective)
            if ok.any():
                k, vals = keys[ok], obj[ok]
                best = order_best(vals, k, count)
                pool_obj.append(vals[best])
                pool_keys.append(k[best])
        if progress is not None:
            progress(done)
    if not pool_obj:
        return []
    vals = np.concatenate(pool_obj)
    keys = np.concatenate(pool_keys)
    return designs_of(vals, keys, order_best(vals, keys, count))


def _axle_allowed(parts: PartTables, keys) -> np.ndarray:
    """True where each unit's motor is allowed on its axle ([drive] front_motors / rear_motors)."""
    ok = np.ones(keys.shape[0], dtype=bool)
    for axle in ("front", "rear"):
        allowed = parts.axle_motors.get(axle)
        if allowed is not None:
            m_col, _ = AXLE_COLUMNS[axle]
            ok &= np.isin(keys[:, m_col], allowed) | (keys[:, m_col] < 0)
    return ok
