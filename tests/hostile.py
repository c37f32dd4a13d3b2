"""Helpers for the hostile-input tests: a copy of the demo study with one change, run in a subprocess.

The demo data (`catalogs/`, `problems/parcel_van.toml`) is only the starting point of each case;
the checks are about how selector answers a broken or hostile file (exit code, message, no hang),
never about the demo's numbers.
"""

from __future__ import annotations

import csv
import io
import os
import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tools"))
from fuzz import make_study  # noqa: E402,F401 - one copy of the demo-study step, shared with the fuzzer

TIMEOUT_S = 120
"""A case that has not finished after this long is a hang (a failure), whatever the machine load."""


def read_rows(path: Path) -> tuple[list[str], list[list[str]]]:
    """(comment lines, rows including the header) of a catalogue CSV."""
    lines = path.read_text(encoding="utf-8").split("\n")
    head = 0
    while head < len(lines) and (not lines[head].strip() or lines[head].startswith("#")):
        head += 1
    rows = [r for r in csv.reader(io.StringIO("\n".join(lines[head:])))]
    return lines[:head], [r for r in rows if r]


def write_rows(path: Path, comments: list[str], rows: list[list[str]]) -> None:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows(rows)
    path.write_text("\n".join(comments + [""])[:-1] + ("\n" if comments else "") + buf.getvalue(), encoding="utf-8")


def set_cell(folder: Path, kind: str, column: str, value: str, row: int = 0) -> None:
    """Set one cell (data row ``row``, 0 = first) of a catalogue copied by `make_study`."""
    path = folder / f"{kind}.csv"
    comments, rows = read_rows(path)
    rows[1 + row][rows[0].index(column)] = value
    write_rows(path, comments, rows)


def set_key(problem: Path, table: str, key: str, value: str) -> None:
    """Set ``key = value`` (TOML text) in ``[table]`` of a problem file, adding the key or table if needed."""
    lines = problem.read_text(encoding="utf-8").split("\n")
    out, current, done = [], "", False
    for line in lines:
        m = re.match(r"^\s*\[([A-Za-z_]+)\]", line)
        if m:
            if current == table and not done:
                out.append(f"{key} = {value}")
                done = True
            current = m.group(1)
        elif current == table and re.match(rf"^\s*{re.escape(key)}\s*=", line):
            line, done = f"{key} = {value}", True
        out.append(line)
    if not done:
        out += ([] if current == table else [f"[{table}]"]) + [f"{key} = {value}"]
    problem.write_text("\n".join(out) + "\n", encoding="utf-8")


def run_cli(*args, timeout: float = TIMEOUT_S, cwd=None) -> subprocess.CompletedProcess:
    """``python -m selector ARGS`` in a subprocess; a hang raises subprocess.TimeoutExpired."""
    env = dict(os.environ, PYTHONWARNINGS="default", COLUMNS="120")
    return subprocess.run([sys.executable, "-m", "selector", *map(str, args)], capture_output=True, text=True,
                          timeout=timeout, cwd=cwd or ROOT, env=env)


def assert_clean_answer(proc: subprocess.CompletedProcess, codes=(0, 2)) -> None:
    """The exit code is one of ``codes``, and nothing looks like a crash."""
    assert proc.returncode in codes, f"exit {proc.returncode}\n{proc.stderr[-3000:]}"
    assert "Traceback" not in proc.stderr and "internal error" not in proc.stderr, proc.stderr[-3000:]
