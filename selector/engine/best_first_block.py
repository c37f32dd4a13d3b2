"""Exact evaluation of one block of the single-axle search (`best_first.SingleAxleSearch` inherits it):
a motor's admissible reducer-tyre pairs with their key values, evaluated best key first in growing
chunks until no pair left can improve the pool."""

from __future__ import annotations

import numpy as np

from selector.engine.best_first_bounds import CELLS, SUBCELLS
from selector.engine.evaluate import order_best, screen, tie_tolerance
from selector.requirements import REL_TOL

FIRST_CHUNK = 256
"""Designs of a block evaluated in its first chunk (later chunks double) [-]."""
FIRST_CHUNK_TIME = 2048
"""The same for the accel_time objective, where one exact integration call costs about as much for
one design as for a few hundred (measured), and the bracket cut-off drops most designs first [-]."""


class BlockEvaluation:
    """Block evaluation of `SingleAxleSearch` (a mixin: it reads and updates the search's own state)."""

    def _block(self, pos: int, cell_lb=None):
        """(candidate pairs, key values) of motor ``pos``'s admissible designs that can still count:
        cost and mass: exact values; time: the bound of their sub-cell, or their gear-by-gear bound
        for a multi-speed pair (pairs whose bound misses accel_time_s dropped). None when none is left."""
        parts, p = self.parts, self.pairs
        i = int(self.motors[pos])
        cand = self.affordable(i, self.candidates(pos))
        if cand.size == 0:
            return None
        limit = self.time_limit_s
        if self.accel and self.small:
            # a small study: each design's own certified bound (no cells; see `SMALL_DESIGNS`); designs
            # above accel_time_s or, under the accel_time objective, the pool's count-th best cannot count
            # (the coarse pass first only against an incumbent: accel_time_s alone drops few designs)
            kth = self.kth() if self.objective == "accel_time" else np.inf
            cut = min(limit, kth * (1 + 4 * REL_TOL))
            t_cell = self._design_time_bounds(np.full(cand.size, i, dtype=np.int64), cand,
                                              cut=cut if np.isfinite(kth) else np.inf)
            keep = t_cell <= cut
            cand, t_cell = cand[keep], t_cell[keep]
        elif self.accel:
            # sub-cell bounds: SUBCELLS per cell of the refinement grid, only where the cell can count
            fine = self.cell_edges(CELLS * SUBCELLS)
            sub = np.clip(np.searchsorted(fine, p.l_first[cand], side="right") - 1, 0, CELLS * SUBCELLS - 1)
            multi = p.multi[cand]
            used = np.unique(sub[~multi])
            t_sub = np.full(CELLS * SUBCELLS, np.inf)
            if used.size:
                if cell_lb is not None:
                    used = used[cell_lb[used // SUBCELLS] <= limit]
                if used.size:
                    t_sub[used] = self._subcell_bounds(pos, cand[~multi], sub[~multi], used, fine)
            t_cell = np.where(multi, 0.0, t_sub[sub])
            if multi.any():
                mc = np.nonzero(multi)[0]
                t_cell[mc] = self.gear_time_bound(np.full(mc.size, pos), p.gear_l[cand[mc]])
            keep = t_cell <= limit
            cand, t_cell = cand[keep], t_cell[keep]
        if cand.size == 0:
            return None
        if self.objective == "cost":
            key_val = parts.motors.cost[i] + p.cost[cand]
        elif self.objective == "mass":
            key_val = parts.problem.vehicle.mass_kg + parts.motors.mass_kg[i] + p.mass[cand]
        if self.objective in ("cost", "mass") and parts.problem.energy is not None \
                and parts.problem.requirements.range_km is not None:
            key_val = key_val + self._cell_battery(pos, cand, "cost" if self.objective == "cost" else "mass")
        if self.objective in ("cost", "mass"):
            pass
        elif self.objective == "energy":
            key_val = self._cell_battery(pos, cand, "energy")
        else:
            key_val = t_cell
        return cand, key_val

    # A little over 60 lines: the chunk loop of one block with its stop rule inline (see `_block`).
    def evaluate_motor(self, pos: int, cell_lb=None):
        """Evaluate motor ``pos``'s admissible designs exactly, best pair bound first, until provably done
        (with the blocks in ``self.pending``, (pos, cell bounds) pairs, merged into one block).

        Pairs are ordered by a lower bound of their objective (cost and mass: exact; time: the bound
        of their sub-cell, or the gear-by-gear bound for a multi-speed pair) and evaluated in growing
        chunks by `evaluate.screen` (with the accel_time objective, the best time found so far as
        its cut-off). The loop stops when the next key value exceeds the pool's ``count``-th best (or
        this block's ``per_motor``-th best) beyond the tie tolerance: every pair after it is no better.
        Merging blocks (accel_time only, where one exact integration call costs about as much for
        one design as for a few hundred) evaluates their pairs in one order; it changes no bound.
        """
        parts, p = self.parts, self.pairs
        blocks = [(pos, cell_lb)] + list(self.pending)
        self.pending = []
        mot, cands, vals = [], [], []
        for q, cl in blocks:
            got = self._block(q, cl)
            if got is not None:
                mot.append(np.full(got[0].size, int(self.motors[q]), dtype=np.int64))
                cands.append(got[0])
                vals.append(got[1])
        if not cands:
            return
        mot, cand, key_val = np.concatenate(mot), np.concatenate(cands), np.concatenate(vals)
        order = np.lexsort((p.k[cand], p.j[cand], mot, key_val))
        mot, cand, key_val = mot[order], cand[order], key_val[order]
        found_v, found_k = [], []
        start, size = 0, FIRST_CHUNK if self.objective != "accel_time" else FIRST_CHUNK_TIME
        limit = self.time_limit_s
        while start < cand.size:
            nxt = key_val[start]
            kth = self.kth()
            if nxt > kth + tie_tolerance(kth):
                break
            if start > 0 and self.expired():  # the rest of the block is bounded by its next key value
                self.unfinished = min(self.unfinished, float(nxt))
                break
            slice_kth = np.inf
            if found_v:
                fv = np.concatenate(found_v)
                if fv.size >= self.per_slice:
                    fk = np.concatenate(found_k)
                    slice_kth = float(fv[order_best(fv, fk, self.per_slice)[-1]])
                    if nxt > slice_kth + tie_tolerance(slice_kth):
                        break
            stop = min(cand.size, start + size)
            chunk = cand[start:stop]
            ok_chunk = None
            if self.objective in ("accel_time", "energy"):
                # the chunk's key values are not sorted beyond their cell bound: keep those that can still count
                ok_chunk = key_val[start:stop] <= min(kth, slice_kth) * (1 + 4 * REL_TOL)
                chunk = chunk[ok_chunk]
            cutoff = None
            if self.objective == "accel_time" and np.isfinite(min(kth, slice_kth)):
                cutoff = min(kth, slice_kth) * (1 + 4 * REL_TOL)
            mot_c = mot[start:stop][ok_chunk] if ok_chunk is not None else mot[start:stop]
            if self.accel and not self.small and chunk.size and (cutoff is not None or np.isfinite(limit)):
                # each design's own certified time bound (its L, mass, efficiency and rolling
                # resistance): designs above the cut-off or accel_time_s cannot count
                cut = min(limit, np.inf if cutoff is None else cutoff)
                t_own = self._design_time_bounds(mot_c, chunk, cut=np.inf if cutoff is None else cut)
                keep = t_own <= cut
                chunk, mot_c = chunk[keep], mot_c[keep]
            if chunk.size:
                keys = parts.single_keys(mot_c, p.j[chunk], p.k[chunk])
                ok, obj = screen(parts, keys, objective=self.objective, accel_cutoff=cutoff,
                                 keep_best=self.count if self.objective == "accel_time"
                                 and self.per_slice == self.count else None)
                self.stats["evaluated"] += chunk.size
                if ok.any():
                    found_v.append(obj[ok])
                    found_k.append(keys[ok])
            start, size = stop, size * 2
        if found_v:
            self._add(np.concatenate(found_v), np.concatenate(found_k))
