"""Command line: ``selector COMMAND PROBLEM [options]``.

`run(argv) -> int` is the testable core: 0 success (including a clean "infeasible" answer),
2 bad input (the message on stderr, no traceback), 1 internal error (traceback only with
--verbose). Each command is one function; `COMMANDS` maps names to (setup, handler).
"""

from __future__ import annotations

import argparse
import os
import sys
import time
import traceback
import warnings

from selector import __version__
from selector.cli.args import add_common, positive_float
from selector.errors import InputError, SelectorError, Terminated
from selector.io.files import describe_os_error
from selector.records import (
    CAUTION,
    dumps,
    fmt,
    parts_table,
    performance_table,
    requirement_table,
    table,
)


class _Parser(argparse.ArgumentParser):
    """argparse that raises InputError instead of exiting, so run() returns 2."""

    def error(self, message):
        raise InputError(f"{self.prog}: {message}. See '{self.prog} --help'.")




def _out(args, text_or_obj):
    if args.format == "json":
        print(dumps(text_or_obj))
    else:
        print(text_or_obj)


# ----------------------------------------------------------------------------- check

def _setup_check(p):
    add_common(p)


def _cmd_check(args) -> int:
    from selector.api import open_study, problem_summary

    s = problem_summary(open_study(args.problem))
    if args.format == "json":
        _out(args, s)
        return 0
    lines = [f"{s['problem']}: valid", ""]
    lines.append(table(["catalogue", "parts", "after filters", "file"],
                       [[k, s["parts"][k], s["after_procurement_filters"][k], s["catalogues"][k]]
                        for k in ("motors", "reducers", "tyres")], "lrrl"))
    lines.append(f"\ncombinations: {s['combinations']:,}")
    lines.append(f"air density: {fmt(s['air_density_kg_m3'])} kg/m^3")
    lines.append(f"objective: minimise {s['objective']}")
    lines.append("requirements: " + (", ".join(f"{k} = {fmt(v)}" for k, v in s["requirements"].items()) or "none"))
    print("\n".join(lines))
    return 0


# ----------------------------------------------------------------------------- simulate

def _setup_simulate(p):
    add_common(p)
    p.add_argument("--motor", required=True, help="motor part id")
    p.add_argument("--reducer", required=True, help="reducer part id (one ratio variant)")
    p.add_argument("--tyre", required=True, help="tyre part id")
    p.add_argument("--plot", metavar="FILE", help="write the tractive-effort diagram (PNG or SVG)")


def _cmd_simulate(args) -> int:
    from selector.api import open_study, simulate

    if args.plot is not None:
        from selector.io.plots import check_output_path

        check_output_path(args.plot, protected=(args.problem,))  # fail before any work
    study = open_study(args.problem)
    if args.plot is not None:  # the catalogues are read now: never write over one of them
        check_output_path(args.plot)
    res = simulate(study, args.motor, args.reducer, args.tyre)
    if args.plot is not None:
        from selector.io.plots import tractive_effort_plot

        tractive_effort_plot(study, args.motor, args.reducer, args.tyre, args.plot)
        res["plot"] = args.plot
    if args.format == "json":
        _out(args, res)
        return 0
    d = res["design"]
    print(f"{res['problem']}\ndesign {d['motor']} + {d['reducer']} + {d['tyre']}: "
          f"{'meets every requirement' if d['feasible'] else 'DOES NOT meet every requirement'}\n")
    print(parts_table(d) + "\n")
    print(performance_table(d) + "\n")
    print(requirement_table(d))
    for u in d["unmet"]:
        print(f"not met: {u['name']}: {u['why']}")
    if args.plot is not None:
        print(f"\nplot written to {args.plot}")
    print("\n" + CAUTION)
    return 0


# ----------------------------------------------------------------------------- solve

def _setup_solve(p):
    add_common(p)
    p.add_argument("--time-limit", type=positive_float, metavar="SECONDS", help="wall-clock limit of the search")


def print_search_summary(res: dict, diagnosis: list[str] | None = None) -> None:
    """The search line, procurement filters and, for an infeasible study, the diagnosis lines."""
    s = res["search"]
    print(f"searched {s['combinations']:,} combinations exactly: {s['iterations']} MILP solves, "
          f"build {s['build_s']:.2f} s, solve {s['solve_s']:.2f} s, verify {s['verify_s']:.2f} s")
    for note in s.get("procurement_filters", []):
        print(f"procurement filter: {note}")
    if res["status"] == "infeasible":
        print(f"\nno design meets every requirement: {res.get('reason')}")
        for line in diagnosis or []:
            print(f"  {line}")
        print("run `selector explain` for the closest design and the relaxation that fixes it.")


def print_search_result(res: dict, title: str = "best design", diagnosis: list[str] | None = None) -> None:
    """Terminal rendering of a solve/shortlist result (``diagnosis``: short lines for infeasible studies)."""
    print(f"{res['problem']}")
    obj = res["objective"]
    print(f"status: {res['status']}   objective: minimise {obj['minimize']} [{obj['unit']}]"
          f"   value: {fmt(obj['value'])}   bound: {fmt(res.get('bound'))}")
    print_search_summary(res, diagnosis)
    for n, d in enumerate(res["designs"], 1):
        print(f"\n{title if len(res['designs']) == 1 else f'design {n}'}: {d['motor']} + {d['reducer']} + {d['tyre']}"
              f"   cost {fmt(d['cost'])}   mass {fmt(d['mass_kg'])} kg")
        print(parts_table(d) + "\n")
        print(requirement_table(d))
        active = [r["name"] for r in d["requirements"] if r["binding"]]
        print(f"active requirements (margin-based: {res['binding_rule']} %): {', '.join(active) if active else 'none'}"
              "; `selector explain` re-solves to show which ones change the optimum and what each costs")
    print("\n" + CAUTION)


