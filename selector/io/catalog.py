"""Load and validate the part catalogues (CSV) against `selector.schema`.

Every mistake in a file is collected and reported at once in one `InputError`: the first line
is a summary, then one line per problem naming file, line, part id, column, value, rule and
what to do. Odd-but-usable values are loaded and reported with a `CatalogWarning`.

File format: a header row, then one row per orderable part. Comment lines starting with ``#``
(and blank lines) are allowed only at the very top of the file, before the header; a ``#``
anywhere later is data. Extra columns are carried through as text.
"""

from __future__ import annotations

import csv
import difflib
import io
import math
import os
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from selector.errors import InputError
from selector.inputs import Catalogs
from selector.io.efficiency_map import load_efficiency_map
from selector.io.files import MAX_CELL_CHARS, control_char, printable_problem, read_input_text, shown
from selector.io.schema import (
    CONSTANT_POWER_RATIO_LIMIT,
    CONSTANT_POWER_RATIO_USUAL,
    DERIVED_COLUMNS,
    KINDS,
    MAX_SIZE_CHARS,
    SOURCE_ROW,
    TYRE_DIAMETER_LIMITS_M,
    TYRE_DIAMETER_USUAL_M,
    Column,
    columns,
)
from selector.physics.losses import peak_efficiency
from selector.physics.tyres import (
    LOAD_INDEX_KG,
    LOAD_INDEX_MAX,
    LOAD_INDEX_MIN,
    SPEED_SYMBOL_KMH,
    load_capacity_kg,
    parse_tyre_size,
    speed_rating_kmh,
    unloaded_diameter_m,
)
from selector.units import RPM_TO_RAD_S

__all__ = ["LOSS_COLUMNS", "CatalogWarning", "load_catalog", "load_catalogs", "motor_loss_models"]

LOSS_COLUMNS = ("loss_copper_w_per_nm2", "loss_iron_nm", "loss_windage_w_s3", "loss_constant_w")
"""Motor columns of the polynomial loss model (all four or none)."""
MAP_COLUMN = "efficiency_map"
"""Motor column naming an efficiency-map CSV."""
MAP_GRID_COLUMN = "efficiency_map_grid"
"""Derived motor column holding the loaded map (`selector.physics.losses.EfficiencyGrid` or None)."""

# Plausibility bounds for warnings (common practice, no published source).
MOTOR_MASS_WARN_KG = 500.0
PEAK_EFFICIENCY_WARN_PCT = (80.0, 99.0)
EFFICIENCY_WARN_PCT = 80.0
RR_WARN_N_PER_KN = (4.0, 20.0)
RATIO_WARN = (1.0, 30.0)
STEP_WARN = (1.05, 4.0)  # gear step ratio G_n / G_n+1 (common practice, no published source)

_REL_TOL = 1e-9  # equal values after rounding in a datasheet are not an error


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
        raise InputError(_report(str(path), kind, errors))
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


def _report(disp: str, kind: str, errors: list[str]) -> str:
    n = len(errors)
    head = f"{disp}: {n} error{'s' if n > 1 else ''} in the {kind} catalogue; the file was not loaded."
    return head + "\n" + "\n".join(f"  {e}" for e in errors)


def _read_text(path: Path, disp: str) -> str:
    return read_input_text(path, disp, f"{disp}: file not found. Check the path (catalogue paths in a problem "
                           "file are relative to the problem file).", "CSV file", "CSV UTF-8")


