"""Explain, infeasible study: vehicle-level impossibilities, the elastic enumeration, the closest design
and minimal conflicting sets of requirements. Returns data only (sentences: `explain_text`).
"""

from __future__ import annotations

import itertools
import sys
from dataclasses import dataclass

import numpy as np

from selector.engine.evaluate import OBJECTIVE_METRIC, evaluate, order_best, slice_keys, tie_tolerance, unit_options
from selector.engine.parts import PartTables
from selector.engine.search import STATUS_INFEASIBLE
from selector.engine.traction_bounds import traction_limits
from selector.inputs import Requirements
from selector.io.catalog import distinct_numbers
from selector.records import clean
from selector.requirements import REL_TOL, check_rows, margin_fraction, passes, stated
from selector.studies.explain_common import Context, accel_times, reach_speed_kmh
from selector.studies.explain_text import num

INF_SHORTFALL = 1e6
"""Normalised shortfall counted for an infinite acceleration time (target unreachable) [-]."""
PROGRESS_MIN_COMBINATIONS = 200_000
"""Show a progress bar (stderr, table output only) for enumerations above this size [-]."""
ACCEL_BATCH = 4096
"""Designs per batch of lazily computed acceleration times in the elastic search [-]."""


# ----------------------------------------------------------------------------- impossibilities

def impossibilities(parts: PartTables, allowed: dict) -> list[dict]:
    """Requirements that no part can fix: above the speed limiter or the driven axles' traction limit."""
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
        axle = "front and rear axles" if parts.two_units else f"{'rear' if parts.rear_drive else 'front'} axle"
        for name, unit in (("launch_accel_mps2", "m/s^2"), ("gradeability_pct", "%")):
            value = getattr(req, name)
            if value is not None and value > t[name] * (1 + REL_TOL):
                out.append({"name": name, "required": clean(value), "limit": clean(t[name]), "unit": unit,
                            "bound": "at most", "axle": "both" if parts.two_units else parts.axles[0],
                            "why": (f"traction of the driven {axle} allows at most {num(t[name])} {unit} "
                                    f"(road_friction {num(parts.problem.environment.road_friction)}, best driven-axle "
                                    f"share {num(t['driven_share'])}, lowest Crr {num(t['crr'])}, "
                                    "effective mass taken as the vehicle mass); no motor, ratio or tyre can fix it")})
    return out


# ----------------------------------------------------------------------------- elastic enumeration

@dataclass
class Enumeration:
    """Every design passing the part-rating checks, with its shortfall per stated requirement.

    ``names`` are the stated requirements (registry order); ``short[:, n]`` the normalised
    shortfall max(0, -margin_fraction) of requirement n (accel_time_s: NaN until computed);
    ``fail`` a bit mask of failed requirements (bit n; accel_time_s bit unknown until computed);
    ``keys`` (n, 5) key rows; ``mass_kg`` the full vehicle mass (a battery included); ``objective``
    the objective metric (NaN for accel_time until computed).
    """

    names: list
    keys: np.ndarray
    short: np.ndarray
    fail: np.ndarray
    objective: np.ndarray
    mass_kg: np.ndarray
    combinations: int


def hard_ok(parts: PartTables, metrics: dict) -> np.ndarray:
    """True where every part-rating check passes (per axle in two-unit studies; the cycle check in energy
    studies)."""
    ok = np.ones(len(metrics["mass_kg"]), dtype=bool)
    for c, _axle, limit, demand in check_rows(parts.axles, parts.problem.energy is not None):
        ok &= passes(c.sense, metrics[limit], metrics[demand])
    return ok


def _slices(parts: PartTables, allowed: dict):
    """Key rows of the study's designs within ``allowed``, one slice per (front, or only) motor."""
    red, tyr = allowed["reducers"], allowed["tyres"]
    if not parts.two_units:
        for i in allowed["motors"]:
            yield slice_keys(parts, int(i), red, tyr)
        return
    same = parts.problem.drive.same_unit
    rear = None if same else unit_options(parts, "rear", allowed["motors"], red)
    front_ok = parts.axle_motors.get("front")
    for i in allowed["motors"]:
        if front_ok is not None and int(i) not in set(front_ok.tolist()):
            yield np.empty((0, 5), dtype=np.int64)
            continue
        if same:
            keys = slice_keys(parts, int(i), red, tyr, axle="front")
            keys[:, 2], keys[:, 3] = keys[:, 0], keys[:, 1]
            rear_ok = parts.axle_motors.get("rear")
            if rear_ok is not None and int(i) not in set(rear_ok.tolist()):
                keys = keys[:0]
        else:
            keys = slice_keys(parts, int(i), red, tyr, axle="front", other=rear)
        yield keys


def _shortfalls(parts: PartTables, m: dict, ok: np.ndarray, names: list):
    """(shortfall matrix, fail masks) of the rating-passing designs ``ok`` of one slice."""
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
    return sh, fl


