"""The orchestrator: load a study, apply procurement filters, search, verify, and build results.

Library users call these functions; the CLI is a thin layer over them. Every design returned
here has been verified by `verify.verify_designs` (exact evaluation and an independent re-check).
"""

from __future__ import annotations

import difflib
import time
import warnings
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from selector import __version__
from selector.engine.evaluate import OBJECTIVE_METRIC, feasible
from selector.engine.parts import PartTables
from selector.engine.verify import verify_designs
from selector.errors import InputError
from selector.inputs import Procurement
from selector.io.problem import load_study
from selector.records import BINDING_RULE, CAUTION, clean, design_record, fmt

if TYPE_CHECKING:
    from selector.engine.search import SearchResult

OBJECTIVE_UNITS = {"cost": "currency", "mass": "kg", "accel_time": "s"}


@dataclass(frozen=True)
class Study:
    """A loaded study: its part tables and the procurement filter (allowed part positions)."""

    parts: PartTables
    allowed: dict
    """{"motors"|"reducers"|"tyres": np.ndarray of allowed positions}."""
    filter_notes: tuple[str, ...] = ()


def open_study(path, procurement: Procurement | None = None) -> Study:
    """Load and validate a problem file and its catalogues, then apply procurement filters.

    ``procurement`` overrides the problem file's [procurement] table where its fields are set.
    """
    with warnings.catch_warnings():
        warnings.simplefilter("default")
        problem, catalogs = load_study(path)
    if procurement is not None:
        base = problem.procurement
        procurement = Procurement(
            distinct=procurement.distinct or base.distinct,
            avoid_suppliers=tuple(procurement.avoid_suppliers) or base.avoid_suppliers,
            max_lead_time_weeks=(procurement.max_lead_time_weeks if procurement.max_lead_time_weeks is not None
                                 else base.max_lead_time_weeks))
        problem = replace(problem, procurement=procurement)
    parts = PartTables.build(problem, catalogs)
    return Study(parts, *procurement_filter(parts))


def procurement_filter(parts: PartTables) -> tuple[dict, tuple[str, ...]]:
    """Allowed positions per catalogue after avoid_suppliers and max_lead_time_weeks."""
    proc = parts.problem.procurement
    avoid = {s.strip().casefold() for s in proc.avoid_suppliers}
    allowed, notes = {}, []
    for kind, arr in (("motors", parts.motors), ("reducers", parts.reducers), ("tyres", parts.tyres)):
        keep = np.ones(len(arr.part), dtype=bool)
        if avoid:
            keep &= ~np.array([s.casefold() in avoid for s in arr.supplier], dtype=bool)
        if proc.max_lead_time_weeks is not None:
            keep &= arr.lead_time_weeks <= proc.max_lead_time_weeks
        if not keep.all():
            notes.append(f"{kind}: {int(keep.sum())} of {keep.size} parts pass the procurement filters")
        allowed[kind] = np.nonzero(keep)[0]
    return allowed, tuple(notes)


def find_part(parts: PartTables, kind: str, part_id: str) -> int:
    """Position of a part id in a catalogue, or an InputError with a did-you-mean suggestion."""
    arr = {"motor": parts.motors, "reducer": parts.reducers, "tyre": parts.tyres}[kind]
    ids = [str(p) for p in arr.part]
    if part_id in ids:
        return ids.index(part_id)
    close = difflib.get_close_matches(part_id, ids, n=3)
    hint = f" Did you mean {', '.join(repr(c) for c in close)}?" if close else ""
    raise InputError(f"--{kind} {part_id!r}: no such part in the {kind} catalogue "
                     f"({parts.problem.catalog_paths.get(kind + 's', '')}).{hint}")


def header(parts: PartTables) -> dict:
    """Common head of every JSON result."""
    p = parts.problem
    return {"selector_version": __version__, "problem": p.name,
            "problem_file": None if p.path is None else str(p.path), "caution": CAUTION}


def records(parts: PartTables, designs, objective: str) -> list[dict]:
    """Verified design records, best first."""
    metrics = verify_designs(parts, designs, objective)
    return [design_record(parts, i, j, k, metrics, pos) for pos, (_, i, j, k) in enumerate(designs)]


def objective_dict(objective: str, designs) -> dict:
    """The `objective` entry of a result: what is minimised, its unit and the best value."""
    return {"minimize": objective, "unit": OBJECTIVE_UNITS[objective], "metric": OBJECTIVE_METRIC[objective],
            "value": clean(designs[0][0]) if designs else None}