def _split_rows(text: str, disp: str):
    """Return (header_line, header, rows) with rows = [(line, cells)], or raise for empty files."""
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    lines = text.split("\n")
    start = 0
    while start < len(lines) and (not lines[start].strip() or lines[start].lstrip().startswith("#")):
        start += 1
    if start >= len(lines):
        if any(line.strip() for line in lines):
            raise InputError(f"{disp}: no header row (the file holds only comment lines). "
                             "Add a header row and one row per part.")
        raise InputError(f"{disp}: file is empty. Add a header row and one row per part.")
    reader = csv.reader(io.StringIO("\n".join(lines[start:])), strict=False)
    header_line = start + 1
    header = None
    rows = []
    prev = 0
    try:
        for cells in reader:
            line = start + prev + 1
            prev = reader.line_num
            if header is None and any("\n" in c for c in cells):  # a quoted header cell ran over a line break
                raise InputError(_unclosed_quote(disp, line, start + prev))
            if header is None:
                header = [c.strip() for c in cells]
                continue
            if not any(c.strip() for c in cells):
                continue
            rows.append((line, cells, start + prev))
    except csv.Error:  # a quoted cell longer than the csv module's field limit: also an unbalanced quote
        raise InputError(_unclosed_quote(disp, start + prev + 1, None)) from None
    return header_line, header, rows


def _unclosed_quote(disp: str, line: int, last: int | None) -> str:
    span = f" (it runs to line {last})" if last and last > line else ""
    return (f"{disp} line {line}: a double quote opens a cell that is not closed on the same line{span}. "
            "Close the quote, or remove the stray \" (a quote inside a quoted cell is written \"\").")


def _near(name: str, candidates) -> str | None:
    low = {c.lower(): c for c in candidates}
    hit = difflib.get_close_matches(name.lower(), list(low), n=1, cutoff=0.75)
    return low[hit[0]] if hit else None


def _load(kind: str, schema: tuple[Column, ...], path: Path, disp: str):
    text = _read_text(path, disp)
    header_line, header, rows = _split_rows(text, disp)
    hloc = f"{disp} line {header_line} (header row)"
    errors: list[str] = []
    odd: list[str] = []
    names = [c.name for c in schema]
    reserved = [c.name for c in DERIVED_COLUMNS[kind]] + [SOURCE_ROW]

    if len(header) == 1 and (";" in header[0] or "\t" in header[0]):
        sep = "semicolons" if ";" in header[0] else "tabs"
        raise InputError(_report(disp, kind, [
            f"{hloc}: the header is one column {header[0][:60]!r}; the file seems to be separated by {sep}. "
            "Save it as comma-separated CSV."]))

    # header: empty names, duplicates, reserved names, missing required columns
    keep = []
    for i, h in enumerate(header):
        if not h:
            if any(i < len(cells) and cells[i].strip() for _, cells, _ in rows):
                errors.append(f"{hloc}: column {i + 1} has no name but holds data. Give it a name in the header row.")
            continue
        keep.append(i)
    seen: dict[str, int] = {}
    for i in keep:
        h = header[i]
        if h in seen:
            errors.append(f"{hloc}: column \"{h}\" appears twice (columns {seen[h] + 1} and {i + 1}). "
                          "Remove or rename one of them.")
        else:
            seen[h] = i
        if h in reserved:
            errors.append(f"{hloc}: column \"{h}\" is computed by selector and must not be in the file. "
                          "Rename or remove it.")
    extras = [h for h in seen if h not in names and h not in reserved]
    for c in schema:
        if c.name in seen:
            continue
        if not c.required:
            hint = _near(c.name, extras)
            if hint:
                odd.append(f"{hloc}: column \"{hint}\" looks like the optional column \"{c.name}\" "
                           f"but is carried through as an extra column; {c.name} takes its default. "
                           f"Rename it to {c.name} if that is what it holds.")
            continue
        hint = _near(c.name, extras)
        did = f" (found \"{hint}\"; did you mean \"{c.name}\"?)" if hint else ""
        errors.append(f"{hloc}: required column \"{c.name}\" is missing{did}. "
                      f"Add or rename the column; expected columns: {', '.join(names)}.")
    if errors:
        raise InputError(_report(disp, kind, errors))
    if not rows:
        raise InputError(_report(disp, kind, [
            f"{hloc}: no data rows after the header. Add one row per orderable part."]))

    # cells
    ncol = len(header)
    records = []
    for line, cells, last in rows:
        spans = [i for i in keep if i < len(cells) and "\n" in cells[i] and header[i] in names]
        if spans or any(len(c) > MAX_CELL_CHARS for c in cells):  # a quote left open swallows the lines after it
            errors.append(_unclosed_quote(disp, line, last) if spans or last > line else
                          f"{disp} line {line}: a cell holds more than {MAX_CELL_CHARS:,} characters. Check the row.")
            continue
        if len(cells) > ncol:
            surplus = [c for c in cells[ncol:] if c.strip()]
            if surplus:
                part = cells[header.index("part")].strip() if "part" in seen else ""
                errors.append(f"{_loc(disp, line, part)}: {len(cells)} cells but the header has {ncol} columns "
                              f"(surplus {surplus[0]!r}). Quote values that contain commas, or remove stray commas.")
                continue
            cells = cells[:ncol]
        cells = cells + [""] * (ncol - len(cells))
        records.append((line, {header[i]: cells[i].strip() for i in keep}))

    typed: dict[str, list] = {c.name: [] for c in schema}
    extra_vals: dict[str, list] = {h: [] for h in extras}
    lines: list[int] = []
    first_line_of_part: dict[str, int] = {}
    for line, rec in records:
        part = rec.get("part", "")
        loc = _loc(disp, line, part)
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
            v, err = _check_cell(c, raw, loc)
            if err:
                errors.append(err)
                row_ok = False
            vals[c.name] = v
        if part:
            if part in first_line_of_part:
                errors.append(f"{loc}: part = \"{part}\" is also used on line {first_line_of_part[part]}; part ids "
                              "must be unique within a file. Rename or remove one of the rows.")
                row_ok = False
            else:
                first_line_of_part[part] = line
        if row_ok:
            row_errors, row_odd = _check_row(kind, vals, loc)
            errors += row_errors
            odd += row_odd
        for c in schema:
            typed[c.name].append(vals[c.name])
        for h in extras:
            extra_vals[h].append(rec.get(h, ""))
        lines.append(line)
    if errors:
        raise InputError(_report(disp, kind, errors))
    grids = None
    if kind == "motors":
        grids = _load_efficiency_maps(typed, lines, path, disp, errors)
        if errors:
            raise InputError(_report(disp, kind, errors))

    return _frame(kind, schema, typed, extra_vals, lines, grids), errors, odd


