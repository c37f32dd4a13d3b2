"""Seeded mutation fuzzing of selector's inputs through the command line.

Each case copies the demo study (catalogues, maps, one demo problem) into a fresh folder, applies
one to three random mutations to the catalogues or the problem file (hostile numbers, broken
syntax, control characters, formula text, truncation, random bytes, swapped cells, deleted
columns or keys, deep nesting, huge cells...), runs one command in a subprocess with a timeout,
and checks:

- the exit code is 0 or 2 (1 = an internal error, a timeout = a hang);
- no traceback and no "internal error" on stderr;
- on exit 2, the message names the mutated file (or the problem file);
- every input file is byte-for-byte unchanged (some cases point --plot / --out at an input).

Usage (from the repository root)::

    python tools/fuzz.py --cases 5000 --seed 1 [--keep failures/] [--timeout 120] [--mode fork|exec]

It prints one line per failing case and a summary (cases, exit codes, internal errors, hangs,
inputs overwritten, unnamed-file messages). ``tests/test_fuzz.py`` runs a few hundred cases of
the same generator in the test suite.
"""

from __future__ import annotations

import argparse
import hashlib
import os
import random
import shutil
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
KINDS = ("motors", "reducers", "tyres")
PROBLEMS = tuple(sorted(p.name for p in (ROOT / "problems").glob("*.toml")))
"""Every demo problem: single axle, both axles, gearboxes in the catalogues, [energy]."""

HOSTILE_CELLS = [
    "", " ", "nan", "NaN", "inf", "-inf", "-1", "0", "-0", "1e308", "1e309", "1e-320", "9" * 400,
    "1" * 3000, "2,600", "8,5", "1,200,000", "12 Nm", "250kW", "1e20", "1e300", "0x10", "1_000", "١٢",
    '"', '"unclosed', "a\"b", "=HYPERLINK(\"http://example.invalid\")", "+1+1", "-2+3", "@SUM(A1)",
    "\tx", "\rx", "A\x1b[31mB", "x\x00y", "x\x07", "x\u2028y", "#", "R" * 5000, "205/55R16 " + " " * 3000 + "x",
    "999/99R99", "100/10R10", "205/55R16", "Z", "H", "130", "59", "131", "1.5", "true", "Acme", "é" * 50,
]
HOSTILE_TOML = [
    "0", "-1", "1e308", "1e-320", "nan", "inf", "-inf", "9223372036854775808", "1" + "0" * 400, "1e20",
    "0.001", "1e6", '"text"', '""', '"Acme\\u001b[2J"', "true", "[]", '["Acme"]', '"Acme"', "{a = 1}",
    "[" * 400 + "]" * 400, "{a = " * 100 + "1" + "}" * 100, '"' + "x" * 3000 + '"', "3.5", "12", "0.5", "2",
    '"both"', '"front"', '"energy"', '"accel_time"', '"mass"', "4000", "-0.0",
    '"wltc_class3b"', '"us06"', '"nedc "', '"../../etc/passwd"', "false", '["KM-M118", "Acme"]', '[1, 2]',
    '["' + "x" * 3000 + '"]',
]


def _problem_keys() -> dict[str, list[str]]:
    """Every key of every problem-file table (`selector.io.problem_keys.TABLES`), plus one unknown key each."""
    from selector.io.problem_keys import TABLES

    return {t: [*keys, "unknown_key"] for t, keys in TABLES.items()}


PROBLEM_KEYS = _problem_keys()


def _sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def make_study(folder: Path, problem: str = "parcel_van.toml") -> Path:
    """Copy the demo catalogues (and maps) and one demo problem into ``folder``; return the problem path.

    The one copy of this step: the hostile-input tests (``tests/hostile.py``) import it too.
    """
    folder.mkdir(parents=True, exist_ok=True)
    for k in KINDS:
        shutil.copy(ROOT / "catalogs" / f"{k}.csv", folder / f"{k}.csv")
    if (ROOT / "catalogs" / "maps").is_dir():
        shutil.copytree(ROOT / "catalogs" / "maps", folder / "maps", dirs_exist_ok=True)
    text = (ROOT / "problems" / problem).read_text(encoding="utf-8").replace("../catalogs/", "")
    path = folder / "problem.toml"
    path.write_text(text, encoding="utf-8")
    return path


