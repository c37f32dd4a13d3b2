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
"""

from __future__ import annotations

import csv
import difflib
import io
import itertools
import math
import os
import sys
import threading
import time
import tomllib
from dataclasses import replace
from pathlib import Path

import numpy as np

from selector.errors import InputError
from selector.inputs import Catalogs, Problem

SWEEPABLE: dict[str, tuple[str, str]] = {
    # key: (unit, what)
    "vehicle.mass_kg": ("kg", "laden mass without the selected parts"),
    "vehicle.drag_area_m2": ("m^2", "Cd x frontal area"),
    "vehicle.wheelbase_m": ("m", "wheelbase"),
    "vehicle.cg_height_m": ("m", "height of the centre of gravity"),
    "vehicle.rear_axle_share": ("-", "static share of mass_kg on the rear axle"),
    "vehicle.rolling_radius_factor": ("-", "rolling radius / unloaded radius"),
    "vehicle.wheel_inertia_kgm2": ("kg m^2", "inertia of one wheel and tyre"),
    "environment.road_friction": ("-", "peak tyre-road friction coefficient"),
    "environment.air_density_kg_m3": ("kg/m^3", "air density"),
    "environment.altitude_m": ("m", "geopotential altitude; air density from the ISA"),
    "environment.temperature_c": ("degC", "air temperature; air density from the ISA"),
    "requirements.top_speed_kmh": ("km/h", "sustained top speed"),
    "requirements.gradeability_pct": ("%", "gradeability from crawl"),
    "requirements.launch_accel_mps2": ("m/s^2", "launch acceleration"),
    "requirements.accel_to_kmh": ("km/h", "target speed of the acceleration run"),
    "requirements.accel_time_s": ("s", "time to accel_to_kmh"),
    "requirements.max_mass_kg": ("kg", "vehicle mass limit"),
    "requirements.budget": ("currency", "motor + reducer + all tyres"),
    "requirements.speed_limiter_kmh": ("km/h", "speed limiter"),
    "procurement.max_lead_time_weeks": ("weeks", "longest acceptable lead time"),
}
"""Problem keys a sweep can vary (dotted: table.key), with their unit and meaning."""

ISA_KEYS = ("environment.altitude_m", "environment.temperature_c")
"""Keys that set the air density through the ISA instead of directly."""

COLUMNS = ("status", "objective", "motor", "reducer", "tyre", "cost", "mass_kg", "accel_time_s")
"""Result columns of every row, after the parameter columns."""
SLOT_COLUMNS = ("front_motor", "front_reducer", "rear_motor", "rear_reducer")
"""Further columns of a two-unit study's rows (its rows have null motor and reducer, as its design records)."""


def columns(problem: Problem) -> tuple[str, ...]:
    """Result columns of a study's rows: `COLUMNS`, plus `SLOT_COLUMNS` for a two-unit study."""
    return COLUMNS + (SLOT_COLUMNS if len(problem.axles) > 1 else ())

DASK_CONNECT_TIMEOUT_S = 10
"""How long to try reaching a Dask scheduler before giving up [s]."""

MAX_POINTS = 100_000
"""Largest grid accepted (a typo guard) [-]."""
LARGE_POINTS = 5_000
"""Grids above this many points need ``large=True`` (``--large``) [-]."""


# ----------------------------------------------------------------------------- parsing

def parse_vary(text: str) -> tuple[str, np.ndarray]:
    """Parse ``KEY=START:STOP:N`` into the key and its N values (``numpy.linspace``).

    Raises InputError for an unknown key (with a did-you-mean suggestion) or bad numbers.
    """
    if "=" not in text:
        raise InputError(f"vary {text!r}: expected KEY=START:STOP:N, "
                         "e.g. requirements.top_speed_kmh=100:140:5.")
    key, _, spec = text.partition("=")
    key = key.strip()
    check_key(key)
    bits = spec.split(":")
    if len(bits) != 3:
        raise InputError(f"vary {text!r}: the range must be START:STOP:N (three values separated by ':'), "
                         f"got {spec!r}.")
    try:
        start, stop = float(bits[0]), float(bits[1])
    except ValueError:
        raise InputError(f"vary {text!r}: START and STOP must be numbers, got {bits[0]!r} and {bits[1]!r}.") from None
    if not (math.isfinite(start) and math.isfinite(stop)):
        raise InputError(f"vary {text!r}: START and STOP must be finite numbers.")
    try:
        n = int(bits[2])
    except ValueError:
        raise InputError(f"vary {text!r}: N must be a whole number >= 1 (the number of values), "
                         f"got {bits[2]!r}.") from None
    if n < 1:
        raise InputError(f"vary {text!r}: N must be >= 1 (the number of values), got {n}.")
    if n == 1 and start != stop:
        raise InputError(f"vary {text!r}: N = 1 gives one value, but START != STOP. Use START:START:1 or N >= 2.")
    values = np.array([float(f"{v:.12g}") for v in np.linspace(start, stop, n)])
    return key, values