def enumerate_shortfalls(parts: PartTables, allowed: dict, objective: str, progress: bool = False) -> Enumeration:
    """Exact metrics (without the acceleration run) of every rating-passing design, by motor slices."""
    names = [r.name for r, _ in stated(parts.problem)]
    n_combo = parts.subset(allowed["motors"], allowed["reducers"], allowed["tyres"]).combinations
    bar = None
    if progress and n_combo > PROGRESS_MIN_COMBINATIONS:
        from tqdm import tqdm

        bar = tqdm(total=len(allowed["motors"]), desc="closest design: motors", unit="motor", file=sys.stderr,
                   leave=False)
    keys, shorts, fails, objs, masses = [], [], [], [], []
    metric = OBJECTIVE_METRIC[objective]
    try:
        for sk in _slices(parts, allowed):
            if sk.shape[0]:
                m = evaluate(parts, sk, accel=False)
                ok = hard_ok(parts, m)
                if ok.any():
                    sh, fl = _shortfalls(parts, m, ok, names)
                    keys.append(sk[ok])
                    shorts.append(sh)
                    fails.append(fl)
                    masses.append(m["mass_kg"][ok])
                    objs.append(m[metric][ok] if metric != "accel_time_s" else np.full(int(ok.sum()), np.nan))
            if bar is not None:
                bar.update(1)
    finally:
        if bar is not None:
            bar.close()
    if not keys:
        return Enumeration(names, np.empty((0, 5), dtype=np.int64), np.empty((0, len(names))),
                           np.empty(0, dtype=np.int64), np.empty(0), np.empty(0), n_combo)
    return Enumeration(names, np.concatenate(keys), np.concatenate(shorts), np.concatenate(fails),
                       np.concatenate(objs), np.concatenate(masses), n_combo)


def _accel_batch(parts: PartTables, en: Enumeration, idx, a_col, objective: str):
    """Acceleration times of designs ``idx`` of ``en``; fills the accel shortfall; returns (times, totals)."""
    req = parts.problem.requirements
    t = accel_times(parts, en.keys[idx], req.accel_to_kmh, en.mass_kg[idx])
    tot = np.nansum(en.short[idx], axis=1)
    if a_col is not None:
        frac = margin_fraction("max", req.accel_time_s, t)
        good = passes("max", req.accel_time_s, t)
        sh = np.where(good, 0.0, np.nan_to_num(-frac, nan=INF_SHORTFALL, posinf=INF_SHORTFALL))
        sh = np.where(np.isfinite(t), sh, INF_SHORTFALL)
        en.short[idx, a_col] = sh
        en.fail[idx] |= np.where(good, 0, 1 << a_col).astype(np.int64)
        tot = tot + sh
    elif objective == "accel_time":  # the objective's own requirement: reach accel_to_kmh
        tot = tot + np.where(np.isfinite(t), 0.0, INF_SHORTFALL)
    if objective == "accel_time":
        en.objective[idx] = t
    return t, tot


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
    a_col = en.names.index("accel_time_s") if "accel_time_s" in en.names else None
    need_accel = a_col is not None or objective == "accel_time"
    base = np.nansum(en.short, axis=1)
    total = base.copy()
    times = np.full(base.shape, np.nan)
    if need_accel:
        order = np.lexsort(tuple(en.keys[:, c] for c in range(4, -1, -1)) + (base,))
        total[:] = np.inf
        best = np.inf
        for s in range(0, order.size, ACCEL_BATCH):
            idx = order[s:s + ACCEL_BATCH]
            if base[idx[0]] > best + 1e-9 * max(best, 1.0):
                break
            times[idx], total[idx] = _accel_batch(parts, en, idx, a_col, objective)
            best = min(best, float(total[idx].min()))
    finite = np.isfinite(total)
    if not finite.any():
        return None, None
    best = float(total[finite].min())
    tied = np.nonzero(finite & (total <= best + 1e-9 * max(best, 1.0)))[0]
    if need_accel and tied.size > 1 and not np.isfinite(times[tied]).any():
        reach, _ = reach_speed_kmh(parts, en.keys[tied], en.mass_kg[tied])
        top = float(reach.max())
        tied = tied[reach >= top - tie_tolerance(top)]
    obj = np.where(np.isfinite(en.objective[tied]), en.objective[tied], np.inf)
    pick = tied[order_best(obj, en.keys[tied], 1)] if np.isfinite(obj).any() else tied[:1]
    pos = int(pick[0]) if np.size(pick) else int(tied[0])
    return pos, float(total[pos])


# ----------------------------------------------------------------------------- conflicts

def conflicts(ctx: Context, en: Enumeration, max_size: int = 3, base: Requirements | None = None) -> list[list[str]]:
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
    keep = ("accel_to_kmh", "speed_limiter_kmh")
    if ctx.objective == "accel_time" or "accel_time_s" in names:
        # the accel_time objective's feasible set is exactly "reaches accel_to_kmh"
        only = Requirements(**{k: getattr(base, k) for k in keep})
        if ctx.search(only, objective="accel_time").status == STATUS_INFEASIBLE:
            return [["accel_to_kmh"]]
    for size in range(1, min(max_size, len(names)) + 1):
        for combo in itertools.combinations(range(len(names)), size):
            if any(set(f) <= set(combo) for f in found):
                continue
            subset = [names[n] for n in combo]
            if "accel_time_s" in subset or ctx.objective == "accel_time":
                req = Requirements(**{k: getattr(base, k) for k in keep}, **{n: getattr(base, n) for n in subset})
                bad = ctx.search(req).status == STATUS_INFEASIBLE
            else:
                bit = sum(1 << n for n in combo)
                bad = not bool(np.any((masks & bit) == 0))
            if bad:
                found.append(combo)
    return [[names[n] for n in f] for f in found]


__all__ = ["Enumeration", "closest_design", "conflicts", "enumerate_shortfalls", "impossibilities",
           "traction_limits"]
