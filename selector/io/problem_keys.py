"""The keys of a problem file (TOML) as data: tables, types, units, rules, limits and usual ranges.

`TABLES` lists the allowed keys per table; `RANGES` the limits (outside: an error) and usual ranges
(outside: a `selector.io.problem.ProblemWarning`) of the numeric keys. `selector.io.problem` reads a
file against them.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import Callable

from selector.inputs import Energy
from selector.io.cycles import BUILTIN_CYCLES
from selector.physics.atmosphere import ISA_MAX_ALTITUDE_M, ISA_MIN_ALTITUDE_M

__all__ = ["ENERGY_DEFAULTS", "RANGES", "TABLES", "TOP_LEVEL", "Key"]

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
        "top_speed_kmh": ((0.0, 1000.0), (1.0, 400.0)),
        "gradeability_pct": ((0.0, 500.0), (0.0, 100.0)),
        "launch_accel_mps2": ((0.0, 100.0), (0.0, 15.0)),
        "accel_to_kmh": ((0.0, 1000.0), (1.0, 400.0)),
        "accel_time_s": ((0.0, 3600.0), None),
        "max_mass_kg": ((0.0, 1e6), None),
        "budget": ((0.0, 1e12), None),
        "speed_limiter_kmh": ((0.0, 1000.0), None),
    },
    "procurement": {
        "max_lead_time_weeks": ((0.0, 1e4), None),
    },
    "energy": {
        "range_km": ((0.01, 1e5), (1.0, 3000.0)),
        "usable_fraction": ((0.0, 1.0), (0.5, 1.0)),
        "inverter_efficiency_pct": ((0.0, 100.0), (80.0, 100.0)),
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
