"""Studies from in-memory data: three pandas DataFrames (the catalogues) and a problem dict.

`load_frames` validates them exactly as files are validated, by the same loaders: each frame is
written as CSV and the dict as TOML into a private temporary folder, read back by
`selector.io.problem.load_study`, and the folder is removed. Messages then name the frame, its row
(the frame's index label) and the column, or the problem dict's table and key, instead of the
temporary files. Relative paths inside the data (a motor's ``efficiency_map``, an ``[energy]``
cycle file) are relative to ``base_dir`` (default: the working directory).
"""

from __future__ import annotations

import json
import math
import numbers
import os
import re
import tempfile
import warnings
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING

from selector.errors import InputError

if TYPE_CHECKING:
    import pandas as pd

    from selector.inputs import Catalogs, Problem

KINDS = ("motors", "reducers", "tyres")
PROBLEM_LABEL = "problem dict"
DEFAULT_NAME = "in-memory study"


def frame_label(kind: str) -> str:
    """How messages name a catalogue frame, e.g. ``motors frame``."""
    return f"{kind} frame"


def load_frames(motors: pd.DataFrame, reducers: pd.DataFrame, tyres: pd.DataFrame,
                problem: dict, base_dir: str | os.PathLike | None = None) -> tuple[Problem, Catalogs]:
    """Validate three catalogue frames and a problem dict; the loaded problem and catalogues.

    Parameters
    ----------
    motors, reducers, tyres : pandas.DataFrame
        One row per orderable part, the columns of the CSV catalogues (units in the names, e.g.
        ``peak_torque_nm`` [N m]); empty cells (NaN, None) take the column's default.
    problem : dict
        The problem file's tables as a dict, e.g. ``{"vehicle": {"mass_kg": 2400, ...},
        "requirements": {...}}`` (values in the units of the key names); no ``catalogs`` table.
    base_dir : str or os.PathLike, optional
        Folder that relative paths in the data (a motor's ``efficiency_map``, an ``[energy]`` cycle
        file) are relative to; default: the working directory.

    Returns
    -------
    (Problem, Catalogs)
        ``Problem.path`` is None; ``catalog_paths`` name the frames.

    Raises
    ------
    InputError
        Every problem found, naming the frame, its row (index label), part id and column, or the
        problem dict's table and key.
    """
    frames = {"motors": motors, "reducers": reducers, "tyres": tyres}
    _check_arguments(frames, problem)
    from selector.io.problem import load_study

    base = Path(os.path.abspath(base_dir if base_dir is not None else os.getcwd()))
    with tempfile.TemporaryDirectory(prefix="selector-frames-") as tmp:
        folder = Path(tmp)
        translate = _write_inputs(folder, frames, problem, base)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                prob, catalogs = load_study(folder / "problem.toml")
            except InputError as exc:
                raise InputError(translate(str(exc))) from None
    for w in caught:
        warnings.warn(translate(str(w.message)), w.category, stacklevel=3)
    paths = {kind: Path(f"<{frame_label(kind)}>") for kind in KINDS}
    prob = replace(prob, path=None, catalog_paths=paths)
    catalogs = replace(catalogs, paths=paths)
    return prob, catalogs


def _check_arguments(frames: dict, problem) -> None:
    """Three DataFrames and a dict without a catalogs table, or `InputError` naming the argument."""
    import pandas as pd

    for kind, df in frames.items():
        if not isinstance(df, pd.DataFrame):
            raise InputError(f"{kind}: expected a pandas DataFrame (one row per part), got {type(df).__name__}.")
    if not isinstance(problem, dict):
        raise InputError(f"problem: expected a dict of the problem file's tables, got {type(problem).__name__}.")
    if "catalogs" in problem:
        raise InputError(f"{PROBLEM_LABEL} [catalogs]: the catalogues come from the motors, reducers and tyres "
                         "frames. Remove the catalogs table.")


def _write_inputs(folder: Path, frames: dict, problem: dict, base: Path):
    """Write the frames as CSV catalogues and the dict as problem.toml into ``folder``; return the function
    that rewrites the loaders' messages to name frames, rows and keys."""
    labels: dict[str, list] = {}
    for kind, df in frames.items():
        (folder / f"{kind}.csv").write_text(_csv_text(kind, df, base), encoding="utf-8")
        labels[kind] = list(df.index)
    data = {"name": DEFAULT_NAME, **problem,
            "catalogs": {kind: f"{kind}.csv" for kind in KINDS}}
    energy = data.get("energy")
    if isinstance(energy, dict) and isinstance(energy.get("cycle"), str):
        data["energy"] = {**energy, "cycle": _absolute_or_name(energy["cycle"], base)}
    (folder / "problem.toml").write_text(_toml_text(data), encoding="utf-8")
    return _translator(folder, labels)

