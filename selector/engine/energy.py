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
  and, for map-based motors, within its efficiency map [%] (100 % is required); 0 for a design
  with a motor that has neither a loss model nor a map;
- ``cycle_out_of_map_pct``: share of the intervals within the envelope but outside a motor's
  efficiency map [%] (what `api.unmet` names as the reason).

The battery sits with the vehicle's own static axle share. Its mass counts in every requirement and
check (acceleration, grade, tyre load, max_mass_kg) and its cost in ``budget`` and in the cost
objective.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.engine.parts import AXLE_COLUMNS, TY, PartTables
from selector.physics.battery import battery_cost, size_battery
from selector.physics.energy import CycleEnergyModel, EnergyParams, EnergyUnit, EnergyVehicle, cycle_trace
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


BATCH_ELEMENTS = 1 << 19
"""Designs x moving intervals x gears prepared together by `energy_metrics` (bounds the memory of the
mass-independent arrays kept during the battery sizing, about 100 bytes per element) [-]."""


def _model(parts: PartTables, st: EnergySetup, keys: np.ndarray, mass_kg: np.ndarray) -> CycleEnergyModel:
    """The cycle-energy model of the designs ``keys`` (default masses ``mass_kg``)."""
    units = {}
    for axle, (m_col, r_col) in AXLE_COLUMNS.items():
        if np.any(keys[:, m_col] >= 0):
            units[axle] = energy_unit(parts, keys[:, m_col], keys[:, r_col])
    v = parts.problem.vehicle
    ty = parts.tyres
    veh = EnergyVehicle(mass_kg=np.asarray(mass_kg, dtype=float), crr=ty.crr[keys[:, TY]], q_n_s2_m2=parts.q_n_s2_m2,
                        radius_m=ty.radius_m[keys[:, TY]],
                        wheel_inertia_total_kgm2=v.tyre_count * v.wheel_inertia_kgm2)
    return CycleEnergyModel(units.get("front"), units.get("rear"), veh, st.params, st.time_s, st.speed_mps)


def design_trace(parts: PartTables, key, mass_kg: float):
    """Operating points of one design (key row) over the study's cycle at the vehicle mass ``mass_kg``
    (with its battery) [kg]: `selector.physics.energy.cycle_trace` of that design."""
    keys = np.asarray(key, dtype=np.int64).reshape(1, -1)
    st = setup(parts)
    model_units = {}
    for axle, (m_col, r_col) in AXLE_COLUMNS.items():
        if keys[0, m_col] >= 0:
            model_units[axle] = energy_unit(parts, keys[:, m_col], keys[:, r_col])
    v = parts.problem.vehicle
    veh = EnergyVehicle(mass_kg=np.array([float(mass_kg)]), crr=parts.tyres.crr[keys[:, TY]],
                        q_n_s2_m2=parts.q_n_s2_m2, radius_m=parts.tyres.radius_m[keys[:, TY]],
                        wheel_inertia_total_kgm2=v.tyre_count * v.wheel_inertia_kgm2)
    return cycle_trace(model_units.get("front"), model_units.get("rear"), veh, st.params, st.time_s, st.speed_mps)


