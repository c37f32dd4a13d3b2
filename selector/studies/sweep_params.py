"""Sweep parameters: which problem values a sweep can vary, parsing and checking them, and a grid point's problem.

The grid side of `selector.studies.sweep` (which runs the points): ``KEY=START:STOP:N`` texts or
``{key: values}`` mappings become (key, values) pairs, are checked against the problem file's rules,
expand to grid points, and each point's overrides give the problem it solves. Errors are
`selector.errors.InputError`.
"""

from __future__ import annotations

import difflib
import itertools
import math
import os
import tomllib
from dataclasses import replace
from pathlib import Path

import numpy as np

from selector.errors import InputError
from selector.inputs import Problem
from selector.io.files import plain_number

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
    "energy.range_km": ("km", "range the battery must cover on the cycle"),
    "energy.specific_energy_wh_per_kg": ("Wh/kg", "pack-level specific energy"),
    "energy.cost_per_kwh": ("currency/kWh", "battery price"),
    "energy.auxiliary_w": ("W", "auxiliary load at all times"),
}
"""Problem keys a sweep can vary (dotted: table.key), with their unit and meaning."""

BATTERY_KEYS = ("energy.specific_energy_wh_per_kg", "energy.cost_per_kwh")
"""Energy keys that only matter with a range (they size and price the battery)."""

ISA_KEYS = ("environment.altitude_m", "environment.temperature_c")
"""Keys that set the air density through the ISA instead of directly."""

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
        start, stop = plain_number(bits[0]), plain_number(bits[1])
    except ValueError:
        raise InputError(f"vary {text!r}: START and STOP must be numbers, got {bits[0]!r} and {bits[1]!r}.") from None
    if not (math.isfinite(start) and math.isfinite(stop)):
        raise InputError(f"vary {text!r}: START and STOP must be finite numbers.")
    try:
        if not bits[2].strip().isascii():
            raise ValueError(bits[2])
        n = int(bits[2])
    except ValueError:
        raise InputError(f"vary {text!r}: N must be a whole number >= 1 (the number of values), "
                         f"got {bits[2]!r}.") from None
    if n < 1:
        raise InputError(f"vary {text!r}: N must be >= 1 (the number of values), got {n}.")
    if n > MAX_POINTS:  # before any value is made (a typo such as 1e9 values)
        raise InputError(f"vary {text!r}: N = {n:,} values; at most {MAX_POINTS:,} points in a grid. Use fewer values.")
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
    _check_energy_keys(problem, keys)
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


def _check_energy_keys(problem: Problem, keys) -> None:
    """InputError for swept energy keys the problem cannot use: no [energy] table, a range without the
    battery keys, battery keys without a range (no battery is sized, they would change nothing)."""
    swept = [k for k in keys if k.startswith("energy.")]
    if not swept:
        return
    e = problem.energy
    if e is None:
        raise InputError(f"vary {swept[0]}: the problem has no [energy] table (driving cycle, battery). Add one, "
                         "e.g. [energy] cycle = \"wltc_class3b\", or vary another key.")
    if "energy.range_km" in keys:
        for k in BATTERY_KEYS:
            if getattr(e, k.split(".", 1)[1]) is None and k not in keys:
                raise InputError(f"vary energy.range_km: the problem's [energy] table has no {k.split('.', 1)[1]}; "
                                 f"sizing the battery for a range needs it. Add it [{SWEEPABLE[k][0]}].")
    elif e.range_km is None:
        for k in BATTERY_KEYS:
            if k in keys:
                raise InputError(f"vary {k}: the problem's [energy] table has no range_km, so no battery is sized and "
                                 f"{k.split('.', 1)[1]} changes nothing. Add range_km [km], or vary energy.range_km "
                                 "as well.")


# ----------------------------------------------------------------------------- applying a point

def apply_overrides(problem: Problem, overrides: dict) -> Problem:
    """The problem with the dotted ``overrides`` (sweep keys -> numbers) applied.

    ``environment.altitude_m`` / ``environment.temperature_c`` recompute the air density by the
    ISA (`physics.atmosphere.isa_density_kg_m3`); the other key of the pair, when not given,
    is ISA standard (altitude 0, ISA temperature at the altitude). ``energy.range_km`` sets the
    [energy] range and the requirement the battery is sized for.
    """
    from selector.physics.atmosphere import isa_density_kg_m3

    _check_energy_keys(problem, list(overrides))
    tables = {"vehicle": {}, "environment": {}, "requirements": {}, "procurement": {}, "energy": {}}
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
    energy = problem.energy
    if tables["energy"]:
        energy = replace(energy, **tables["energy"])
        if "range_km" in tables["energy"]:
            tables["requirements"]["range_km"] = tables["energy"]["range_km"]
    return replace(problem,
                   vehicle=replace(problem.vehicle, **tables["vehicle"]),
                   environment=replace(problem.environment, **env),
                   requirements=replace(problem.requirements, **tables["requirements"]),
                   procurement=replace(problem.procurement, **tables["procurement"]), energy=energy)


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


def grid(varies: list[tuple[str, np.ndarray]]) -> list[dict]:
    """Grid points in order: the product of the values, the first parameter varying slowest."""
    keys = [k for k, _ in varies]
    return [dict(zip(keys, (float(x) for x in combo), strict=True))
            for combo in itertools.product(*[v for _, v in varies])]


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
