"""Certified acceleration-time bounds of the two-unit cost (mass) search under ``accel_time_s``.

A cost (mass) search with a time limit meets many designs that are cheap enough but too slow (the
frontier's late min-cost searches meet 1e4 to 1e5 of them). Before their exact evaluation the search
asks two lower bounds of the 0-to-target time, both from `TwoUnitBounds.envelope_bounds` (the left
Riemann sum of dv / a_up over the bound's speed nodes, a_up the least of the four traction
combinations' upper bounds, each unit's wheel force at most its envelope min(A / r, B / v),
A = T_pk max_g eta_g G_g and B = P_pk max_g eta_g, valid in every gear and non-increasing in v; the
same bound as the k-d tree blocks of `accel_blocks`, valid for every design of a block whose extremes
it is given):

- per block (front option, tyre, a range of rear positions in the search's order of the rear
  options' own value): the front option's own envelope, mass and reflected inertia, and for the rear
  the range's extremes (largest A and B, least and largest mass, least reflected inertia; range
  queries on sparse tables, `rmq.RangeMin`). The search asks it when it refines a (front option,
  tyre) block's cost bound, for the rear range still open (from the floor of `_floor_memo` to the
  pool's cut-off): a block whose bound misses the limit holds no feasible design and is dropped
  (`first_fast`); and when it lists a block's designs, per window of `WINDOW` rear positions
  (`open_windows`);
- per design: both units' own terms (`design_s`), chunk by chunk just before the exact evaluation.

Each bound is first taken on `COARSE_NODES` nodes, a subset of the default ones (`nodes(8)`): the
left Riemann sum of the non-decreasing 1 / a_up only grows when nodes are added, so an entry whose
coarse bound already misses the limit would miss it on the fine nodes too; only the others get the
fine bound. The decisions are those of the fine bound alone, at about a third of its cost when most
entries miss the limit (measured: 400,000 designs of the vineyard AWD frontier's late min-cost
searches, 98.7 % decided on the coarse nodes; 0.6 against 1.8 us per design).

The bounds are taken 1e-6 relative lower (`physics.accel_bounds.MULTI_BOUND_SAFETY`: the run's
two-unit shift phases are fixed-step Runge-Kutta, so a computed time may lie that far below the exact
integral the bound is proved against). Skipping the leading rear options of a block one range at a
time while refining was tried and cost more than it saved: a range's extremes mix the strongest motor
of one option with the lightest mass of another, so short ranges often meet the limit when none of
their options does.
"""

from __future__ import annotations

import numpy as np

from selector.engine.accel_block_bounds import BOUND_ROWS
from selector.engine.parts import FM, FR, RM, RR, TY
from selector.engine.rmq import RangeMin
from selector.engine.two_unit_bounds import NODES
from selector.requirements import REL_TOL

WINDOW = 32
"""Rear positions per window of a block when its designs are listed [-]."""
COARSE_NODES = 8
"""Speed nodes of the first, coarse pass of every bound (a divisor of `two_unit_bounds.NODES`) [-]."""
assert NODES % COARSE_NODES == 0, "the coarse nodes must be a subset of the fine ones"
COARSE_EVERY = NODES // COARSE_NODES
"""The coarse pass takes every COARSE_EVERY-th speed node [-]."""


def unit_terms(parts, motors, reducers) -> dict:
    """Radius-free envelope terms of units (motor, reducer): ``a`` = T_pk max_g eta_g G_g [N m],
    ``b`` = P_pk max_g eta_g [W], ``mass`` [kg], ``j`` = least reflected rotor inertia times r^2,
    min_g J eta_g G_g^2 for a single-speed unit, 0 with a gearbox (its rotor is decoupled during its
    shifts) [kg m^2]; the same quantities as `two_unit_bounds.OptionTable`."""
    mo, re = parts.motors, parts.reducers
    eta = np.where(np.isfinite(re.efficiencies[reducers]), re.efficiencies[reducers], 0.0)
    ratio = np.where(np.isfinite(re.ratios[reducers]), re.ratios[reducers], 0.0)
    single = re.n_gears[reducers] <= 1
    j = mo.rotor_inertia_kgm2[motors] * ratio[:, 0] * ratio[:, 0] * eta[:, 0]
    return {"a": mo.torque_nm[motors] * (eta * ratio).max(axis=1), "b": mo.power_w[motors] * eta.max(axis=1),
            "mass": mo.mass_kg[motors] + re.mass_kg[reducers], "j": np.where(single, j, 0.0)}


