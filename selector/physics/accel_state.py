"""The acceleration run's gear state and the smooth pieces of its integrand.

A gear state holds a chunk of designs with each unit in a given gear (`_State`); `state_accel` is the
acceleration of the best torque split at given speeds, with the label of the limiting traction
combination. Between breakpoints 1/a(v) is smooth: each unit's envelope corners (`_unit_breaks`) and
the speeds where the limiting combination changes, found by sampling and bracketing
(`_crossings`, `_with_crossings`). `selector.physics.accel_run` integrates the pieces.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.physics.drivetrain import (
    Axles,
    combination_accels,
    gear_over_radius,
    state_effective_mass_kg,
    take_axles,
    take_fields,
    unit_force_n,
)
from selector.units import G_N

CROSS_SAMPLES = 17
"""Samples per piece when looking for a change of the limiting traction combination [-]."""
CROSS_ROWS = 20000
"""Brackets of traction-combination changes refined in one `refine_first_true` call, at most [-]."""
BISECT_STEPS = 42
"""Resolution of a combination change: 2^-42 of the sample spacing [-]."""
CROSS_ROUNDS = 4
"""Most further searches for changes of the limiting combination between two found ones [-]."""
CROSS_NEW = 1e-12
"""A change found within this share of an edge is that edge, not a new one [-]."""
REFINE_POINTS = 15
"""Interior samples per refinement round of a combination change or a shift point (4 bits a round) [-]."""
# ----------------------------------------------------------------------------------------- gear state

@dataclass(frozen=True)
class _State:
    """Designs of one chunk in a gear state: axles, body, gear index per unit, engaged flags, effective mass."""

    axles: Axles
    body: object
    g_front: np.ndarray
    g_rear: np.ndarray
    on_front: np.ndarray
    on_rear: np.ndarray
    m_eff: np.ndarray


def _state(axles: Axles, body, g_front, g_rear, on_front=None, on_rear=None) -> _State:
    on_f = axles.front.present if on_front is None else on_front
    on_r = axles.rear.present if on_rear is None else on_rear
    m_eff = state_effective_mass_kg(axles, body.mass_kg, body.wheel_inertia_total_kgm2, g_front, g_rear,
                                    engaged_front=on_f, engaged_rear=on_r)
    return _State(axles, body, g_front, g_rear, on_f, on_r, m_eff)


def _take_state(st: _State, rows) -> _State:
    return _State(take_axles(st.axles, rows), take_fields(st.body, rows), st.g_front[rows], st.g_rear[rows],
                  st.on_front[rows], st.on_rear[rows], st.m_eff[rows])


def state_accel(st: _State, v, labels: bool = False):
    """Acceleration at speeds v (n, s) [m/s^2]; with ``labels`` also the limiting combination's index."""
    col = lambda a: np.asarray(a)[:, None]  # noqa: E731
    b, ax = st.body, st.axles
    f_res = col(b.mass_kg) * G_N * col(b.crr) + col(b.q_n_s2_m2) * v * v
    zero = np.zeros(())
    f_f = np.where(col(st.on_front), unit_force_n(ax.front, ax.radius_m, st.g_front, v), 0.0) \
        if np.any(st.on_front) else zero
    f_r = np.where(col(st.on_rear), unit_force_n(ax.rear, ax.radius_m, st.g_rear, v), 0.0) \
        if np.any(st.on_rear) else zero
    return combination_accels(f_f, f_r, col(st.on_front), col(st.on_rear), f_res, col(b.mass_kg), col(st.m_eff),
                              col(b.rear_share), col(b.road_friction), col(b.cg_height_m), col(b.wheelbase_m),
                              labels=labels)


def state_motor_accel(st: _State, v):
    """Acceleration the units' motors can give at speeds v (n, s), traction limits aside [m/s^2]:
    (F_front + F_rear - road load) / m_eff. The shift rule compares gears by it."""
    col = lambda a: np.asarray(a)[:, None]  # noqa: E731
    b, ax = st.body, st.axles
    f_res = col(b.mass_kg) * G_N * col(b.crr) + col(b.q_n_s2_m2) * v * v
    f = np.zeros(np.shape(v))
    if np.any(st.on_front):
        f = f + np.where(col(st.on_front), unit_force_n(ax.front, ax.radius_m, st.g_front, v), 0.0)
    if np.any(st.on_rear):
        f = f + np.where(col(st.on_rear), unit_force_n(ax.rear, ax.radius_m, st.g_rear, v), 0.0)
    return (f - f_res) / col(st.m_eff)


def _unit_breaks(st: _State, v_lo, v_hi):
    """Envelope corner and decline speeds of each engaged unit in its gear, clipped to [v_lo, v_hi] [m/s]."""
    out = []
    for unit, g, on in ((st.axles.front, st.g_front, st.on_front), (st.axles.rear, st.g_rear, st.on_rear)):
        if not np.any(on):
            continue
        ratio, _ = unit.gear(g)
        e = gear_over_radius(ratio, st.axles.radius_m)
        v_c = np.where(on, np.clip(unit.power_w / unit.torque_nm / e, v_lo, v_hi), v_hi)
        v_d = np.where(on, np.clip(unit.decline_rad_s / e, v_lo, v_hi), v_hi)
        out += [v_c, v_d]
    return out


# ----------------------------------------------------------------------------------------- one segment