def _cmd_solve(args) -> int:
    from selector.api import open_study, solve

    t0 = time.monotonic()
    study = open_study(args.problem)
    res = solve(study, time_limit_s=remaining_s(args.time_limit, t0))
    if res["status"] == "infeasible":
        combos = res["search"]["combinations"]
        if args.time_limit is None and combos <= DIAGNOSE_MAX_COMBINATIONS:
            from selector.studies.explain import diagnose

            res["diagnosis"] = diagnose(study, res.get("reason"))
        else:  # the closest-design search enumerates the catalogue: leave it to `selector explain`
            res["diagnosis"] = {"summary": [f"diagnosis skipped ({combos:,} combinations"
                                            f"{' and a time limit' if args.time_limit else ''}): "
                                            "run `selector explain` for it"]}
    if args.format == "json":
        _out(args, res)
    else:
        print_search_result(res, diagnosis=res.get("diagnosis", {}).get("summary"))
    return 0


def remaining_s(limit_s: float | None, t0: float) -> float | None:
    """What is left of ``--time-limit`` after loading since ``t0`` (time.monotonic) [s]; the limit covers
    reading the files and building the tables, not only the search (never below 1 ms)."""
    if limit_s is None:
        return None
    return max(limit_s - (time.monotonic() - t0), 1e-3)


DIAGNOSE_MAX_COMBINATIONS = 2_000_000
"""solve diagnoses an infeasible study (an exhaustive closest-design search) up to this size [-]."""

COMMANDS = {
    "check": (_setup_check, _cmd_check, "validate a problem file and its catalogues"),
    "simulate": (_setup_simulate, _cmd_simulate, "evaluate one design (motor, reducer, tyre)"),
    "solve": (_setup_solve, _cmd_solve, "find the optimal design, exactly, and verify it"),
}
# Further commands register themselves here (explain, frontier, sweep, shortlist).


def _register_optional():
    import importlib

    for mod in ("explain", "frontier", "sweep", "shortlist"):
        importlib.import_module(f"selector.cli.{mod}").register(COMMANDS)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every registered command."""
    _register_optional()
    parser = _Parser(prog="selector", description="Pick a traction motor, reduction ratio and tyre from "
                     "supplier catalogues, exactly (MILP), verified by physics.")
    parser.add_argument("--version", action="version", version=f"selector {__version__}")
    parser.add_argument("--verbose", action="store_true", help="show tracebacks of internal errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, (setup, _, help_text) in COMMANDS.items():
        setup(sub.add_parser(name, help=help_text, description=help_text))
    return parser


def _on_sigterm(signum, frame):
    raise Terminated()


def _install_sigterm():
    """SIGTERM raises `Terminated` (temporary files are removed by the writers' ``finally`` blocks, sweep
    workers are stopped); returns the previous handler, or None when not in the main thread."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        return None
    return signal.signal(signal.SIGTERM, _on_sigterm)


def run(argv=None) -> int:
    """Run the CLI; returns the exit code (0 ok, 2 bad input, 1 internal error, 130 Ctrl-C, 143 SIGTERM)."""
    import signal

    argv = list(sys.argv[1:] if argv is None else argv)
    verbose = "--verbose" in argv
    previous = _install_sigterm()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            return _dispatch(argv)
        except InputError as exc:
            print(f"error: {exc}", file=sys.stderr)
            return 2
        except SelectorError as exc:  # solver missing or broken, verification failure
            print(f"error: {exc}", file=sys.stderr)
            return 1
        except KeyboardInterrupt:
            print("interrupted (Ctrl-C)", file=sys.stderr)
            return 130
        except Terminated:
            print("terminated (SIGTERM)", file=sys.stderr)
            return 143
        except BrokenPipeError:  # output piped into a reader that stopped early (e.g. `| head`)
            sys.stdout = open(os.devnull, "w")  # noqa: SIM115 - silence the interpreter's final flush
            return 0
        except OSError as exc:  # the environment, not the input or the code: a full disk, a closed terminal
            print(f"error: {describe_os_error(exc)}"
                  f"{f' ({exc.filename})' if getattr(exc, 'filename', None) else ''}. Nothing more was written; "
                  "check the disk and the output paths.", file=sys.stderr)
            return 2
        except Exception as exc:  # noqa: BLE001 - last resort: an internal error is a bug
            if verbose:
                traceback.print_exc()
            print(f"internal error: {type(exc).__name__}: {exc}. This is a bug in selector; rerun with --verbose "
                  "and report the output.", file=sys.stderr)
            return 1
        finally:  # warnings are shown on every path, also before an error
            if previous is not None:
                signal.signal(signal.SIGTERM, previous)
            for w in caught:
                if issubclass(w.category, UserWarning):
                    print(f"warning: {w.message}", file=sys.stderr)


def _dispatch(argv) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not args.command:
        parser.print_help()
        return 2
    return COMMANDS[args.command][1](args)


def main() -> None:
    """Console-script entry point."""
    sys.exit(run())
