"""The two-unit acceleration-time block bounds (`engine.accel_blocks`) against the exact run.

On small random two-unit studies (invented data from `generators.random_study`, some with two- and
three-speed gearboxes) every k-d tree of both axles is expanded to its leaves, and for every block
(tyre, front node, rear node) the certified bound must not exceed the exact time of any design in it
(`selector.physics.accel_run.accel_time_s`, the run the verifier re-checks, is the reference). The
per-design bound the search uses on small blocks is checked the same way, and so is the search's
optimum against enumeration of every design.
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np
import pytest
from generators import random_study

from selector.engine import accel_block_bounds, evaluate
from selector.engine import search as engine
from selector.engine.accel_block_bounds import block_time_bounds
from selector.engine.accel_blocks import _over_budget_share, _Side
from selector.engine.two_units import TwoUnitSearch
from selector.physics.accel_run import accel_time_s
from selector.requirements import REL_TOL

SIZES = ((3, 5), (3, 4), (3, 4))
"""Catalogue sizes: at most 20 (motor, reducer) options per axle, 4 tyres."""
CASES = [(seed, 0.0) for seed in range(8100, 8106)] + [(seed, 0.4) for seed in range(8110, 8116)]
"""(seed, gearbox share) of the studies."""


def _setup(seed, share, tmp_path):
    study = random_study(seed, tmp_path / str(seed), sizes=SIZES, layout="both", gearbox_share=share,
                         objective="accel_time")
    parts = study.parts.with_requirements(study.parts.problem.requirements)
    s = TwoUnitSearch(parts, "accel_time", parts.problem.requirements, {}, 1, None, None, defaultdict(int))
    tf, tr = s._table(s.options["front"]), s._table(s.options["rear"])
    return parts, s, tf, tr


def _expand(side: _Side) -> np.ndarray:
    """Split every node down to single entries; returns every node id."""
    todo = side.root[side.root >= 0]
    while todo.size:
        big = todo[side.size(todo) > 1]
        if big.size == 0:
            break
        c1, c2 = side.children(big)
        todo = np.concatenate([c1, c2])
    return np.arange(side.nodes.n)


def _exact_times(parts, s, tf, tr) -> np.ndarray:
    """Exact 0-to-target time of every (front option, rear option, tyre column) [s] (inf: unreachable)."""
    nf, nr, nt = tf.options.shape[0], tr.options.shape[0], s.tyres.size
    fi, ri, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nr), np.arange(nt), indexing="ij"))
    axles, body = parts.design(s._keys(tf, fi, tr, ri, kk))
    return accel_time_s(axles, body, s.target).reshape(nf, nr, nt)


@pytest.mark.parametrize("seed, share", CASES)
def test_block_bound_never_exceeds_the_exact_time_of_its_designs(seed, share, tmp_path, monkeypatch):
    parts, s, tf, tr = _setup(seed, share, tmp_path)
    radius = parts.tyres.radius_m[s.tyres]
    speeds = s.nodes()
    mass = parts.problem.vehicle.mass_kg
    front = _Side(parts, tf, np.ones((tf.options.shape[0], s.tyres.size), bool), radius, mass, speeds)
    rear = _Side(parts, tr, np.ones((tr.options.shape[0], s.tyres.size), bool), radius, mass, speeds)
    exact = _exact_times(parts, s, tf, tr)  # the oracle: the exact run
    nodes_f, nodes_r = _expand(front), _expand(rear)
    fn, rn = (a.ravel() for a in np.meshgrid(nodes_f, nodes_r, indexing="ij"))
    col_f = front.col[front.perm[front.nodes.lo[fn]]]
    same = col_f == rear.col[rear.perm[rear.nodes.lo[rn]]]
    fn, rn, col = fn[same], rn[same], col_f[same]
    fnd, rnd = front.nodes, rear.nodes
    bound = block_time_bounds(s, col, front.envelope(fn), fnd.m_lo[fn], fnd.m_hi[fn], fnd.j[fn],
                              rear.envelope(rn), rnd.m_lo[rn], rnd.m_hi[rn], rnd.j[rn])
    best = np.empty(fn.size)
    for b in range(fn.size):
        fo = front.opt[front.perm[fnd.lo[fn[b]]:fnd.hi[fn[b]]]]
        ro = rear.opt[rear.perm[rnd.lo[rn[b]]:rnd.hi[rn[b]]]]
        best[b] = exact[np.ix_(fo, ro, [col[b]])].min()
    bad = np.nonzero(bound > best)[0]
    assert bad.size == 0, f"{bad.size} block bound(s) above an exact time, e.g. {bound[bad[:3]]} > {best[bad[:3]]}"
    # the bound has teeth: some blocks are bounded, and single designs come within 2 % of their exact time
    single = (front.size(fn) == 1) & (rear.size(rn) == 1) & np.isfinite(best)
    assert np.isfinite(bound).any() and single.any()
    assert np.max(bound[single] / best[single]) > 0.98
    # computed in chunks of BOUND_ROWS rows: the same values as one call over every block
    monkeypatch.setattr(accel_block_bounds, "BOUND_ROWS", 7)
    chunked = block_time_bounds(s, col, front.envelope(fn), fnd.m_lo[fn], fnd.m_hi[fn], fnd.j[fn],
                                rear.envelope(rn), rnd.m_lo[rn], rnd.m_hi[rn], rnd.j[rn])
    assert fn.size > 7 and np.array_equal(chunked, bound)


@pytest.mark.parametrize("seed, share", CASES[::3])
def test_search_optimum_equals_enumeration(seed, share, tmp_path):
    study = random_study(seed, tmp_path / str(seed), sizes=SIZES, layout="both", gearbox_share=share,
                         objective="accel_time")
    enum = evaluate.enumerate_designs(study.parts, "accel_time", count=3)  # the oracle: every design
    res = engine.search(study.parts, "accel_time", count=3)
    if not enum:
        assert res.status == engine.STATUS_INFEASIBLE
        return
    assert res.status == engine.STATUS_OPTIMAL
    assert [d.key for d in res.designs] == [d.key for d in enum]
    for got, want in zip(res.designs, enum, strict=True):
        assert abs(got.value - want.value) <= REL_TOL * want.value


@pytest.mark.parametrize("merge", [4, 1 << 15])
def test_queue_takes_the_least_bounds_first(merge, monkeypatch):
    # reference: a plain sort of every block still waiting (numpy), on random pushes and takes
    import selector.engine.accel_blocks as ab

    monkeypatch.setattr(ab, "MERGE", merge)
    rng = np.random.default_rng(5)
    q, waiting, next_id = ab._Queue(), {}, 0
    for _ in range(200):
        n = int(rng.integers(0, 20))
        b = np.round(rng.uniform(0, 10, n), 1)  # rounded: ties occur
        q.push(b, np.arange(next_id, next_id + n))
        waiting.update(zip(range(next_id, next_id + n), b.tolist(), strict=True))
        next_id += n
        size, limit = int(rng.integers(1, 15)), float(rng.uniform(2, 12))
        ids, bounds = q.take(size, limit)
        want = sorted(v for v in waiting.values() if v <= limit)[:size]
        assert sorted(bounds.tolist()) == want
        for i, v in zip(ids.tolist(), bounds.tolist(), strict=True):
            assert waiting.pop(i) == v
        assert q.least() == min(waiting.values(), default=np.inf)


@pytest.mark.parametrize("seed, share", CASES[:4])
def test_over_budget_share_counts_the_pairs(seed, share, tmp_path):
    # the split weight of cost: the share of (usable front option, usable rear option) pairs whose cost with
    # the cheapest tyres exceeds the budget, against a direct count over every pair
    parts, s, tf, tr = _setup(seed, share, tmp_path)
    f_ok = np.ones((tf.options.shape[0], s.tyres.size), dtype=bool)
    r_ok = np.ones((tr.options.shape[0], s.tyres.size), dtype=bool)
    r_ok[::2] = False  # unusable rear options do not count
    tyres = parts.problem.vehicle.tyre_count * parts.tyres.cost.min()
    totals = tf.cost[:, None] + tr.cost[None, 1::2] + tyres
    for budget in np.percentile(totals, [0, 30, 70, 100]) * np.array([0.99, 1.0, 1.0, 1.01]):
        expect = float((totals > budget * (1 + 4 * REL_TOL)).mean())
        assert _over_budget_share(parts, tf, tr, f_ok, r_ok, float(budget)) == pytest.approx(expect, abs=1e-12)
