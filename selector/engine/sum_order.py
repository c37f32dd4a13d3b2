"""Designs of a two-term objective (motor value + pair value) taken in batches of increasing value.

Cost and mass are sums of a motor value and a pair value (reducer + tyre_count x tyre [+ vehicle
mass]). With both lists sorted, the designs of one motor form a non-decreasing sequence in the pair
rank (floating-point addition is monotone), so the designs taken so far are a prefix of every
motor's sequence (``taken[a]`` pairs of motor rank a) and the least value not yet taken is the least
of the motors' next values. `SumOrderWalk.take` returns every design of one value band at once,
vectorised (a threshold T chosen so that the band holds about ``batch`` designs, by bisection on T
over per-motor `searchsorted` counts), instead of popping a heap one design at a time. Which band a
design falls in does not matter for correctness: the caller's proof uses `next_value`, computed from
the actual sums, which bounds every design not taken.

Motors are prepared lazily in rank order by the caller's ``prepare`` (it fills ``valid`` for its
chunk and returns how many motors are prepared): a motor is prepared before any design of value at or
above its least possible value m[a] + p[0] is taken or bounded.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

BAND_SLACK = 8
"""A band holds between ``batch`` and ``batch`` (1 + 1/BAND_SLACK) designs when the values allow [-]."""
BISECT_STEPS = 64
"""Bisection halvings of the band threshold, at most (a float interval is exhausted sooner) [-]."""


class SumOrderWalk:
    """Walk over (motor rank, pair rank) in increasing m[a] + p[b], valid motors only.

    Parameters
    ----------
    m_vals : motor values sorted non-decreasing [objective unit]
    p_vals : pair values sorted non-decreasing [objective unit]
    valid : bool array over motor ranks, filled by ``prepare`` (ranks not prepared yet are ignored)
    prepare : prepares the next chunk of motors (in rank order) and returns the count prepared so far
    """

    def __init__(self, m_vals, p_vals, valid: np.ndarray, prepare: Callable[[], int]):
        self.m = np.asarray(m_vals, dtype=float)
        self.p = np.asarray(p_vals, dtype=float)
        self.valid = valid
        self._prepare = prepare
        self.prepared = 0
        self.taken = np.zeros(self.m.size, dtype=np.int64)
        self.n_taken = 0
        self._state = None
        """(least value, its motor rank, live ranks) once settled (`_settled`); None after a change."""

    def _live(self) -> np.ndarray:
        """Prepared valid motor ranks with designs not taken yet."""
        k = self.prepared
        return np.flatnonzero(self.valid[:k] & (self.taken[:k] < self.p.size))

    def _next(self):
        """(least value not taken, its motor rank or -1, live ranks) over prepared motors."""
        idx = self._live()
        if idx.size == 0:
            return np.inf, -1, idx
        vals = self.m[idx] + self.p[self.taken[idx]]
        i = int(np.argmin(vals))
        return float(vals[i]), int(idx[i]), idx

    def _settled(self):
        """`_next` after preparing every motor whose least value m[a] + p[0] could come first; kept until
        the next `take` or preparation changes it."""
        if self._state is None:
            while True:
                state = self._next()
                if self.prepared < self.m.size and self.m[self.prepared] + self.p[0] <= state[0]:
                    self.prepared = self._prepare()
                    continue
                self._state = state
                break
        return self._state

    def next_value(self) -> float:
        """Least value of a valid design not taken yet (inf when none): a lower bound of every such design."""
        if self.p.size == 0:
            return np.inf
        return self._settled()[0]

    def _band(self, batch: int, limit: float, v0: float, a0: int, idx: np.ndarray):
        """(threshold T, per-motor counts of the live ranks ``idx``) of a band of about ``batch`` designs
        of the prepared motors, T <= ``limit``; ``a0`` is the rank of the motor of the least value ``v0``."""
        m, start = self.m[idx], self.taken[idx]

        def counts(t):
            return np.maximum(np.searchsorted(self.p, t - m, side="right") - start, 0)

        # the motor of v0 alone has min(batch, left) designs up to this threshold
        t = hi = min(limit, float(self.m[a0] + self.p[min(int(self.taken[a0]) + batch, self.p.size) - 1]))
        c = counts(hi)
        most = batch + batch // BAND_SLACK
        if int(c.sum()) > most:  # narrow the band to between batch and `most` designs
            lo = v0
            for _ in range(BISECT_STEPS):
                mid = 0.5 * (lo + hi)
                if not lo < mid < hi:
                    break
                c_mid = counts(mid)
                n = int(c_mid.sum())
                if n < batch:
                    lo = mid
                else:
                    hi, c = mid, c_mid
                    if n <= most:
                        break
            t = hi
        return t, c

    def take(self, batch: int, limit: float) -> tuple[np.ndarray, np.ndarray]:
        """The designs of the next value band: (motor ranks, pair ranks), about ``batch`` of them
        (at least one when `next_value` <= ``limit``), none above ``limit`` but for rounding.

        The band's threshold is found over the prepared motors; while the next unprepared motor could
        have a design within it, that chunk is prepared and the band found again (so motors are
        prepared only as far as the walk reaches)."""
        empty = np.empty(0, dtype=np.int64)
        v0 = self.next_value()
        if v0 == np.inf or not v0 <= limit:  # (no design left, even with an infinite limit)
            return empty, empty
        _, a0, idx = self._settled()
        while True:
            t, c = self._band(batch, limit, v0, a0, idx)
            if self.prepared < self.m.size and self.m[self.prepared] + self.p[0] <= t:
                self.prepared = self._prepare()
                idx = self._live()  # (v0 and its motor stay: the new motors' values are above v0)
                continue
            break
        self._state = None
        start = self.taken[idx]
        c[idx == a0] = np.maximum(c[idx == a0], 1)  # progress whatever the rounding of t - m
        total = int(c.sum())
        ranks = np.repeat(idx, c)
        offsets = np.arange(total) - np.repeat(np.cumsum(c) - c, c)
        pairs = np.repeat(start, c) + offsets
        self.taken[idx] += c
        self.n_taken += total
        return ranks, pairs
