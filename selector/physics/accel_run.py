"""The acceleration run from rest on the level: one or two drive units, one to three gears each.

Time is integrated in speed, t = integral of dv / a(v), where a(v) is the acceleration of the current
gear state (`drivetrain.combination_accels`: each axle motor- or traction-limited, load transfer
m a h/L, best torque split). A run is a sequence of segments between shift events:

- every unit starts in first gear; a unit upshifts at the first speed where its next gear gives at
  least as much vehicle acceleration as its current one (counting each gear's reflected rotor
  inertia, so the shift point is where a_g(v) = a_g+1(v)), or where its motor reaches its maximum
  speed in the current gear; exact ties shift at the earliest speed; no downshifts during the run.
  Two units never shift at once: a unit whose shift point falls within the other's shift waits for
  it to end and shifts then (if the target is not reached first); shift points within
  `SHIFT_ORDER_TIE` of each other go front first (torque stays on one axle throughout).
  The gears are compared by what the motors can deliver (`state_motor_accel`), traction limits
  aside: while both gears are traction-limited the next gear would only shed rotor inertia, and its
  torque interruption would stall a launch (a shift at 0 km/h);
- during a unit's `shift_time_s` no torque reaches that unit's wheels and its rotor is decoupled:
  with one unit the vehicle coasts against road load (closed form); with two units the other unit
  keeps driving (integrated in time by classical Runge-Kutta, `SHIFT_RK_STEPS` steps);
- the time to the target speed includes every shift.

Within a segment the integrand is smooth between breakpoints: each unit's envelope corners (corner
and decline speeds in its current gear) and the speeds where the limiting traction combination
changes (found by sampling and bisection). Each smooth piece is integrated by Gauss-Legendre
quadrature. Near the end of a segment, 1/a(v) may have a pole just beyond it (the top speed of the
current regime, where a = 0): the pieces are then graded geometrically towards the end so that every
piece is at most `GRADE_WIDTH` times as wide as its distance from the pole. With the pole at least
that far away, the integrand is analytic inside a Bernstein ellipse of parameter >= 2 + sqrt(3) for
every piece, and the Gauss-Legendre error with `GL_NODES` nodes is below 1e-20 of the piece's
integral (Trefethen, Approximation Theory and Approximation Practice, Thm 19.3); see DEVELOPERS.md.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.physics.accel_state import (  # noqa: F401 - _state and state_accel are also read from here
    _State,
    _state,
    _take_state,
    _unit_breaks,
    _with_crossings,
    refine_first_true,
    state_accel,
    state_motor_accel,
)
from selector.physics.drivetrain import (
    Axles,
    gear_limit_mps,
    speed_cap_mps,
    take_axles,
    take_fields,
)
from selector.physics.road import coast_speed_mps
from selector.units import G_N

GL_NODES = 20
"""Gauss-Legendre nodes per smooth piece [-]."""
PIECE_ELEMENTS = 1 << 18
"""Speeds `_integrate_pieces` evaluates in one `state_accel` call, at most (pieces grouped) [-]."""
GRADE_RATIO = 0.35
"""Geometric grading ratio towards the end of a segment: each graded piece lies at least
GRADE_RATIO / (1 - GRADE_RATIO) of its width from the end [-]."""
GRADE_WIDTH = 0.25
"""The last graded piece is at most this fraction of the estimated distance to the pole [-]."""
GRADE_MAX_LEVELS = 60
"""Most grading levels (GRADE_RATIO^60 ~ 5e-28 of the segment) [-]."""
SHIFT_SAMPLES = 33
"""Samples of a(next gear) - a(current gear) per segment when looking for a shift point [-]."""
SHIFT_BISECT = 60
"""Resolution of a shift point: 2^-60 of the sample spacing [-]."""
SHIFT_TIE = 1e-12
"""The next gear 'gives at least as much acceleration' when a_next >= a_now (1 - SHIFT_TIE) [-]."""
SHIFT_ORDER_TIE = 1e-9
"""Two units whose shift points are within this share of each other shift front first (then the rear,
when the front's shift has ended) [-]."""
SHIFT_RK_STEPS = 256
"""Runge-Kutta steps of a shift phase in which the other unit keeps driving [-]."""
SHIFT_CROSS_NODES = 12
"""Gauss-Legendre nodes of the time from the start of the Runge-Kutta step in which the target is
passed during a shift phase to the target [-]."""

_GL_CACHE: dict = {}


def gauss_legendre(n: int):
    """Nodes and weights of n-point Gauss-Legendre quadrature on [-1, 1] (cached)."""
    if n not in _GL_CACHE:
        _GL_CACHE[n] = np.polynomial.legendre.leggauss(n)
    return _GL_CACHE[n]


@dataclass(frozen=True)
class RunResult:
    """Outcome of the acceleration run of each design.

    time_s (n,): time from rest to the target [s], inf when unreachable;
    shift_axle (n, K): 0 front, 1 rear, -1 no shift; shift_from_gear (n, K): gear index left (0 = first);
    shift_speed_mps, shift_time_s (n, K): road speed and elapsed time when the torque interruption starts.
    """

    time_s: np.ndarray
    shift_axle: np.ndarray
    shift_from_gear: np.ndarray
    shift_speed_mps: np.ndarray
    shift_time_s: np.ndarray


def _integrate_pieces(st: _State, edges):
    """sum over pieces of Gauss-Legendre integrals of 1/a; and where a <= 0 at a node (n,) [s].

    The nodes of several pieces go to `state_accel` in one call (at most `PIECE_ELEMENTS` speeds per
    call); each piece's sum over its nodes and the running sum over pieces are taken in the same order
    as one piece at a time, so the result does not depend on how pieces are grouped."""
    gl_x, gl_w = gauss_legendre(GL_NODES)
    n, n_pieces = edges.shape[0], edges.shape[1] - 1
    tot = np.zeros(n)
    bad_any = np.zeros(n, dtype=bool)
    per_call = max(1, PIECE_ELEMENTS // max(n * GL_NODES, 1))
    for p0 in range(0, n_pieces, per_call):
        p1 = min(n_pieces, p0 + per_call)
        a, b = edges[:, p0:p1], edges[:, p0 + 1:p1 + 1]
        half = 0.5 * (b - a)
        v = (0.5 * (a + b))[:, :, None] + half[:, :, None] * gl_x[None, None, :]
        acc = state_accel(st, v.reshape(n, -1)).reshape(n, p1 - p0, GL_NODES)
        width_pos = half > 0
        bad_any |= (width_pos & (acc <= 0).any(axis=2)).any(axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            contrib = half * (gl_w[None, None, :] / acc).sum(axis=2)
        for i in range(p1 - p0):
            tot += np.where(width_pos[:, i], contrib[:, i], 0.0)
    return tot, bad_any


def pole_distance_mps(st: _State, v_end, a_end):
    """Estimated distance from v_end to the next speed where a(v) = 0 (linear extrapolation) [m/s].

    inf where the acceleration does not fall at v_end.
    """
    eps = 1e-6
    a_before = state_accel(st, (v_end * (1.0 - eps))[:, None])
    slope = (a_end - a_before[:, 0]) / np.maximum(v_end * eps, 1e-300)
    with np.errstate(divide="ignore", invalid="ignore"):
        d = np.where(slope < 0, a_end / -slope, np.inf)
    return np.where(np.isfinite(d) & (d >= 0), d, np.inf)


def integrate_segment(st: _State, v_lo, v_hi):
    """Time to accelerate from v_lo to v_hi in a fixed gear state [s] (inf if a <= 0 on the way)."""
    n = v_lo.shape[0]
    a_end = state_accel(st, v_hi[:, None])[:, 0]
    ok = a_end > 0
    base = [v_lo] + _unit_breaks(st, v_lo, v_hi) + [v_hi]
    base = np.sort(np.stack(base, axis=1), axis=1)
    br = _with_crossings(st, base, v_hi)
    # grading towards v_hi where 1/a has a pole just beyond it
    length = v_hi - v_lo
    delta = pole_distance_mps(st, v_hi, a_end)
    with np.errstate(divide="ignore", invalid="ignore"):
        levels = np.ceil(np.log(GRADE_WIDTH * delta / np.maximum(length, 1e-300)) / np.log(GRADE_RATIO))
    levels = np.where(ok & (length > 0) & np.isfinite(levels), np.clip(levels, 0, GRADE_MAX_LEVELS), 0).astype(int)
    total = np.zeros(n)
    bad = np.zeros(n, dtype=bool)
    for lv in np.unique(levels):
        rows = np.nonzero(levels == lv)[0]
        sub = _take_state(st, rows) if rows.size < n else st
        e = br[rows]
        if lv > 0:
            grading = [(v_hi[rows] - length[rows] * GRADE_RATIO ** m)[:, None] for m in range(1, lv + 1)]
            e = np.sort(np.concatenate([e] + grading, axis=1), axis=1)
        total[rows], bad[rows] = _integrate_pieces(sub, e)
    ok &= ~bad
    return np.where(ok, total, np.inf)


# ----------------------------------------------------------------------------------------- shifts

def _shift_point(st: _State, which: str, v_lo, v_hi):
    """First speed in [v_lo, v_hi] where unit ``which``'s next gear accelerates at least as much (inf if none)."""
    n = v_lo.shape[0]
    nxt = _state(st.axles, st.body, st.g_front + (which == "front"), st.g_rear + (which == "rear"),
                 st.on_front, st.on_rear)
    col = lambda a: a[:, None]  # noqa: E731

    def holds(s1, s2, v):
        a1 = state_motor_accel(s1, v)
        a2 = state_motor_accel(s2, v)
        return a2 >= a1 - SHIFT_TIE * np.abs(a1)

    frac = np.linspace(0.0, 1.0, SHIFT_SAMPLES)[None, :]
    vs = col(v_lo) + (col(v_hi) - col(v_lo)) * frac
    h = holds(st, nxt, vs)
    anyh = h.any(axis=1)
    first = np.argmax(h, axis=1)
    out = np.full(n, np.inf)
    at_start = anyh & (first == 0)
    out[at_start] = v_lo[at_start]
    rows = np.nonzero(anyh & (first > 0))[0]
    if rows.size:
        s1, s2 = _take_state(st, rows), _take_state(nxt, rows)
        _, out[rows] = refine_first_true(lambda v: holds(s1, s2, v), vs[rows, first[rows] - 1],
                                         vs[rows, first[rows]], SHIFT_BISECT)
    return out


def _shift_phase(st: _State, which: str, v_start, target):
    """Speed after the shift of unit ``which`` (its torque interrupted for its shift time), and the time
    into the shift at which ``target`` is passed (inf if not) [m/s], [s]."""
    unit = getattr(st.axles, which)
    t_s = unit.shift_time_s
    on_f = st.on_front & (which != "front")
    on_r = st.on_rear & (which != "rear")
    ph = _state(st.axles, st.body, st.g_front, st.g_rear, on_f, on_r)
    alone = ~(on_f | on_r)
    v_end = np.array(v_start, dtype=float)
    t_hit = np.full(v_end.shape, np.inf)
    b = st.body
    if alone.any():
        m_c = ph.m_eff[alone]
        v_end[alone] = coast_speed_mps(v_start[alone], t_s[alone], m_c, b.mass_kg[alone] * G_N * b.crr[alone],
                                       b.q_n_s2_m2[alone])
    rows = np.nonzero(~alone)[0]
    if rows.size:
        sub = _take_state(ph, rows)
        h = t_s[rows] / SHIFT_RK_STEPS
        v = v_start[rows].copy()
        tt = np.zeros(rows.size)
        hit = np.full(rows.size, np.inf)

        def f(x):
            a = state_accel(sub, np.maximum(x, 0.0)[:, None])[:, 0]
            return np.where((x <= 0) & (a < 0), 0.0, a)

        for _ in range(SHIFT_RK_STEPS):
            k1 = f(v)
            k2 = f(v + 0.5 * h * k1)
            k3 = f(v + 0.5 * h * k2)
            k4 = f(v + h * k3)
            v_new = np.maximum(v + h / 6.0 * (k1 + 2 * k2 + 2 * k3 + k4), 0.0)
            crossed = np.isinf(hit) & (v < target[rows]) & (v_new >= target[rows])
            if crossed.any():
                # the time from this step's start to the target in the speed domain, t = integral dv / a(v)
                # (Gauss-Legendre on the short interval), not by interpolating the step linearly
                c = np.nonzero(crossed)[0]
                hit[c] = tt[c] + _time_between(_take_state(sub, c), v[c], target[rows][c])
            v = v_new
            tt = tt + h
        v_end[rows] = v
        t_hit[rows] = hit
    return v_end, t_hit


def _time_between(st: _State, v_a, v_b) -> np.ndarray:
    """Time to accelerate from ``v_a`` to ``v_b`` in one gear state, integral of dv / a(v) by
    `SHIFT_CROSS_NODES`-point Gauss-Legendre (a > 0 on the interval: within one Runge-Kutta step of a
    shift phase that ends above ``v_b``) [s]."""
    x, w = gauss_legendre(SHIFT_CROSS_NODES)
    half = 0.5 * (v_b - v_a)
    v = (v_a + half)[:, None] + half[:, None] * x[None, :]
    a = state_accel(st, v)
    with np.errstate(divide="ignore", invalid="ignore"):
        return half * np.sum(w[None, :] / a, axis=1)


# ----------------------------------------------------------------------------------------- the run

def accel_run(axles: Axles, body, target_mps, chunk: int = 20000) -> RunResult:
    """Acceleration run of every design to ``target_mps`` (per design or scalar) [m/s].

    ``axles`` and ``body`` hold one row per design (``body`` fields broadcast to (n,)).
    """
    n = axles.n
    target = np.broadcast_to(np.asarray(target_mps, dtype=float), (n,)).copy()
    max_shifts = int(max(1, np.max(axles.front.n_gears, initial=1) - 1 + np.max(axles.rear.n_gears, initial=1) - 1))
    res = RunResult(np.full(n, np.inf), np.full((n, max_shifts), -1), np.full((n, max_shifts), -1),
                    np.full((n, max_shifts), np.nan), np.full((n, max_shifts), np.nan))
    for s in range(0, n, chunk):
        sl = np.arange(s, min(n, s + chunk))
        _run_chunk(take_axles(axles, sl), take_fields(body, sl), target[sl], res, sl)
    return res


def _run_chunk(axles: Axles, body, target, res: RunResult, out_rows):
    """One chunk of `accel_run`: segments between shift events until every design finished or failed;
    results are written into ``res`` at rows ``out_rows``."""
    n = axles.n
    run = _RunState(np.zeros(n, dtype=np.int64), np.zeros(n, dtype=np.int64), np.zeros(n), np.zeros(n),
                    np.zeros(n, dtype=np.int64), res, out_rows)
    active = (target <= speed_cap_mps(axles) * (1 + 1e-12)) & (target <= body.speed_limit_mps)
    for _ in range(res.shift_axle.shape[1] + 2):
        rows = np.nonzero(active)[0]
        if rows.size == 0:
            break
        ax, bd = take_axles(axles, rows), take_fields(body, rows)
        st = _state(ax, bd, run.g_front[rows], run.g_rear[rows])
        v_lo, v_t = run.v0[rows], target[rows]
        shift_at = _next_shifts(st, axles.front.n_gears[rows], axles.rear.n_gears[rows], v_lo, v_t)
        v_end = np.minimum(v_t, np.minimum(shift_at["front"], shift_at["rear"]))
        seg = integrate_segment(st, v_lo, np.maximum(v_end, v_lo))
        t_new = run.t0[rows] + seg
        failed = ~np.isfinite(seg)
        finished = ~failed & (v_end >= v_t)
        res.time_s[out_rows[rows[finished]]] = t_new[finished]
        shifting = ~failed & ~finished
        # the front first when both shift points coincide to SHIFT_ORDER_TIE (identical units: rounding decides)
        which_f = shifting & (shift_at["front"] <= shift_at["rear"] * (1.0 + SHIFT_ORDER_TIE))
        active[rows[failed | finished]] = False
        for which, mask in (("front", which_f), ("rear", shifting & ~which_f)):
            idx = np.nonzero(mask)[0]
            if idx.size:
                done = _shift(run, _take_state(st, idx), which, rows[idx], v_end[idx], v_t[idx], t_new[idx])
                active[done] = False


@dataclass(frozen=True)
class _RunState:
    """Per-design progress of a chunk's run (arrays updated in place): current gears, start speed and
    time of the current segment, shifts made; and where the results go."""

    g_front: np.ndarray
    g_rear: np.ndarray
    v0: np.ndarray
    t0: np.ndarray
    k_shift: np.ndarray
    res: RunResult
    out_rows: np.ndarray


def _next_shifts(st: _State, n_front, n_rear, v_lo, v_t) -> dict:
    """Speed of each unit's next upshift in the current segment (inf: none before the target) [m/s]:
    the shift rule's point, or where its motor reaches its maximum speed in this gear."""
    shift_at = {}
    for which, g, ng in (("front", st.g_front, n_front), ("rear", st.g_rear, n_rear)):
        can = ng > g + 1
        s_at = np.full(v_lo.size, np.inf)
        if can.any():
            lim = gear_limit_mps(getattr(st.axles, which), st.axles.radius_m, g)
            hi = np.minimum(lim, v_t)
            cr = np.nonzero(can)[0]
            sp = _shift_point(_take_state(st, cr), which, v_lo[cr], np.maximum(hi[cr], v_lo[cr]))
            # forced shift where the motor reaches its maximum speed in this gear (before the target)
            s_at[cr] = np.where(np.isinf(sp) & (lim[cr] < v_t[cr]), lim[cr], sp)
        shift_at[which] = s_at
    return shift_at


def _shift(run: _RunState, sub: _State, which: str, glob, v_shift, v_t, t_shift) -> np.ndarray:
    """Record the upshift of unit ``which`` of designs ``glob`` (chunk rows) at ``v_shift``, reached at
    ``t_shift``; integrate the shift phase and start the next segment. Returns the chunk rows that
    passed the target during the shift (their time is written)."""
    res, out = run.res, run.out_rows
    v_after, t_hit = _shift_phase(sub, which, v_shift, v_t)
    kk = run.k_shift[glob]
    gears = run.g_front if which == "front" else run.g_rear
    res.shift_axle[out[glob], kk] = 0 if which == "front" else 1
    res.shift_from_gear[out[glob], kk] = gears[glob]
    res.shift_speed_mps[out[glob], kk] = v_shift
    res.shift_time_s[out[glob], kk] = t_shift
    run.k_shift[glob] += 1
    hit = np.isfinite(t_hit)
    res.time_s[out[glob[hit]]] = t_shift[hit] + t_hit[hit]
    run.t0[glob] = t_shift + getattr(sub.axles, which).shift_time_s
    run.v0[glob] = v_after
    gears[glob] += 1
    return glob[hit]


def accel_time_s(axles: Axles, body, target_mps, chunk: int = 20000) -> np.ndarray:
    """Time from rest to ``target_mps`` on the level [s] (inf when unreachable). See `accel_run`."""
    return accel_run(axles, body, target_mps, chunk).time_s


def time_bracket(axles: Axles, body, target_mps, nodes: int | None = None):
    """Proved lower and upper bounds of the 0-to-target time [s]: see `selector.physics.accel_bounds`."""
    from selector.physics import accel_bounds

    return accel_bounds.time_bracket(axles, body, target_mps, accel_bounds.BRACKET_NODES if nodes is None else nodes)
