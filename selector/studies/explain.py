"""Explain a study: what binds, what each requirement costs, near misses, and why there is no answer.

Everything here is built on the exact search (`engine.search`) with overridden requirements and
on the exact evaluator (`evaluate.evaluate`); every design shown is re-checked by
`verify.verify_designs` (through `api.records`).

Feasible study
    For the optimum, each stated requirement gets its margin, ``binding`` (margin-based, as in
    `solve`: margin_pct <= `report.BINDING_MARGIN_PCT`) and ``active`` (re-solve definition:
    dropping the requirement changes the optimal design, or improves the objective by more than
    1e-9 relative). The *price* of a requirement is the objective saved when it is dropped and when
    it is loosened by a step ("min" requirements x (1 - step), "max" requirements x (1 + step)).
    A *near miss* is the optimum of the study with one requirement loosened by a small margin,
    when it beats the optimum: it misses only that requirement, by at most the margin.

Infeasible study
    (a) vehicle-level impossibilities that no part can fix (speed limiter, traction limit);
    (b) minimal conflicting sets of requirements (singles, pairs, triples; part ratings always
    enforced); (c) the closest design: an exact elastic search over the whole catalogue that
    minimises the sum of normalised shortfalls max(0, -margin_fraction), part-rating checks hard,
    and the relaxed requirement values that make it feasible, confirmed by a re-solve.

Re-solves are skipped where their answer follows exactly from one already made: if the optimum
with a requirement loosened to level A satisfies a tighter level B, it is also the optimum at B
(the feasible set at B lies inside the one at A and contains it; ties break the same way).
"""

from __future__ import annotations

import dataclasses
import itertools
import math
import sys
import time
from dataclasses import dataclass

import numpy as np

from selector.api import OBJECTIVE_UNITS as UNITS
from selector.api import Study, header, objective_dict, records
from selector.engine.bounds import max_driven_share, traction_tan_bound
from selector.engine.evaluate import (
    OBJECTIVE_METRIC,
    evaluate,
    feasible,
    order_best,
    slice_indices,
    tie_tolerance,
)
from selector.engine.parts import PartTables
from selector.engine.search import (
    STATUS_INFEASIBLE,
    STATUS_OPTIMAL,
    SearchResult,
    search,
)
from selector.engine.verify import verify_designs
from selector.inputs import Requirements
from selector.io.catalog import distinct_numbers
from selector.physics import accel_run
from selector.physics import performance as perf
from selector.records import BINDING_RULE, clean, design_record
from selector.requirements import (
    BY_NAME,
    CHECK_LIMIT_METRIC,
    CHECKS,
    REL_TOL,
    margin_fraction,
    passes,
    stated,
)
from selector.studies.defaults import NEAR_MISS_PCT, STEP_PCT
from selector.units import G_N, kmh_to_mps, mps_to_kmh

INF_SHORTFALL = 1e6
"""Normalised shortfall counted for an infinite acceleration time (target unreachable) [-]."""
PROGRESS_MIN_COMBINATIONS = 200_000
"""Show a progress bar (stderr, table output only) for enumerations above this size [-]."""
ACCEL_BATCH = 4096
"""Designs per batch of lazily computed acceleration times in the elastic search [-]."""
REACH_FRACTION = 0.95
"""A target speed lowered below a design's reach speed is set to at most this share of it, away from
the asymptote where the acceleration time grows without bound [-]."""
BISECT_STEPS = 40
"""Bisection steps for the speed a design reaches within a time limit (2^-40 of the bracket) [-]."""
FURTHER_PCT = 1.0
"""When no candidate relaxation is confirmed, the first one is tried once more, this much looser [%]."""
ACTIVE_RULE = ("re-solve without the requirement: the optimal design changes, or the objective improves "
               "by more than 1e-9 relative")


# ----------------------------------------------------------------------------- small helpers

def with_requirements(parts: PartTables, req: Requirements) -> PartTables:
    """The same part tables with other requirements (see `PartTables.with_requirements`)."""
    return parts.with_requirements(req)


def dropped(req: Requirements, name: str) -> Requirements:
    """Requirements without ``name``."""
    return dataclasses.replace(req, **{name: None})


def loosen_value(name: str, value: float, pct: float) -> float:
    """``value`` of requirement ``name`` loosened by ``pct`` percent."""
    f = pct / 100.0
    return value * (1.0 - f) if BY_NAME[name].sense == "min" else value * (1.0 + f)


def _round_safe(value: float, sense: str, digits: int = 4) -> float:
    """``value`` rounded to ``digits`` significant digits in the direction that keeps it met.

    A "min" requirement is rounded down, a "max" requirement up, so a design achieving
    ``value`` still meets the rounded requirement.
    """
    if value == 0 or not math.isfinite(value):
        return float(value)
    e = digits - 1 - math.floor(math.log10(abs(value)))
    scaled = value * 10.0 ** e
    r = math.floor(scaled) if sense == "min" else math.ceil(scaled)
    out = float(f"{r}e{-e}")
    return out if (out <= value if sense == "min" else out >= value) else float(value)


@dataclass
class _Context:
    """One explain run: the study, its objective, counters and the progress switch."""

    study: Study
    objective: str
    progress: bool = False
    searches: int = 0
    search_s: float = 0.0

    @property
    def parts(self) -> PartTables:
        return self.study.parts

    def search(self, req: Requirements, objective: str | None = None) -> SearchResult:
        """Exact optimum under ``req`` (counted and timed); ``objective`` defaults to the study's."""
        t0 = time.perf_counter()
        res = search(self.parts, objective=objective or self.objective, count=1, requirements=req,
                     allowed=self.study.allowed)
        self.searches += 1
        self.search_s += time.perf_counter() - t0
        return res

    def metric_of(self, design, req: Requirements, metric: str) -> float:
        """One metric of one design evaluated under ``req`` (accel target from ``req``)."""
        _, i, j, k = design
        return float(evaluate(with_requirements(self.parts, req), [i], [j], [k],
                              accel=metric == "accel_time_s")[metric][0])

    def record(self, design, req: Requirements) -> dict:
        """Verified record of ``design`` under ``req`` (raises if the design fails ``req``)."""
        return records(with_requirements(self.parts, req), [design], self.objective)[0]