def _absolute_or_name(value: str, base: Path) -> str:
    from selector.io.cycles import BUILTIN_CYCLES

    if value.strip().lower() in BUILTIN_CYCLES or not value.strip():
        return value
    return os.path.normpath(base / value)


def _csv_text(kind: str, df: pd.DataFrame, base: Path) -> str:
    """The frame as a CSV catalogue (header row, one line per row; relative map paths made absolute)."""
    if not df.columns.is_unique:
        dup = sorted({str(c) for c in df.columns[df.columns.duplicated()]})
        raise InputError(f"{frame_label(kind)}: column(s) {', '.join(dup)} appear more than once. "
                         "Remove or rename the duplicates.")
    out = df.copy()
    out.columns = [str(c) for c in out.columns]
    if kind == "motors" and "efficiency_map" in out.columns:
        out["efficiency_map"] = [v if not isinstance(v, str) or not v.strip() else os.path.normpath(base / v)
                                 for v in out["efficiency_map"]]
    for col in out.columns:
        if out[col].dtype == object:
            bad = [v for v in out[col] if isinstance(v, str) and ("\n" in v or "\r" in v)]
            if bad:
                raise InputError(f"{frame_label(kind)} column \"{col}\": a cell holds a line break ({bad[0]!r}). "
                                 "Remove it.")
    return out.to_csv(index=False, lineterminator="\n", na_rep="")


def _toml_value(v, where: str) -> str:
    if hasattr(v, "item") and not isinstance(v, (list, tuple, dict)):  # numpy scalars
        v = v.item()
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, numbers.Integral):
        return str(int(v))
    if isinstance(v, numbers.Real):
        x = float(v)
        return repr(x) if math.isfinite(x) else ("nan" if math.isnan(x) else ("inf" if x > 0 else "-inf"))
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x, where) for x in v) + "]"
    raise InputError(f"{PROBLEM_LABEL} {where}: a value of type {type(v).__name__} ({v!r}); use a number, text, "
                     "true/false or a list of those.")


def _toml_key(k) -> str:
    k = str(k)
    return k if re.fullmatch(r"[A-Za-z0-9_\-]+", k) else json.dumps(k)


def _toml_text(data: dict) -> str:
    """A problem dict as TOML: top-level keys first, then one [table] per dict value."""
    lines = []
    for k, v in data.items():
        if not isinstance(v, dict):
            lines.append(f"{_toml_key(k)} = {_toml_value(v, str(k))}")
    for k, v in data.items():
        if isinstance(v, dict):
            lines.append(f"\n[{_toml_key(k)}]")
            for kk, vv in v.items():
                if isinstance(vv, dict):
                    raise InputError(f"{PROBLEM_LABEL} [{k}] {kk}: a nested table; problem tables hold numbers, "
                                     "text, true/false or lists.")
                lines.append(f"{_toml_key(kk)} = {_toml_value(vv, f'[{k}] {kk}')}")
    return "\n".join(lines) + "\n"


def _translator(folder: Path, labels: dict[str, list]):
    """A function rewriting loader messages: temporary file names to frame / dict names."""
    prob = re.escape(str(folder / "problem.toml"))
    cats = {kind: re.escape(str(folder / f"{kind}.csv")) for kind in KINDS}

    def row(kind: str, line: int) -> str:
        pos = line - 2  # line 1 is the header; data rows follow one per line
        if 0 <= pos < len(labels[kind]):
            return f"{frame_label(kind)} row {labels[kind][pos]!r}"
        return frame_label(kind)

    def translate(text: str) -> str:
        text = re.sub(prob + r"(?: line \d+)?", PROBLEM_LABEL, text)
        for kind, pat in cats.items():
            text = re.sub(pat + r" line 1 \(header row\)", f"{frame_label(kind)} columns", text)
            text = re.sub(pat + r" line (\d+)", lambda m, kind=kind: row(kind, int(m.group(1))), text)
            text = re.sub(pat, frame_label(kind), text)
        return text.replace(str(folder) + os.sep, "").replace(str(folder), "<in memory>")

    return translate
