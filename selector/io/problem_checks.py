"""Reading helpers of the problem file: a nesting guard run before the TOML parser, the line of each
key, the collector of messages and the type and rule check of one value.
"""

from __future__ import annotations

import difflib
import math
import re

from selector.io.files import printable_problem, shown
from selector.io.problem_keys import MAX_TOML_DEPTH, TABLES, Key

__all__ = ["Collector", "check_value", "suggest", "toml_depth_problem", "toml_repr", "type_name"]

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


def toml_repr(v) -> str:
    """A value as it would be written in TOML (a table as ``{...}``)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, dict):
        return "{...}"
    if isinstance(v, list):
        return "[" + ", ".join(toml_repr(x) for x in v) + "]"
    return str(v)


def type_name(v) -> str:
    """The TOML type of a value in words (``"a whole number"``)."""
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


class Collector:
    """Messages of one problem file: errors (`add`, `bad`) and notes (warnings), each naming file, line and
    table."""

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
        self.add(f"{self.where(table, key)} {key} = {toml_repr(value)}; {rule}{u}. {fix}")


def suggest(name: str, known, table: str) -> str:
    """`` Did you mean "x"?`` for an unknown key or table, or the table it belongs in, or nothing."""
    hit = difflib.get_close_matches(name, list(known), n=1, cutoff=0.6)
    if hit:
        return f' Did you mean "{hit[0]}"?'
    for other, keys in TABLES.items():
        if other != table and name in keys:
            return f" It belongs in the [{other}] table."
    return ""


def check_value(col: Collector, table: str, spec: Key, v):
    """Type and rule check; return the value or None (error recorded)."""
    u = f" [{spec.unit}]" if spec.unit else ""
    if spec.type in ("number", "int"):
        if not _check_number(col, table, spec, v):
            return None
    elif spec.type == "bool":
        if not isinstance(v, bool):
            col.bad(table, spec.name, v, f"must be true or false, not {type_name(v)}", "",
                    "Write true or false (without quotes).")
            return None
        return v
    elif spec.type == "str":
        if not _check_text(col, table, spec, v):
            return None
    elif spec.type == "str list":
        return _check_text_list(col, table, spec, v)
    if spec.check is not None:
        rule = spec.check(v)
        if rule:
            col.add(f"{col.where(table, spec.name)} {spec.name} = {toml_repr(v)}; {rule}{u}. "
                    "Fix the value in the file.")
            return None
    return v


def _check_number(col: Collector, table: str, spec: Key, v) -> bool:
    """A number (or whole number) of ordinary size within the key's limits; a note when it is unusual."""
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
        col.bad(table, spec.name, v, f"must be {want}, not {type_name(v)}", spec.unit, fix)
        return False
    try:
        finite = math.isfinite(v)
    except OverflowError:  # a whole number too large for a float
        finite = False
    if not finite:
        rule = "must be a finite number" + (" of ordinary size" if isinstance(v, int) else "")
        col.bad(table, spec.name, _short_number(v), rule, spec.unit)
        return False
    if spec.limits is not None and not spec.limits[0] <= v <= spec.limits[1] and (spec.check is None
                                                                                  or spec.check(v) is None):
        lo, hi = spec.limits
        col.bad(table, spec.name, v, f"must be between {lo:g} and {hi:g} (the range selector accepts for a road "
                "vehicle)", spec.unit, "Check the value and its unit.")
        return False
    if spec.usual is not None and not spec.usual[0] <= v <= spec.usual[1]:
        u = f" [{spec.unit}]" if spec.unit else ""
        col.notes.append(f"{col.where(table, spec.name)} {spec.name} = {toml_repr(v)}; outside "
                         f"{spec.usual[0]:g}..{spec.usual[1]:g}{u}, unusual. Check the value and its unit.")
    return True


def _check_text(col: Collector, table: str, spec: Key, v) -> bool:
    """Text in double quotes without control characters."""
    if not isinstance(v, str):
        col.bad(table, spec.name, v, f"must be text in double quotes, not {type_name(v)}", "",
                "Put the value in double quotes.")
        return False
    why = printable_problem(v)
    if why:
        col.add(f"{col.where(table, spec.name)} {spec.name} = \"{shown(v)}\" {why}. Fix the text in the file.")
        return False
    return True


def _check_text_list(col: Collector, table: str, spec: Key, v):
    """A list of non-empty texts (returned stripped, as a tuple) or None (error recorded)."""
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
