"""``selector shortlist``: the N best designs with a bill of materials, on screen, as JSON, CSV or XLSX."""

from __future__ import annotations

from selector.cli.args import add_common, number, positive_int
from selector.records import CAUTION, fmt, table


def setup(p) -> None:
    """Arguments of ``selector shortlist``."""
    add_common(p)
    p.add_argument("--count", type=positive_int, required=True, metavar="N", help="number of designs wanted")
    p.add_argument("--out", metavar="FILE", help="also write the shortlist to FILE.csv (bill-of-materials lines) "
                   "or FILE.xlsx (Header, Shortlist and BOM sheets); written atomically")
    p.add_argument("--distinct", choices=("motor", "reducer", "tyre", "none"),
                   help="designs never share this part (motor: exact; reducer/tyre: greedy, the best alternative "
                   "not sharing the part); default: the problem's [procurement] distinct")
    p.add_argument("--avoid-supplier", action="append", default=[], metavar="NAME",
                   help="never propose parts from this supplier (repeatable; replaces the problem's avoid_suppliers)")
    p.add_argument("--max-lead-time-weeks", type=number(0.0, False), metavar="W",
                   help="never propose parts with a longer lead time (replaces the problem's)")
    p.add_argument("--vehicles", type=positive_int, default=1, metavar="Q",
                   help="vehicles to buy for: multiplies quantities and extended costs (default 1)")
    p.add_argument("--time-limit", type=number(0.0, True), metavar="SECONDS",
                   help="wall-clock limit, counted from the start of the command (loading included)")


def print_shortlist(res: dict) -> None:
    """Terminal rendering of a shortlist result."""
    o = res["options"]
    obj = res["objective"]
    print(res["problem"])
    print(f"status: {res['status']}   objective: minimise {obj['minimize']} [{obj['unit']}]   "
          f"designs: {o['found']} of {o['count']} requested")
    print(f"distinct: {o['distinct_rule']}")
    from selector.cli.main import print_search_summary

    print_search_summary(res)
    if o["found"] < o["count"] and res["status"] == "optimal" and res["bom"]:
        print(f"only {o['found']} designs meet every requirement under this rule and these filters.")
    if res["bom"]:
        from selector.studies.shortlist import unit_text

        rows = [[b["rank"], unit_text(b, "motor"), unit_text(b, "reducer"), b["tyre"],
                 fmt(b["cost_per_vehicle"]), fmt(b["lead_time_weeks"]),
                 fmt(b["max_speed_kmh"]), fmt(b["sustained_top_speed_kmh"]), fmt(b["gradeability_pct"]),
                 fmt(b["launch_accel_mps2"]), fmt(b["accel_time_s"]), fmt(b["mass_kg"]),
                 fmt(b["smallest_margin_pct"], 3), b["smallest_margin_name"] or "-"] for b in res["bom"]]
        print()
        print(table(["#", "motor", "reducer", "tyre", "cost", "lead wk", "vmax km/h", "top km/h", "grade %",
                     "launch m/s2", "accel s", "mass kg", "min margin %", "tightest"], rows, "rlll" + "r" * 9 + "l"))
        q = o["vehicles"]
        lines = [[b["rank"], ln["item"], ln["part"], ln["supplier"], ln["quantity"], fmt(ln["unit_cost"]),
                  fmt(ln["extended_cost"]), fmt(ln["lead_time_weeks"])] for b in res["bom"] for ln in b["lines"]]
        print(f"\nbill of materials for {q} vehicle{'s' if q != 1 else ''}:")
        print(table(["#", "item", "part", "supplier", "qty", "unit cost", "extended", "lead wk"], lines, "rlllrrrr"))
    if res.get("output"):
        print(f"\nwritten to {res['output']}")
    print("\n" + CAUTION)


def run_shortlist(args) -> int:
    """Handler of ``selector shortlist``."""
    import time

    from selector.cli.heartbeat import heartbeat, wanted
    from selector.cli.main import remaining_s
    from selector.io.export import check_output_path
    from selector.public import shortlist
    from selector.studies.shortlist import open_shortlist_study, shortlist_inputs, write_shortlist

    t0 = time.monotonic()
    study = open_shortlist_study(args.problem, args.avoid_supplier, args.max_lead_time_weeks)
    if args.out is not None:
        check_output_path(args.out, shortlist_inputs(study))  # fail before a long search
    with heartbeat("shortlist", wanted(args), args.time_limit):
        result = shortlist(study, args.count, distinct=args.distinct, vehicles=args.vehicles,
                           time_limit_s=remaining_s(args.time_limit, t0))
    if args.out is not None:
        result.add_output("output", write_shortlist(result.data, args.out, study))
    if args.format == "json":
        print(result.to_json())
    else:
        print_shortlist(result.data)
    return 0


def register(commands: dict) -> None:
    """Add ``shortlist`` to the CLI's command table."""
    commands["shortlist"] = (setup, run_shortlist,
                             "the N best designs, optionally diverse, with a bill of materials (CSV/XLSX)")
