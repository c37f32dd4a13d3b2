"""Battery sized for a range, with the mass spiral (more battery, more mass, more energy per km).

Notation: R range [km], c(m) consumption at the battery [Wh/km] as a function of the battery mass
m [kg], sigma specific energy of the pack [Wh/kg], u usable fraction of its energy [-]. A battery
of energy E [Wh] weighs m = E / sigma and covers the range when

    u E >= R c(E / sigma).

Closed form when consumption is linear in battery mass, c = c0 + c1 m (c0: consumption of the
vehicle without battery, c1: its growth per kg)::

    E = R c0 / (u - R c1 / sigma),       which exists only for R < u sigma / c1

(derived by solving u E = R (c0 + c1 E / sigma) for E). At R >= u sigma / c1 every added kWh
carries itself less far than the range: no battery reaches this range.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "BatterySizing",
    "battery_cost",
    "battery_energy_linear_wh",
    "battery_mass_kg",
    "max_range_linear_km",
    "size_battery",
]


def battery_mass_kg(energy_wh, specific_energy_wh_per_kg):
    """Battery mass from its energy, m = E / sigma.

    Parameters
    ----------
    energy_wh : array_like
        Battery (nominal, total) energy [Wh].
    specific_energy_wh_per_kg : array_like
        Pack-level specific energy [Wh/kg].

    Returns
    -------
    ndarray
        Mass [kg].
    """
    return np.asarray(energy_wh, dtype=float) / specific_energy_wh_per_kg


def battery_cost(energy_wh, cost_per_kwh):
    """Battery cost, kWh x cost per kWh.

    Parameters
    ----------
    energy_wh : array_like
        Battery energy [Wh].
    cost_per_kwh : array_like
        Price per kWh [currency/kWh].

    Returns
    -------
    ndarray
        Cost [currency].
    """
    return np.asarray(energy_wh, dtype=float) / 1000.0 * cost_per_kwh


def max_range_linear_km(c1_wh_per_km_kg, specific_energy_wh_per_kg, usable_fraction):
    """Asymptotic range limit of the mass spiral for linear consumption, R_max = u sigma / c1.

    Parameters
    ----------
    c1_wh_per_km_kg : array_like
        Growth of consumption per kg of battery [Wh/(km kg)].
    specific_energy_wh_per_kg : array_like
        Specific energy sigma [Wh/kg].
    usable_fraction : array_like
        Usable fraction u [-].

    Returns
    -------
    ndarray
        Range no battery reaches [km] (inf when c1 <= 0).
    """
    c1 = np.asarray(c1_wh_per_km_kg, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(c1 > 0, usable_fraction * specific_energy_wh_per_kg / np.where(c1 > 0, c1, 1.0), np.inf)


def battery_energy_linear_wh(range_km, c0_wh_per_km, c1_wh_per_km_kg, specific_energy_wh_per_kg, usable_fraction):
    """Battery energy for a range when consumption is linear in battery mass (closed form).

    E = R c0 / (u - R c1 / sigma) for R < u sigma / c1; NaN where no battery reaches the range.

    Parameters
    ----------
    range_km : array_like
        Range R [km].
    c0_wh_per_km : array_like
        Consumption at the battery of the vehicle without battery (m = 0) [Wh/km].
    c1_wh_per_km_kg : array_like
        Consumption growth per kg of battery [Wh/(km kg)], >= 0.
    specific_energy_wh_per_kg : array_like
        Specific energy sigma [Wh/kg].
    usable_fraction : array_like
        Usable fraction u, in (0, 1] [-].

    Returns
    -------
    ndarray
        Battery energy E [Wh]; NaN where R >= u sigma / c1 (no solution).
    """
    r = np.asarray(range_km, dtype=float)
    denom = usable_fraction - r * np.asarray(c1_wh_per_km_kg, dtype=float) / specific_energy_wh_per_kg
    with np.errstate(divide="ignore", invalid="ignore"):
        e = r * np.asarray(c0_wh_per_km, dtype=float) / denom
    return np.where(denom > 0, e, np.nan)


@dataclass(frozen=True, eq=False)
class BatterySizing:
    """Battery of n designs sized for a range (arrays of shape (n,)).

    Attributes
    ----------
    found : ndarray of bool
        True where a battery within the search limit covers the range.
    energy_wh : ndarray
        Battery energy [Wh]; NaN where not found.
    mass_kg : ndarray
        Battery mass [kg]; NaN where not found.
    consumption_wh_per_km : ndarray
        Consumption with that battery [Wh/km]; NaN where not found.
    evaluations : int
        Calls of the consumption function [-].
    short_kg : ndarray
        Where not found: the largest battery tried that the design can drive with, which falls short
        of the range (0 when none) [kg]; NaN where found.
    """

    found: np.ndarray
    energy_wh: np.ndarray
    mass_kg: np.ndarray
    consumption_wh_per_km: np.ndarray
    evaluations: int
    short_kg: np.ndarray | None = None


def size_battery(consumption, range_km, specific_energy_wh_per_kg, usable_fraction, n, max_battery_kg,
                 rtol=1e-9, max_iter=200) -> BatterySizing:
    """Smallest battery that covers a range, for any consumption non-decreasing in battery mass.

    Finds, per design, the smallest battery mass m in [0, max_battery_kg] with
    g(m) = u sigma m - R c(m) >= 0. The root is bracketed by a geometric scan from the linear
    estimate (c from m = 0 and m = 1 % of the limit), then narrowed by the Illinois variant of
    regula falsi (a bracketing method: it keeps g(lo) < 0 <= g(hi), so it cannot diverge) until
    hi - lo <= rtol hi or the surplus g(hi) <= rtol u sigma hi (the battery is then at most about
    rtol too large); the answer is hi, a battery that covers the range. The scan finds the
    smallest root when g crosses zero once between scan points, which holds for consumption
    linear or convex in mass. Where a scan step lands on a battery the design cannot drive with
    (consumption not finite: too heavy to follow the cycle; a heavier one cannot either), the
    step is narrowed between the last drivable battery and that one instead of growing on (a root
    below the drivable limit is not stepped over): by the secant through the last two drivable
    points, whose root is a lower bound of g's for concave g (so none below the limit when it lies
    beyond it), else by halving, down to `SCAN_RTOL`. Designs whose g
    stays < 0 up to the limit (or up to the drivable limit) are reported not found.

    Parameters
    ----------
    consumption : callable
        ``consumption(battery_mass_kg, index) -> wh_per_km``: for the designs ``index`` (int array)
        with the battery masses given (same shape) [kg], their consumption at the battery
        [Wh/km] (NaN or inf = cannot drive: treated as not covering the range).
    range_km : float or array_like
        Range R [km].
    specific_energy_wh_per_kg : float or array_like
        Specific energy sigma [Wh/kg].
    usable_fraction : float or array_like
        Usable fraction u [-].
    n : int
        Number of designs.
    max_battery_kg : float or array_like
        Largest battery considered [kg].
    rtol : float
        Relative width of the final bracket [-].
    max_iter : int
        Iteration limit of the narrowing phase [-].

    Returns
    -------
    BatterySizing
    """
    sigma = np.broadcast_to(np.asarray(specific_energy_wh_per_kg, dtype=float), (n,))
    u = np.broadcast_to(np.asarray(usable_fraction, dtype=float), (n,))
    m_max = np.broadcast_to(np.asarray(max_battery_kg, dtype=float), (n,)).copy()
    g = _Surplus(consumption, np.broadcast_to(np.asarray(range_km, dtype=float), (n,)), sigma, u)
    br = _bracket(g, n, m_max)
    found = np.isfinite(br.hi)
    _illinois(g, br, found, rtol, max_iter)
    mass = np.where(found, br.hi, np.nan)
    return BatterySizing(found=found, energy_wh=mass * sigma, mass_kg=mass,
                         consumption_wh_per_km=np.where(found, br.c_hi, np.nan), evaluations=g.calls,
                         short_kg=np.where(found, np.nan, br.lo))


class _Surplus:
    """g(m) = u sigma m - R c(m) of the designs ``idx`` at battery masses ``m`` [Wh] (-inf where not finite),
    with the consumption c(m) [Wh/km]; counts its calls."""

    def __init__(self, consumption, range_km, sigma, u):
        self.consumption, self.range_km, self.sigma, self.u = consumption, range_km, sigma, u
        self.calls = 0

    def __call__(self, m, idx):
        self.calls += 1
        c = np.asarray(self.consumption(m, idx), dtype=float)
        val = self.u[idx] * self.sigma[idx] * m - self.range_km[idx] * c
        return np.where(np.isfinite(val), val, -np.inf), c


SCAN_FACTOR = 1.6
"""Growth of the battery per step of the upward scan [-]."""
SCAN_RTOL = 1e-9
"""Relative width at which the bisection towards the drivable limit stops (no battery found) [-]."""


@dataclass
class _Bracket:
    """Per design: g(lo) < 0 <= g(hi) (hi NaN where no battery up to the limit covers the range; lo is
    then the largest drivable battery tried)."""

    lo: np.ndarray
    g_lo: np.ndarray
    hi: np.ndarray
    g_hi: np.ndarray
    c_hi: np.ndarray


def _bracket(g: _Surplus, n: int, m_max: np.ndarray) -> _Bracket:
    """Bracket each design's smallest root: m = 0, a probe at 1 % of the limit, then a geometric scan
    upward (factor 1.6) from the linear estimate through those two points."""
    all_idx = np.arange(n)
    lo = np.zeros(n)
    g_lo, c_lo = g(lo, all_idx)
    br = _Bracket(lo=lo, g_lo=g_lo, hi=np.full(n, np.nan), g_hi=np.full(n, np.nan), c_hi=np.full(n, np.nan))
    hi, g_hi, c_hi = br.hi, br.g_hi, br.c_hi
    # m = 0 already covers the range (zero consumption)
    done0 = g_lo >= 0
    hi[done0], g_hi[done0], c_hi[done0] = 0.0, g_lo[done0], c_lo[done0]
    # linear estimate from m = 0 and a probe, then a geometric scan upward
    probe = 0.01 * m_max
    g_p, c_p = g(probe, all_idx)
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (g_p - g_lo) / probe
        est = np.where(slope > 0, -g_lo / slope, m_max)
    start = np.clip(np.where(np.isfinite(est), est, m_max), probe, m_max)
    # the probe may already cover the range: bracket [0, probe]
    p_ok = ~done0 & (g_p >= 0)
    hi[p_ok], g_hi[p_ok], c_hi[p_ok] = probe[p_ok], g_p[p_ok], c_p[p_ok]
    lo_p = ~done0 & ~p_ok & np.isfinite(g_p)
    prev_lo, prev_g = np.full(n, np.nan), np.full(n, np.nan)  # the drivable point before lo (secant)
    prev_lo[lo_p], prev_g[lo_p] = 0.0, g_lo[lo_p]
    lo[lo_p], g_lo[lo_p] = probe[lo_p], g_p[lo_p]
    top = np.full(n, np.inf)  # least battery tried that the design cannot drive with
    top[~done0 & ~p_ok & ~np.isfinite(g_p)] = probe[~done0 & ~p_ok & ~np.isfinite(g_p)]
    m = np.where(np.isfinite(top), 0.5 * (lo + top), start)  # (a probe the design cannot drive: halve)
    active = ~done0 & ~p_ok & np.isfinite(g_lo)
    while active.any():
        idx = np.flatnonzero(active)
        gm, cm = g(m[idx], idx)
        ok = gm >= 0
        hi[idx[ok]], g_hi[idx[ok]], c_hi[idx[ok]] = m[idx[ok]], gm[ok], cm[ok]
        active[idx[ok]] = False
        fin = np.isfinite(gm) & ~ok
        short = idx[fin]  # drivable, short of the range: the bracket's low end
        prev_lo[short], prev_g[short] = lo[short], g_lo[short]
        lo[short], g_lo[short] = m[short], gm[fin]
        heavy = idx[~np.isfinite(gm)]  # too heavy to drive: the drivable limit is below
        top[heavy] = m[heavy]
        left = idx[~ok]
        halving = np.isfinite(top[left])
        closed = halving & (top[left] - lo[left] <= SCAN_RTOL * top[left])
        active[left[closed]] = False
        bis = left[halving & ~closed]
        m[bis], give_up = _next_below_limit(bis, lo, g_lo, prev_lo, prev_g, top)
        active[bis[give_up]] = False
        grow = left[~halving]
        at_max = m[grow] >= m_max[grow]
        active[grow[at_max]] = False
        grow = grow[~at_max]
        m[grow] = np.minimum(m[grow] * SCAN_FACTOR, m_max[grow])
    return br


def _next_below_limit(bis, lo, g_lo, prev_lo, prev_g, top) -> tuple[np.ndarray, np.ndarray]:
    """Next battery to try for the designs ``bis`` whose root lies below a drivable limit in (lo, top)
    [kg], and which of them have none there.

    g lies under its secant through the last two drivable points (g concave, as `size_battery`
    assumes), so the root is at or above the secant's root: none below the limit when the secant
    falls or reaches 0 only beyond it. Otherwise the secant's root is the next try (at least a
    `SCAN_RTOL` step inside the bracket), converging from below; where the secant is not defined yet,
    the middle of the bracket.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = (g_lo[bis] - prev_g[bis]) / (lo[bis] - prev_lo[bis])
        m_lin = lo[bis] - g_lo[bis] / slope
    secant = np.isfinite(slope) & (lo[bis] > prev_lo[bis])
    give_up = secant & ((slope <= 0) | (m_lin >= top[bis]))
    step = SCAN_RTOL * top[bis]
    nxt = np.where(secant, np.minimum(np.maximum(m_lin, lo[bis] + step), top[bis] - step), 0.5 * (lo[bis] + top[bis]))
    return nxt, give_up


