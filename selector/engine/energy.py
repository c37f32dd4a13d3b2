"""Energy of designs over the study's driving cycle, and the battery its range needs.

The physics is `selector.physics.energy` (backward model) and `selector.physics.battery` (mass
spiral); this module builds their inputs from the catalogue arrays and returns per-design metrics:

- ``energy_wh_per_km``: energy at the battery per km of the cycle, with the vehicle at its mass
  including the sized battery (without a range: at the mass of the parts) [Wh/km];
- ``battery_kwh``, ``battery_mass_kg``, ``battery_cost``: the battery that covers ``range_km``
  (0 without a range requirement; NaN where no battery up to `MAX_BATTERY_FACTOR` times the
  vehicle's own mass covers it);
- ``range_reach_km``: the range covered (the sized battery's range, at least ``range_km``; where
  none is found, the range of the largest battery considered);
- ``regen_share``: energy the units return to the battery / energy they draw from it [-];
- ``cycle_followed_pct``: share of the cycle's intervals the design can follow within its envelope
  and, for map-based motors, within its efficiency map [%] (100 % is required).

The battery sits with the vehicle's own static axle share. Its mass counts in every requirement and
check (acceleration, grade, tyre load, max_mass_kg) and its cost in ``budget`` and in the cost
objective.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.engine.parts import AXLE_COLUMNS, TY, PartTables
from selector.physics.battery import battery_cost, size_battery
from selector.physics.energy import EnergyParams, EnergyUnit, EnergyVehicle, cycle_energy
from selector.units import kmh_to_mps

MAX_BATTERY_FACTOR = 3.0
"""Largest battery considered: this many times the vehicle's own mass (mass_kg) [-]."""
REACH_SCAN = (0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0)
"""Battery masses (shares of the largest considered) scanned for the range of a design no battery
makes reach the required range (reported as its achieved range_km) [-]."""


@dataclass(frozen=True)
class EnergySetup:
    """The study's cycle and energy settings in SI."""

    time_s: np.ndarray
    speed_mps: np.ndarray
    params: EnergyParams
    range_km: float | None
    specific_energy_wh_per_kg: float | None
    cost_per_kwh: float | None
    usable_fraction: float
    q_n_s2_m2: float


def setup(parts: PartTables) -> EnergySetup | None:
    """The energy settings of the study (None without an [energy] table), cached on the part tables."""
    e = parts.problem.energy
    if e is None:
        return None
    key = ("energy_setup", parts.problem.requirements.range_km)
    if key not in parts.cache:
        params = EnergyParams(inverter_efficiency=e.inverter_efficiency_pct / 100.0, auxiliary_w=e.auxiliary_w,
                              regen_max_w=np.inf if e.regen_max_kw is None else e.regen_max_kw * 1e3,
                              regen_min_speed_mps=kmh_to_mps(e.regen_min_speed_kmh))
        cyc = e.cycle_data
        parts.cache[key] = EnergySetup(time_s=np.asarray(cyc.time_s, dtype=float),
                                       speed_mps=np.asarray(cyc.speed_mps, dtype=float), params=params,
                                       range_km=parts.problem.requirements.range_km,
                                       specific_energy_wh_per_kg=e.specific_energy_wh_per_kg,
                                       cost_per_kwh=e.cost_per_kwh, usable_fraction=e.usable_fraction,
                                       q_n_s2_m2=parts.q_n_s2_m2)
    return parts.cache[key]


def energy_unit(parts: PartTables, motors, reducers) -> EnergyUnit:
    """Energy-model units of motors[n] with reducers[n] (motor < 0: absent)."""
    mo, re = parts.motors, parts.reducers
    motors = np.asarray(motors, dtype=np.int64)
    on = motors >= 0
    mi = np.maximum(motors, 0)
    rj = np.maximum(np.asarray(reducers, dtype=np.int64), 0)
    g = int(np.max(np.where(on, re.n_gears[rj], 1), initial=1))
    return EnergyUnit(present=on, torque_nm=mo.torque_nm[mi], power_w=mo.power_w[mi],
                      decline_rad_s=mo.decline_rad_s[mi], decline_exponent=mo.decline_exponent[mi],
                      max_speed_rad_s=mo.max_speed_rad_s[mi], rotor_inertia_kgm2=mo.rotor_inertia_kgm2[mi],
                      ratios=re.ratios[rj, :g], gear_efficiency=re.efficiencies[rj, :g],
                      loss_copper_w_per_nm2=mo.loss_copper[mi], loss_iron_nm=mo.loss_iron[mi],
                      loss_windage_w_s3=mo.loss_windage[mi], loss_constant_w=mo.loss_constant[mi],
                      map_index=np.where(on, mo.map_index[mi], -1), maps=mo.maps)


