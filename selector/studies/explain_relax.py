"""Explain, infeasible study: relaxations that loosen only, computed from what the closest design achieves
(with traction), each confirmed by a re-solve; and the assembled infeasibility analysis (data only).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from selector.design import Design
from selector.engine.evaluate import evaluate, feasible
from selector.engine.parts import PartTables
from selector.engine.search import STATUS_OPTIMAL, no_motor_reason
from selector.inputs import Requirements
from selector.records import clean
from selector.requirements import margin_fraction, passes, stated
from selector.studies.defaults import EXPLAIN_CONFIRM_S, EXPLAIN_MAX_DESIGNS
from selector.studies.explain_closest import closest_design, conflicts, enumerate_shortfalls, impossibilities
from selector.studies.explain_common import (
    BISECT_STEPS,
    Context,
    accel_times,
    limited_by,
    reach_speed_kmh,
    sense_of,
    verified_record,
    with_requirements,
)

REACH_FRACTION = 0.95
"""A target speed lowered below a design's reach speed is set to at most this share of it, away from
the asymptote where the acceleration time grows without bound [-]."""
FURTHER_PCT = 1.0
"""When no candidate relaxation is confirmed, the first one is tried once more, this much looser [%]."""


def round_safe(value: float, sense: str, digits: int = 4) -> float:
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
        if not (value < old if sense_of(name) == "min" else value > old):
            return False
    return True


def further(relax: dict, pct: float) -> dict:
    """``relax`` with every value moved ``pct`` percent further in its loosening direction."""
    out = {}
    for name, value in relax.items():
        out[name] = None if value is None else round_safe(
            value * (1.0 - pct / 100.0 if sense_of(name) == "min" else 1.0 + pct / 100.0), sense_of(name))
    return out


class _Run:
    """The acceleration run of one design (its key row and full mass) to any target."""

    def __init__(self, parts: PartTables, key, mass_kg: float):
        self.parts, self.key, self.mass = parts, np.asarray([key], dtype=np.int64), np.asarray([mass_kg])

    def time_to(self, target_kmh: float) -> float:
        """Time from rest to ``target_kmh`` [s] (inf when never reached)."""
        return float(accel_times(self.parts, self.key, target_kmh, self.mass)[0])

    def speed_within(self, limit_s: float, hi_kmh: float) -> float:
        """Highest target speed in (0, ``hi_kmh``) reached within ``limit_s`` [km/h], by bisection (the
        time grows with the target speed); always a speed the design reaches in time (the lower end)."""
        lo, hi = 0.0, float(hi_kmh)
        for _ in range(BISECT_STEPS):
            mid = 0.5 * (lo + hi)
            if bool(passes("max", limit_s, self.time_to(mid))):
                lo = mid
            else:
                hi = mid
        return lo


def accel_candidates(parts: PartTables, key, mass_kg: float, objective: str) -> tuple[list[dict], dict]:
    """Loosenings of the acceleration requirement that one design meets, preferred first.

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
    run = _Run(parts, key, mass_kg)
    reach, why = reach_speed_kmh(parts, run.key, run.mass)
    t = run.time_to(target)
    facts = {"time_s": t, "reach_kmh": float(reach[0]), "reach_limit": why[0]}
    if math.isfinite(t) and (limit is None or bool(passes("max", limit, t))):
        return [{}], facts
    out = []
    if math.isfinite(t):  # reaches the target, too slowly
        out.append({"accel_time_s": round_safe(t, "max")})
        v = round_safe(run.speed_within(limit, target), "min")
        if v > 0:
            out.append({"accel_to_kmh": v})
        return out, facts
    hi = min(facts["reach_kmh"], target)  # never reaches the target: lower it below the reach speed
    if not hi > 0:
        return ([{"accel_time_s": None}] if limit is not None and objective != "accel_time" else []), facts
    if limit is not None:
        v = round_safe(run.speed_within(limit, hi), "min")
        if v > 0:
            out.append({"accel_to_kmh": v})
    v = round_safe(REACH_FRACTION * hi, "min")
    t_v = run.time_to(v) if v > 0 else math.inf
    if math.isfinite(t_v):
        if limit is None:
            out.append({"accel_to_kmh": v})
        elif not bool(passes("max", limit, t_v)):
            out.append({"accel_to_kmh": v, "accel_time_s": round_safe(t_v, "max")})
    return out, facts


