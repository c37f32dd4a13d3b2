"""The orchestrator: load a study, apply procurement filters, search, verify, and build results.

Library users call these functions; the CLI is a thin layer over them. Every design returned
here has been verified by `verify.verify_designs` (exact evaluation and an independent re-check).
"""

from __future__ import annotations

import difflib
import os
import time
import warnings
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from selector import __version__
from selector.engine.evaluate import OBJECTIVE_METRIC, evaluate, feasible
from selector.engine.parts import PartTables
from selector.engine.verify import design_keys, verify_designs
from selector.errors import ArgumentError, InputError, argument_error
from selector.inputs import Catalogs, Problem, Procurement
from selector.io.problem import load_study
from selector.records import BINDING_RULE, CAUTION, as_design, clean, design_record, fmt
from selector.studies.defaults import MAX_COUNT

if TYPE_CHECKING:
    import pandas as pd

    from selector.engine.search import SearchResult

OBJECTIVE_UNITS = {"cost": "currency", "mass": "kg", "accel_time": "s", "energy": "Wh/km"}


@dataclass(frozen=True)
class Study:
    """A loaded study: its part tables and the procurement filter (allowed part positions).

    Make one with `open_study` (a problem file) or `Study.from_frames` (in-memory tables).
    """

    parts: PartTables
    allowed: dict
    """{"motors"|"reducers"|"tyres": np.ndarray of allowed positions}."""
    filter_notes: tuple[str, ...] = ()
    catalogs: Catalogs | None = None
    """The validated catalogues the part tables were built from (sweeps rebuild the tables per point)."""
    problem_dict: dict | None = None
    """The problem dict of `from_frames` (None for a file): what a sweep reads instead of the file."""

    @property
    def problem(self) -> Problem:
        """The validated problem (`selector.inputs.Problem`)."""
        return self.parts.problem

    @classmethod
    def from_frames(cls, motors: pd.DataFrame, reducers: pd.DataFrame, tyres: pd.DataFrame, problem: dict,
                    procurement: Procurement | None = None, base_dir: str | os.PathLike | None = None) -> Study:
        """A study from in-memory catalogues and a problem dict, validated exactly as files are.

        Parameters
        ----------
        motors, reducers, tyres : pandas.DataFrame
            One row per orderable part with the columns of the CSV catalogues (units in the column
            names, e.g. ``peak_torque_nm`` [N m], ``unit_cost`` [currency]); NaN or None = empty cell.
        problem : dict
            The problem file's tables without ``catalogs``, e.g. ``{"vehicle": {"mass_kg": 2400, ...},
            "requirements": {"top_speed_kmh": 110}}`` (units in the key names).
        procurement : Procurement, optional
            Overrides of the problem's ``procurement`` table (fields that are set).
        base_dir : str or os.PathLike, optional
            Folder that relative paths in the data (``efficiency_map``, a cycle file) are relative
            to; default: the working directory.

        Returns
        -------
        Study

        Raises
        ------
        ArgumentError
            ``procurement`` is not a `Procurement` (`selector.errors.ArgumentError`).
        InputError
            Every problem found, naming the frame, row (index label), part id and column, or the
            problem dict's table and key.
        """
        from selector.frames import load_frames

        _check_procurement("Study.from_frames", procurement)
        if base_dir is not None and not isinstance(base_dir, (str, os.PathLike)):
            raise argument_error("Study.from_frames", "base_dir", base_dir, "a folder path (str or PathLike) or None")
        prob, catalogs = load_frames(motors, reducers, tyres, problem, base_dir)
        return replace(_build_study(prob, catalogs, procurement), problem_dict=dict(problem))


def open_study(path: str | os.PathLike, procurement: Procurement | None = None) -> Study:
    """Load and validate a problem file and its catalogues, then apply procurement filters.

    Parameters
    ----------
    path : str or os.PathLike
        Problem file (TOML); its catalogue paths are relative to it.
    procurement : Procurement, optional
        Overrides of the problem file's [procurement] table (the fields that are set).

    Returns
    -------
    Study

    Raises
    ------
    InputError
        Naming the file, line or row, key or column, what is wrong and what to do.
    ArgumentError
        Wrong argument types, naming the parameter (`selector.errors.ArgumentError`).
    """
    import os

    if not isinstance(path, (str, os.PathLike)):
        raise argument_error("open_study", "path", path, "the path of a problem file (str or os.PathLike)")
    _check_procurement("open_study", procurement)
    with warnings.catch_warnings():
        warnings.simplefilter("default")
        problem, catalogs = load_study(path)
    return _build_study(problem, catalogs, procurement)


