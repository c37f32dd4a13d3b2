"""Reducer-tyre pairs of a single-axle study sorted by log-gearing L = ln(G/r), grouped by reducer rating
class, with range-minimum tables of their values (the block bounds of `best_first` query them).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from selector.engine import bounds as B
from selector.engine.parts import PartTables
from selector.engine.rmq import RangeMin


def multi_in_windows(gear_l, lo_1, hi_1, *speed_windows, rows: bool = False) -> np.ndarray:
    """(motors, pairs) bool: the pair's first gear in the motor's [lo_1, hi_1] and, for each (lo, hi)
    of ``speed_windows``, some gear of the pair in [lo, hi] (window arrays (motors,); ``gear_l``
    (pairs, G), L of each gear, NaN beyond the gear count). ``rows``: (n,) for n (motor, pair) rows
    (``gear_l`` (n, G), windows (n,))."""
    gl = np.asarray(gear_l, dtype=float)
    if not rows:
        gl = gl[None, :, :]
        lo_1, hi_1 = np.asarray(lo_1)[:, None], np.asarray(hi_1)[:, None]
        speed_windows = tuple((np.asarray(lo)[:, None], np.asarray(hi)[:, None]) for lo, hi in speed_windows)
    l1 = gl[..., 0]
    ok = (l1 >= lo_1) & (l1 <= hi_1)
    with np.errstate(invalid="ignore"):
        for lo, hi in speed_windows:
            ok &= ((gl >= lo[..., None]) & (gl <= hi[..., None])).any(axis=-1)
    return ok


@dataclass
class _Class:
    """Single-speed pairs of one reducer rating class, sorted by L, with range-minimum tables of their
    values (each built on first use: L ranges alone, e.g. the motors' hulls, need none)."""

    torque_nm: float
    speed_rad_s: float
    pairs: np.ndarray
    """Pair positions, sorted by L."""
    l_sorted: np.ndarray
    table: PairTable = field(repr=False, compare=False)
    """The pair table the values come from."""

    @cached_property
    def cost(self) -> RangeMin:
        return RangeMin(self.table.cost[self.pairs])

    @cached_property
    def mass(self) -> RangeMin:
        return RangeMin(self.table.mass[self.pairs])

    @cached_property
    def crr(self) -> RangeMin:
        return RangeMin(self.table.crr[self.pairs])

    @cached_property
    def neg_eta(self) -> RangeMin:
        """-(best gear efficiency), so that its range minimum is the best efficiency's negative."""
        return RangeMin(-self.table.eta[self.pairs])


@dataclass
class PairTable:
    """Every (reducer, tyre) pair a design can use, with what the bounds need (arrays (P,))."""

    j: np.ndarray
    k: np.ndarray
    log_ratios: np.ndarray
    """(reducers, 3) ln G of each gear of every reducer, NaN beyond the gear count."""
    log_radius: np.ndarray
    """(tyres,) ln r of every tyre."""
    l_first: np.ndarray
    l_tall: np.ndarray
    multi: np.ndarray
    cost: np.ndarray
    mass: np.ndarray
    crr: np.ndarray
    eta: np.ndarray
    build_classes: object
    """Callable building the rating classes (sorted pairs and range-minimum tables) on first use."""
    multi_pairs: np.ndarray
    single_pairs: np.ndarray
    """Positions of the single-speed pairs."""
    _classes: list | None = None

    @cached_property
    def gear_l(self) -> np.ndarray:
        """(P, 3) L = ln(G/r) of each gear, NaN beyond the gear count (built on first use: catalogues
        without multi-speed reducers never read it)."""
        return np.take(self.log_ratios, self.j, axis=0) - self.log_radius[self.k][:, None]

    @property
    def classes(self) -> list:
        """Single-speed pairs per reducer rating class (`_Class`), built on first use (the sum-order
        probe of cost and mass studies often proves the result without them)."""
        if self._classes is None:
            self._classes = self.build_classes(self)
        return self._classes


def pair_table(parts: PartTables, use: B.Usable, reducers) -> PairTable:
    """Pairs of the allowed reducers and the usable tyres."""
    re, ty = parts.reducers, parts.tyres
    n = parts.problem.vehicle.tyre_count
    rj = np.asarray(reducers, dtype=np.int64)
    jj, kk = np.meshgrid(rj, use.tyres, indexing="ij")
    j, k = jj.ravel(), kk.ravel()
    # logarithms and maxima per part (few rows), then indexed per pair (same values, less work)
    with np.errstate(invalid="ignore", divide="ignore"):
        log_g = np.log(re.ratios)
    log_r = np.log(ty.radius_m)
    lr = log_r[k]
    l_first = log_g[:, 0][j] - lr
    l_tall = log_g[np.arange(log_g.shape[0]), re.n_gears - 1][j] - lr
    multi = re.n_gears[j] > 1
    cost = re.cost[j] + n * ty.cost[k]
    mass = re.mass_kg[j] + n * ty.mass_kg[k]
    crr = ty.crr[k]
    eta = np.nanmax(re.efficiencies, axis=1)[j]

    def build_classes(table):
        classes = []
        single = np.nonzero(~multi)[0]
        if single.size:
            # rating classes from the reducers (few rows), then every single-speed pair's class; one
            # sort of the pairs by (class, L), split per class (each class in L order, ties pair order)
            rating = np.stack([re.max_torque_nm[rj], re.max_speed_rad_s[rj]], axis=1)
            uniq, inv_r = np.unique(rating, axis=0, return_inverse=True)
            inv_r = np.asarray(inv_r).ravel()
            pos_r = np.full(re.max_torque_nm.size, -1, dtype=np.int64)
            pos_r[rj] = np.arange(rj.size)
            inv = inv_r[pos_r[j[single]]]
            by = np.lexsort((l_first[single], inv))  # stable: equal L keep pair order
            sorted_pairs = single[by]
            bounds = np.searchsorted(inv[by], np.arange(uniq.shape[0] + 1))
            for c in range(uniq.shape[0]):
                order = sorted_pairs[bounds[c]:bounds[c + 1]]
                if order.size == 0:
                    continue
                classes.append(_Class(float(uniq[c, 0]), float(uniq[c, 1]), order, l_first[order], table))
        return classes

    return PairTable(j, k, log_g, log_r, l_first, l_tall, multi, cost, mass, crr, eta, build_classes,
                     np.nonzero(multi)[0], np.nonzero(~multi)[0])