class _Consumption:
    """Consumption of a batch of designs at battery masses, as the battery sizing asks for it.

    Same values as evaluating `cycle_energy` each time (inf where the design cannot follow the cycle
    or leaves its map), with less work: the model's mass-independent arrays are built once, the
    evaluation at battery 0 is the one at the parts' mass, a design is not evaluated again at or above
    a total mass from which it provably cannot follow the cycle (`EnergyResult.infeasible_when_heavier`),
    and the last evaluation at a battery that covers the range is kept (the sizing returns that
    battery: its consumption and regeneration share are the reported ones).
    """

    def __init__(self, model: CycleEnergyModel, parts_mass: np.ndarray, base, st: EnergySetup):
        self.model = model
        self.pm = parts_mass
        self.base_c = np.where(base.feasible & ~base.out_of_map, base.wh_per_km, np.inf)
        self.base_share = base.regen_share
        self.dead = np.full(parts_mass.size, np.inf)  # total mass [kg] from which the design cannot follow
        self.u_sigma = st.usable_fraction * st.specific_energy_wh_per_kg
        self.range_km = st.range_km
        self.cover = {k: np.full(parts_mass.size, np.nan) for k in ("m", "c", "share")}

    def __call__(self, m_b, idx):
        """Consumption [Wh/km] of the designs ``idx`` (batch positions) with batteries ``m_b`` [kg]."""
        m_b = np.asarray(m_b, dtype=float)
        total = self.pm[idx] + m_b
        c = np.full(idx.size, np.inf)
        share = np.full(idx.size, np.nan)
        zero = m_b == 0.0
        c[zero], share[zero] = self.base_c[idx[zero]], self.base_share[idx[zero]]
        live = np.flatnonzero(~zero & (total < self.dead[idx]))
        if live.size:
            r = self.model.energy(total[live], idx[live])
            c[live] = np.where(r.feasible & ~r.out_of_map, r.wh_per_km, np.inf)
            share[live] = r.regen_share
            hv = live[r.infeasible_when_heavier]
            self.dead[idx[hv]] = np.minimum(self.dead[idx[hv]], total[hv])
        # the test of `selector.physics.battery.size_battery`: g = u sigma m - R c >= 0 covers the range
        with np.errstate(invalid="ignore"):
            val = self.u_sigma * m_b - self.range_km * c
        cover = np.isfinite(val) & (val >= 0)
        for key, x in (("m", m_b), ("c", c), ("share", share)):
            self.cover[key][idx[cover]] = x[cover]
        return c

    def at(self, m_b, idx):
        """(consumption, regeneration share) of the designs ``idx`` with the batteries ``m_b`` that cover
        the range, taken from the evaluation kept when the sizing tried that battery."""
        c, share = self.cover["c"][idx].copy(), self.cover["share"][idx].copy()
        again = np.flatnonzero(self.cover["m"][idx] != m_b)  # not expected: evaluate
        if again.size:
            r = self.model.energy(self.pm[idx[again]] + m_b[again], idx[again])
            c[again], share[again] = r.wh_per_km, r.regen_share
        return c, share