def check_key(key: str) -> None:
    """InputError unless ``key`` is a sweepable problem key (suggesting the closest ones)."""
    if key in SWEEPABLE:
        return
    known = list(SWEEPABLE)
    close = [k for k in known if k.split(".")[-1] == key.split(".")[-1]]
    close = close or difflib.get_close_matches(key, known, n=3, cutoff=0.5)
    hint = f" Did you mean {', '.join(repr(c) for c in close)}?" if close else ""
    if key == "vehicle.tyre_count":
        hint = " tyre_count must stay an even whole number; write one problem file per tyre count."
    raise InputError(f"vary {key!r}: not a problem key a sweep can vary.{hint} Sweepable keys: {', '.join(known)}.")


def _check_value(key: str, value: float) -> str | None:
    """The problem-file rule a value breaks, or None."""
    from selector.io.problem import TABLES

    table, name = key.split(".", 1)
    spec = TABLES[table][name]
    try:
        finite = math.isfinite(value)
    except (TypeError, OverflowError):
        finite = False
    if isinstance(value, bool) or not finite:
        return "must be a finite number"
    rule = None if spec.check is None else spec.check(value)
    if rule is None and spec.limits is not None and not spec.limits[0] <= value <= spec.limits[1]:
        rule = f"must be between {spec.limits[0]:g} and {spec.limits[1]:g} (the range selector accepts)"
    return rule


def check_size(n_points: int, workers: int | None, large: bool) -> None:
    """InputError for a grid above `LARGE_POINTS` or more workers than CPU cores, unless ``large``."""
    if large:
        return
    if n_points > LARGE_POINTS:
        raise InputError(f"the grid has {n_points:,} points (more than {LARGE_POINTS:,}), each an exact solve; "
                         "that can take hours. Use fewer values per --vary, or add --large to run it anyway.")
    cores = os.cpu_count() or 1
    if workers is not None and workers > cores:
        raise InputError(f"--workers {workers}: more than the {cores} CPU cores of this machine; extra processes "
                         f"only compete for them. Use --workers {cores} or fewer, or add --large to insist.")


def validate(problem: Problem, varies: list[tuple[str, np.ndarray]]) -> None:
    """Check a sweep against its problem: duplicates, conflicts and every value's rule."""
    keys = [k for k, _ in varies]
    if not varies:
        raise InputError("vary: give at least one key and its values (KEY=START:STOP:N).")
    dup = {k for k in keys if keys.count(k) > 1}
    if dup:
        raise InputError(f"vary {', '.join(sorted(dup))}: given more than once; give each key once.")
    if "environment.air_density_kg_m3" in keys and any(k in keys for k in ISA_KEYS):
        raise InputError("vary environment.air_density_kg_m3 together with altitude_m / temperature_c: the ISA "
                         "would overwrite the density. Vary either the density or the ISA keys.")
    req = problem.requirements
    if "requirements.accel_time_s" in keys and req.accel_to_kmh is None and "requirements.accel_to_kmh" not in keys:
        raise InputError("vary requirements.accel_time_s: the problem has no [requirements] accel_to_kmh "
                         "(the target speed of the acceleration run). Add it to the problem file.")
    n = int(np.prod([len(v) for _, v in varies]))
    if n > MAX_POINTS:
        raise InputError(f"the grid has {n:,} points (more than {MAX_POINTS:,}); use fewer values per vary key.")
    for key, values in varies:
        unit = SWEEPABLE[key][0]
        for v in values:
            rule = _check_value(key, float(v))
            if rule:
                raise InputError(f"vary {key}: value {v:g} [{unit}] {rule}; choose START and STOP inside the "
                                 "allowed range.")


# ----------------------------------------------------------------------------- applying a point

def apply_overrides(problem: Problem, overrides: dict) -> Problem:
    """The problem with the dotted ``overrides`` (sweep keys -> numbers) applied.

    ``environment.altitude_m`` / ``environment.temperature_c`` recompute the air density by the
    ISA (`physics.atmosphere.isa_density_kg_m3`); the other key of the pair, when not given,
    is ISA standard (altitude 0, ISA temperature at the altitude).
    """
    from selector.physics.atmosphere import isa_density_kg_m3

    tables = {"vehicle": {}, "environment": {}, "requirements": {}, "procurement": {}}
    for key, value in overrides.items():
        check_key(key)
        rule = _check_value(key, value)
        if rule:
            raise InputError(f"{key} = {value!r}: {rule} [{SWEEPABLE[key][0]}]. Give a value inside the allowed range.")
        table, name = key.split(".", 1)
        tables[table][name] = float(value)
    env = tables["environment"]
    if "altitude_m" in env or "temperature_c" in env:
        env["air_density_kg_m3"] = float(isa_density_kg_m3(env.pop("altitude_m", 0.0), env.pop("temperature_c", None)))
    return replace(problem,
                   vehicle=replace(problem.vehicle, **tables["vehicle"]),
                   environment=replace(problem.environment, **env),
                   requirements=replace(problem.requirements, **tables["requirements"]),
                   procurement=replace(problem.procurement, **tables["procurement"]))


