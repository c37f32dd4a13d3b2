"""Acceleration-time search of two-unit studies: best-first over blocks of a k-d tree per axle.

The designs of a two-unit study are (front option, rear option, tyre), an option being a (motor,
reducer) pair allowed on that axle. Per axle and tyre column, the usable options are the leaves of a
k-d tree built lazily: a node is a set of options with aggregate extremes (largest wheel-torque and
power bounds, least and largest mass, least reflected rotor inertia, least cost, largest forces at
the required speeds). A block is (tyre column, front node, rear node); its bound is the certified
acceleration-time bound of `accel_block_bounds.block_time_bounds`, with each node's force envelope
at the bound's speed nodes

    F(v) <= min(A, B / v),   A = max_g eta_g T_pk G_g / r,   B = max_g eta_g P_pk,

valid for every option of the node at every speed (the wheel force in gear g is eta_g T(w) G_g / r
with T(w) <= T_pk and T(w) w <= P_pk); a node of at most `PROFILE_MAX` entries takes instead (the
lesser of that and) the largest of its options' own best-gear forces at the speed nodes, which
follows the motors' power decline and speed limits (each entry's forces are computed once, when
first needed). The left Riemann sum of dv / a_up over the speed nodes is then a lower bound of every
design's time (proof in `accel_block_bounds`). A child block's bound is at least its parent's (both
are valid; the larger is kept).

Blocks are taken best first. A block whose bound is above the pool's ``count``-th best (plus the tie
tolerance) is never opened (nor kept: the count-th best only falls), so every design in it is
provably worse; a block of at most `LEAF_PAIRS` designs is evaluated (cheap necessary conditions,
each design's own block bound from its options' forces, masses and inertias, the exact-physics time
bracket, then the exact evaluation of the designs that can still enter the pool); a larger one is
split, both nodes in half when both hold several options, else the larger one. A node splits along
the attribute with the largest weighted relative spread among A, B and mass (`SPLIT_WEIGHTS`), so
options of similar force and mass end up together and the bounds of deep blocks come close to the
designs' own times.
"""

from __future__ import annotations

import time

import numpy as np

from selector.engine.accel_block_bounds import block_time_bounds, option_force_profile
from selector.engine.evaluate import tie_tolerance
from selector.requirements import REL_TOL

LEAF_PAIRS = 256
"""Designs of a block evaluated without further splitting [-]."""
FIRST_BATCH = 8
"""Blocks taken from the queue in the first round (later rounds double, up to `MAX_BATCH`) [-]."""
MAX_BATCH = 512
"""Most blocks taken from the queue in one round [-]."""
MERGE = 1 << 15
"""New blocks the queue keeps unsorted before merging them into its sorted array [-]."""
SPLIT_WEIGHTS = (0.25, 1.0, 2.0)
"""Weights of the relative spreads of A, B and mass (over the vehicle's own mass) when a node picks
the attribute it splits along [-]. They shape the tree only, never a bound; measured on the two-unit
benchmark studies (equal weights opened 1.6 (1e9) and 2.8 (1e11) times as many blocks). With a
budget, cost is a fourth attribute (its spread over the budget), weighted by the share of option
pairs the budget rules out (`_over_budget_share`): measured on the vineyard AWD frontier's min-time
searches (budgets ruling out 86-100 % of the pairs), 2,659 -> 1,607 blocks at a budget of 3,000 and
42,620 -> 12,270 at 5,454; the benchmark's synthetic studies (6 % ruled out) barely change."""
PROFILE_MAX = 64
"""Nodes of at most this many entries carry the largest of their options' own force profiles at the
speed nodes (larger ones only min(A, B / v), cheaper to aggregate) [-]."""
COARSE = 4
"""Leaf designs are bounded on every COARSE-th speed node first, on all of them if still needed [-]."""