# ----------------------------------------------------------------------------- feasible studies

def _better(new: float, old: float) -> bool:
    """True when ``new`` beats ``old`` by more than the tie tolerance (1e-9 relative)."""
    return new < old - tie_tolerance(old)


def _changes(opt, other) -> bool:
    """The optimum changed: a different design or an objective better by more than 1e-9 relative."""
    return other[1:] != opt[1:] or _better(other[0], opt[0])


class _Levels:
    """Known optima of one requirement at several looser levels; answers tighter levels exactly."""

    def __init__(self, ctx: _Context, name: str, base: Requirements, optimum):
        self.ctx, self.name, self.base = ctx, name, base
        self.metric = BY_NAME[name].metric
        self.sense = BY_NAME[name].sense
        self.known = [(getattr(base, name), optimum)]  # (level, optimum design); level None = dropped

    def _looser_or_equal(self, a, b) -> bool:
        """Level ``a`` is at least as loose as level ``b`` (None = dropped = loosest)."""
        if a is None:
            return True
        if b is None:
            return False
        return a <= b if self.sense == "min" else a >= b

    def at(self, level):
        """Optimum (value, i, j, k) with the requirement at ``level`` (None: dropped), or None."""
        for lv, design in self.known:
            if design is not None and self._looser_or_equal(lv, level):
                if level is None and lv is None:
                    return design
                if level is not None:
                    achieved = self.ctx.metric_of(design, self.base, self.metric)
                    if bool(passes(self.sense, level, achieved)):
                        return design
        req = dropped(self.base, self.name) if level is None else dataclasses.replace(self.base, **{self.name: level})
        res = self.ctx.search(req)
        design = res.designs[0] if res.status == STATUS_OPTIMAL and res.designs else None
        self.known.append((level, design))
        return design


def _price_entry(ctx: _Context, name: str, design, level, optimum) -> dict:
    """Objective, saving and the design picked with requirement ``name`` at ``level`` (None: dropped)."""
    base = ctx.parts.problem.requirements
    if design is None:
        return {"required": clean(level), "objective": None, "saved": None, "saved_pct": None, "design": None,
                "achieved": None, "changes_design": False, "changes_motor": False}
    req = dropped(base, name) if level is None else dataclasses.replace(base, **{name: level})
    rec = ctx.record(design, req)  # verified under the relaxed requirements
    saved = optimum[0] - design[0]
    achieved = ctx.metric_of(design, base, BY_NAME[name].metric)
    return {"required": clean(level), "objective": clean(design[0]), "saved": clean(max(saved, 0.0)),
            "saved_pct": clean(100.0 * max(saved, 0.0) / abs(optimum[0])) if optimum[0] else None,
            "design": {"motor": rec["motor"], "reducer": rec["reducer"], "tyre": rec["tyre"]},
            "achieved": clean(achieved),
            "changes_design": design[1:] != optimum[1:], "changes_motor": design[1] != optimum[1]}


def explain_feasible(ctx: _Context, optimum, step_pct: float, near_miss_pct: float) -> dict:
    """Requirement table with margins, activity, prices, driving requirements and near misses."""
    parts = ctx.parts
    base = parts.problem.requirements
    rec = ctx.record(optimum, base)
    unit = UNITS[ctx.objective]
    rows, near = [], []
    by_row = {r["name"]: r for r in rec["requirements"]}
    for r, required in stated(parts.problem):
        levels = _Levels(ctx, r.name, base, optimum)
        d_drop = levels.at(None)
        d_step = levels.at(loosen_value(r.name, required, step_pct))
        d_near = levels.at(loosen_value(r.name, required, near_miss_pct))
        row = dict(by_row[r.name])
        row["active"] = bool(d_drop is not None and _changes(optimum, d_drop))
        row["price"] = {
            "dropped": _price_entry(ctx, r.name, d_drop, None, optimum),
            "loosened": _price_entry(ctx, r.name, d_step, loosen_value(r.name, required, step_pct), optimum),
        }
        rows.append(row)
        if d_near is not None and _better(d_near[0], optimum[0]):
            level = loosen_value(r.name, required, near_miss_pct)
            nrec = ctx.record(d_near, dataclasses.replace(base, **{r.name: level}))
            achieved = ctx.metric_of(d_near, base, r.metric)
            frac = float(margin_fraction(r.sense, required, achieved))
            near.append({
                "name": r.name, "required": clean(required), "achieved": clean(achieved), "unit": r.unit,
                "miss": clean(abs(achieved - required)), "miss_pct": clean(-100.0 * frac),
                "objective": clean(d_near[0]), "saved": clean(optimum[0] - d_near[0]),
                "saved_pct": clean(100.0 * (optimum[0] - d_near[0]) / abs(optimum[0])) if optimum[0] else None,
                "design": {"motor": nrec["motor"], "reducer": nrec["reducer"], "tyre": nrec["tyre"]},
                "changes_motor": d_near[1] != optimum[1],
                "sentence": (f"{nrec['motor']} + {nrec['reducer']} + {nrec['tyre']} works if you accept "
                             f"{r.name} = {_num(achieved)} {r.unit} instead of {_num(required)}: "
                             f"{ctx.objective} {_num(d_near[0])} instead of {_num(optimum[0])} {unit}"),
            })
    driving = _driving(rows)
    return {"design": rec, "requirements": rows, "driving_requirements": driving,
            "near_misses": near, "summary": _summary(rows, driving, rec, ctx.objective, step_pct)}