def _check_procurement(function: str, procurement) -> None:
    """ArgumentError unless ``procurement`` of ``function`` (an entry point making a Study) is None or a Procurement."""
    if procurement is not None and not isinstance(procurement, Procurement):
        raise argument_error(function, "procurement", procurement, "a selector.inputs.Procurement or None")


def _build_study(problem: Problem, catalogs: Catalogs, procurement: Procurement | None) -> Study:
    if procurement is not None:
        base = problem.procurement
        procurement = Procurement(
            distinct=procurement.distinct or base.distinct,
            avoid_suppliers=tuple(procurement.avoid_suppliers) or base.avoid_suppliers,
            max_lead_time_weeks=(procurement.max_lead_time_weeks if procurement.max_lead_time_weeks is not None
                                 else base.max_lead_time_weeks))
        problem = replace(problem, procurement=procurement)
    parts = PartTables.build(problem, catalogs)
    return Study(parts, *procurement_filter(parts), catalogs=catalogs)


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


def find_part(parts: PartTables, kind: str, part_id: str, option: str | None = None) -> int:
    """Position of a part id in a catalogue, or an InputError with a did-you-mean suggestion.

    ``option``: the parameter that named the part (default ``kind``; the CLI shows it as its flag).
    """
    if not isinstance(part_id, str):
        raise argument_error("simulate", kind, part_id, "a part id (text)")
    arr = {"motor": parts.motors, "reducer": parts.reducers, "tyre": parts.tyres}[kind]
    ids = [str(p) for p in arr.part]
    if part_id in ids:
        return ids.index(part_id)
    close = difflib.get_close_matches(part_id, ids, n=3)
    hint = f" Did you mean {', '.join(repr(c) for c in close)}?" if close else ""
    raise InputError(f"{option or kind} {part_id!r}: no such part in the {kind} catalogue "
                     f"({parts.problem.catalog_paths.get(kind + 's', '')}).{hint}")


def header(parts: PartTables) -> dict:
    """Common head of every JSON result."""
    p = parts.problem
    return {"selector_version": __version__, "problem": p.name,
            "problem_file": None if p.path is None else str(p.path), "caution": CAUTION}


def records(parts: PartTables, designs, objective: str) -> list[dict]:
    """Verified design records, best first (``designs``: `selector.design.Design` objects, or
    single-axle (value, i, j, k) sequences)."""
    metrics = verify_designs(parts, designs, objective)
    if not designs:
        return []
    keys = design_keys(parts, designs)
    run = shift_run(parts, keys, metrics)
    return [design_record(parts, as_design(parts, *d[1:]) if not hasattr(d, "key") else d, metrics, pos, run=run)
            for pos, d in enumerate(designs)]


def shift_run(parts: PartTables, keys, metrics: dict):
    """The acceleration run (with its shifts) of designs that have a multi-speed unit, else None.

    The run is the one `evaluate.evaluate` integrates (same axles, same mass with any battery), so
    its time is the design's ``accel_time_s``.
    """
    target = parts.problem.requirements.accel_to_kmh
    keys = np.asarray(keys, dtype=np.int64)
    gears = np.ones(keys.shape[0], dtype=np.int64)
    for m_col, r_col in ((0, 1), (2, 3)):
        on = keys[:, m_col] >= 0
        gears = np.maximum(gears, np.where(on, parts.reducers.n_gears[np.maximum(keys[:, r_col], 0)], 1))
    if target is None or not (gears > 1).any():
        return None
    from selector.physics.accel_run import accel_run
    from selector.units import kmh_to_mps

    mass = metrics["mass_kg"] if parts.problem.energy is not None else None
    axles, body = parts.design(keys, mass_kg=mass)
    return accel_run(axles, body, kmh_to_mps(target))


