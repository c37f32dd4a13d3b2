"""Reading input files safely, and remembering them so that no output ever overwrites one.

Every loader (problem file, catalogues, efficiency maps, cycles) reads through `read_input_text`:

- only regular files are read (a FIFO, a device such as /dev/zero, a socket or a folder is an
  `InputError`, checked with ``stat`` before the file is opened, so nothing blocks);
- the size is checked before reading (`MAX_INPUT_BYTES`), then the text is decoded as UTF-8 and
  every line is checked against `MAX_LINE_CHARS`, so later parsing works on bounded text;
- operating-system errors (missing file, permission, name too long, symbolic-link loop) become
  `InputError` naming the file;
- the file's resolved path is remembered in `input_files()`: `selector.io.export.check_output_path`
  refuses to write over any of them (with symbolic links resolved), whichever writer asks.

`printable_problem` finds control characters in text fields (names, part ids, suppliers): they
would reach terminals (escape sequences) and spreadsheets, so text fields must be printable.
"""

from __future__ import annotations

import errno
import os
import re
import stat
from pathlib import Path

from selector.errors import InputError

_PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[+-]?(?:inf|infinity|nan)",
                           re.IGNORECASE)


def plain_number(text: str) -> float:
    """``text`` as a float when it is a plain decimal number (ASCII digits, optional sign, point and
    exponent; also inf and nan, which callers reject with their own message); ValueError otherwise.

    Python's float() also takes digit-group underscores ("5_2" is 52) and non-ASCII digits, which in
    a catalogue, a cycle or a map are far more likely typos than intent. The pattern has no nested
    quantifier, so matching is linear in the (bounded) cell length."""
    s = text.strip()
    if not _PLAIN_NUMBER.fullmatch(s):
        raise ValueError(f"not a plain number: {text!r}")
    return float(s)


MAX_INPUT_BYTES = 64 * 1024 * 1024
"""Largest input file read [bytes] (64 MiB; the largest catalogues in the benchmarks are a few MiB)."""
MAX_LINE_CHARS = 65_536
"""Longest line of an input file [characters]."""
MAX_CELL_CHARS = 1_000
"""Longest value of one catalogue cell or problem-file text [characters]."""

_INPUTS: set[str] = set()

_CONTROL_RE = re.compile(r"[\x00-\x1f\x7f-\x9f\u2028\u2029]")
"""Control characters (C0, DEL, C1) and the Unicode line separators: a single character class, linear."""


def input_files() -> frozenset[str]:
    """Resolved paths of every input file read in this process (never written by any writer)."""
    return frozenset(_INPUTS)


def remember_input(path) -> None:
    """Add a file to the inputs that no output may overwrite (its resolved path)."""
    try:
        _INPUTS.add(os.path.realpath(path))
    except (OSError, ValueError, RuntimeError):  # unresolvable: the exact path is still recorded
        _INPUTS.add(os.path.abspath(path))


def describe_os_error(exc: OSError) -> str:
    """A short cause for an operating-system error (``exc.strerror`` or its errno name)."""
    if exc.errno == errno.ELOOP:
        return "a loop of symbolic links"
    if exc.errno == errno.ENAMETOOLONG:
        return "the file name is too long"
    return exc.strerror or str(exc)