def _shortfall_row(parts: PartTables, key, m: dict, r, required: float) -> dict:
    achieved = float(m[r.metric][0])
    ok = bool(passes(r.sense, required, achieved))
    frac = float(margin_fraction(r.sense, required, achieved)) if math.isfinite(achieved) else -math.inf
    row = {"name": r.name, "required": clean(required), "achieved": clean(achieved), "unit": r.unit,
           "sense": "at least" if r.sense == "min" else "at most",
           "shortfall": 0.0 if ok else clean(abs(achieved - required)),
           "shortfall_pct": 0.0 if ok else clean(-100.0 * frac), "met": ok}
    why = limited_by(parts, key, r.name, m["mass_kg"])
    if why is not None:
        row["limited_by"] = why
    return row


def relaxation(parts: PartTables, key, objective: str) -> tuple[list[dict], list, dict]:
    """Candidate relaxations that make the design ``key`` feasible (preferred first), its shortfall
    rows, and the facts of its acceleration run (see `accel_candidates`).

    ``parts`` carries the requirements the elastic search used (the stated ones, with an
    acceleration target above the speed limiter already lowered to the limiter). Every value moves
    in its loosening direction only; a requirement the design misses outside acceleration is
    relaxed to what the design achieves (rounded to 4 significant digits on the safe side), or
    dropped when the design cannot even start (zero or negative grade or launch).
    """
    req = parts.problem.requirements
    m = evaluate(parts, [key], accel=False)
    accel = req.accel_time_s is not None or objective == "accel_time"
    alts, facts = accel_candidates(parts, key, float(m["mass_kg"][0]), objective) if accel else ([{}], {})
    accel_row = {} if not facts else {"accel_to_kmh": clean(req.accel_to_kmh), "reach_kmh": clean(facts["reach_kmh"]),
                                      "reach_limit": facts["reach_limit"]}
    common, rows = {}, []
    for r, required in stated(parts.problem):
        if r.name == "accel_time_s":
            m["accel_time_s"] = np.asarray([facts["time_s"]])
        rows.append(_shortfall_row(parts, key, m, r, required))
        if r.name == "accel_time_s":
            rows[-1].update(accel_row)
        if rows[-1]["met"] or r.name == "accel_time_s":
            continue
        value = round_safe(float(m[r.metric][0]), r.sense)
        common[r.name] = value if math.isfinite(value) and value > 0 else None
    if objective == "accel_time" and req.accel_time_s is None:
        # the objective's own requirement: the run must reach accel_to_kmh (infinite time: infeasible)
        ok = math.isfinite(facts["time_s"])
        gap = max(req.accel_to_kmh - facts["reach_kmh"], 0.0)
        rows.append({"name": "accel_to_kmh", "required": clean(req.accel_to_kmh), "achieved": clean(facts["reach_kmh"]),
                     "unit": "km/h", "sense": "at least", "shortfall": 0.0 if ok else clean(gap),
                     "shortfall_pct": 0.0 if ok else clean(100.0 * gap / req.accel_to_kmh), "met": ok, **accel_row})
    return [{**common, **a} for a in alts], rows, facts


def try_relaxation(ctx: Context, relax: dict) -> dict:
    """Re-solve the study with ``relax`` applied: {relaxation, verified, relaxed_optimum}."""
    req = dataclasses.replace(ctx.parts.problem.requirements, **relax)
    res = ctx.search(req)
    opt = None
    if res.status == STATUS_OPTIMAL and res.designs:
        r2 = ctx.record(res.designs[0], req)
        opt = {"motor": r2["motor"], "reducer": r2["reducer"], "tyre": r2["tyre"], "units": r2["units"],
               "objective": clean(res.designs[0].value)}
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


def _without_closest(out: dict, note: str) -> dict:
    """An infeasible diagnosis that has no closest design: no relaxation, said explicitly."""
    out["closest_note"] = note
    out["relaxation_verified"] = False
    out["relaxation_note"] = f"no confirmed relaxation: {note}"
    return out


def _confirmed(ctx: Context, req0: Requirements, first: dict, cands: list[dict]) -> list[dict]:
    """Re-solve each loosening candidate (``first`` applied to each); when none is confirmed, the first
    once more `FURTHER_PCT` looser."""
    tried = []
    for c in ({**first, **c} for c in cands):
        if loosens(req0, c) and c not in tried:
            tried.append(c)
    options = [try_relaxation(ctx, c) for c in tried]
    if tried and not any(o["verified"] for o in options):  # search a little further, once
        more = further(tried[0], FURTHER_PCT)
        if loosens(req0, more) and more not in tried:
            options.append(try_relaxation(ctx, more))
    return options


