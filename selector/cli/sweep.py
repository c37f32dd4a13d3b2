"""``selector sweep PROBLEM --vary KEY=START:STOP:N [...] [--out FILE.csv] [--plot FILE]``."""

from __future__ import annotations

import sys

from selector.cli.args import add_common, positive_float, positive_int
from selector.errors import InputError
from selector.records import CAUTION, fmt, table

HELP = "re-solve exactly over a grid of problem values (parameter sweep)"


def setup(p):
    """Arguments of the sweep command."""
    add_common(p)
    p.add_argument("--vary", action="append", required=True, metavar="KEY=START:STOP:N",
                   help="a dotted problem key and its range, e.g. requirements.top_speed_kmh=100:140:5 "
                        "(repeat for a grid; the first key varies slowest)")
    p.add_argument("--out", metavar="FILE.csv", help="also write the table as CSV")
    p.add_argument("--plot", metavar="FILE", help="write the objective against the first key (.png, .svg or .pdf)")
    p.add_argument("--workers", type=positive_int, metavar="N", help="local worker processes (default: CPU count)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="run on a Dask cluster, e.g. tcp://host:8786")
    p.add_argument("--large", action="store_true",
                   help="allow a grid above 5,000 points or more --workers than CPU cores")
    p.add_argument("--time-limit", type=positive_float, metavar="SECONDS",
                   help="wall-clock limit of each point's search; a point that reaches it has status time_limit "
                        "and shows the best design found")


def handle(args) -> int:
    """Run the sweep, print it, optionally write CSV and plot."""
    from pathlib import Path

    from selector.api import open_study
    from selector.io.export import atomic_write
    from selector.io.export import check_output_path as check_out
    from selector.io.plots import check_output_path
    from selector.public import sweep
    from selector.studies.sweep import parse_varies, to_csv

    csv_only = {".csv": "csv"}
    protected = (args.problem,)
    if args.scheduler is not None and not args.scheduler.strip():
        raise InputError("--scheduler '': the address is empty. Give the Dask scheduler's address, e.g. "
                         "tcp://host:8786, or leave the option out to run locally.")
    parse_varies(args.vary)  # bad --vary texts are reported before the catalogues are read
    if args.plot is not None:
        check_output_path(args.plot, protected=protected)
    if args.out is not None:
        check_out(args.out, protected, formats=csv_only)
    study = open_study(args.problem)
    if args.out is not None or args.plot is not None:
        problem = study.problem
        protected = (problem.path, *problem.catalog_paths.values())  # never overwrite an input
        if args.out is not None:
            check_out(args.out, protected, formats=csv_only)
        if args.plot is not None:
            check_output_path(args.plot, protected=protected)
    progress = args.format == "table" and sys.stderr.isatty()
    result = sweep(study, args.vary, workers=args.workers, scheduler=args.scheduler, progress=progress,
                   large=args.large, time_limit_s=args.time_limit)
    if args.out is not None:
        text = to_csv(result.data)
        atomic_write(args.out, lambda tmp: Path(tmp).write_text(text, encoding="utf-8", newline=""),
                     protected, formats=csv_only)
        result.add_output("csv", args.out)
    if args.plot is not None:
        from selector.io.plots import sweep_plot

        sweep_plot(result.data, args.plot)
        result.add_output("plot", args.plot)
    if args.format == "json":
        print(result.to_json())
    else:
        print(render(result.data))
    return 0


ENERGY_SHOWN = {"energy_wh_per_km": "Wh/km", "battery_kwh": "battery [kWh]"}
"""Energy columns of the terminal table (column: heading); the CSV and JSON rows have them all."""


def render(res: dict) -> str:
    """Terminal rendering of a sweep result."""
    keys = [q["key"] for q in res["parameters"]]
    obj = res["objective"]
    r = res["runner"]
    how = f"{r['mode']}, {r['workers']} worker{'s' if r['workers'] != 1 else ''}"
    lines = [res["problem"],
             f"sweep of {len(res['rows'])} points ({' x '.join(str(q['n']) for q in res['parameters'])}), "
             f"minimise {obj['minimize']} [{obj['unit']}], each solved exactly and verified; "
             f"{res['infeasible']} infeasible; "
             + (f"{res['time_limit']} stopped at the time limit (best design found shown); "
                if res["time_limit"] else "")
             + f"{r['elapsed_s']:.1f} s ({how})"]
    lines += [f"note: {n}" for n in res["notes"]]
    lines.append("")
    rows = []
    two = "front_motor" in res["columns"]
    energy = [c for c in ENERGY_SHOWN if c in res["columns"]]
    for row in res["rows"]:
        motor, reducer = row["motor"], row["reducer"]
        if two and row.get("front_motor") is not None:
            motor = f"front {row['front_motor']}, rear {row['rear_motor']}"
            reducer = f"front {row['front_reducer']}, rear {row['rear_reducer']}"
        rows.append([fmt(row[k]) for k in keys] + [row["status"], fmt(row["objective"]), motor or "-",
                                                   reducer or "-", row["tyre"] or "-", fmt(row["cost"]),
                                                   fmt(row["mass_kg"]), fmt(row["accel_time_s"])]
                    + [fmt(row.get(c)) for c in energy])
    units = {q["key"]: q["unit"] for q in res["parameters"]}
    head = [f"{k} [{units[k]}]" for k in keys] + ["status", f"min {obj['minimize']} [{obj['unit']}]",
                                                 "motor", "reducer",
                                                  "tyre", "cost", "mass_kg", "accel_time_s"] \
        + [ENERGY_SHOWN[c] for c in energy]
    lines.append(table(head, rows, "r" * len(keys) + "lrlllrrr" + "r" * len(energy)))
    for extra in ("csv", "plot"):
        if res.get(extra):
            lines.append(f"{'CSV' if extra == 'csv' else 'plot'} written to {res[extra]}")
    lines.append("\n" + CAUTION)
    return "\n".join(lines)


def register(commands: dict) -> None:
    """Add the sweep command to the CLI's command table."""
    commands["sweep"] = (setup, handle, HELP)
