"""`engine.sum_order.SumOrderWalk` against brute-force enumeration of every (motor, pair) sum.

The oracle is the full list of sums m[a] + p[b] over valid motors, sorted by numpy. Integer-valued
lists make every sum exact, so the bands can be checked for strict value order; float lists check
the property the proof rests on (`next_value` never exceeds a design not taken).
"""

from __future__ import annotations

import numpy as np
import pytest

from selector.engine.sum_order import SumOrderWalk


def _walk(m, p, valid_all, chunk):
    """A walk whose ``prepare`` reveals ``valid_all`` in chunks of ``chunk`` ranks; returns (walk, log
    of prepared counts)."""
    valid = np.zeros(m.size, dtype=bool)
    state = {"n": 0}

    def prepare():
        a0 = state["n"]
        a1 = min(m.size, a0 + chunk)
        valid[a0:a1] = valid_all[a0:a1]
        state["n"] = a1
        return a1

    return SumOrderWalk(m, p, valid, prepare)


def _case(rng, integer):
    n_m, n_p = int(rng.integers(1, 40)), int(rng.integers(1, 60))
    if integer:  # many exact ties
        m = np.sort(rng.integers(0, 30, n_m)).astype(float)
        p = np.sort(rng.integers(0, 30, n_p)).astype(float)
    else:
        m = np.sort(rng.lognormal(5, 1, n_m))
        p = np.sort(rng.lognormal(4, 1.5, n_p))
    valid = rng.random(n_m) < 0.7
    return m, p, valid


@pytest.mark.parametrize("integer", [True, False])
def test_every_valid_design_once_and_bound_holds(integer):
    rng = np.random.default_rng(11 if integer else 12)
    for _ in range(300):
        m, p, valid_all = _case(rng, integer)
        chunk = int(rng.integers(1, 8))
        walk = _walk(m, p, valid_all, chunk)
        seen = set()
        while True:
            nxt = walk.next_value()
            untaken = [m[a] + p[b] for a in np.flatnonzero(valid_all) for b in range(p.size) if (a, b) not in seen]
            # the proof's bound: no design left below next_value, and it is attained when one is left
            assert nxt == (min(untaken) if untaken else np.inf)
            if not np.isfinite(nxt):
                break
            ranks, pairs = walk.take(int(rng.integers(1, 20)), np.inf)
            assert ranks.size >= 1
            got = set(zip(ranks.tolist(), pairs.tolist(), strict=True))
            assert len(got) == ranks.size and not (got & seen)
            assert valid_all[ranks].all()
            if integer:  # exact sums: the band is the least values left, ties included
                band = m[ranks] + p[pairs]
                assert min(untaken) == band.min()
                assert sum(1 for v in untaken if v <= band.max()) == ranks.size
            seen |= got
        assert seen == {(a, b) for a in np.flatnonzero(valid_all) for b in range(p.size)}
        assert walk.n_taken == len(seen)


def test_limit_and_lazy_preparation():
    # integer values (exact sums): nothing above the limit is taken, and a motor chunk is prepared
    # only once the walk reaches its least value m[a] + p[0]
    rng = np.random.default_rng(13)
    for _ in range(300):
        m, p, valid_all = _case(rng, True)
        walk = _walk(m, p, valid_all, 1)
        limit = float(rng.integers(0, 60))
        taken = []
        while True:
            ranks, pairs = walk.take(int(rng.integers(1, 10)), limit)
            if ranks.size == 0:
                break
            taken.extend((m[ranks] + p[pairs]).tolist())
        assert all(v <= limit for v in taken)
        want = sum(1 for a in np.flatnonzero(valid_all) for b in range(p.size) if m[a] + p[b] <= limit)
        assert len(taken) == want
        nxt = walk.next_value()
        assert nxt > limit
        if walk.prepared < m.size:  # the first unprepared motor lies beyond the limit
            assert m[walk.prepared] + p[0] > limit
        if walk.prepared:  # and no motor was prepared beyond the least value left
            assert m[walk.prepared - 1] + p[0] <= nxt


def test_an_exhausted_walk_takes_nothing_even_without_limit():
    # the probe starts with an infinite limit (no design found yet): once every design is taken,
    # take() must return nothing rather than loop
    m, p = np.array([1.0, 2.0]), np.array([0.5])
    walk = _walk(m, p, np.array([True, False]), 1)
    ranks, _ = walk.take(8, np.inf)
    assert ranks.tolist() == [0]
    assert walk.next_value() == np.inf
    assert walk.take(8, np.inf)[0].size == 0


def test_probe_ends_when_every_design_is_taken(tmp_path):
    # regression: an infeasible cost or mass study small enough for the probe to take every design
    # (the limit stays infinite: no design found) must end "infeasible", as enumeration says, not loop
    import signal

    from generators import random_study

    from selector.engine import evaluate
    from selector.engine import search as engine

    def stop(*_):
        raise TimeoutError("the sum-order probe did not end")

    old = signal.signal(signal.SIGALRM, stop)
    checked = 0
    try:
        for seed in range(7300, 7400):
            study = random_study(seed, tmp_path / str(seed), sizes=((2, 4), (2, 4), (2, 4)),
                                 objective="cost" if seed % 2 else "mass")
            if evaluate.enumerate_designs(study.parts, study.objective, count=1):
                continue
            signal.alarm(30)
            res = engine.search(study.parts)
            signal.alarm(0)
            assert res.status == engine.STATUS_INFEASIBLE and not res.designs
            checked += 1
            if checked == 5:
                break
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    assert checked == 5  # infeasible instances exist among these seeds, else the test loses its teeth