def _impossible_only(ctx: Context, out: dict, first: dict, n_designs: int) -> dict:
    """The diagnosis of a study too large to enumerate (`EXPLAIN_MAX_DESIGNS`): each impossibility is a
    conflict by itself, and the relaxation to the impossibilities' limits (rounded on the loosening
    side) is tried by a re-solve; no closest design."""
    req0 = ctx.parts.problem.requirements
    out["conflicts"] = [[d["name"]] for d in out["impossible"]]
    cand = dict(first)
    for d in out["impossible"]:
        if d["name"] in ("gradeability_pct", "launch_accel_mps2"):
            cand[d["name"]] = round_safe(float(d["limit"]), "min")
    note = (f"the closest design is not searched: {n_designs:,} designs are above explain's enumeration limit "
            f"({EXPLAIN_MAX_DESIGNS:,}); narrow the catalogues (procurement or [drive] filters) to get it")
    ctx.time_limit_s = EXPLAIN_CONFIRM_S
    try:
        options = _confirmed(ctx, req0, {}, [cand]) if cand else []
    finally:
        ctx.time_limit_s = None
    chosen = next((o for o in options if o["verified"]), None)
    out["closest_note"] = note
    out["relaxation_options"] = options
    out["relaxation_verified"] = chosen is not None
    if chosen is not None:
        out["relaxation"], out["relaxed_optimum"] = chosen["relaxation"], chosen["relaxed_optimum"]
    else:
        out["relaxation_note"] = (f"no confirmed relaxation: {note}" if not options else
                                  f"no confirmed relaxation: loosening the impossible requirements to their limits "
                                  f"did not make a re-solve feasible within {EXPLAIN_CONFIRM_S:g} s; {note}")
    return out


def explain_infeasible(ctx: Context, reason: str | None, max_conflict_size: int = 3) -> dict:
    """Impossibilities, conflicts (up to ``max_conflict_size`` requirements), closest design and the
    relaxation confirmed by a re-solve (or, when none is confirmed, an explicit note)."""
    parts, allowed = ctx.parts, ctx.study.allowed
    out = {"reason": reason, "impossible": impossibilities(parts, allowed), "conflicts": [], "closest": None,
           "relaxation": {}, "relaxation_verified": None, "relaxed_optimum": None, "relaxation_options": [],
           "relaxation_note": None}
    if any(len(a) == 0 for a in allowed.values()):
        return _without_closest(out, "no parts left after the procurement filters: relax avoid_suppliers or "
                                     "max_lead_time_weeks")
    no_motor = no_motor_reason(parts, allowed)
    if no_motor:
        return _without_closest(out, no_motor)
    first, req0, eparts = {}, parts.problem.requirements, parts
    if any(d["name"] == "accel_to_kmh" for d in out["impossible"]):
        # no design reaches a target above the limiter: search with the target lowered to the limiter
        first["accel_to_kmh"] = float(req0.speed_limiter_kmh)
        eparts = with_requirements(parts, dataclasses.replace(req0, accel_to_kmh=req0.speed_limiter_kmh))
    n_designs = parts.subset(allowed["motors"], allowed["reducers"], allowed["tyres"]).combinations
    if n_designs > EXPLAIN_MAX_DESIGNS:
        return _impossible_only(ctx, out, first, n_designs)
    en = enumerate_shortfalls(eparts, allowed, ctx.objective, progress=ctx.progress)
    if en.keys.shape[0] == 0:
        cycle = ", and following the energy study's cycle" if parts.problem.energy is not None else ""
        return _without_closest(out, f"no design passes the part-rating checks (reducer torque and speed, tyre "
                                     f"speed symbol and load{cycle}): no relaxation of the requirements helps; "
                                     "add parts")
    pos, total = closest_design(eparts, en, ctx.objective)
    out["conflicts"] = conflicts(ctx, en, max_size=max_conflict_size, base=eparts.problem.requirements)
    key = en.keys[pos]
    cands, rows, facts = relaxation(eparts, key, ctx.objective)
    options = _confirmed(ctx, req0, first, cands)
    chosen = next((o for o in options if o["verified"]), None)
    rec = verified_record(eparts, Design.of(math.nan, key), ctx.objective, expect_feasible=False)  # shows the misses
    ok = False
    if chosen is not None:
        relaxed = with_requirements(parts, dataclasses.replace(req0, **chosen["relaxation"]))
        ok = bool(feasible(relaxed, evaluate(relaxed, [key]), ctx.objective)[0])
    out["closest"] = {"motor": rec["motor"], "reducer": rec["reducer"], "tyre": rec["tyre"], "units": rec["units"],
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