def read_input_text(path, disp: str, not_found: str, what: str = "file", save_as: str = "UTF-8",
                    max_bytes: int = MAX_INPUT_BYTES) -> str:
    """Read an input file as UTF-8 text after checking that it is a regular file of bounded size.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    disp : str
        How the file is named in messages.
    not_found : str
        The whole message when the file does not exist.
    what : str
        What the file should be ("CSV file", "problem file"), for the messages.
    save_as : str
        The encoding advice for a file that is not UTF-8 ("CSV UTF-8").
    max_bytes : int
        Largest size accepted [bytes].

    Returns
    -------
    str
        The text (a UTF-8 byte-order mark removed).

    Raises
    ------
    InputError
        Missing, not a regular file, unreadable, too large, not UTF-8, or a line longer than
        `MAX_LINE_CHARS`.
    """
    p = Path(path)
    _check_regular_file(p, disp, not_found, what, max_bytes)
    try:
        with open(p, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise InputError(f"{disp}: cannot be read ({describe_os_error(exc)}). Check the file's permissions.") from None
    if len(data) > max_bytes:
        raise InputError(f"{disp}: larger than the {max_bytes:,} bytes selector reads for a {what}. "
                         "Check that this is the right file.")
    remember_input(p)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{disp}: is not UTF-8 text (undecodable byte at offset {exc.start}). "
                         f"Save the file as {save_as}.") from None
    for n, line in enumerate(re.split(r"\r\n?|\n", text), start=1):
        if len(line) > MAX_LINE_CHARS:
            raise InputError(f"{disp} line {n}: {len(line):,} characters, longer than the {MAX_LINE_CHARS:,} "
                             f"selector accepts in one line of a {what}. Check the file (a missing line break or "
                             "a pasted blob?).")
    return text


def _check_regular_file(p: Path, disp: str, not_found: str, what: str, max_bytes: int) -> None:
    """`InputError` unless ``p`` is an existing regular file of at most ``max_bytes`` (checked with ``stat``,
    before opening, so that nothing blocks)."""
    try:
        st = os.stat(p)
    except (FileNotFoundError, NotADirectoryError):
        raise InputError(not_found) from None
    except (OSError, ValueError) as exc:
        cause = describe_os_error(exc) if isinstance(exc, OSError) else str(exc)
        raise InputError(f"{disp}: cannot be read ({cause}). Check the path.") from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"{disp}: is a folder, not a {what}. Give the path of the {what}.")
    if not stat.S_ISREG(st.st_mode):
        raise InputError(f"{disp}: is not a regular file (a pipe, device or socket); selector reads only "
                         f"regular files. Save the {what} to disk and give its path.")
    if st.st_size > max_bytes:
        raise InputError(f"{disp}: {st.st_size:,} bytes, larger than the {max_bytes:,} bytes selector reads "
                         f"for a {what}. Check that this is the right file, or split it.")


def split_lines_after_comments(text: str) -> tuple[list[str], int]:
    """The lines of ``text`` (``\\r\\n``, ``\\r`` or ``\\n`` endings) and the index of the first that is neither
    blank nor a ``#`` comment (``len(lines)`` when every line is): where a CSV's header row is."""
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    start = 0
    while start < len(lines) and (not lines[start].strip() or lines[start].lstrip().startswith("#")):
        start += 1
    return lines, start


def control_char(text: str) -> int | None:
    """Position of the first control character in ``text`` (C0 including tab and newline, DEL, C1,
    Unicode line separators), or None."""
    m = _CONTROL_RE.search(text)
    return None if m is None else m.start()


def printable_problem(text: str) -> str | None:
    """Why ``text`` is not acceptable as a text field (a name or an id), or None.

    Control characters are refused (they would move the cursor or colour a terminal, break CSV
    rows); so are values longer than `MAX_CELL_CHARS`.
    """
    if len(text) > MAX_CELL_CHARS:
        return f"is {len(text):,} characters long; at most {MAX_CELL_CHARS:,} are accepted"
    at = control_char(text)
    if at is not None:
        return (f"contains the control character U+{ord(text[at]):04X} at position {at + 1}; text fields "
                "must be printable (no tabs, line breaks or escape sequences)")
    return None


def shown(text: str, limit: int = 60) -> str:
    """``text`` safe for a message: control characters escaped, shortened to ``limit`` characters."""
    out = _CONTROL_RE.sub(lambda m: f"\\x{ord(m.group(0)):02x}" if ord(m.group(0)) < 256
                          else f"\\u{ord(m.group(0)):04x}", text[:limit])
    return out + (f"... ({len(text):,} characters)" if len(text) > limit else "")
