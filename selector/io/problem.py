"""Load and validate a problem file (TOML) into `selector.study.Problem`.

Every mistake is collected and reported at once in one `InputError` (first line a summary,
then one line per problem naming file, line, table, key, value, rule and what to do).
Unknown keys and tables are errors, with a "did you mean" suggestion.

Choices made here (documented for users):

- ``[environment] road_friction`` defaults to 0.8 (dry asphalt, Wong ch. 1, from memory) with a
  warning, so a study never runs on an unstated friction silently; the [environment] table may be
  omitted (ISA sea level, friction 0.8, both warned).
- Air: ``air_density_kg_m3``, or ``altitude_m`` (geopotential, ISA) with optional
  ``temperature_c``, or ``temperature_c`` alone (sea-level pressure at that temperature);
  none of them = ISA sea level, 1.225 kg/m^3.
- Drag: ``drag_area_m2``, or ``drag_coefficient`` together with ``frontal_area_m2``.
- Catalogue paths are relative to the problem file.
- ``[energy]`` (optional; an energy study): ``cycle`` is required (a built-in cycle name or a cycle
  CSV relative to the problem file, loaded and validated here); ``range_km`` needs
  ``specific_energy_wh_per_kg`` and ``cost_per_kwh``; the other keys default to `ENERGY_DEFAULTS`.
"""

from __future__ import annotations

import difflib
import math
import os
import re
import tomllib
import warnings
from dataclasses import dataclass, fields, replace
from pathlib import Path
from typing import Callable

from selector.errors import InputError
from selector.inputs import (
    Catalogs,
    DriveOptions,
    Energy,
    Environment,
    Problem,
    Procurement,
    Requirements,
    Vehicle,
)
from selector.io.catalog import load_catalogs
from selector.io.cycles import BUILTIN_CYCLES, load_cycle
from selector.io.files import describe_os_error, printable_problem, read_input_text, shown
from selector.physics.atmosphere import (
    ISA_MAX_ALTITUDE_M,
    ISA_MIN_ALTITUDE_M,
    isa_density_kg_m3,
)

__all__ = ["ProblemWarning", "load_problem", "load_study"]

OBJECTIVES = ("cost", "mass", "accel_time", "energy")
DISTINCT = ("motor", "reducer", "tyre")
DRIVEN_AXLES = ("rear", "front", "both")
ROLLING_RADIUS_FACTOR_RANGE = (0.9, 1.0)
ROAD_FRICTION_MAX = 2.0          # common practice, no published source: road tyres stay well below
TEMPERATURE_RANGE_C = (-70.0, 60.0)  # common practice, no published source: road-vehicle climates
ENERGY_DEFAULTS = {f.name: f.default for f in fields(Energy)
                   if f.name in ("usable_fraction", "inverter_efficiency_pct", "auxiliary_w", "regen_min_speed_kmh")}
"""Defaults of the optional [energy] keys (from `selector.inputs.Energy`; common practice, no
published source): 90 % of the nominal pack energy usable, a 97 % traction inverter, 300 W of
auxiliary load (controls, lights, pumps; no cabin climate), no regeneration below 5 km/h.
``regen_max_kw`` absent = limited by the motor envelope only. ``cycle`` has no default (a slow
vehicle cannot follow a fast cycle); ``specific_energy_wh_per_kg`` and ``cost_per_kwh`` have none
(they decide the battery) and are required with ``range_km``."""


class ProblemWarning(UserWarning):
    """A problem-file value is valid but probably not what was meant."""


# --------------------------------------------------------------------------------------------
# the key table


@dataclass(frozen=True)
class Key:
    """One allowed key of a problem-file table."""

    name: str
    type: str
    """``"number"``, ``"int"``, ``"str"``, ``"str list"``, ``"bool"``."""
    required: bool = False
    unit: str = ""
    check: Callable[[object], str | None] | None = None
    """Return the broken rule (``"must be > 0"``) or None."""
    help: str = ""
    limits: tuple[float, float] | None = None
    """(lo, hi): outside is impossible for a road vehicle or beyond the solver's numeric range (an error)."""
    usual: tuple[float, float] | None = None
    """(lo, hi): outside is loaded with a `ProblemWarning` (unusual: check it)."""


def _positive(v):
    return None if v > 0 else "must be > 0"


def _non_negative(v):
    return None if v >= 0 else "must be >= 0"


def _open_unit(v):
    return None if 0 < v < 1 else "must be between 0 and 1 (exclusive)"


def _one_of(choices):
    def check(v):
        return None if v in choices else "must be one of " + ", ".join(f'"{c}"' for c in choices)
    return check


