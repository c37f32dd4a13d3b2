"""Atomic writing of tables to CSV and XLSX files.

Every file is written to a temporary file in the target folder and moved over the target with
`os.replace`, so a reader never sees a half-written file and a failed write leaves the old file
(if any) untouched and no temporary file behind. Input files (the problem file, the catalogues)
are never overwritten: every file a loader read is remembered (`selector.io.files.input_files`)
and refused as an output, with symbolic links resolved; callers may name more as ``protected``.

Failures a user can fix (missing folder, read-only folder, the path is a folder, its parent is a
file, unknown extension, the path is an input file) raise `selector.errors.InputError` with the
path, the cause and what to do.
"""

from __future__ import annotations

import csv
import math
import os
import stat
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from selector.errors import InputError
from selector.io.files import control_char, describe_os_error, input_files, shown

FORMATS = {".csv": "csv", ".xlsx": "xlsx"}
"""File extension (lower case) -> format name."""


@dataclass(frozen=True)
class Sheet:
    """One table: a name (the XLSX sheet name), a header row and data rows."""

    name: str
    columns: list[str]
    rows: list[list] = field(default_factory=list)


def output_format(path, option: str = "--out", formats: dict | None = None) -> str:
    """Format from the file extension (default: "csv" | "xlsx"), or an InputError naming the accepted ones."""
    formats = FORMATS if formats is None else formats
    suffix = Path(path).suffix.lower()
    if suffix not in formats:
        got = f"extension {suffix!r}" if suffix else "no extension"
        raise InputError(f"{option} {path}: {got} is not a known output format; "
                         f"name the file with one of {', '.join(formats)}.")
    return formats[suffix]


def _same_file(a: Path, b: Path) -> bool:
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
    except OSError:
        pass
    try:
        return os.path.realpath(a) == os.path.realpath(b)
    except (OSError, ValueError):
        return False


def check_output_path(path, protected=(), option: str = "--out", formats: dict | None = None) -> Path:
    """Validate an output path before any work is done; return it as an absolute Path.

    Parameters
    ----------
    path : the file to write
    protected : input files that must never be overwritten (problem file, catalogues)
    option : the command-line option named in messages

    Raises
    ------
    InputError
        Unknown extension; the path is a folder; its folder is missing or is a file; the path is
        one of the ``protected`` files.
    """
    if path is None or not str(path).strip():
        raise InputError(f"{option} {str(path or '')!r}: the file name is empty. Give a file name, or leave the "
                         "option out.")
    if control_char(str(path)) is not None:
        raise InputError(f"{option} {shown(str(path))}: the file name contains a control character. Choose "
                         "another file name.")
    p = Path(path).expanduser()
    output_format(p, option, formats)
    absolute = Path(os.path.abspath(p))
    try:  # follows symbolic links: a loop, an over-long name or a dangling folder shows here
        os.stat(absolute)
    except (FileNotFoundError, NotADirectoryError):
        pass
    except (OSError, ValueError) as exc:
        cause = describe_os_error(exc) if isinstance(exc, OSError) else str(exc)
        raise InputError(f"{option} {path}: cannot be used as an output file ({cause}). Choose another "
                         "file name.") from None
    real = Path(os.path.realpath(absolute))
    for q in (*protected, *sorted(input_files())):
        if q is not None and (_same_file(absolute, Path(q)) or _same_file(real, Path(q))):
            raise InputError(f"{option} {path}: this is an input file of the study ({q}); selector never "
                             "overwrites its inputs. Choose another output file name.")
    if absolute.is_dir():
        q = Path(path)  # (its extension is a known format: checked above)
        raise InputError(f"{option} {path}: is a folder. Give the name of a file, e.g. "
                         f"{q.with_name(f'{q.stem}-1{q.suffix}')}.")
    parent = absolute.parent
    if not parent.exists():
        raise InputError(f"{option} {path}: the folder {parent} does not exist. Create it first or choose "
                         "another folder.")
    if not parent.is_dir():
        raise InputError(f"{option} {path}: {parent} is a file, not a folder. Choose a path inside a folder.")
    return absolute