# ----------------------------------------------------------------------------- mutations

def _csv_lines(path: Path) -> list[str]:
    return path.read_text(encoding="utf-8", errors="surrogateescape").split("\n")


def _write_lines(path: Path, lines: list[str]) -> None:
    path.write_text("\n".join(lines), encoding="utf-8", errors="surrogateescape")


def _data_range(lines: list[str]) -> tuple[int, int]:
    head = 0
    while head < len(lines) and (not lines[head].strip() or lines[head].startswith("#")):
        head += 1
    return head, len(lines)


def mutate_cell(rng: random.Random, path: Path) -> str:
    lines = _csv_lines(path)
    head, end = _data_range(lines)
    if end - head < 2:
        return "cell (no rows)"
    n = rng.randrange(head + 1, end)
    if not lines[n].strip():
        return "cell (blank line)"
    cells = lines[n].split(",")  # a plain split: the mutation may break quoting on purpose
    i = rng.randrange(len(cells))
    r = rng.random()
    if r < 0.55:
        value = rng.choice(HOSTILE_CELLS)
    elif r < 0.8:
        value = f"{rng.uniform(-1, 1) * 10.0 ** rng.randint(-320, 308):.6g}"
    else:
        value = cells[rng.randrange(len(cells))]  # another cell of the row
    if any(ch in value for ch in ',"\n\r') and rng.random() < 0.5:
        value = '"' + value.replace('"', '""') + '"'
    cells[i] = value
    lines[n] = ",".join(cells)
    _write_lines(path, lines)
    return f"cell line {n + 1} col {i + 1} = {value[:40]!r}"


def mutate_header(rng: random.Random, path: Path) -> str:
    lines = _csv_lines(path)
    head, _ = _data_range(lines)
    cols = lines[head].split(",")
    r = rng.random()
    i = rng.randrange(len(cols))
    if r < 0.3:
        del cols[i]
        what = "deleted column"
    elif r < 0.5:
        cols[i] = cols[i].upper()
        what = "upper-cased column"
    elif r < 0.7:
        cols.append(cols[i])
        what = "duplicated column"
    else:
        cols[i] = cols[i][:-1] + rng.choice("xs_ ")
        what = "misspelt column"
    lines[head] = ",".join(cols)
    _write_lines(path, lines)
    return f"{what} {i + 1}"


def mutate_lines(rng: random.Random, path: Path) -> str:
    lines = _csv_lines(path)
    r = rng.random()
    n = rng.randrange(len(lines))
    if r < 0.3:
        del lines[n]
        what = "deleted line"
    elif r < 0.5:
        lines.insert(n, lines[rng.randrange(len(lines))])
        what = "duplicated line"
    elif r < 0.65:
        lines[n] = lines[n] + "," * rng.randint(1, 3)
        what = "trailing commas"
    elif r < 0.8:
        lines[n] = lines[n].replace(",", ";")
        what = "semicolons"
    else:
        lines.insert(n, "x" * rng.choice([70_000, 200_000]))
        what = "huge line"
    _write_lines(path, lines)
    return f"{what} at {n + 1}"


def mutate_bytes(rng: random.Random, path: Path) -> str:
    data = bytearray(path.read_bytes())
    r = rng.random()
    if r < 0.3 and data:
        cut = rng.randrange(len(data))
        del data[cut:]
        what = f"truncated at {cut}"
    elif r < 0.6 and data:
        for _ in range(rng.randint(1, 5)):
            data[rng.randrange(len(data))] = rng.randrange(256)
        what = "random bytes"
    elif r < 0.75:
        data = bytearray(b"\xef\xbb\xbf") + data.replace(b"\n", b"\r\n")
        what = "BOM and CRLF"
    elif r < 0.9:
        data = data.replace(b"\n", b"\r")
        what = "CR line ends"
    else:
        data = bytearray()
        what = "emptied"
    path.write_bytes(bytes(data))
    return what