def _load_efficiency_maps(typed: dict, lines: list[int], path: Path, disp: str, errors: list[str]) -> list:
    """Load the efficiency map of every motor row that names one (each file once); collect errors."""
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
            errors.append(f"{_loc(disp, line, part or '')}: {MAP_COLUMN} = \"{given}\" cannot be used "
                          f"(paths are relative to the catalogue file): {detail}")
            grids.append(None)
        else:
            grids.append(got)
    return grids


def _loc(disp: str, line: int, part: str) -> str:
    who = f"part \"{shown(part)}\"" if part else "part id missing"
    return f"{disp} line {line} ({who})"


# --------------------------------------------------------------------------------------------
# checks

def _number_with_unit(raw: str) -> bool:
    """True when ``raw`` is a number followed by text, e.g. ``"250 Nm"`` (a linear scan, no regex)."""
    t = raw.strip()
    i = 1 if t[:1] in ("+", "-") else 0
    j = i
    while j < len(t) and (t[j].isdigit() or t[j] == "."):
        j += 1
    if j == i or t[i:j].count(".") > 1 or t[i:j] == ".":
        return False
    if j < len(t) and t[j] in "eE":  # an exponent, if digits follow
        k = j + 1 + (j + 1 < len(t) and t[j + 1] in "+-")
        m = k
        while m < len(t) and t[m].isdigit():
            m += 1
        if m > k:
            j = m
    rest = t[j:].lstrip()
    return bool(rest) and not (rest[0].isdigit() or rest[0] in ".,+-")