def _batches(parts: PartTables, keys: np.ndarray, steps: int):
    """Positions of ``keys`` in batches of about `BATCH_ELEMENTS` (designs x intervals x gears), designs
    with the same gear counts together."""
    gears = np.zeros(keys.shape[0], dtype=np.int64)
    for m_col, r_col in AXLE_COLUMNS.values():
        on = keys[:, m_col] >= 0
        gears = gears * 4 + np.where(on, parts.reducers.n_gears[np.maximum(keys[:, r_col], 0)], 0)
    order = np.argsort(gears, kind="stable")
    weight = np.maximum(gears[order] // 4 + gears[order] % 4, 1) * max(steps, 1)
    start, total = 0, 0
    for pos in range(order.size):
        if total and total + weight[pos] > BATCH_ELEMENTS:
            yield np.sort(order[start:pos])
            start, total = pos, 0
        total += weight[pos]
    if start < order.size:
        yield np.sort(order[start:])


def energy_metrics(parts: PartTables, keys, parts_mass_kg) -> dict:
    """Energy metrics of designs (see the module docstring) given the mass of their parts [kg]."""
    st = setup(parts)
    keys = np.asarray(keys, dtype=np.int64)
    n = keys.shape[0]
    parts_mass = np.asarray(parts_mass_kg, dtype=float)
    out = {k: np.full(n, np.nan) for k in ("energy_wh_per_km", "battery_kwh", "battery_mass_kg", "battery_cost",
                                           "range_reach_km", "regen_share")}
    out["cycle_followed_pct"] = np.zeros(n)
    out["cycle_out_of_map_pct"] = np.zeros(n)
    out["cycle_required_pct"] = np.full(n, 100.0)
    usable = np.ones(n, dtype=bool)
    for m_col, _ in AXLE_COLUMNS.values():
        on = keys[:, m_col] >= 0
        usable &= ~on | parts.motors.has_loss_model[np.maximum(keys[:, m_col], 0)]
    rows = np.nonzero(usable)[0]
    for batch in _batches(parts, keys[rows], int(np.count_nonzero(st.speed_mps[1:] + st.speed_mps[:-1]))):
        _batch_metrics(parts, st, keys[rows[batch]], parts_mass[rows[batch]], out, rows[batch])
    return out


def _batch_metrics(parts: PartTables, st: EnergySetup, k: np.ndarray, pm: np.ndarray, out: dict, rows: np.ndarray):
    """`energy_metrics` of one batch of designs (positions ``rows`` of ``out``)."""
    model = _model(parts, st, k, pm)
    base = model.energy()
    steps = max(st.time_s.size - 1, 1)
    missed = base.infeasible_steps + base.out_of_map_steps
    followed = 100.0 * np.clip(1.0 - missed / steps, 0.0, 1.0)
    out["cycle_followed_pct"][rows] = np.where(base.feasible & ~base.out_of_map, 100.0, followed)
    out["cycle_out_of_map_pct"][rows] = 100.0 * np.clip(base.out_of_map_steps / steps, 0.0, 1.0)
    ok = base.feasible & ~base.out_of_map & np.isfinite(base.wh_per_km)
    if st.range_km is None:
        out["energy_wh_per_km"][rows] = np.where(ok, base.wh_per_km, np.nan)
        out["regen_share"][rows] = np.where(ok, base.regen_share, np.nan)
        for key in ("battery_kwh", "battery_mass_kg", "battery_cost"):
            out[key][rows] = 0.0
        return
    go = np.nonzero(ok)[0]
    out["range_reach_km"][rows] = 0.0
    if go.size == 0:
        return
    cons = _Consumption(model, pm, base, st)
    sized, reach = _size_for_range(st, lambda m_b, i: cons(m_b, go[i]), go.size,
                                   MAX_BATTERY_FACTOR * parts.problem.vehicle.mass_kg)
    found = sized.found
    idx = rows[go]
    out["battery_kwh"][idx] = np.where(found, sized.energy_wh / 1e3, np.nan)
    out["battery_mass_kg"][idx] = np.where(found, sized.mass_kg, np.nan)
    out["battery_cost"][idx] = np.where(found, battery_cost(sized.energy_wh, st.cost_per_kwh), np.nan)
    out["range_reach_km"][idx] = reach
    if found.any():  # consumption and regeneration at the sized mass
        f = np.nonzero(found)[0]
        out["energy_wh_per_km"][idx[f]], out["regen_share"][idx[f]] = cons.at(sized.mass_kg[f], go[f])


def _reach(st: EnergySetup, consumption, idx, m_b):
    """Range [km] of the designs ``idx`` with the batteries ``m_b`` [kg] (0 where they cannot drive)."""
    c_m = consumption(m_b, idx)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(np.isfinite(c_m) & (c_m > 0),
                        st.usable_fraction * st.specific_energy_wh_per_kg * m_b / c_m, 0.0)


def _size_for_range(st: EnergySetup, consumption, n: int, cap: float):
    """Battery for the range of n designs (``consumption(m_b, index)``) and the range covered.

    Returns (`BatterySizing`, range [km]): the sized battery's range where found; else the longest
    range over the largest drivable battery the sizing tried (``short_kg``) and the batteries of
    `REACH_SCAN` (shares of the largest battery considered, ``cap`` [kg]).
    """
    sized = size_battery(consumption, st.range_km, st.specific_energy_wh_per_kg, st.usable_fraction, n, cap)
    found = sized.found
    u, sigma = st.usable_fraction, st.specific_energy_wh_per_kg
    with np.errstate(divide="ignore", invalid="ignore"):
        reach_found = u * sigma * sized.mass_kg / sized.consumption_wh_per_km
    # where no battery covers the range: the longest range over batteries up to the largest considered
    miss = np.nonzero(~found)[0]
    reach = np.where(found, reach_found, 0.0)
    if miss.size:
        reach[miss] = _reach(st, consumption, miss, sized.short_kg[miss])
    for frac in REACH_SCAN if miss.size else ():
        reach[miss] = np.maximum(reach[miss], _reach(st, consumption, miss, np.full(miss.size, frac * cap)))
    # a battery in the scan covers the range although the sizing's geometric scan stepped over it (the
    # consumption is infinite where the design can no longer follow the cycle, so g(m) need not stay
    # >= 0 above its root): size again below that battery, where the scan must find the root
    redo = miss[reach[miss] >= st.range_km * (1.0 - 1e-12)] if miss.size else miss
    if redo.size:
        _resize(st, consumption, sized, reach, redo, cap)
    return sized, reach


def _resize(st: EnergySetup, consumption, sized, reach, redo, cap: float):
    """Size again the designs ``redo`` below the first battery of the reach scan that covers the range;
    updates ``sized`` (found, energy, mass, consumption) and ``reach`` in place."""
    cap_r = np.full(redo.size, np.inf)
    for frac in REACH_SCAN:
        mb = np.full(redo.size, frac * cap)
        r_m = _reach(st, consumption, redo, mb)
        cap_r = np.where(np.isinf(cap_r) & (r_m >= st.range_km), mb, cap_r)
    again = size_battery(lambda m_b, i: consumption(m_b, redo[i]), st.range_km, st.specific_energy_wh_per_kg,
                         st.usable_fraction, redo.size, np.where(np.isfinite(cap_r), cap_r, cap))
    got = np.nonzero(again.found)[0]
    for name in ("energy_wh", "mass_kg", "consumption_wh_per_km"):
        getattr(sized, name)[redo[got]] = getattr(again, name)[got]
    sized.found[redo[got]] = True
    with np.errstate(divide="ignore", invalid="ignore"):
        reach[redo[got]] = (st.usable_fraction * st.specific_energy_wh_per_kg * again.mass_kg[got]
                            / again.consumption_wh_per_km[got])
    lost = redo[~again.found]  # not expected; never leave a battery-less design meeting the range
    reach[lost] = np.minimum(reach[lost], st.range_km * (1.0 - 1e-6))


# ------------------------------------------------------------------------------------------ lower bounds

NO_BOUND = -1e300
"""Consumption bound returned where none is proved (a finite stand-in for minus infinity: the searches
keep only blocks with finite bounds) [Wh/km]."""


def consumption_lower_bound(st: EnergySetup, mass_kg, crr, l_a, eta_max, spin_k_i, spin_k_w, spin_c0,
                            brake_inertia_kg, k_copper=0.0, l_b=None, chunk: int = 4096):
    """Proved lower bound of the energy at the battery per km over the cycle, for blocks of designs [Wh/km].

    Per block (arrays broadcast to (blocks,)): the vehicle mass ``mass_kg`` [kg], rolling resistance at
    least ``crr`` [-], every gear's L = ln(G/r) in [``l_a``, ``l_b``] [ln(1/m)], gearbox efficiency at
    most ``eta_max`` [-], spin losses of the motors at least k_i w + k_w w^3 + C0 with the given (summed)
    coefficients [N m], [W s^3], [W] (0 for map-based motors), at most ``brake_inertia_kg`` of reflected
    wheel and rotor inertia together [kg], and copper losses k_c T^2 of one motor with ``k_copper``
    [W/(N m)^2] (0 for map-based motors and for two units). The argument is in DEVELOPERS.md ("Energy
    bounds"): per interval a lower bound of the motors' shaft power from the wheel force without
    inertia, the inertia taken at its worst when braking (`_interval_bounds`), the regeneration
    limits, spin and copper losses, the inverter, the auxiliary load, less the rotor's kinetic energy at
    the start of the cycle (what gear changes could return).

    Returns
    -------
    bound : ndarray
        Lower bound of the consumption at the given mass [Wh/km]; `NO_BOUND` where its slope in the
        mass is negative (the bound at this mass then need not hold for heavier designs of the block).
    slope : ndarray
        A subgradient of the bound in the vehicle mass [Wh/km/kg]; the bound is convex in the mass.
    """
    cyc = _bound_cycle(st)
    args = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (
        mass_kg, crr, l_a, eta_max, spin_k_i, spin_k_w, spin_c0, brake_inertia_kg, k_copper,
        l_a if l_b is None else l_b)))
    n = args[0].size
    flat = [x.ravel() for x in args]
    out = np.empty(n)
    slope = np.empty(n)
    for s in range(0, n, chunk):
        sl = slice(s, min(n, s + chunk))
        out[sl], slope[sl] = _bound_chunk(st, cyc, *(x[sl][:, None] for x in flat))
    out = np.where(slope >= 0.0, out, NO_BOUND)
    return out.reshape(args[0].shape), slope.reshape(args[0].shape)


