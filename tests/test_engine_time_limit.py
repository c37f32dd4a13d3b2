"""The time limit of the single-axle search (`search(time_limit_s=...)`) inside its long loops.

The search checks the deadline inside the sum-order probe (cost and mass), between blocks and inside
a block's chunks (accel_time), and stops with status `time_limit`, the best designs found, a proved
lower bound and the gap. These tests make the deadline pass deterministically (a limit far below
the set-up time, or a patched clock check that expires at a given call), never assert a duration,
and check the outcome against exhaustive enumeration with the exact evaluator (the oracle of the
engine tests): the bound is at most the true optimum, at most the incumbent, the gap is
(best - bound) / best, and every reported design passes the independent re-check.
"""

from __future__ import annotations

import pytest

from selector.engine import evaluate
from selector.engine import search as engine
from selector.engine.best_first import SingleAxleSearch
from selector.engine.parts import PartTables
from selector.engine.verify import verify_designs
from selector.synthetic import synthetic_study

TINY_S = 1e-9
"""A time limit below the search's own set-up time: the deadline has passed at every check [s]."""


def _parts(objective, sizes=(22, 20, 23), seed=1):
    return PartTables.build(*synthetic_study(*sizes, seed=seed, objective=objective))


def _check_stopped(parts, res, objective):
    assert res.status == engine.STATUS_TIME_LIMIT, res.status
    enum = evaluate.enumerate_designs(parts, objective, count=1)
    assert enum, "the synthetic study is feasible"
    optimum = enum[0][0]
    assert res.bound is not None
    assert res.bound <= optimum * (1 + 1e-9), (res.bound, optimum)  # a proved lower bound
    if res.designs:
        best = res.designs[0].value
        assert res.bound <= best * (1 + 1e-12)
        assert best >= optimum * (1 - 1e-9)  # the incumbent is a real design: never better than the optimum
        assert res.gap == pytest.approx(abs(best - res.bound) / best, rel=1e-12)
        verify_designs(parts, res.designs, objective)
    else:
        assert res.gap is None


@pytest.mark.parametrize("objective", ["cost", "mass"])
def test_probe_stops_at_a_tiny_time_limit(objective):
    # count = 40: the probe needs more than its first batch, so it meets the (passed) deadline
    parts = _parts(objective)
    full = engine.search(parts, objective, count=40)
    assert full.status == engine.STATUS_OPTIMAL and full.stats["probe"] > 512
    res = engine.search(parts, objective, count=40, time_limit_s=TINY_S)
    _check_stopped(parts, res, objective)
    assert res.designs, "the probe evaluates one batch before it looks at the clock"
    assert res.stats["probe"] < full.stats["probe"]


def test_block_search_stops_at_a_tiny_time_limit():
    parts = _parts("accel_time")
    res = engine.search(parts, "accel_time", time_limit_s=TINY_S)
    _check_stopped(parts, res, "accel_time")
    assert res.stats["blocks"] == 0  # stopped before the first block: the bound is the least motor bound


def test_block_cut_short_inside_its_chunks(monkeypatch):
    # the clock check expires once designs have been evaluated: the first block's first chunk runs,
    # the deadline then stops the block between chunks (its next chunk's key value joins the bound)
    def expired(self):
        return self.stats["evaluated"] > 0

    monkeypatch.setattr(SingleAxleSearch, "expired", expired)
    monkeypatch.setattr("selector.engine.best_first_block.FIRST_CHUNK_TIME", 4)
    parts = _parts("accel_time", sizes=(30, 25, 25), seed=2)
    res = engine.search(parts, "accel_time", time_limit_s=3600.0)
    _check_stopped(parts, res, "accel_time")
    assert res.stats["blocks"] == 1
    assert 0 < res.stats["evaluated"] <= 4


def test_two_unit_chunk_loop_stops_at_the_deadline(monkeypatch, tmp_path):
    # A two-unit search whose clock check expires once designs have been evaluated: a block's chunk loop stops
    # between chunks (found by fuzzing: an energy study ran 19 s on a 1 s limit), the status is time_limit and
    # the bound includes the least bound of the chunks left; checked against enumeration.
    import numpy as np

    from selector.engine import two_units
    from selector.synthetic import _all_keys, random_study

    st = random_study(8100, tmp_path, sizes=(5, 5, 3), layout="both", objective="cost", requirement_share=0.5)
    monkeypatch.setattr(two_units.TwoUnitSearch, "expired", lambda self: self.stats["evaluated"] > 0)
    monkeypatch.setattr(two_units, "FIRST_CHUNK", 4)
    res = engine.search(st.parts, "cost", time_limit_s=3600.0)
    assert res.status == engine.STATUS_TIME_LIMIT and res.bound is not None
    assert 0 < res.stats["evaluated"] <= 4
    m = evaluate.evaluate(st.parts, _all_keys(st.parts))
    ok = evaluate.feasible(st.parts, m, "cost")
    optimum = float(np.min(m["cost"][ok]))
    assert res.bound <= optimum * (1 + 1e-9)
    if res.designs:
        assert res.designs[0].value >= optimum * (1 - 1e-9)
        verify_designs(st.parts, res.designs, "cost")