def result_dict(study: Study, res: SearchResult, extra: dict | None = None) -> dict:
    """The JSON contract for a search result (solve / shortlist)."""
    from selector.engine.search import STATUS_INFEASIBLE  # loaded already: ``res`` came from it

    parts = study.parts
    out = header(parts)
    out.update({
        "status": res.status,
        "objective": objective_dict(res.objective, res.designs),
        "bound": clean(res.bound), "gap": clean(res.gap),
        "binding_rule": BINDING_RULE,
        "search": {"iterations": res.iterations, **{k: round(v, 4) for k, v in res.timings.items()},
                   "catalogue_sizes": dict(zip(("motors", "reducers", "tyres"), parts.sizes, strict=False)),
                   "combinations": int(np.prod(parts.sizes)), "procurement_filters": list(study.filter_notes)},
    })
    t0 = time.perf_counter()
    out["designs"] = records(parts, res.designs, res.objective)
    res.timings["verify_s"] = res.timings.get("verify_s", 0.0) + time.perf_counter() - t0
    out["search"]["verify_s"] = round(res.timings["verify_s"], 4)
    if res.status == STATUS_INFEASIBLE:
        out["reason"] = res.reason
    if extra:
        out.update(extra)
    return out


def solve(study: Study, count: int = 1, time_limit_s: float | None = None, objective: str | None = None) -> dict:
    """Best design(s) of a study, verified, as the JSON-ready result."""
    from selector.engine.search import search  # the solver stack: imported only when a study is solved

    res = search(study.parts, objective=objective, count=count, allowed=study.allowed, time_limit_s=time_limit_s)
    return result_dict(study, res)


def simulate(study: Study, motor: str, reducer: str, tyre: str) -> dict:
    """Evaluate one design given by part ids: performance, requirements and checks.

    The design record's keys (as in `solve`'s designs) are at the top level, and also under "design".
    """
    parts = study.parts
    i, j, k = (find_part(parts, "motor", motor), find_part(parts, "reducer", reducer),
               find_part(parts, "tyre", tyre))
    objective = parts.problem.objective
    # the exact evaluation, re-checked by the independent computation (figures only: it may be infeasible)
    metrics = verify_designs(parts, [(np.nan, i, j, k)], objective, expect_feasible=False)
    rec = design_record(parts, i, j, k, metrics, 0)
    rec["feasible"] = bool(feasible(parts, metrics, objective)[0])  # the definition solve and explain use
    rec["unmet"] = unmet(parts, rec, metrics)
    out = header(parts)
    out.update(rec)  # motor, reducer, tyre, cost, mass_kg, performance, requirements, checks, ... at the top
    out["design"] = rec
    out["details"] = {"rear_axle_share": clean(metrics["rear_axle_share"][0]),
                      "effective_mass_kg": clean(metrics["effective_mass_kg"][0]),
                      "gear_over_radius_1_m": clean(metrics["gear_over_radius_1_m"][0]),
                      "air_density_kg_m3": clean(parts.problem.environment.air_density_kg_m3)}
    return out


def unmet(parts: PartTables, rec: dict, metrics: dict) -> list[dict]:
    """Why a design is infeasible: [{name, why}] for each failed requirement or part-rating check, and
    ``accel_to_kmh`` when the accel_time objective's target is never reached (infinite time)."""
    out = []
    for r in rec["requirements"] + rec["checks"]:
        if not r["met"]:
            got = ("never reaches accel_to_kmh" if r["name"] == "accel_time_s" and r["achieved"] is None
                   else f"achieved {fmt(r['achieved'])} {r['unit']}")
            out.append({"name": r["name"], "why": f"{got}; required {r['sense']} {fmt(r['required'])} {r['unit']}"})
    objective = parts.problem.objective
    if not np.isfinite(metrics[OBJECTIVE_METRIC[objective]][0]) and objective == "accel_time":
        out.append({"name": "accel_to_kmh",
                    "why": (f"never reaches accel_to_kmh = {fmt(parts.problem.requirements.accel_to_kmh)} km/h "
                            "(infinite time); the accel_time objective counts such a design infeasible")})
    return out


def problem_summary(study: Study) -> dict:
    """What `selector check` prints: parts per catalogue, combinations, requirements, objective."""
    parts = study.parts
    p = parts.problem
    req = {k: v for k, v in vars(p.requirements).items() if v is not None}
    return {**header(parts), "catalogues": {k: str(v) for k, v in p.catalog_paths.items()},
            "parts": dict(zip(("motors", "reducers", "tyres"), parts.sizes, strict=False)),
            "combinations": int(np.prod(parts.sizes)),
            "after_procurement_filters": {k: int(len(v)) for k, v in study.allowed.items()},
            "requirements": req, "objective": p.objective,
            "air_density_kg_m3": clean(p.environment.air_density_kg_m3),
            "path": str(Path(p.path)) if p.path else None}