def objective_dict(objective: str, designs) -> dict:
    """The `objective` entry of a result: what is minimised, its unit and the best value."""
    return {"minimize": objective, "unit": OBJECTIVE_UNITS[objective], "metric": OBJECTIVE_METRIC[objective],
            "value": clean(_value(designs[0])) if designs else None}


def _value(design) -> float:
    """Objective value of a `Design` or of a single-axle (value, i, j, k) sequence."""
    return design.value if hasattr(design, "value") else design[0]


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
                   "combinations": int(parts.combinations), "procurement_filters": list(study.filter_notes)},
        "designs": records(parts, res.designs, res.objective),
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
    """Best design(s) of a study, verified, as the JSON-ready result (`ArgumentError` for wrong arguments)."""
    from selector.engine.search import search  # the solver stack: imported only when a study is solved

    check_study_args("solve", study, count=count, time_limit_s=time_limit_s, objective=objective)

    res = search(study.parts, objective=objective, count=count, allowed=study.allowed, time_limit_s=time_limit_s)
    return result_dict(study, res)


def check_study_args(function: str, study, count=1, time_limit_s=None, objective=None) -> None:
    """`ArgumentError` naming the parameter when a library call's study, count, time limit or objective is
    of the wrong type or out of range."""
    import math
    import numbers

    if not isinstance(study, Study):
        raise argument_error(function, "study", study, "a Study from selector.api.open_study(path)")
    if isinstance(count, bool) or not isinstance(count, numbers.Integral) or not 1 <= count <= MAX_COUNT:
        raise argument_error(function, "count", count, f"a whole number from 1 to {MAX_COUNT:,}")
    if time_limit_s is not None and (isinstance(time_limit_s, bool) or not isinstance(time_limit_s, numbers.Real)
                                     or not math.isfinite(time_limit_s) or time_limit_s <= 0):
        raise argument_error(function, "time_limit_s", time_limit_s, "a number of seconds > 0, or None")
    if objective is not None and (not isinstance(objective, str) or objective not in OBJECTIVE_METRIC):
        raise argument_error(function, "objective", objective, f"one of {', '.join(OBJECTIVE_METRIC)} or None")
    if objective == "energy" and study.parts.problem.energy is None:
        raise ArgumentError(f"{function}(objective='energy'): the study has no [energy] table (the driving cycle the "
                            "energy per km is taken over); add one to the problem, or choose another objective.")


def simulate(study: Study, motor: str | None = None, reducer: str | None = None, tyre: str | None = None, *,
             front_motor: str | None = None, front_reducer: str | None = None, rear_motor: str | None = None,
             rear_reducer: str | None = None) -> dict:
    """Evaluate one design given by part ids: performance, requirements and checks.

    Single axle: ``motor``, ``reducer``, ``tyre`` (the unit on the study's driven axle). By slots:
    ``front_motor``/``front_reducer`` and/or ``rear_motor``/``rear_reducer`` with ``tyre``; a
    two-unit study (driven_axle = "both") needs both units. ``feasible`` is the definition solve
    uses (`evaluate.feasible`), and a design outside the study's layout ([drive] same_unit,
    front_motors, rear_motors) is not feasible (its ``unmet`` says why).

    The design record's keys (as in `solve`'s designs) are at the top level, and also under "design".
    """
    check_study_args("simulate", study)
    parts = study.parts
    design = design_from_ids(parts, motor, reducer, tyre, front_motor, front_reducer, rear_motor, rear_reducer)
    objective = parts.problem.objective
    # the exact evaluation, re-checked by the independent computation (figures only: it may be infeasible)
    verify_designs(parts, [design], objective, expect_feasible=False)
    metrics = evaluate(parts, [design.key], shifts=True)
    rec = design_record(parts, design, metrics, 0, run=metrics.get("run"))
    layout = layout_unmet(parts, design)
    # the definition solve and explain use
    rec["feasible"] = bool(feasible(parts, metrics, objective)[0]) and not layout
    rec["unmet"] = unmet(parts, rec, metrics) + layout
    out = header(parts)
    out.update(rec)  # motor, reducer, tyre, cost, mass_kg, performance, requirements, checks, ... at the top
    out["design"] = rec
    out["details"] = {"rear_axle_share": clean(metrics["rear_axle_share"][0]),
                      "effective_mass_kg": clean(metrics["effective_mass_kg"][0]),
                      "gear_over_radius_1_m": clean(metrics["gear_over_radius_1_m"][0]),
                      "air_density_kg_m3": clean(parts.problem.environment.air_density_kg_m3)}
    radius = float(parts.tyres.radius_m[design.tyre])
    out["details"]["gear_over_radius_1_m_per_axle"] = {
        axle: clean(parts.reducers.ratio[r] / radius) for axle, _, r in design.units}
    return out


