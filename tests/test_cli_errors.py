"""Bad input through the command line: exit code 2, the full message on stderr, no traceback.

Runs the same corpora as test_problem.py / test_catalog.py through `selector.cli.run`.
"""

from __future__ import annotations

import importlib
from pathlib import Path

import pytest

DATA = Path(__file__).parent / "data"
VALID = DATA / "valid"
BAD_PROBLEMS = sorted((DATA / "invalid" / "problems").glob("*.toml"))
BAD_CATALOGS = sorted((DATA / "invalid" / "catalogs").glob("*.csv"))
KINDS = ("motors", "reducers", "tyres")


def run(argv):
    # imported here so that the other test files still collect while the CLI is being written
    cli = importlib.import_module("selector.cli")
    return cli.run(argv)


def expected_lines(path: Path) -> list[str]:
    text = path.with_name(path.name.rsplit(".", 1)[0] + ".expected.txt").read_text(encoding="utf-8")
    return [line for line in text.splitlines() if line.strip()]


def check_bad_input(argv, expected, capsys):
    code = run(argv)
    out, err = capsys.readouterr()
    assert code == 2, f"exit code {code}, stderr:\n{err}"
    for line in expected:
        assert line in err, f"expected line not on stderr:\n{line}\n--- stderr ---\n{err}"
    assert "Traceback" not in err and "Traceback" not in out


@pytest.mark.parametrize("path", BAD_PROBLEMS, ids=[p.stem for p in BAD_PROBLEMS])
def test_check_bad_problem(path, capsys):
    check_bad_input(["check", str(path)], expected_lines(path), capsys)


@pytest.mark.parametrize("path", BAD_CATALOGS, ids=[p.stem for p in BAD_CATALOGS])
def test_check_bad_catalog(path, tmp_path, capsys):
    kind = path.name.split("_", 1)[0]
    paths = {k: (path if k == kind else VALID / f"{k}.csv").resolve().as_posix() for k in KINDS}
    problem = tmp_path / "study.toml"
    problem.write_text(
        "# Illustrative problem pointing at a bad catalogue (test data).\n"
        "[catalogs]\n" + "".join(f'{k} = "{paths[k]}"\n' for k in KINDS)
        + "[vehicle]" + (VALID / "problem.toml").read_text(encoding="utf-8").split("[vehicle]", 1)[1],
        encoding="utf-8",
    )
    check_bad_input(["check", str(problem)], expected_lines(path), capsys)


def test_check_missing_problem_file(tmp_path, capsys):
    check_bad_input(["check", str(tmp_path / "absent.toml")], ["absent.toml: problem file not found"], capsys)
