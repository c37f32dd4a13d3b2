"""The benchmark's hand-written baseline search (benchmarks/baseline.py) finds the same optimum as the
engine and as plain enumeration on random studies (invented data, `selector.synthetic`).

The benchmark compares the engine's speed against this baseline, so the baseline must be exact;
enumeration (`evaluate.enumerate_designs`) is the oracle. Small sizes only (no timing here).
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import pytest
from generators import random_study

from selector.engine.evaluate import enumerate_designs
from selector.engine.search import search

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "benchmarks"))
from baseline import baseline_search  # noqa: E402

SEEDS = range(60)


@pytest.mark.parametrize("objective", ["cost", "mass", "accel_time"])
@pytest.mark.parametrize("seed", SEEDS)
def test_baseline_agrees_with_enumeration_and_engine(tmp_path, seed, objective):
    study = random_study(7000 + seed, tmp_path, sizes=((3, 10), (3, 8), (3, 8)), objective=objective)
    parts = study.parts
    if objective == "accel_time" and parts.problem.requirements.accel_to_kmh is None:
        pytest.fail("the generator must state accel_to_kmh for the accel_time objective")
    ref = enumerate_designs(parts, objective, count=1)
    got = baseline_search(parts, objective)
    eng = search(parts, objective)
    if not ref:
        assert got is None
        assert eng.status == "infeasible"
        return
    assert got is not None
    assert got.key == ref[0].key
    assert math.isclose(got.value, ref[0].value, rel_tol=1e-9)
    assert eng.status == "optimal" and eng.designs[0].key == ref[0].key


def test_baseline_sees_feasible_and_infeasible_cases(tmp_path):
    """The random studies above include both outcomes (else the comparison would be one-sided)."""
    outcomes = set()
    for seed in range(20):
        study = random_study(7000 + seed, tmp_path / str(seed), sizes=((3, 10), (3, 8), (3, 8)), objective="cost")
        outcomes.add(baseline_search(study.parts, "cost") is None)
    assert outcomes == {True, False}


@pytest.mark.parametrize("seed", range(20))
def test_baseline_with_multi_speed_gearboxes(tmp_path, seed):
    """Mixed single- and multi-speed reducers: the baseline's bounds hold for every gear."""
    objective = ("cost", "mass", "accel_time")[seed % 3]
    study = random_study(7500 + seed, tmp_path, sizes=((3, 8), (3, 8), (3, 6)), objective=objective,
                         gearbox_share=0.4)
    ref = enumerate_designs(study.parts, objective, count=1)
    got = baseline_search(study.parts, objective)
    assert (got is None) == (not ref)
    if ref:
        assert got.key == ref[0].key