def usable_motor(parts: PartTables) -> np.ndarray:
    """True for motors with a loss model (polynomial or map): the only ones an energy study can use."""
    return parts.motors.has_loss_model


def _consumption(parts: PartTables, st: EnergySetup, keys: np.ndarray, mass_kg: np.ndarray):
    """cycle_energy of the designs ``keys`` at vehicle masses ``mass_kg``."""
    units = {}
    for axle, (m_col, r_col) in AXLE_COLUMNS.items():
        if np.any(keys[:, m_col] >= 0):
            units[axle] = energy_unit(parts, keys[:, m_col], keys[:, r_col])
    v = parts.problem.vehicle
    ty = parts.tyres
    veh = EnergyVehicle(mass_kg=np.asarray(mass_kg, dtype=float), crr=ty.crr[keys[:, TY]], q_n_s2_m2=parts.q_n_s2_m2,
                        radius_m=ty.radius_m[keys[:, TY]],
                        wheel_inertia_total_kgm2=v.tyre_count * v.wheel_inertia_kgm2)
    return cycle_energy(units.get("front"), units.get("rear"), veh, st.params, st.time_s, st.speed_mps)


def energy_metrics(parts: PartTables, keys, parts_mass_kg) -> dict:
    """Energy metrics of designs (see the module docstring) given the mass of their parts [kg]."""
    st = setup(parts)
    keys = np.asarray(keys, dtype=np.int64)
    n = keys.shape[0]
    parts_mass = np.asarray(parts_mass_kg, dtype=float)
    out = {k: np.full(n, np.nan) for k in ("energy_wh_per_km", "battery_kwh", "battery_mass_kg", "battery_cost",
                                           "range_reach_km", "regen_share")}
    out["cycle_followed_pct"] = np.zeros(n)
    out["cycle_required_pct"] = np.full(n, 100.0)
    usable = np.ones(n, dtype=bool)
    for m_col, _ in AXLE_COLUMNS.values():
        on = keys[:, m_col] >= 0
        usable &= ~on | parts.motors.has_loss_model[np.maximum(keys[:, m_col], 0)]
    rows = np.nonzero(usable)[0]
    if rows.size == 0:
        return out
    k = keys[rows]
    base = _consumption(parts, st, k, parts_mass[rows])
    steps = max(st.time_s.size - 1, 1)
    missed = base.infeasible_steps + base.out_of_map_steps
    followed = 100.0 * np.clip(1.0 - missed / steps, 0.0, 1.0)
    out["cycle_followed_pct"][rows] = np.where(base.feasible & ~base.out_of_map, 100.0, followed)
    ok = base.feasible & ~base.out_of_map & np.isfinite(base.wh_per_km)
    if st.range_km is None:
        out["energy_wh_per_km"][rows] = np.where(ok, base.wh_per_km, np.nan)
        out["regen_share"][rows] = np.where(ok, base.regen_share, np.nan)
        for key in ("battery_kwh", "battery_mass_kg", "battery_cost"):
            out[key][rows] = 0.0
        return out
    go = np.nonzero(ok)[0]
    if go.size == 0:
        out["range_reach_km"][rows] = 0.0
        return out
    kk, pm = k[go], parts_mass[rows][go]
    cap = MAX_BATTERY_FACTOR * parts.problem.vehicle.mass_kg

    def consumption(m_b, idx):
        r = _consumption(parts, st, kk[idx], pm[idx] + m_b)
        return np.where(r.feasible & ~r.out_of_map, r.wh_per_km, np.inf)

    sized = size_battery(consumption, st.range_km, st.specific_energy_wh_per_kg, st.usable_fraction, go.size, cap)
    found = sized.found
    idx = rows[go]
    out["battery_kwh"][idx] = np.where(found, sized.energy_wh / 1e3, np.nan)
    out["battery_mass_kg"][idx] = np.where(found, sized.mass_kg, np.nan)
    out["battery_cost"][idx] = np.where(found, battery_cost(sized.energy_wh, st.cost_per_kwh), np.nan)
    u, sigma = st.usable_fraction, st.specific_energy_wh_per_kg
    with np.errstate(divide="ignore", invalid="ignore"):
        reach_found = u * sigma * sized.mass_kg / sized.consumption_wh_per_km
    # where no battery covers the range: the longest range over batteries up to the largest considered
    miss = np.nonzero(~found)[0]
    reach = np.where(found, reach_found, 0.0)
    if miss.size:
        for frac in REACH_SCAN:
            mb = np.full(miss.size, frac * cap)
            c_m = consumption(mb, miss)
            with np.errstate(divide="ignore", invalid="ignore"):
                r_m = np.where(np.isfinite(c_m) & (c_m > 0), u * sigma * mb / c_m, 0.0)
            reach[miss] = np.maximum(reach[miss], r_m)
    # a battery in the scan covers the range although the sizing's geometric scan stepped over it (the
    # consumption is infinite where the design can no longer follow the cycle, so g(m) need not stay
    # >= 0 above its root): size again below that battery, where the scan must find the root
    redo = miss[reach[miss] >= st.range_km * (1.0 - 1e-12)] if miss.size else miss
    if redo.size:
        cap_r = np.full(redo.size, np.inf)
        for frac in REACH_SCAN:
            mb = np.full(redo.size, frac * cap)
            c_m = consumption(mb, redo)
            with np.errstate(divide="ignore", invalid="ignore"):
                r_m = np.where(np.isfinite(c_m) & (c_m > 0), u * sigma * mb / c_m, 0.0)
            cap_r = np.where(np.isinf(cap_r) & (r_m >= st.range_km), mb, cap_r)
        again = size_battery(lambda m_b, i: consumption(m_b, redo[i]), st.range_km, st.specific_energy_wh_per_kg,
                             st.usable_fraction, redo.size, np.where(np.isfinite(cap_r), cap_r, cap))
        got = np.nonzero(again.found)[0]
        for name, values in (("energy_wh", again.energy_wh), ("mass_kg", again.mass_kg),
                             ("consumption_wh_per_km", again.consumption_wh_per_km)):
            getattr(sized, name)[redo[got]] = values[got]
        found[redo[got]] = True
        out["battery_kwh"][idx[redo[got]]] = again.energy_wh[got] / 1e3
        out["battery_mass_kg"][idx[redo[got]]] = again.mass_kg[got]
        out["battery_cost"][idx[redo[got]]] = battery_cost(again.energy_wh[got], st.cost_per_kwh)
        with np.errstate(divide="ignore", invalid="ignore"):
            reach[redo[got]] = u * sigma * again.mass_kg[got] / again.consumption_wh_per_km[got]
        lost = redo[~again.found]  # not expected; never leave a battery-less design meeting the range
        reach[lost] = np.minimum(reach[lost], st.range_km * (1.0 - 1e-6))
    out["range_reach_km"][rows] = 0.0
    out["range_reach_km"][idx] = reach
    # consumption and regeneration at the sized mass
    if found.any():
        f = np.nonzero(found)[0]
        r = _consumption(parts, st, kk[f], pm[f] + sized.mass_kg[f])
        out["energy_wh_per_km"][idx[f]] = r.wh_per_km
        out["regen_share"][idx[f]] = r.regen_share
    return out