def _illinois(g: _Surplus, br: _Bracket, found: np.ndarray, rtol: float, max_iter: int) -> None:
    """Narrow the brackets of the found designs in place by the Illinois variant of regula falsi, until
    hi - lo <= rtol hi or g(hi) <= rtol u sigma hi."""
    lo, g_lo, hi, g_hi, c_hi = br.lo, br.g_lo, br.hi, br.g_hi, br.c_hi
    u, sigma = g.u, g.sigma
    n = hi.size
    side = np.zeros(n, dtype=np.int8)

    def wide(i):
        return (hi[i] - lo[i] > rtol * hi[i]) & (g_hi[i] > rtol * u[i] * sigma[i] * hi[i])

    narrow = found.copy()
    narrow[found] = wide(np.flatnonzero(found))
    it = 0
    while narrow.any() and it < max_iter:
        it += 1
        idx = np.flatnonzero(narrow)
        a, b, ga, gb = lo[idx], hi[idx], g_lo[idx], g_hi[idx]
        with np.errstate(divide="ignore", invalid="ignore"):
            x = b - gb * (b - a) / (gb - ga)
        x = np.where(np.isfinite(x), x, 0.5 * (a + b))
        # keep a step of at least rtol / 2 of hi from either end, so that a root sitting on one end (to
        # rounding) still closes the bracket to rtol
        step = 0.5 * rtol * b
        x = np.where(b - a > 2.0 * step, np.clip(x, a + step, b - step), x)
        gx, cx = g(x, idx)
        up = gx >= 0
        i_up, i_dn = idx[up], idx[~up]
        hi[i_up], g_hi[i_up], c_hi[i_up] = x[up], gx[up], cx[up]
        lo[i_dn], g_lo[i_dn] = x[~up], gx[~up]
        # Illinois: halve the stale end's value when the same end moves twice
        g_lo[i_up[side[i_up] == 1]] *= 0.5
        g_hi[i_dn[side[i_dn] == -1]] *= 0.5
        side[i_up], side[i_dn] = 1, -1
        narrow[idx] = wide(idx)
