"""The exact search: the entry point every study calls, its result and its status.

`search` finds the ``count`` best designs of a study, exactly, ties broken by part-id order. How
optimality is proved depends on the layout (see DEVELOPERS.md, "How optimality is proved"):

- single-axle studies: best-first branch and bound over motors with certified bounds
  (`best_first.SingleAxleSearch`); every design not evaluated exactly has a proved lower bound
  above the result;
- two-unit studies: the same over blocks of drive-unit options (`two_units.TwoUnitSearch`), with the
  MILP relaxation (`model.py`) as the global bound when blocks are many.

Statuses: "optimal" (proved), "infeasible" (proved: no design meets every requirement),
"time_limit" (the best designs found so far, a proved lower bound and the gap).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np

from selector.design import Design
from selector.engine.evaluate import OBJECTIVE_METRIC
from selector.engine.parts import PartTables
from selector.errors import InputError
from selector.inputs import Requirements
from selector.requirements import REL_TOL

STATUS_OPTIMAL = "optimal"
STATUS_INFEASIBLE = "infeasible"
STATUS_TIME_LIMIT = "time_limit"


LIVE: dict = {}
"""The counters of the search running now (``LIVE["stats"]``: blocks, refined, evaluated), for a
progress display; the search only replaces the dict, never reads this."""

@dataclass
class SearchResult:
    """Outcome of one exact search.

    ``designs``: `Design` objects, best first. ``bound``: proven lower bound on the objective (equal
    to the best value when optimal). ``iterations``: blocks (motors or unit options) evaluated
    exactly; ``stats``: counters of the search (blocks, refined bounds, designs evaluated).
    """

    status: str
    objective: str
    designs: list = field(default_factory=list)
    bound: float | None = None
    iterations: int = 0
    reason: str | None = None
    timings: dict = field(default_factory=lambda: {"build_s": 0.0, "solve_s": 0.0, "verify_s": 0.0})
    stats: dict = field(default_factory=dict)

    @property
    def gap(self) -> float | None:
        """Relative gap between the best design and the bound (0 when optimal)."""
        if not self.designs or self.bound is None:
            return None
        best = self.designs[0].value
        return 0.0 if best == self.bound else abs(best - self.bound) / max(abs(best), 1e-12)


class SearchSession:
    """State shared by a series of searches on one study (the frontier's epsilon steps, explain's
    re-solves): memoised bounds live in the part tables' cache; this object carries nothing else
    today and is kept so callers can share future state explicitly."""

    def __init__(self):
        self.searches = 0


def solver():
    """The HiGHS solver through Pyomo's persistent interface (imported only when a search needs it)."""
    from selector.errors import SolverUnavailableError

    try:
        from pyomo.contrib.solver.solvers.highs import Highs
    except Exception as exc:  # pragma: no cover - depends on the installation
        raise SolverUnavailableError(f"cannot load the HiGHS interface of Pyomo: {exc}. "
                                     "Reinstall with: pip install pyomo highspy") from exc
    opt = Highs()
    if not opt.available():
        raise SolverUnavailableError("the HiGHS solver (highspy) is not available. "
                                     "Install it with: pip install highspy")
    return opt


def _impossible(parts: PartTables, req: Requirements) -> str | None:
    """A reason when a requirement is above the speed limiter (no design can meet it), else None."""
    lim = req.speed_limiter_kmh
    if lim is None:
        return None
    for key in ("top_speed_kmh", "accel_to_kmh"):
        v = getattr(req, key)
        needed = key == "top_speed_kmh" or req.accel_time_s is not None
        if v is not None and needed and lim < v * (1 - 1e-9):
            return f"{key} = {v:g} is above speed_limiter_kmh = {lim:g}: the speed is unreachable"
    return None


def search(parts: PartTables, objective: str | None = None, count: int = 1, per_motor: int | None = None,
           requirements: Requirements | None = None, allowed: dict | None = None,
           time_limit_s: float | None = None, threads: int = 1,
           session: SearchSession | None = None, milp: str = "auto") -> SearchResult:
    """Find the ``count`` best designs exactly.

    Parameters
    ----------
    parts : the study's part tables
    objective : "cost" | "mass" | "accel_time" (default: the problem's)
    count : number of best designs wanted [-]
    per_motor : at most this many designs per motor (1 = every design a different motor)
    requirements : override of the problem's requirements (explain, frontier, sweeps)
    allowed : {"motors"|"reducers"|"tyres": positions allowed} (procurement filters, exclusions)
    time_limit_s : wall-clock limit [s]; on expiry status is "time_limit" with the best so far
    threads : solver threads for the MILP stage [-]
    session : state shared with earlier searches of the same study (see `SearchSession`)
    milp : when the single-axle search consults the MILP relaxation: "auto" (once, when many motors
        are still open below the incumbent), "always" (before every block: tests and benchmarks) or
        "never"
    """
    t_start = time.perf_counter()
    objective = objective or parts.problem.objective
    req = requirements or parts.problem.requirements
    _check_objective(objective, req)
    parts = parts.with_requirements(req)
    result = SearchResult(status=STATUS_INFEASIBLE, objective=objective)
    allowed = allowed or {}
    result.reason = _ruled_out(parts, req, allowed)
    if result.reason:
        return result
    deadline = None if time_limit_s is None else t_start + time_limit_s
    stats = {"blocks": 0, "refined": 0, "evaluated": 0}
    LIVE["stats"] = stats  # read (never written) by a progress display in another thread
    engine = _engine(parts, objective, req, allowed, count, per_motor, deadline, stats, milp)
    result.timings["build_s"] = time.perf_counter() - t_start
    t0 = time.perf_counter()
    status, designs, bound = engine.run()
    result.timings["solve_s"] = time.perf_counter() - t0
    result.status, result.designs, result.stats = status, designs, stats
    result.iterations = stats["blocks"]
    if status == STATUS_OPTIMAL:
        result.bound = designs[0].value
    elif status == STATUS_TIME_LIMIT:
        result.bound = bound
    else:
        result.reason = "no design in the catalogues meets every requirement"
    return result