def _between(lo, hi, lo_open=False):
    def check(v):
        ok = (lo < v if lo_open else lo <= v) and v <= hi
        return None if ok else f"must be {'>' if lo_open else '>='} {lo:g} and <= {hi:g}"
    return check


def _even_tyres(v):
    return None if v >= 2 and v % 2 == 0 else "must be an even number >= 2 (tyres split evenly between two axles)"


_REQ = "optional requirement; absent = not required"

TABLES: dict[str, dict[str, Key]] = {
    "catalogs": {k.name: k for k in (
        Key("motors", "str", True, help="path of motors.csv, relative to this file"),
        Key("reducers", "str", True, help="path of reducers.csv, relative to this file"),
        Key("tyres", "str", True, help="path of tyres.csv, relative to this file"),
    )},
    "vehicle": {k.name: k for k in (
        Key("mass_kg", "number", True, "kg", _positive, "laden mass without the selected motor, reducer and tyres"),
        Key("drag_area_m2", "number", False, "m^2", _positive, "Cd x frontal area"),
        Key("drag_coefficient", "number", False, "", _positive, "Cd, with frontal_area_m2"),
        Key("frontal_area_m2", "number", False, "m^2", _positive, "frontal area, with drag_coefficient"),
        Key("wheelbase_m", "number", True, "m", _positive, "wheelbase"),
        Key("cg_height_m", "number", True, "m", _positive, "height of the centre of gravity"),
        Key("rear_axle_share", "number", True, "", _open_unit, "static share of mass_kg on the rear axle"),
        Key("driven_axle", "str", True, "", _one_of(DRIVEN_AXLES),
            '"rear", "front" or "both" (one drive unit per axle)'),
        Key("tyre_count", "int", True, "", _even_tyres, "number of tyres"),
        Key("rolling_radius_factor", "number", False, "", _between(*ROLLING_RADIUS_FACTOR_RANGE),
            "dynamic rolling radius / free radius, default 0.97"),
        Key("wheel_inertia_kgm2", "number", False, "kg m^2", _non_negative, "per wheel, default 0"),
    )},
    "environment": {k.name: k for k in (
        Key("road_friction", "number", False, "", _between(0.0, ROAD_FRICTION_MAX, lo_open=True),
            "peak tyre-road friction coefficient"),
        Key("air_density_kg_m3", "number", False, "kg/m^3", _positive, "air density"),
        Key("altitude_m", "number", False, "m", _between(ISA_MIN_ALTITUDE_M, ISA_MAX_ALTITUDE_M),
            "geopotential altitude for the ISA"),
        Key("temperature_c", "number", False, "degC", _between(*TEMPERATURE_RANGE_C), "air temperature"),
    )},
    "requirements": {k.name: k for k in (
        Key("top_speed_kmh", "number", False, "km/h", _positive, _REQ),
        Key("gradeability_pct", "number", False, "%", _positive, _REQ),
        Key("launch_accel_mps2", "number", False, "m/s^2", _positive, _REQ),
        Key("accel_to_kmh", "number", False, "km/h", _positive, "target speed of accel_time_s"),
        Key("accel_time_s", "number", False, "s", _positive, _REQ + "; needs accel_to_kmh"),
        Key("max_mass_kg", "number", False, "kg", _positive, _REQ),
        Key("budget", "number", False, "currency", _positive, _REQ),
        Key("speed_limiter_kmh", "number", False, "km/h", _positive, "caps the vehicle's maximum speed"),
    )},
    "objective": {k.name: k for k in (
        Key("minimize", "str", False, "", _one_of(OBJECTIVES),
            '"cost" (default), "mass", "accel_time" or "energy" (Wh/km on the [energy] cycle)'),
    )},
    "procurement": {k.name: k for k in (
        Key("distinct", "str", False, "", _one_of(DISTINCT), '"motor", "reducer" or "tyre"'),
        Key("avoid_suppliers", "str list", False, "", None, "suppliers to leave out"),
        Key("max_lead_time_weeks", "number", False, "weeks", _non_negative,
            "longest acceptable lead time (0 = in stock only)"),
    )},
    "drive": {k.name: k for k in (
        Key("same_unit", "bool", False, "", None, "the same motor and reducer part on both axles"),
        Key("front_motors", "str list", False, "", None, "motor part ids or suppliers allowed on the front axle"),
        Key("rear_motors", "str list", False, "", None, "motor part ids or suppliers allowed on the rear axle"),
    )},
    "energy": {k.name: k for k in (
        Key("cycle", "str", True, "", None,
            "built-in driving cycle (" + ", ".join(BUILTIN_CYCLES) + ") or a cycle CSV relative to this file"),
        Key("range_km", "number", False, "km", _positive, "range the battery must cover on the cycle"),
        Key("specific_energy_wh_per_kg", "number", False, "Wh/kg", _positive,
            "pack-level specific energy (required with range_km)"),
        Key("cost_per_kwh", "number", False, "currency/kWh", _non_negative,
            "battery price per kWh (required with range_km)"),
        Key("usable_fraction", "number", False, "", _between(0.0, 1.0, lo_open=True),
            f"usable share of the battery energy, default {ENERGY_DEFAULTS['usable_fraction']:g}"),
        Key("inverter_efficiency_pct", "number", False, "%", _between(0.0, 100.0, lo_open=True),
            f"inverter efficiency, default {ENERGY_DEFAULTS['inverter_efficiency_pct']:g}"),
        Key("auxiliary_w", "number", False, "W", _non_negative,
            f"auxiliary load at all times, default {ENERGY_DEFAULTS['auxiliary_w']:g}"),
        Key("regen_max_kw", "number", False, "kW", _non_negative,
            "cap on regenerated motor power (absent = motor envelope only, 0 = no regeneration)"),
        Key("regen_min_speed_kmh", "number", False, "km/h", _non_negative,
            f"no regeneration below this speed, default {ENERGY_DEFAULTS['regen_min_speed_kmh']:g}"),
    )},
}
"""Allowed keys per table of the problem file."""

