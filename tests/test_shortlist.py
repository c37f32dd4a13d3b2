"""Shortlist: the listed designs equal exhaustive enumeration for every diversity rule and filter,
the JSON carries a consistent bill of materials, exports read back (pandas, openpyxl) give the same
rows as the JSON, and every demo problem's shortlist starts with `selector solve`'s answer.

The oracle is the exhaustive evaluator (`evaluate.enumerate_designs`), which checks every motor x
reducer x tyre triple with the physics and shares nothing with the MILP. Studies are random and
invented (tests/generators.py, seeded); the demo problems are invented and illustrative.
"""

from __future__ import annotations

import json
import math
from datetime import date
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from generators import random_study

from selector.api import open_study
from selector.cli import run
from selector.engine.evaluate import enumerate_designs, order_best
from selector.errors import InputError
from selector.records import CAUTION
from selector.studies import shortlist as sl

PROBLEMS = sorted((Path(__file__).parent.parent / "problems").glob("*.toml"))
SEEDS = range(10)
COUNT = 5
POS = {"reducer": 2, "tyre": 3}


# ------------------------------------------------------------------------------------ the oracle

def allowed_positions(parts, avoid=(), max_lead=None):
    """Allowed positions per catalogue, computed here from the catalogue arrays (not via api)."""
    avoid = {a.casefold() for a in avoid}
    out = {}
    for kind, arr in (("motors", parts.motors), ("reducers", parts.reducers), ("tyres", parts.tyres)):
        keep = [n for n in range(len(arr.part))
                if str(arr.supplier[n]).casefold() not in avoid
                and (max_lead is None or arr.lead_time_weeks[n] <= max_lead)]
        out[kind] = np.array(keep, dtype=np.int64)
    return out


def expected_shortlist(parts, objective, count, distinct, allowed):
    """The shortlist by definition, from exhaustive enumeration."""
    m, r, t = allowed["motors"], allowed["reducers"], allowed["tyres"]
    if distinct is None:
        return enumerate_designs(parts, objective, count, motors=m, reducers=r, tyres=t)
    if distinct == "motor":
        per_motor = [d for i in m for d in enumerate_designs(parts, objective, 1, motors=[i], reducers=r, tyres=t)]
        if not per_motor:
            return []
        vals = np.array([d[0] for d in per_motor])
        keys = np.array([d[1:] for d in per_motor], dtype=np.int64)
        return [per_motor[b] for b in order_best(vals, keys, count)]
    # greedy: design n is the best design whose reducer (tyre) differs from designs 1..n-1
    pos, out, used = POS[distinct], [], set()
    while len(out) < count:
        sets = [m, r, t]
        sets[pos - 1] = np.array([x for x in sets[pos - 1] if x not in used], dtype=np.int64)
        if sets[pos - 1].size == 0:
            break
        best = enumerate_designs(parts, objective, 1, motors=sets[0], reducers=sets[1], tyres=sets[2])
        if not best:
            break
        out.append(best[0])
        used.add(best[0][pos])
    return out


def same_designs(got, want):
    assert [d[1:] for d in got] == [d[1:] for d in want]
    for g, w in zip(got, want, strict=True):
        assert math.isclose(g[0], w[0], rel_tol=1e-9)


@pytest.fixture(scope="module")
def studies(tmp_path_factory):
    out = {}
    for seed in SEEDS:
        sizes = ((3, 8), (3, 6), (3, 6)) if seed % 2 else ((6, 10), (4, 8), (4, 8))
        out[seed] = random_study(seed, tmp_path_factory.mktemp(f"s{seed}"), sizes=sizes)
    return out


# ------------------------------------------------------------------------------------ exactness