def _bound_cycle(st: EnergySetup) -> dict:
    """The moving intervals of the study's cycle and the totals the bound needs."""
    from selector.physics.cycles import cycle_steps

    dt, v, a, _ = cycle_steps(st.time_s, st.speed_mps)
    keep = v > 0  # standstill intervals cost only the auxiliary load (in aux_j)
    return dict(dt=dt[keep], v=v[keep], a=a[keep], dist_km=float(np.sum(v * dt)) / 1000.0,
                aux_j=st.params.auxiliary_w * float(np.sum(dt)), v0=float(st.speed_mps[0]),
                floor=np.where(v[keep] >= st.params.regen_min_speed_mps, -st.params.regen_max_w, 0.0))


def _interval_bounds(f0, dfdm, a, v, inertia, eta):
    """Lower bound of the motors' summed shaft power on each interval (blocks x intervals) [W], and
    its derivative in the mass.

    ``f0`` is the wheel force without inertia terms (m a + m g Crr + q v^2, least Crr) [N]. With a >= 0
    the inertia only adds: F0 v / eta_max. With a < 0 and I = ``inertia`` a (<= 0), wheel inertia before
    the gearbox and rotor inertia after it split I in the worst way: (F0 + I) v / eta_max when
    F0 + I >= 0, (F0 + I) v when F0 >= 0 > F0 + I, else F0 v eta_max + I v.
    """
    ia_v = (inertia * np.minimum(a, 0.0)) * v  # (I a) v, 0 when a >= 0
    f0_v = f0 * v
    fi_v = f0_v + ia_v
    # the factor on F0 v of each region: 1 / eta (F0 + I >= 0), 1 (F0 >= 0 > F0 + I), eta (F0 < 0)
    factor = np.where(fi_v >= 0.0, 1.0 / eta, np.where(f0_v >= 0.0, 1.0, eta))
    shaft = np.where(fi_v >= 0.0, fi_v * factor, f0_v * factor + ia_v)
    return shaft, factor * (dfdm * v)


