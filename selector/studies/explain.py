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
import time

from selector.api import Study, header, objective_dict
from selector.design import Design
from selector.engine.evaluate import OBJECTIVE_METRIC
from selector.engine.search import STATUS_OPTIMAL
from selector.inputs import Requirements
from selector.records import BINDING_RULE, clean
from selector.requirements import BY_NAME, margin_fraction, passes, stated
from selector.studies import explain_text as text
from selector.studies.defaults import NEAR_MISS_PCT, STEP_PCT
from selector.studies.explain_closest import (  # noqa: F401  (re-exported: the module's public names)
    Enumeration,
    closest_design,
    conflicts,
    enumerate_shortfalls,
    impossibilities,
    traction_limits,
)
from selector.studies.explain_common import (  # noqa: F401
    Context,
    better,
    changes,
    design_ids,
    dropped,
    limited_by,
    motors_of,
    reach_speed_kmh,
    with_requirements,
)
from selector.studies.explain_relax import explain_infeasible, loosens, round_safe  # noqa: F401
from selector.studies.explain_text import infeasible_summary  # noqa: F401
from selector.studies.explain_variants import energy_analysis, gearbox_analysis

ACTIVE_RULE = ("re-solve without the requirement: the optimal design changes, or the objective improves "
               "by more than 1e-9 relative")
DEFINITIONS = {
    "binding": f"margin-based, as in solve: {BINDING_RULE} %",
    "active": ACTIVE_RULE,
    "price": "objective saved when the requirement is dropped, or loosened by step_pct "
             "(min requirements x (1 - step), max requirements x (1 + step))",
    "near_miss": "the optimum with one requirement loosened by near_miss_pct, when it beats the optimum (it misses "
                 "only that requirement)",
    "limited_by": "launch and gradeability: what limits the design, motor torque or which axle's traction (the "
                  "limiting traction combination)",
    "closest": "elastic search: least sum over requirements of max(0, -margin_fraction), part-rating checks hard, "
               "an acceleration target never reached counted as 1e6 (also under the accel_time objective, which "
               "needs it reached); ties among such designs go to the highest speed reached, then the objective",
    "relaxation": "every value loosened only (min requirements and accel_to_kmh lowered, max requirements raised, "
                  "or dropped), computed from what the closest design achieves with traction, and confirmed by a "
                  "re-solve; empty when none is confirmed",
    "gearbox": "multi-speed optimum: the best design with every multi-speed reducer excluded (re-solve); "
               "single-speed optimum: the best design with multi-speed reducers only, and whether it is within "
               "near_miss_pct",
    "energy": "price of the range: re-solve without range_km (no battery sized); losing on energy: among the best "
              "designs without range_km, those with cheaper (lighter) parts than the optimum that fail a "
              "requirement or end dearer (heavier) once their battery is counted",
}


SIZED_BY_LEVEL = frozenset({"range_km"})
"""Requirements whose level changes the designs themselves (the battery is sized for range_km): a
design's objective and metrics are taken at the level it was found for, and an optimum at one level
is never reused for another."""


def loosen_value(name: str, value: float, pct: float) -> float:
    """``value`` of requirement ``name`` loosened by ``pct`` percent."""
    f = pct / 100.0
    return value * (1.0 - f) if BY_NAME[name].sense == "min" else value * (1.0 + f)


class _Levels:
    """Known optima of one requirement at several looser levels; answers tighter levels exactly."""

    def __init__(self, ctx: Context, name: str, base: Requirements, optimum: Design):
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

    def at(self, level) -> Design | None:
        """Optimum with the requirement at ``level`` (None: dropped), or None when infeasible."""
        for lv, design in self.known:
            if self.name in SIZED_BY_LEVEL:
                break
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


def _price_entry(ctx: Context, name: str, design: Design | None, level, optimum: Design) -> dict:
    """Objective, saving and the design picked with requirement ``name`` at ``level`` (None: dropped)."""
    base = ctx.parts.problem.requirements
    if design is None:
        return {"required": clean(level), "objective": None, "saved": None, "saved_pct": None, "design": None,
                "achieved": None, "changes_design": False, "changes_motor": False}
    req = dropped(base, name) if level is None else dataclasses.replace(base, **{name: level})
    ctx.record(design, req)  # verified under the relaxed requirements
    saved = optimum.value - design.value
    at = req if name in SIZED_BY_LEVEL else base
    return {"required": clean(level), "objective": clean(design.value), "saved": clean(max(saved, 0.0)),
            "saved_pct": clean(100.0 * max(saved, 0.0) / abs(optimum.value)) if optimum.value else None,
            "design": ctx.ids(design), "achieved": clean(ctx.metric_of(design, at, BY_NAME[name].metric)),
            "changes_design": design.key != optimum.key, "changes_motor": motors_of(design) != motors_of(optimum)}


def _near_miss(ctx: Context, r, required: float, d_near: Design, level: float, optimum: Design) -> dict:
    """A near miss: the optimum with one requirement loosened to ``level`` that beats the optimum."""
    base = ctx.parts.problem.requirements
    loosened = dataclasses.replace(base, **{r.name: level})
    ctx.record(d_near, loosened)
    achieved = ctx.metric_of(d_near, loosened if r.name in SIZED_BY_LEVEL else base, r.metric)
    frac = float(margin_fraction(r.sense, required, achieved))
    out = {"name": r.name, "required": clean(required), "achieved": clean(achieved), "unit": r.unit,
           "miss": clean(abs(achieved - required)), "miss_pct": clean(-100.0 * frac),
           "objective": clean(d_near.value), "saved": clean(optimum.value - d_near.value),
           "saved_pct": clean(100.0 * (optimum.value - d_near.value) / abs(optimum.value)) if optimum.value else None,
           "design": ctx.ids(d_near), "changes_motor": motors_of(d_near) != motors_of(optimum)}
    out["sentence"] = text.near_miss_sentence(out, ctx.objective, optimum.value)
    return out