RANGES: dict[str, dict[str, tuple]] = {
    # table: {key: (limits, usual)} in the key's unit; common practice, no published source: wide enough for
    # any road vehicle from a campus cart to a heavy truck, narrow enough to keep the model's numbers in range
    "vehicle": {
        "mass_kg": ((0.0, 1e6), (50.0, 60000.0)),
        "drag_area_m2": ((0.0, 100.0), (0.05, 15.0)),
        "drag_coefficient": ((0.0, 5.0), (0.1, 1.5)),
        "frontal_area_m2": ((0.0, 100.0), (0.3, 15.0)),
        "wheelbase_m": ((0.1, 30.0), (0.5, 10.0)),
        "cg_height_m": ((0.01, 10.0), (0.1, 3.0)),
        "tyre_count": ((2, 64), (2, 16)),
        "wheel_inertia_kgm2": ((0.0, 1000.0), (0.0, 100.0)),
    },
    "environment": {
        "air_density_kg_m3": ((0.01, 3.0), (0.3, 1.6)),
    },
    "requirements": {
        "top_speed_kmh": ((0.0, 1000.0), (0.0, 400.0)),
        "gradeability_pct": ((0.0, 500.0), (0.0, 100.0)),
        "launch_accel_mps2": ((0.0, 100.0), (0.0, 15.0)),
        "accel_to_kmh": ((0.0, 1000.0), (0.0, 400.0)),
        "accel_time_s": ((0.0, 3600.0), None),
        "max_mass_kg": ((0.0, 1e6), None),
        "budget": ((0.0, 1e12), None),
        "speed_limiter_kmh": ((0.0, 1000.0), None),
    },
    "procurement": {
        "max_lead_time_weeks": ((0.0, 1e4), None),
    },
    "energy": {
        "range_km": ((0.0, 1e5), (0.0, 3000.0)),
        "specific_energy_wh_per_kg": ((0.0, 2000.0), (30.0, 500.0)),
        "cost_per_kwh": ((0.0, 1e6), None),
        "auxiliary_w": ((0.0, 1e6), (0.0, 30000.0)),
        "regen_max_kw": ((0.0, 1e5), None),
        "regen_min_speed_kmh": ((0.0, 200.0), None),
    },
}
"""Limits (outside: an error) and usual ranges (outside: a warning) per problem key; the rule of the key
(`Key.check`) applies as well. See also `CG_HEIGHT_WHEELBASE_USUAL` for the rule across keys."""
CG_HEIGHT_WHEELBASE_USUAL = 0.6
"""cg_height_m / wheelbase_m above this is warned about; at or above 1 it is refused (common practice,
no published source: cars about 0.2, vans and buses up to about 0.4)."""
MAX_PROBLEM_BYTES = 1024 * 1024
"""Largest problem file read [bytes]."""
MAX_TOML_DEPTH = 16
"""Deepest nesting of arrays and inline tables accepted in a problem file (checked before parsing)."""

for _table, _ranges in RANGES.items():
    for _key, (_limits, _usual) in _ranges.items():
        TABLES[_table][_key] = replace(TABLES[_table][_key], limits=_limits, usual=_usual)

