"""Load and validate a motor efficiency map (CSV) named by the ``efficiency_map`` column of motors.csv.

File format::

    # optional comment lines (source of the map)
    speed_rpm,torque_nm,efficiency_pct
    0,0,0
    0,50,62.5
    ...

- the header names the three columns ``speed_rpm`` [rpm], ``torque_nm`` [N m] and
  ``efficiency_pct`` [%], in any order;
- one row per grid point, rows in any order; the points form a full rectangular grid: every
  listed speed with every listed torque, each exactly once, at least 2 speeds and 2 torques;
- speeds >= 0; efficiencies in [0, 100]; every value finite. Torques may be negative (a map of
  both directions); a map with torques >= 0 only is read at |T| when the motor generates.

Points the motor never reaches (above its torque envelope) must still be filled in so that the grid
is rectangular; they are never used. Operating points outside the grid are errors of the design
that needs them, never extrapolated.
"""

from __future__ import annotations

import difflib
import math
from pathlib import Path

import numpy as np

from selector.errors import InputError
from selector.io.files import plain_number, read_input_text, split_lines_after_comments
from selector.physics.losses import EfficiencyGrid
from selector.units import RPM_TO_RAD_S

__all__ = ["MAP_COLUMNS", "load_efficiency_map"]

MAP_COLUMNS = ("speed_rpm", "torque_nm", "efficiency_pct")
"""Columns of an efficiency-map file."""
_UNITS = {"speed_rpm": "rpm", "torque_nm": "N m", "efficiency_pct": "%"}
_MAX_LISTED = 20


def load_efficiency_map(path, disp: str | None = None) -> EfficiencyGrid:
    """Read an efficiency-map CSV into an `EfficiencyGrid` (SI: rad/s, N m, fraction).

    Parameters
    ----------
    path : str or os.PathLike
        The map file.
    disp : str, optional
        How to name the file in messages (default: the path as given).

    Returns
    -------
    selector.physics.losses.EfficiencyGrid
        Grid speeds [rad/s], torques [N m], efficiencies [-] (shape (speeds, torques)); ``name``
        is `disp`.

    Raises
    ------
    InputError
        File missing or unreadable, or every format problem found (file, line, column, value,
        rule, what to do).
    """
    path = Path(path)
    disp = str(path) if disp is None else disp
    lines, start = split_lines_after_comments(_read_text(path, disp))
    if start >= len(lines):
        raise InputError(f"{disp}: no header row. An efficiency map needs the header "
                         f"{','.join(MAP_COLUMNS)} and one row per grid point.")
    head_no = start + 1
    header = [c.strip() for c in lines[start].split(",")]
    col = _header_columns(header, f"{disp} line {head_no} (header row)", disp)
    points, values = _grid_points(lines, head_no, len(header), col, disp)
    return _grid(points, values, disp)


def _header_columns(header: list[str], hloc: str, disp: str) -> dict[str, int]:
    """The index of each map column in the header row, or `InputError` listing unknown, missing and repeated
    columns."""
    errors: list[str] = []
    for h in header:
        if h not in MAP_COLUMNS:
            hit = difflib.get_close_matches(h, MAP_COLUMNS, n=1, cutoff=0.6)
            did = f' (did you mean "{hit[0]}"?)' if hit else ""
            errors.append(f"{hloc}: unknown column \"{h}\"{did}. "
                          f"The columns are {', '.join(MAP_COLUMNS)}.")
    for c in MAP_COLUMNS:
        n = header.count(c)
        if n == 0:
            errors.append(f"{hloc}: column \"{c}\" is missing. "
                          f"The columns are {', '.join(MAP_COLUMNS)}.")
        elif n > 1:
            errors.append(f"{hloc}: column \"{c}\" appears {n} times. Keep one.")
    if errors:
        raise InputError(_report(disp, errors))
    return {c: header.index(c) for c in MAP_COLUMNS}


def _grid_points(lines: list[str], head_no: int, ncol: int, col: dict[str, int], disp: str):
    """The rows after the header as ``{(speed_rpm, torque_nm): line}`` and ``{(speed_rpm, torque_nm):
    efficiency_pct}``, or `InputError` listing every bad row."""
    errors: list[str] = []
    points: dict[tuple[float, float], int] = {}
    values: dict[tuple[float, float], float] = {}
    for line_no in range(head_no + 1, len(lines) + 1):
        row = lines[line_no - 1]
        if not row.strip():
            continue
        where = f"{disp} line {line_no}"
        cells = [c.strip() for c in row.split(",")]
        if len(cells) != ncol:
            errors.append(f"{where}: {len(cells)} cells but the header has {ncol} columns. Fix the row "
                          "(numbers take a decimal point, not a decimal comma).")
            continue
        point = _grid_point(cells, col, where, errors)
        if point is None:
            continue
        s, t, e = point
        key = (s, t)
        if key in points:
            errors.append(f"{where}: the point speed_rpm = {s:g}, torque_nm = {t:g} is also on line {points[key]}; "
                          "each grid point must appear once. Remove one of the rows.")
            continue
        points[key] = line_no
        values[key] = e
    if errors:
        raise InputError(_report(disp, errors))
    return points, values