def _comma_advice(raw: str) -> str | None:
    """Advice for a number written with a comma, or None when it is not one."""
    t = raw.strip()
    body = t[1:] if t[:1] in "+-" else t
    groups = body.split(",")
    if len(groups) > 1 and all(g.isdigit() for g in groups) and 1 <= len(groups[0]) <= 3 \
            and all(len(g) == 3 for g in groups[1:]):
        plain = t.replace(",", "")
        if len(groups) == 2:  # 2,600: a thousands separator, or a decimal comma
            return (f"write {plain} (if the comma separates thousands) or {t.replace(',', '.')} (if it is a "
                    "decimal comma); selector reads a plain number with a decimal point")
        return f"write {plain} (no thousands separators)"
    if t.count(",") == 1:
        try:
            float(t.replace(",", "."))
        except ValueError:
            return None
        return f"write {t.replace(',', '.')}"
    return None


def _unit(c: Column) -> str:
    return f" [{c.unit}]" if c.unit not in ("-", "") else ""


def _check_cell(c: Column, raw: str, loc: str):
    """Convert one cell; return (value, error message or None)."""
    if len(raw) > MAX_CELL_CHARS or control_char(raw) is not None:
        return None, f"{loc}: {c.name} = \"{shown(raw)}\" {printable_problem(raw)}. Fix the cell."
    if raw == "":
        if c.required:
            return None, f"{loc}: {c.name} is empty; a value is required{_unit(c)}. Fill in the cell."
        return None, None
    if c.type == "str":
        return _check_text(c, raw, loc)
    try:
        v = float(raw)
    except ValueError:
        advice = _comma_advice(raw) if "," in raw else None
        if advice:
            return None, (f"{loc}: {c.name} = \"{raw}\"; must be a number with a decimal point{_unit(c)}. "
                          f"{advice[0].upper()}{advice[1:]}.")
        if _number_with_unit(raw):
            return None, (f"{loc}: {c.name} = \"{raw}\"; must be a plain number{_unit(c)}. Remove the unit "
                          "(the unit is in the column name).")
        return None, f"{loc}: {c.name} = \"{raw}\"; must be a number{_unit(c)}. Fix the value in the file."
    if not math.isfinite(v):
        return None, f"{loc}: {c.name} = {raw}; must be a finite number{_unit(c)}. Fix the value in the file."
    if c.type == "int":
        if v != int(v):
            return None, f"{loc}: {c.name} = {raw}; must be a whole number. Fix the value in the file."
        v = int(v)
    err = _check_rule(c, v, raw, loc)
    return (None, err) if err else (v, None)


def _check_rule(c: Column, v, raw: str, loc: str):
    rule = c.rule
    if rule == "> 0" and not v > 0:
        return f"{loc}: {c.name} = {raw}; must be > 0{_unit(c)}. Fix the value in the file."
    if rule == ">= 0" and not v >= 0:
        return f"{loc}: {c.name} = {raw}; must be >= 0{_unit(c)}. Fix the value in the file."
    if rule == "(0, 100]" and not 0 < v <= 100:
        return (f"{loc}: {c.name} = {raw}; must be in (0, 100]{_unit(c)}. Give the value in percent, "
                "e.g. 96.")
    if rule.startswith("load index") and v not in LOAD_INDEX_KG:
        return (f"{loc}: {c.name} = {raw}; must be a load index {LOAD_INDEX_MIN}..{LOAD_INDEX_MAX} "
                f"(ISO 4000-1; selector tabulates only this range). Check the tyre's service description.")
    if c.limits is not None and not c.limits[0] <= v <= c.limits[1]:
        lo, hi = c.limits
        return (f"{loc}: {c.name} = {shown(raw)}; must be between {lo:g} and {hi:g}{_unit(c)} (the range selector "
                "accepts for a road-vehicle part). Check the value and its unit.")
    return None


