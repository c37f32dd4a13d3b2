"""The exact search: relax (MILP), verify (exact physics on a motor's whole slice), cut, repeat.

Every model row is a relaxation, so the MILP optimum bounds the true optimum from below. Each
iteration takes the motor the MILP picks, evaluates that motor's entire reducer x tyre slice
with the exact physics (`evaluate.screen`), adds its best designs to a pool, forbids the motor,
and tightens an objective cutoff to the pool's ``count``-th best value. When the MILP becomes
infeasible, no unevaluated motor can beat the pool, so the pool is exact. At most one iteration
per motor. Ties within 1e-9 relative are broken by part-id order (motor, reducer, tyre).
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field, replace

import numpy as np

from selector.engine.bounds import accel_windows
from selector.engine.evaluate import (
    OBJECTIVE_METRIC,
    order_best,
    screen,
    slice_indices,
    tie_tolerance,
)
from selector.engine.model import SelectionModel
from selector.engine.parts import PartTables
from selector.errors import InputError, SolverUnavailableError
from selector.inputs import Requirements
from selector.physics.performance import accel_time_s
from selector.requirements import passes
from selector.units import kmh_to_mps

BATCH_EXTRA = 3
"""accel_time objective: motors evaluated exactly per MILP solve besides the one it proposes [-]."""

SOLVER_OPTIONS = {"mip_rel_gap": 0.0, "mip_abs_gap": 1e-9, "presolve": "off"}
"""HiGHS options: exact gaps; presolve off (measured faster on these small dense one-hot models,
see benchmarks/). Each solve only proposes a motor; exactness comes from the slice evaluation."""

STATUS_OPTIMAL = "optimal"
STATUS_INFEASIBLE = "infeasible"
STATUS_TIME_LIMIT = "time_limit"


@dataclass
class SearchResult:
    """Outcome of one exact search.

    ``designs``: list of (objective value, motor idx, reducer idx, tyre idx), best first.
    ``bound``: proven lower bound on the objective (equal to the best value when optimal).
    """

    status: str
    objective: str
    designs: list = field(default_factory=list)
    bound: float | None = None
    iterations: int = 0
    reason: str | None = None
    timings: dict = field(default_factory=lambda: {"build_s": 0.0, "solve_s": 0.0, "verify_s": 0.0})

    @property
    def gap(self) -> float | None:
        """Relative gap between the best design and the bound (0 when optimal)."""
        if not self.designs or self.bound is None:
            return None
        best = self.designs[0][0]
        return 0.0 if best == self.bound else abs(best - self.bound) / max(abs(best), 1e-12)


class SliceCache:
    """Exact evaluations of whole motor slices, shared by searches that differ only in the limits
    ``budget``, ``max_mass_kg`` and ``accel_time_s`` (the frontier's epsilon steps).

    Per evaluated motor it keeps the designs that meet every *other* requirement and check, with
    their cost, mass and acceleration time; a search then applies its own limits to these exactly,
    starts from them as incumbents and forbids those motors in the MILP at once.
    """

    VARYING = ("budget", "max_mass_kg", "accel_time_s")

    def __init__(self):
        self.key = None
        self.entries: dict[int, dict] = {}

    def _fixed(self, req: Requirements) -> Requirements:
        return replace(req, **{k: None for k in self.VARYING})

    def _key(self, parts: PartTables, req: Requirements, allowed: dict):
        return (id(parts.cache), self._fixed(req), parts.speed_limit_mps,
                *(None if allowed.get(k) is None else tuple(int(a) for a in allowed[k])
                  for k in ("motors", "reducers", "tyres")))

    def matches(self, parts: PartTables, req: Requirements, allowed: dict) -> bool:
        """True when the cached slices apply to a search with these requirements and parts."""
        return self._key(parts, req, allowed) == self.key

    def bind(self, parts: PartTables, req: Requirements, allowed: dict):
        """Reset the cache when the fixed requirements or the allowed parts differ from before."""
        key = self._key(parts, req, allowed)
        if key != self.key:
            self.key, self.entries = key, {}

    def slice(self, parts: PartTables, req: Requirements, i: int, reducers, tyres) -> dict:
        """Designs of motor i meeting every requirement except the varying limits (computed once)."""
        if i not in self.entries:
            fixed = self._fixed(req)
            fparts = replace(parts, problem=replace(parts.problem, requirements=fixed))
            mi, rj, tk = slice_indices(parts, i, reducers, tyres)
            ok, _ = screen(fparts, mi, rj, tk, "cost", need_accel=False)
            mi, rj, tk = mi[ok], rj[ok], tk[ok]
            t = np.full(mi.shape, np.inf)
            if fixed.accel_to_kmh is not None and mi.size:
                drive, body = parts.design(mi, rj, tk)
                t = accel_time_s(drive, body, kmh_to_mps(fixed.accel_to_kmh))
            self.entries[i] = {"keys": np.stack([mi, rj, tk], axis=1), "cost": parts.cost(mi, rj, tk),
                               "mass_kg": parts.mass_kg(mi, rj, tk), "accel_time_s": t}
        return self.entries[i]

    @staticmethod
    def select(entry: dict, req: Requirements, objective: str):
        """(objective values, keys) of the entry's designs meeting the varying limits of ``req``."""
        ok = np.ones(entry["keys"].shape[0], dtype=bool)
        for name, metric in (("budget", "cost"), ("max_mass_kg", "mass_kg"), ("accel_time_s", "accel_time_s")):
            limit = getattr(req, name)
            if limit is not None:
                ok &= passes("max", limit, entry[metric])
        vals = entry[OBJECTIVE_METRIC[objective]][ok]
        fin = np.isfinite(vals)
        return vals[fin], entry["keys"][ok][fin]


class SearchSession:
    """State shared by a series of searches on one study that differ only in the limits
    ``budget``, ``max_mass_kg`` and ``accel_time_s`` (the frontier's epsilon steps): the exact motor
    slices (`SliceCache`) and, per objective, the built MILP with its loaded solver, whose limits
    and windows are updated in place instead of rebuilding and reloading the model."""

    def __init__(self):
        self.slices = SliceCache()
        self.models: dict = {}

    def model_for(self, parts: PartTables, objective: str, req: Requirements, allowed: dict, windows,
                  accel_target_kmh, build):
        """(model, solver, reused) for this objective and these fixed requirements."""
        key = (objective, self.slices._key(parts, req, allowed),
               tuple(k for k in SliceCache.VARYING if getattr(req, k) is not None), accel_target_kmh)
        if key in self.models:
            model, opt = self.models[key]
            model.reset(req, windows)
            return model, opt, True
        model = build()
        opt = _solver()
        self.models[key] = (model, opt)
        return model, opt, False


def cached_accel_windows(parts: PartTables, target_kmh: float, limit_s: float | None):
    """`bounds.accel_windows`, memoised per part tables, target and limit (explain, frontier and
    sweeps re-solve many times with the same acceleration requirement)."""
    cache = parts.cache.setdefault("windows", {})
    key = (float(target_kmh), None if limit_s is None else float(limit_s), parts.speed_limit_mps)
    if key not in cache:
        cache[key] = accel_windows(parts, kmh_to_mps(target_kmh), limit_s)
    return cache[key]


def _solver():
    try:
        from pyomo.contrib.solver.solvers.highs import Highs
    except Exception as exc:  # pragma: no cover - depends on the installation
        raise SolverUnavailableError(f"cannot load the HiGHS interface of Pyomo: {exc}. "
                                     "Reinstall with: pip install pyomo highspy") from exc
    opt = Highs()
    if not opt.available():
        raise SolverUnavailableError("the HiGHS solver (highspy) is not available. Install it with: pip install highspy")
    return opt


def search(parts: PartTables, objective: str | None = None, count: int = 1, per_motor: int | None = None,
           requirements: Requirements | None = None, allowed: dict | None = None,
           time_limit_s: float | None = None, threads: int = 1,
           session: SearchSession | None = None) -> SearchResult:
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
    threads : HiGHS threads [-]
    session : state shared with earlier searches that differed only in budget, max_mass_kg or
        accel_time_s (exact motor slices, built models); see `SearchSession`
    """
    t_start = time.perf_counter()
    problem = parts.problem
    objective = objective or problem.objective
    req = requirements or problem.requirements
    if objective not in OBJECTIVE_METRIC:
        raise InputError(f"objective {objective!r}: unknown; use one of {', '.join(OBJECTIVE_METRIC)}")
    if objective == "accel_time" and req.accel_to_kmh is None:
        raise InputError("objective accel_time needs [requirements] accel_to_kmh (the target speed of the run)")
    parts = parts.with_requirements(req)
    result = SearchResult(status=STATUS_INFEASIBLE, objective=objective)
    allowed = allowed or {}
    if any(a is not None and len(a) == 0 for a in allowed.values()):
        result.reason = "no parts left after the procurement filters"
        return result

    windows = None
    accel_needed = req.accel_to_kmh is not None and (req.accel_time_s is not None or objective == "accel_time")
    t0 = time.perf_counter()
    if accel_needed:
        if (session is not None and req.accel_time_s is not None and session.slices.entries
                and session.slices.matches(parts, req, allowed)):
            # motors whose slices are known exactly are forbidden in the model: bound only the others
            todo = np.setdiff1d(np.arange(parts.sizes[0]), np.fromiter(session.slices.entries, dtype=np.int64))
            windows = accel_windows(parts, kmh_to_mps(req.accel_to_kmh), req.accel_time_s, motors=todo)
        else:
            windows = cached_accel_windows(parts, req.accel_to_kmh, req.accel_time_s)

    def build():
        return SelectionModel(parts, objective, windows=windows,
                              accel_target_kmh=req.accel_to_kmh if accel_needed else None,
                              accel_limit_s=req.accel_time_s, allowed=allowed)

    if session is not None:
        model, opt, _ = session.model_for(parts, objective, req, allowed, windows,
                                          req.accel_to_kmh if accel_needed else None, build)
    else:
        model = build()
        opt = None
    result.timings["build_s"] += time.perf_counter() - t0
    if model.infeasible_reason:
        result.reason = model.infeasible_reason
        return result

    opt = opt or _solver()
    scale = model.objective_scale()
    per_slice = count if per_motor is None else min(count, per_motor)
    pool_vals, pool_keys = np.empty(0), np.empty((0, 3), dtype=np.int64)
    reducers, tyres = allowed.get("reducers"), allowed.get("tyres")
    from pyomo.contrib.solver.common.results import TerminationCondition as TC

    def add_to_pool(vals, keys):
        nonlocal pool_vals, pool_keys
        if vals.size:
            best = order_best(vals, keys, per_slice)
            pool_vals = np.concatenate([pool_vals, vals[best]])
            pool_keys = np.concatenate([pool_keys, keys[best]])

    evaluated: set[int] = set()
    slice_cache = None if session is None else session.slices
    if slice_cache is not None:
        slice_cache.bind(parts, req, allowed)
        motors_allowed = allowed.get("motors")
        usable = None if motors_allowed is None else set(int(a) for a in motors_allowed)
        for i in list(slice_cache.entries):
            if usable is None or i in usable:
                add_to_pool(*slice_cache.select(slice_cache.entries[i], req, objective))
                model.exclude_motor(i)
                evaluated.add(i)

    def evaluate_motor(i: int):
        if slice_cache is not None:
            add_to_pool(*slice_cache.select(slice_cache.slice(parts, req, i, reducers, tyres), req, objective))
        else:
            mi, rj, tk = slice_indices(parts, i, reducers, tyres)
            ok, vals = screen(parts, mi, rj, tk, objective)
            add_to_pool(vals[ok], np.stack([mi[ok], rj[ok], tk[ok]], axis=1))
        model.exclude_motor(i)
        evaluated.add(i)

    extra_candidates = None
    if objective == "accel_time" and windows is not None:
        m_ok = np.isfinite(windows.t_min_s) & (windows.lo <= windows.hi)
        if allowed.get("motors") is not None:
            m_ok &= np.isin(np.arange(parts.sizes[0]), allowed["motors"])
        cand = np.nonzero(m_ok)[0]
        extra_candidates = [int(c) for c in cand[np.lexsort((cand, windows.t_min_s[cand]))]]

    options = dict(SOLVER_OPTIONS, threads=threads)
    while True:
        remaining = None if time_limit_s is None else time_limit_s - (time.perf_counter() - t_start)
        if remaining is not None and remaining <= 0:
            result.status = STATUS_TIME_LIMIT
            break
        if len(pool_vals) >= count:
            kth = pool_vals[order_best(pool_vals, pool_keys, count)[-1]]
            model.set_cutoff((kth + tie_tolerance(kth)) * scale)
        t0 = time.perf_counter()
        res = opt.solve(model.m, load_solutions=False, raise_exception_on_nonoptimal_result=False,
                        time_limit=remaining, solver_options=options)
        result.timings["solve_s"] += time.perf_counter() - t0
        result.iterations += 1
        tc = res.termination_condition
        if tc in (TC.provenInfeasible, TC.infeasibleOrUnbounded, TC.locallyInfeasible):
            result.status = STATUS_OPTIMAL if len(pool_vals) else STATUS_INFEASIBLE
            break
        if tc == TC.maxTimeLimit and res.incumbent_objective is None:
            result.status = STATUS_TIME_LIMIT
            result.bound = None if res.objective_bound is None else res.objective_bound / scale
            break
        if tc not in (TC.convergenceCriteriaSatisfied, TC.maxTimeLimit):
            raise SolverUnavailableError(f"HiGHS stopped unexpectedly ({tc.name}); rerun with --verbose and report it")
        res.solution_loader.load_vars()
        i, _, _ = model.chosen()
        if tc == TC.maxTimeLimit:
            result.bound = None if res.objective_bound is None else res.objective_bound / scale
        t0 = time.perf_counter()
        evaluate_motor(i)
        if extra_candidates is not None:
            # accel_time objective: the MILP ranks motors by optimistic time; evaluate the next few
            # by that ranking exactly too (always safe), saving a MILP solve per motor
            limit = pool_vals[order_best(pool_vals, pool_keys, count)[-1]] if len(pool_vals) >= count else np.inf
            for j in [c for c in extra_candidates if c not in evaluated][:BATCH_EXTRA]:
                if windows.t_min_s[j] > limit + tie_tolerance(limit):
                    break
                evaluate_motor(j)
        result.timings["verify_s"] += time.perf_counter() - t0
        if tc == TC.maxTimeLimit:
            result.status = STATUS_TIME_LIMIT
            break

    order = order_best(pool_vals, pool_keys, count)
    result.designs = [(float(pool_vals[b]), int(pool_keys[b, 0]), int(pool_keys[b, 1]), int(pool_keys[b, 2]))
                      for b in order]
    if result.status == STATUS_OPTIMAL:
        result.bound = result.designs[0][0]
    elif result.designs and result.bound is not None:
        # the MILP bound covers only the motors not yet evaluated; evaluated ones are known exactly
        result.bound = min(result.bound, result.designs[0][0])
    elif result.status == STATUS_INFEASIBLE:
        result.reason = result.reason or "no design in the catalogues meets every requirement"
    return result
