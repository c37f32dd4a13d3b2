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
from selector.cli.args import add_common, flag_names, positive_float
from selector.errors import InputError, SelectorError, Terminated
from selector.io.files import describe_os_error
from selector.records import (
    CAUTION,
    design_name,
    dumps,
    energy_table,
    fmt,
    parts_table,
    performance_table,
    requirement_table,
    table,
    units_table,
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

LISTED_IDS = 20
"""Part ids `check` lists by name before "and N more" [-]."""


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
    lay = s["layout"]
    units = " and ".join(lay["units"])
    lines.append(f"\nlayout: driven_axle = {lay['driven_axle']}: one drive unit on the {units} axle"
                 f"{'s' if len(lay['units']) > 1 else ''}"
                 + ("; the same unit on both axles (same_unit)" if lay["same_unit"] else "")
                 + "; motors allowed per axle: " + ", ".join(f"{a} {n}" for a, n in lay["motors_per_axle"].items())
                 + f"; multi-speed reducers in the catalogue: {lay['multi_speed_reducers']}")
    lines.append(f"combinations: {s['combinations']:,}"
                 + (f" ({s['combinations_in_play']:,} after the procurement, [drive] and loss-data filters)"
                    if s["combinations_in_play"] != s["combinations"] else ""))
    if s["no_design_left"]:
        lines.append(f"warning: {s['no_design_left']} (every search of this study is infeasible)")
    lines.append(f"air density: {fmt(s['air_density_kg_m3'])} kg/m^3")
    lines.append(f"objective: minimise {s['objective']}")
    lines.append("requirements: " + (", ".join(f"{k} = {fmt(v)}" for k, v in s["requirements"].items()) or "none"))
    if s.get("energy") and s["energy"]["motors_without_loss_data"]:
        ids = s["energy"]["motors_without_loss_data"]
        shown = ", ".join(ids[:LISTED_IDS]) + (f" and {len(ids) - LISTED_IDS} more" if len(ids) > LISTED_IDS else "")
        lines.append(f"energy study ({s['energy']['cycle']}): {len(ids)} motor{'s' if len(ids) != 1 else ''} "
                     f"without loss data (neither the loss_* columns nor an efficiency_map) cannot be used: {shown}")
    print("\n".join(lines))
    return 0


# ----------------------------------------------------------------------------- simulate

def _setup_simulate(p):
    add_common(p)
    p.add_argument("--motor", help="motor part id (single-axle study: the unit on the driven axle)")
    p.add_argument("--reducer", help="reducer part id (one ratio variant or gearbox)")
    p.add_argument("--tyre", required=True, help="tyre part id")
    p.add_argument("--front-motor", metavar="ID", help="motor part id of the front unit (by slots)")
    p.add_argument("--front-reducer", metavar="ID", help="reducer part id of the front unit")
    p.add_argument("--rear-motor", metavar="ID", help="motor part id of the rear unit (by slots)")
    p.add_argument("--rear-reducer", metavar="ID", help="reducer part id of the rear unit")
    p.add_argument("--plot", metavar="FILE",
                   help="write the tractive-effort diagram (.png, .svg or .pdf); an energy study also writes "
                        "the cycle's operating points beside it (FILE-cycle with the same suffix)")


def _slot_ids(args) -> dict:
    """Part ids of the design named on the command line, as keyword arguments of `api.simulate`."""
    return {"motor": args.motor, "reducer": args.reducer, "tyre": args.tyre,
            "front_motor": args.front_motor, "front_reducer": args.front_reducer,
            "rear_motor": args.rear_motor, "rear_reducer": args.rear_reducer}


def _cmd_simulate(args) -> int:
    from selector.api import open_study
    from selector.public import simulate

    if args.plot is not None:
        from selector.io.plots import check_output_path

        check_output_path(args.plot, protected=(args.problem,))  # fail before any work
    study = open_study(args.problem)
    ids = _slot_ids(args)
    if args.plot is not None:  # the catalogues are read now: never write over one of them
        check_output_path(args.plot)
    result = simulate(study, **ids)
    if args.plot is not None:
        from selector.io.cycle_plot import write_cycle_plot
        from selector.io.plots import tractive_effort_plot

        write_cycle_plot(study, args.plot, result, **ids)  # energy studies: the cycle's operating points
        tractive_effort_plot(study, path=args.plot, **ids)
        result.add_output("plot", args.plot)
    res = result.data
    if args.format == "json":
        print(result.to_json())
        return 0
    d = res["design"]
    print(f"{res['problem']}\ndesign {design_name(d)}: "
          f"{'meets every requirement' if d['feasible'] else 'DOES NOT meet every requirement'}\n")
    print(parts_table(d) + "\n")
    if d["motor"] is None or d["shifts"] or len(d["gear_ratios"] or ()) > 1:
        print(units_table(d) + "\n")
    print(performance_table(d) + "\n")
    if "energy" in d:
        print(energy_table(d) + "\n")
    print(requirement_table(d))
    for u in d["unmet"]:
        print(f"not met: {u['name']}: {u['why']}")
    if args.plot is not None:
        print(f"\nplot written to {args.plot}" + (f" and {res['cycle_plot']}" if res.get("cycle_plot") else ""))
    print("\n" + CAUTION)
    return 0


# ----------------------------------------------------------------------------- solve

def _setup_solve(p):
    add_common(p)
    p.add_argument("--time-limit", type=positive_float, metavar="SECONDS",
                   help="wall-clock limit, counted from the start of the command (loading included); when "
                        "reached: status time_limit, the best design found, the bound and the gap")


def print_search_summary(res: dict, diagnosis: list[str] | None = None) -> None:
    """The search line, procurement filters and, for an infeasible study, the diagnosis lines."""
    s = res["search"]
    blocks = f"{s['iterations']} block{'s' if s['iterations'] != 1 else ''} opened"
    if res["status"] == "time_limit":
        gap = "no design found yet" if res.get("gap") is None else f"gap {100.0 * res['gap']:.3g} % to the bound"
        print(f"stopped at the time limit before the proof over {s['combinations']:,} combinations ({blocks}; "
              f"{gap}), build {s['build_s']:.2f} s, solve {s['solve_s']:.2f} s, verify {s['verify_s']:.2f} s")
    else:
        print(f"searched {s['combinations']:,} combinations to proof ({blocks}), "
              f"build {s['build_s']:.2f} s, solve {s['solve_s']:.2f} s, verify {s['verify_s']:.2f} s")
    for note in s.get("procurement_filters", []):
        print(f"procurement filter: {note}")
    if res["status"] == "time_limit" and not res["designs"]:
        print("\nno design found before the time limit; rerun with a longer --time-limit, or without one.")
    if res["status"] == "infeasible":
        reason = res.get("reason") or ""
        print(f"\n{reason}" if reason.startswith("no design") else f"\nno design meets every requirement: {reason}")
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
        print(f"\n{title if len(res['designs']) == 1 else f'design {n}'}: {design_name(d)}"
              f"   cost {fmt(d['cost'])}   mass {fmt(d['mass_kg'])} kg")
        print(parts_table(d) + "\n")
        if d.get("motor") is None or d.get("shifts") or len(d.get("gear_ratios") or ()) > 1:
            print(units_table(d) + "\n")
        if "energy" in d:
            print(energy_table(d) + "\n")
        print(requirement_table(d))
        active = [r["name"] for r in d["requirements"] if r["binding"]]
        print(f"active requirements (margin-based: {res['binding_rule']} %): {', '.join(active) if active else 'none'}"
              "; `selector explain` re-solves to show which ones change the optimum and what each costs")
    print("\n" + CAUTION)


def _cmd_solve(args) -> int:
    from selector.api import open_study
    from selector.cli.heartbeat import heartbeat, wanted
    from selector.public import solve

    t0 = time.monotonic()
    study = open_study(args.problem)
    with heartbeat("solving", wanted(args), args.time_limit):
        result = solve(study, time_limit_s=remaining_s(args.time_limit, t0))  # diagnosis included when infeasible
    if args.format == "json":
        print(result.to_json())
    else:
        res = result.data
        print_search_result(res, diagnosis=res.get("diagnosis", {}).get("summary"))
    return 0


def remaining_s(limit_s: float | None, t0: float) -> float | None:
    """What is left of ``--time-limit`` after loading since ``t0`` (time.monotonic) [s]; the limit covers
    reading the files and building the tables, not only the search (never below 1 ms)."""
    if limit_s is None:
        return None
    return max(limit_s - (time.monotonic() - t0), 1e-3)


COMMANDS = {
    "check": (_setup_check, _cmd_check, "validate a problem file and its catalogues"),
    "simulate": (_setup_simulate, _cmd_simulate, "evaluate one design (motor, reducer, tyre; or a unit per axle)"),
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
        except InputError as exc:  # the library names parameters; the command line names its flags
            print(f"error: {flag_names(str(exc))}", file=sys.stderr)
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
                    print(f"warning: {flag_names(str(w.message))}", file=sys.stderr)


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