def _grid_point(cells: list[str], col: dict[str, int], where: str, errors: list[str]):
    """(speed_rpm, torque_nm, efficiency_pct) of one row, or None (its problems added to ``errors``)."""
    got = {}
    for c in MAP_COLUMNS:
        got[c] = _number(cells[col[c]], c, where, errors)
    s, t, e = got["speed_rpm"], got["torque_nm"], got["efficiency_pct"]
    if s is not None and s < 0:
        errors.append(f"{where}: speed_rpm = {cells[col['speed_rpm']]}; must be >= 0 [rpm]. Fix the value.")
        s = None
    if e is not None and not 0 <= e <= 100:
        errors.append(f"{where}: efficiency_pct = {cells[col['efficiency_pct']]}; must be in [0, 100] [%]. "
                      "Give the efficiency in percent, e.g. 94.5.")
        e = None
    if s is None or t is None or e is None:
        return None
    return s, t, e


def _grid(points: dict, values: dict, disp: str) -> EfficiencyGrid:
    """The rectangular grid of the points (at least 2 x 2, efficiencies in percent) in SI, read-only arrays."""
    speeds = sorted({k[0] for k in points})
    torques = sorted({k[1] for k in points})
    if len(speeds) < 2 or len(torques) < 2:
        raise InputError(_report(disp, [
            f"{disp}: {len(speeds)} distinct speed{'s' if len(speeds) != 1 else ''} and {len(torques)} distinct "
            f"torque{'s' if len(torques) != 1 else ''}; a map needs at least 2 of each. Add grid points."]))
    missing = [(s, t) for s in speeds for t in torques if (s, t) not in points]
    if missing:
        shown = ", ".join(f"({s:g} rpm, {t:g} N m)" for s, t in missing[:5])
        more = f" and {len(missing) - 5} more" if len(missing) > 5 else ""
        raise InputError(_report(disp, [
            f"{disp}: the points do not form a rectangular grid ({len(speeds)} speeds x {len(torques)} torques "
            f"need {len(speeds) * len(torques)} rows, {len(points)} given); missing {shown}{more}. "
            "Add a row for every speed with every torque (fill points above the motor's envelope too; "
            "they are never used)."]))
    if max(values.values()) <= 1.0:
        raise InputError(_report(disp, [
            f"{disp}: every efficiency_pct is <= 1; they look like fractions. Give efficiencies in percent "
            "(94.5, not 0.945)."]))
    eff = np.array([[values[(s, t)] for t in torques] for s in speeds], dtype=float) / 100.0
    spd = np.asarray(speeds, dtype=float) * RPM_TO_RAD_S
    trq = np.asarray(torques, dtype=float)
    for a in (eff, spd, trq):
        a.flags.writeable = False
    return EfficiencyGrid(speed_rad_s=spd, torque_nm=trq, efficiency=eff, name=disp)

def _report(disp: str, errors: list[str]) -> str:
    n = len(errors)
    shown = errors[:_MAX_LISTED] + ([f"... and {n - _MAX_LISTED} more"] if n > _MAX_LISTED else [])
    return (f"{disp}: {n} error{'s' if n > 1 else ''} in the efficiency map; it was not loaded.\n"
            + "\n".join(f"  {e}" for e in shown))


def _read_text(path: Path, disp: str) -> str:
    return read_input_text(path, disp, f"{disp}: efficiency map not found (looked for {path}). Check the path; it "
                           "is relative to the motors catalogue.", "efficiency-map CSV file", "CSV UTF-8")


def _number(raw: str, column: str, where: str, errors: list[str]):
    try:
        v = plain_number(raw)
    except ValueError:
        fix = "Write a plain number (the unit is in the header)."
        errors.append(f"{where}: {column} = {raw!r}; must be a number [{_UNITS[column]}]. {fix}")
        return None
    if not math.isfinite(v):
        errors.append(f"{where}: {column} = {raw}; must be a finite number [{_UNITS[column]}]. Fix the value.")
        return None
    return v