def _driving(rows: list[dict]) -> list[str]:
    """Requirements whose removal changes the motor, largest saving first."""
    cand = [r for r in rows if r["price"]["dropped"]["changes_motor"]]
    cand.sort(key=lambda r: (-(r["price"]["dropped"]["saved"] or 0.0), r["name"]))
    return [r["name"] for r in cand]


def _num(x) -> str:
    if x is None:
        return "-"
    x = float(x)
    if not math.isfinite(x):
        return "inf"
    return f"{x:.4g}" if abs(x) < 1e4 else f"{x:.0f}"


def _summary(rows, driving, rec, objective, step_pct) -> list[str]:
    """Plain sentences: which requirements are active and which one drove the motor choice."""
    out = []
    active = [r["name"] for r in rows if r["active"]]
    out.append("active (re-solve): " + (", ".join(active) if active else "none: the optimum is the best design "
                                        "even without any single requirement"))
    if driving:
        top = rows[[r["name"] for r in rows].index(driving[0])]
        best = top["price"]["dropped"]["saved"]
        tied = [n for n in driving
                if math.isclose(rows[[r["name"] for r in rows].index(n)]["price"]["dropped"]["saved"] or 0.0,
                                best or 0.0, rel_tol=1e-9, abs_tol=1e-12)]
        d = top["price"]["dropped"]["design"]
        out.append(f"motor {rec['motor']} is chosen because of {' and '.join(tied)}: dropping it changes the motor "
                   f"(to {d['motor']}) and saves the most ({_num(best)} {UNITS[objective]}, "
                   f"{_num(top['price']['dropped']['saved_pct'])} %)")
        for n in driving:
            lo = rows[[r["name"] for r in rows].index(n)]["price"]["loosened"]
            if lo["changes_motor"]:
                out.append(f"loosening {n} by {step_pct:g} % already changes the motor to {lo['design']['motor']} "
                           f"and saves {_num(lo['saved'])} {UNITS[objective]}")
    else:
        out.append(f"no single requirement drives the motor choice: motor {rec['motor']} stays optimal when any "
                   "one requirement is dropped")
    return out


# ----------------------------------------------------------------------------- impossibilities

def traction_limits(parts: PartTables, allowed: dict) -> dict:
    """Upper bounds on launch acceleration [m/s^2] and gradeability [%] that no part can exceed.

    Launch: a_T = (mu W_driven - m g Crr) / ((1 - kappa) m_eff) with kappa = +-mu (m/m_eff) h/L is at
    most (mu s - Crr) g / (1 -+ mu h/L) (m_eff >= m), with the largest driven-axle share s over the
    catalogue and the lowest Crr. Gradeability: tan(theta) = (mu s - Crr) / (1 -+ mu h/L), same
    s and Crr. Rear drive takes the minus sign; infinite when 1 - mu h/L <= 0.
    """
    mr = parts.reducers.mass_kg[allowed["reducers"]]
    mt = parts.tyres.mass_kg[allowed["tyres"]]
    s = float(max_driven_share(parts, parts.motors.mass_kg[allowed["motors"]], (mr.min(), mr.max()),
                               (mt.min(), mt.max())).max())
    crr = float(parts.tyres.crr[allowed["tyres"]].min())
    tan = float(traction_tan_bound(parts, s, crr))
    return {"launch_accel_mps2": tan * G_N, "gradeability_pct": 100.0 * tan, "driven_share": s, "crr": crr}


def impossibilities(parts: PartTables, allowed: dict) -> list[dict]:
    """Requirements that no part can fix: above the speed limiter or the driven axle's traction limit."""
    req = parts.problem.requirements
    out = []
    lim = req.speed_limiter_kmh
    if lim is not None:
        for name in ("top_speed_kmh", "accel_to_kmh"):
            value = getattr(req, name)
            if value is not None and value > lim * (1 + REL_TOL):
                shown = distinct_numbers(value, lim, digits=(4, 4))
                what = "sustained top speed" if name == "top_speed_kmh" else "acceleration target speed"
                out.append({"name": name, "required": clean(value), "limit": clean(lim), "unit": "km/h",
                            "bound": "exact",
                            "why": f"the {what} {shown[0]} km/h is above speed_limiter_kmh = {shown[1]} km/h; "
                                   "the limiter caps every design"})
    if all(len(a) for a in allowed.values()):
        t = traction_limits(parts, allowed)
        axle = "rear" if parts.rear_drive else "front"
        for name, unit in (("launch_accel_mps2", "m/s^2"), ("gradeability_pct", "%")):
            value = getattr(req, name)
            if value is not None and value > t[name] * (1 + REL_TOL):
                out.append({"name": name, "required": clean(value), "limit": clean(t[name]), "unit": unit,
                            "bound": "at most",
                            "why": (f"traction of the driven {axle} axle allows at most {_num(t[name])} {unit} "
                                    f"(road_friction {_num(parts.problem.environment.road_friction)}, best driven-axle "
                                    f"share {_num(t['driven_share'])}, lowest Crr {_num(t['crr'])}, "
                                    "effective mass taken as the vehicle mass); no motor, ratio or tyre can fix it")})
    return out


# ----------------------------------------------------------------------------- elastic enumeration

@dataclass
class Enumeration:
    """Every design passing the part-rating checks, with its shortfall per stated requirement.

    ``names`` are the stated requirements (registry order); ``short[:, n]`` the normalised
    shortfall max(0, -margin_fraction) of requirement n (accel_time_s: NaN until computed);
    ``fail`` a bit mask of failed requirements (bit n; accel_time_s bit unknown until computed);
    ``keys`` (n, 3) part positions; ``objective`` the objective metric (NaN for accel_time until
    computed).
    """

    names: list
    keys: np.ndarray
    short: np.ndarray
    fail: np.ndarray
    objective: np.ndarray
    combinations: int