@pytest.mark.slow  # randomised / many-study oracle check: run by CI, skipped by -m "not slow"
@pytest.mark.parametrize("distinct", [None, "motor", "reducer", "tyre"])
def test_shortlist_equals_enumeration(studies, distinct, monkeypatch):
    calls = []
    real = sl.search

    def counting(*args, **kwargs):
        calls.append(kwargs.get("count"))
        return real(*args, **kwargs)

    monkeypatch.setattr(sl, "search", counting)
    listed = reused = fresh = 0
    for seed, s in studies.items():
        study = open_study(s.problem_path)
        calls.clear()
        got = sl.shortlist_search(study, COUNT, distinct)
        want = expected_shortlist(study.parts, s.objective, COUNT, distinct, allowed_positions(study.parts))
        same_designs(got.designs, want)
        assert got.status == ("optimal" if want else "infeasible"), seed
        if distinct in POS:
            assert len({d[POS[distinct]] for d in got.designs}) == len(got.designs)
            # later designs come from an earlier exact top-k list when provably equal to a fresh search
            reused += len(got.designs) > len(calls)
            fresh += len(calls) > 1
        if distinct == "motor":
            assert len({d[1] for d in got.designs}) == len(got.designs)
        listed += len(got.designs)
    assert listed >= 2 * COUNT, "the random studies must give non-trivial shortlists"
    if distinct in POS:
        assert reused and fresh, "both greedy paths (reuse, fresh search) must run"


@pytest.mark.parametrize("distinct", [None, "motor", "reducer", "tyre"])
def test_shortlist_with_procurement_filters_equals_enumeration(studies, distinct):
    filtered = 0
    for _seed, s in list(studies.items())[:6]:
        parts = s.parts
        best = enumerate_designs(parts, s.objective, 1)
        if not best:
            continue
        # avoid the optimum's motor supplier and cap lead times at the median: both exclude parts
        avoid = (str(parts.motors.supplier[best[0][1]]).upper(),)  # matching ignores case
        lead = float(np.median(np.concatenate([parts.motors.lead_time_weeks, parts.reducers.lead_time_weeks,
                                               parts.tyres.lead_time_weeks])))
        for a, w in ((avoid, None), (avoid, lead)):
            study = sl.open_shortlist_study(s.problem_path, a, w)
            allowed = allowed_positions(study.parts, a, w)
            for kind in allowed:
                assert np.array_equal(study.allowed[kind], allowed[kind])
            got = sl.shortlist_search(study, COUNT, distinct)
            want = expected_shortlist(study.parts, s.objective, COUNT, distinct, allowed)
            same_designs(got.designs, want)
            for _, i, j, k in got.designs:
                assert str(parts.motors.supplier[i]).casefold() not in {x.casefold() for x in a}
                if w is not None:
                    assert max(parts.motors.lead_time_weeks[i], parts.reducers.lead_time_weeks[j],
                               parts.tyres.lead_time_weeks[k]) <= w
            filtered += 1
    assert filtered >= 3


def test_problem_procurement_table_is_used_and_overridden(tmp_path):
    s = random_study(9, tmp_path)
    text = s.problem_path.read_text()
    suppliers = sorted({str(x) for x in s.parts.motors.supplier})
    s.problem_path.write_text(text + f'\n[procurement]\ndistinct = "tyre"\navoid_suppliers = ["{suppliers[0]}"]\n'
                              'max_lead_time_weeks = 5\n')
    # command-line filters replace the problem's
    other = sl.open_shortlist_study(s.problem_path, [suppliers[-1]], 7.0)
    want_allowed = allowed_positions(other.parts, [suppliers[-1]], 7.0)
    assert all(np.array_equal(other.allowed[k], want_allowed[k]) for k in want_allowed)
    study = open_study(s.problem_path)
    want_allowed = allowed_positions(study.parts, [suppliers[0]], 5.0)
    assert all(np.array_equal(study.allowed[k], want_allowed[k]) for k in want_allowed)
    assert sl.resolve_distinct(study, None) == "tyre"
    assert sl.resolve_distinct(study, "motor") == "motor"
    assert sl.resolve_distinct(study, "none") is None
    res = sl.shortlist(study, 3)
    want = expected_shortlist(study.parts, s.objective, 3, "tyre", want_allowed)
    assert len(want) == 3
    assert [(d["motor"], d["reducer"], d["tyre"]) for d in res["designs"]] == [
        (study.parts.motors.part[i], study.parts.reducers.part[j], study.parts.tyres.part[k]) for _, i, j, k in want]
    assert res["options"]["distinct"] == "tyre"


