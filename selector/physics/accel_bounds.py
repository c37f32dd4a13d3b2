"""Proved bounds of the acceleration run's time (`selector.physics.accel_run`), without running it.

Single-speed designs: left and right Riemann sums of the exact integrand (a(v) is non-increasing in
one gear state). Designs with a gearbox: a lower bound from the largest acceleration over every gear
state the run can be in, plus the shift times a single unit must coast through. The screens of the
search (`selector.engine.evaluate.screen`) use them to settle designs before the exact run.
"""

from __future__ import annotations

import numpy as np

from selector.physics.accel_run import _state, state_accel
from selector.physics.drivetrain import Axles, gear_limit_mps, speed_cap_mps, take_axles, take_fields

BRACKET_NODES = 48
"""Speed nodes of `time_bracket` [-]."""
MULTI_BOUND_SAFETY = 1e-6
"""Relative margin taken off the multi-speed lower bound: the run's two-unit shift phases are
fixed-step Runge-Kutta (1.5e-8 relative at worst, DEVELOPERS.md), so the computed time may lie
that far below the exact integral the bound is proved against [-]."""


def bracket_nodes(target_mps, nodes: int = BRACKET_NODES) -> np.ndarray:
    """Speed nodes (n, nodes + 1) from 0 to each target, graded towards the target [m/s]."""
    s = 1.0 - (1.0 - np.arange(nodes + 1) / nodes) ** 2
    return np.asarray(target_mps, dtype=float)[:, None] * s[None, :]