def _new_file_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def atomic_write(path, write, protected=(), option: str = "--out", formats: dict | None = None) -> Path:
    """Write a file atomically: ``write(tmp_path)`` fills a temporary file that replaces ``path``.

    On any failure the temporary file is removed and the old file (if any) stays untouched;
    operating-system errors (permissions, missing folder, disk full...) become InputError.
    Returns the absolute path written.
    """
    target = check_output_path(path, protected, option, formats)
    mode = stat.S_IMODE(target.stat().st_mode) if target.exists() else _new_file_mode()
    tmp = None
    try:
        fd, name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
        tmp = Path(name)
        os.close(fd)
        write(tmp)
        os.chmod(tmp, mode)
        os.replace(tmp, target)
        tmp = None
    except OSError as exc:
        cause = exc.strerror or str(exc)
        hint = ("check that the folder exists and is writable, and that the file is not open in "
                "another program")
        raise InputError(f"{option} {path}: cannot write the file ({cause}); {hint}. "
                         "Nothing was written.") from exc
    finally:
        if tmp is not None:
            try:
                tmp.unlink()
            except FileNotFoundError:
                pass
    return target


FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
"""Leading characters that make a spreadsheet read a CSV cell as a formula (OWASP, CSV injection)."""


def neutral_text(text: str) -> str:
    """``text`` safe as a CSV cell: a leading formula character is preceded by ``'`` (OWASP guidance
    on CSV injection), so a spreadsheet shows the text instead of running it; plain numbers
    ("-2.5") and a lone "-" are left as they are."""
    if not text or not text.startswith(FORMULA_TRIGGERS) or text == "-":
        return text
    try:
        float(text)
        return text
    except ValueError:
        return "'" + text


def _csv_cell(v):
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float) and not math.isfinite(v):
        return ""
    if isinstance(v, str):
        return neutral_text(v)
    return v


def write_csv(path, sheet: Sheet, protected=(), option: str = "--out") -> Path:
    """Write one table as CSV (UTF-8, comma-separated, header row; None/NaN as empty cells)."""
    def write(tmp: Path):
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh, lineterminator="\n")
            w.writerow(sheet.columns)
            for row in sheet.rows:
                w.writerow([_csv_cell(v) for v in row])

    return atomic_write(path, write, protected, option)


def _xlsx_text(text: str) -> str:
    """Text an XLSX cell can hold: characters XML 1.0 forbids (C0 controls but tab, CR, LF) escaped."""
    from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE

    return ILLEGAL_CHARACTERS_RE.sub(lambda m: f"\\x{ord(m.group(0)):02x}", text)


def _sheet_title(name: str) -> str:
    """A valid sheet title: characters Excel forbids in titles and control characters become "_"."""
    title = "".join("_" if ch in '\\/*?:[]' or ord(ch) < 32 or 127 <= ord(ch) < 160 else ch for ch in name)[:31]
    return title.strip("'") or "Sheet"


def _xlsx_cell(ws, r: int, c: int, v):
    if isinstance(v, float) and not math.isfinite(v):
        v = None
    if isinstance(v, str):
        v = _xlsx_text(v)
    cell = ws.cell(row=r, column=c, value=v)
    if isinstance(v, str) and v.startswith("="):
        cell.data_type = "s"  # text, never a formula
    return cell


def write_xlsx(path, sheets: list[Sheet], protected=(), option: str = "--out") -> Path:
    """Write tables as an XLSX workbook, one sheet per `Sheet` (header row bold and frozen)."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    def write(tmp: Path):
        wb = Workbook()
        wb.remove(wb.active)
        bold = Font(bold=True)
        for sheet in sheets:
            ws = wb.create_sheet(title=_sheet_title(sheet.name))
            for c, name in enumerate(sheet.columns, 1):
                _xlsx_cell(ws, 1, c, name).font = bold
            for r, row in enumerate(sheet.rows, 2):
                for c, v in enumerate(row, 1):
                    _xlsx_cell(ws, r, c, v)
            ws.freeze_panes = "A2"
            for c, name in enumerate(sheet.columns, 1):
                width = max([len(str(name))] + [len(str(row[c - 1])) for row in sheet.rows
                                                 if c - 1 < len(row) and row[c - 1] is not None])
                ws.column_dimensions[ws.cell(row=1, column=c).column_letter].width = min(max(width + 2, 8), 80)
        wb.save(tmp)

    return atomic_write(path, write, protected, option)
