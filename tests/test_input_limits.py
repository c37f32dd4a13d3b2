"""Linear-time parsing and resource limits on input files (issue: reliability).

Limits (`selector.io.files`, `selector.io.problem.MAX_PROBLEM_BYTES`, `MAX_TOML_DEPTH`) are
checked before parsing; every case answers exit 2 naming the file, in a subprocess with a
timeout (a hang fails).
"""

from __future__ import annotations

import os
import threading

import pytest
from hostile import assert_clean_answer, make_study, run_cli, set_cell, set_key

from selector.io.catalog_cells import _number_with_unit
from selector.io.files import MAX_CELL_CHARS, MAX_LINE_CHARS
from selector.io.problem_checks import _table_header


@pytest.mark.parametrize("kind, column, value, words", [
    ("motors", "peak_torque_nm", "1" * 30_000 + "x", f"holds more than {MAX_CELL_CHARS:,} characters"),
    ("motors", "peak_torque_nm", "1" * 106_000 + "x", f"longer than the {MAX_LINE_CHARS:,}"),
    ("tyres", "size", "205/" + "5" * 4000 + "R16", f"holds more than {MAX_CELL_CHARS:,} characters"),
    ("tyres", "size", "205/55R16 " + " " * 100 + "x", "is longer than 40 characters"),
    ("reducers", "supplier", "x" * 2000, f"holds more than {MAX_CELL_CHARS:,} characters"),
])
def test_oversized_cells_are_bad_input(tmp_path, kind, column, value, words):
    problem = make_study(tmp_path)
    set_cell(tmp_path, kind, column, value)
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert f"{kind}.csv line 4" in proc.stderr and words in proc.stderr


def test_unclosed_quote_is_named_not_dumped(tmp_path):
    problem = make_study(tmp_path)
    path = tmp_path / "reducers.csv"  # no quoted cells: the stray quote runs to the end of the file
    lines = path.read_text(encoding="utf-8").split("\n")
    lines[3] = '"' + lines[3]  # a stray quote at the start of the first data row
    path.write_text("\n".join(lines), encoding="utf-8")
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert "reducers.csv line 4: a double quote opens a cell that is not closed on the same line" in proc.stderr
    assert len(proc.stderr.splitlines()) < 6


@pytest.mark.parametrize("kind", ["fifo", "dev_zero"])
def test_only_regular_files_are_read(tmp_path, kind):
    problem = make_study(tmp_path)
    if kind == "fifo":
        os.mkfifo(tmp_path / "pipe.csv")
        target = "pipe.csv"
    else:
        target = "/dev/zero"
    set_key(problem, "catalogs", "motors", f'"{target}"')
    proc = run_cli("check", problem, timeout=60)
    assert_clean_answer(proc, codes=(2,))
    assert "is not a regular file" in proc.stderr


def test_problem_file_size_limit(tmp_path):
    problem = make_study(tmp_path)
    with open(problem, "a", encoding="utf-8") as fh:
        fh.write(("# " + "x" * 1000 + "\n") * 1100)  # about 1.1 MB of comments
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert "larger than the 1,048,576 bytes" in proc.stderr


@pytest.mark.parametrize("value", ["[" * 5000 + "]" * 5000, "{a = " * 300 + "1" + "}" * 300])
def test_deeply_nested_toml_is_bad_input(tmp_path, value):
    problem = make_study(tmp_path)
    set_key(problem, "vehicle", "deep", value)
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert "nested more than 16 deep" in proc.stderr


def test_long_path_is_bad_input(tmp_path):
    proc = run_cli("check", tmp_path / ("p" * 5000 + ".toml"))
    assert_clean_answer(proc, codes=(2,))
    assert "the file name is too long" in proc.stderr


def _finishes(fn, *args) -> bool:
    """Run fn in a thread; True when it returns within a generous 60 s (quadratic backtracking on these
    inputs would take hours: no timing is measured, a hang is detected)."""
    t = threading.Thread(target=fn, args=args, daemon=True)
    t.start()
    t.join(60)
    return not t.is_alive()


def test_scanners_are_linear_on_long_runs():
    assert _finishes(_table_header, "[" + " " * 1_000_000 + "a")
    assert _finishes(_number_with_unit, "1" * 1_000_000 + "x")
    assert _finishes(_number_with_unit, "1." + "1" * 1_000_000 + "e")
    assert _table_header("[ vehicle ]  # c") == "vehicle" and _table_header("[[x]]") is None
    assert _number_with_unit("250 Nm") and _number_with_unit("1.5e3kW") and not _number_with_unit("12")
    assert not _number_with_unit("2,600") and not _number_with_unit("abc")