def mutate_problem_key(rng: random.Random, path: Path) -> str:
    lines = path.read_text(encoding="utf-8").split("\n")
    table = rng.choice(list(PROBLEM_KEYS))
    key = rng.choice(PROBLEM_KEYS[table])
    r = rng.random()
    if r < 0.6:
        value = rng.choice(HOSTILE_TOML)
    elif r < 0.85:
        value = repr(rng.uniform(-1, 1) * 10.0 ** rng.randint(-320, 308)).replace("e+", "e")
        value = value if "e" in value or "." in value else value + ".0"
    else:
        value = None  # delete the key
    out, current, done = [], "", False
    for line in lines:
        s = line.strip()
        if s.startswith("[") and "]" in s:
            if current == table and not done and value is not None:
                out.append(f"{key} = {value}")
                done = True
            current = s[1:s.index("]")].strip()
        elif current == table and s.split("=")[0].strip() == key:
            done = True
            if value is None:
                continue
            line = f"{key} = {value}"
        out.append(line)
    if not done and value is not None:
        out += ([] if current == table else [f"[{table}]"]) + [f"{key} = {value}"]
    path.write_text("\n".join(out), encoding="utf-8")
    return f"[{table}] {key} = {'(deleted)' if value is None else value[:40]}"


def mutate_problem_syntax(rng: random.Random, path: Path) -> str:
    text = path.read_text(encoding="utf-8")
    r = rng.random()
    if r < 0.3:
        n = rng.randrange(len(text) + 1)
        text = text[:n]
        what = f"truncated at {n}"
    elif r < 0.5:
        n = rng.randrange(len(text) + 1)
        text = text[:n] + rng.choice(['"', "[", "]", "=", "\n[vehicle]\n", "{", "'''", "\x00", "\x1b"]) + text[n:]
        what = "inserted a character"
    elif r < 0.7:
        text = text.replace("[vehicle]", rng.choice(["[vehicle]\n[vehicle]", "[vehicles]", "[ vehicle ]",
                                                      "[" + " " * 3000 + "vehicle]"]))
        what = "table header changed"
    elif r < 0.85:
        text += "\n# " + "x" * rng.choice([100, 70_000]) + "\n"
        what = "long comment"
    else:
        text = "\n".join(rng.sample(text.split("\n"), len(text.split("\n"))))
        what = "lines shuffled"
    path.write_text(text, encoding="utf-8")
    return what


CATALOGUE_MUTATORS = [(mutate_cell, 6), (mutate_header, 1), (mutate_lines, 2), (mutate_bytes, 1)]
PROBLEM_MUTATORS = [(mutate_problem_key, 5), (mutate_problem_syntax, 2)]


