"""Procurement shortlist: the N best designs, optionally diverse, with a bill of materials.

Definitions (what "the N best" means for each ``distinct`` setting):

- none: the N best designs meeting every requirement, best first (engine ``count=N``), exact.
- "motor": every design uses a different motor. Each motor contributes its best design and the
  N best of those are listed (engine ``per_motor=1``), exact: no other set of N designs with
  pairwise different motors has a better design at any rank.
- "reducer" / "tyre": greedy sequential, "the best alternative not sharing the part". Design 1
  is the optimum; design n is the best design whose reducer (tyre) part differs from those of
  designs 1..n-1, i.e. the optimum with those parts excluded. Each step is exact; the list as a
  whole is not a jointly optimised set of N designs. Parts are compared by part id (the same
  ratio sold under two part ids counts as two reducers).

Every listed design meets every requirement and is verified by `verify.verify_designs`; ties are
broken by part-id order as in `engine.search`. Procurement filters (``avoid_suppliers``,
``max_lead_time_weeks``) act before the search through `api.open_study`.
"""

from __future__ import annotations

import difflib
import time
import warnings
from datetime import date

import numpy as np

from selector.api import Study, open_study, result_dict
from selector.engine.evaluate import order_best, tie_tolerance
from selector.engine.search import (
    STATUS_INFEASIBLE,
    STATUS_OPTIMAL,
    STATUS_TIME_LIMIT,
    SearchResult,
    search,
)
from selector.errors import InputError
from selector.inputs import Procurement
from selector.io.export import Sheet, output_format, write_csv, write_xlsx
from selector.records import CAUTION, clean, smallest_margin

DISTINCT_CHOICES = ("motor", "reducer", "tyre")
DISTINCT_RULES = {
    None: "none: the N best designs, exact",
    "motor": "motor: each motor's best design, the N best of those (exact)",
    "reducer": ("reducer: greedy, the best alternative not sharing the part: design n is the best design whose "
                "reducer differs from those of designs 1..n-1"),
    "tyre": ("tyre: greedy, the best alternative not sharing the part: design n is the best design whose "
             "tyre differs from those of designs 1..n-1"),
}
GREEDY = ("reducer", "tyre")
"""Diversity rules found greedily (the others are exact)."""
TWO_UNIT_MOTOR_RULE = ("motor: each (front motor, rear motor) pair's best design, the N best of those (exact); "
                       "the same pair on swapped axles is another pair")
PERFORMANCE_COLUMNS = ("max_speed_kmh", "sustained_top_speed_kmh", "gradeability_pct", "launch_accel_mps2",
                       "accel_time_s")
ITEMS = ("motor", "reducer", "tyre")
"""Part kinds of a design (two-unit designs: a motor and a reducer per axle)."""

SHORTLIST_COLUMNS = [
    "rank", "motor", "motor_supplier", "reducer", "reducer_supplier", "ratio", "tyre", "tyre_supplier",
    "tyres_per_vehicle", "cost_per_vehicle", "vehicles", "extended_cost", "lead_time_weeks",
    *PERFORMANCE_COLUMNS, "mass_kg", "smallest_margin_pct", "smallest_margin_name",
]
"""Columns of the "Shortlist" sheet: one row per design."""

BOM_COLUMNS = [
    "rank", "design", "item", "part", "supplier", "quantity_per_vehicle", "vehicles", "quantity", "unit_cost",
    "extended_cost", "lead_time_weeks", "design_cost_per_vehicle", "design_extended_cost",
    "design_lead_time_weeks", *PERFORMANCE_COLUMNS, "mass_kg", "smallest_margin_pct", "smallest_margin_name",
    "caution",
]
"""Columns of the CSV and of the "BOM" sheet: one row per design and part (an order line), each
carrying its design's totals and figures so that filtering on ``rank`` gives a complete order, and
the caution (an order line copied out of the file still carries it)."""


class ShortlistWarning(UserWarning):
    """Odd but usable shortlist options (e.g. a supplier to avoid that no catalogue lists)."""


# ----------------------------------------------------------------------------------- loading