def _check_text(c: Column, raw: str, loc: str):
    if c.rule == "ISO metric size":
        if len(raw) > MAX_SIZE_CHARS:
            return None, (f"{loc}: {c.name} = \"{shown(raw)}\" is longer than {MAX_SIZE_CHARS} characters; "
                          "an ISO metric size looks like 205/55R16. Fix the size in the file.")
        try:
            parse_tyre_size(raw)
        except ValueError as exc:
            reason = str(exc).split(": ", 1)[-1]
            return None, f"{loc}: {c.name} = \"{raw}\"; {reason}. Fix the size in the file."
        return raw, None
    if c.rule == "ISO speed symbol":
        sym = raw.upper()
        if sym not in SPEED_SYMBOL_KMH:
            return None, (f"{loc}: {c.name} = \"{raw}\"; must be an ISO 4000-1 speed symbol "
                          f"({', '.join(SPEED_SYMBOL_KMH)}). Use the letter from the tyre's service "
                          "description, e.g. H for 210 km/h.")
        return sym, None
    return raw, None


def distinct_numbers(*values, digits=None) -> list[str]:
    """The numbers of one comparison message, each with enough significant digits to show how they compare.

    Each value gets at least ``digits[n]`` significant digits (default 6, as ``:g``), and all get
    more, together, until the printed numbers are ordered as the values are (e.g. a corner speed
    of 3493.05 rpm against decline_speed_rpm = 3493.1 prints "3493.05", not "3493").
    """
    mins = digits or (6,) * len(values)
    values = [float(x) for x in values]
    for d in range(1, 18):
        shown = [f"{x:.{max(d, m)}g}" for x, m in zip(values, mins, strict=False)]
        back = [float(t) for t in shown]
        if all((back[a] > back[b]) == (values[a] > values[b]) and (back[a] < back[b]) == (values[a] < values[b])
               for a in range(len(values)) for b in range(a)):
            return shown
    return [repr(x) for x in values]