# ------------------------------------------------------------------------------------------ lower bounds

def consumption_lower_bound(st: EnergySetup, mass_kg, crr, l_a, eta_max, spin_k_i, spin_k_w, spin_c0,
                            brake_inertia_kg, k_copper=0.0, l_b=None, chunk: int = 4096):
    """Proved lower bound of the energy at the battery per km over the cycle, for blocks of designs [Wh/km].

    Per block (arrays broadcast to (blocks,)): the vehicle mass ``mass_kg`` (exact, or the block's
    least), rolling resistance at least ``crr``, every gear's L = ln(G/r) at least ``l_a``, gearbox
    efficiency at most ``eta_max``, spin losses of the motors at least k_i w + k_w w^3 + C0 with the
    given (summed) coefficients (0 for map-based motors), and at most ``brake_inertia_kg`` of
    reflected wheel and rotor inertia. Per interval the wheel force is at least m a + m g Crr + q v^2
    when accelerating (inertia only adds) and (m + I_max) a + m g Crr + q v^2 when braking; the motor's
    mechanical power is at least F v / eta_max when driving and max(F v eta_max, -regen cap) when
    braking (0 below the regeneration speed: friction brakes); electrical power is at least that plus
    the spin losses and, when driving, the copper losses k_c T^2 of a motor torque at least
    F / (eta_max e^{l_b}) (``k_copper`` 0 for map-based motors; braking copper losses >= 0); the battery
    power is an increasing function of it
    (x / eta_inv or x eta_inv); the auxiliary load is added at all times. Returns (bound, d bound / d m).
    """
    from selector.physics.cycles import cycle_steps
    from selector.units import G_N

    dt, v, a, _ = cycle_steps(st.time_s, st.speed_mps)
    dist_km = float(np.sum(v * dt)) / 1000.0
    aux_j = st.params.auxiliary_w * float(np.sum(dt))
    keep = v > 0  # standstill intervals cost only the auxiliary load (added below)
    dt, v, a = dt[keep], v[keep], a[keep]
    moving = True
    p = st.params
    args = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (
        mass_kg, crr, l_a, eta_max, spin_k_i, spin_k_w, spin_c0, brake_inertia_kg, k_copper,
        l_a if l_b is None else l_b)))
    n = args[0].size
    m, c, la, eta, ki, kw, c0, ib, kc, lb = (x.ravel() for x in args)
    out = np.empty(n)
    slope = np.empty(n)
    for s in range(0, n, chunk):
        sl = slice(s, min(n, s + chunk))
        def col(x, sl=sl):
            return x[sl][:, None]
        mm, cc, ee = col(m), col(c), col(eta)
        acc = a[None, :]
        m_acc = np.where(acc >= 0, mm, mm + col(ib))
        force = m_acc * acc + mm * G_N * cc * moving + st_q(st) * (v * v)[None, :] * moving
        pw = force * v[None, :]
        brake_ok = (v[None, :] >= p.regen_min_speed_mps)
        mech = np.where(pw >= 0, pw / ee, np.where(brake_ok, np.maximum(pw * ee, -p.regen_max_w), 0.0))
        w = v[None, :] * np.exp(col(la))
        spin = (col(ki) * w + col(kw) * w ** 3 + col(c0)) * moving
        torque = np.maximum(force, 0.0) / (ee * np.exp(col(lb)))
        x = mech + spin + col(kc) * torque * torque
        eta_inv = p.inverter_efficiency
        batt = np.where(x > 0, x / eta_inv, x * eta_inv)
        e_j = (batt * dt[None, :]).sum(axis=1) + aux_j
        out[sl] = e_j / 3600.0 / dist_km
        # subgradient d/dm: force per kg, through the active piece of each interval's mapping
        dforce = acc + G_N * cc * moving
        dpw = dforce * v[None, :]
        dmech = np.where(pw >= 0, dpw / ee, np.where(brake_ok & (pw * ee > -p.regen_max_w), dpw * ee, 0.0))
        dmech = dmech + np.where(force > 0, 2.0 * col(kc) * torque * dforce / (ee * np.exp(col(lb))), 0.0)
        dbatt = np.where(x > 0, dmech / eta_inv, dmech * eta_inv)
        slope[sl] = (dbatt * dt[None, :]).sum(axis=1) / 3600.0 / dist_km
    return out.reshape(args[0].shape), slope.reshape(args[0].shape)