def open_shortlist_study(path, avoid_suppliers=(), max_lead_time_weeks: float | None = None) -> Study:
    """Load a study with command-line procurement filters overriding the problem's [procurement].

    Parameters
    ----------
    path : problem file (TOML)
    avoid_suppliers : supplier names to leave out (replaces the problem's list when given) [-]
    max_lead_time_weeks : longest acceptable lead time (replaces the problem's when given) [weeks]
    """
    if max_lead_time_weeks is not None and not max_lead_time_weeks >= 0:
        raise InputError(f"max_lead_time_weeks {max_lead_time_weeks}: must be >= 0 [weeks].")
    if isinstance(avoid_suppliers, str) or not all(isinstance(s, str) for s in avoid_suppliers):
        from selector.errors import argument_error

        raise argument_error("open_shortlist_study", "avoid_suppliers", avoid_suppliers,
                             'a list of supplier names, e.g. ["Acme"]')
    avoid = tuple(s.strip() for s in avoid_suppliers if s.strip())
    study = open_study(path, procurement=Procurement(avoid_suppliers=avoid, max_lead_time_weeks=max_lead_time_weeks))
    if avoid:
        parts = study.parts
        known = sorted({str(s) for arr in (parts.motors, parts.reducers, parts.tyres) for s in arr.supplier})
        folded = {s.casefold() for s in known}
        for s in avoid:
            if s.casefold() not in folded:
                hit = difflib.get_close_matches(s, known, n=1, cutoff=0.6)
                did = f' Did you mean "{hit[0]}"?' if hit else ""
                warnings.warn(f'avoid_suppliers "{s}": no catalogue lists this supplier, so it excludes '
                              f"nothing.{did}", ShortlistWarning, stacklevel=2)
    return study


def resolve_distinct(study: Study, distinct: str | None) -> str | None:
    """The diversity rule in force: ``distinct`` if given ("none" = no rule), else the problem's."""
    if distinct is None:
        distinct = study.parts.problem.procurement.distinct
    if distinct in (None, "none"):
        return None
    if distinct not in DISTINCT_CHOICES:
        raise InputError(f"distinct = {distinct!r}: must be one of {', '.join(DISTINCT_CHOICES)} or none.")
    return distinct


# ----------------------------------------------------------------------------------- search

def _merge(total: SearchResult, res: SearchResult) -> None:
    total.iterations += res.iterations
    for k, v in res.timings.items():
        total.timings[k] = total.timings.get(k, 0.0) + v


def design_parts(design, distinct: str) -> set:
    """Catalogue positions of the parts of kind ``distinct`` ("reducer" | "tyre") a design uses: the
    tyre, or the reducer of every unit (both axles of a two-unit design)."""
    if distinct == "tyre":
        return {design.tyre}
    return {r for _, _, r in design.units}


def _pick_from_pool(designs, complete: bool, distinct: str, excluded: set):
    """Best design of a previous exact top-k list that uses none of the ``excluded`` parts of kind
    ``distinct``, when provably the same as a fresh search with those parts excluded; else None.

    A top-k list contains every design better than its last entry, so its best remaining entry is
    the restricted optimum when it lies clearly (beyond the tie tolerance) ahead of the last entry,
    or when the list holds every feasible design (``complete``).
    """
    rest = [d for d in designs if not design_parts(d, distinct) & excluded]
    if not rest:
        return None
    vals = np.array([d.value for d in rest])
    keys = np.array([d.key for d in rest], dtype=np.int64)
    best = rest[int(order_best(vals, keys, 1)[0])]
    if complete:
        return best
    last = designs[-1].value
    if best.value + 2.0 * tie_tolerance(best.value) < last - 2.0 * tie_tolerance(last):
        return best
    return None


