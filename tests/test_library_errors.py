"""Library calls with wrong arguments raise selector's own errors naming the parameter; messages that
could mislead are precise (issue: reliability)."""

from __future__ import annotations

import pytest
from hostile import ROOT, assert_clean_answer, make_study, run_cli, set_cell

from selector.api import open_study, simulate, solve
from selector.errors import ArgumentError, InputError
from selector.inputs import Procurement

PROBLEM = ROOT / "problems" / "parcel_van.toml"


@pytest.fixture(scope="module")
def study():
    return open_study(PROBLEM)


def test_string_avoid_suppliers_is_refused_not_split_into_letters():
    with pytest.raises(ArgumentError, match=r"avoid_suppliers='Acme'\): avoid_suppliers must be a list"):
        Procurement(avoid_suppliers="Acme")
    assert Procurement(avoid_suppliers=["Acme"]).avoid_suppliers == ("Acme",)


def test_shortlist_string_avoid_suppliers():
    from selector.studies.shortlist import open_shortlist_study

    with pytest.raises(ArgumentError, match="avoid_suppliers"):
        open_shortlist_study(PROBLEM, avoid_suppliers="Acme")


@pytest.mark.parametrize("call, name", [
    (lambda s: open_study(42), "path"),
    (lambda s: open_study(PROBLEM, procurement={"avoid_suppliers": ["x"]}), "procurement"),
    (lambda s: solve("study"), "study"),
    (lambda s: solve(s, count="2"), "count"),
    (lambda s: solve(s, count=0), "count"),
    (lambda s: solve(s, time_limit_s=-1), "time_limit_s"),
    (lambda s: solve(s, objective="speed"), "objective"),
    (lambda s: simulate(s, 3, "x", "y"), "motor"),
    (lambda s: Procurement(max_lead_time_weeks="4"), "max_lead_time_weeks"),
    (lambda s: Procurement(distinct="colour"), "distinct"),
])
def test_wrong_arguments_name_the_parameter(study, call, name):
    with pytest.raises(ArgumentError, match=rf"\({name}=") as info:
        call(study)
    assert isinstance(info.value, (InputError, TypeError))


@pytest.mark.parametrize("cell, advice", [
    ("2,600", "Write 2600 (if the comma separates thousands) or 2.600 (if it is a decimal comma)"),
    ("1,200,000", "Write 1200000 (no thousands separators)"),
])
def test_thousands_separator_advice(tmp_path, cell, advice):
    # "2,600" must not be advised as 2.600 alone (a 1000x error if followed)
    problem = make_study(tmp_path)
    set_cell(tmp_path, "motors", "max_speed_rpm", cell)
    proc = run_cli("check", problem)
    assert_clean_answer(proc, codes=(2,))
    assert advice in proc.stderr


@pytest.mark.parametrize("call, name", [
    (lambda s, p: p.solve(s, objective="energy"), "objective"),  # the study has no [energy] table
    (lambda s, p: p.solve(s, objective=["cost"]), "objective"),
    (lambda s, p: p.solve(s, diagnose="yes"), "diagnose"),
    (lambda s, p: p.explain(str(PROBLEM)), "study"),
    (lambda s, p: p.frontier(None), "study"),
    (lambda s, p: p.frontier(s, axis=["cost"]), "axis"),
    (lambda s, p: p.shortlist({}, 2), "study"),
    (lambda s, p: p.sweep(str(PROBLEM), {"requirements.top_speed_kmh": [140]}), "study"),
    (lambda s, p: p.sweep(s, None), "vary"),
    (lambda s, p: p.sweep(s, 1), "vary"),
    (lambda s, p: p.sweep(s, [b"x"]), "vary"),
])
def test_public_api_wrong_arguments_name_the_parameter(study, call, name):
    # found by fuzzing the Python API: these raised raw AttributeError / TypeError from deep inside
    import selector

    with pytest.raises(ArgumentError, match=rf"\({name}="):
        call(study, selector)


def test_count_has_an_upper_limit(study):
    import selector

    for call in (lambda: selector.solve(study, count=10**30), lambda: selector.shortlist(study, 10**30)):
        with pytest.raises(InputError, match=r"^count 10+: must be at most 100,000"):
            call()


def test_from_frames_base_dir_must_be_a_path():
    import pandas as pd

    import selector

    frames = {k: pd.read_csv(ROOT / "catalogs" / f"{k}.csv", comment="#") for k in ("motors", "reducers", "tyres")}
    with pytest.raises(ArgumentError, match=r"\(base_dir=5\)"):
        selector.Study.from_frames(**frames, problem={"vehicle": {}}, base_dir=5)