TOP_LEVEL: dict[str, str] = {"name": "str", **{t: "table" for t in TABLES}}
"""Allowed top-level keys: ``name`` (text) and the tables."""
REQUIRED_TABLES = ("catalogs", "vehicle")
DEFAULT_ROAD_FRICTION = 0.8
"""Peak friction assumed when the problem gives none: dry asphalt/concrete 0.8-0.9 (Wong, Theory of
Ground Vehicles ch. 1, table of road adhesion, from memory)."""


# --------------------------------------------------------------------------------------------
# helpers


def _short_number(v):
    """A number for a message: a whole number of hundreds of digits is shown by its size."""
    if isinstance(v, int) and not isinstance(v, bool) and abs(v) >= 10 ** 30:
        return f"{str(v)[:12]}... ({len(str(abs(v)))} digits)"
    return v


def toml_depth_problem(text: str) -> str | None:
    """Why ``text`` nests arrays / inline tables deeper than `MAX_TOML_DEPTH`, or None (a linear scan that
    skips strings and comments; run before the TOML parser, which recurses)."""
    depth = 0
    i, n = 0, len(text)
    line = 1
    while i < n:
        ch = text[i]
        if ch == "\n":
            line += 1
        elif ch == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        elif ch in "\"'":
            triple = text.startswith(ch * 3, i)
            end = ch * 3 if triple else ch
            j = i + len(end)
            while j < n:
                if ch == '"' and text[j] == "\\":
                    j += 2
                    continue
                if text.startswith(end, j):
                    break
                if text[j] == "\n":
                    if not triple:
                        break
                    line += 1
                j += 1
            i = j + len(end)
            continue
        elif ch in "[{":
            depth += 1
            if depth > MAX_TOML_DEPTH:
                return (f"line {line}: arrays or inline tables nested more than {MAX_TOML_DEPTH} deep; a problem "
                        "file needs at most two levels. Fix the brackets")
        elif ch in "]}":
            depth = max(depth - 1, 0)
        i += 1
    return None


def _toml_repr(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, dict):
        return "{...}"
    if isinstance(v, list):
        return "[" + ", ".join(_toml_repr(x) for x in v) + "]"
    return str(v)


def _type_name(v) -> str:
    if isinstance(v, bool):
        return "a boolean"
    if isinstance(v, str):
        return "text"
    if isinstance(v, dict):
        return "a table"
    if isinstance(v, list):
        return "a list"
    if isinstance(v, int):
        return "a whole number"
    if isinstance(v, float):
        return "a number"
    return type(v).__name__


_TABLE_NAME_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_.- ")


def _table_header(line: str) -> str | None:
    """The table name of a ``[name]`` header line, or None (a linear scan: no regular expression, whose
    backtracking on long runs of spaces took cubic time)."""
    t = line.strip()
    if not t.startswith("["):
        return None
    end = t.find("]")
    if end < 0:
        return None
    name, rest = t[1:end].strip(), t[end + 1:].strip()
    if not name or (rest and not rest.startswith("#")) or not set(name) <= _TABLE_NAME_CHARS:
        return None
    return name


_KEY_RE = re.compile(r"""^\s*([A-Za-z0-9_\-]+|"[^"]*"|'[^']*')\s*=""")


def _key_lines(text: str) -> dict[tuple[str, str], int]:
    """Map (table, key) -> first line number where the key is assigned (best effort)."""
    out: dict[tuple[str, str], int] = {}
    table = ""
    for n, line in enumerate(text.splitlines(), start=1):
        header = _table_header(line)
        if header is not None:
            table = header
            out.setdefault(("", table.split(".")[0].strip()), n)
            continue
        m = _KEY_RE.match(line)
        if m:
            out.setdefault((table, m.group(1).strip("\"'")), n)
    return out


class _Collector:
    def __init__(self, disp: str, text: str):
        self.disp = disp
        self.lines = _key_lines(text)
        self.errors: list[str] = []
        self.notes: list[str] = []
        """Warnings, issued only when the file has no errors."""

    def where(self, table: str, key: str | None = None) -> str:
        n = self.lines.get((table, key)) if key else self.lines.get(("", table))
        at = f" line {n}" if n else ""
        if not table:
            return f"{self.disp}{at}"
        return f"{self.disp}{at} [{table}]"

    def add(self, msg: str):
        self.errors.append(msg)

    def bad(self, table, key, value, rule, unit="", fix="Fix the value in the file."):
        u = f" [{unit}]" if unit else ""
        self.add(f"{self.where(table, key)} {key} = {_toml_repr(value)}; {rule}{u}. {fix}")