def st_q(st: EnergySetup) -> float:
    """0.5 rho CdA of the setup's study (stored on the setup at creation)."""
    return st.q_n_s2_m2


def battery_lower_bound(st: EnergySetup, c_lb_fn, parts_mass_kg, cap_kg, rounds: int = 3):
    """Lower bounds of the battery mass and of the consumption at the sized mass, for blocks of designs.

    ``c_lb_fn(total_mass) -> (c_lb, dc_lb/dm)``: a lower bound of the consumption, convex in the
    vehicle's total mass (`consumption_lower_bound` is) [Wh/km], [Wh/km/kg]. With the true consumption
    c >= c_lb, the true battery m* solves u sigma m = R c(m_p + m), so u sigma m* - R t(m_p + m*) >= 0
    for any tangent t of c_lb (convexity: t <= c_lb <= c). The tangent's condition is linear in m:
    its root is a lower bound of m* (no root with a non-positive slope: no battery covers the range,
    inf). Each round takes the tangent at the best bound so far. The consumption at the sized mass is
    at least c_lb there if c_lb rises from there on, else at least the tangent's value at the largest
    battery considered. Returns (battery mass bound [kg], consumption bound [Wh/km]).
    """
    u, sigma, r = st.usable_fraction, st.specific_energy_wh_per_kg, st.range_km
    pm = np.asarray(parts_mass_kg, dtype=float)
    best = np.zeros(pm.shape)
    dead = np.zeros(pm.shape, dtype=bool)
    for _ in range(rounds):
        m0 = pm + best
        c0, s0 = c_lb_fn(m0)
        den = u * sigma - r * s0
        with np.errstate(divide="ignore", invalid="ignore"):
            root = r * (c0 - s0 * best) / den
        ok = den > 0
        dead |= ~ok & (u * sigma * cap_kg - r * (c0 + s0 * (cap_kg - best)) < 0)
        best = np.where(ok, np.maximum(best, np.clip(root, 0.0, None)), best)
    dead |= best > cap_kg
    c, s = c_lb_fn(pm + best)
    cons = np.where(s >= 0, c, c + s * (cap_kg - best))
    return np.where(dead, np.inf, best), np.where(dead, np.inf, cons)