def file_isa_context(problem: Problem, keys, source: dict | None = None) -> dict:
    """Fixed ISA values from the problem file to add to every point when one ISA key is swept.

    Sweeping ``altitude_m`` keeps the file's ``temperature_c`` (if any) and vice versa. ``source``:
    the problem's tables as a dict (a study from in-memory data), read instead of the file.
    """
    swept = [k for k in ISA_KEYS if k in keys]
    if not swept or (problem.path is None and source is None):
        return {}
    if source is not None:
        env = source.get("environment", {})
        env = env if isinstance(env, dict) else {}
    else:
        try:
            env = tomllib.loads(Path(problem.path).read_text(encoding="utf-8-sig")).get("environment", {})
        except (OSError, tomllib.TOMLDecodeError):  # the file was read and validated a moment ago
            return {}
    out = {}
    for k in ISA_KEYS:
        name = k.split(".", 1)[1]
        if k not in keys and name in env:
            out[k] = float(env[name])
    return out


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


def sweep_point(problem, overrides: dict, catalogs: Catalogs | None = None) -> dict:
    """Solve one grid point exactly and verify it (the worker; picklable, returns a plain dict).

    Parameters
    ----------
    problem : `study.Problem`, or the path of a problem file
    overrides : {dotted key: value} of this point (see `apply_overrides`)
    catalogs : the study's catalogues (default: read once per process from the problem's paths)

    Returns
    -------
    dict with the override values, then status ("optimal" | "infeasible"), objective (value),
    motor, reducer, tyre, cost, mass_kg, accel_time_s (None where not applicable), and reason
    (infeasible points); a two-unit study's rows have null motor and reducer and name the units in
    front_motor, front_reducer, rear_motor, rear_reducer.
    """
    from selector.api import procurement_filter, records
    from selector.engine.parts import PartTables
    from selector.engine.search import STATUS_OPTIMAL, search
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
        res = search(parts, allowed=allowed)
    row = {k: float(v) for k, v in overrides.items()}
    row.update(dict.fromkeys(columns(prob)))
    row["status"] = res.status
    if res.status == STATUS_OPTIMAL and res.designs:
        best = res.designs[0]
        rec = records(parts, [best], res.objective)[0]
        row.update({"objective": clean(best.value), "motor": rec["motor"], "reducer": rec["reducer"],
                    "tyre": rec["tyre"], "cost": rec["cost"], "mass_kg": rec["mass_kg"],
                    "accel_time_s": rec["performance"]["accel_time_s"]})
        if parts.two_units:
            for u in rec["units"]:
                row[f"{u['axle']}_motor"], row[f"{u['axle']}_reducer"] = u["motor"], u["reducer"]
    else:
        row["reason"] = res.reason
    return row


# ----------------------------------------------------------------------------- running

def grid(varies: list[tuple[str, np.ndarray]]) -> list[dict]:
    """Grid points in order: the product of the values, the first parameter varying slowest."""
    keys = [k for k, _ in varies]
    return [dict(zip(keys, (float(x) for x in combo), strict=True))
            for combo in itertools.product(*[v for _, v in varies])]


def _progress(total: int, enabled: bool):
    if not enabled:
        return None
    from tqdm import tqdm

    return tqdm(total=total, unit="point", file=sys.stderr, desc="sweep", leave=False)


def run_points(problem: Problem, catalogs: Catalogs, points: list[dict], workers: int | None = None,
               scheduler: str | None = None, progress: bool = False) -> tuple[list[dict], dict]:
    """Rows of every grid point, in grid order, and how they ran.

    ``workers``: local processes (default os.cpu_count(); 1 = in this process). ``scheduler``:
    address of a Dask scheduler (``tcp://host:8786``); then the cluster's workers run the points.
    """
    n = len(points)
    bar = _progress(n, progress)
    t0 = time.perf_counter()
    try:
        if scheduler:
            rows, runner = _run_dask(problem, catalogs, points, scheduler, bar)
        else:
            workers = max(1, min(workers or os.cpu_count() or 1, n))
            if workers == 1:
                rows = []
                for pt in points:
                    rows.append(sweep_point(problem, pt, catalogs))
                    if bar is not None:
                        bar.update(1)
                runner = {"mode": "serial", "workers": 1}
            else:
                rows = _run_processes(problem, catalogs, points, workers, bar)
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