def _check_row(kind: str, v: dict, loc: str):
    """Cross-column rules and plausibility warnings for one row whose cells are all valid."""
    errors, odd = [], []
    for c in columns(kind):
        x = v.get(c.name)
        if c.usual is not None and x is not None and not c.usual[0] <= x <= c.usual[1]:
            a, b, d = distinct_numbers(x, *c.usual)
            odd.append(f"{loc}: {c.name} = {a}; outside {b}..{d}{_unit(c)}, unusual. Check the value and its unit.")
    if kind == "motors":
        corner_rad_s = v["peak_power_kw"] * 1000.0 / v["peak_torque_nm"]
        ratio = v["max_speed_rpm"] * RPM_TO_RAD_S / corner_rad_s
        if ratio > CONSTANT_POWER_RATIO_LIMIT:
            errors.append(f"{loc}: peak_power_kw = {v['peak_power_kw']:g} with peak_torque_nm = "
                          f"{v['peak_torque_nm']:g} gives full power only above {corner_rad_s / RPM_TO_RAD_S:.4g} rpm, "
                          f"1/{ratio:.0f} of max_speed_rpm = {v['max_speed_rpm']:g}; power = torque x speed, so these "
                          f"cannot belong to one motor (at most 1/{CONSTANT_POWER_RATIO_LIMIT:g}). Check the values "
                          "and their units (kW, N m, rpm).")
        elif ratio > CONSTANT_POWER_RATIO_USUAL:
            odd.append(f"{loc}: max_speed_rpm / corner speed = {ratio:.3g} (corner speed = peak_power_kw x 1000 / "
                       f"peak_torque_nm); above {CONSTANT_POWER_RATIO_USUAL:g}, unusual for a traction motor. "
                       "Check peak_power_kw, peak_torque_nm and max_speed_rpm.")
        for cont, peak, unit in (("cont_torque_nm", "peak_torque_nm", "N m"), ("cont_power_kw", "peak_power_kw", "kW")):
            if v[cont] > v[peak] * (1 + _REL_TOL):
                a, b = distinct_numbers(v[cont], v[peak])
                errors.append(f"{loc}: {cont} = {a} is above {peak} = {b}; must be <= {peak} "
                              f"[{unit}]. Check both values against the datasheet.")
        n_max = v["max_speed_rpm"]
        n_dec = v["decline_speed_rpm"]
        corner = v["peak_power_kw"] * 1000.0 / v["peak_torque_nm"] / RPM_TO_RAD_S
        if n_dec is not None and n_dec > n_max * (1 + _REL_TOL):
            a, b = distinct_numbers(n_dec, n_max)
            errors.append(f"{loc}: decline_speed_rpm = {a} is above max_speed_rpm = {b}; must be "
                          "<= max_speed_rpm [rpm]. Fix one of the two values (leave decline_speed_rpm empty "
                          "for constant power up to max speed).")
        else:
            limit, what = (n_dec, "decline_speed_rpm") if n_dec is not None else (
                n_max, "max_speed_rpm (decline_speed_rpm is empty, so it equals max_speed_rpm)")
            if corner > limit * (1 + _REL_TOL):
                # the computed corner speed in whole rpm unless more digits are needed to tell it from the limit
                a, b = distinct_numbers(corner, limit, digits=(len(f"{corner:.0f}"), 6))
                errors.append(f"{loc}: corner speed = {a} rpm (peak_power_kw x 1000 / peak_torque_nm "
                              f"with peak_power_kw = {v['peak_power_kw']:g}, peak_torque_nm = "
                              f"{v['peak_torque_nm']:g}) is above {what} = {b}; must be <= "
                              f"{what.split(' ')[0]} [rpm]. Check the three values against the datasheet.")
        loss_given = [c for c in LOSS_COLUMNS if v[c] is not None]
        if loss_given and len(loss_given) < len(LOSS_COLUMNS):
            missing = [c for c in LOSS_COLUMNS if v[c] is None]
            errors.append(f"{loc}: loss-model columns {', '.join(missing)} are empty but "
                          f"{', '.join(loss_given)} {'is' if len(loss_given) == 1 else 'are'} given; give all "
                          f"four ({', '.join(LOSS_COLUMNS)}) or none. Write 0 for a loss the datasheet "
                          "leaves out.")
        elif loss_given:
            peak = 100.0 * peak_efficiency(
                v["loss_copper_w_per_nm2"], v["loss_iron_nm"], v["loss_windage_w_s3"], v["loss_constant_w"],
                v["peak_torque_nm"], v["peak_power_kw"] * 1000.0,
                (v["decline_speed_rpm"] or n_max) * RPM_TO_RAD_S, v["decline_exponent"] or 1.0,
                n_max * RPM_TO_RAD_S, n_speed=60, n_torque=60)
            lo, hi = PEAK_EFFICIENCY_WARN_PCT
            if not lo <= peak <= hi:
                odd.append(f"{loc}: the loss model gives a peak efficiency of {peak:.1f} % under the torque "
                           f"envelope; outside {lo:g}..{hi:g} %, unusual for a traction motor. Check the loss "
                           "coefficients and their units (T in N m, w in rad/s, losses in W).")
        if v["mass_kg"] > MOTOR_MASS_WARN_KG:
            a, b = distinct_numbers(v["mass_kg"], MOTOR_MASS_WARN_KG)
            odd.append(f"{loc}: mass_kg = {a}; above {b} kg, unusual for a "
                       "traction motor. Check the value and its unit (kg).")
    elif kind == "reducers":
        eff = v["efficiency_pct"]
        if eff < EFFICIENCY_WARN_PCT:
            hint = (" It looks like a fraction; efficiency_pct is in percent (96 means 96 %)." if eff <= 1
                    else " Check the value.")
            a, b = distinct_numbers(eff, EFFICIENCY_WARN_PCT)
            odd.append(f"{loc}: efficiency_pct = {a}; below {b} %, unusual for a "
                       f"reducer.{hint}")
        lo, hi = RATIO_WARN
        if not lo <= v["ratio"] <= hi:
            a, b, c = distinct_numbers(v["ratio"], lo, hi)
            odd.append(f"{loc}: ratio = {a}; outside {b}..{c}, unusual for a single-speed "
                       "traction reducer. Check the value (ratio = motor speed / wheel speed).")
        gear_errors, gear_odd = _check_gears(v, loc)
        errors += gear_errors
        odd += gear_odd
    elif kind == "tyres":
        w, a_pct, rim, _ = parse_tyre_size(v["size"])
        dia = float(unloaded_diameter_m(w, a_pct, rim))
        lo, hi = TYRE_DIAMETER_LIMITS_M
        if not lo <= dia <= hi:
            errors.append(f"{loc}: size = \"{v['size']}\" gives an unloaded diameter of {dia:.3g} m; must be "
                          f"between {lo:g} and {hi:g} m for a road-vehicle tyre. Check the size.")
        elif not TYRE_DIAMETER_USUAL_M[0] <= dia <= TYRE_DIAMETER_USUAL_M[1]:
            odd.append(f"{loc}: size = \"{v['size']}\" gives an unloaded diameter of {dia:.3g} m; outside "
                       f"{TYRE_DIAMETER_USUAL_M[0]:g}..{TYRE_DIAMETER_USUAL_M[1]:g} m, unusual. Check the size.")
        rr = v["rr_coefficient_n_per_kn"]
        lo, hi = RR_WARN_N_PER_KN
        if not lo <= rr <= hi:
            hint = (" It looks like a dimensionless Crr; the column is in N/kN (Crr x 1000, e.g. 8.5)."
                    if rr < 0.1 else " Check the value (EU tyre label classes span about 6.5..12 N/kN).")
            a, b, c = distinct_numbers(rr, lo, hi)
            odd.append(f"{loc}: rr_coefficient_n_per_kn = {a}; outside {b}..{c} N/kN.{hint}")
    return errors, odd