SLOT_OPTIONS = {"front": ("front_motor", "front_reducer"), "rear": ("rear_motor", "rear_reducer")}
"""Command-line options naming each axle's unit (simulate, plots)."""


def design_from_ids(parts: PartTables, motor=None, reducer=None, tyre=None, front_motor=None, front_reducer=None,
                    rear_motor=None, rear_reducer=None):
    """The `selector.design.Design` (value NaN) named by part ids, single-axle or by slots.

    InputError when the parts are incomplete (a motor without its reducer, no tyre), when both forms
    are mixed, or when the units do not fit the study's driven axles.
    """
    from selector.design import Design
    from selector.engine.parts import AXLE_COLUMNS, TY

    if tyre is None:
        raise InputError("tyre: name the tyre part id of the design.")
    slots = {"front": (front_motor, front_reducer), "rear": (rear_motor, rear_reducer)}
    given = {a: v for a, v in slots.items() if any(x is not None for x in v)}
    single = motor is not None or reducer is not None
    p = parts.problem
    axles_txt = f'[vehicle] driven_axle = "{p.vehicle.driven_axle}"'
    if single and given:
        raise InputError("give the design either as motor=/reducer= (single axle) or as front_motor=/"
                         "front_reducer= and rear_motor=/rear_reducer=, not both.")
    if single:
        if motor is None or reducer is None:
            raise InputError(f"{'reducer' if reducer is None else 'motor'}: missing; a drive unit is a motor "
                             "and a reducer, give both.")
        if parts.two_units:
            raise InputError(f"{axles_txt}: this study has a unit on each axle; name them with front_motor=, "
                             "front_reducer=, rear_motor= and rear_reducer=.")
        given = {parts.axles[-1]: (motor, reducer)}
    if not given:
        raise InputError("name the drive unit: motor= and reducer= (single axle), or front_motor=/front_reducer= "
                         "and rear_motor=/rear_reducer=.")
    key = [-1, -1, -1, -1, -1]
    for axle, (m, r) in given.items():
        m_opt, r_opt = SLOT_OPTIONS[axle]
        if m is None or r is None:
            raise InputError(f"{r_opt if r is None else m_opt}: missing; the {axle} unit is a motor and a reducer, "
                             "give both.")
        if axle not in parts.axles:
            raise InputError(f"{m_opt}: {axles_txt} has no {axle} drive unit; name the unit on the "
                             f"{' and '.join(parts.axles)} axle{'s' if parts.two_units else ''}.")
        m_col, r_col = AXLE_COLUMNS[axle]
        key[m_col] = find_part(parts, "motor", m, m_opt if not single else "motor")
        key[r_col] = find_part(parts, "reducer", r, r_opt if not single else "reducer")
    missing = [a for a in parts.axles if a not in given]
    if missing:
        m_opt, r_opt = SLOT_OPTIONS[missing[0]]
        raise InputError(f"{m_opt}, {r_opt}: missing; {axles_txt} puts a drive unit on each axle, name the "
                         f"{missing[0]} unit too.")
    key[TY] = find_part(parts, "tyre", tyre)
    return Design.of(float("nan"), key)