def _bound_chunk(st: EnergySetup, cyc: dict, m, crr, la, eta, ki, kw, c0, inertia, kc, lb):
    """`consumption_lower_bound` of a chunk of blocks (columns (blocks, 1)): (bound, slope) [Wh/km]."""
    from selector.units import G_N

    v, a, dt = cyc["v"], cyc["a"], cyc["dt"]
    dfdm = a + G_N * crr
    f0 = m * dfdm + st.q_n_s2_m2 * (v * v)
    shaft, dshaft = _interval_bounds(f0, dfdm, a, v, inertia, eta)
    # regeneration: none below its minimum speed, at most the cap (the friction brakes take the rest)
    clipped = shaft < cyc["floor"]
    mech = np.maximum(shaft, cyc["floor"])
    dshaft[clipped] = 0.0
    # spin losses at the lowest motor speed w = v e^la; copper losses of a torque >= mech / (v e^lb)
    e_la = np.exp(la)
    spin = (ki * e_la) * v + (kw * e_la ** 3) * (v * v * v) + c0
    t_v = np.maximum(mech, 0.0) * (1.0 / v)  # torque x e^lb
    k_t = kc * np.exp(-2.0 * lb)
    x = mech + spin + k_t * t_v * t_v
    dx = dshaft * (1.0 + 2.0 * k_t * t_v * (1.0 / v))  # t_v = 0 where mech <= 0
    eta_inv = st.params.inverter_efficiency
    scale = np.where(x > 0.0, 1.0 / eta_inv, eta_inv)
    ke0 = 0.5 * inertia[:, 0] * cyc["v0"] ** 2  # rotor energy a gear change could return, at most
    e_j = (x * scale) @ dt + cyc["aux_j"] - eta_inv * ke0
    per_km = 3600.0 * cyc["dist_km"]
    return e_j / per_km, ((dx * scale) @ dt) / per_km


