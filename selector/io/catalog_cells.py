"""Cell checks of the catalogue CSVs: convert one cell to its typed value or explain what is wrong.

Numbers written with a unit (``250 Nm``) or a decimal comma (``2,6``) get advice of their own;
texts are checked against their rule (ISO metric tyre size, ISO 4000-1 speed symbol).
`distinct_numbers` prints the numbers of a comparison with the digits needed to show how they compare.
"""

from __future__ import annotations

import math

from selector.io.files import MAX_CELL_CHARS, control_char, plain_number, printable_problem, shown
from selector.io.schema import MAX_SIZE_CHARS, Column
from selector.physics.tyres import (
    LOAD_INDEX_KG,
    LOAD_INDEX_MAX,
    LOAD_INDEX_MIN,
    SPEED_SYMBOL_KMH,
    parse_tyre_size,
)

__all__ = ["check_cell", "distinct_numbers", "unit_suffix"]

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
    hexadecimal = t[i:j] == "0" and rest[:1] in ("x", "X")
    return bool(rest) and not (rest[0].isdigit() or rest[0] in ".,+-_" or hexadecimal)


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


def unit_suffix(c: Column) -> str:
    """`` [unit]`` for a message about column ``c`` (empty for a dimensionless column)."""
    return f" [{c.unit}]" if c.unit not in ("-", "") else ""


def check_cell(c: Column, raw: str, loc: str):
    """Convert one cell; return (value, error message or None)."""
    if len(raw) > MAX_CELL_CHARS or control_char(raw) is not None:
        return None, f"{loc}: {c.name} = \"{shown(raw)}\" {printable_problem(raw)}. Fix the cell."
    if raw == "":
        if c.required:
            return None, f"{loc}: {c.name} is empty; a value is required{unit_suffix(c)}. Fill in the cell."
        return None, None
    if c.type == "str":
        return _check_text(c, raw, loc)
    try:
        v = plain_number(raw)
    except ValueError:
        advice = _comma_advice(raw) if "," in raw else None
        if advice:
            return None, (f"{loc}: {c.name} = \"{raw}\"; must be a number with a decimal point{unit_suffix(c)}. "
                          f"{advice[0].upper()}{advice[1:]}.")
        if _number_with_unit(raw):
            return None, (f"{loc}: {c.name} = \"{raw}\"; must be a plain number{unit_suffix(c)}. Remove the unit "
                          "(the unit is in the column name).")
        return None, f"{loc}: {c.name} = \"{raw}\"; must be a number{unit_suffix(c)}. Fix the value in the file."
    if not math.isfinite(v):
        return None, f"{loc}: {c.name} = {raw}; must be a finite number{unit_suffix(c)}. Fix the value in the file."
    if c.type == "int":
        if v != int(v):
            return None, f"{loc}: {c.name} = {raw}; must be a whole number. Fix the value in the file."
        v = int(v)
    err = _check_rule(c, v, raw, loc)
    return (None, err) if err else (v, None)


def _check_rule(c: Column, v, raw: str, loc: str):
    rule = c.rule
    if rule == "> 0" and not v > 0:
        return f"{loc}: {c.name} = {raw}; must be > 0{unit_suffix(c)}. Fix the value in the file."
    if rule == ">= 0" and not v >= 0:
        return f"{loc}: {c.name} = {raw}; must be >= 0{unit_suffix(c)}. Fix the value in the file."
    if rule == "(0, 100]" and not 0 < v <= 100:
        return (f"{loc}: {c.name} = {raw}; must be in (0, 100]{unit_suffix(c)}. Give the value in percent, "
                "e.g. 96.")
    if rule.startswith("load index") and v not in LOAD_INDEX_KG:
        return (f"{loc}: {c.name} = {raw}; must be a load index {LOAD_INDEX_MIN}..{LOAD_INDEX_MAX} "
                f"(ISO 4000-1; selector tabulates only this range). Check the tyre's service description.")
    if c.limits is not None and not c.limits[0] <= v <= c.limits[1]:
        lo, hi = c.limits
        return (f"{loc}: {c.name} = {shown(raw)}; must be between {lo:g} and {hi:g}{unit_suffix(c)} (the range "
                "selector accepts for a road-vehicle part). Check the value and its unit.")
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
