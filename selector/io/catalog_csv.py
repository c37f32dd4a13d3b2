"""Reading the catalogue CSVs: split a file into its header and rows, check the header, cut rows into cells.

Comment lines (``#``) and blank lines are skipped only above the header. Problems are collected as
messages naming file, line and part; a file that cannot be read at all raises `InputError` at once.
"""

from __future__ import annotations

import csv
import difflib
import io
from pathlib import Path

from selector.errors import InputError
from selector.io.files import MAX_CELL_CHARS, read_input_text, shown, split_lines_after_comments
from selector.io.schema import DERIVED_COLUMNS, SOURCE_ROW, Column

__all__ = ["cell_records", "check_header", "location", "read_rows", "report"]

def report(disp: str, kind: str, errors: list[str]) -> str:
    """The message of an `InputError` listing every problem of one catalogue file."""
    n = len(errors)
    head = f"{disp}: {n} error{'s' if n > 1 else ''} in the {kind} catalogue; the file was not loaded."
    return head + "\n" + "\n".join(f"  {e}" for e in errors)


def _read_text(path: Path, disp: str) -> str:
    return read_input_text(path, disp, f"{disp}: file not found. Check the path (catalogue paths in a problem "
                           "file are relative to the problem file).", "CSV file", "CSV UTF-8")


def read_rows(path: Path, disp: str):
    """Return (header_line, header, rows) with rows = [(line, cells, last line)], or raise for unreadable or
    empty files."""
    lines, start = split_lines_after_comments(_read_text(path, disp))
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


def location(disp: str, line: int, part: str) -> str:
    """``file line N (part "id")``: where a message about one row points."""
    who = f"part \"{shown(part)}\"" if part else "part id missing"
    return f"{disp} line {line} ({who})"




def check_header(kind: str, schema: tuple[Column, ...], header: list[str], rows: list, disp: str, header_line: int):
    """Check the header row; return (keep, seen, extras, odd) or raise `InputError` listing every problem.

    keep: indices of the named columns; seen: first index of each name; extras: names not in the
    schema (carried through as text); odd: messages about extra columns resembling optional ones.
    """
    hloc = f"{disp} line {header_line} (header row)"
    errors: list[str] = []
    odd: list[str] = []
    names = [c.name for c in schema]
    reserved = [c.name for c in DERIVED_COLUMNS[kind]] + [SOURCE_ROW]

    if len(header) == 1 and (";" in header[0] or "\t" in header[0]):
        sep = "semicolons" if ";" in header[0] else "tabs"
        raise InputError(report(disp, kind, [
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
    _check_columns(schema, seen, extras, hloc, errors, odd)
    if errors:
        raise InputError(report(disp, kind, errors))
    if not rows:
        raise InputError(report(disp, kind, [
            f"{hloc}: no data rows after the header. Add one row per orderable part."]))
    return keep, seen, extras, odd


def _check_columns(schema, seen: dict, extras: list[str], hloc: str, errors: list[str], odd: list[str]) -> None:
    """Missing required columns are errors; an extra column resembling an optional one is odd."""
    names = [c.name for c in schema]
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


def cell_records(disp: str, header: list[str], keep: list[int], seen: dict, names: list[str], rows: list,
                 errors: list[str]) -> list[tuple[int, dict]]:
    """Cut each row into ``(line, {column: stripped cell})``; rows with an open quote, an overlong
    cell or surplus cells are left out with a message in ``errors``."""
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
                errors.append(f"{location(disp, line, part)}: {len(cells)} cells but the header has {ncol} columns "
                              f"(surplus {surplus[0]!r}). Quote values that contain commas, or remove stray commas.")
                continue
            cells = cells[:ncol]
        cells = cells + [""] * (ncol - len(cells))
        records.append((line, {header[i]: cells[i].strip() for i in keep}))
    return records
