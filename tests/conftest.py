"""Helpers shared by the test modules (import them: ``from conftest import printed, assert_table``).

Markers: ``slow`` (registered in pyproject.toml) marks the randomised property tests that compare the
engine and the studies against exhaustive enumeration over many generated studies; a developer runs
the fast subset with ``pytest -m "not slow"``, CI runs everything (plain ``pytest``).
"""

from __future__ import annotations

import json
from collections.abc import Callable, Iterable
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
"""The repository root (demo problems in problems/, catalogues in catalogs/)."""


def printed(text: str):
    """pytest.approx for a table value printed as ``text``: half a unit in the last printed digit."""
    decimals = len(text.split(".")[1]) if "." in text else 0
    return pytest.approx(float(text), rel=0.0, abs=0.5 * 10.0 ** (-decimals))


def assert_table(rows: Iterable, got: Callable, want: Callable, what: str = "table") -> None:
    """Check every row of a reference table in one test, listing every row that differs.

    Parameters
    ----------
    rows : iterable
        The rows of the published (or oracle) table.
    got : callable
        ``got(row)``: the value selector computes for the row.
    want : callable
        ``want(row)``: the reference value (a number, or a ``pytest.approx`` / `printed` object).
    what : str
        Name of the table in the failure message.
    """
    rows = list(rows)
    bad = []
    for row in rows:
        g, w = got(row), want(row)
        if not g == w:
            bad.append(f"  {row!r}: got {g!r}, expected {w!r}")
    assert not bad, f"{what}: {len(bad)} of {len(rows)} rows differ:\n" + "\n".join(bad)


def assert_all_raise(values: Iterable, call: Callable, exc: type[Exception], match: str) -> None:
    """``call(value)`` raises ``exc`` with a message matching ``match`` for every value (one test per list)."""
    for value in values:
        with pytest.raises(exc, match=match):
            call(value)


@pytest.fixture(scope="session")
def json_runs() -> dict:
    """Each command's JSON output per demo problem, run once through the command line and shared by the
    tests that read it (the demo studies are not re-solved for every test that reads the answer); use
    with `cli_json`."""
    return {}


def cli_json(runs: dict, capsys, *argv) -> dict:
    """``selector ARGV --format json`` (exit 0 asserted), from ``runs`` when an earlier test ran it."""
    from selector.cli import run

    key = tuple(map(str, argv))
    if key not in runs:
        code = run([*key, "--format", "json"])
        out, err = capsys.readouterr()
        assert code == 0, err
        runs[key] = out
    return json.loads(runs[key])


def demo_catalogue_study(tmp_path: Path, name: str, tables: list[str]):
    """A study on the demo catalogues (invented data): a problem file named ``name`` with the TOML lines
    ``tables`` ([vehicle], [environment], ... tables and keys), loaded with `selector.api.open_study`."""
    from selector.api import open_study

    head = [f'name = "{name} (invented data)"', "[catalogs]",
            *(f'{k} = "{(ROOT / "catalogs" / f"{k}.csv").as_posix()}"' for k in ("motors", "reducers", "tyres"))]
    path = tmp_path / "problem.toml"
    path.write_text("\n".join([*head, *tables, ""]), encoding="utf-8")
    return open_study(path)
