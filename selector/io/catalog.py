"""Load and validate the part catalogues (CSV) against `selector.schema`.

Every mistake in a file is collected and reported at once in one `InputError`: the first line
is a summary, then one line per problem naming file, line, part id, column, value, rule and
what to do. Odd-but-usable values are loaded and reported with a `CatalogWarning`.

File format: a header row, then one row per orderable part. Comment lines starting with ``#``
(and blank lines) are allowed only at the very top of the file, before the header; a ``#``
anywhere later is data. Extra columns are carried through as text.

The work is split by stage: `selector.io.catalog_csv` (rows and header), `selector.io.catalog_cells`
(one cell), `selector.io.catalog_rows` (rules across the columns of a row); this module types the
rows, loads the efficiency maps motors name and builds the frame.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from selector.errors import InputError
from selector.inputs import Catalogs
from selector.io.catalog_cells import check_cell, distinct_numbers
from selector.io.catalog_csv import cell_records, check_header, location, read_rows, report
from selector.io.catalog_rows import LOSS_COLUMNS, check_row
from selector.io.efficiency_map import load_efficiency_map
from selector.io.schema import KINDS, SOURCE_ROW, Column, columns
from selector.physics.tyres import load_capacity_kg, parse_tyre_size, speed_rating_kmh, unloaded_diameter_m
from selector.units import RPM_TO_RAD_S

__all__ = ["LOSS_COLUMNS", "CatalogWarning", "distinct_numbers", "load_catalog", "load_catalogs",
           "motor_loss_models"]

MAP_COLUMN = "efficiency_map"
"""Motor column naming an efficiency-map CSV."""
MAP_GRID_COLUMN = "efficiency_map_grid"
"""Derived motor column holding the loaded map (`selector.physics.losses.EfficiencyGrid` or None)."""


class CatalogWarning(UserWarning):
    """A catalogue value is valid but unusual (loaded anyway; check it)."""


# --------------------------------------------------------------------------------------------
# public API


def load_catalog(kind: str, path) -> pd.DataFrame:
    """Load one catalogue CSV and validate it against the schema.

    Parameters
    ----------
    kind : str
        ``"motors"``, ``"reducers"`` or ``"tyres"``.
    path : str or os.PathLike
        CSV file; shown in messages as given.

    Returns
    -------
    pandas.DataFrame
        Canonical columns (typed; units in the names), extra columns (text), ``source_row``
        (line number in the file) and, for tyres, ``diameter_m`` [m], ``speed_rating_kmh``
        [km/h] and ``load_capacity_kg`` [kg]. Sorted by ``part`` (string order), fresh index.
        Motors: empty ``decline_speed_rpm`` = ``max_speed_rpm``, empty ``decline_exponent`` = 1.

    Raises
    ------
    InputError
        Listing every problem found in the file.

    Warns
    -----
    CatalogWarning
        One warning per file listing unusual values (heavy motor, low efficiency, rolling
        resistance outside 4..20 N/kN, ratio outside 1..30, extra column resembling a schema
        column).
    """
    schema = columns(kind)
    frame, errors, odd = _load(kind, schema, Path(path), str(path))
    if errors:
        raise InputError(report(str(path), kind, errors))
    if odd:
        n = len(odd)
        warnings.warn(
            f"{path}: {n} unusual value{'s' if n > 1 else ''} in the {kind} catalogue (loaded anyway; "
            "check them):\n" + "\n".join(f"  {w}" for w in odd),
            CatalogWarning,
            stacklevel=2,
        )
    return frame


def load_catalogs(paths: dict) -> Catalogs:
    """Load the three catalogues, reporting the problems of all files together.

    Parameters
    ----------
    paths : dict
        ``{"motors": path, "reducers": path, "tyres": path}``.

    Returns
    -------
    selector.study.Catalogs

    Raises
    ------
    InputError
        If a path is missing from `paths` or any file has problems (all files are checked).
    """
    missing = [k for k in KINDS if k not in paths]
    unknown = [k for k in paths if k not in KINDS]
    if missing or unknown:
        raise InputError(
            "catalogue paths: "
            + "; ".join([f"no path for {k}" for k in missing] + [f"unknown kind {k!r}" for k in unknown])
            + f". Give exactly {', '.join(KINDS)}."
        )
    frames, messages = {}, []
    for kind in KINDS:
        try:
            frames[kind] = load_catalog(kind, paths[kind])
        except InputError as exc:
            messages.append(str(exc))
    if messages:
        if len(messages) == 1:
            raise InputError(messages[0])
        raise InputError(f"{len(messages)} catalogue files have errors (listed below).\n" + "\n".join(messages))
    return Catalogs(motors=frames["motors"], reducers=frames["reducers"], tyres=frames["tyres"],
                    paths={k: Path(paths[k]) for k in KINDS})


def motor_loss_models(motors: pd.DataFrame) -> np.ndarray:
    """Which loss model each motor row has for energy studies.

    Parameters
    ----------
    motors : pandas.DataFrame
        A motors catalogue as returned by `load_catalog`.

    Returns
    -------
    numpy.ndarray of str, shape (rows,)
        ``"map"`` (an efficiency map; it takes precedence), ``"polynomial"`` (the four loss
        columns) or ``"none"`` (the motor cannot be used in an energy study).
    """
    has_map = motors[MAP_GRID_COLUMN].notna().to_numpy()
    has_poly = np.all([motors[c].notna().to_numpy() for c in LOSS_COLUMNS], axis=0)
    return np.where(has_map, "map", np.where(has_poly, "polynomial", "none"))


# --------------------------------------------------------------------------------------------
# reading


def _load(kind: str, schema: tuple[Column, ...], path: Path, disp: str):
    header_line, header, rows = read_rows(path, disp)
    keep, seen, extras, odd = check_header(kind, schema, header, rows, disp, header_line)
    errors: list[str] = []
    records = cell_records(disp, header, keep, seen, [c.name for c in schema], rows, errors)
    typed, extra_vals, lines = _typed_columns(kind, schema, extras, records, disp, errors, odd)
    if errors:
        raise InputError(report(disp, kind, errors))
    grids = None
    if kind == "motors":
        grids = _load_efficiency_maps(typed, lines, path, disp, errors, odd)
        if errors:
            raise InputError(report(disp, kind, errors))

    return _frame(kind, schema, typed, extra_vals, lines, grids), errors, odd


def _typed_columns(kind: str, schema, extras: list[str], records: list, disp: str, errors: list[str],
                   odd: list[str]):
    """Check and type every record; return (typed values per column, extra columns' text, line numbers)."""
    typed: dict[str, list] = {c.name: [] for c in schema}
    extra_vals: dict[str, list] = {h: [] for h in extras}
    lines: list[int] = []
    first_line_of_part: dict[str, int] = {}
    for line, rec in records:
        part = rec.get("part", "")
        loc = location(disp, line, part)
        vals, row_ok = _typed_row(schema, rec, part, loc, errors)
        if part:
            if part in first_line_of_part:
                errors.append(f"{loc}: part = \"{part}\" is also used on line {first_line_of_part[part]}; part ids "
                              "must be unique within a file. Rename or remove one of the rows.")
                row_ok = False
            else:
                first_line_of_part[part] = line
        if row_ok:
            row_errors, row_odd = check_row(kind, vals, loc)
            errors += row_errors
            odd += row_odd
        for c in schema:
            typed[c.name].append(vals[c.name])
        for h in extras:
            extra_vals[h].append(rec.get(h, ""))
        lines.append(line)
    return typed, extra_vals, lines


def _typed_row(schema, rec: dict, part: str, loc: str, errors: list[str]):
    """Typed values of one record and whether all its cells are valid (a row with three or more empty
    required cells is reported once, as a collapsed row)."""
    row_ok = True
    vals = {}
    empty = [c.name for c in schema if c.required and rec.get(c.name, "") == ""]
    collapse = len(empty) >= 3
    if collapse:
        hint = (" Comment lines starting with # are allowed only above the header row."
                if part.startswith("#") else "")
        if any("," in rec.get(c.name, "") for c in schema if c.type == "str"):
            hint += (" A cell holds commas: a double quote without its closing quote may have joined "
                     "cells; check the quotes on this line.")
        errors.append(f"{loc}: {len(empty)} required cells are empty ({', '.join(empty)}). "
                      f"Fill them in or remove the row.{hint}")
        row_ok = False
    for c in schema:
        raw = rec.get(c.name, "")
        if collapse and raw == "" and c.required:
            vals[c.name] = None
            continue
        v, err = check_cell(c, raw, loc)
        if err:
            errors.append(err)
            row_ok = False
        vals[c.name] = v
    return vals, row_ok


MAP_COVER_WARN = 0.99
"""A map reaching less than this share of its motor's maximum speed or peak torque is warned about [-]."""
MAP_EFFICIENCY_WARN = 0.99
"""A map efficiency at or above this is warned about (no traction motor reaches it) [-]."""
MAP_PEAK_LOW_WARN = 0.80
"""A map whose best efficiency is below this is warned about (traction motors peak at 90-97 %; common
practice, no published source) [-]."""


def _load_efficiency_maps(typed: dict, lines: list[int], path: Path, disp: str, errors: list[str],
                          odd: list[str]) -> list:
    """Load the efficiency map of every motor row that names one (each file once); collect errors, and
    warnings for a map that does not cover its motor's envelope or has implausibly high efficiencies."""
    grids: list = []
    loaded: dict[Path, object] = {}
    for line, part, given in zip(lines, typed["part"], typed[MAP_COLUMN], strict=False):
        if not given:
            grids.append(None)
            continue
        target = Path(os.path.normpath(path.parent / given))
        if target not in loaded:
            try:
                loaded[target] = load_efficiency_map(target, disp=str(target))
            except InputError as exc:
                loaded[target] = exc
        got = loaded[target]
        if isinstance(got, InputError):
            detail = str(got).replace("\n", "\n    ")
            errors.append(f"{location(disp, line, part or '')}: {MAP_COLUMN} = \"{given}\" cannot be used "
                          f"(paths are relative to the catalogue file): {detail}")
            grids.append(None)
        else:
            grids.append(got)
            odd += _map_findings(got, location(disp, line, part or ""), given, typed, len(grids) - 1)
    return grids


def _map_findings(grid, loc: str, given: str, typed: dict, row: int) -> list[str]:
    """Warnings for one motor's map: coverage of its envelope, efficiencies at or above `MAP_EFFICIENCY_WARN`."""
    out = []
    w_max = float(typed["max_speed_rpm"][row]) * RPM_TO_RAD_S
    t_max = float(typed["peak_torque_nm"][row])
    reach_w, reach_t = float(grid.speed_rad_s[-1]), float(grid.torque_nm[-1])
    if reach_w < MAP_COVER_WARN * w_max or reach_t < MAP_COVER_WARN * t_max:
        out.append(f"{loc}: {MAP_COLUMN} = \"{given}\" reaches {reach_w / RPM_TO_RAD_S:.6g} rpm and {reach_t:.6g} N m, "
                   f"the motor's envelope {w_max / RPM_TO_RAD_S:.6g} rpm and {t_max:.6g} N m; operating points "
                   "beyond the map make a design fail an energy study (a map is never extrapolated). Check the map.")
    top = float(np.nanmax(grid.efficiency))
    if top < MAP_PEAK_LOW_WARN:
        out.append(f"{loc}: {MAP_COLUMN} = \"{given}\" peaks at {100 * top:.6g} % efficiency; below "
                   f"{100 * MAP_PEAK_LOW_WARN:g} %, unusual for a traction motor (percent expected). Check the map.")
    inner = (grid.speed_rad_s[:, None] > 0) & (np.abs(grid.torque_nm)[None, :] > 0)
    zeros = int(np.count_nonzero(inner & ~(grid.efficiency > 0)))
    if zeros:
        out.append(f"{loc}: {MAP_COLUMN} = \"{given}\" reads 0 % at {zeros} grid point{'s' if zeros != 1 else ''} "
                   "with speed and torque above zero; a design that motors near them cannot follow a cycle (no "
                   "power reaches the shaft). Check the map.")
    if top >= MAP_EFFICIENCY_WARN:
        out.append(f"{loc}: {MAP_COLUMN} = \"{given}\" has efficiencies up to {100 * top:.6g} %; at or above "
                   f"{100 * MAP_EFFICIENCY_WARN:g} %, unusual for a traction motor. Check the map.")
    return out




# --------------------------------------------------------------------------------------------
# typed frame


def _frame(kind, schema, typed, extra_vals, lines, grids=None) -> pd.DataFrame:
    data = {}
    for c in schema:
        vals = typed[c.name]
        if c.type == "float":
            data[c.name] = np.array([np.nan if x is None else x for x in vals], dtype=float)
        elif c.type == "int":
            data[c.name] = np.array(vals, dtype=np.int64)
        else:
            data[c.name] = pd.array(vals, dtype=object)
    if kind == "motors":
        dec = data["decline_speed_rpm"]
        data["decline_speed_rpm"] = np.where(np.isnan(dec), data["max_speed_rpm"], dec)
        k = data["decline_exponent"]
        data["decline_exponent"] = np.where(np.isnan(k), 1.0, k)
    if kind == "reducers":
        for n in (2, 3):
            eff = data[f"efficiency_{n}_pct"]
            data[f"efficiency_{n}_pct"] = np.where(np.isnan(eff), data["efficiency_pct"], eff)
        st = data["shift_time_s"]
        data["shift_time_s"] = np.where(np.isnan(st), 0.0, st)
    for h, vals in extra_vals.items():
        data[h] = pd.array(vals, dtype=object)
    if kind == "motors":
        data[MAP_GRID_COLUMN] = pd.array(grids if grids is not None else [None] * len(lines), dtype=object)
    data[SOURCE_ROW] = np.array(lines, dtype=np.int64)
    df = pd.DataFrame(data)
    if kind == "tyres":
        geo = [parse_tyre_size(s) for s in df["size"]]
        df["diameter_m"] = unloaded_diameter_m([g[0] for g in geo], [g[1] for g in geo], [g[2] for g in geo])
        df["speed_rating_kmh"] = np.asarray(speed_rating_kmh(df["speed_symbol"].to_numpy()), dtype=float)
        df["load_capacity_kg"] = np.asarray(load_capacity_kg(df["load_index"].to_numpy()), dtype=float)
    return df.sort_values("part", kind="stable").reset_index(drop=True)