def _run_processes(problem, catalogs, points, workers, bar) -> list[dict]:
    from concurrent.futures import ProcessPoolExecutor, as_completed
    from concurrent.futures.process import BrokenProcessPool

    rows = [None] * len(points)
    ex = ProcessPoolExecutor(max_workers=workers, initializer=_init_pool_worker, initargs=(problem, catalogs))
    try:
        futures = {ex.submit(sweep_point, problem, pt): n for n, pt in enumerate(points)}
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


def _run_dask(problem, catalogs, points, address, bar) -> tuple[list[dict], dict]:
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
        futures = [client.submit(sweep_point, problem, pt, cat, pure=False) for pt in points]
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


def parse_varies(vary) -> list[tuple[str, np.ndarray]]:
    """The swept keys and their values from ``vary``.

    Parameters
    ----------
    vary : list of str, or mapping of str to sequence of float
        ``KEY=START:STOP:N`` texts (see `parse_vary`), or ``{dotted key: values}`` (values in the
        key's unit, e.g. ``{"requirements.top_speed_kmh": [100, 110, 120]}``) [unit of each key].

    Raises
    ------
    InputError
        Naming the parameter ``vary``: an unknown key, bad numbers or an empty list of values.
    """
    if isinstance(vary, str):
        vary = [vary]
    if not hasattr(vary, "items"):
        return [parse_vary(v) for v in vary]
    out = []
    for key, values in vary.items():
        check_key(str(key))
        try:
            arr = np.atleast_1d(np.asarray(values, dtype=float))
        except (TypeError, ValueError):
            raise InputError(f"vary {key!r}: the values must be numbers, got {values!r}.") from None
        if arr.ndim != 1 or arr.size == 0 or not np.isfinite(arr).all():
            raise InputError(f"vary {key!r}: give a non-empty list of finite numbers, got {values!r}.")
        out.append((str(key), arr))
    return out


def sweep(problem_path, vary, workers: int | None = None, scheduler: str | None = None,
          progress: bool = False, large: bool = False) -> dict:
    """Run a sweep given the problem file and ``vary`` (see `parse_varies`); the JSON-ready result.

    Keys: the common head (selector_version, problem, problem_file, caution), ``objective``
    {minimize, unit}, ``parameters`` [{key, unit, start, stop, n, values}], ``columns`` (row keys in
    order), ``rows`` (one per grid point, grid order), ``infeasible`` (count), ``notes`` and
    ``runner`` (mode, workers, elapsed_s). ``large``: allow grids above `LARGE_POINTS` points and more
    local workers than CPU cores.
    """
    import warnings

    from selector.io.problem import load_study

    varies = parse_varies(vary)
    with warnings.catch_warnings():
        warnings.simplefilter("default")
        problem, catalogs = load_study(problem_path)
    return sweep_problem(problem, catalogs, varies, workers=workers, scheduler=scheduler, progress=progress,
                         large=large)


def sweep_problem(problem: Problem, catalogs: Catalogs, vary, workers: int | None = None,
                  scheduler: str | None = None, progress: bool = False, source: dict | None = None,
                  large: bool = False) -> dict:
    """Run a sweep of a loaded problem and its catalogues; the JSON-ready result (as `sweep`).

    Parameters
    ----------
    problem : Problem
        The validated problem (its procurement filters apply at every point).
    catalogs : Catalogs
        The validated catalogues, shipped once to each worker.
    vary : list of str, or mapping of str to sequence of float
        See `parse_varies` [unit of each key].
    workers : int, optional
        Local worker processes (default: CPU count; 1 = in this process) [-].
    scheduler : str, optional
        Address of a Dask scheduler, e.g. ``tcp://host:8786``.
    progress : bool
        Show a progress bar on stderr.
    source : dict, optional
        The problem's tables as a dict when it came from memory (see `file_isa_context`).
    large : bool
        Allow grids above `LARGE_POINTS` points and more local workers than CPU cores.
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
    rows, runner = run_points(problem, catalogs, run_pts, workers=workers, scheduler=scheduler, progress=progress)
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
        "infeasible": sum(r["status"] != "optimal" for r in rows),
        "notes": notes,
        "runner": runner,
    })
    return out


def to_csv(result: dict) -> str:
    """The rows of a sweep result as CSV text (header = ``columns``; empty cell = not applicable)."""
    from selector.io.export import neutral_text

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(result["columns"])
    for r in result["rows"]:  # text cells (part ids) neutralised against spreadsheet formulas
        w.writerow(["" if r.get(c) is None else (repr(r[c]) if isinstance(r[c], float) else
                                                  neutral_text(r[c]) if isinstance(r[c], str) else r[c])
                    for c in result["columns"]])
    return buf.getvalue()