def battery_lower_bound(st: EnergySetup, c_lb_fn, parts_mass_kg, cap_kg, rounds: int = 3, consumption: bool = True):
    """Lower bounds of the battery mass and of the consumption at the sized mass, for blocks of designs.

    ``c_lb_fn(total_mass) -> (c_lb, dc_lb/dm)``: a lower bound of the consumption, convex in the
    vehicle's total mass (`consumption_lower_bound` is) [Wh/km], [Wh/km/kg]; ``parts_mass_kg`` the least
    mass without battery of the block's designs [kg]. With the true consumption c >= c_lb and the sized
    battery m* (the smallest with u sigma m >= R c(m_p + m)), a tangent t of c_lb at m0 = m_p,min + best
    with slope s >= 0 gives u sigma m* - R t(m_p,min + m*) >= u sigma m* - R c(m_p + m*) >= 0 (convexity:
    t <= c_lb <= c; s >= 0 and m_p >= m_p,min). The condition is linear in m*: with u sigma > R s its
    root is a lower bound of m*; with u sigma <= R s and u sigma best < R t(m0) no battery of at least
    ``best`` covers the range (dead, inf). A tangent with a negative slope is not used. Each round takes
    the tangent at the best bound so far. The consumption at the sized mass is at least c_lb there when
    its slope is >= 0 (else `NO_BOUND`). Returns (battery mass bound [kg], consumption bound [Wh/km];
    the latter None when ``consumption`` is False).
    """
    u, sigma, r = st.usable_fraction, st.specific_energy_wh_per_kg, st.range_km
    pm = np.asarray(parts_mass_kg, dtype=float)
    best = np.zeros(pm.shape)
    dead = np.zeros(pm.shape, dtype=bool)
    for _ in range(rounds):
        c0, s0 = c_lb_fn(pm + best)
        usable = (s0 >= 0.0) & (c0 > NO_BOUND)
        den = u * sigma - r * s0
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            root = r * (c0 - s0 * best) / den
        rises = usable & (den > 0)
        dead |= usable & ~(den > 0) & (u * sigma * best - r * c0 < 0)
        best = np.where(rises, np.maximum(best, np.clip(root, 0.0, None)), best)
    dead |= best > cap_kg
    if not consumption:
        return np.where(dead, np.inf, best), None
    c, s = c_lb_fn(pm + best)
    cons = np.where(s >= 0, c, NO_BOUND)
    return np.where(dead, np.inf, best), np.where(dead, np.inf, cons)