def greedy_distinct(study: Study, count: int, distinct: str, objective: str | None = None,
                    time_limit_s: float | None = None) -> SearchResult:
    """Greedy "best alternative not sharing the part" list for distinct = "reducer" | "tyre".

    Design n is the optimum of the study with the reducers (tyres) of designs 1..n-1 excluded via
    ``allowed``. To save solves, each engine search asks for the best ``count - n + 1`` designs of
    its restricted study; later steps take their design from that list when it provably equals a
    fresh search (see `_pick_from_pool`), otherwise they search again. In a two-unit study a design
    uses the reducers of both its units: each later design uses none of them.
    """
    parts = study.parts
    objective = objective or parts.problem.objective
    kind = distinct + "s"
    deadline = None if time_limit_s is None else time.perf_counter() + time_limit_s
    total = SearchResult(status=STATUS_OPTIMAL, objective=objective)
    picks, excluded = [], set()
    pool, complete = [], False
    while len(picks) < count:
        pick = _pick_from_pool(pool, complete, distinct, excluded) if pool else None
        if pick is None:
            allowed = dict(study.allowed)
            allowed[kind] = np.setdiff1d(study.allowed[kind], np.fromiter(excluded, dtype=np.int64))
            if allowed[kind].size == 0:
                break
            remaining = None if deadline is None else deadline - time.perf_counter()
            if remaining is not None and remaining <= 0:
                total.status = STATUS_TIME_LIMIT
                break
            want = count - len(picks)
            res = search(parts, objective=objective, count=want, allowed=allowed, time_limit_s=remaining)
            _merge(total, res)
            if not res.designs:
                if res.status == STATUS_TIME_LIMIT:
                    total.status = STATUS_TIME_LIMIT
                elif not picks:
                    total.status, total.reason = STATUS_INFEASIBLE, res.reason
                break
            pick = res.designs[0]
            if res.status == STATUS_TIME_LIMIT:
                picks.append(pick)
                total.status = STATUS_TIME_LIMIT
                break
            pool, complete = res.designs, len(res.designs) < want
        picks.append(pick)
        excluded |= design_parts(pick, distinct)
    total.designs = picks
    if total.status == STATUS_OPTIMAL and picks:
        total.bound = picks[0].value
    return total


def shortlist_search(study: Study, count: int, distinct: str | None = None, objective: str | None = None,
                     time_limit_s: float | None = None) -> SearchResult:
    """The shortlist's designs, best first (see the module docstring for each ``distinct`` rule)."""
    if distinct in GREEDY:
        return greedy_distinct(study, count, distinct, objective, time_limit_s)
    return search(study.parts, objective=objective, count=count, per_motor=1 if distinct == "motor" else None,
                  allowed=study.allowed, time_limit_s=time_limit_s)


# ----------------------------------------------------------------------------------- bill of materials

def bom_lines(rec: dict, vehicles: int = 1) -> list[dict]:
    """Order lines of a design record: one per part and axle; a part fitted on both axles of a two-unit
    design (e.g. ``same_unit``) is one line with quantity 2 per vehicle and ``axle`` "both"."""
    merged: dict = {}
    two = rec.get("motor") is None and len(rec.get("units") or ()) > 1
    for key, p in rec["parts"].items():
        kind = key.split("_")[-1]
        axle = p.get("axle") if two else (rec["units"][0]["axle"] if kind != "tyre" and rec.get("units") else None)
        ident = (kind, p["part"])
        if ident in merged:
            line = merged[ident]
            line["quantity_per_vehicle"] += int(p["quantity"])
            line["item"], line["axle"] = f"{kind} (both axles)", "both"
            continue
        merged[ident] = {"item": f"{axle} {kind}" if two and axle else kind, "part": p["part"],
                         "supplier": p["supplier"], "quantity_per_vehicle": int(p["quantity"]),
                         "unit_cost": p["unit_cost"], "lead_time_weeks": p["lead_time_weeks"], "axle": axle}
    lines = []
    for line in merged.values():
        qty = line["quantity_per_vehicle"] * vehicles
        lines.append({"item": line["item"], "part": line["part"], "supplier": line["supplier"],
                      "quantity_per_vehicle": line["quantity_per_vehicle"], "quantity": qty,
                      "unit_cost": line["unit_cost"], "extended_cost": clean(line["unit_cost"] * qty),
                      "lead_time_weeks": line["lead_time_weeks"], "axle": line["axle"]})
    return lines