def _suggest(name: str, known, table: str) -> str:
    hit = difflib.get_close_matches(name, list(known), n=1, cutoff=0.6)
    if hit:
        return f' Did you mean "{hit[0]}"?'
    for other, keys in TABLES.items():
        if other != table and name in keys:
            return f" It belongs in the [{other}] table."
    return ""


def _check_value(col: _Collector, table: str, spec: Key, v):
    """Type and rule check; return the value or None (error recorded)."""
    u = f" [{spec.unit}]" if spec.unit else ""
    if spec.type in ("number", "int"):
        if spec.type == "int":
            ok = isinstance(v, int) and not isinstance(v, bool)
            want = "a whole number"
        else:
            ok = isinstance(v, (int, float)) and not isinstance(v, bool)
            want = "a number"
        if not ok:
            fix = "Write the number without quotes." if isinstance(v, str) else "Fix the value in the file."
            if spec.type == "int" and isinstance(v, float) and not isinstance(v, bool):
                fix = f"Write {int(v)}." if math.isfinite(v) and v == int(v) else "Fix the value in the file."
            col.bad(table, spec.name, v, f"must be {want}, not {_type_name(v)}", spec.unit, fix)
            return None
        try:
            finite = math.isfinite(v)
        except OverflowError:  # a whole number too large for a float
            finite = False
        if not finite:
            rule = "must be a finite number" + (" of ordinary size" if isinstance(v, int) else "")
            col.bad(table, spec.name, _short_number(v), rule, spec.unit)
            return None
        if spec.limits is not None and not spec.limits[0] <= v <= spec.limits[1] and (spec.check is None
                                                                                      or spec.check(v) is None):
            lo, hi = spec.limits
            col.bad(table, spec.name, v, f"must be between {lo:g} and {hi:g} (the range selector accepts for a road "
                    "vehicle)", spec.unit, "Check the value and its unit.")
            return None
        if spec.usual is not None and not spec.usual[0] <= v <= spec.usual[1]:
            col.notes.append(f"{col.where(table, spec.name)} {spec.name} = {_toml_repr(v)}; outside "
                             f"{spec.usual[0]:g}..{spec.usual[1]:g}{u}, unusual. Check the value and its unit.")
    elif spec.type == "bool":
        if not isinstance(v, bool):
            col.bad(table, spec.name, v, f"must be true or false, not {_type_name(v)}", "",
                    "Write true or false (without quotes).")
            return None
        return v
    elif spec.type == "str":
        if not isinstance(v, str):
            col.bad(table, spec.name, v, f"must be text in double quotes, not {_type_name(v)}", "",
                    "Put the value in double quotes.")
            return None
        why = printable_problem(v)
        if why:
            col.add(f"{col.where(table, spec.name)} {spec.name} = \"{shown(v)}\" {why}. Fix the text in the file.")
            return None
    elif spec.type == "str list":
        if not isinstance(v, list) or not all(isinstance(x, str) and x.strip() for x in v):
            col.bad(table, spec.name, v, "must be a list of non-empty texts, e.g. [\"Acme\", \"Volta\"]", "",
                    "Fix the value in the file.")
            return None
        for x in v:
            why = printable_problem(x)
            if why:
                col.add(f"{col.where(table, spec.name)} {spec.name}: \"{shown(x)}\" {why}. Fix the text in the file.")
                return None
        return tuple(x.strip() for x in v)
    if spec.check is not None:
        rule = spec.check(v)
        if rule:
            col.add(f"{col.where(table, spec.name)} {spec.name} = {_toml_repr(v)}; {rule}{u}. "
                    "Fix the value in the file.")
            return None
    return v


# --------------------------------------------------------------------------------------------
# public API


