"""The MILP round of the single-axle search (`best_first_milp.MilpRound`), forced on every block step
with ``milp="always"``: the answers must equal exhaustive enumeration (`evaluate.enumerate_designs`,
the oracle) on random invented studies, and the round must actually run. In normal use the round is
consulted only late in long searches (DEVELOPERS.md, "The optimiser"), so without this test it would
go unexercised."""

from __future__ import annotations

import numpy as np
from generators import part_ids, random_study

from selector.engine import evaluate
from selector.engine import search as engine
from selector.requirements import REL_TOL


def test_forced_milp_rounds_give_the_enumerated_optimum(tmp_path):
    rounds = 0
    for seed in range(40, 64):
        study = random_study(seed, tmp_path / f"s{seed}", objective=("cost", "mass", "accel_time")[seed % 3])
        parts, objective = study.parts, study.objective
        enum = evaluate.enumerate_designs(parts, objective, count=1)
        res = engine.search(parts, count=1, milp="always")
        rounds += res.stats.get("milp", 0)
        if not enum:
            assert res.status == engine.STATUS_INFEASIBLE and not res.designs, seed
            continue
        assert res.status == engine.STATUS_OPTIMAL, (seed, res.status)
        best, got = enum[0], res.designs[0]
        assert np.isclose(got.value, best[0], rtol=REL_TOL, atol=0.0), (seed, got.value, best[0])
        assert part_ids(parts, got) == part_ids(parts, best), seed
    assert rounds > 0  # construction: the round ran on some of these studies