def bill_of_materials(rec: dict, rank: int, vehicles: int = 1) -> dict:
    """Bill of materials of one verified design record for ``vehicles`` vehicles.

    Lines (`bom_lines`): motor, reducer (per axle in a two-unit design), tyre with supplier, quantity
    per vehicle (tyres: tyre_count; a unit part on both axles: 2), total quantity, unit and extended
    cost and lead time; totals; key performance figures; the smallest margin over the requirements
    and part-rating checks [%] and its name. Two-unit designs have null ``motor``, ``reducer`` and
    ``ratio`` and list their ``units``.
    """
    lines = bom_lines(rec, vehicles)
    margin, name = smallest_margin(rec["requirements"] + rec["checks"])
    reducer = rec["parts"].get("reducer")
    out = {
        "rank": rank, "motor": rec["motor"], "reducer": rec["reducer"], "tyre": rec["tyre"],
        "ratio": reducer.get("ratio") if reducer else None, "vehicles": vehicles, "lines": lines,
        "cost_per_vehicle": rec["cost"], "extended_cost": clean(rec["cost"] * vehicles),
        "lead_time_weeks": rec["lead_time_weeks"],
        **{k: rec["performance"][k] for k in PERFORMANCE_COLUMNS}, "mass_kg": rec["mass_kg"],
        "smallest_margin_pct": margin, "smallest_margin_name": name,
    }
    out["units"] = rec.get("units")
    return out


def unit_text(b: dict, kind: str, field: str = "part") -> str:
    """The motor or reducer cell of a BOM design: the part id (single axle), or per axle for two units.

    ``field``: "part" or "supplier".
    """
    if b.get(kind) is not None or not b.get("units"):
        if field == "part":
            return b[kind]
        return next(ln["supplier"] for ln in b["lines"] if ln["item"] == kind)
    out = []
    for ln in b["lines"]:
        if ln["item"].split(" ")[0] in ("front", "rear") and ln["item"].endswith(kind):
            out.append(f"{ln['axle']}: {ln[field]}")
        elif ln["item"].startswith(kind) and ln["axle"] == "both":
            out.append(f"both: {ln[field]}")
    return ", ".join(out)


def shortlist(study: Study, count: int, distinct: str | None = None, vehicles: int = 1,
              time_limit_s: float | None = None, objective: str | None = None) -> dict:
    """The shortlist as a JSON-ready result: the `selector solve` contract plus ``bom`` and ``options``.

    Parameters
    ----------
    study : from `open_shortlist_study` or `api.open_study`
    count : designs wanted [-]
    distinct : "motor" | "reducer" | "tyre" | "none" | None (None: the problem's [procurement] distinct)
    vehicles : vehicles to buy for; multiplies quantities and extended costs [-]
    time_limit_s : wall-clock limit of the whole search [s]
    objective : override of the problem's objective
    """
    if int(count) < 1:
        raise InputError(f"count {count}: must be >= 1.")
    if int(vehicles) < 1:
        raise InputError(f"vehicles {vehicles}: must be >= 1.")
    rule = resolve_distinct(study, distinct)
    res = shortlist_search(study, int(count), rule, objective, time_limit_s)
    proc = study.parts.problem.procurement
    options = {"count": int(count), "found": len(res.designs), "distinct": rule, "distinct_rule": DISTINCT_RULES[rule],
               "avoid_suppliers": list(proc.avoid_suppliers), "max_lead_time_weeks": clean(proc.max_lead_time_weeks),
               "vehicles": int(vehicles), "time_limit_s": time_limit_s}
    if rule == "motor" and study.parts.two_units:
        options["distinct_rule"] = TWO_UNIT_MOTOR_RULE
    out = result_dict(study, res)
    out["options"] = options
    out["bom"] = [bill_of_materials(rec, n, int(vehicles)) for n, rec in enumerate(out["designs"], 1)]
    return out


# ----------------------------------------------------------------------------------- tables

def _design_name(b: dict) -> str:
    if b.get("motor") is None and b.get("units"):
        return " | ".join(f"{u['axle']}: {u['motor']} + {u['reducer']}" for u in b["units"]) + f" | tyre {b['tyre']}"
    return f"{b['motor']} + {b['reducer']} + {b['tyre']}"