def load_problem(path) -> Problem:
    """Load a problem file (TOML) and validate it.

    Parameters
    ----------
    path : str or os.PathLike
        Problem file; shown in messages as given.

    Returns
    -------
    selector.study.Problem
        Catalogue paths resolved relative to the problem file (``os.path.normpath`` of
        problem folder / given path); air density computed from the [environment] table.

    Raises
    ------
    InputError
        File missing or unreadable, TOML syntax error (with line and column), or a list of every
        type, range, missing-key and unknown-key problem found.
    """
    path = Path(path)
    disp = str(path)
    text = _read_text(path, disp)
    deep = toml_depth_problem(text)
    if deep:
        raise InputError(f"{disp} {deep}.")
    try:
        data = tomllib.loads(text)
    except (tomllib.TOMLDecodeError, RecursionError) as exc:
        raise InputError(f"{disp}: TOML syntax error: {exc}. Fix the syntax (key = value, text in double "
                         "quotes, tables as [name]).") from None

    col = _Collector(disp, text)
    # top level
    for key, v in data.items():
        if key not in TOP_LEVEL:
            kind = "table" if isinstance(v, dict) else "key"
            shown = f"[{key}]" if isinstance(v, dict) else key
            col.add(f"{col.where('', key)}: unknown {kind} {shown}.{_suggest(key, TOP_LEVEL, '')} "
                    f"Allowed: name, {', '.join(f'[{t}]' for t in TABLES)}.")
        elif TOP_LEVEL[key] == "table" and not isinstance(v, dict):
            col.add(f"{col.where('', key)}: {key} = {_toml_repr(v)}; must be a table [{key}], not {_type_name(v)}. "
                    f"Write it as a [{key}] table with its keys.")
    name = data.get("name", path.stem)
    if not isinstance(name, str):
        col.bad("", "name", name, f"must be text in double quotes, not {_type_name(name)}", "",
                "Put the value in double quotes.")
        name = path.stem
    elif printable_problem(name):
        col.add(f"{col.where('', 'name')} name = \"{shown(name)}\" {printable_problem(name)}. "
                "Fix the text in the file.")
        name = path.stem
    for t in REQUIRED_TABLES:
        if t not in data:
            required = ", ".join(k.name for k in TABLES[t].values() if k.required)
            col.add(f"{disp}: table [{t}] is missing (required keys: {required}). Add it.")

    values: dict[str, dict] = {}
    for table, keys in TABLES.items():
        raw = data.get(table, {})
        raw = raw if isinstance(raw, dict) else {}
        got = {}
        for key, v in raw.items():
            if key not in keys:
                col.add(f"{col.where(table, key)} {key}: unknown key.{_suggest(key, keys, table)} "
                        f"Allowed in [{table}]: {', '.join(keys)}.")
                continue
            checked = _check_value(col, table, keys[key], v)
            if checked is not None:
                got[key] = checked
        if table in data and isinstance(data[table], dict):
            for spec in keys.values():
                if spec.required and spec.name not in raw:
                    unit = f" [{spec.unit}]" if spec.unit else ""
                    col.add(f"{col.where(table)}: required key {spec.name} is missing ({spec.help}{unit}). Add it.")
        values[table] = got

    vehicle = _vehicle(col, values["vehicle"], data)
    environment = _environment(col, values["environment"], data)
    requirements = _requirements(col, values["requirements"])
    objective = _objective(col, values["objective"], data)
    proc = dict(values["procurement"])
    if "max_lead_time_weeks" in proc:
        proc["max_lead_time_weeks"] = float(proc["max_lead_time_weeks"])
    procurement = Procurement(**proc)
    drive = _drive(col, values["drive"], data, vehicle)
    catalog_paths = _catalog_paths(col, path, values["catalogs"])
    energy = _energy(col, path, values["energy"], data)
    if energy is not None and energy.range_km is not None:
        requirements = replace(requirements, range_km=energy.range_km)

    if col.errors:
        n = len(col.errors)
        raise InputError(f"{disp}: {n} error{'s' if n > 1 else ''} in the problem file; nothing was computed.\n"
                         + "\n".join(f"  {e}" for e in col.errors))
    for note in col.notes:
        warnings.warn(note, ProblemWarning, stacklevel=2)
    return Problem(name=name, path=path, catalog_paths=catalog_paths, vehicle=vehicle, drive=drive,
                   environment=environment, requirements=requirements, objective=objective,
                   procurement=procurement, energy=energy)


def load_study(path) -> tuple[Problem, Catalogs]:
    """Load a problem file and the three catalogues it names.

    Parameters
    ----------
    path : str or os.PathLike
        Problem file (TOML).

    Returns
    -------
    (selector.study.Problem, selector.study.Catalogs)

    Raises
    ------
    InputError
        For any problem in the problem file or in the catalogues.

    Warns
    -----
    ProblemWarning
        When a supplier in ``[procurement] avoid_suppliers`` appears in no catalogue.
    CatalogWarning
        For unusual catalogue values (see `selector.catalog.load_catalog`).
    """
    problem = load_problem(path)
    catalogs = load_catalogs(problem.catalog_paths)
    avoid = problem.procurement.avoid_suppliers
    if avoid:
        known = set()
        for df in (catalogs.motors, catalogs.reducers, catalogs.tyres):
            known.update(df["supplier"])
        known_folded = {k.strip().casefold() for k in known}
        for s in avoid:
            if s.strip().casefold() not in known_folded:  # the filter matches names ignoring case
                hit = difflib.get_close_matches(s, sorted(known), n=1, cutoff=0.6)
                did = f' Did you mean "{hit[0]}"?' if hit else ""
                warnings.warn(f"{path} [procurement] avoid_suppliers: supplier \"{s}\" is in none of the "
                              f"catalogues, so it excludes nothing.{did}", ProblemWarning, stacklevel=2)
    return problem, catalogs