def explain_feasible(ctx: Context, optimum: Design, step_pct: float, near_miss_pct: float) -> dict:
    """Requirement table with margins, activity, prices, limiting axles, driving requirements, near
    misses, and the gearbox and energy sections."""
    parts = ctx.parts
    base = parts.problem.requirements
    rec = ctx.record(optimum, base)
    rows, near = [], []
    by_row = {r["name"]: r for r in rec["requirements"]}
    for r, required in stated(parts.problem):
        levels = _Levels(ctx, r.name, base, optimum)
        d_drop = levels.at(None)
        step = loosen_value(r.name, required, step_pct)
        d_step = levels.at(step)
        d_near = levels.at(loosen_value(r.name, required, near_miss_pct))
        row = dict(by_row[r.name])
        why = limited_by(parts, optimum.key, r.name, [rec["mass_kg"]])
        if why is not None:
            row["limited_by"] = why
        row["active"] = bool(d_drop is not None and changes(optimum, d_drop))
        row["price"] = {"dropped": _price_entry(ctx, r.name, d_drop, None, optimum),
                        "loosened": _price_entry(ctx, r.name, d_step, step, optimum)}
        rows.append(row)
        if d_near is not None and better(d_near.value, optimum.value):
            near.append(_near_miss(ctx, r, required, d_near, loosen_value(r.name, required, near_miss_pct), optimum))
    driving = _driving(rows)
    gearbox = gearbox_analysis(ctx, optimum, near_miss_pct)
    energy = energy_analysis(ctx, optimum)
    summary = (text.feasible_summary(rows, driving, rec, ctx.objective, step_pct)
               + text.gearbox_sentences(gearbox, ctx.objective) + text.energy_sentences(energy, ctx.objective))
    return {"design": rec, "requirements": rows, "driving_requirements": driving, "near_misses": near,
            "gearbox": gearbox, "energy": energy, "summary": summary}


def _driving(rows: list[dict]) -> list[str]:
    """Requirements whose removal changes the motor, largest saving first."""
    cand = [r for r in rows if r["price"]["dropped"]["changes_motor"]]
    cand.sort(key=lambda r: (-(r["price"]["dropped"]["saved"] or 0.0), r["name"]))
    return [r["name"] for r in cand]


# ----------------------------------------------------------------------------- entry points

def _objective_entry(objective: str, designs: list[Design]) -> dict:
    """The `objective` entry (as `api.objective_dict`; the unit from `explain_text.UNITS`)."""
    out = objective_dict(objective if objective in text.API_UNITS else "cost", [(d.value,) for d in designs])
    out.update({"minimize": objective, "unit": text.UNITS[objective], "metric": OBJECTIVE_METRIC[objective]})
    return out


def explain(study: Study, step_pct: float = STEP_PCT, near_miss_pct: float = NEAR_MISS_PCT,
            progress: bool = False) -> dict:
    """The full explanation of a study as a JSON-ready dict (keys documented in README.md).

    Parameters
    ----------
    study : a loaded study (`api.open_study`); one- or two-unit, any gearbox, with or without [energy]
    step_pct : loosening step for the price of each requirement [%]
    near_miss_pct : largest miss of a near-miss design, and the margin of the gearbox comparison [%]
    progress : show a tqdm progress bar on stderr for large enumerations
    """
    t0 = time.perf_counter()
    parts = study.parts
    ctx = Context(study, parts.problem.objective, progress=progress)
    res = ctx.search(parts.problem.requirements)
    out = header(parts)
    out.update({
        "status": res.status, "objective": _objective_entry(ctx.objective, res.designs),
        "step_pct": step_pct, "near_miss_pct": near_miss_pct, "definitions": dict(DEFINITIONS),
        "design": None, "requirements": [], "driving_requirements": [], "near_misses": [], "gearbox": None,
        "energy": None, "summary": [], "impossible": [], "conflicts": [], "closest": None, "relaxation": {},
        "relaxation_verified": None, "relaxed_optimum": None, "relaxation_options": [], "relaxation_note": None,
    })
    if res.status == STATUS_OPTIMAL and res.designs:
        out.update(explain_feasible(ctx, res.designs[0], step_pct, near_miss_pct))
    else:
        inf = explain_infeasible(ctx, res.reason)
        out.update(inf)
        out["requirements"] = [{"name": r.name, "required": clean(v), "unit": r.unit,
                                "sense": "at least" if r.sense == "min" else "at most"}
                               for r, v in stated(parts.problem)]
        out["summary"] = text.infeasible_summary(inf)
    out["searches"] = {"count": ctx.searches, "search_s": round(ctx.search_s, 3),
                       "elapsed_s": round(time.perf_counter() - t0, 3)}
    return out


def diagnose(study: Study, reason: str | None = None, max_conflict_size: int = 2) -> dict:
    """The infeasibility diagnosis `selector solve` attaches to an infeasible result: vehicle-level
    impossibilities, conflicting requirements (singles and pairs by default), the closest design with
    its shortfalls, the relaxation that makes it feasible (verified by a re-solve), and a summary."""
    ctx = Context(study, study.parts.problem.objective)
    inf = explain_infeasible(ctx, reason, max_conflict_size=max_conflict_size)
    inf["summary"] = text.infeasible_summary(inf, max_conflict_size)
    return inf
