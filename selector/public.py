"""The public Python API: studies in, result objects out (exported by ``selector/__init__.py``).

Every function takes a `selector.api.Study` (from `open_study` or `Study.from_frames`) and returns
a result object of `selector.results` whose ``to_dict()`` is the JSON contract the command line
prints. Errors are `selector.errors.InputError` naming the parameter (``count``, ``vary``, ...);
the command line translates them to its flags.
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

from selector.errors import InputError, argument_error
from selector.studies.defaults import MAX_COUNT, NEAR_MISS_PCT, STEP_PCT

if TYPE_CHECKING:
    from selector.api import Study
    from selector.results import (
        ExplainResult,
        FrontierResult,
        ShortlistResult,
        SimulateResult,
        SolveResult,
        SweepResult,
    )

__all__ = ["DIAGNOSE_MAX_COMBINATIONS", "explain", "frontier", "shortlist", "simulate", "solve", "sweep"]

DIAGNOSE_MAX_COMBINATIONS = 2_000_000
"""`solve` diagnoses an infeasible study (an exhaustive closest-design search) up to this size [-]."""
DIAGNOSE_MAX_ENERGY = 20_000
"""The same for energy studies, whose every design is simulated over the whole driving cycle [-]."""


def _whole(name: str, value, most: int | None = None) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral) or int(value) < 1:
        raise InputError(f"{name} {value!r}: must be a whole number >= 1.")
    if most is not None and int(value) > most:
        raise InputError(f"{name} {value!r}: must be at most {most:,}.")
    return int(value)


def _time_limit(value) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not float(value) > 0:
        raise InputError(f"time_limit_s {value!r}: must be a number > 0 [s], or None for no limit.")
    return float(value)


def _pct(name: str, value) -> float:
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not 0 < float(value) < 100:
        raise InputError(f"{name} {value!r}: must be a percentage between 0 and 100 (exclusive) [%].")
    return float(value)


def solve(study: Study, count: int = 1, time_limit_s: float | None = None, objective: str | None = None,
          diagnose: bool = True) -> SolveResult:
    """The best design(s) of a study, found exactly and verified by the physics.

    Parameters
    ----------
    study : Study
        The loaded study.
    count : int
        Number of designs wanted, best first [-].
    time_limit_s : float, optional
        Wall-clock limit of the search; on reaching it the status is "time_limit" [s].
    objective : str, optional
        What to minimise ("cost", "mass", "accel_time", ...); default: the problem's [-].
    diagnose : bool
        For an infeasible study, attach the diagnosis (impossibilities, conflicts, the closest design
        and a verified relaxation), as ``selector solve`` does: only without a time limit and up to
        `DIAGNOSE_MAX_COMBINATIONS` combinations; otherwise a note pointing to `explain`.

    Returns
    -------
    SolveResult
    """
    from selector import api
    from selector.results import SolveResult

    count = _whole("count", count, MAX_COUNT)
    time_limit_s = _time_limit(time_limit_s)
    if not isinstance(diagnose, bool):
        raise argument_error("solve", "diagnose", diagnose, "True or False")
    res = api.solve(study, count=count, time_limit_s=time_limit_s, objective=objective)
    if res["status"] == "infeasible" and diagnose:
        combos = study.parts.combinations  # two-unit studies: (units)^2 x tyres, the size explain enumerates
        limit = DIAGNOSE_MAX_ENERGY if study.parts.problem.energy is not None else DIAGNOSE_MAX_COMBINATIONS
        if time_limit_s is None and combos <= limit:
            from selector.studies.explain import diagnose as run_diagnosis

            res["diagnosis"] = run_diagnosis(study, res.get("reason"))
        else:  # the closest-design search enumerates the catalogue: leave it to `explain`
            res["diagnosis"] = {"summary": [f"diagnosis skipped ({combos:,} combinations"
                                            f"{' and a time limit' if time_limit_s is not None else ''}): "
                                            "run `selector explain` for it"]}
    return SolveResult(res)


def simulate(study: Study, motor: str | None = None, reducer: str | None = None, tyre: str | None = None,
             **slots: str) -> SimulateResult:
    """Evaluate one design given by part ids: performance, requirements, part-rating checks.

    Parameters
    ----------
    study : Study
        The loaded study.
    motor, reducer, tyre : str
        Part ids in the study's catalogues (single axle: the unit on the driven axle, and the tyre).
    **slots : str
        The units by axle: ``front_motor``, ``front_reducer``, ``rear_motor``, ``rear_reducer`` (with
        ``tyre``); a two-unit study (driven_axle = "both") needs both units.

    Returns
    -------
    SimulateResult
        ``status`` "feasible" or "infeasible"; ``unmet`` says what fails.

    Raises
    ------
    InputError
        For a part id not in its catalogue (naming the slot, with a did-you-mean suggestion).
    """
    from selector import api
    from selector.results import SimulateResult

    return SimulateResult(api.simulate(study, motor, reducer, tyre, **slots))


def explain(study: Study, step_pct: float = STEP_PCT, near_miss_pct: float = NEAR_MISS_PCT,
            progress: bool = False) -> ExplainResult:
    """What binds, what each requirement costs, near misses, and why an infeasible study has no answer.

    Parameters
    ----------
    study : Study
        The loaded study.
    step_pct : float
        Loosening step for the price of each requirement [%].
    near_miss_pct : float
        Largest miss of a near-miss design [%].
    progress : bool
        Show a progress bar on stderr for large enumerations.

    Returns
    -------
    ExplainResult
    """
    from selector.api import check_study_args
    from selector.results import ExplainResult
    from selector.studies.explain import explain as run_explain

    check_study_args("explain", study)
    return ExplainResult(run_explain(study, step_pct=_pct("step_pct", step_pct),
                                     near_miss_pct=_pct("near_miss_pct", near_miss_pct), progress=progress))


def frontier(study: Study, axis: str = "cost", time_limit_s: float | None = None) -> FrontierResult:
    """The exact frontier of cost (or vehicle mass, or energy per km) against the 0-to-accel_to_kmh time.

    Parameters
    ----------
    study : Study
        The loaded study; its problem needs ``requirements.accel_to_kmh`` [km/h].
    axis : str
        "cost", "mass" or "energy" (the energy per km at the battery; studies with [energy]) [-].
    time_limit_s : float, optional
        Wall-clock limit of the whole frontier [s]; when reached, the status is "time_limit" and the
        designs are the exact frontier's first points from the low end of the axis.

    Returns
    -------
    FrontierResult
    """
    from selector.api import check_study_args
    from selector.results import FrontierResult
    from selector.studies.frontier import AXES
    from selector.studies.frontier import frontier as run_frontier

    check_study_args("frontier", study)
    if not isinstance(axis, str) or axis not in AXES:
        raise argument_error("frontier", "axis", axis, f"one of {', '.join(repr(a) for a in AXES)}")
    return FrontierResult(run_frontier(study, axis=axis, time_limit_s=_time_limit(time_limit_s)))


def sweep(study: Study, vary: Mapping[str, Sequence[float]] | Sequence[str], workers: int | None = None,
          scheduler: str | None = None, progress: bool = False, large: bool = False,
          time_limit_s: float | None = None) -> SweepResult:
    """Re-solve a study exactly over a grid of problem values.

    Parameters
    ----------
    study : Study
        The loaded study (its procurement filters apply at every point).
    vary : mapping of str to sequence of float, or sequence of str
        ``{dotted key: values}``, e.g. ``{"requirements.top_speed_kmh": [100, 110, 120]}``, or
        ``"KEY=START:STOP:N"`` texts; the grid is the product, the first key varying slowest
        [unit of each key].
    workers : int, optional
        Local worker processes (default: CPU count; 1 = in this process) [-].
    scheduler : str, optional
        Address of a Dask scheduler, e.g. ``tcp://host:8786``.
    progress : bool
        Show a progress bar on stderr.
    large : bool
        Allow grids above `selector.studies.sweep.LARGE_POINTS` points and more local workers than
        CPU cores (otherwise an error asks for it).
    time_limit_s : float, optional
        Wall-clock limit of each point's search [s]; a point that reaches it has status "time_limit"
        and the best design found (or none).

    Returns
    -------
    SweepResult
    """
    from selector.api import check_study_args
    from selector.results import SweepResult
    from selector.studies.sweep import sweep_problem

    check_study_args("sweep", study)
    if not (isinstance(vary, (str, Mapping)) or (isinstance(vary, (list, tuple))
                                                 and all(isinstance(v, str) for v in vary))):
        raise argument_error("sweep", "vary", vary, '{dotted key: values} or a list of "KEY=START:STOP:N" texts')
    if workers is not None:
        workers = _whole("workers", workers)
    if study.catalogs is None:
        raise InputError("study: has no catalogues attached; make it with open_study or Study.from_frames.")
    return SweepResult(sweep_problem(study.problem, study.catalogs, vary, workers=workers, scheduler=scheduler,
                                     progress=progress, source=study.problem_dict, large=large,
                                     time_limit_s=_time_limit(time_limit_s)))


def shortlist(study: Study, count: int, distinct: str | None = None, vehicles: int = 1,
              time_limit_s: float | None = None, objective: str | None = None) -> ShortlistResult:
    """The ``count`` best designs, optionally diverse, each with a bill of materials.

    Parameters
    ----------
    study : Study
        The loaded study (procurement filters apply: `open_study(path, procurement=...)`).
    count : int
        Designs wanted [-].
    distinct : str, optional
        "motor" (exact), "reducer" or "tyre" (greedy) or "none"; default: the problem's [-].
    vehicles : int
        Vehicles to buy for; multiplies quantities and extended costs [-].
    time_limit_s : float, optional
        Wall-clock limit of the whole search [s].
    objective : str, optional
        Override of the problem's objective [-].

    Returns
    -------
    ShortlistResult
    """
    from selector.api import check_study_args
    from selector.results import ShortlistResult
    from selector.studies.shortlist import shortlist as run_shortlist

    check_study_args("shortlist", study)
    return ShortlistResult(run_shortlist(study, _whole("count", count, MAX_COUNT), distinct=distinct,
                                         vehicles=_whole("vehicles", vehicles),
                                         time_limit_s=_time_limit(time_limit_s), objective=objective))