class TimeBounds:
    """The bounds of the module docstring for one search (``search`` a `TwoUnitSearch` with an
    acceleration target) over option tables ``tf`` (front) and ``tr`` (rear), rear positions
    counted in the order ``rear_order`` (the search's order of the rear options' own value)."""

    def __init__(self, search, tf, tr, rear_order: np.ndarray):
        self.search, self.tf, self.tr = search, tf, tr
        p = search.parts
        self.radius = p.tyres.radius_m[search.tyres]
        self.column = np.full(p.sizes[2], -1, dtype=np.int64)
        self.column[search.tyres] = np.arange(search.tyres.size)
        self.speeds = search.nodes()
        o = rear_order
        j_free = unit_terms(p, tr.options[o, 0], tr.options[o, 1])["j"]
        # range extremes over rear positions (minima of the negated values are maxima)
        self.rear_range = {"a": RangeMin(-tr.torque0_nm[o]), "b": RangeMin(-tr.power_eta_w[o]),
                           "m_lo": RangeMin(tr.mass[o]), "m_hi": RangeMin(-tr.mass[o]), "j": RangeMin(j_free)}

    @staticmethod
    def _envelope(a_n, b_w, speeds) -> np.ndarray:
        """min(A, B / v) at the speed nodes ``speeds``, (n, nodes) [N]."""
        with np.errstate(divide="ignore"):
            return np.minimum(np.asarray(a_n)[:, None], np.asarray(b_w)[:, None] / speeds[None, :])

    def _bound_at(self, every: int, kk, f: dict, r: dict) -> np.ndarray:
        """`envelope_bounds` on every ``every``-th speed node [s]."""
        speeds = self.speeds[::every]
        return self.search.envelope_bounds(kk, self._envelope(f["a"], f["b"], speeds), f["m_lo"], f["m_hi"], f["j"],
                                           self._envelope(r["a"], r["b"], speeds), r["m_lo"], r["m_hi"], r["j"],
                                           every=every)

    def _bound(self, kk, front: dict, rear: dict, limit_s: float | None) -> np.ndarray:
        """`envelope_bounds` of entries at tyre columns kk, each side a dict a [N], b [W], m_lo, m_hi [kg],
        j [kg], in chunks of `accel_block_bounds.BOUND_ROWS`, taken `MULTI_BOUND_SAFETY` lower [s]: the
        coarse bound where it already misses ``limit_s`` [s], else (and with ``limit_s`` None) the fine
        one (module docstring)."""
        out = np.empty(np.size(kk))
        for s in range(0, out.size, BOUND_ROWS):
            sl = slice(s, s + BOUND_ROWS)
            f = {k: np.asarray(v)[sl] for k, v in front.items()}
            r = {k: np.asarray(v)[sl] for k, v in rear.items()}
            if limit_s is None:  # no limit to decide against: the fine bound of every entry
                out[sl] = self._bound_at(1, kk[sl], f, r)
                continue
            b = self._bound_at(COARSE_EVERY, kk[sl], f, r)
            fine = np.nonzero(meets(b, limit_s))[0]
            if fine.size:
                b[fine] = self._bound_at(1, kk[sl][fine], {k: v[fine] for k, v in f.items()},
                                         {k: v[fine] for k, v in r.items()})
            out[sl] = b
        return out

    def range_s(self, fi, kk, start, stop, limit_s: float | None = None) -> np.ndarray:
        """Lower bound of the time of every design (front option fi, rear option at a position in
        [start, stop) of the rear order, tyre column kk) [s]: the front option's own terms, the
        range's extremes for the rear (inf for an empty range). With ``limit_s`` [s], where the bound
        misses it, the coarse bound (`_bound`)."""
        q = {k: rm.query(start, stop) for k, rm in self.rear_range.items()}
        r = self.radius[kk]
        rear = {"a": -q["a"] / r, "b": -q["b"], "m_lo": q["m_lo"], "m_hi": -q["m_hi"], "j": q["j"] / (r * r)}
        m = self.tf.mass[fi]
        front = {"a": self.tf.torque0_nm[fi] / r, "b": self.tf.power_eta_w[fi], "m_lo": m, "m_hi": m,
                 "j": self.tf.j_eta_e2_min[fi, kk]}
        out = np.full(np.size(kk), np.inf)
        some = stop > start
        if some.any():
            out[some] = self._bound(kk[some], {k: v[some] for k, v in front.items()},
                                    {k: v[some] for k, v in rear.items()}, limit_s)
        return out

    def first_fast(self, fi, kk, start, stop, limit_s: float) -> np.ndarray:
        """Per block (front option fi, tyre column kk) with the rear positions [start, stop) still
        open: stop where the bound of every design of that range misses ``limit_s`` (none can be
        feasible), else start."""
        p = np.asarray(start, dtype=np.int64).copy()
        stop = np.asarray(stop, dtype=np.int64)
        open_ = np.nonzero(p < stop)[0]
        slow = ~meets(self.range_s(np.asarray(fi)[open_], np.asarray(kk)[open_], p[open_], stop[open_], limit_s),
                      limit_s)
        p[open_[slow]] = stop[open_[slow]]
        return p

    def open_windows(self, fi, kk, start, count, limit_s: float):
        """Blocks (front option fi, tyre column kk) with rear positions [start, start + count) split into
        windows of `WINDOW` positions; returns (block index, start, count) of the windows whose bound
        meets ``limit_s`` (every design of a window dropped misses it)."""
        count = np.asarray(count, dtype=np.int64)
        n_win = -(-count // WINDOW)
        owner = np.repeat(np.arange(count.size), n_win)
        k = np.arange(int(n_win.sum())) - np.repeat(np.cumsum(n_win) - n_win, n_win)
        lo = np.asarray(start, dtype=np.int64)[owner] + k * WINDOW
        hi = np.minimum(lo + WINDOW, np.asarray(start, dtype=np.int64)[owner] + count[owner])
        keep = meets(self.range_s(np.asarray(fi)[owner], np.asarray(kk)[owner], lo, hi, limit_s), limit_s)
        return owner[keep], lo[keep], (hi - lo)[keep]

    def design_s(self, keys, limit_s: float | None = None) -> np.ndarray:
        """Lower bound of the time of designs ``keys`` (n, 5) from both units' own terms [s]. With
        ``limit_s`` [s], where the bound misses it, the coarse bound (`_bound`)."""
        keys = np.asarray(keys)
        kk = self.column[keys[:, TY]]
        r2 = self.radius[kk] ** 2
        sides = []
        for m_col, r_col in ((FM, FR), (RM, RR)):
            t = unit_terms(self.search.parts, keys[:, m_col], keys[:, r_col])
            sides.append({"a": t["a"] / self.radius[kk], "b": t["b"], "m_lo": t["mass"], "m_hi": t["mass"],
                          "j": t["j"] / r2})
        return self._bound(kk, sides[0], sides[1], limit_s)


def meets(bound_s, limit_s: float) -> np.ndarray:
    """The bound does not rule the time limit out (pass tolerance and margin included)."""
    return bound_s <= limit_s * (1 + 4 * REL_TOL)
