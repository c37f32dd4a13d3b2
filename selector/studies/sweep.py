"""Parameter sweeps: re-solve a study exactly over a grid of problem values.

A sweep varies one or more numbers of the problem file (``requirements.top_speed_kmh``,
``vehicle.mass_kg``, ``environment.altitude_m``...) over a grid (the product of one linspace per
parameter, the first parameter varying slowest), solves every grid point exactly with the
engine, verifies the optimum with the physics, and returns one row per point (infeasible points
are rows with status "infeasible", never dropped).

Points run in parallel: local processes (`concurrent.futures.ProcessPoolExecutor`) by default,
or a Dask cluster given its scheduler address. The worker, `sweep_point`, is a picklable
top-level function returning a plain dict, so the rows are identical and in the same grid order
however they ran. The catalogues are read once (in the caller) and shipped to the workers.

The grid side (sweepable keys, parsing and checking ``vary``, a point's overrides) lives in
`selector.studies.sweep_params` and is re-exported here.
"""

from __future__ import annotations

import csv
import io
import os
import sys
import threading
import time

import numpy as np

from selector.errors import InputError
from selector.inputs import Catalogs, Problem
from selector.studies.sweep_params import (  # noqa: F401 - the grid side, re-exported as this module's API
    ISA_KEYS,
    LARGE_POINTS,
    MAX_POINTS,
    SWEEPABLE,
    apply_overrides,
    check_key,
    check_size,
    file_isa_context,
    grid,
    parse_varies,
    parse_vary,
    validate,
)

COLUMNS = ("status", "objective", "motor", "reducer", "tyre", "cost", "mass_kg", "accel_time_s")
"""Result columns of every row, after the parameter columns."""
SLOT_COLUMNS = ("front_motor", "front_reducer", "rear_motor", "rear_reducer")
"""Further columns of a two-unit study's rows (its rows have null motor and reducer, as its design records)."""
ENERGY_COLUMNS = {"energy_wh_per_km": "wh_per_km", "battery_kwh": "battery_kwh", "battery_mass_kg": "battery_mass_kg",
                  "battery_cost": "battery_cost"}
"""Further columns of an energy study's rows (column: key of the design record's ``energy``)."""


def columns(problem: Problem) -> tuple[str, ...]:
    """Result columns of a study's rows: `COLUMNS`, plus `SLOT_COLUMNS` for a two-unit study and
    `ENERGY_COLUMNS` for an energy study."""
    return (COLUMNS + (SLOT_COLUMNS if len(problem.axles) > 1 else ())
            + (tuple(ENERGY_COLUMNS) if problem.energy is not None else ()))


DASK_CONNECT_TIMEOUT_S = 10
"""How long to try reaching a Dask scheduler before giving up [s]."""

_SOLVE_LOCK = threading.Lock()
"""One solve at a time per process: Pyomo's solver-output capture is not thread-safe (two HiGHS
solves in two threads of one process deadlock), and Dask workers run tasks in threads. Parallel
runs use processes (local pool, or Dask workers started with one thread each)."""

_CATALOGS: dict = {}
"""Per-process cache of loaded catalogues, keyed by their paths (filled once per worker)."""


def _catalog_key(problem: Problem) -> tuple:
    return tuple(str(problem.catalog_paths[k]) for k in ("motors", "reducers", "tyres"))


def _catalogs_for(problem: Problem) -> Catalogs:
    key = _catalog_key(problem)
    if key not in _CATALOGS:
        from selector.io.catalog import load_catalogs

        _CATALOGS[key] = load_catalogs(problem.catalog_paths)
    return _CATALOGS[key]


def _init_worker(problem: Problem, catalogs: Catalogs) -> None:
    """ProcessPool initializer: keep the catalogues shipped once per worker process."""
    _CATALOGS[_catalog_key(problem)] = catalogs