def riemann_time_s(v, a) -> np.ndarray:
    """Left and right Riemann sums of dv / a over the nodes v (n, s) with a(v) (n, s) [s].

    With a non-increasing in v the left sum is a lower bound of the integral and the right sum an upper
    bound; both are inf where a <= 0 at a node (the run cannot pass that speed).
    """
    dv = np.diff(v, axis=1)
    pos = (a > 0).all(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        left = (dv / a[:, :-1]).sum(axis=1)
        right = (dv / a[:, 1:]).sum(axis=1)
    return np.where(pos, left, np.inf), np.where(pos, right, np.inf)


def time_bracket(axles: Axles, body, target_mps, nodes: int = BRACKET_NODES):
    """Proved lower and upper bounds of the 0-to-target time of designs [s].

    Single-speed designs: one gear state, and a(v) is non-increasing in v (each axle's force is
    non-increasing, road load increasing, every traction combination decreasing), so 1/a is
    non-decreasing and the left and right Riemann sums of dv/a over any partition of [0, V] bracket
    the exact integral. Designs with a multi-speed unit get a lower bound only (upper bound inf), see
    `multi_speed_lower_bound_s`. Both are inf when the target cannot be reached (a <= 0 at a node, or
    the target above the gearing limit or the limiter).
    """
    n = axles.n
    target = np.broadcast_to(np.asarray(target_mps, dtype=float), (n,))
    lo = np.zeros(n)
    hi = np.full(n, np.inf)
    reach = (target <= speed_cap_mps(axles) * (1 + 1e-12)) & (target <= body.speed_limit_mps)
    single = (axles.front.n_gears <= 1) & (axles.rear.n_gears <= 1)
    for rows, multi in ((np.nonzero(single & reach)[0], False), (np.nonzero(~single & reach)[0], True)):
        if rows.size == 0:
            continue
        ax, bd = take_axles(axles, rows), take_fields(body, rows)
        v = bracket_nodes(target[rows], nodes)
        if multi:
            lo[rows] = multi_speed_lower_bound_s(ax, bd, v)
        else:
            st = _state(ax, bd, np.zeros(rows.size, dtype=np.int64), np.zeros(rows.size, dtype=np.int64))
            lo[rows], hi[rows] = riemann_time_s(v, state_accel(st, v))
    lo[~reach] = np.inf
    hi[~reach] = np.inf
    return lo, hi


def _gear_states(axles: Axles, two: bool):
    """Every (front gear, rear gear) state a run can be in: gear indices (n,) per unit and the rows
    where the state exists; -1 is a unit disengaged during its shift (only with ``two`` units)."""
    first = -1 if two else 0
    gf_max = int(np.max(axles.front.n_gears, initial=1))
    gr_max = int(np.max(axles.rear.n_gears, initial=1))
    for gf in range(first, max(gf_max, 1)):
        for gr in range(first, max(gr_max, 1)):
            if gf < 0 and gr < 0:
                continue  # both disengaged never happens (one shift at a time)
            ok = np.ones(axles.n, dtype=bool)
            for unit, g in ((axles.front, gf), (axles.rear, gr)):
                ok &= ~unit.present | (unit.n_gears > g) if g >= 0 else unit.present
            yield gf, gr, ok


def multi_speed_lower_bound_s(axles: Axles, body, v) -> np.ndarray:
    """Proved lower bound of the run's time to v[:, -1] for designs with a multi-speed unit [s].

    Whatever gears the run uses, its acceleration at speed v never exceeds a_up(v), the largest
    acceleration over every gear state it can be in (with two units also the states with one unit
    disengaged for its shift, which the run integrates). Each state's a(v) is non-increasing in v,
    so a_up is too, and with Phi(v) = integral of dv / a_up, d Phi / dt = v' / a_up(v) <= 1 at every
    moment (v' <= 0 while one unit coasts through its shift), so the time is at least Phi(V), which
    the left Riemann sum bounds from below. With one unit the coasting adds its shift time in full:
    a run that ends in gear k shifted k times and was in gears 1..k only, so the time is at least
    min over the possible k of Phi_k(V) + k t_s, Phi_k with a_up over gears 1..k; ending in gear k
    is impossible when gear k's gearing limit lies below the target (the run must shift out of it).
    """
    n = axles.n
    two = axles.front.present & axles.rear.present
    out = np.full(n, np.inf)
    for rows, use_two in ((np.nonzero(two)[0], True), (np.nonzero(~two)[0], False)):
        if rows.size == 0:
            continue
        ax, bd, vv = take_axles(axles, rows), take_fields(body, rows), v[rows]
        if use_two:
            a_up = np.full(vv.shape, -np.inf)
            for gf, gr, ok in _gear_states(ax, True):
                st = _state(ax, bd, np.full(rows.size, max(gf, 0)), np.full(rows.size, max(gr, 0)),
                            ax.front.present & (gf >= 0), ax.rear.present & (gr >= 0))
                a_up = np.where(ok[:, None], np.maximum(a_up, state_accel(st, vv)), a_up)
            out[rows] = riemann_time_s(vv, a_up)[0]
            continue
        unit = np.where(ax.front.present, 0, 1)
        n_g = np.where(unit == 0, ax.front.n_gears, ax.rear.n_gears)
        t_s = np.where(unit == 0, ax.front.shift_time_s, ax.rear.shift_time_s)
        best = np.full(rows.size, np.inf)
        a_up = np.full(vv.shape, -np.inf)
        for k in range(int(n_g.max())):
            has = n_g > k
            g = np.where(has, k, 0)
            g_f, g_r = np.where(unit == 0, g, 0), np.where(unit == 1, g, 0)
            st = _state(ax, bd, g_f, g_r)
            a_up = np.where(has[:, None], np.maximum(a_up, state_accel(st, vv)), a_up)
            lim = np.where(unit == 0, gear_limit_mps(ax.front, ax.radius_m, g_f),
                           gear_limit_mps(ax.rear, ax.radius_m, g_r))
            can_end = has & ~((k < n_g - 1) & (lim < vv[:, -1]))
            phi = riemann_time_s(vv, a_up)[0] + k * t_s
            best = np.where(can_end, np.minimum(best, phi), best)
        out[rows] = best
    return out * (1.0 - MULTI_BOUND_SAFETY)
