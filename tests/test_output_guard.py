"""No writer ever overwrites an input: plots, CSV, XLSX (issue: reliability).

Each case names an input file (the problem file, a catalogue), a symbolic link to one, or an
unusable path as the output of a command, and checks exit code 2, the message, and that the input
is byte-for-byte unchanged.
"""

from __future__ import annotations

import os

import pytest
from hostile import assert_clean_answer, make_study, run_cli, set_key

from selector.errors import InputError
from selector.io.export import Sheet, write_csv


def _renamed_study(tmp_path, problem_name: str, kind: str | None = None, kind_name: str | None = None):
    problem = make_study(tmp_path)
    if kind is not None:
        (tmp_path / f"{kind}.csv").rename(tmp_path / kind_name)
        set_key(problem, "catalogs", kind, f'"{kind_name}"')
    target = tmp_path / problem_name
    problem.rename(target)
    return target


COMMANDS = [
    ("simulate", "--plot", ["--motor", "BI-M087", "--reducer", "FG-S20-121", "--tyre", "AW-T1606"]),
    ("frontier", "--plot", []),
    ("sweep", "--plot", ["--vary", "vehicle.mass_kg=2000:2400:2", "--workers", "1"]),
]


@pytest.mark.parametrize("command, option, extra", COMMANDS, ids=[c[0] for c in COMMANDS])
def test_plot_never_overwrites_the_problem_file(tmp_path, command, option, extra):
    problem = _renamed_study(tmp_path, "study.svg")
    before = problem.read_bytes()
    proc = run_cli(command, problem, option, problem, *extra)
    assert_clean_answer(proc, codes=(2,))
    assert "this is an input file of the study" in proc.stderr
    assert problem.read_bytes() == before


@pytest.mark.parametrize("command, option, extra", COMMANDS, ids=[c[0] for c in COMMANDS])
def test_plot_never_overwrites_a_catalogue(tmp_path, command, option, extra):
    problem = _renamed_study(tmp_path, "problem.toml", "tyres", "tyres.pdf")
    target = tmp_path / "tyres.pdf"
    before = target.read_bytes()
    proc = run_cli(command, problem, option, target, *extra)
    assert_clean_answer(proc, codes=(2,))
    assert "this is an input file of the study" in proc.stderr
    assert target.read_bytes() == before


def test_csv_through_a_symlink_to_a_catalogue_is_refused(tmp_path):
    problem = make_study(tmp_path)
    link = tmp_path / "out.csv"
    os.symlink(tmp_path / "motors.csv", link)
    before = (tmp_path / "motors.csv").read_bytes()
    proc = run_cli("shortlist", problem, "--count", "1", "--out", link)
    assert_clean_answer(proc, codes=(2,))
    assert "this is an input file of the study" in proc.stderr
    assert (tmp_path / "motors.csv").read_bytes() == before and link.is_symlink()


def test_sweep_csv_over_a_catalogue_is_refused(tmp_path):
    problem = make_study(tmp_path)
    before = (tmp_path / "reducers.csv").read_bytes()
    proc = run_cli("sweep", problem, "--vary", "vehicle.mass_kg=2000:2400:2", "--out", tmp_path / "reducers.csv")
    assert_clean_answer(proc, codes=(2,))
    assert (tmp_path / "reducers.csv").read_bytes() == before


@pytest.mark.parametrize("option, value, words", [
    ("--out", "", "the file name is empty"),
    ("--out", "loop.csv", "a loop of symbolic links"),
    ("--out", "x" * 300 + ".csv", "the file name is too long"),
])
def test_unusable_output_paths_are_bad_input(tmp_path, option, value, words):
    problem = make_study(tmp_path)
    os.symlink(tmp_path / "loop2.csv", tmp_path / "loop.csv")
    os.symlink(tmp_path / "loop.csv", tmp_path / "loop2.csv")
    proc = run_cli("shortlist", problem, "--count", "1", option, (tmp_path / value) if value else value)
    assert_clean_answer(proc, codes=(2,))
    assert words in proc.stderr


def test_empty_scheduler_is_bad_input(tmp_path):
    problem = make_study(tmp_path)
    proc = run_cli("sweep", problem, "--vary", "vehicle.mass_kg=2000:2400:2", "--scheduler", "")
    assert_clean_answer(proc, codes=(2,))
    assert "--scheduler '': the address is empty" in proc.stderr


def test_library_writer_refuses_every_file_read_in_the_process(tmp_path):
    from selector.io.problem import load_study

    problem = make_study(tmp_path)
    load_study(problem)
    before = (tmp_path / "tyres.csv").read_bytes()
    with pytest.raises(InputError, match="this is an input file of the study"):
        write_csv(tmp_path / "tyres.csv", Sheet("x", ["a"], [["b"]]))
    assert (tmp_path / "tyres.csv").read_bytes() == before
