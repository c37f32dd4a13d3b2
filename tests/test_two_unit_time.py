"""The time bounds of the two-unit cost (mass) search (`engine.two_unit_time`) never exceed the exact
time of a design they stand for.

Oracle: `evaluate.evaluate`, the exact acceleration run of every (front option, rear option, tyre)
design of small random two-unit studies (invented data, `generators.random_study`, a share of two-
and three-speed gearboxes). Checked: the per-design bound against each design's time, and the bound
of every (front option, tyre, range of rear positions) block against the least time in the block;
and that the bounds are not vacuous (they decide the searches only when they come close).
"""

from __future__ import annotations

import numpy as np
import pytest
from generators import random_study

from selector.engine import evaluate, two_unit_time
from selector.engine.two_unit_time import TimeBounds
from selector.engine.two_units import TwoUnitSearch

SEEDS = range(8300, 8310)


def _setup(seed, directory):
    s = random_study(seed, directory / f"t{seed}", sizes=((3, 4), (3, 4), (2, 3)), layout="both",
                     gearbox_share=0.4, objective="accel_time", requirement_share=0.0)
    parts = s.parts
    req = parts.problem.requirements
    search = TwoUnitSearch(parts, "accel_time", req, {}, 1, None, None, {})
    tf, tr = search._table(search.options["front"]), search._table(search.options["rear"])
    order = search._rear_sorted(tr)[0]
    return parts, search, tf, tr, order, TimeBounds(search, tf, tr, order)


def _exact_times(parts, search, tf, tr) -> np.ndarray:
    """Exact time of every design, (front options, rear options, tyre columns) [s] (inf: never reaches)."""
    nf, nr, nt = tf.options.shape[0], tr.options.shape[0], search.tyres.size
    fi, ri, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nr), np.arange(nt), indexing="ij"))
    keys = search._keys(tf, fi, tr, ri, kk)
    return np.asarray(evaluate.evaluate(parts, keys)["accel_time_s"]).reshape(nf, nr, nt), keys


@pytest.mark.parametrize("seed", SEEDS)
def test_time_bounds_never_exceed_the_exact_time(seed, tmp_path, monkeypatch):
    parts, search, tf, tr, order, tb = _setup(seed, tmp_path)
    exact, keys = _exact_times(parts, search, tf, tr)
    nf, nr, nt = exact.shape
    # per design, from the key rows
    lb = tb.design_s(keys).reshape(exact.shape)
    over = lb > exact * (1 + 1e-12)
    assert not over.any(), (seed, keys[over.ravel()][:3].tolist(), lb[over][:3], exact[over][:3])
    # per block: front option, tyre, every range [s, e) of rear positions in the search's rear order
    by_pos = exact[:, order, :]  # rear axis in the rear order
    s, e = (a.ravel() for a in np.meshgrid(np.arange(nr), np.arange(1, nr + 1), indexing="ij"))
    s, e = s[s < e], e[s < e]
    fi, rng, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(s.size), np.arange(nt), indexing="ij"))
    bound = tb.range_s(fi, kk, s[rng], e[rng])
    # least exact time in each block (prefix minima per start)
    least = np.array([by_pos[f, s[r]:e[r], k].min() for f, r, k in zip(fi, rng, kk, strict=True)])
    over = bound > least * (1 + 1e-12)
    assert not over.any(), (seed, fi[over][:3], s[rng][over][:3], e[rng][over][:3], bound[over][:3], least[over][:3])
    # first_fast moves past a range only when no design in it reaches the limit
    limit = float(np.nanmedian(exact[np.isfinite(exact)]))
    fi2, kk2 = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nt), indexing="ij"))
    p = tb.first_fast(fi2, kk2, np.zeros(fi2.size, dtype=np.int64), np.full(fi2.size, nr), limit)
    for f, k, q in zip(fi2, kk2, p, strict=True):
        assert not (by_pos[f, :q, k] <= limit).any(), (seed, f, k, q)
    # open_windows keeps every window that holds a design meeting the limit (windows of 3 positions here)
    monkeypatch.setattr(two_unit_time, "WINDOW", 3)
    owner, lo, cnt = tb.open_windows(fi2, kk2, np.zeros(fi2.size, dtype=np.int64), np.full(fi2.size, nr), limit)
    kept = np.zeros((fi2.size, nr), dtype=bool)
    for b, a, c in zip(owner, lo, cnt, strict=True):
        kept[b, a:a + c] = True
    fast = by_pos[fi2, :, kk2] <= limit  # (blocks, rear positions)
    assert not (fast & ~kept).any(), seed


def test_time_bounds_come_close_to_the_exact_time(tmp_path):
    # not vacuous: over the designs that reach the target, the per-design bound is at least half the exact
    # time on average, and the block bounds skip blocks (some blocks miss the 10th percentile of the times)
    ratios, skipped = [], 0
    for seed in SEEDS[:4]:
        parts, search, tf, tr, order, tb = _setup(seed, tmp_path)
        exact, keys = _exact_times(parts, search, tf, tr)
        lb = tb.design_s(keys).reshape(exact.shape)
        fin = np.isfinite(exact) & np.isfinite(lb)
        ratios.append(lb[fin] / exact[fin])
        nf, nr, nt = exact.shape
        fi, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nt), indexing="ij"))
        limit = float(np.percentile(exact[np.isfinite(exact)], 10))
        p = tb.first_fast(fi, kk, np.zeros(fi.size, dtype=np.int64), np.full(fi.size, nr), limit)
        skipped += int((p == nr).sum())
    assert np.median(np.concatenate(ratios)) > 0.5, np.median(np.concatenate(ratios))
    assert skipped > 0


@pytest.mark.parametrize("seed", SEEDS[:5])
def test_coarse_pass_decides_as_the_fine_bound(seed, tmp_path):
    # With a limit, each bound is first taken on the coarse nodes (a subset of the fine ones); the
    # limit decisions must be those of the fine bound alone, and every value still a lower bound.
    parts, search, tf, tr, order, tb = _setup(seed, tmp_path)
    coarse = search.nodes(two_unit_time.COARSE_NODES)
    assert np.isin(coarse, search.nodes()).all()  # subset: refining a left Riemann sum of 1/a only adds
    exact, keys = _exact_times(parts, search, tf, tr)
    fine = tb.design_s(keys)
    nf, nr, nt = exact.shape
    fi, rng_s, kk = (a.ravel() for a in np.meshgrid(np.arange(nf), np.arange(nr), np.arange(nt), indexing="ij"))
    fine_r = tb.range_s(fi, kk, rng_s, np.full(fi.size, nr))
    decided = 0
    for q in (5, 25, 50, 90):
        limit = float(np.percentile(exact[np.isfinite(exact)], q))
        two = tb.design_s(keys, limit)
        assert (two <= exact.ravel() * (1 + 1e-12)).all(), (seed, q)
        assert np.array_equal(two_unit_time.meets(two, limit), two_unit_time.meets(fine, limit)), (seed, q)
        two_r = tb.range_s(fi, kk, rng_s, np.full(fi.size, nr), limit)
        assert np.array_equal(two_unit_time.meets(two_r, limit), two_unit_time.meets(fine_r, limit)), (seed, q)
        decided += int((two < fine).sum())  # entries the coarse pass decided alone
    assert decided > 0  # the coarse pass does decide some entries (else it only adds cost)
