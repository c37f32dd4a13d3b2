"""Range-minimum queries over a fixed array (sparse table): O(n log n) build, O(1) vectorised queries."""

from __future__ import annotations

import numpy as np


class RangeMin:
    """Minimum of ``values[a:b]`` for many half-open ranges at once (inf for an empty range)."""

    def __init__(self, values):
        v = np.asarray(values, dtype=float)
        levels = [v]
        k = 1
        while 2 * k <= v.size:
            prev = levels[-1]
            levels.append(np.minimum(prev[:-k], prev[k:]))
            k *= 2
        # one padded (levels, n) table so that a query is one gather, whatever the ranges' lengths
        self.table = np.full((len(levels), max(v.size, 1)), np.inf)
        for lv, arr in enumerate(levels):
            self.table[lv, :arr.size] = arr

    def query(self, a, b) -> np.ndarray:
        """min(values[a:b]) per pair of index arrays (inf where a >= b)."""
        a = np.asarray(a, dtype=np.int64)
        b = np.asarray(b, dtype=np.int64)
        a, b = np.broadcast_arrays(a, b)
        n = b - a
        ok = n > 0
        if not ok.any():
            return np.full(n.shape, np.inf)
        n_safe = np.where(ok, n, 1)
        lv = np.frexp(n_safe.astype(float))[1] - 1  # floor(log2(n)), exact for integers
        span = np.left_shift(1, lv)
        a_s = np.where(ok, a, 0)
        b_s = np.where(ok, b - span, 0)
        out = np.minimum(self.table[lv, a_s], self.table[lv, b_s])
        return np.where(ok, out, np.inf)