def make_case(rng: random.Random, folder: Path) -> dict:
    """Build one case in ``folder``: the mutated study and the command to run."""
    problem_name = rng.choice(PROBLEMS)
    problem = make_study(folder, problem_name)
    notes, touched = [], set()
    for _ in range(rng.choice([1, 1, 1, 2, 3])):
        if rng.random() < 0.55:
            maps = sorted((folder / "maps").glob("*.csv"))
            fn = rng.choices([m for m, _ in CATALOGUE_MUTATORS], [w for _, w in CATALOGUE_MUTATORS])[0]
            if maps and rng.random() < 0.1:  # an efficiency map of a motor (read by [energy] studies)
                target = rng.choice(maps)
            else:
                target = folder / f"{rng.choice(KINDS)}.csv"
        else:
            fn = rng.choices([m for m, _ in PROBLEM_MUTATORS], [w for _, w in PROBLEM_MUTATORS])[0]
            target = problem
        notes.append(f"{target.name}: {fn(rng, target)}")
        touched.add(target.name)
    notes.insert(0, problem_name)
    r = rng.random()
    inputs = [problem] + [folder / f"{k}.csv" for k in KINDS] + sorted((folder / "maps").glob("*.csv"))
    if r < 0.65:
        argv = ["check", problem]
    elif r < 0.8:
        argv = ["solve", problem, "--time-limit", "30"]
    elif r < 0.85:
        argv = rng.choice([["explain", problem], ["shortlist", problem, "--count", "3", "--time-limit", "30"]])
    elif r < 0.93:  # an output aimed at an input: must be refused
        victim = rng.choice(inputs[1:1 + len(KINDS)])  # a catalogue (a map is an input only while a motor names it)
        argv = ["shortlist", problem, "--count", "2", "--out", victim, "--time-limit", "30"]
    else:
        svg = folder / "problem.svg"
        shutil.copy(problem, svg)
        inputs.append(svg)
        argv = ["simulate", svg, "--motor", "x", "--reducer", "y", "--tyre", "z", "--plot", svg]
    return {"argv": [str(a) for a in argv], "inputs": inputs, "touched": sorted(touched), "notes": notes}


def preload() -> None:
    """Import what the command line needs once, so that forked cases start in milliseconds."""
    import selector.api  # noqa: F401 - imported for the forked children
    from selector.cli.main import build_parser

    build_parser()
    try:
        import pyomo.contrib.solver.solvers.highs  # noqa: F401

        import selector.engine.search  # noqa: F401
    except ImportError:  # pragma: no cover - the children report it
        pass


def _run_exec(argv: list[str], timeout: float) -> tuple[int | None, str]:
    env = dict(os.environ, PYTHONWARNINGS="default")
    try:
        proc = subprocess.run([sys.executable, "-m", "selector", *argv], capture_output=True, text=True,
                              timeout=timeout, cwd=ROOT, env=env, errors="replace")
    except subprocess.TimeoutExpired:
        return None, ""
    return proc.returncode, proc.stderr


def _run_fork(argv: list[str], timeout: float) -> tuple[int | None, str]:
    """The command in a forked child process (a separate process, killed on timeout): the child runs
    ``selector.cli.main.run(argv)`` with stdout and stderr sent to temporary files."""
    import signal

    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        pid = os.fork()
        if pid == 0:  # the child
            code = 70
            try:
                os.dup2(out.fileno(), 1)
                os.dup2(err.fileno(), 2)
                sys.stdout = open(1, "w", closefd=False)  # noqa: SIM115
                sys.stderr = open(2, "w", closefd=False)  # noqa: SIM115
                from selector.cli.main import run

                code = run(argv)
            except BaseException:  # noqa: BLE001 - anything escaping run() is a failure, shown as a traceback
                import traceback

                traceback.print_exc()
            finally:
                try:
                    sys.stdout.flush()
                    sys.stderr.flush()
                finally:
                    os._exit(code)
        deadline = time.monotonic() + timeout
        status = None
        while time.monotonic() < deadline:
            done, status = os.waitpid(pid, os.WNOHANG)
            if done:
                break
            time.sleep(0.005)
        else:
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
            return None, ""
        err.seek(0)
        text = err.read().decode("utf-8", errors="replace")
        return os.waitstatus_to_exitcode(status), text


def run_case(case: dict, timeout: float, mode: str = "fork") -> dict:
    """Run one case; the outcome with its failures (an empty list = a pass)."""
    before = {p: _sha(p) for p in case["inputs"] if p.exists()}
    failures = []
    code, err = (_run_fork if mode == "fork" else _run_exec)(case["argv"], timeout)
    if code is None:
        failures.append("hang")
    if code is not None:
        if code not in (0, 2):
            failures.append(f"exit {code}")
        if "Traceback" in err or "internal error" in err:
            failures.append("internal error")
        if code == 2 and not any(p.name in err for p in case["inputs"]):
            failures.append("file not named")
    for p, digest in before.items():
        if not p.exists() or _sha(p) != digest:  # hashed after the mutation: the run must change nothing
            failures.append(f"input overwritten: {p.name}")
    return {"code": code, "failures": failures, "stderr": err[-2000:], **case}