def test_unknown_supplier_warns(studies):
    s = studies[1]
    with pytest.warns(sl.ShortlistWarning, match="no catalogue lists this supplier"):
        sl.open_shortlist_study(s.problem_path, ["No Such Supplier Ltd"])


# ------------------------------------------------------------------------------------ JSON and BOM

def test_json_contract_and_bill_of_materials(studies, capsys):
    s = next(s for s in studies.values() if len(enumerate_designs(s.parts, s.objective, 3)) == 3)
    assert run(["shortlist", str(s.problem_path), "--count", "3", "--vehicles", "5", "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert run(["solve", str(s.problem_path), "--format", "json"]) == 0
    solved = json.loads(capsys.readouterr().out)
    # the solve contract, and its first design is solve's answer
    for key in ("status", "objective", "designs", "bound", "gap", "binding_rule", "search", "caution"):
        assert key in res
    assert res["status"] == "optimal"
    assert {k: res["designs"][0][k] for k in ("motor", "reducer", "tyre", "cost", "mass_kg")} == {
        k: solved["designs"][0][k] for k in ("motor", "reducer", "tyre", "cost", "mass_kg")}
    assert res["objective"]["value"] == solved["objective"]["value"]
    assert res["options"] == {"count": 3, "found": 3, "distinct": None, "distinct_rule": sl.DISTINCT_RULES[None],
                              "avoid_suppliers": [], "max_lead_time_weeks": None, "vehicles": 5,
                              "time_limit_s": None}
    tyre_count = s.problem.vehicle.tyre_count
    assert len(res["bom"]) == len(res["designs"]) == 3
    for n, (b, d) in enumerate(zip(res["bom"], res["designs"], strict=True), 1):
        assert b["rank"] == n and (b["motor"], b["reducer"], b["tyre"]) == (d["motor"], d["reducer"], d["tyre"])
        qty = {ln["item"]: ln["quantity_per_vehicle"] for ln in b["lines"]}
        assert qty == {"motor": 1, "reducer": 1, "tyre": tyre_count}
        for ln in b["lines"]:
            assert ln["quantity"] == 5 * ln["quantity_per_vehicle"]
            assert math.isclose(ln["extended_cost"], ln["unit_cost"] * ln["quantity"], rel_tol=1e-12)
            assert ln["part"] == d[ln["item"]]
        assert math.isclose(sum(ln["extended_cost"] for ln in b["lines"]), b["extended_cost"], rel_tol=1e-9)
        assert math.isclose(b["extended_cost"], 5 * d["cost"], rel_tol=1e-9)
        assert b["lead_time_weeks"] == max(ln["lead_time_weeks"] for ln in b["lines"])
        for key in sl.PERFORMANCE_COLUMNS:
            assert b[key] == d["performance"][key]
        margins = [r["margin_pct"] for r in d["requirements"] + d["checks"] if r["margin_pct"] is not None]
        assert b["smallest_margin_pct"] == min(margins)
        assert all(r["met"] for r in d["requirements"] + d["checks"])
    # best first
    metric = {"cost": "cost", "mass": "mass_kg"}.get(s.objective)
    if metric:
        vals = [d[metric] for d in res["designs"]]
        assert vals == sorted(vals)


def _rows_equal(frame: pd.DataFrame, expected: list[dict]):
    """Rows read back by pandas equal the JSON values (None reads back as an empty cell, NaN)."""
    assert len(frame) == len(expected)
    for n, want in enumerate(expected):
        for key, value in want.items():
            got = frame[key].iloc[n]
            if value is None:
                assert pd.isna(got), (n, key, got)
            elif isinstance(value, float):
                assert math.isclose(float(got), value, rel_tol=1e-12), (n, key, got, value)
            else:
                assert got == value, (n, key, got, value)


def _expected_bom_lines(res):
    out = []
    for b in res["bom"]:
        for ln in b["lines"]:
            out.append({"rank": b["rank"], "design": f"{b['motor']} + {b['reducer']} + {b['tyre']}",
                        "item": ln["item"], "part": ln["part"], "supplier": ln["supplier"],
                        "quantity_per_vehicle": ln["quantity_per_vehicle"], "vehicles": b["vehicles"],
                        "quantity": ln["quantity"], "unit_cost": ln["unit_cost"], "extended_cost": ln["extended_cost"],
                        "lead_time_weeks": ln["lead_time_weeks"], "design_cost_per_vehicle": b["cost_per_vehicle"],
                        "design_extended_cost": b["extended_cost"], "design_lead_time_weeks": b["lead_time_weeks"],
                        **{k: b[k] for k in sl.PERFORMANCE_COLUMNS}, "mass_kg": b["mass_kg"],
                        "smallest_margin_pct": b["smallest_margin_pct"],
                        "smallest_margin_name": b["smallest_margin_name"]})
    return out


def _expected_designs(res):
    out = []
    for b in res["bom"]:
        sup = {ln["item"]: ln["supplier"] for ln in b["lines"]}
        out.append({"rank": b["rank"], "motor": b["motor"], "motor_supplier": sup["motor"], "reducer": b["reducer"],
                    "reducer_supplier": sup["reducer"], "ratio": b["ratio"], "tyre": b["tyre"],
                    "tyre_supplier": sup["tyre"], "cost_per_vehicle": b["cost_per_vehicle"],
                    "vehicles": b["vehicles"], "extended_cost": b["extended_cost"],
                    "lead_time_weeks": b["lead_time_weeks"], **{k: b[k] for k in sl.PERFORMANCE_COLUMNS},
                    "mass_kg": b["mass_kg"], "smallest_margin_pct": b["smallest_margin_pct"],
                    "smallest_margin_name": b["smallest_margin_name"]})
    return out


@pytest.mark.parametrize("distinct", ["none", "reducer"])
def test_exports_read_back_equal_json(studies, tmp_path, capsys, distinct):
    s = next(s for s in studies.values() if len(enumerate_designs(s.parts, s.objective, 4)) == 4)
    csv_path, xlsx_path = tmp_path / "short list.csv", tmp_path / "shortlist.xlsx"
    args = ["shortlist", str(s.problem_path), "--count", "4", "--distinct", distinct, "--vehicles", "2"]
    assert run(args + ["--format", "json", "--out", str(csv_path)]) == 0
    res = json.loads(capsys.readouterr().out)
    assert run(args + ["--format", "json", "--out", str(xlsx_path)]) == 0
    res2 = json.loads(capsys.readouterr().out)
    assert res2["bom"] == res["bom"]
    assert res["output"] == str(csv_path.resolve())

    frame = pd.read_csv(csv_path)
    assert list(frame.columns) == sl.BOM_COLUMNS
    _rows_equal(frame, _expected_bom_lines(res))

    sheets = pd.read_excel(xlsx_path, sheet_name=None, engine="openpyxl")
    assert list(sheets) == ["Header", "Shortlist", "BOM"]
    assert list(sheets["Shortlist"].columns) == sl.SHORTLIST_COLUMNS
    _rows_equal(sheets["Shortlist"], _expected_designs(res))
    _rows_equal(sheets["BOM"], _expected_bom_lines(res))
    header = dict(zip(sheets["Header"]["item"], sheets["Header"]["value"], strict=True))
    assert header["problem"] == s.problem.name
    assert header["date"] == date.today().isoformat()
    assert header["caution"] == CAUTION
    assert header["distinct"] == distinct
    assert header["vehicles"] == 2
    for key, value in vars(s.problem.requirements).items():
        if value is not None:
            assert math.isclose(header[f"requirement {key}"], value)
    # no temporary files are left beside the outputs
    assert sorted(p.name for p in tmp_path.iterdir()) == ["short list.csv", "shortlist.xlsx"]


def test_table_output_and_infeasible(studies, capsys):
    s = next(s for s in studies.values() if enumerate_designs(s.parts, s.objective, 1))
    assert run(["shortlist", str(s.problem_path), "--count", "2", "--distinct", "motor"]) == 0
    out = capsys.readouterr().out
    assert "bill of materials for 1 vehicle" in out and "Caution" in out
    infeasible = next(s for s in studies.values() if not enumerate_designs(s.parts, s.objective, 1))
    assert run(["shortlist", str(infeasible.problem_path), "--count", "3", "--format", "json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["status"] == "infeasible" and res["designs"] == [] and res["bom"] == [] and res["reason"]


@pytest.mark.parametrize("argv, message", [
    (["--count", "0"], "must be >= 1"),
    (["--count", "2", "--vehicles", "0"], "must be >= 1"),
    (["--count", "2", "--max-lead-time-weeks", "-1"], "must be >= 0"),
    (["--count", "2", "--distinct", "wheel"], "invalid choice"),
    (["--count", "2", "--out", "x.txt"], "not a known output format"),
])
def test_bad_options_exit_2(studies, capsys, argv, message):
    assert run(["shortlist", str(studies[1].problem_path), *argv]) == 2
    assert message in capsys.readouterr().err


def test_library_rejects_bad_counts(studies):
    study = open_study(studies[1].problem_path)
    with pytest.raises(InputError, match="^count"):
        sl.shortlist(study, 0)
    with pytest.raises(InputError, match="^vehicles"):
        sl.shortlist(study, 1, vehicles=0)
    with pytest.raises(InputError, match="distinct"):
        sl.shortlist(study, 1, distinct="wheel")
    with pytest.raises(InputError, match="^max_lead_time_weeks"):
        sl.open_shortlist_study(studies[1].problem_path, (), -2.0)


# ------------------------------------------------------------------------------------ demo problems

SINGLE_AXLE_PROBLEMS = [p for p in PROBLEMS if 'driven_axle = "both"' not in p.read_text(encoding="utf-8")]
"""The demo problems with one drive unit (the per-motor oracle below enumerates single-axle designs;
the two-unit distinct-pair shortlist is tested in test_records_slots.py)."""


@pytest.mark.parametrize("path", SINGLE_AXLE_PROBLEMS, ids=[p.stem for p in SINGLE_AXLE_PROBLEMS])
def test_demo_shortlist_distinct_motor(path, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "tmp").mkdir()
    code = run(["shortlist", str(path), "--count", "10", "--distinct", "motor", "--out", "tmp/shortlist.xlsx",
                "--format", "json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    res = json.loads(out)
    assert run(["solve", str(path), "--format", "json"]) == 0
    solved = json.loads(capsys.readouterr().out)
    first, best = res["designs"][0], solved["designs"][0]
    assert (first["motor"], first["reducer"], first["tyre"]) == (best["motor"], best["reducer"], best["tyre"])
    assert res["objective"]["value"] == solved["objective"]["value"]
    motors = [d["motor"] for d in res["designs"]]
    assert len(set(motors)) == len(motors) <= 10
    # exact: each motor's best design, the ten best of those (exhaustive enumeration per motor)
    study = open_study(path)
    want = expected_shortlist(study.parts, study.parts.problem.objective, 10, "motor", study.allowed)
    assert motors == [str(study.parts.motors.part[d[1]]) for d in want]
    sheets = pd.read_excel(tmp_path / "tmp" / "shortlist.xlsx", sheet_name=None, engine="openpyxl")
    assert list(sheets["Shortlist"]["motor"]) == motors
    assert len(sheets["BOM"]) == 3 * len(motors)
    assert sorted(p.name for p in (tmp_path / "tmp").iterdir()) == ["shortlist.xlsx"]


def test_energy_study_margins_leave_out_rows_without_headroom():
    # Project convention (requirements.NO_HEADROOM): cycle_followed_pct (100 % of 100 %) and range_km
    # (the battery is sized to give it exactly) would make every energy design's smallest margin 0.
    from selector.api import open_study

    res = sl.shortlist(open_study("problems/delivery_van_energy.toml"), 3)
    for d, b in zip(res["designs"], res["bom"], strict=True):
        rows = {r["name"]: r["margin_pct"] for r in d["requirements"] + d["checks"]}
        assert rows["cycle_followed_pct"] == 0.0 and abs(rows["range_km"]) < 1e-6
        others = {k: v for k, v in rows.items() if k not in ("cycle_followed_pct", "range_km") and v is not None}
        name = min(others, key=others.get)
        assert d["smallest_margin_pct"] == others[name] > 0
        assert (b["smallest_margin_pct"], b["smallest_margin_name"]) == (others[name], name)
