"""``selector frontier PROBLEM [--axis cost|mass|energy] [--time-limit S] [--plot FILE] [--format table|json]``."""

from __future__ import annotations

import time

from selector.cli.args import add_common, positive_float
from selector.records import CAUTION, design_name, fmt, table

HELP = "exact cost (or mass, or energy per km) versus acceleration-time frontier"


def setup(p):
    """Arguments of the frontier command."""
    add_common(p)
    p.add_argument("--axis", choices=("cost", "mass", "energy"), default="cost",
                   help="trade the acceleration time against cost (default), vehicle mass, or the energy per km "
                        "at the battery (studies with [energy])")
    p.add_argument("--plot", metavar="FILE", help="write the frontier chart (.png, .svg or .pdf)")
    p.add_argument("--time-limit", type=positive_float, metavar="SECONDS",
                   help="wall-clock limit of the whole frontier; when reached, the exact points traced so far "
                        "(from the low end of the axis) with status time_limit")


def handle(args) -> int:
    """Trace the frontier, print it, optionally plot it."""
    from selector.api import open_study
    from selector.cli.heartbeat import heartbeat, wanted
    from selector.cli.main import remaining_s
    from selector.public import frontier

    t0 = time.monotonic()

    if args.plot is not None:
        from selector.io.plots import check_output_path

        check_output_path(args.plot, protected=(args.problem,))
    study = open_study(args.problem)
    if args.plot is not None:  # the catalogues are read now: never write over one of them
        check_output_path(args.plot)
    with heartbeat("frontier", wanted(args), args.time_limit):
        result = frontier(study, axis=args.axis, time_limit_s=remaining_s(args.time_limit, t0))
    if args.plot is not None:
        from selector.io.plots import frontier_plot

        frontier_plot(result.data, args.plot)
        result.add_output("plot", args.plot)
    if args.format == "json":
        print(result.to_json())
        return 0
    print(render(result.data))
    return 0


def render(res: dict) -> str:
    """Terminal rendering of a frontier result."""
    key, unit = res["axis_key"], res["axis_unit"]
    req = res["requirement"]
    lines = [res["problem"],
             f"frontier: {len(res['points'])} designs non-dominated in ({res['axis_label']} [{unit}], "
             f"0-{fmt(res['accel_to_kmh'])} km/h time [s]), meeting every other requirement",
             f"{res['search']['searches']} exact searches over {res['search']['combinations']:,} combinations "
             f"in {res['search']['elapsed_s']:.1f} s", ""]
    rows = []
    for n, q in enumerate(res["points"], 1):
        note = []
        if q["chosen"]:
            note.append("chosen")
        if q["meets_accel_time_s"]:
            note.append("meets accel_time_s")
        motor, reducer = _unit_cells(q)
        rows.append([str(n), fmt(q[key]), fmt(q["accel_time_s"]), fmt(q["cost"] if key != "cost" else q["mass_kg"]),
                     motor, reducer, q["tyre"], ", ".join(note)])
    other = "mass_kg" if key == "cost" else "cost"
    stopped = res.get("status") == "time_limit"
    if not rows and not stopped:
        lines.append("no design meets the other requirements and reaches accel_to_kmh: the frontier is empty.")
    elif rows:
        lines.append(table(["#", f"{key} [{unit}]", "time [s]", other, "motor", "reducer", "tyre", "note"], rows,
                           "rrrrllll"))
    if stopped:
        lines.append(f"\nstopped at the time limit after {len(rows)} point{'s' if len(rows) != 1 else ''}: the points "
                     f"shown are exact, the frontier beyond the last one (higher {res['axis_label']}, faster) was not "
                     "traced. Rerun with a longer --time-limit, or without one.")
    if req is not None:
        lines.append(f"\naccel_time_s required: {fmt(req)} s")
    ch = res["chosen"]
    if ch is None:
        lines.append("the problem's own optimum was not searched to proof within the time limit" if stopped
                     else "the problem as stated is infeasible: no chosen design")
    else:
        where = ("on the frontier" if ch["on_frontier"]
                 else "not among the points traced before the time limit" if ch["on_frontier"] is None
                 else "not on the frontier (a frontier design is at least as good)")
        lines.append(f"chosen ({ch['objective']} optimum of the problem): "
                     f"{design_name(ch)}"
                     f", {key} {fmt(ch[key])}, time {fmt(ch['accel_time_s'])} s, {where}")
    if res.get("plot"):
        lines.append(f"plot written to {res['plot']}")
    lines.append("\n" + CAUTION)
    return "\n".join(lines)


def _unit_cells(q: dict) -> tuple[str, str]:
    """Motor and reducer cells of a frontier point: the part ids, or per axle for a two-unit design."""
    if q.get("motor") is not None or not q.get("units"):
        return q["motor"], q["reducer"]
    return (", ".join(f"{u['axle']} {u['motor']}" for u in q["units"]),
            ", ".join(f"{u['axle']} {u['reducer']}" for u in q["units"]))


def register(commands: dict) -> None:
    """Add the frontier command to the CLI's command table."""
    commands["frontier"] = (setup, handle, HELP)
