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

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "benchmarks"))
from baseline import baseline_search  # noqa: E402

SEEDS = range(60)


def _disagreement(study, objective: str, seed: int) -> tuple[bool, str | None]:
    """(enumeration finds a design, what differs between the baseline and enumeration or None)."""
    parts = study.parts
    ref = enumerate_designs(parts, objective, count=1)
    got = baseline_search(parts, objective)
    if not ref:
        return False, None if got is None else f"seed {seed} {objective}: baseline {got}, enumeration infeasible"
    if got is None or got.key != ref[0].key or not math.isclose(got.value, ref[0].value, rel_tol=1e-9):
        return True, f"seed {seed} {objective}: baseline {got}, enumeration {ref[0]}"
    return True, None


@pytest.mark.parametrize("objective", ["cost", "mass", "accel_time"])
def test_baseline_agrees_with_enumeration(tmp_path, objective):
    """60 seeded single-speed studies per objective: the same optimum (design and value) or both infeasible.

    Enumeration is the oracle; the engine's own agreement with enumeration is tested on its own
    generated studies (test_engine_property.py, test_engine_layouts.py), so it is not re-run here.
    """
    bad, outcomes = [], set()
    for seed in SEEDS:
        study = random_study(7000 + seed, tmp_path / f"s{seed}", sizes=((3, 10), (3, 8), (3, 8)),
                             objective=objective)
        if objective == "accel_time" and study.parts.problem.requirements.accel_to_kmh is None:
            pytest.fail("the generator must state accel_to_kmh for the accel_time objective")
        feasible, why = _disagreement(study, objective, seed)
        outcomes.add(feasible)
        bad += [why] if why else []
    assert not bad, f"{len(bad)} disagreement(s):\n" + "\n".join(bad)
    # both outcomes among the studies (else the comparison would be one-sided)
    assert outcomes == {True, False}


def test_baseline_with_multi_speed_gearboxes(tmp_path):
    """20 studies with mixed single- and multi-speed reducers: the baseline's bounds hold for every gear."""
    bad = []
    for seed in range(20):
        objective = ("cost", "mass", "accel_time")[seed % 3]
        study = random_study(7500 + seed, tmp_path / f"s{seed}", sizes=((3, 8), (3, 8), (3, 6)),
                             objective=objective, gearbox_share=0.4)
        bad += [why for why in [_disagreement(study, objective, seed)[1]] if why]
    assert not bad, f"{len(bad)} disagreement(s):\n" + "\n".join(bad)