def _hard_ok(metrics: dict) -> np.ndarray:
    ok = np.ones(len(metrics["mass_kg"]), dtype=bool)
    for c in CHECKS:
        ok &= passes("max", metrics[CHECK_LIMIT_METRIC[c.name]], metrics[c.metric])
    return ok


def enumerate_shortfalls(parts: PartTables, allowed: dict, objective: str, progress: bool = False) -> Enumeration:
    """Exact metrics (without the acceleration run) of every rating-passing design, by motor chunks."""
    names = [r.name for r, _ in stated(parts.problem)]
    motors = allowed["motors"]
    n_combo = len(motors) * len(allowed["reducers"]) * len(allowed["tyres"])
    bar = None
    if progress and n_combo > PROGRESS_MIN_COMBINATIONS:
        from tqdm import tqdm

        bar = tqdm(total=len(motors), desc="closest design: motors", unit="motor", file=sys.stderr, leave=False)
    keys, shorts, fails, objs = [], [], [], []
    metric = OBJECTIVE_METRIC[objective]
    try:
        for i in motors:
            mi, rj, tk = slice_indices(parts, int(i), allowed["reducers"], allowed["tyres"])
            m = evaluate(parts, mi, rj, tk, accel=False)
            ok = _hard_ok(m)
            if ok.any():
                sh = np.zeros((int(ok.sum()), len(names)))
                fl = np.zeros(int(ok.sum()), dtype=np.int64)
                for n, (r, required) in enumerate(stated(parts.problem)):
                    if r.name == "accel_time_s":
                        sh[:, n] = np.nan
                        continue
                    frac = margin_fraction(r.sense, required, m[r.metric][ok])
                    good = passes(r.sense, required, m[r.metric][ok])
                    sh[:, n] = np.where(good, 0.0, np.nan_to_num(-frac, nan=INF_SHORTFALL, posinf=INF_SHORTFALL))
                    fl |= np.where(good, 0, 1 << n).astype(np.int64)
                keys.append(np.stack([mi[ok], rj[ok], tk[ok]], axis=1))
                shorts.append(sh)
                fails.append(fl)
                objs.append(m[metric][ok] if metric != "accel_time_s" else np.full(int(ok.sum()), np.nan))
            if bar is not None:
                bar.update(1)
    finally:
        if bar is not None:
            bar.close()
    if not keys:
        return Enumeration(names, np.empty((0, 3), dtype=np.int64), np.empty((0, len(names))),
                           np.empty(0, dtype=np.int64), np.empty(0), n_combo)
    return Enumeration(names, np.concatenate(keys), np.concatenate(shorts), np.concatenate(fails),
                       np.concatenate(objs), n_combo)


def _accel_times(parts: PartTables, keys: np.ndarray, target_kmh: float) -> np.ndarray:
    axles, body = parts.design(parts.single_keys(keys[:, 0], keys[:, 1], keys[:, 2]))
    return accel_run.accel_time_s(axles, body, kmh_to_mps(target_kmh))


REACH_LIMITS = ("gearing", "motor", "traction", "limiter")
"""What ends an acceleration run, in `reach_speed_kmh`'s order."""


