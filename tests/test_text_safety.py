"""Text from catalogues reaches spreadsheets and terminals safely (issue: reliability).

CSV cells a spreadsheet would read as a formula (leading ``=``, ``+``, ``-``, ``@``, tab, carriage
return) are written with a leading ``'``, as the OWASP guidance on CSV injection recommends; text
fields with control characters are refused on input; terminal tables escape them; XLSX never
fails on text.
"""

from __future__ import annotations

import csv
import io

import pytest
from hostile import assert_clean_answer, make_study, read_rows, run_cli, set_cell, set_key, write_rows

from selector.io.export import FORMULA_TRIGGERS, Sheet, neutral_text, write_csv, write_xlsx
from selector.records import table

HOSTILE = ['=HYPERLINK("http://example.invalid/x","click")', "+1+1", "-2+3", "@SUM(A1)"]


def _prefix_column(folder, kind, column, prefix):
    path = folder / f"{kind}.csv"
    comments, rows = read_rows(path)
    i = rows[0].index(column)
    for r in rows[1:]:
        r[i] = prefix + r[i]
    write_rows(path, comments, rows)


@pytest.fixture
def hostile_study(tmp_path):
    problem = make_study(tmp_path)
    _prefix_column(tmp_path, "motors", "part", "=")
    _prefix_column(tmp_path, "reducers", "part", "@")
    _prefix_column(tmp_path, "tyres", "part", "+")
    _prefix_column(tmp_path, "tyres", "supplier", "-2+")
    return problem


def _text_cells(path):
    return [c for row in csv.reader(io.StringIO(path.read_text(encoding="utf-8"))) for c in row]


def _assert_neutral(cells):
    for c in cells:
        if c.startswith(FORMULA_TRIGGERS) and c != "-":
            float(c)  # only plain numbers may start with + or -


def test_shortlist_csv_neutralises_formulas(tmp_path, hostile_study):
    out = tmp_path / "bom.csv"
    proc = run_cli("shortlist", hostile_study, "--count", "2", "--out", out)
    assert_clean_answer(proc, codes=(0,))
    cells = _text_cells(out)
    assert any(c.startswith("'=") for c in cells) and any(c.startswith("'@") for c in cells)
    assert any(c.startswith("'+") for c in cells) and any(c.startswith("'-2+") for c in cells)
    _assert_neutral(cells)


def test_sweep_csv_neutralises_formulas(tmp_path, hostile_study):
    out = tmp_path / "sweep.csv"
    proc = run_cli("sweep", hostile_study, "--vary", "vehicle.mass_kg=2000:2400:2", "--workers", "1", "--out", out)
    assert_clean_answer(proc, codes=(0,))
    cells = _text_cells(out)
    assert any(c.startswith("'=") for c in cells)
    _assert_neutral(cells)


@pytest.mark.parametrize("text", HOSTILE + ["\tx", "\rx"])
def test_neutral_text(text):
    assert neutral_text(text) == "'" + text


@pytest.mark.parametrize("text", ["-2.5", "+3", "-", "", "abc", "1e5"])
def test_neutral_text_leaves_numbers_and_plain_text(text):
    assert neutral_text(text) == text


@pytest.mark.parametrize("kind, column", [("motors", "part"), ("reducers", "supplier"), ("tyres", "part")])
@pytest.mark.parametrize("bad", ["Acme\x1b[31m", "A\x07B", "x\u2028y"])
def test_control_characters_in_catalogue_text_are_bad_input(tmp_path, kind, column, bad):
    problem = make_study(tmp_path)
    set_cell(tmp_path, kind, column, bad)
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert f"{kind}.csv line 4" in proc.stderr and f"{column} = " in proc.stderr
    assert "control character" in proc.stderr
    assert "\x1b" not in proc.stderr and "\x07" not in proc.stderr


def test_control_characters_in_problem_text_are_bad_input(tmp_path):
    problem = make_study(tmp_path)
    set_key(problem, "procurement", "avoid_suppliers", '["Acme\\u001b[2J"]')
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert "[procurement] avoid_suppliers" in proc.stderr and "control character U+001B" in proc.stderr
    assert "\x1b" not in proc.stderr


def test_terminal_table_escapes_control_characters():
    out = table(["part"], [["A\x1b[2JB"], ["C\nD"]])
    assert "\x1b" not in out and "\\x1b[2JB" in out
    assert "C\\x0aD" in out


def test_xlsx_never_fails_on_text(tmp_path):
    from openpyxl import load_workbook

    rows = [["A\x1b[31mB", "=1+1", "x\x00y", "ok"]]
    path = write_xlsx(tmp_path / "x.xlsx", [Sheet("a\x01b", ["c1", "c2", "c3", "c4"], rows)])
    ws = load_workbook(path).worksheets[0]
    assert ws.cell(row=2, column=2).value == "=1+1" and ws.cell(row=2, column=2).data_type == "s"
    assert ws.cell(row=2, column=1).value == "A\\x1b[31mB"


def test_library_csv_writer_neutralises(tmp_path):
    path = write_csv(tmp_path / "x.csv", Sheet("s", ["a", "b"], [["@cmd", -2.0]]))
    assert path.read_text(encoding="utf-8").splitlines()[1] == "'@cmd,-2.0"
