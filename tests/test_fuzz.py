"""Seeded mutation fuzzing of catalogues and problem files through the command line (issue: reliability).

A few hundred cases of `tools/fuzz.py` (the same generator as the documented 5,000-case run),
each in its own child process with a timeout: exit 0 or 2, no traceback or internal error, the
file named in every exit-2 message, no input file changed. ``SELECTOR_FUZZ_CASES`` sets the
number of cases (default 300).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tools"))

import fuzz  # noqa: E402

CASES = int(os.environ.get("SELECTOR_FUZZ_CASES", "300"))


@pytest.mark.skipif(not hasattr(os, "fork"), reason="the fast fuzz mode forks (POSIX)")
def test_mutation_fuzz():
    lines: list[str] = []
    counts = fuzz.run_cases(CASES, seed=20261202, timeout=120.0, report=lines.append, mode="fork")
    assert counts["cases"] == CASES
    assert counts["exit_2"] > CASES // 4  # the mutations do break inputs (a fuzzer that breaks nothing tests nothing)
    assert counts["failed"] == 0, "\n".join(lines)


def test_fuzz_detects_a_crash_and_an_overwrite(tmp_path, monkeypatch):
    """The checker itself: an internal error, a hang and a changed input are each reported."""
    problem = fuzz.make_study(tmp_path, "parcel_van.toml")
    case = {"argv": ["check", str(problem)], "inputs": [problem], "touched": [], "notes": []}

    monkeypatch.setattr(fuzz, "_run_fork", lambda argv, timeout: (1, "Traceback (most recent call last)"))
    assert set(fuzz.run_case(case, 10)["failures"]) == {"exit 1", "internal error"}

    monkeypatch.setattr(fuzz, "_run_fork", lambda argv, timeout: (None, ""))
    assert fuzz.run_case(case, 10)["failures"] == ["hang"]

    def overwrite(argv, timeout):
        problem.write_text("x", encoding="utf-8")
        return 0, ""

    monkeypatch.setattr(fuzz, "_run_fork", overwrite)
    assert fuzz.run_case(case, 10)["failures"] == ["input overwritten: problem.toml"]