def reach_speed_kmh(parts: PartTables, keys: np.ndarray) -> tuple[np.ndarray, list[str]]:
    """Highest speed each design's acceleration run approaches [km/h], and what limits it.

    The run's net acceleration min(a_motor, a_traction) falls with speed (the wheel force falls,
    the road load rises), so the run ends at the first of: the gearing limit w_max r / G; the
    speed where the peak envelope's wheel force meets the level road load
    (`performance.envelope_road_crossing_mps`, "motor"); the speed where the driven axle's static
    grip meets it, mu W_driven = m g Crr + q v^2, i.e. v = sqrt((mu W_driven - m g Crr) / q)
    ("traction": no load transfer at zero acceleration; unlimited for a rear drive whose
    (1 - kappa) <= 0 transmits any force); the speed limiter. Every target below this speed is
    reached in finite time (`performance.accel_time_s`), no target above it is, nor one at it
    unless the gearing limit or the limiter ends the run (0: the vehicle cannot move off).

    Parameters
    ----------
    parts : part tables with the study's vehicle and environment
    keys : (n, 3) motor, reducer, tyre positions [-]

    Returns
    -------
    (speeds [km/h], limits: one of `REACH_LIMITS` per design)
    """
    keys = np.atleast_2d(np.asarray(keys, dtype=np.int64))
    drive, body = perf.broadcast(*parts.single_drive(keys[:, 0], keys[:, 1], keys[:, 2]))
    m_eff = perf.effective_mass(drive, body)
    grip_n = body.road_friction * perf.driven_weight_n(body) - perf.level_road_load(body, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        v_trac = np.sqrt(np.maximum(grip_n, 0.0) / body.q_n_s2_m2)
    v_trac = np.where((1.0 - perf.kappa(drive, body, m_eff)) * m_eff > 0, v_trac, np.inf)
    speeds = np.stack([perf.gearing_speed_limit_mps(drive), perf.envelope_road_crossing_mps(drive, body),
                       v_trac, np.broadcast_to(body.speed_limit_mps, v_trac.shape)], axis=1)
    v = speeds.min(axis=1)
    return mps_to_kmh(v), [REACH_LIMITS[n] for n in np.argmin(speeds, axis=1)]


def closest_design(parts: PartTables, en: Enumeration, objective: str):
    """Position in ``en`` of the design with the least total normalised shortfall, exactly.

    The total is the same whatever the objective: an acceleration target a design never reaches
    counts `INF_SHORTFALL`, once, whether it comes from a stated ``accel_time_s`` or from the
    accel_time objective (which needs ``accel_to_kmh`` reached: a design with an infinite time is
    infeasible under it). Acceleration times are computed lazily: designs are taken in order of
    their shortfall without the acceleration term (a lower bound of the total) until that bound
    exceeds the best total. Ties (1e-9) among designs that never reach the target go to the
    highest speed reached (`reach_speed_kmh`); then ties are broken by the objective, then by
    part-id order. Returns (position, total), or (None, None) when ``en`` is empty (no design
    passes the part-rating checks).
    """
    if en.keys.shape[0] == 0:
        return None, None
    req = parts.problem.requirements
    a_col = en.names.index("accel_time_s") if "accel_time_s" in en.names else None
    need_accel = a_col is not None or objective == "accel_time"
    base = np.nansum(en.short, axis=1)
    total = base.copy()
    times = np.full(base.shape, np.nan)
    if need_accel:
        order = np.lexsort((en.keys[:, 2], en.keys[:, 1], en.keys[:, 0], base))
        total[:] = np.inf
        best = np.inf
        for s in range(0, order.size, ACCEL_BATCH):
            idx = order[s:s + ACCEL_BATCH]
            if base[idx[0]] > best + 1e-9 * max(best, 1.0):
                break
            t = _accel_times(parts, en.keys[idx], req.accel_to_kmh)
            times[idx] = t
            tot = base[idx].copy()
            if a_col is not None:
                frac = margin_fraction("max", req.accel_time_s, t)
                good = passes("max", req.accel_time_s, t)
                sh = np.where(good, 0.0, np.nan_to_num(-frac, nan=INF_SHORTFALL, posinf=INF_SHORTFALL))
                sh = np.where(np.isfinite(t), sh, INF_SHORTFALL)
                en.short[idx, a_col] = sh
                en.fail[idx] |= np.where(good, 0, 1 << a_col).astype(np.int64)
                tot += sh
            elif objective == "accel_time":  # the objective's own requirement: reach accel_to_kmh
                tot += np.where(np.isfinite(t), 0.0, INF_SHORTFALL)
            if objective == "accel_time":
                en.objective[idx] = t
            total[idx] = tot
            best = min(best, float(tot.min()))
    finite = np.isfinite(total)
    if not finite.any():
        return None, None
    best = float(total[finite].min())
    tied = np.nonzero(finite & (total <= best + 1e-9 * max(best, 1.0)))[0]
    if need_accel and tied.size > 1 and not np.isfinite(times[tied]).any():
        reach, _ = reach_speed_kmh(parts, en.keys[tied])
        top = float(reach.max())
        tied = tied[reach >= top - tie_tolerance(top)]
    obj = np.where(np.isfinite(en.objective[tied]), en.objective[tied], np.inf)
    pick = tied[order_best(obj, en.keys[tied], 1)] if np.isfinite(obj).any() else tied[:1]
    pos = int(pick[0]) if np.size(pick) else int(tied[0])
    return pos, float(total[pos])


# ----------------------------------------------------------------------------- conflicts

def conflicts(ctx: _Context, en: Enumeration, max_size: int = 3, base: Requirements | None = None) -> list[list[str]]:
    """Minimal sets of stated requirements that no rating-passing design meets together.

    Singles, then pairs, then triples; a set is tested only when none of its subsets conflicts.
    Sets without acceleration (and a non-accel objective) are decided exactly from the
    enumeration's fail masks; sets involving acceleration by an exact search. When acceleration
    matters (accel_time_s stated, or the accel_time objective, which needs accel_to_kmh reached),
    the target alone is tested first: when no design reaches accel_to_kmh at all,
    ``[["accel_to_kmh"]]`` is the only minimal set, whatever the objective.
    """
    names = en.names
    found: list[tuple] = []
    masks = np.unique(en.fail) if en.fail.size else np.empty(0, dtype=np.int64)
    # the requirements the enumeration used (accel_to_kmh may be lowered to the limiter)
    base = ctx.parts.problem.requirements if base is None else base
    if ctx.objective == "accel_time" or "accel_time_s" in names:
        # the accel_time objective's feasible set is exactly "reaches accel_to_kmh"
        only = Requirements(**{k: getattr(base, k) for k in ("accel_to_kmh", "speed_limiter_kmh")})
        if ctx.search(only, objective="accel_time").status == STATUS_INFEASIBLE:
            return [["accel_to_kmh"]]
    for size in range(1, min(max_size, len(names)) + 1):
        for combo in itertools.combinations(range(len(names)), size):
            if any(set(f) <= set(combo) for f in found):
                continue
            subset = [names[n] for n in combo]
            if "accel_time_s" in subset or ctx.objective == "accel_time":
                req = Requirements(**{k: getattr(base, k) for k in ("accel_to_kmh", "speed_limiter_kmh")},
                                   **{n: getattr(base, n) for n in subset})
                bad = ctx.search(req).status == STATUS_INFEASIBLE
            else:
                bit = sum(1 << n for n in combo)
                bad = not bool(np.any((masks & bit) == 0))
            if bad:
                found.append(combo)
    return [[names[n] for n in f] for f in found]


def _sense(name: str) -> str:
    """Sense of a relaxable key: accel_to_kmh is a target speed, loosened by lowering it ("min")."""
    return "min" if name == "accel_to_kmh" else BY_NAME[name].sense


def loosens(req: Requirements, relax: dict) -> bool:
    """True when every entry of ``relax`` loosens a stated value of ``req``.

    "min" requirements and accel_to_kmh must go down (and stay > 0), "max" requirements up;
    None drops a stated requirement (never accel_to_kmh, which the acceleration run needs). An
    empty ``relax`` loosens nothing.
    """
    if not relax:
        return False
    for name, value in relax.items():
        old = getattr(req, name)
        if old is None:
            return False
        if value is None:
            if name == "accel_to_kmh":
                return False
            continue
        if not (math.isfinite(value) and value > 0):
            return False
        if not (value < old if _sense(name) == "min" else value > old):
            return False
    return True


def _further(relax: dict, pct: float) -> dict:
    """``relax`` with every value moved ``pct`` percent further in its loosening direction."""
    out = {}
    for name, value in relax.items():
        out[name] = None if value is None else _round_safe(
            value * (1.0 - pct / 100.0 if _sense(name) == "min" else 1.0 + pct / 100.0), _sense(name))
    return out


def _time_to(parts: PartTables, ijk, target_kmh: float) -> float:
    """Acceleration time of one design from rest to ``target_kmh`` [s] (inf when never reached)."""
    return float(_accel_times(parts, np.asarray([ijk], dtype=np.int64), target_kmh)[0])


def _speed_within(parts: PartTables, ijk, limit_s: float, hi_kmh: float) -> float:
    """Highest target speed in (0, ``hi_kmh``) the design reaches within ``limit_s`` [km/h].

    Bisection (the time grows with the target speed); the returned speed is always one the design
    reaches in time (the lower end of the bracket).
    """
    lo, hi = 0.0, float(hi_kmh)
    for _ in range(BISECT_STEPS):
        mid = 0.5 * (lo + hi)
        if bool(passes("max", limit_s, _time_to(parts, ijk, mid))):
            lo = mid
        else:
            hi = mid
    return lo


def _accel_candidates(parts: PartTables, ijk, objective: str) -> tuple[list[dict], dict]:
    """Loosenings of the acceleration requirement that design ``ijk`` meets, preferred first.

    Computed from what the design achieves with traction: a design that reaches accel_to_kmh too
    slowly gets accel_time_s raised to its time, or accel_to_kmh lowered to the speed it reaches
    within accel_time_s; a design that never reaches accel_to_kmh (`reach_speed_kmh` at or below
    it) gets accel_to_kmh lowered to the speed it reaches within accel_time_s, or to
    `REACH_FRACTION` of its reach speed with accel_time_s raised to its time there (only the
    lowered target under the accel_time objective without accel_time_s). A design that cannot
    move gets accel_time_s dropped (cost and mass objectives) or nothing. Returns ([{}] when
    nothing is missed, or the candidates) and the facts {time_s, reach_kmh, reach_limit}.
    """
    req = parts.problem.requirements
    target, limit = req.accel_to_kmh, req.accel_time_s
    reach, why = reach_speed_kmh(parts, np.asarray([ijk], dtype=np.int64))
    t = _time_to(parts, ijk, target)
    facts = {"time_s": t, "reach_kmh": float(reach[0]), "reach_limit": why[0]}
    if math.isfinite(t) and (limit is None or bool(passes("max", limit, t))):
        return [{}], facts
    out = []
    if math.isfinite(t):  # reaches the target, too slowly
        out.append({"accel_time_s": _round_safe(t, "max")})
        v = _round_safe(_speed_within(parts, ijk, limit, target), "min")
        if v > 0:
            out.append({"accel_to_kmh": v})
        return out, facts
    hi = min(facts["reach_kmh"], target)  # never reaches the target: lower it below the reach speed
    if not hi > 0:
        return ([{"accel_time_s": None}] if limit is not None and objective != "accel_time" else []), facts
    if limit is not None:
        v = _round_safe(_speed_within(parts, ijk, limit, hi), "min")
        if v > 0:
            out.append({"accel_to_kmh": v})
    v = _round_safe(REACH_FRACTION * hi, "min")
    t_v = _time_to(parts, ijk, v) if v > 0 else math.inf
    if math.isfinite(t_v):
        if limit is None:
            out.append({"accel_to_kmh": v})
        elif not bool(passes("max", limit, t_v)):
            out.append({"accel_to_kmh": v, "accel_time_s": _round_safe(t_v, "max")})
    return out, facts


def _relaxation(parts: PartTables, en: Enumeration, pos: int, objective: str) -> tuple[list[dict], list, dict]:
    """Candidate relaxations that make the closest design feasible (preferred first), its shortfall
    rows, and the facts of its acceleration run (see `_accel_candidates`).

    ``parts`` carries the requirements the elastic search used (the stated ones, with an
    acceleration target above the speed limiter already lowered to the limiter). Every value moves
    in its loosening direction only; a requirement the design misses outside acceleration is
    relaxed to what the design achieves (rounded to 4 significant digits on the safe side), or
    dropped when the design cannot even start (zero or negative grade or launch).
    """
    req = parts.problem.requirements
    i, j, k = (int(x) for x in en.keys[pos])
    m = evaluate(parts, [i], [j], [k])
    accel = req.accel_time_s is not None or objective == "accel_time"
    alts, facts = _accel_candidates(parts, (i, j, k), objective) if accel else ([{}], {})
    accel_row = {} if not facts else {"accel_to_kmh": clean(req.accel_to_kmh), "reach_kmh": clean(facts["reach_kmh"]),
                                      "reach_limit": facts["reach_limit"]}
    common, rows = {}, []
    for r, required in stated(parts.problem):
        achieved = float(m[r.metric][0])
        ok = bool(passes(r.sense, required, achieved))
        frac = float(margin_fraction(r.sense, required, achieved)) if math.isfinite(achieved) else -math.inf
        rows.append({"name": r.name, "required": clean(required), "achieved": clean(achieved), "unit": r.unit,
                     "sense": "at least" if r.sense == "min" else "at most",
                     "shortfall": 0.0 if ok else clean(abs(achieved - required)),
                     "shortfall_pct": 0.0 if ok else clean(-100.0 * frac), "met": ok})
        if r.name == "accel_time_s":
            rows[-1].update(accel_row)
        if ok or r.name == "accel_time_s":
            continue
        value = _round_safe(achieved, r.sense)
        common[r.name] = value if math.isfinite(value) and value > 0 else None
    if objective == "accel_time" and req.accel_time_s is None:
        # the objective's own requirement: the run must reach accel_to_kmh (infinite time: infeasible)
        ok = math.isfinite(facts["time_s"])
        gap = max(req.accel_to_kmh - facts["reach_kmh"], 0.0)
        rows.append({"name": "accel_to_kmh", "required": clean(req.accel_to_kmh), "achieved": clean(facts["reach_kmh"]),
                     "unit": "km/h", "sense": "at least", "shortfall": 0.0 if ok else clean(gap),
                     "shortfall_pct": 0.0 if ok else clean(100.0 * gap / req.accel_to_kmh), "met": ok, **accel_row})
    return [{**common, **a} for a in alts], rows, facts


def _try_relaxation(ctx: _Context, relax: dict) -> dict:
    """Re-solve the study with ``relax`` applied: {relaxation, verified, relaxed_optimum}."""
    req = dataclasses.replace(ctx.parts.problem.requirements, **relax)
    res = ctx.search(req)
    opt = None
    if res.status == STATUS_OPTIMAL and res.designs:
        r2 = ctx.record(res.designs[0], req)
        opt = {"motor": r2["motor"], "reducer": r2["reducer"], "tyre": r2["tyre"],
               "objective": clean(res.designs[0][0])}
    return {"relaxation": dict(relax), "verified": opt is not None, "relaxed_optimum": opt}


def _no_relaxation_note(options: list, facts: dict, objective: str) -> str:
    """Why `relaxation` is empty for an infeasible study with a closest design."""
    if options:
        return (f"no confirmed relaxation: none of the {len(options)} relaxations tried (relaxation_options) made a "
                "re-solve feasible; the closest design is shown instead")
    if facts and not facts["reach_kmh"] > 0:
        need = ("the accel_time objective needs accel_to_kmh reached" if objective == "accel_time"
                else "the acceleration requirement cannot be met")
        return (f"no confirmed relaxation: the closest design cannot move off the line ({facts['reach_limit']} limit: "
                f"it reaches 0 km/h), so no acceleration target is reached and {need}; "
                "the closest design is shown instead")
    return ("no confirmed relaxation: no loosening of the stated values makes the closest design feasible; "
            "the closest design is shown instead")


def _without_closest(out: dict) -> dict:
    """An infeasible diagnosis that has no closest design: no relaxation, said explicitly."""
    out["relaxation_verified"] = False
    out["relaxation_note"] = f"no confirmed relaxation: {out['closest_note']}"
    return out


def explain_infeasible(ctx: _Context, reason: str | None, max_conflict_size: int = 3) -> dict:
    """Impossibilities, conflicts (up to ``max_conflict_size`` requirements), closest design and the
    relaxation confirmed by a re-solve (or, when none is confirmed, an explicit note)."""
    parts = ctx.parts
    allowed = ctx.study.allowed
    out = {"reason": reason, "impossible": impossibilities(parts, allowed), "conflicts": [], "closest": None,
           "relaxation": {}, "relaxation_verified": None, "relaxed_optimum": None, "relaxation_options": [],
           "relaxation_note": None}
    if any(len(a) == 0 for a in allowed.values()):
        out["closest_note"] = ("no parts left after the procurement filters: relax avoid_suppliers or "
                               "max_lead_time_weeks")
        return _without_closest(out)
    first = {}
    req0 = parts.problem.requirements
    eparts = parts
    if any(d["name"] == "accel_to_kmh" for d in out["impossible"]):
        # no design reaches a target above the limiter: search with the target lowered to the limiter
        first["accel_to_kmh"] = float(req0.speed_limiter_kmh)
        eparts = with_requirements(parts, dataclasses.replace(req0, accel_to_kmh=req0.speed_limiter_kmh))
    en = enumerate_shortfalls(eparts, allowed, ctx.objective, progress=ctx.progress)
    if en.keys.shape[0] == 0:
        out["closest_note"] = ("no design passes the part-rating checks (reducer torque and speed, tyre speed "
                               "symbol and load): no relaxation of the requirements helps; add parts")
        return _without_closest(out)
    pos, total = closest_design(eparts, en, ctx.objective)
    out["conflicts"] = conflicts(ctx, en, max_size=max_conflict_size, base=eparts.problem.requirements)
    cands, rows, facts = _relaxation(eparts, en, pos, ctx.objective)
    tried = []
    for c in ({**first, **c} for c in cands):
        if loosens(req0, c) and c not in tried:
            tried.append(c)
    options = [_try_relaxation(ctx, c) for c in tried]
    if tried and not any(o["verified"] for o in options):  # search a little further, once
        more = _further(tried[0], FURTHER_PCT)
        if loosens(req0, more) and more not in tried:
            options.append(_try_relaxation(ctx, more))
    chosen = next((o for o in options if o["verified"]), None)
    i, j, k = (int(x) for x in en.keys[pos])
    metrics = verify_designs(eparts, [(math.nan, i, j, k)], ctx.objective, expect_feasible=False)
    rec = design_record(eparts, i, j, k, metrics)  # against the stated requirements: shows the misses
    ok = False
    if chosen is not None:
        relaxed_parts = with_requirements(parts, dataclasses.replace(req0, **chosen["relaxation"]))
        ok = bool(feasible(relaxed_parts, evaluate(relaxed_parts, [i], [j], [k]), ctx.objective)[0])
    out["closest"] = {"motor": rec["motor"], "reducer": rec["reducer"], "tyre": rec["tyre"],
                      "total_shortfall": clean(total), "feasible_when_relaxed": ok, "shortfalls": rows,
                      "record": rec}
    out["relaxation_options"] = options
    out["relaxation_verified"] = chosen is not None
    if chosen is not None:
        out["relaxation"] = chosen["relaxation"]
        out["relaxed_optimum"] = chosen["relaxed_optimum"]
    else:
        out["relaxation_note"] = _no_relaxation_note(options, facts, ctx.objective)
    return out


# ----------------------------------------------------------------------------- entry points

def explain(study: Study, step_pct: float = STEP_PCT, near_miss_pct: float = NEAR_MISS_PCT,
            progress: bool = False) -> dict:
    """The full explanation of a study as a JSON-ready dict (keys documented in README.md).

    Parameters
    ----------
    study : a loaded study (`api.open_study`)
    step_pct : loosening step for the price of each requirement [%]
    near_miss_pct : largest miss of a near-miss design [%]
    progress : show a tqdm progress bar on stderr for large enumerations
    """
    t0 = time.perf_counter()
    parts = study.parts
    ctx = _Context(study, parts.problem.objective, progress=progress)
    res = ctx.search(parts.problem.requirements)
    out = header(parts)
    out.update({
        "status": res.status,
        "objective": objective_dict(ctx.objective, res.designs),
        "step_pct": step_pct, "near_miss_pct": near_miss_pct,
        "definitions": {"binding": f"margin-based, as in solve: {BINDING_RULE} %",
                        "active": ACTIVE_RULE,
                        "price": "objective saved when the requirement is dropped, or loosened by step_pct "
                                 "(min requirements x (1 - step), max requirements x (1 + step))",
                        "near_miss": "the optimum with one requirement loosened by near_miss_pct, when it beats "
                                     "the optimum (it misses only that requirement)",
                        "closest": "elastic search: least sum over requirements of max(0, -margin_fraction), "
                                   "part-rating checks hard, an acceleration target never reached counted as 1e6 "
                                   "(also under the accel_time objective, which needs it reached); ties among "
                                   "such designs go to the highest speed reached, then the objective",
                        "relaxation": "every value loosened only (min requirements and accel_to_kmh lowered, max "
                                      "requirements raised, or dropped), computed from what the closest design "
                                      "achieves with traction, and confirmed by a re-solve; empty when none is "
                                      "confirmed"},
        "design": None, "requirements": [], "driving_requirements": [], "near_misses": [], "summary": [],
        "impossible": [], "conflicts": [], "closest": None, "relaxation": {}, "relaxation_verified": None,
        "relaxed_optimum": None, "relaxation_options": [], "relaxation_note": None,
    })
    if res.status == STATUS_OPTIMAL and res.designs:
        out.update(explain_feasible(ctx, res.designs[0], step_pct, near_miss_pct))
    else:
        inf = explain_infeasible(ctx, res.reason)
        out.update(inf)
        out["requirements"] = [{"name": r.name, "required": clean(v), "unit": r.unit,
                                "sense": "at least" if r.sense == "min" else "at most"}
                               for r, v in stated(parts.problem)]
        out["summary"] = infeasible_summary(inf)
    out["searches"] = {"count": ctx.searches, "search_s": round(ctx.search_s, 3),
                       "elapsed_s": round(time.perf_counter() - t0, 3)}
    return out


def infeasible_summary(inf: dict) -> list[str]:
    """Plain sentences for an infeasible study."""
    out = []
    for d in inf["impossible"]:
        req, lim = distinct_numbers(d["required"], d["limit"], digits=(4, 4))
        out.append(f"impossible: {d['name']} = {req} {d['unit']}; "
                   f"{'limit' if d['bound'] == 'exact' else 'at most'} {lim} {d['unit']} ({d['why']})")
    if inf["conflicts"]:
        out.append("cannot be met together: " + "; ".join(" + ".join(c) for c in inf["conflicts"]))
    elif inf.get("closest") is not None:
        out.append("no conflict among three or fewer requirements: only the full set conflicts")
    if inf.get("closest_note"):
        out.append(inf["closest_note"])
    if inf.get("closest"):
        c = inf["closest"]
        misses = [_miss(r) for r in c["shortfalls"] if not r["met"]]
        if misses:
            out.append(f"closest design {c['motor']} + {c['reducer']} + {c['tyre']} misses " + "; ".join(misses))
        else:
            out.append(f"closest design {c['motor']} + {c['reducer']} + {c['tyre']} meets every stated value once "
                       "the vehicle-level impossibilities are relaxed")
        if inf["relaxation_verified"]:
            out.append(f"relax to {_relax_text(inf['relaxation'])}: a re-solve confirms the study becomes feasible")
            for o in inf.get("relaxation_options", []):
                if o["verified"] and o["relaxation"] != inf["relaxation"]:
                    out.append(f"or relax to {_relax_text(o['relaxation'])}: also confirmed by a re-solve")
        else:
            out.append(inf.get("relaxation_note") or "no confirmed relaxation")
    return out


def _relax_text(relax: dict) -> str:
    return ", ".join(f"{k} = {'dropped' if v is None else _num(v)}" for k, v in relax.items())


def _miss(r: dict) -> str:
    """One shortfall row as text; an acceleration target never reached says how far the run gets."""
    if "reach_kmh" in r and (r["name"] == "accel_to_kmh" or r["achieved"] is None):
        return (f"{r['name']}: never reaches {_num(r['accel_to_kmh'])} km/h (its acceleration run ends at "
                f"{_num(r['reach_kmh'])} km/h, {r['reach_limit']} limit)")
    return (f"{r['name']} {_num(r['achieved'])} vs {_num(r['required'])} {r['unit']} "
            f"({_num(r['shortfall_pct'])} % short)")


def diagnose(study: Study, reason: str | None = None, max_conflict_size: int = 2) -> dict:
    """The infeasibility diagnosis `selector solve` attaches to an infeasible result: vehicle-level
    impossibilities, conflicting requirements (singles and pairs by default), the closest design with
    its shortfalls, the relaxation that makes it feasible (verified by a re-solve), and a summary."""
    ctx = _Context(study, study.parts.problem.objective)
    inf = explain_infeasible(ctx, reason, max_conflict_size=max_conflict_size)
    inf["summary"] = infeasible_summary(inf)
    return inf
