"""Range-minimum queries over a fixed array (sparse table): O(n log n) build, O(1) vectorised queries."""

from __future__ import annotations

import numpy as np


class RangeMin:
    """Minimum of ``values[a:b]`` for many half-open ranges at once (inf for an empty range)."""

    def __init__(self, values):
        v = np.asarray(values, dtype=float)
        self.levels = [v]
        k = 1
        while 2 * k <= v.size:
            prev = self.levels[-1]
            self.levels.append(np.minimum(prev[:-k], prev[k:]))
            k *= 2

    def query(self, a, b) -> np.ndarray:
        """min(values[a:b]) per pair of index arrays (inf where a >= b)."""
        a = np.asarray(a, dtype=np.int64)
        b = np.asarray(b, dtype=np.int64)
        n = b - a
        out = np.full(np.broadcast_shapes(a.shape, b.shape), np.inf)
        ok = n > 0
        if not ok.any():
            return out
        lv = np.zeros(n.shape, dtype=np.int64)
        lv[ok] = np.floor(np.log2(n[ok])).astype(np.int64)
        for level in np.unique(lv[ok]):
            sel = ok & (lv == level)
            tab = self.levels[level]
            span = 1 << int(level)
            out[sel] = np.minimum(tab[a[sel]], tab[b[sel] - span])
        return out
