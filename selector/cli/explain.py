"""`selector explain PROBLEM`: what binds, what each requirement costs, near misses, why no answer.

Registers the command in `cli.COMMANDS`; the logic lives in `explain.py`.
"""

from __future__ import annotations

import argparse

from selector.cli.args import add_common
from selector.records import CAUTION, fmt, parts_table, table
from selector.studies.defaults import NEAR_MISS_PCT, STEP_PCT


def _pct(text):
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0 < v < 100:
        raise argparse.ArgumentTypeError(f"{text!r} must be a percentage between 0 and 100 (exclusive)")
    return v


def _setup(p):
    add_common(p)
    p.add_argument("--step", type=_pct, default=STEP_PCT, metavar="PCT",
                   help=f"loosening step for the price of each requirement [%%] (default {STEP_PCT:g})")
    p.add_argument("--near-miss", type=_pct, default=NEAR_MISS_PCT, metavar="PCT",
                   help=f"largest miss of a near-miss design [%%] (default {NEAR_MISS_PCT:g})")


def _relax(relax: dict) -> str:
    return ", ".join(f"{k} = {'dropped' if v is None else fmt(v)}" for k, v in relax.items())


def _ids(d) -> str:
    from selector.studies.explain_text import design_text

    return design_text(d)


def _parts(d: dict) -> str:
    """Parts of the optimum: the record's parts table, or one row per unit and the tyre (two units)."""
    if "parts" in d:
        return parts_table(d)
    rows = [[u["axle"], u["motor"], u["reducer"]] for u in d["units"]] + [["tyre", d["tyre"], ""]]
    return table(["slot", "motor / tyre", "reducer"], rows, "lll")


def render_feasible(res: dict) -> str:
    """Terminal text of a feasible explanation."""
    obj = res["objective"]
    d = res["design"]
    unit = obj["unit"]
    lines = [f"optimum: {_ids(d)}   minimise {obj['minimize']}: {fmt(obj['value'])} {unit}", "",
             _parts(d), "", "Requirements at the optimum"]
    rows = []
    for r in res["requirements"]:
        rows.append([r["name"], r["sense"], fmt(r["required"]), fmt(r["achieved"]), r["unit"], fmt(r["margin"]),
                     fmt(r["margin_pct"], 3), "yes" if r["binding"] else "", "yes" if r["active"] else "",
                     r.get("limited_by", "")])
    lines.append(table(["requirement", "sense", "required", "achieved", "unit", "margin", "margin %",
                        "binding", "active", "limited by"], rows, "llrrlrrlll"))
    defs = res["definitions"]
    lines.append(f"binding: {defs['binding']}.  active: {defs['active']}.")
    lines += ["", f"Price of each requirement (objective {obj['minimize']} [{unit}]; "
                  f"loosened = by {res['step_pct']:g} %)"]
    rows = []
    for r in res["requirements"]:
        for how in ("dropped", "loosened"):
            p = r["price"][how]
            rows.append([r["name"] if how == "dropped" else "", how,
                         "-" if how == "dropped" else fmt(p["required"]), fmt(p["objective"]), fmt(p["saved"]),
                         fmt(p["saved_pct"], 3), _ids(p["design"]), fmt(p["achieved"]),
                         "yes" if p["changes_motor"] else ""])
    lines.append(table(["requirement", "relaxed", "to", "objective", "saved", "saved %", "design picked instead",
                        "its value", "changes motor"], rows, "lllrrrlrl"))
    lines += ["", "Summary"] + [f"- {s}" for s in res["summary"]]
    lines += ["", f"Near misses (miss one requirement by at most {res['near_miss_pct']:g} %, better objective)"]
    if res["near_misses"]:
        lines += [f"- {n['sentence']}" for n in res["near_misses"]]
    else:
        lines.append("- none: loosening any single requirement by that much does not improve the optimum")
    return "\n".join(lines)


