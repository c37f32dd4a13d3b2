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

The key table is `selector.io.problem_keys`, the reading helpers and value checks
`selector.io.problem_checks`, the rules of each table `selector.io.problem_tables`.
"""

from __future__ import annotations

import difflib
import tomllib
import warnings
from dataclasses import replace
from pathlib import Path

from selector.errors import InputError
from selector.inputs import Catalogs, Problem, Procurement
from selector.io import problem_tables as tables
from selector.io.catalog import load_catalogs
from selector.io.files import printable_problem, read_input_text, shown
from selector.io.problem_checks import Collector, check_value, suggest, toml_depth_problem, toml_repr, type_name
from selector.io.problem_keys import (
    ENERGY_DEFAULTS,
    MAX_PROBLEM_BYTES,
    MAX_TOML_DEPTH,
    RANGES,
    REQUIRED_TABLES,
    TABLES,
    TOP_LEVEL,
    Key,
)

__all__ = ["ENERGY_DEFAULTS", "MAX_PROBLEM_BYTES", "MAX_TOML_DEPTH", "RANGES", "TABLES", "Key", "ProblemWarning",
           "load_problem", "load_study"]


class ProblemWarning(UserWarning):
    """A problem-file value is valid but probably not what was meant."""


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
    path = Path(path)
    disp = str(path)
    data, text = _parse(path, disp)
    col = Collector(disp, text)
    name = _top_level(col, data, path, disp)
    values = _checked_tables(col, data)

    vehicle = tables.vehicle(col, values["vehicle"], data)
    environment = tables.environment(col, values["environment"], data)
    requirements = tables.requirements(col, values["requirements"])
    objective = tables.objective(col, values["objective"], data)
    proc = dict(values["procurement"])
    if "max_lead_time_weeks" in proc:
        proc["max_lead_time_weeks"] = float(proc["max_lead_time_weeks"])
    procurement = Procurement(**proc)
    drive = tables.drive(col, values["drive"], data, vehicle)
    catalog_paths = tables.catalog_paths(col, path, values["catalogs"])
    energy = tables.energy(col, path, values["energy"], data)
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
# reading


def _read_text(path: Path, disp: str) -> str:
    return read_input_text(path, disp, f"{disp}: problem file not found. Check the path.", "problem file (.toml)",
                           max_bytes=MAX_PROBLEM_BYTES)


def _parse(path: Path, disp: str) -> tuple[dict, str]:
    """The parsed file and its text; `InputError` for nesting too deep or a TOML syntax error."""
    text = _read_text(path, disp)
    deep = toml_depth_problem(text)
    if deep:
        raise InputError(f"{disp} {deep}.")
    try:
        data = tomllib.loads(text)
    except (tomllib.TOMLDecodeError, RecursionError) as exc:
        raise InputError(f"{disp}: TOML syntax error: {exc}. Fix the syntax (key = value, text in double "
                         "quotes, tables as [name]).") from None
    return data, text


def _top_level(col: Collector, data: dict, path: Path, disp: str) -> str:
    """Check the top-level keys and the required tables; return the problem's name (the file stem by default)."""
    for key, v in data.items():
        if key not in TOP_LEVEL:
            kind = "table" if isinstance(v, dict) else "key"
            shown_key = f"[{key}]" if isinstance(v, dict) else key
            col.add(f"{col.where('', key)}: unknown {kind} {shown_key}.{suggest(key, TOP_LEVEL, '')} "
                    f"Allowed: name, {', '.join(f'[{t}]' for t in TABLES)}.")
        elif TOP_LEVEL[key] == "table" and not isinstance(v, dict):
            col.add(f"{col.where('', key)}: {key} = {toml_repr(v)}; must be a table [{key}], not {type_name(v)}. "
                    f"Write it as a [{key}] table with its keys.")
    name = data.get("name", path.stem)
    if not isinstance(name, str):
        col.bad("", "name", name, f"must be text in double quotes, not {type_name(name)}", "",
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
    return name


def _checked_tables(col: Collector, data: dict) -> dict[str, dict]:
    """The values of each table that pass their checks; unknown and missing required keys are recorded."""
    values: dict[str, dict] = {}
    for table, keys in TABLES.items():
        raw = data.get(table, {})
        raw = raw if isinstance(raw, dict) else {}
        got = {}
        for key, v in raw.items():
            if key not in keys:
                col.add(f"{col.where(table, key)} {key}: unknown key.{suggest(key, keys, table)} "
                        f"Allowed in [{table}]: {', '.join(keys)}.")
                continue
            checked = check_value(col, table, keys[key], v)
            if checked is not None:
                got[key] = checked
        if table in data and isinstance(data[table], dict):
            for spec in keys.values():
                if spec.required and spec.name not in raw:
                    unit = f" [{spec.unit}]" if spec.unit else ""
                    col.add(f"{col.where(table)}: required key {spec.name} is missing ({spec.help}{unit}). Add it.")
        values[table] = got
    return values