def refine_first_true(pred, a, b, bits: int, points: int = REFINE_POINTS):
    """Shrink brackets [a, b] (n,) where ``pred`` is False at a and True at b by ``points`` interior
    samples per round until they are 2^-bits of their width: returns the final (a, b).

    ``pred(v)`` takes speeds (n, s) and returns bool (n, s). Each round keeps the sub-interval ending
    at the first sample where ``pred`` holds (the bisection rule with ``points`` + 1 sub-intervals per
    round, so far fewer vectorised calls than halving one bit at a time).
    """
    a, b = a.copy(), b.copy()
    frac = np.arange(1, points + 1) / (points + 1)
    shrink = np.log2(points + 1)
    for _ in range(int(np.ceil(bits / shrink))):
        vs = a[:, None] + (b - a)[:, None] * frac[None, :]
        h = pred(vs)
        anyh = h.any(axis=1)
        first = np.argmax(h, axis=1)
        rows = np.arange(a.size)
        new_b = np.where(anyh, vs[rows, first], b)
        new_a = np.where(anyh, np.where(first > 0, vs[rows, np.maximum(first - 1, 0)], a), vs[:, -1])
        a, b = new_a, new_b
    return a, b


def _crossings(st: _State, base, v_end):
    """First and last change of the limiting combination on each piece [base[:, i], base[:, i + 1]]:
    a list of (n,) arrays, two per piece (v_end where none; the same speed twice where one). All
    pieces are sampled in one `state_accel` call and every bracket is refined in one
    `refine_first_true` call (each row's result is what one piece at a time gives)."""
    n, n_pieces = base.shape[0], base.shape[1] - 1
    lo, hi = base[:, :-1], base[:, 1:]
    frac = np.linspace(0.0, 1.0, CROSS_SAMPLES)
    vs = lo[:, :, None] + (hi - lo)[:, :, None] * frac[None, None, :]
    acc, lab = state_accel(st, vs.reshape(n, -1), labels=True)
    acc = acc.reshape(n, n_pieces, CROSS_SAMPLES)
    lab = lab.reshape(n, n_pieces, CROSS_SAMPLES)
    change = (lab[:, :, 1:] != lab[:, :, :-1]) & np.isfinite(acc[:, :, 1:]) & np.isfinite(acc[:, :, :-1])
    has = change.any(axis=2) & (hi > lo)
    first = np.argmax(change, axis=2)
    last = change.shape[2] - 1 - np.argmax(change[:, :, ::-1], axis=2)
    cross = np.repeat(v_end[:, None, None], n_pieces, axis=1).repeat(2, axis=2)  # (n, pieces, first | last)
    rows, pieces, which, idx = [], [], [], []
    for w, at in enumerate((first, last)):  # the last change also where it shares the first's sample interval
        use = has
        r, q = np.nonzero(use)
        rows.append(r)
        pieces.append(q)
        which.append(np.full(r.size, w))
        idx.append(at[r, q])
    rows, pieces, which, idx = (np.concatenate(x) for x in (rows, pieces, which, idx))
    for c0 in range(0, rows.size, CROSS_ROWS):  # (brackets of several pieces and rows in one call)
        r, q, w, k = (x[c0:c0 + CROSS_ROWS] for x in (rows, pieces, which, idx))
        sub = _take_state(st, r)
        lab_a, lab_b, last_w = lab[r, q, k][:, None], lab[r, q, k + 1][:, None], (w == 1)[:, None]

        def changed(v, sub=sub, lab_a=lab_a, lab_b=lab_b, last_w=last_w):
            # first change: where the label leaves its value at the left sample; last change: where it
            # takes its value at the right sample (two changes between two samples give both)
            now = state_accel(sub, v, labels=True)[1]
            return np.where(last_w, now == lab_b, now != lab_a)

        a, b = refine_first_true(changed, vs[r, q, k], vs[r, q, k + 1], BISECT_STEPS)
        cross[r, q, w] = 0.5 * (a + b)
    return [cross[:, q, w] for q in range(n_pieces) for w in (0, 1)]


def _with_crossings(st: _State, base, v_end):
    """``base`` (n, k) sorted edges with every change of the limiting combination added [m/s].

    `_crossings` finds the first and the last change on each piece from samples; two changes between
    the same two samples look like one. So the pieces are split at what was found and searched again
    (rows that found a change), `CROSS_ROUNDS` times at most, until a round finds nothing new (a
    change closer than `CROSS_NEW` of an edge is that edge). Columns that are v_end in every row are
    dropped (zero-width pieces)."""
    edges = _compact(np.sort(np.concatenate([base, np.stack(_crossings(st, base, v_end), axis=1)], axis=1),
                             axis=1), v_end)
    todo = np.nonzero((edges < v_end[:, None]).sum(axis=1) > (base < v_end[:, None]).sum(axis=1))[0]
    for _ in range(CROSS_ROUNDS):
        if todo.size == 0:
            break
        e = edges[todo]
        found = np.stack(_crossings(_take_state(st, todo), e, v_end[todo]), axis=1)
        near = np.abs(found[:, :, None] - e[:, None, :]).min(axis=2) <= CROSS_NEW * np.abs(found)
        new = (found < v_end[todo, None]) & ~near
        keep = new.any(axis=1)
        if not keep.any():
            break
        add = np.repeat(v_end[:, None], found.shape[1], axis=1)
        add[todo[keep]] = np.where(new[keep], found[keep], v_end[todo[keep], None])
        edges = _compact(np.sort(np.concatenate([edges, add], axis=1), axis=1), v_end)
        todo = todo[keep]
    return edges


def _compact(edges, v_end):
    """``edges`` without the trailing columns that are v_end in every row (sorted rows) [m/s]."""
    real = (edges < v_end[:, None]).sum(axis=1)
    width = int(real.max(initial=0)) + 1
    return edges[:, :max(width, 2)]