# --------------------------------------------------------------------------------------------
# sections


def _read_text(path: Path, disp: str) -> str:
    return read_input_text(path, disp, f"{disp}: problem file not found. Check the path.", "problem file (.toml)",
                           max_bytes=MAX_PROBLEM_BYTES)


def _vehicle(col: _Collector, v: dict, data: dict) -> Vehicle | None:
    raw = data.get("vehicle") if isinstance(data.get("vehicle"), dict) else None
    if raw is None:
        return None
    area_given = "drag_area_m2" in raw
    cd, fa = "drag_coefficient" in raw, "frontal_area_m2" in raw
    drag = None
    if area_given and (cd or fa):
        col.add(f"{col.where('vehicle', 'drag_area_m2')} drag_area_m2: give either drag_area_m2 or "
                "drag_coefficient with frontal_area_m2, not both. Remove one of them.")
    elif area_given:
        drag = v.get("drag_area_m2")
    elif cd and fa:
        if "drag_coefficient" in v and "frontal_area_m2" in v:
            drag = v["drag_coefficient"] * v["frontal_area_m2"]
    elif cd or fa:
        have, need = ("drag_coefficient", "frontal_area_m2") if cd else ("frontal_area_m2", "drag_coefficient")
        col.add(f"{col.where('vehicle', have)} {have} is given without {need}. Add {need}, or give "
                "drag_area_m2 (Cd x frontal area) instead.")
    else:
        col.add(f"{col.where('vehicle')}: no aerodynamic drag given. Add drag_area_m2 [m^2] (Cd x frontal "
                "area), or drag_coefficient with frontal_area_m2 [m^2].")
    needed = ("mass_kg", "wheelbase_m", "cg_height_m", "rear_axle_share", "driven_axle", "tyre_count")
    if drag is None or any(k not in v for k in needed):
        return None
    h_over_l = v["cg_height_m"] / v["wheelbase_m"]
    if h_over_l >= 1.0:
        col.add(f"{col.where('vehicle', 'cg_height_m')} cg_height_m = {_toml_repr(v['cg_height_m'])} is not below "
                f"wheelbase_m = {_toml_repr(v['wheelbase_m'])}; a road vehicle's centre of gravity is well below "
                "its wheelbase (it would tip over under braking). Check both values [m].")
        return None
    if h_over_l > CG_HEIGHT_WHEELBASE_USUAL:
        col.notes.append(f"{col.where('vehicle', 'cg_height_m')} cg_height_m / wheelbase_m = {h_over_l:.3g}; above "
                         f"{CG_HEIGHT_WHEELBASE_USUAL:g}, unusual. Check both values [m].")
    extra = {k: v[k] for k in ("rolling_radius_factor", "wheel_inertia_kgm2") if k in v}
    return Vehicle(mass_kg=float(v["mass_kg"]), drag_area_m2=float(drag), wheelbase_m=float(v["wheelbase_m"]),
                   cg_height_m=float(v["cg_height_m"]), rear_axle_share=float(v["rear_axle_share"]),
                   driven_axle=v["driven_axle"], tyre_count=int(v["tyre_count"]),
                   **{k: float(x) for k, x in extra.items()})


def _environment(col: _Collector, v: dict, data: dict) -> Environment | None:
    raw = data.get("environment") if isinstance(data.get("environment"), dict) else {}
    has_rho = "air_density_kg_m3" in raw
    isa_keys = [k for k in ("altitude_m", "temperature_c") if k in raw]
    if has_rho and isa_keys:
        col.add(f"{col.where('environment', 'air_density_kg_m3')} air_density_kg_m3: give either "
                f"air_density_kg_m3 or {' / '.join(isa_keys)} (ISA), not both. Remove one of them.")
        return None
    if "road_friction" not in raw:
        col.notes.append(f"{col.disp}: [environment] road_friction not given; assuming {DEFAULT_ROAD_FRICTION} "
                         "(dry asphalt). State it for wet, gravel or snow studies.")
    elif "road_friction" not in v:
        return None
    if has_rho:
        if "air_density_kg_m3" not in v:
            return None
        rho = float(v["air_density_kg_m3"])
    else:
        if any(k not in v for k in isa_keys):
            return None
        rho = isa_density_kg_m3(float(v.get("altitude_m", 0.0)),
                                None if "temperature_c" not in v else float(v["temperature_c"]))
    return Environment(air_density_kg_m3=rho, road_friction=float(v.get("road_friction", DEFAULT_ROAD_FRICTION)))