def _check_gears(v: dict, loc: str):
    """Rules of the multi-speed gearbox columns: decreasing ratios, a third gear only after a second,
    a shift time with every second gear; step ratios outside 1.05..4 are unusual."""
    errors, odd = [], []
    r1, r2, r3 = v["ratio"], v.get("ratio_2"), v.get("ratio_3")
    if r3 is not None and r2 is None:
        errors.append(f"{loc}: ratio_3 = {r3:g} is given without ratio_2; a third gear needs a second. "
                      "Fill in ratio_2 or move the value to ratio_2.")
    for name, hi_name, lo_v, hi_v in (("ratio_2", "ratio", r2, r1), ("ratio_3", "ratio_2", r3, r2)):
        if lo_v is not None and hi_v is not None and not lo_v < hi_v:
            errors.append(f"{loc}: {name} = {lo_v:g} is not below {hi_name} = {hi_v:g}; each further gear must be "
                          "strictly taller (a smaller ratio). List the gears from first (largest ratio) to last.")
    for n, r in ((2, r2), (3, r3)):
        if r is None and v.get(f"efficiency_{n}_pct") is not None:
            errors.append(f"{loc}: efficiency_{n}_pct is given without ratio_{n}. Remove it or add ratio_{n}.")
    if r2 is not None and v.get("shift_time_s") is None:
        errors.append(f"{loc}: shift_time_s is empty but the gearbox has a second gear (ratio_2 = {r2:g}); the "
                      "torque interruption per upshift is required [s]. Fill it in (0 for a seamless shift).")
    if r2 is None and v.get("shift_time_s") not in (None, 0, 0.0):
        odd.append(f"{loc}: shift_time_s = {v['shift_time_s']:g} on a single-speed reducer (no ratio_2); it is "
                   "ignored. Remove it, or add the gearbox's further ratios.")
    for a, b in ((r1, r2), (r2, r3)):
        if a is not None and b is not None and b > 0 and a > b:
            step = a / b
            if not STEP_WARN[0] <= step <= STEP_WARN[1]:
                odd.append(f"{loc}: gear step {a:g} / {b:g} = {step:.3g}; outside {STEP_WARN[0]:g}..{STEP_WARN[1]:g}, "
                           "unusual for a traction gearbox. Check the ratios.")
    return errors, odd


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
