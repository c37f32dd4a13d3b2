"""Atomic CSV/XLSX writing: files read back with pandas and openpyxl equal what was written; every
failed write raises InputError (exit code 2 through the CLI) and leaves nothing behind: no temporary
file, the old file untouched, and input files (problem, catalogues) are never overwritten."""

from __future__ import annotations

import errno
import os
import tempfile
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from generators import random_study

from selector.cli import run
from selector.errors import InputError
from selector.io import export

SHEET = export.Sheet("BOM", ["rank", "part", "supplier", "unit_cost", "note"],
                     [[1, "M-1", "Volta Drives", 1250.5, None], [2, "M-2", "Ampère Werke", 990.0, "=1+1"]])


def listing(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def test_csv_round_trip(tmp_path):
    path = tmp_path / "out.csv"
    written = export.write_csv(path, SHEET)
    assert written == path.resolve()
    frame = pd.read_csv(path)  # pandas: an independent CSV reader
    assert list(frame.columns) == SHEET.columns
    assert frame["part"].tolist() == ["M-1", "M-2"]
    assert frame["supplier"].tolist() == ["Volta Drives", "Ampère Werke"]
    assert frame["unit_cost"].tolist() == [1250.5, 990.0]
    assert pd.isna(frame["note"][0]) and frame["note"][1] == "'=1+1"  # neutralised: OWASP CSV injection
    assert listing(tmp_path) == ["out.csv"]


def test_xlsx_round_trip_and_text_never_a_formula(tmp_path):
    path = tmp_path / "out.xlsx"
    export.write_xlsx(path, [export.Sheet("Header", ["item", "value"], [["problem", "Van"]]), SHEET])
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["Header", "BOM"]
    assert wb["BOM"]["E3"].value == "=1+1" and wb["BOM"]["E3"].data_type == "s"
    frames = pd.read_excel(path, sheet_name=None, engine="openpyxl")
    assert frames["BOM"]["unit_cost"].tolist() == [1250.5, 990.0]
    assert frames["Header"]["value"].tolist() == ["Van"]
    assert listing(tmp_path) == ["out.xlsx"]


def test_new_file_mode_follows_umask(tmp_path):
    old = os.umask(0o022)
    try:
        export.write_csv(tmp_path / "a.csv", SHEET)
    finally:
        os.umask(old)
    assert (tmp_path / "a.csv").stat().st_mode & 0o777 == 0o644  # POSIX: 0666 & ~umask


def test_replaces_existing_file(tmp_path):
    path = tmp_path / "out.csv"
    path.write_text("old\n")
    export.write_csv(path, SHEET)
    assert pd.read_csv(path)["part"].tolist() == ["M-1", "M-2"]
    assert listing(tmp_path) == ["out.csv"]


@pytest.mark.parametrize("name", ["out.txt", "out", "out.xls"])
def test_unknown_extension(tmp_path, name):
    with pytest.raises(InputError, match="not a known output format"):
        export.write_csv(tmp_path / name, SHEET)
    assert listing(tmp_path) == []


def test_missing_folder(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        export.write_csv(tmp_path / "nope" / "out.csv", SHEET)
    assert listing(tmp_path) == []


def test_path_is_a_folder(tmp_path):
    (tmp_path / "out.csv").mkdir()
    with pytest.raises(InputError, match=r"is a folder. Give the name of a file, e.g. .*out-1\.csv"):
        export.write_csv(tmp_path / "out.csv", SHEET)
    assert listing(tmp_path) == ["out.csv"] and listing(tmp_path / "out.csv") == []


def test_parent_is_a_regular_file(tmp_path):
    (tmp_path / "file").write_text("x")
    with pytest.raises(InputError, match="is a file, not a folder"):
        export.write_xlsx(tmp_path / "file" / "out.xlsx", [SHEET])
    assert listing(tmp_path) == ["file"] and (tmp_path / "file").read_text() == "x"


def test_protected_input_is_never_overwritten(tmp_path):
    cat = tmp_path / "motors.csv"
    cat.write_text("part,supplier\n")
    for target in (cat, tmp_path / "." / "motors.csv"):
        with pytest.raises(InputError, match="never overwrites its inputs"):
            export.write_csv(target, SHEET, protected=[cat])
    link = tmp_path / "link.csv"
    link.symlink_to(cat)
    with pytest.raises(InputError, match="never overwrites its inputs"):
        export.write_csv(link, SHEET, protected=[cat])
    assert cat.read_text() == "part,supplier\n"
    assert listing(tmp_path) == ["link.csv", "motors.csv"]


def test_read_only_folder(tmp_path):
    """chmod 0o500 stops writes for ordinary users; root may still write (then the write must be complete)."""
    folder = tmp_path / "ro"
    folder.mkdir()
    (folder / "out.csv").write_text("old\n")
    folder.chmod(0o500)
    try:
        writable = os.access(folder, os.W_OK)
        if writable:  # e.g. root: permission bits do not stop the write
            export.write_csv(folder / "out.csv", SHEET)
            assert pd.read_csv(folder / "out.csv")["part"].tolist() == ["M-1", "M-2"]
        else:
            with pytest.raises(InputError, match="cannot write the file"):
                export.write_csv(folder / "out.csv", SHEET)
            assert (folder / "out.csv").read_text() == "old\n"
        assert listing(folder) == ["out.csv"]
    finally:
        folder.chmod(0o700)


def test_permission_error_is_input_error(tmp_path, monkeypatch):
    """A guaranteed failure to create the temporary file (as a read-only folder gives a non-root user)."""
    (tmp_path / "out.xlsx").write_bytes(b"old")

    def refuse(*args, **kwargs):
        raise PermissionError(errno.EACCES, "Permission denied")

    monkeypatch.setattr(tempfile, "mkstemp", refuse)
    with pytest.raises(InputError, match="Permission denied"):
        export.write_xlsx(tmp_path / "out.xlsx", [SHEET])
    assert (tmp_path / "out.xlsx").read_bytes() == b"old"
    assert listing(tmp_path) == ["out.xlsx"]


def test_failure_after_writing_leaves_old_file_and_no_temp(tmp_path, monkeypatch):
    path = tmp_path / "out.csv"
    path.write_text("old\n")

    def full_disk(src, dst):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "replace", full_disk)
    with pytest.raises(InputError, match="No space left on device"):
        export.write_csv(path, SHEET)
    assert path.read_text() == "old\n"
    assert listing(tmp_path) == ["out.csv"]


def test_internal_error_still_cleans_up(tmp_path):
    def broken(tmp):
        Path(tmp).write_text("partial")
        raise RuntimeError("bug")

    with pytest.raises(RuntimeError, match="bug"):
        export.atomic_write(tmp_path / "out.csv", broken)
    assert listing(tmp_path) == []


# ----------------------------------------------------------------------------------- through the CLI

@pytest.fixture(scope="module")
def study(tmp_path_factory):
    return random_study(1, tmp_path_factory.mktemp("study"))


def _snapshot(folder: Path) -> dict:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


@pytest.mark.parametrize("target, message", [
    ("{dir}/problem.toml", "not a known output format"),
    ("{dir}/motors.csv", "never overwrites its inputs"),
    ("{dir}/tyres.csv", "never overwrites its inputs"),
    ("{dir}/missing/out.csv", "does not exist"),
    ("{dir}/motors.csv/out.xlsx", "is a file, not a folder"),
    ("{dir}", "not a known output format"),
    ("{dir}/out.ods", "not a known output format"),
])
def test_cli_bad_out_exits_2_and_changes_nothing(study, capsys, target, message):
    folder = study.problem_path.parent
    before = _snapshot(folder)
    code = run(["shortlist", str(study.problem_path), "--count", "2", "--out", target.format(dir=folder)])
    err = capsys.readouterr().err
    assert code == 2, err
    assert message in err and "Traceback" not in err
    assert _snapshot(folder) == before


def test_cli_problem_file_named_like_an_output_is_protected(study, tmp_path, capsys):
    """A problem file whose name ends in .csv is still an input: refused."""
    alias = study.problem_path.parent / "problem_copy.csv"
    alias.write_bytes(study.problem_path.read_bytes())
    try:
        before = alias.read_bytes()
        assert run(["shortlist", str(alias), "--count", "1", "--out", str(alias)]) == 2
        assert "never overwrites its inputs" in capsys.readouterr().err
        assert alias.read_bytes() == before
    finally:
        alias.unlink()


def test_cli_directory_out_is_refused(study, tmp_path, capsys):
    (tmp_path / "x.xlsx").mkdir()
    assert run(["shortlist", str(study.problem_path), "--count", "1", "--out", str(tmp_path / "x.xlsx")]) == 2
    assert "is a folder" in capsys.readouterr().err