def _drive(col: _Collector, v: dict, data: dict, vehicle: Vehicle | None) -> DriveOptions:
    """The [drive] table: only meaningful with driven_axle = "both"."""
    if "drive" in data and vehicle is not None and vehicle.driven_axle != "both":
        col.add(f"{col.where('drive')}: [drive] applies only to two drive units; [vehicle] driven_axle is "
                f"\"{vehicle.driven_axle}\". Set driven_axle = \"both\" or remove the [drive] table.")
    return DriveOptions(**v)


def _requirements(col: _Collector, v: dict) -> Requirements:
    if "accel_time_s" in v and "accel_to_kmh" not in v:
        col.add(f"{col.where('requirements', 'accel_time_s')} accel_time_s is given without accel_to_kmh. "
                "Add accel_to_kmh (the target speed of the acceleration run) [km/h].")
    return Requirements(**{k: float(x) for k, x in v.items()})


def _objective(col: _Collector, v: dict, data: dict) -> str:
    minimize = v.get("minimize", "cost")
    raw_req = data.get("requirements") if isinstance(data.get("requirements"), dict) else {}
    if minimize == "accel_time" and "accel_to_kmh" not in raw_req:
        col.add(f"{col.where('objective', 'minimize')} minimize = \"accel_time\" needs [requirements] "
                "accel_to_kmh (the target speed of the acceleration run). Add it [km/h].")
    if minimize == "energy" and not isinstance(data.get("energy"), dict):
        col.add(f"{col.where('objective', 'minimize')} minimize = \"energy\" needs an [energy] table with the "
                "driving cycle (cycle = \"wltc_class3b\", for example). Add it.")
    return minimize


def _energy(col: _Collector, path: Path, v: dict, data: dict) -> Energy | None:
    raw = data.get("energy")
    if not isinstance(raw, dict):
        return None
    if "range_km" in raw:
        for key in ("specific_energy_wh_per_kg", "cost_per_kwh"):
            if key not in raw:
                unit = TABLES["energy"][key].unit
                col.add(f"{col.where('energy', 'range_km')} range_km is given without {key}; sizing the battery "
                        f"for a range needs it. Add {key} [{unit}].")
    elif "specific_energy_wh_per_kg" in raw or "cost_per_kwh" in raw:
        given = [k for k in ("specific_energy_wh_per_kg", "cost_per_kwh") if k in raw]
        col.notes.append(f"{col.where('energy', given[0])} {' and '.join(given)} given without range_km: no "
                         "battery is sized, so they are not used. Add range_km to size the battery.")
    if "cycle" not in v:
        return None
    given = v["cycle"]
    try:
        cycle = load_cycle(given, base_dir=path.parent)
    except InputError as exc:
        detail = str(exc).replace("\n", "\n    ")
        col.add(f"{col.where('energy', 'cycle')} cycle = {_toml_repr(given)}: {detail}")
        return None
    if any(k not in v for k in raw if k in TABLES["energy"]):
        return None
    name = given.strip().lower() if given.strip().lower() in BUILTIN_CYCLES else os.path.normpath(cycle.path)
    values = {k: float(x) for k, x in v.items() if k != "cycle"}
    return Energy(cycle=name, cycle_data=cycle, **values)


def _catalog_paths(col: _Collector, path: Path, v: dict) -> dict[str, Path]:
    out = {}
    base = path.parent
    for kind, given in v.items():
        if not given.strip():
            col.bad("catalogs", kind, given, "must not be empty", "", f"Give the path of {kind}.csv.")
            continue
        p = Path(os.path.normpath(base / given))
        try:
            p.stat()
        except (FileNotFoundError, NotADirectoryError):
            pass
        except (OSError, ValueError) as exc:
            col.add(f"{col.where('catalogs', kind)} {kind} = {_toml_repr(shown(given))}: cannot be used "
                    f"({describe_os_error(exc) if isinstance(exc, OSError) else exc}). Fix the path.")
            continue
        if not p.exists():
            col.add(f"{col.where('catalogs', kind)} {kind} = {_toml_repr(given)}: file not found (looked for {p}). "
                    "Fix the path; it is relative to the problem file.")
        elif p.is_dir():
            col.add(f"{col.where('catalogs', kind)} {kind} = {_toml_repr(given)}: {p} is a folder, not a CSV file. "
                    "Give the path of the CSV file.")
        out[kind] = p
    return out