def run_cases(n: int, seed: int, jobs: int = 1, timeout: float = 120.0, keep: Path | None = None,
              report=print, mode: str = "fork", first: int = 0) -> dict:
    """Run cases ``first`` .. ``first + n - 1`` of ``seed``; the counts (see the module docstring).

    ``mode``: "fork" (each case in a child forked from this process, which has imported selector once:
    fast; POSIX only; then ``jobs`` is 1) or "exec" (each case a fresh ``python -m selector``; ``jobs``
    cases at a time)."""
    if mode == "fork":
        preload()
        jobs = 1
    counts = {"cases": 0, "exit_0": 0, "exit_2": 0, "internal_errors": 0, "hangs": 0, "overwritten": 0,
              "unnamed": 0, "failed": 0}
    base = Path(tempfile.mkdtemp(prefix="selector-fuzz-"))

    def one(k: int) -> dict:
        rng = random.Random(f"{seed}:{k}")
        folder = base / f"case{k:05d}"
        folder.mkdir()
        case = make_case(rng, folder)
        out = run_case(case, timeout, mode)
        out["k"] = k
        if out["failures"] and keep is not None:
            shutil.copytree(folder, keep / folder.name, dirs_exist_ok=True)
        shutil.rmtree(folder, ignore_errors=True)
        return out

    t0 = time.perf_counter()
    try:
        with ThreadPoolExecutor(max_workers=max(1, jobs)) as ex:
            for out in ex.map(one, range(first, first + n)):
                counts["cases"] += 1
                counts["exit_0"] += out["code"] == 0
                counts["exit_2"] += out["code"] == 2
                f = out["failures"]
                counts["internal_errors"] += any(x == "internal error" or x.startswith("exit") for x in f)
                counts["hangs"] += "hang" in f
                counts["overwritten"] += any(x.startswith("input overwritten") for x in f)
                counts["unnamed"] += "file not named" in f
                counts["failed"] += bool(f)
                if f:
                    report(f"case {out['k']}: {', '.join(f)}; {' | '.join(out['notes'])}; "
                           f"{' '.join(out['argv'][:1])}; stderr: {out['stderr'][-300:]!r}")
                if counts["cases"] % 250 == 0:
                    report(f"... {counts['cases']} cases, {counts['failed']} failed, "
                           f"{time.perf_counter() - t0:.0f} s")
    finally:
        shutil.rmtree(base, ignore_errors=True)
    counts["elapsed_s"] = round(time.perf_counter() - t0, 1)
    return counts


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--cases", type=int, default=5000)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--jobs", type=int, default=2, help="cases run at the same time")
    ap.add_argument("--timeout", type=float, default=120.0, help="seconds before a case counts as a hang")
    ap.add_argument("--keep", type=Path, help="copy failing cases into this folder")
    ap.add_argument("--mode", choices=("fork", "exec"), default="fork",
                    help="fork: children of one process that imported selector once (fast, POSIX); "
                         "exec: a fresh interpreter per case")
    ap.add_argument("--first", type=int, default=0, help="number of the first case (to split a run)")
    args = ap.parse_args(argv)
    if args.keep:
        args.keep.mkdir(parents=True, exist_ok=True)
    counts = run_cases(args.cases, args.seed, args.jobs, args.timeout, args.keep,
                       report=lambda s: print(s, flush=True), mode=args.mode, first=args.first)
    print("summary: " + ", ".join(f"{k} {v}" for k, v in counts.items()), flush=True)
    return 0 if counts["failed"] == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
