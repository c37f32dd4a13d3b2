"""Load a driving cycle (speed against time at 1 Hz): a built-in cycle by name or a user's CSV.

File format (the built-in cycles in ``selector/data/cycles/`` use it too)::

    # any number of comment lines (source, published figures), kept as the cycle's provenance
    time_s,speed_kmh
    0,0
    1,3.2187
    ...

- the header is exactly ``time_s,speed_kmh``; comment lines starting with ``#`` and blank lines are
  allowed only above it (and blank lines at the end of the file);
- one row per second: the first time is 0 and each next time is 1 s later;
- speeds are plain numbers (ASCII digits), finite, >= 0 and at most `MAX_SPEED_KMH` [km/h]; the
  first and the last speed are 0 (the cycle starts and ends at rest); at least two rows and at most
  `MAX_ROWS`; the cycle covers at least `MIN_DISTANCE_M` (the energy per km of a cycle that
  hardly moves is meaningless).

Every problem found is reported at once in one `InputError` naming the file, the line, what is
wrong and what to do.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np

from selector.errors import InputError
from selector.io.files import plain_number, read_input_text, split_lines_after_comments
from selector.physics.cycles import cycle_distance_m
from selector.units import KMH_PER_MPS

__all__ = ["BUILTIN_CYCLES", "HEADER", "Cycle", "builtin_cycle_path", "load_cycle"]

BUILTIN_CYCLES = ("wltc_class3b", "udds", "hwfet", "us06", "ftp75", "nedc")
"""Names of the cycles shipped with the package (file ``<name>.csv`` in ``selector/data/cycles``)."""

HEADER = ("time_s", "speed_kmh")
"""The header row of a cycle file."""

_MAX_LISTED = 20  # errors listed in one message; the rest are counted
MIN_DISTANCE_M = 100.0
"""Shortest distance a cycle may cover [m] (common practice, no published source: the standard
cycles cover 5 to 23 km)."""
MAX_ROWS = 36_001
"""Most rows a cycle file may hold: ten hours at 1 Hz (the energy model holds arrays over the
cycle for every design it evaluates at once) [-]."""
MAX_SPEED_KMH = 500.0
"""Highest speed a cycle file may hold [km/h] (common practice, no published source: no road-vehicle
driving cycle comes near it; a larger value is a unit or typing error)."""
_TIME_TOL_S = 1e-9


@dataclass(frozen=True, eq=False)
class Cycle:
    """A driving cycle sampled at 1 Hz (arrays are read-only).

    Attributes
    ----------
    name : str
        Built-in name, or the file's stem for a user's file.
    time_s : ndarray, shape (n,)
        0, 1, 2, ... [s].
    speed_mps : ndarray, shape (n,)
        Speed at each time [m/s] (converted from the file's km/h).
    source : tuple of str
        The file's ``#`` comment lines (provenance), ``#`` and surrounding blanks removed.
    path : pathlib.Path
        The file read.
    """

    name: str
    time_s: np.ndarray
    speed_mps: np.ndarray
    source: tuple[str, ...]
    path: Path

    @property
    def duration_s(self) -> float:
        """Time of the last sample [s]."""
        return float(self.time_s[-1])

    @property
    def distance_m(self) -> float:
        """Distance by the trapezoid rule over the 1 Hz samples [m]."""
        return cycle_distance_m(self.time_s, self.speed_mps)

    @property
    def max_speed_kmh(self) -> float:
        """Highest sampled speed [km/h]."""
        return float(np.max(self.speed_mps) * KMH_PER_MPS)

    @property
    def speed_kmh(self) -> np.ndarray:
        """Speed at each time [km/h]."""
        return self.speed_mps * KMH_PER_MPS


def builtin_cycle_path(name: str) -> Path:
    """File of a built-in cycle.

    Parameters
    ----------
    name : str
        One of `BUILTIN_CYCLES`.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    InputError
        For an unknown name (with a did-you-mean suggestion).
    """
    if name not in BUILTIN_CYCLES:
        raise InputError(_unknown_name_message(name))
    return Path(str(resources.files("selector") / "data" / "cycles" / f"{name}.csv"))


def load_cycle(name_or_path, base_dir=None) -> Cycle:
    """Load a built-in cycle by name, or a user's cycle file.

    Parameters
    ----------
    name_or_path : str or os.PathLike
        A built-in name (`BUILTIN_CYCLES`, case ignored) or the path of a CSV file in the cycle
        format (see the module docstring). A text without a folder separator and without a
        ``.`` is taken as a built-in name unless such a file exists.
    base_dir : str or os.PathLike, optional
        Folder that relative paths are relative to (e.g. the problem file's folder); default
        the working directory.

    Returns
    -------
    Cycle

    Raises
    ------
    InputError
        Unknown built-in name (with a did-you-mean suggestion), missing or unreadable file, or a
        list of every format problem found (file, line, what is wrong, what to do).
    """
    if isinstance(name_or_path, str):
        text = name_or_path.strip()
        if not text:
            raise InputError("cycle: the name is empty. Give a built-in cycle name "
                             f"({', '.join(BUILTIN_CYCLES)}) or the path of a CSV file.")
        if text.lower() in BUILTIN_CYCLES:
            name = text.lower()
            return _load_file(builtin_cycle_path(name), name, f"built-in cycle {name}")
        looks_like_name = not any(c in text for c in "/\\.")
        path = Path(text)
        if base_dir is not None and not path.is_absolute():
            path = Path(base_dir) / path
        if looks_like_name and not path.exists():
            raise InputError(_unknown_name_message(text))
        return _load_file(path, path.stem, text)
    path = Path(name_or_path)
    if base_dir is not None and not path.is_absolute():
        path = Path(base_dir) / path
    return _load_file(path, path.stem, str(name_or_path))


# --------------------------------------------------------------------------------------------


def _unknown_name_message(name: str) -> str:
    hit = difflib.get_close_matches(name.lower(), BUILTIN_CYCLES, n=1, cutoff=0.5)
    did = f' Did you mean "{hit[0]}"?' if hit else ""
    return (f"cycle \"{name}\": unknown built-in cycle.{did} Built-in cycles: {', '.join(BUILTIN_CYCLES)}; "
            "or give the path of a CSV file with columns time_s,speed_kmh.")


def _read_text(path: Path, disp: str) -> str:
    stem = path.stem.lower()
    hint = (f' The built-in cycle is named without a suffix: cycle = "{stem}".' if stem in BUILTIN_CYCLES
            else "")
    return read_input_text(path, disp, f"{disp}: cycle file not found (looked for {path}).{hint} Check the path, or "
                           f"give a built-in cycle name ({', '.join(BUILTIN_CYCLES)}).", "cycle CSV file", "CSV UTF-8")


def _load_file(path: Path, name: str, disp: str) -> Cycle:
    lines, start = split_lines_after_comments(_read_text(path, disp))
    source = [line.strip().lstrip("#").strip() for line in lines[:start] if line.strip()]
    if start >= len(lines):
        raise InputError(f"{disp}: no header row. The file needs the header {','.join(HEADER)} and one row per "
                         "second.")
    head_no = start + 1
    header = [c.strip() for c in lines[start].split(",")]
    if tuple(header) != HEADER:
        hint = ""
        if len(header) == 1 and (";" in header[0] or "\t" in header[0]):
            hint = " The file seems to be separated by semicolons or tabs; save it as comma-separated CSV."
        raise InputError(f"{disp} line {head_no}: header is {lines[start].strip()!r}; must be exactly "
                         f"{','.join(HEADER)} (time in seconds, speed in km/h).{hint} Fix the header row.")
    times, speeds = _rows(lines, head_no, disp)
    t_arr = np.asarray(times, dtype=float)
    v_arr = np.asarray(speeds, dtype=float) / KMH_PER_MPS
    t_arr.flags.writeable = False
    v_arr.flags.writeable = False
    return Cycle(name=name, time_s=t_arr, speed_mps=v_arr, source=tuple(source), path=path)


def _rows(lines: list[str], head_no: int, disp: str) -> tuple[list[float], list[float]]:
    """Times [s] and speeds [km/h] of the rows after the header, or `InputError` listing every bad row."""
    errors: list[str] = []
    times: list[float] = []
    speeds: list[float] = []
    prev_t = None
    last = len(lines)
    while last > head_no and not lines[last - 1].strip():  # blank lines at the end of the file
        last -= 1
    for line_no in range(head_no + 1, last + 1):
        row = lines[line_no - 1]
        if not row.strip():
            errors.append(f"{disp} line {line_no}: blank line among the data rows; blank lines are allowed only "
                          "above the header. Remove it (or give the missing second's row).")
            prev_t = None
            continue
        cells = row.split(",")
        where = f"{disp} line {line_no}"
        if len(cells) != 2:
            errors.append(f"{where}: {len(cells)} cells; each row must be time_s,speed_kmh. Fix the row.")
            prev_t = None
            times.append(math.nan)
            speeds.append(math.nan)
            continue
        t = _number(cells[0], "time_s", "s", where, errors)
        v = _number(cells[1], "speed_kmh", "km/h", where, errors)
        if v is not None and v < 0:
            errors.append(f"{where}: speed_kmh = {cells[1].strip()}; must be >= 0 [km/h]. Fix the value.")
            v = None
        elif v is not None and v > MAX_SPEED_KMH:
            errors.append(f"{where}: speed_kmh = {cells[1].strip()}; must be at most {MAX_SPEED_KMH:g} [km/h] (no "
                          "driving cycle comes near it). Check the value and that the column is in km/h.")
            v = None
        if t is not None:
            expected = 0.0 if not times else (prev_t + 1.0 if prev_t is not None else float(len(times)))
            _check_time(t, expected, bool(times), cells[0].strip(), where, errors)
        prev_t = t
        times.append(t if t is not None else math.nan)
        speeds.append(v if v is not None else math.nan)
    if not errors:
        errors += _whole_cycle_errors(times, speeds, head_no, disp)
    if errors:
        n = len(errors)
        shown = errors[:_MAX_LISTED]
        more = [f"... and {n - _MAX_LISTED} more"] if n > _MAX_LISTED else []
        raise InputError(f"{disp}: {n} error{'s' if n > 1 else ''} in the cycle file; it was not loaded.\n"
                         + "\n".join(f"  {e}" for e in shown + more))
    return times, speeds


def _whole_cycle_errors(times: list[float], speeds: list[float], head_no: int, disp: str) -> list[str]:
    """Rules on the whole cycle once every row is valid: rows (at least two, at most `MAX_ROWS`), start
    and end at rest, distance (at least `MIN_DISTANCE_M`)."""
    if len(times) < 2:
        return [f"{disp}: {len(times)} data row{'s' if len(times) != 1 else ''}; a cycle needs at least two "
                "rows (times 0 and 1). Add the rows."]
    if len(times) > MAX_ROWS:
        return [f"{disp}: {len(times):,} data rows; at most {MAX_ROWS:,} (ten hours at 1 Hz). Use a shorter "
                "cycle, e.g. one representative part of the duty."]
    if speeds[0] != 0.0 or speeds[-1] != 0.0:
        ends = [f"line {head_no + 1} (the first row) has speed_kmh = {speeds[0]:g}" if speeds[0] != 0.0 else "",
                f"line {head_no + len(speeds)} (the last row) has speed_kmh = {speeds[-1]:g}"
                if speeds[-1] != 0.0 else ""]
        return [f"{disp}: {' and '.join(e for e in ends if e)}; a cycle must start and end at rest (0 km/h), or "
                "its energy per km counts kinetic energy the vehicle gains or gives back instead of what the "
                "drive uses. Add the rows from and to standstill."]
    dist = cycle_distance_m(np.asarray(times), np.asarray(speeds) / KMH_PER_MPS)
    if dist < MIN_DISTANCE_M:
        return [f"{disp}: the cycle covers {dist:.3g} m; at least {MIN_DISTANCE_M:g} m, or no meaningful "
                "energy per km can be taken over it. Give a cycle that moves."]
    return []


def _check_time(t: float, expected: float, later: bool, raw: str, where: str, errors: list[str]) -> None:
    """The first time must be 0 s and each later one 1 s after the row before."""
    if abs(t - expected) > _TIME_TOL_S:
        if not later:
            errors.append(f"{where}: time_s = {raw}; the first time must be 0 [s]. "
                          "Shift the times to start at 0.")
        else:
            errors.append(f"{where}: time_s = {raw}; must be {expected:g} [s] (one row per "
                          "second, times increasing by exactly 1 s). Resample the cycle at 1 Hz.")

def _number(raw: str, column: str, unit: str, where: str, errors: list[str]):
    s = raw.strip()
    try:
        v = plain_number(s)
    except ValueError:
        if "," in s or (s.count(".") == 0 and s.replace(",", "").isdigit()):
            fix = "Use a decimal point, not a comma."
        else:
            fix = "Write a plain number (the unit is in the header)."
        errors.append(f"{where}: {column} = {s!r}; must be a number [{unit}]. {fix}")
        return None
    if not math.isfinite(v):
        errors.append(f"{where}: {column} = {s}; must be a finite number [{unit}]. Fix the value.")
        return None
    return v