def render_infeasible(res: dict) -> str:
    """Terminal text of an infeasible explanation."""
    lines = ["status: infeasible: " + (res.get("reason") or "no design meets every requirement"), ""]
    if res["impossible"]:
        lines.append("Impossible at vehicle level (no part can fix these)")
        lines.append(table(["requirement", "required", "limit", "unit", "why"],
                           [[d["name"], fmt(d["required"]),
                             ("" if d["bound"] == "exact" else "at most ") + fmt(d["limit"]), d["unit"], d["why"]]
                            for d in res["impossible"]], "lrrll"))
        lines.append("")
    if res["conflicts"]:
        lines.append("Requirements that cannot be met together (minimal sets, part ratings enforced)")
        lines += [f"- {' + '.join(c)}" for c in res["conflicts"]]
        lines.append("")
    c = res["closest"]
    if c is None:
        lines.append(res.get("closest_note", "no closest design"))
    else:
        lines.append(f"Closest design (least sum of normalised shortfalls): {_ids(c)}")
        lines.append(table(["requirement", "sense", "required", "achieved", "unit", "shortfall", "shortfall %",
                            "limited by"],
                           [[r["name"] + (f" (to {fmt(r['accel_to_kmh'])} km/h)"
                                          if r["name"] == "accel_time_s" else ""),
                             r["sense"], fmt(r["required"]), fmt(r["achieved"]), r["unit"],
                             fmt(r["shortfall"]), fmt(r["shortfall_pct"], 3), r.get("limited_by", "")]
                            for r in c["shortfalls"]],
                           "llrrlrrl"))
        for r in c["shortfalls"]:
            if "reach_kmh" in r and not r["met"] and (r["name"] == "accel_to_kmh" or r["achieved"] is None):
                lines.append(f"{r['name']}: never reaches {fmt(r['accel_to_kmh'])} km/h; its acceleration run ends at "
                             f"{fmt(r['reach_kmh'])} km/h ({r['reach_limit']} limit)")
    if c is not None or res.get("relaxation_options"):
        lines.append("")
        lines += _relaxation_lines(res)
    lines += ["", "Summary"] + [f"- {s}" for s in res["summary"]]
    return "\n".join(lines)


def _relaxation_lines(res: dict) -> list[str]:
    """The confirmed relaxation and its optimum (or why there is none), then the other options tried."""
    lines = []
    if res["relaxation_verified"]:
        lines.append(f"Relax {_relax(res['relaxation'])}  (confirmed: a re-solve with these values is feasible)")
        o = res["relaxed_optimum"]
        lines.append(f"optimum with the relaxed requirements: {_ids(o)}   "
                     f"{res['objective']['minimize']} {fmt(o['objective'])} {res['objective']['unit']}")
    else:
        note = res.get("relaxation_note") or "no confirmed relaxation"
        lines.append(note[0].upper() + note[1:])
    for o in res.get("relaxation_options", []):
        if o["relaxation"] != res["relaxation"]:
            verdict = "also confirmed by a re-solve" if o["verified"] else "NOT confirmed by a re-solve"
            lines.append(f"{'or relax' if o['verified'] else 'tried'} {_relax(o['relaxation'])}  ({verdict})")
    return lines


def _cmd(args) -> int:
    from selector.api import open_study
    from selector.public import explain

    result = explain(open_study(args.problem), step_pct=args.step, near_miss_pct=args.near_miss,
                     progress=args.format != "json")
    if args.format == "json":
        print(result.to_json())
        return 0
    res = result.data
    print(res["problem"])
    print(render_feasible(res) if res["design"] is not None else render_infeasible(res))
    s = res["searches"]
    print(f"\n{s['count']} exact searches, {s['elapsed_s']:.1f} s")
    print("\n" + CAUTION)
    return 0


def register(commands: dict) -> None:
    """Add `explain` to the CLI's command table."""
    commands["explain"] = (_setup, _cmd, "what binds, what each requirement costs, and why a study has no answer")
