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
from selector.units import G_N, kmh_to_mps

INF_SHORTFALL = 1e6
"""Normalised shortfall counted for an infinite acceleration time (target unreachable) [-]."""
PROGRESS_MIN_COMBINATIONS = 200_000
"""Show a progress bar (stderr, table output only) for enumerations above this size [-]."""
ACCEL_BATCH = 4096
"""Designs per batch of lazily computed acceleration times in the elastic search [-]."""
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

    def search(self, req: Requirements) -> SearchResult:
        """Exact optimum under ``req`` (counted and timed)."""
        t0 = time.perf_counter()
        res = search(self.parts, objective=self.objective, count=1, requirements=req, allowed=self.study.allowed)
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
                what = "sustained top speed" if name == "top_speed_kmh" else "acceleration target speed"
                out.append({"name": name, "required": clean(value), "limit": clean(lim), "unit": "km/h",
                            "bound": "exact",
                            "why": f"the {what} {_num(value)} km/h is above speed_limiter_kmh = {_num(lim)} km/h; "
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
    drive, body = parts.design(keys[:, 0], keys[:, 1], keys[:, 2])
    return perf.accel_time_s(drive, body, kmh_to_mps(target_kmh))


def closest_design(parts: PartTables, en: Enumeration, objective: str):
    """Position in ``en`` of the design with the least total normalised shortfall, exactly.

    Acceleration times are computed lazily: designs are taken in order of their shortfall without
    the acceleration term (a lower bound of the total) until that bound exceeds the best total.
    Ties (1e-9) are broken by the objective, then by part-id order. Returns (position, total) or
    (None, None) when no design passes the part-rating checks (and, for the accel_time objective,
    has a finite time).
    """
    if en.keys.shape[0] == 0:
        return None, None
    req = parts.problem.requirements
    a_col = en.names.index("accel_time_s") if "accel_time_s" in en.names else None
    need_accel = a_col is not None or objective == "accel_time"
    base = np.nansum(en.short, axis=1)
    total = base.copy()
    if need_accel:
        order = np.lexsort((en.keys[:, 2], en.keys[:, 1], en.keys[:, 0], base))
        total[:] = np.inf
        best = np.inf
        for s in range(0, order.size, ACCEL_BATCH):
            idx = order[s:s + ACCEL_BATCH]
            if base[idx[0]] > best + 1e-9 * max(best, 1.0):
                break
            t = _accel_times(parts, en.keys[idx], req.accel_to_kmh)
            tot = base[idx].copy()
            if a_col is not None:
                frac = margin_fraction("max", req.accel_time_s, t)
                good = passes("max", req.accel_time_s, t)
                sh = np.where(good, 0.0, np.nan_to_num(-frac, nan=INF_SHORTFALL, posinf=INF_SHORTFALL))
                sh = np.where(np.isfinite(t), sh, INF_SHORTFALL)
                en.short[idx, a_col] = sh
                en.fail[idx] |= np.where(good, 0, 1 << a_col).astype(np.int64)
                tot += sh
            if objective == "accel_time":
                en.objective[idx] = t
                tot = np.where(np.isfinite(t), tot, np.inf)
            total[idx] = tot
            best = min(best, float(tot.min()))
    finite = np.isfinite(total)
    if not finite.any():
        return None, None
    best = float(total[finite].min())
    tied = np.nonzero(finite & (total <= best + 1e-9 * max(best, 1.0)))[0]
    obj = np.where(np.isfinite(en.objective[tied]), en.objective[tied], np.inf)
    pick = tied[order_best(obj, en.keys[tied], 1)] if np.isfinite(obj).any() else tied[:1]
    pos = int(pick[0]) if np.size(pick) else int(tied[0])
    return pos, float(total[pos])


# ----------------------------------------------------------------------------- conflicts

def conflicts(ctx: _Context, en: Enumeration, max_size: int = 3, base: Requirements | None = None) -> list[list[str]]:
    """Minimal sets of stated requirements that no rating-passing design meets together.

    Singles, then pairs, then triples; a set is tested only when none of its subsets conflicts.
    Sets without acceleration (and a non-accel objective) are decided exactly from the
    enumeration's fail masks; sets involving acceleration by an exact search.
    """
    names = en.names
    found: list[tuple] = []
    masks = np.unique(en.fail) if en.fail.size else np.empty(0, dtype=np.int64)
    # the requirements the enumeration used (accel_to_kmh may be lowered to the limiter)
    base = ctx.parts.problem.requirements if base is None else base
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


def _relaxation(parts: PartTables, en: Enumeration, pos: int) -> tuple[dict, list]:
    """Relaxed requirement values that make the closest design feasible, and its shortfall rows.

    ``parts`` carries the requirements the elastic search used (the stated ones, with an
    acceleration target above the speed limiter already lowered to the limiter).
    """
    req = parts.problem.requirements
    i, j, k = (int(x) for x in en.keys[pos])
    m = evaluate(parts, [i], [j], [k])
    relax, rows = {}, []
    for r, required in stated(parts.problem):
        achieved = float(m[r.metric][0])
        ok = bool(passes(r.sense, required, achieved))
        frac = float(margin_fraction(r.sense, required, achieved)) if math.isfinite(achieved) else -math.inf
        rows.append({"name": r.name, "required": clean(required), "achieved": clean(achieved), "unit": r.unit,
                     "sense": "at least" if r.sense == "min" else "at most",
                     "shortfall": 0.0 if ok else clean(abs(achieved - required)),
                     "shortfall_pct": 0.0 if ok else clean(-100.0 * frac), "met": ok})
        if r.name == "accel_time_s":
            rows[-1]["accel_to_kmh"] = clean(req.accel_to_kmh)
        if ok:
            continue
        if r.name == "accel_time_s" and not math.isfinite(achieved):
            # this design cannot reach the target speed at all: lower the target below its maximum speed
            target = float(math.floor(0.98 * float(m["max_speed_kmh"][0])))
            if target <= 0:  # the design cannot move: no acceleration target helps, drop the limit
                relax["accel_time_s"] = None
                continue
            t = float(evaluate(with_requirements(parts, dataclasses.replace(req, accel_to_kmh=target)),
                               [i], [j], [k])["accel_time_s"][0])
            relax["accel_to_kmh"] = target
            if math.isfinite(t) and t > required:
                relax["accel_time_s"] = _round_safe(t, "max")
        else:
            value = _round_safe(achieved, r.sense)
            # a design that cannot even start (zero or negative grade or launch): drop the requirement
            relax[r.name] = value if math.isfinite(value) and value > 0 else None
    return relax, rows


def explain_infeasible(ctx: _Context, reason: str | None, max_conflict_size: int = 3) -> dict:
    """Impossibilities, conflicts (up to ``max_conflict_size`` requirements), closest design and the
    verified relaxation."""
    parts = ctx.parts
    allowed = ctx.study.allowed
    out = {"reason": reason, "impossible": impossibilities(parts, allowed), "conflicts": [], "closest": None,
           "relaxation": {}, "relaxation_verified": None, "relaxed_optimum": None}
    if any(len(a) == 0 for a in allowed.values()):
        out["closest_note"] = ("no parts left after the procurement filters: relax avoid_suppliers or "
                               "max_lead_time_weeks")
        return out
    relax = {}
    req0 = parts.problem.requirements
    eparts = parts
    if any(d["name"] == "accel_to_kmh" for d in out["impossible"]):
        # no design reaches a target above the limiter: search with the target lowered to the limiter
        relax["accel_to_kmh"] = float(req0.speed_limiter_kmh)
        eparts = with_requirements(parts, dataclasses.replace(req0, accel_to_kmh=req0.speed_limiter_kmh))
    en = enumerate_shortfalls(eparts, allowed, ctx.objective, progress=ctx.progress)
    if en.keys.shape[0] == 0:
        out["closest_note"] = ("no design passes the part-rating checks (reducer torque and speed, tyre speed "
                               "symbol and load): no relaxation of the requirements helps; add parts")
        return out
    pos, total = closest_design(eparts, en, ctx.objective)
    if pos is None:
        out["closest_note"] = ("no design passes the part-rating checks with a finite acceleration time to "
                               "accel_to_kmh (needed by the accel_time objective)")
        return out
    out["conflicts"] = conflicts(ctx, en, max_size=max_conflict_size, base=eparts.problem.requirements)
    more, rows = _relaxation(eparts, en, pos)
    relax.update(more)
    i, j, k = (int(x) for x in en.keys[pos])
    metrics = verify_designs(eparts, [(math.nan, i, j, k)], ctx.objective, expect_feasible=False)
    rec = design_record(eparts, i, j, k, metrics)  # against the stated requirements: shows the misses
    relaxed_req = dataclasses.replace(req0, **relax)
    relaxed_parts = with_requirements(parts, relaxed_req)
    ok = bool(feasible(relaxed_parts, evaluate(relaxed_parts, [i], [j], [k]), ctx.objective)[0])
    out["closest"] = {"motor": rec["motor"], "reducer": rec["reducer"], "tyre": rec["tyre"],
                      "total_shortfall": clean(total), "feasible_when_relaxed": ok, "shortfalls": rows,
                      "record": rec}
    out["relaxation"] = relax
    res = ctx.search(relaxed_req)
    out["relaxation_verified"] = res.status == STATUS_OPTIMAL
    if res.designs:
        r2 = ctx.record(res.designs[0], relaxed_req)
        out["relaxed_optimum"] = {"motor": r2["motor"], "reducer": r2["reducer"], "tyre": r2["tyre"],
                                  "objective": clean(res.designs[0][0])}
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
                                   "part-rating checks hard, infinite acceleration time counted as 1e6"},
        "design": None, "requirements": [], "driving_requirements": [], "near_misses": [], "summary": [],
        "impossible": [], "conflicts": [], "closest": None, "relaxation": {}, "relaxation_verified": None,
        "relaxed_optimum": None,
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
        out.append(f"impossible: {d['name']} = {_num(d['required'])} {d['unit']}; "
                   f"{'limit' if d['bound'] == 'exact' else 'at most'} {_num(d['limit'])} {d['unit']} ({d['why']})")
    if inf["conflicts"]:
        out.append("cannot be met together: " + "; ".join(" + ".join(c) for c in inf["conflicts"]))
    elif inf.get("closest") is not None:
        out.append("no conflict among three or fewer requirements: only the full set conflicts")
    if inf.get("closest_note"):
        out.append(inf["closest_note"])
    if inf.get("closest"):
        c = inf["closest"]
        misses = [f"{r['name']} {_num(r['achieved'])} vs {_num(r['required'])} {r['unit']} "
                  f"({_num(r['shortfall_pct'])} % short)" for r in c["shortfalls"] if not r["met"]]
        if misses:
            out.append(f"closest design {c['motor']} + {c['reducer']} + {c['tyre']} misses " + "; ".join(misses))
        else:
            out.append(f"closest design {c['motor']} + {c['reducer']} + {c['tyre']} meets every stated value once "
                       "the vehicle-level impossibilities are relaxed")
        relax = ", ".join(f"{k} = {_num(v)}" for k, v in inf["relaxation"].items())
        out.append(f"relax to {relax}: " + ("a re-solve confirms the study becomes feasible"
                                            if inf["relaxation_verified"] else "NOT confirmed by a re-solve"))
    return out


def diagnose(study: Study, reason: str | None = None, max_conflict_size: int = 2) -> dict:
    """The infeasibility diagnosis `selector solve` attaches to an infeasible result: vehicle-level
    impossibilities, conflicting requirements (singles and pairs by default), the closest design with
    its shortfalls, the relaxation that makes it feasible (verified by a re-solve), and a summary."""
    ctx = _Context(study, study.parts.problem.objective)
    inf = explain_infeasible(ctx, reason, max_conflict_size=max_conflict_size)
    inf["summary"] = infeasible_summary(inf)
    return inf