def layout_unmet(parts: PartTables, design) -> list[dict]:
    """[{name, why}] for each rule of the study's layout the design breaks ([drive] same_unit, front_motors,
    rear_motors): solve never proposes such a design."""
    out = []
    if not parts.two_units:
        return out
    drive = parts.problem.drive
    if drive.same_unit and design.front != design.rear:
        out.append({"name": "same_unit", "why": "[drive] same_unit = true: the front and rear units must be the "
                    "same motor and reducer parts"})
    for axle, m, _ in design.units:
        allowed = parts.axle_motors.get(axle)
        if allowed is not None and m not in set(int(x) for x in allowed):
            out.append({"name": f"{axle}_motors", "why": f"[drive] {axle}_motors does not allow motor "
                        f"{parts.motors.part[m]} on the {axle} axle"})
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
    if parts.problem.energy is not None:
        out += _energy_unmet(parts, rec, metrics)
    objective = parts.problem.objective
    if not np.isfinite(metrics[OBJECTIVE_METRIC[objective]][0]) and objective == "accel_time":
        out.append({"name": "accel_to_kmh",
                    "why": (f"never reaches accel_to_kmh = {fmt(parts.problem.requirements.accel_to_kmh)} km/h "
                            "(infinite time); the accel_time objective counts such a design infeasible")})
    return out


def _energy_unmet(parts: PartTables, rec: dict, metrics: dict) -> list[dict]:
    """Why an energy study cannot use a design beyond its requirement rows: a motor without loss data,
    operating points outside an efficiency map."""
    out = []
    for u in rec["units"]:
        m = int(np.flatnonzero(parts.motors.part == u["motor"])[0])
        if not parts.motors.has_loss_model[m]:
            out.append({"name": "motor_loss_data", "why": f"motor {u['motor']} has neither the loss_* columns nor "
                        "an efficiency_map: it cannot be used in an energy study (add its loss model or map)"})
    off = float(metrics.get("cycle_out_of_map_pct", np.zeros(1))[0])
    if off > 0:
        out.append({"name": "efficiency_map", "why": f"{fmt(off)} % of the cycle's intervals fall outside the "
                    "motor's efficiency map, or where it reads 0 % while motoring (within the envelope; a map "
                    "is never extrapolated)"})
    return out


def motors_without_loss_data(parts: PartTables) -> list[str]:
    """Part ids of the motors an energy study cannot use (neither loss_* columns nor an efficiency_map)."""
    return [str(x) for x in parts.motors.part[~parts.motors.has_loss_model]]


def problem_summary(study: Study) -> dict:
    """What `selector check` prints: parts per catalogue, combinations, layout, requirements, objective."""
    parts = study.parts
    p = parts.problem
    req = {k: v for k, v in vars(p.requirements).items() if v is not None}
    out = {**header(parts), "catalogues": {k: str(v) for k, v in p.catalog_paths.items()},
           "parts": dict(zip(("motors", "reducers", "tyres"), parts.sizes, strict=False)),
           "combinations": int(parts.combinations),
           "after_procurement_filters": {k: int(len(v)) for k, v in study.allowed.items()},
           "combinations_in_play": parts.combinations_in_play(study.allowed),
           "requirements": req, "objective": p.objective,
           "air_density_kg_m3": clean(p.environment.air_density_kg_m3),
           "path": str(Path(p.path)) if p.path else None}
    out["layout"] = layout_summary(parts)
    from selector.engine.search import no_motor_reason

    out["no_design_left"] = no_motor_reason(parts, study.allowed)  # None, or why no design can be chosen
    if p.energy is not None:
        out["energy"] = {"cycle": p.energy.cycle, "motors_without_loss_data": motors_without_loss_data(parts)}
    return out


def layout_summary(parts: PartTables) -> dict:
    """The study's drivetrain layout: driven axle(s), [drive] rules, motors allowed per axle, gearboxes."""
    p = parts.problem
    n_m = parts.sizes[0]
    multi = int(np.sum(parts.reducers.n_gears > 1))
    return {"driven_axle": p.vehicle.driven_axle, "units": list(parts.axles),
            "same_unit": bool(parts.two_units and p.drive.same_unit),
            "motors_per_axle": {a: int(len(parts.axle_motors[a])) if a in parts.axle_motors else n_m
                                for a in parts.axles},
            "multi_speed_reducers": multi}