def sweep_point(problem, overrides: dict, catalogs: Catalogs | None = None,
                time_limit_s: float | None = None) -> dict:
    """Solve one grid point exactly and verify it (the worker; picklable, returns a plain dict).

    Parameters
    ----------
    problem : `study.Problem`, or the path of a problem file
    overrides : {dotted key: value} of this point (see `apply_overrides`)
    catalogs : the study's catalogues (default: read once per process from the problem's paths)
    time_limit_s : wall-clock limit of the point's search [s] (None = none)

    Returns
    -------
    dict with the override values, then status ("optimal" | "infeasible" | "time_limit"), objective
    (value), motor, reducer, tyre, cost, mass_kg, accel_time_s (None where not applicable; at a time
    limit those of the best design found, if any), and reason (points that are not optimal); a
    two-unit study's rows have null motor and reducer and name the units in front_motor,
    front_reducer, rear_motor, rear_reducer; an energy study's rows add
    energy_wh_per_km [Wh/km], battery_kwh [kWh], battery_mass_kg [kg] and battery_cost [currency].
    """
    from selector.api import procurement_filter, records
    from selector.engine.parts import PartTables
    from selector.engine.search import STATUS_INFEASIBLE, STATUS_OPTIMAL, search
    from selector.records import clean

    if not isinstance(problem, Problem):
        from selector.io.problem import load_problem

        problem = load_problem(problem)
    if catalogs is None:
        catalogs = _catalogs_for(problem)
    prob = apply_overrides(problem, overrides)
    parts = PartTables.build(prob, catalogs)
    allowed, _ = procurement_filter(parts)
    with _SOLVE_LOCK:
        res = search(parts, allowed=allowed, time_limit_s=time_limit_s)
    row = {k: float(v) for k, v in overrides.items()}
    row.update(dict.fromkeys(columns(prob)))
    row["status"] = res.status
    if res.status != STATUS_INFEASIBLE and res.designs:
        best = res.designs[0]
        rec = records(parts, [best], res.objective)[0]
        row.update({"objective": clean(best.value), "motor": rec["motor"], "reducer": rec["reducer"],
                    "tyre": rec["tyre"], "cost": rec["cost"], "mass_kg": rec["mass_kg"],
                    "accel_time_s": rec["performance"]["accel_time_s"]})
        if parts.two_units:
            for u in rec["units"]:
                row[f"{u['axle']}_motor"], row[f"{u['axle']}_reducer"] = u["motor"], u["reducer"]
        if rec.get("energy"):
            row.update({c: rec["energy"][k] for c, k in ENERGY_COLUMNS.items()})
    if res.status != STATUS_OPTIMAL:
        row["reason"] = res.reason or (f"the time limit ({time_limit_s:g} s) stopped the search before the proof"
                                       + ("; the best design found is shown" if res.designs else
                                          "; no design found yet"))
    return row


# ----------------------------------------------------------------------------- running

def _progress(total: int, enabled: bool):
    if not enabled:
        return None
    from tqdm import tqdm

    return tqdm(total=total, unit="point", file=sys.stderr, desc="sweep", leave=False)


def run_points(problem: Problem, catalogs: Catalogs, points: list[dict], workers: int | None = None,
               scheduler: str | None = None, progress: bool = False,
               time_limit_s: float | None = None) -> tuple[list[dict], dict]:
    """Rows of every grid point, in grid order, and how they ran.

    ``workers``: local processes (default os.cpu_count(); 1 = in this process). ``scheduler``:
    address of a Dask scheduler (``tcp://host:8786``); then the cluster's workers run the points.
    ``time_limit_s``: wall-clock limit of each point's search [s].
    """
    n = len(points)
    bar = _progress(n, progress)
    t0 = time.perf_counter()
    try:
        if scheduler:
            rows, runner = _run_dask(problem, catalogs, points, scheduler, bar, time_limit_s)
        else:
            workers = max(1, min(workers or os.cpu_count() or 1, n))
            if workers == 1:
                rows = []
                for pt in points:
                    rows.append(sweep_point(problem, pt, catalogs, time_limit_s))
                    if bar is not None:
                        bar.update(1)
                runner = {"mode": "serial", "workers": 1}
            else:
                rows = _run_processes(problem, catalogs, points, workers, bar, time_limit_s)
                runner = {"mode": "processes", "workers": workers}
    finally:
        if bar is not None:
            bar.close()
    runner["elapsed_s"] = round(time.perf_counter() - t0, 3)
    return rows, runner