def shortlist_rows(result: dict) -> list[list]:
    """One row per design, columns `SHORTLIST_COLUMNS` (two-unit designs: motor and reducer cells per axle)."""
    rows = []
    for b in result["bom"]:
        tyre = next(ln for ln in b["lines"] if ln["item"] == "tyre")
        rows.append([b["rank"], unit_text(b, "motor"), unit_text(b, "motor", "supplier"), unit_text(b, "reducer"),
                     unit_text(b, "reducer", "supplier"), b["ratio"], b["tyre"], tyre["supplier"],
                     tyre["quantity_per_vehicle"],
                     b["cost_per_vehicle"], b["vehicles"], b["extended_cost"], b["lead_time_weeks"],
                     *[b[k] for k in PERFORMANCE_COLUMNS], b["mass_kg"], b["smallest_margin_pct"],
                     b["smallest_margin_name"]])
    return rows


def bom_rows(result: dict) -> list[list]:
    """One row per design and part (order lines), columns `BOM_COLUMNS`."""
    rows = []
    for b in result["bom"]:
        for line in b["lines"]:
            rows.append([b["rank"], _design_name(b), line["item"], line["part"], line["supplier"],
                         line["quantity_per_vehicle"], b["vehicles"], line["quantity"], line["unit_cost"],
                         line["extended_cost"], line["lead_time_weeks"], b["cost_per_vehicle"], b["extended_cost"],
                         b["lead_time_weeks"], *[b[k] for k in PERFORMANCE_COLUMNS], b["mass_kg"],
                         b["smallest_margin_pct"], b["smallest_margin_name"], CAUTION])
    return rows


def header_rows(result: dict, problem=None) -> list[list]:
    """The "Header" sheet: problem, date, objective, requirements, filters and the caution."""
    o = result["options"]
    rows = [["problem", result["problem"]], ["problem_file", result.get("problem_file")],
            ["date", date.today().isoformat()], ["selector_version", result.get("selector_version")],
            ["status", result["status"]],
            ["objective", f"minimize {result['objective']['minimize']} [{result['objective']['unit']}]"]]
    if problem is not None:
        for key, value in vars(problem.requirements).items():
            if value is not None:
                rows.append([f"requirement {key}", value])
    rows += [["count", o["count"]], ["found", o["found"]], ["distinct", o["distinct"] or "none"],
             ["distinct_rule", o["distinct_rule"]],
             ["avoid_suppliers", ", ".join(o["avoid_suppliers"]) or "none"],
             ["max_lead_time_weeks", o["max_lead_time_weeks"] if o["max_lead_time_weeks"] is not None else "none"],
             ["vehicles", o["vehicles"]]]
    rows += [["procurement_filter", note] for note in result["search"].get("procurement_filters", [])]
    if result.get("reason"):
        rows.append(["reason", result["reason"]])
    rows.append(["caution", CAUTION])
    return rows


def write_shortlist(result: dict, path, study: Study, option: str = "--out") -> str:
    """Write the shortlist to ``path`` (.csv: the BOM rows; .xlsx: Header, Shortlist, BOM sheets).

    The problem file and the catalogues are protected: a path resolving to one of them is refused.
    Returns the absolute path written.
    """
    protected = shortlist_inputs(study)
    fmt = output_format(path, option)
    if fmt == "csv":
        return str(write_csv(path, Sheet("BOM", BOM_COLUMNS, bom_rows(result)), protected, option))
    sheets = [Sheet("Header", ["item", "value"], header_rows(result, study.parts.problem)),
              Sheet("Shortlist", SHORTLIST_COLUMNS, shortlist_rows(result)),
              Sheet("BOM", BOM_COLUMNS, bom_rows(result))]
    return str(write_xlsx(path, sheets, protected, option))


def shortlist_inputs(study: Study) -> list:
    """The study's input files (never to be overwritten)."""
    p = study.parts.problem
    return [p.path, *p.catalog_paths.values()]