def _ranges(lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Concatenation of the integer ranges [lo_i, hi_i) (vectorised)."""
    sizes = hi - lo
    total = int(sizes.sum())
    starts = np.cumsum(sizes) - sizes
    return np.repeat(lo - starts, sizes) + np.arange(total)


class _Growing:
    """Columns of a table that grows by appending rows (amortised doubling)."""

    def __init__(self, **dtypes):
        self.n = 0
        self._cols = {k: np.empty(64, dtype=t) for k, t in dtypes.items()}

    def append(self, **values) -> np.ndarray:
        """Append rows (equal-length arrays per column); returns their row numbers."""
        m = len(next(iter(values.values())))
        need = self.n + m
        for k, col in self._cols.items():
            if need > col.size:
                grown = np.empty(max(need, 2 * col.size), dtype=col.dtype)
                grown[:self.n] = col[:self.n]
                self._cols[k] = col = grown
            col[self.n:need] = values[k]
        rows = np.arange(self.n, need)
        self.n = need
        return rows

    def __getattr__(self, name):
        cols = self.__dict__.get("_cols", {})
        if name in cols:
            return cols[name][:self.n]
        raise AttributeError(name)


class _Queue:
    """Blocks waiting to be opened, taken least bound first in batches: a sorted array and a small
    unsorted buffer of new blocks, merged into the array when it grows past `MERGE` (taking a batch
    then costs array operations on the batch and the buffer, not one heap operation per block)."""

    def __init__(self):
        self._b, self._i, self._pos = np.empty(0), np.empty(0, dtype=np.int64), 0
        self._buf_b, self._buf_i = np.empty(0), np.empty(0, dtype=np.int64)

    def push(self, bounds: np.ndarray, ids: np.ndarray) -> None:
        """Add blocks ``ids`` with their bounds [s]."""
        self._buf_b = np.concatenate([self._buf_b, bounds])
        self._buf_i = np.concatenate([self._buf_i, ids])
        if self._buf_b.size > MERGE:
            order = np.argsort(self._buf_b, kind="stable")
            bb, bi = self._buf_b[order], self._buf_i[order]
            main_b, main_i = self._b[self._pos:], self._i[self._pos:]
            at = np.searchsorted(main_b, bb, side="right")
            self._b, self._i, self._pos = np.insert(main_b, at, bb), np.insert(main_i, at, bi), 0
            self._buf_b, self._buf_i = np.empty(0), np.empty(0, dtype=np.int64)

    def least(self) -> float:
        """Least bound of the blocks waiting (inf: none) [s]."""
        head = self._b[self._pos] if self._pos < self._b.size else np.inf
        return float(min(head, self._buf_b.min(initial=np.inf)))

    def take(self, size: int, limit: float) -> tuple[np.ndarray, np.ndarray]:
        """The (up to) ``size`` blocks of least bound among those at most ``limit``: (ids, bounds)."""
        n_main = min(self._b.size - self._pos, size)  # later array entries cannot be among the least
        cand_b = np.concatenate([self._b[self._pos:self._pos + n_main], self._buf_b])
        cand_i = np.concatenate([self._i[self._pos:self._pos + n_main], self._buf_i])
        order = np.argsort(cand_b, kind="stable")[:size]  # the array's share is a prefix of its slice
        order = order[cand_b[order] <= limit]
        from_main = order < n_main
        self._pos += int(from_main.sum())
        rest = np.ones(self._buf_b.size, dtype=bool)
        rest[order[~from_main] - n_main] = False
        self._buf_b, self._buf_i = self._buf_b[rest], self._buf_i[rest]
        return cand_i[order], cand_b[order]


class _Rows:
    """A table of float rows of one width that grows by appending rows (amortised doubling)."""

    def __init__(self, width: int):
        self.n = 0
        self._data = np.empty((64, width))

    def append(self, rows: np.ndarray) -> np.ndarray:
        """Append rows (m, width); returns their row numbers."""
        need = self.n + rows.shape[0]
        if need > self._data.shape[0]:
            grown = np.empty((max(need, 2 * self._data.shape[0]), self._data.shape[1]))
            grown[:self.n] = self._data[:self.n]
            self._data = grown
        self._data[self.n:need] = rows
        out = np.arange(self.n, need)
        self.n = need
        return out

    @property
    def rows(self) -> np.ndarray:
        return self._data[:self.n]


_AGG_MAX = ("a", "b", "m_hi", "fc", "fa", "f0")
_AGG_MIN = ("m_lo", "j", "cost")


class _Side:
    """One axle's usable (option, tyre column) entries and their lazily built k-d tree.

    Entries are grouped by tyre column; a node is a contiguous range of ``perm`` (positions of
    entries) within one column's group, with the aggregates of its entries.
    """

    def __init__(self, parts, table, ok: np.ndarray, radius_m: np.ndarray, mass_ref_kg: float, speeds_mps: np.ndarray,
                 cost_ref: float = 1.0, cost_weight: float = 0.0):
        col, opt = np.nonzero(ok.T)  # column-major: entries grouped by tyre column, options ascending
        self.col, self.opt = col, opt
        self.parts, self.options, self.radius_m, self.speeds = parts, table.options, radius_m, speeds_mps
        self.profiles = _Rows(speeds_mps.size)  # per node (nodes of at most PROFILE_MAX entries)
        self.entry_rows = np.full(opt.size, -1, dtype=np.int64)  # per entry, filled when first needed
        self.entry_profile = _Rows(speeds_mps.size)
        self.attr = {
            "a": table.torque0_nm[opt] / radius_m[col],
            "b": table.power_eta_w[opt],
            "m": table.mass[opt],
            "j": table.j_eta_e2_min[opt, col],
            "cost": table.cost[opt],
            "fc": table.fc_top[opt, col] if table.fc_top is not None else np.zeros(opt.size),
            "fa": table.f_acc[opt, col] if table.f_acc is not None else np.zeros(opt.size),
            "f0": table.f0[opt, col],
        }
        self.mass_ref = max(float(mass_ref_kg), 1e-9)
        self.cost_ref, self.cost_weight = max(float(cost_ref), 1e-9), float(cost_weight)
        self.perm = np.arange(opt.size)
        self.nodes = _Growing(lo=np.int64, hi=np.int64, child=np.int64, child2=np.int64, profile=np.int64,
                              **{k: float for k in _AGG_MAX + _AGG_MIN})
        starts = np.searchsorted(col, np.arange(ok.shape[1]))
        ends = np.searchsorted(col, np.arange(ok.shape[1]), side="right")
        self.root = np.full(ok.shape[1], -1, dtype=np.int64)
        have = np.nonzero(ends > starts)[0]
        if have.size:
            self.root[have] = self._make(starts[have], ends[have])

    def _make(self, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """New nodes over perm[lo:hi] (arrays), aggregates by segment reductions; returns node ids."""
        sizes = hi - lo
        pos = self.perm[_ranges(lo, hi)]
        starts = np.cumsum(sizes) - sizes
        at = self.attr
        agg = {"a": np.maximum.reduceat(at["a"][pos], starts), "b": np.maximum.reduceat(at["b"][pos], starts),
               "m_hi": np.maximum.reduceat(at["m"][pos], starts), "fc": np.maximum.reduceat(at["fc"][pos], starts),
               "fa": np.maximum.reduceat(at["fa"][pos], starts), "f0": np.maximum.reduceat(at["f0"][pos], starts),
               "m_lo": np.minimum.reduceat(at["m"][pos], starts), "j": np.minimum.reduceat(at["j"][pos], starts),
               "cost": np.minimum.reduceat(at["cost"][pos], starts)}
        profile = np.full(lo.size, -1)
        small = np.nonzero(sizes <= PROFILE_MAX)[0]
        if small.size:
            profile[small] = self._profiles(lo[small], hi[small])
        return self.nodes.append(lo=lo, hi=hi, child=np.full(lo.size, -1), child2=np.full(lo.size, -1),
                                 profile=profile, **agg)

    def _profiles(self, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
        """Rows of `profiles` holding, per node perm[lo:hi], the largest of its entries' best-gear wheel
        forces at the speed nodes [N]."""
        sizes = hi - lo
        force = self.entry_profiles(self.perm[_ranges(lo, hi)])
        return self.profiles.append(np.maximum.reduceat(force, np.cumsum(sizes) - sizes, axis=0))

    def size(self, nodes: np.ndarray) -> np.ndarray:
        """Entries per node [-]."""
        return self.nodes.hi[nodes] - self.nodes.lo[nodes]

    def children(self, nodes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(first child, second child) of nodes of at least two entries, splitting those not split yet."""
        new = np.unique(nodes[self.nodes.child[nodes] < 0])
        if new.size:
            self._arrange(new)
            lo, hi = self.nodes.lo[new], self.nodes.hi[new]
            mid = lo + (hi - lo) // 2
            made = self._make(np.concatenate([lo, mid]), np.concatenate([mid, hi]))
            self.nodes.child[new] = made[:new.size]
            self.nodes.child2[new] = made[new.size:]
        return self.nodes.child[nodes], self.nodes.child2[nodes]

    def _arrange(self, nodes: np.ndarray) -> None:
        """Order each node's entries by its attribute of largest weighted relative spread (A, B or mass,
        weights `SPLIT_WEIGHTS`)."""
        nd = self.nodes
        lo, hi = nd.lo[nodes], nd.hi[nodes]
        where = _ranges(lo, hi)
        starts = np.cumsum(hi - lo) - (hi - lo)
        with np.errstate(divide="ignore", invalid="ignore"):
            pos = self.perm[where]
            owner = np.repeat(np.arange(nodes.size), hi - lo)
            spread = []
            for key, weight in zip(("a", "b"), SPLIT_WEIGHTS[:2], strict=True):
                v = self.attr[key][pos]
                top = np.maximum.reduceat(v, starts)
                bot = np.minimum.reduceat(v, starts)
                spread.append(weight * np.where(top > 0, (top - bot) / top, 0.0))
            spread.append(SPLIT_WEIGHTS[2] * (nd.m_hi[nodes] - nd.m_lo[nodes]) / self.mass_ref)
            values = [self.attr["a"][pos], self.attr["b"][pos], self.attr["m"][pos]]
            if self.cost_weight > 0:
                v = self.attr["cost"][pos]
                spread.append(self.cost_weight * (np.maximum.reduceat(v, starts) - nd.cost[nodes]) / self.cost_ref)
                values.append(v)
        pick = np.argmax(np.stack(spread), axis=0)  # 0: A, 1: B, 2: mass, 3: cost
        value = np.choose(pick[owner], values)
        order = np.lexsort((pos, value, owner))  # ties in part order
        self.perm[where] = pos[order]

    def entry_profiles(self, entries: np.ndarray, every: int = 1) -> np.ndarray:
        """Best-gear wheel force of entries (positions in ``opt``/``col``) at every ``every``-th speed
        node, (entries, speeds) [N]; each entry's is computed once and kept."""
        new = np.unique(entries[self.entry_rows[entries] < 0])
        if new.size:
            force = option_force_profile(self.parts, self.options[self.opt[new]], self.radius_m[self.col[new]],
                                         self.speeds)
            self.entry_rows[new] = self.entry_profile.append(force)
        return self.entry_profile.rows[:, ::every][self.entry_rows[entries]]

    def envelope(self, nodes: np.ndarray) -> np.ndarray:
        """Upper bounds of the wheel force of every entry of the nodes at the speed nodes, (nodes, speeds)
        [N]: min(A, B / v), and at most the largest of the entries' own forces where tabulated."""
        with np.errstate(divide="ignore"):
            env = np.minimum(self.nodes.a[nodes][:, None], self.nodes.b[nodes][:, None] / self.speeds[None, :])
        row = self.nodes.profile[nodes]
        have = np.nonzero(row >= 0)[0]
        if have.size:
            env[have] = np.minimum(env[have], self.profiles.rows[row[have]])
        return env

    def extremes(self, nodes: np.ndarray) -> dict:
        """Aggregates read by `TwoUnitSearch.requirement_sums`: largest forces, least cost."""
        nd = self.nodes
        return {"f0": nd.f0[nodes], "cost": nd.cost[nodes], "fc": nd.fc[nodes], "fa": nd.fa[nodes]}


def run_accel_blocks(search, tf, tr, front_ok: np.ndarray, rear_ok: np.ndarray):
    """accel_time objective of a two-unit study (see the module docstring); returns `search._finish`."""
    p = search.parts
    v = p.problem.vehicle
    radius = p.tyres.radius_m[search.tyres]
    speeds = search.nodes()
    budget = search.req.budget
    w = 0.0 if budget is None else _over_budget_share(p, tf, tr, front_ok, rear_ok, budget)
    front = _Side(p, tf, front_ok, radius, v.mass_kg, speeds, budget or 1.0, w)
    rear = front if (tf is tr and np.array_equal(front_ok, rear_ok)) else _Side(p, tr, rear_ok, radius, v.mass_kg,
                                                                                  speeds, budget or 1.0, w)
    blocks = _Growing(col=np.int64, f=np.int64, r=np.int64)
    queue = _Queue()
    have = np.nonzero((front.root >= 0) & (rear.root >= 0))[0]
    _push(search, front, rear, blocks, queue, have, front.root[have], rear.root[have], np.zeros(have.size))
    status = "optimal"
    rounds = 0
    while queue.least() < np.inf:
        kth = search.kth()
        limit = kth + tie_tolerance(kth)
        if queue.least() > limit:
            break
        if search.deadline is not None and time.perf_counter() > search.deadline:
            status = "time_limit"
            break
        size = min(MAX_BATCH, FIRST_BATCH * 2 ** min(rounds, 10))
        rounds += 1
        taken, bounds = queue.take(size, limit)
        search.stats["blocks"] += taken.size
        col, fn, rn = blocks.col[taken], blocks.f[taken], blocks.r[taken]
        nf, nr = front.size(fn), rear.size(rn)
        leaf = nf * nr <= LEAF_PAIRS
        if leaf.any():
            _evaluate_leaves(search, tf, tr, front, rear, col[leaf], fn[leaf], rn[leaf], bounds[leaf])
        inner = ~leaf
        if inner.any():
            _split(search, front, rear, blocks, queue, col[inner], fn[inner], rn[inner], bounds[inner])
    return search._finish(status, queue.least())


def _over_budget_share(parts, tf, tr, front_ok, rear_ok, budget: float) -> float:
    """Share of the (usable front option, usable rear option) pairs whose cost with the cheapest tyres
    exceeds the budget [-]: the weight of the cost spread when a node picks its split attribute (a
    budget that rules most pairs out is worth separating by cost: blocks of dear options then fail it
    whole; a loose one is not)."""
    f = np.sort(tf.cost[front_ok.any(axis=1)])
    r = np.sort(tr.cost[rear_ok.any(axis=1)])
    if f.size == 0 or r.size == 0:
        return 0.0
    rest = budget * (1 + 4 * REL_TOL) - parts.problem.vehicle.tyre_count * float(parts.tyres.cost.min())
    over = r.size - np.searchsorted(r, rest - f, side="right")
    return float(over.sum()) / (f.size * r.size)


def _split(search, front, rear, blocks, queue, col, fn, rn, parent_bound):
    """Replace blocks by their children: both nodes halved when both hold several options, else the
    larger one."""
    nf, nr = front.size(fn), rear.size(rn)
    both = (nf > 1) & (nr > 1)
    f_only = ~both & (nf >= nr)
    r_only = ~both & ~f_only
    cols, fs, rs, pb = [], [], [], []
    split_f = both | f_only
    split_r = both | r_only
    f1 = f2 = r1 = r2 = None
    if split_f.any():
        f1, f2 = front.children(fn[split_f])
    if split_r.any():
        r1, r2 = rear.children(rn[split_r])
    fa = np.full((col.size, 2), -1, dtype=np.int64)
    ra = np.full((col.size, 2), -1, dtype=np.int64)
    fa[:, 0] = fa[:, 1] = fn
    ra[:, 0] = ra[:, 1] = rn
    if f1 is not None:
        fa[split_f, 0], fa[split_f, 1] = f1, f2
    if r1 is not None:
        ra[split_r, 0], ra[split_r, 1] = r1, r2
    for a in (0, 1):
        for b in (0, 1):
            # a block split on one side only has two children: (a, 0) for the front, (0, b) for the rear
            use = both | (f_only & (b == 0)) | (r_only & (a == 0))
            cols.append(col[use])
            fs.append(fa[use, a])
            rs.append(ra[use, b])
            pb.append(parent_bound[use])
    _push(search, front, rear, blocks, queue, np.concatenate(cols), np.concatenate(fs), np.concatenate(rs),
          np.concatenate(pb))


def _push(search, front, rear, blocks, queue, col, fn, rn, parent_bound):
    """Bound new blocks (at least the parent's bound) and push those that can hold a design."""
    if col.size == 0:
        return
    p = search.parts
    v = p.problem.vehicle
    fnd, rnd = front.nodes, rear.nodes
    m_lo = v.mass_kg + fnd.m_lo[fn] + rnd.m_lo[rn] + v.tyre_count * p.tyres.mass_kg[search.tyres[col]]
    ef, er = front.extremes(fn), rear.extremes(rn)
    # the groups' extremes: largest forces, least mass and cost bound every design of the block pair
    possible = search.requirement_sums(col, m_lo, ef["fc"] + er["fc"], ef["fa"] + er["fa"], ef["f0"] + er["f0"],
                                       ef["cost"] + er["cost"])
    keep = np.nonzero(possible)[0]
    if keep.size == 0:
        return
    col, fn, rn, parent_bound = col[keep], fn[keep], rn[keep], parent_bound[keep]
    bound = block_time_bounds(search, col, front.envelope(fn), fnd.m_lo[fn], fnd.m_hi[fn], fnd.j[fn],
                              rear.envelope(rn), rnd.m_lo[rn], rnd.m_hi[rn], rnd.j[rn])
    bound = np.maximum(bound, parent_bound)
    search.stats["refined"] += col.size
    # the pool's count-th best only falls, so a block above it (and the tie tolerance) now is never opened
    kth = search.kth()
    fin = bound <= kth + tie_tolerance(kth) if np.isfinite(kth) else np.isfinite(bound)
    queue.push(bound[fin], blocks.append(col=col[fin], f=fn[fin], r=rn[fin]))


def _evaluate_leaves(search, tf, tr, front, rear, col, fn, rn, bound):
    """Every design of small blocks: cheap necessary conditions, the design's own block bound (its
    options' force profiles, masses and inertias) on a coarse partition, then on every speed node,
    then the exact evaluation in order of those bounds, skipping designs whose exact-physics time
    bracket exceeds the pool's count-th best."""
    nf, nr = front.size(fn), rear.size(rn)
    pairs = nf * nr
    block = np.repeat(np.arange(col.size), pairs)
    within = np.arange(int(pairs.sum())) - np.repeat(np.cumsum(pairs) - pairs, pairs)
    ef = front.perm[front.nodes.lo[fn][block] + within // nr[block]]
    er = rear.perm[rear.nodes.lo[rn][block] + within % nr[block]]
    fi, ri = front.opt[ef], rear.opt[er]
    kk, lb = col[block], bound[block]
    kth = search.kth()
    for stage in ("conditions", "coarse", "fine"):
        if stage == "conditions":
            keep = np.nonzero(search.conditions(tf, fi, tr, ri, kk))[0]
        else:  # each design's own bound (on every COARSE-th speed node first)
            every = COARSE if stage == "coarse" else 1
            mf, mr = front.attr["m"][ef], rear.attr["m"][er]
            own = block_time_bounds(search, kk, front.entry_profiles(ef, every), mf, mf, front.attr["j"][ef],
                                    rear.entry_profiles(er, every), mr, mr, rear.attr["j"][er], every=every)
            lb = np.maximum(lb, own)
            keep = np.nonzero(lb <= kth + tie_tolerance(kth))[0]
        if keep.size == 0:
            return
        fi, ri, kk, lb, ef, er = fi[keep], ri[keep], kk[keep], lb[keep], ef[keep], er[keep]
    keys = search._keys(tf, fi, tr, ri, kk)
    search._evaluate(keys, lb, fine=search._point_bounds_staged)