def _ignore_interrupts() -> None:
    """Worker processes leave Ctrl-C to the main process, which stops them (no traceback per worker)."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _init_pool_worker(problem: Problem, catalogs: Catalogs) -> None:
    import signal

    _ignore_interrupts()
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked worker must not inherit the CLI's SIGTERM handler
    _init_worker(problem, catalogs)


def stop_pool(ex) -> None:
    """Stop a process pool now: cancel the queued points and terminate the running workers (an interrupt,
    a failed point), instead of waiting for every running solve to finish."""
    ex.shutdown(wait=False, cancel_futures=True)
    for proc in list((getattr(ex, "_processes", None) or {}).values()):
        try:
            proc.terminate()
        except (OSError, ValueError):
            pass
    for proc in list((getattr(ex, "_processes", None) or {}).values()):
        try:
            proc.join(5)
        except (OSError, ValueError, AssertionError):
            pass


def _run_processes(problem, catalogs, points, workers, bar, time_limit_s) -> list[dict]:
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    rows = [None] * len(points)
    ex = ProcessPoolExecutor(max_workers=workers, initializer=_init_pool_worker, initargs=(problem, catalogs))
    try:
        futures = {ex.submit(sweep_point, problem, pt, None, time_limit_s): n for n, pt in enumerate(points)}
        for fut in as_completed(futures):
            rows[futures[fut]] = fut.result()
            if bar is not None:
                bar.update(1)
    except BrokenProcessPool:
        stop_pool(ex)
        raise InputError(f"a sweep worker process stopped unexpectedly (killed, or out of memory) after "
                         f"{sum(r is not None for r in rows)} of {len(points)} points; nothing was written. Rerun "
                         "with fewer --workers.") from None
    except BaseException:
        stop_pool(ex)
        raise
    ex.shutdown(wait=True)
    return rows


def _run_dask(problem, catalogs, points, address, bar, time_limit_s) -> tuple[list[dict], dict]:
    try:
        from distributed import Client, as_completed
    except ImportError as exc:  # pragma: no cover - dask[distributed] is a dependency
        raise InputError(f"scheduler needs dask.distributed ({exc}). "
                         "Install it: pip install 'dask[distributed]'") from None
    try:
        client = Client(address, timeout=f"{DASK_CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError, ValueError, TypeError) as exc:
        raise InputError(f"scheduler {address}: cannot connect to a Dask scheduler ({exc}). Check the address "
                         "(e.g. tcp://host:8786) and that the scheduler is running.") from None
    with client:
        n_workers = len(client.scheduler_info().get("workers", {}))
        cat = client.scatter(catalogs, broadcast=True)
        futures = [client.submit(sweep_point, problem, pt, cat, time_limit_s, pure=False) for pt in points]
        try:
            for _ in as_completed(futures):
                if bar is not None:
                    bar.update(1)
            rows = client.gather(futures)
        except (InputError, KeyboardInterrupt):
            client.cancel(futures)
            raise
        except Exception as exc:  # noqa: BLE001 - a worker lost, the scheduler gone: the cluster's state
            client.cancel(futures)
            if type(exc).__module__.split(".")[0] not in ("distributed", "dask", "tornado", "asyncio") \
                    and not isinstance(exc, (OSError, TimeoutError)):
                raise
            raise InputError(f"--scheduler {address}: the sweep stopped because the cluster failed "
                             f"({type(exc).__name__}: {exc}). Check the workers (memory, logs) and rerun; "
                             "nothing was written.") from None
        del futures, cat
    return rows, {"mode": "dask", "scheduler": address, "workers": n_workers}


def sweep(problem_path, vary, workers: int | None = None, scheduler: str | None = None,
          progress: bool = False, large: bool = False, time_limit_s: float | None = None) -> dict:
    """Run a sweep given the problem file and ``vary`` (see `parse_varies`); the JSON-ready result.

    Keys: the common head (selector_version, problem, problem_file, caution), ``objective``
    {minimize, unit}, ``parameters`` [{key, unit, start, stop, n, values}], ``columns`` (row keys in
    order), ``rows`` (one per grid point, grid order), ``infeasible`` (count), ``notes`` and
    ``runner`` (mode, workers, elapsed_s). ``large``: allow grids above `LARGE_POINTS` points and more
    local workers than CPU cores. ``time_limit_s``: wall-clock limit of each point's search [s].
    """
    import warnings

    from selector.io.problem import load_study

    varies = parse_varies(vary)
    with warnings.catch_warnings():
        warnings.simplefilter("default")
        problem, catalogs = load_study(problem_path)
    return sweep_problem(problem, catalogs, varies, workers=workers, scheduler=scheduler, progress=progress,
                         large=large, time_limit_s=time_limit_s)


def sweep_problem(problem: Problem, catalogs: Catalogs, vary, workers: int | None = None,
                  scheduler: str | None = None, progress: bool = False, source: dict | None = None,
                  large: bool = False, time_limit_s: float | None = None) -> dict:
    """Run a sweep of a loaded problem and its catalogues; the JSON-ready result (as `sweep`).

    Parameters
    ----------
    problem : Problem
        The validated problem (its procurement filters apply at every point).
    catalogs : Catalogs
        The validated catalogues, shipped once to each worker.
    vary, workers, scheduler, progress, large, time_limit_s
        As `selector.public.sweep`, the documented entry point (which checks ``workers`` and the
        study first); ``vary`` may also be the (key, values) pairs of `parse_varies`.
    source : dict, optional
        The problem's tables as a dict when it came from memory (see `file_isa_context`).
    """
    from selector.api import OBJECTIVE_UNITS, header
    from selector.engine.parts import PartTables

    varies = parse_varies(vary) if not (isinstance(vary, list) and vary and isinstance(vary[0], tuple)) else vary
    validate(problem, varies)
    check_size(int(np.prod([len(v) for _, v in varies])), None if scheduler else workers, large)
    keys = [k for k, _ in varies]
    context = file_isa_context(problem, keys, source)
    notes = []
    if any(k in keys for k in ISA_KEYS):
        origin = "file" if source is None else "problem dict"
        fixed = ", ".join(f"{k} = {v:g}" for k, v in context.items())
        notes.append("air density from the ISA at each point's altitude / temperature" +
                     (f" (fixed from the {origin}: {fixed})" if context else ""))
    points = grid(varies)
    run_pts = [{**pt, **context} for pt in points]
    rows, runner = run_points(problem, catalogs, run_pts, workers=workers, scheduler=scheduler, progress=progress,
                              time_limit_s=time_limit_s)
    # the fixed ISA context is not a swept column
    for row in rows:
        for k in context:
            row.pop(k, None)
    parts = PartTables.build(problem, catalogs)
    out = header(parts)
    out.update({
        "objective": {"minimize": problem.objective, "unit": OBJECTIVE_UNITS[problem.objective]},
        "parameters": [{"key": k, "unit": SWEEPABLE[k][0], "start": float(v[0]), "stop": float(v[-1]), "n": len(v),
                        "values": [float(x) for x in v]} for k, v in varies],
        "columns": keys + list(columns(problem)),
        "rows": rows,
        "infeasible": sum(r["status"] == "infeasible" for r in rows),
        "time_limit": sum(r["status"] == "time_limit" for r in rows),
        "notes": notes,
        "runner": runner,
    })
    return out


def to_csv(result: dict) -> str:
    """The rows of a sweep result as CSV text (header = ``columns`` and a last ``caution`` column carrying
    the caution on every row; empty cell = not applicable)."""
    from selector.io.export import neutral_text
    from selector.records import CAUTION

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([*result["columns"], "caution"])
    for r in result["rows"]:  # text cells (part ids) neutralised against spreadsheet formulas
        w.writerow(["" if r.get(c) is None else (repr(r[c]) if isinstance(r[c], float) else
                                                  neutral_text(r[c]) if isinstance(r[c], str) else r[c])
                    for c in result["columns"]] + [CAUTION])
    return buf.getvalue()