def _check_objective(objective: str, req: Requirements) -> None:
    """Raise `InputError` for an unknown objective or accel_time without a target speed."""
    if objective not in OBJECTIVE_METRIC:
        raise InputError(f"objective {objective!r}: unknown; use one of {', '.join(OBJECTIVE_METRIC)}")
    if objective == "accel_time" and req.accel_to_kmh is None:
        raise InputError("objective accel_time needs [requirements] accel_to_kmh (the target speed of the run)")


def _beyond_traction(parts: PartTables, req: Requirements, allowed: dict) -> str | None:
    """A reason when launch or gradeability is above what the driven axles' traction allows with any
    parts (`traction_bounds.traction_limits`, a proved upper bound), else None."""
    from selector.engine.traction_bounds import traction_limits

    n = parts.sizes
    full = {k: np.arange(size) if allowed.get(k) is None else allowed[k]
            for k, size in zip(("motors", "reducers", "tyres"), n, strict=True)}
    limits = traction_limits(parts, full)
    for key, unit in (("gradeability_pct", "%"), ("launch_accel_mps2", "m/s^2")):
        v = getattr(req, key)
        if v is not None and v > limits[key] * (1 + REL_TOL):
            axles = "both axles" if parts.two_units else f"the {parts.axles[0]} axle"
            return (f"{key} = {v:g} {unit} is above what the traction of {axles} allows with any part "
                    f"({limits[key]:.4g} {unit} at road_friction {parts.problem.environment.road_friction:g})")
    return None


def _ruled_out(parts: PartTables, req: Requirements, allowed: dict) -> str | None:
    """Why the study is infeasible before any search (no parts left, a speed above the limiter, launch
    or grade beyond the driven axles' traction), else None."""
    if any(a is not None and len(a) == 0 for a in allowed.values()):
        return "no parts left after the procurement filters"
    return no_motor_reason(parts, allowed) or _impossible(parts, req) or _beyond_traction(parts, req, allowed)


def no_motor_reason(parts: PartTables, allowed: dict) -> str | None:
    """A reason when a driven axle has no motor left (procurement filter, [drive] filter, loss data), else None."""
    full = {"motors": np.arange(parts.sizes[0]) if allowed.get("motors") is None else allowed["motors"]}
    usable = parts.usable_motors({**full, "reducers": (), "tyres": ()})
    for axle, motors in usable.items():
        if len(motors) == 0:
            filtered = len(full["motors"]) < parts.sizes[0]
            why = ["the procurement filters (avoid_suppliers, max_lead_time_weeks)"] if filtered else []
            if axle in parts.axle_motors:
                why.append(f"[drive] {axle}_motors")
            if parts.two_units and parts.problem.drive.same_unit:
                why.append("[drive] same_unit (a motor allowed on both axles)")
            if parts.problem.energy is not None:
                why.append("the energy study's need for loss data (loss_* columns or an efficiency_map)")
            rule = (f"together, {', '.join(why)} rule out every motor; loosen one of them" if len(why) > 1
                    else f"{why[0]} rules out every motor; loosen it")
            return f"no motor is left for the {axle} axle: {rule}"
    return None


def _engine(parts: PartTables, objective: str, req: Requirements, allowed: dict, count: int, per_motor,
            deadline: float | None, stats: dict, milp: str):
    """The search engine of the study's layout (two units or one axle), set up and not yet run."""
    if parts.two_units:
        from selector.engine.two_units import TwoUnitSearch

        return TwoUnitSearch(parts, objective, req, allowed, count, per_motor, deadline, stats)
    from selector.engine.best_first import SingleAxleSearch

    return SingleAxleSearch(parts, objective, req, allowed, count, per_motor, deadline, stats,
                            milp=milp if parts.problem.energy is None else "never")


def with_requirements(parts: PartTables, req: Requirements) -> PartTables:
    """The same part tables under other requirements."""
    return parts.with_requirements(req)


def replace_requirements(req: Requirements, **changes) -> Requirements:
    """``req`` with some values changed (None drops a requirement)."""
    return replace(req, **changes)


__all__ = ["STATUS_INFEASIBLE", "STATUS_OPTIMAL", "STATUS_TIME_LIMIT", "Design", "SearchResult", "SearchSession",
           "search"]
