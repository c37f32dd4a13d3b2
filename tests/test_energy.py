"""Energy at the battery over a driving cycle (selector.physics.energy)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from selector.io.cycles import load_cycle
from selector.physics.energy import (
    EnergyParams,
    EnergyUnit,
    EnergyVehicle,
    cycle_energy,
    cycle_trace,
)
from selector.physics.losses import EfficiencyGrid, motor_loss_w
from selector.units import G_N

W_MAX = 12000 * 2 * math.pi / 60  # 12000 rpm [rad/s]
LOSSLESS = (0.0, 0.0, 0.0, 0.0)
POLY = (0.05, 0.5, 2e-7, 300.0)  # k_c, k_i, k_w, C0 (illustrative)


def unit(n=1, ratios=(9.0,), eff=None, loss=POLY, torque=300.0, power=150e3, w_max=W_MAX, decline=None,
         exponent=1.0, inertia=0.0, present=True, map_index=-1, maps=()):
    """n identical drive units (arrays), NaN-padded to three gears."""
    r = np.full((n, 3), np.nan)
    e = np.full((n, 3), np.nan)
    r[:, :len(ratios)] = ratios
    e[:, :len(ratios)] = [1.0] * len(ratios) if eff is None else eff

    def f(x):
        return np.full(n, float(x))
    return EnergyUnit(present=np.full(n, present), torque_nm=f(torque), power_w=f(power),
                      decline_rad_s=f(w_max if decline is None else decline), decline_exponent=f(exponent),
                      max_speed_rad_s=f(w_max), rotor_inertia_kgm2=f(inertia), ratios=r, gear_efficiency=e,
                      loss_copper_w_per_nm2=f(loss[0]), loss_iron_nm=f(loss[1]), loss_windage_w_s3=f(loss[2]),
                      loss_constant_w=f(loss[3]), map_index=np.full(n, map_index), maps=tuple(maps))


def stack(*units):
    """Concatenate EnergyUnit rows (designs)."""
    maps = units[0].maps
    kw = {}
    for name in EnergyUnit.__dataclass_fields__:
        if name == "maps":
            continue
        kw[name] = np.concatenate([getattr(u, name) for u in units])
    return EnergyUnit(maps=maps, **kw)


def vehicle(mass=1500.0, crr=0.01, q=0.35, radius=0.3, wheels=0.0):
    return EnergyVehicle(mass_kg=mass, crr=crr, q_n_s2_m2=q, radius_m=radius, wheel_inertia_total_kgm2=wheels)


def params(**kw):
    base = dict(inverter_efficiency=1.0, auxiliary_w=0.0, regen_max_w=0.0, regen_min_speed_mps=0.0)
    base.update(kw)
    return EnergyParams(**base)


def steps_of(time_s, speed_mps):
    """Mean speed, acceleration, duration of each 1-s interval, computed here independently (plain Python)."""
    out = []
    for k in range(len(time_s) - 1):
        dt = time_s[k + 1] - time_s[k]
        out.append(((speed_mps[k] + speed_mps[k + 1]) / 2, (speed_mps[k + 1] - speed_mps[k]) / dt, dt))
    return out


def wheel_forces(cycle, mass, crr, q, radius, wheels):
    """Wheel force of each moving interval: (m + J/r^2) a + m g Crr + q v^2 (flat road), in plain Python."""
    rows = []
    for v, a, dt in steps_of(list(cycle.time_s), list(cycle.speed_mps)):
        if v > 0:
            rows.append((v, a, dt, (mass + wheels / radius ** 2) * a + mass * G_N * crr + q * v * v))
    return rows


def constant_cycle(speed_kmh, seconds=60):
    t = np.arange(seconds + 1, dtype=float)
    return t, np.full(seconds + 1, speed_kmh / 3.6)


# ------------------------------------------------------------------------------ closed forms


def test_steady_speed_closed_form():
    # F = F0 + F2 v^2 with F0 = 120 N, F2 = 0.40 N/(m/s)^2 at 100 km/h: 120 + 0.4 x 27.78^2 = 428.6 N, and
    # 428.6 N x 1000 m / 3600 J/Wh = 119.1 Wh/km (closed form; lossless drive, no auxiliary load)
    v = 100 / 3.6
    f0, f2 = 120.0, 0.40
    force = f0 + f2 * v * v
    assert force == pytest.approx(428.6, abs=0.05)
    assert force * 1000 / 3600 == pytest.approx(119.1, abs=0.05)
    mass = 1200.0
    t, s = constant_cycle(100.0)
    res = cycle_energy(unit(loss=LOSSLESS), None, vehicle(mass=mass, crr=f0 / (mass * G_N), q=f2), params(), t, s)
    assert res.feasible[0]
    assert res.wh_per_km[0] == pytest.approx(force * 1000 / 3600, rel=1e-12)
    assert res.distance_km == pytest.approx(60 * v / 1000, rel=1e-12)
    assert res.regen_share[0] == 0.0


def test_steady_speed_chain_with_losses_by_hand():
    # 80 km/h, level: F = m g Crr + q v^2; wheel torque F r; motor torque F r / (G eta_g); motor speed v G / r;
    # electrical power T w + k_c T^2 + k_i w + k_w w^3 + C0; battery P_el / eta_inv + P_aux (all by hand here)
    mass, crr, q, r, g, eta_g, eta_inv, aux = 1600.0, 0.009, 0.4, 0.31, 8.5, 0.96, 0.95, 400.0
    v = 80 / 3.6
    force = mass * G_N * crr + q * v * v
    t_m = force * r / (g * eta_g)
    w = v * g / r
    k_c, k_i, k_w, c0 = POLY
    p_el = t_m * w + k_c * t_m ** 2 + k_i * w + k_w * w ** 3 + c0
    p_bat = p_el / eta_inv + aux
    expected_wh_per_km = p_bat / v * 1000 / 3600
    t, s = constant_cycle(80.0)
    res = cycle_energy(unit(ratios=(g,), eff=(eta_g,), inertia=0.03), None,
                       vehicle(mass=mass, crr=crr, q=q, radius=r, wheels=2.0),
                       params(inverter_efficiency=eta_inv, auxiliary_w=aux, regen_max_w=np.inf), t, s, detail=True)
    assert res.wh_per_km[0] == pytest.approx(expected_wh_per_km, rel=1e-12)
    # the loss breakdown of the same chain
    hours = 60 / 3600
    assert res.motor_loss_wh[0] == pytest.approx((p_el - t_m * w) * hours, rel=1e-12)
    assert res.gearbox_loss_wh[0] == pytest.approx(t_m * w * (1 - eta_g) * hours, rel=1e-12)
    assert res.inverter_loss_wh[0] == pytest.approx(p_el * (1 / eta_inv - 1) * hours, rel=1e-12)
    assert res.auxiliary_wh == pytest.approx(aux * hours)


# ------------------------------------------------------------------------------ the cycle's wheel energy


@pytest.mark.parametrize("name", ["wltc_class3b", "udds", "us06"])
def test_lossless_without_regeneration_draws_the_positive_wheel_energy(name):
    cyc = load_cycle(name)
    mass, crr, q, r, jw = 1650.0, 0.0095, 0.38, 0.32, 3.2
    expected_j = sum(max(f * v, 0.0) * dt for v, a, dt, f in wheel_forces(cyc, mass, crr, q, r, jw))
    res = cycle_energy(unit(loss=LOSSLESS, torque=1000.0, power=400e3), None,
                       vehicle(mass=mass, crr=crr, q=q, radius=r, wheels=jw), params(), cyc.time_s, cyc.speed_mps)
    assert res.feasible[0]
    assert res.battery_wh[0] == pytest.approx(expected_j / 3600, rel=1e-12)
    assert res.traction_wh[0] == pytest.approx(expected_j / 3600, rel=1e-12)
    assert res.regen_wh[0] == 0.0
    assert res.wh_per_km[0] == pytest.approx(expected_j / 3600 / (cyc.distance_m / 1000), rel=1e-12)


def test_lossless_with_full_regeneration_draws_only_the_road_load_work():
    # kinetic energy is returned in full: the battery pays sum (m g Crr + q v^2) v dt (the cycle starts and ends
    # at rest, so the inertial work sums to zero)
    cyc = load_cycle("wltc_class3b")
    mass, crr, q, r = 1500.0, 0.01, 0.35, 0.3
    road_j = sum((mass * G_N * crr + q * v * v) * v * dt for v, a, dt, f in wheel_forces(cyc, mass, crr, q, r, 0.0))
    res = cycle_energy(unit(loss=LOSSLESS, torque=1000.0, power=400e3), None, vehicle(mass, crr, q, r),
                       params(regen_max_w=np.inf), cyc.time_s, cyc.speed_mps)
    assert res.battery_wh[0] == pytest.approx(road_j / 3600, rel=1e-10)
    assert res.regen_wh[0] == pytest.approx(res.braking_wh[0], rel=1e-12)
    assert res.regen_share[0] == pytest.approx(res.regen_wh[0] / res.drive_wh[0])


# ------------------------------------------------------------------------------ regeneration limits


def test_regeneration_minimum_speed_and_power_cap():
    cyc = load_cycle("udds")
    mass, crr, q, r = 1500.0, 0.01, 0.35, 0.3
    rows = wheel_forces(cyc, mass, crr, q, r, 0.0)
    v_min, cap = 30 / 3.6, 15e3
    # lossless: the regenerated energy of a braking interval is min(-F v, cap), 0 below v_min (by hand)
    expected = sum(min(-f * v, cap) * dt for v, a, dt, f in rows if f < 0 and v >= v_min)
    res = cycle_energy(unit(loss=LOSSLESS, torque=1000.0, power=400e3), None, vehicle(mass, crr, q, r),
                       params(regen_max_w=cap, regen_min_speed_mps=v_min), cyc.time_s, cyc.speed_mps, detail=True)
    assert res.regen_wh[0] == pytest.approx(expected / 3600, rel=1e-12)
    braking = sum(-f * v * dt for v, a, dt, f in rows if f < 0)
    assert res.friction_brake_wh[0] == pytest.approx((braking - expected) / 3600, rel=1e-12)
    off = cycle_energy(unit(loss=LOSSLESS, torque=1000.0, power=400e3), None, vehicle(mass, crr, q, r),
                       params(regen_max_w=cap, regen_min_speed_mps=1000.0), cyc.time_s, cyc.speed_mps)
    assert off.regen_wh[0] == 0.0


def test_regeneration_limited_by_the_motor_envelope():
    # gentle acceleration 0 -> 20 m/s at 0.5 m/s^2, then braking at 4 m/s^2: a 120 N m motor (G/r = 30 1/m)
    # gives 3600 N, enough to accelerate (1500 x 0.5 + road load < 1400 N) but not to take the braking force;
    # in the constant-torque region (power 1 MW) the regenerated power is min(-F v, T_pk w) (by hand)
    v = np.concatenate([np.arange(0, 20.5, 0.5), np.arange(16.0, -0.1, -4.0)])
    t = np.arange(len(v), dtype=float)
    cyc = type("C", (), {"time_s": t, "speed_mps": v})
    mass, crr, q, r, g = 1500.0, 0.01, 0.35, 0.3, 9.0
    rows = wheel_forces(cyc, mass, crr, q, r, 0.0)
    t_pk = 120.0
    expected = sum(min(-f * vv, t_pk * vv * g / r) * dt for vv, a, dt, f in rows if f < 0)
    assert any(-f * vv > t_pk * vv * g / r for vv, a, dt, f in rows if f < 0)  # the envelope binds
    res = cycle_energy(unit(loss=LOSSLESS, torque=t_pk, power=1e6, ratios=(g,)), None, vehicle(mass, crr, q, r),
                       params(regen_max_w=np.inf), t, v)
    assert res.feasible[0]
    assert res.regen_wh[0] == pytest.approx(expected / 3600, rel=1e-12)


def test_braking_torque_stops_at_the_loss_optimum():
    # one interval from 10 to 8 m/s, m = 1500 kg, no road load: F = -3000 N, v = 9 m/s; G/r = 30 1/m, lossless
    # gear: T_req = -100 N m at w = 270 rad/s. With k_c = 5 W/(N m)^2 braking beyond T = -w / (2 k_c) = -27 N m
    # recovers less (d(T w + k_c T^2)/dT = 0), so the motor takes -27 N m: P_el = -27 x 270 + 5 x 27^2 + spin,
    # spin = 0.5 x 270 + 2e-7 x 270^3 + 300 = 438.937 W -> P_el = -3206.063 W (all by hand)
    t = np.arange(2.0)
    v = np.array([10.0, 8.0])
    k = params(inverter_efficiency=0.9, regen_max_w=np.inf)
    u = unit(loss=(5.0, 0.5, 2e-7, 300.0))
    tr = cycle_trace(u, None, vehicle(crr=0.0, q=0.0), k, t, v)
    assert tr.motor_torque_nm[0, 0, 0] == pytest.approx(-27.0, rel=1e-12)
    assert tr.electrical_w[0, 0, 0] == pytest.approx(-3206.063, abs=1e-3)
    assert tr.battery_w[0, 0] == pytest.approx(-3206.063 * 0.9, abs=1e-3)
    # friction takes 3000 x 9 - 27 x 270 = 19710 W at the wheel
    assert tr.friction_brake_w[0, 0] == pytest.approx(19710.0, rel=1e-12)
    # gentle braking (-0.01 m/s^2: T_req = -0.5 N m, -45 W) does not cover the spin losses: the battery still
    # pays 0.5^2 x 0.05 - 0.5 x 89.55 + 0.5 x 89.55 + 2e-7 x 89.55^3 + 300 W (the same as coasting)
    v = np.array([2.99, 2.98])
    tr = cycle_trace(unit(), None, vehicle(crr=0.0, q=0.0), k, t, v)
    w = 2.985 * 30
    t_m = -1500 * 0.01 * 0.3 / 9
    assert tr.motor_torque_nm[0, 0, 0] == pytest.approx(t_m, rel=1e-9)
    assert tr.battery_w[0, 0] == pytest.approx((t_m * w + 0.05 * t_m ** 2 + 0.5 * w + 2e-7 * w ** 3 + 300) / 0.9,
                                               rel=1e-9)


# ------------------------------------------------------------------------------ feasibility


def test_infeasible_steps_are_counted_and_dated():
    cyc = load_cycle("wltc_class3b")
    mass, crr, q, r, g = 1500.0, 0.01, 0.35, 0.3, 9.0
    t_pk = 70.0  # 2100 N at the wheel in the constant-torque region (power 1 MW)
    steps = steps_of(list(cyc.time_s), list(cyc.speed_mps))  # one fewer than the samples
    rows_t = [(t0, v, f) for t0, (v, a, dt) in zip(cyc.time_s, steps, strict=False)
              for f in [(mass * a + mass * G_N * crr + q * v * v) if v > 0 else 0.0]]
    over = [t0 for t0, v, f in rows_t if v > 0 and f > t_pk * g / r * (1 + 1e-9)]
    assert len(over) > 0
    res = cycle_energy(unit(loss=LOSSLESS, torque=t_pk, power=1e6, ratios=(g,)), None, vehicle(mass, crr, q, r),
                       params(), cyc.time_s, cyc.speed_mps)
    assert not res.feasible[0] and math.isnan(res.wh_per_km[0])
    assert res.infeasible_steps[0] == len(over) and res.first_infeasible_s[0] == over[0]
    # over-speed: max speed 131.3 km/h needs a motor speed of 36.47 m/s x 9 / 0.3 = 1094 rad/s > 1000 rad/s
    res = cycle_energy(unit(loss=LOSSLESS, torque=1000.0, power=1e6, ratios=(g,), w_max=1000.0), None,
                       vehicle(mass, crr, q, r), params(), cyc.time_s, cyc.speed_mps)
    first = next(t0 for t0, v0, v1 in zip(cyc.time_s, cyc.speed_mps, cyc.speed_mps[1:], strict=False)
                 if max(v0, v1) * g / r > 1000.0)
    assert not res.feasible[0] and res.first_infeasible_s[0] == first


# ------------------------------------------------------------------------------ gears


def test_gear_choice_is_the_least_power_usable_gear_each_step():
    cyc = load_cycle("us06")
    veh = vehicle(1800.0, 0.009, 0.4, 0.33)
    k = params(inverter_efficiency=0.96, auxiliary_w=250.0, regen_max_w=60e3, regen_min_speed_mps=2.0)
    ratios, effs = (13.0, 7.0), (0.95, 0.975)
    w_max = 9000 * 2 * math.pi / 60  # gear 1 over-speeds above 82 km/h, gear 2 is weak at low speed
    two = cycle_trace(unit(ratios=ratios, eff=effs, torque=200.0, power=130e3, w_max=w_max), None, veh, k,
                      cyc.time_s, cyc.speed_mps)
    singles = [cycle_trace(unit(ratios=(g,), eff=(e,), torque=200.0, power=130e3, w_max=w_max), None, veh, k,
                           cyc.time_s, cyc.speed_mps) for g, e in zip(ratios, effs, strict=True)]
    p = np.stack([np.where(s.feasible[0], s.battery_w[0], np.inf) for s in singles])
    moving = two.speed_mps > 0
    assert np.all(two.feasible[0])
    assert not singles[0].feasible[0].all() and not singles[1].feasible[0].all()  # neither gear alone follows it
    np.testing.assert_allclose(two.battery_w[0][moving], p.min(axis=0)[moving], rtol=1e-12)
    np.testing.assert_array_equal(two.gear[0][0][moving], np.argmin(p, axis=0)[moving] + 1)
    assert set(np.unique(two.gear[0][0][moving])) == {1, 2}


def test_shift_energy_of_the_rotor_is_booked():
    # with rotor inertia each change of gear changes the rotor's kinetic energy by 0.5 J w^2 (G_new^2 - G_old^2)
    # / G^2 ... booked through the inverter; the energy balance still closes (see the balance test)
    cyc = load_cycle("wltc_class3b")
    veh = vehicle(1800.0, 0.009, 0.4, 0.33)
    k = params(inverter_efficiency=0.95, regen_max_w=np.inf)
    u = unit(ratios=(12.0, 6.0), eff=(0.96, 0.97), torque=300.0, power=120e3, inertia=0.05)
    res = cycle_energy(u, None, veh, k, cyc.time_s, cyc.speed_mps, detail=True)
    tr = cycle_trace(u, None, veh, k, cyc.time_s, cyc.speed_mps)
    assert np.sum(tr.battery_w[0]) / 3600 == pytest.approx(res.battery_wh[0], rel=1e-12)
    assert np.count_nonzero(np.diff(tr.gear[0][0]) != 0) > 10


# ------------------------------------------------------------------------------ two units


def random_units(n, rng, present=True, max_gears=3, inertia=(0.01, 0.06)):
    gears = rng.integers(1, max_gears + 1, n)
    r = np.full((n, 3), np.nan)
    e = np.full((n, 3), np.nan)
    for i, g in enumerate(gears):
        r[i, :g] = np.sort(rng.uniform(4.0, 14.0, g))[::-1]
        e[i, :g] = rng.uniform(0.93, 0.98, g)
    return EnergyUnit(present=np.full(n, present), torque_nm=rng.uniform(150, 400, n),
                      power_w=rng.uniform(60e3, 200e3, n),
                      decline_rad_s=np.full(n, 1600.0), decline_exponent=np.ones(n), max_speed_rad_s=np.full(n, 1600.0),
                      rotor_inertia_kgm2=rng.uniform(*inertia, n), ratios=r, gear_efficiency=e,
                      loss_copper_w_per_nm2=rng.uniform(0.02, 0.2, n), loss_iron_nm=rng.uniform(0.2, 1.0, n),
                      loss_windage_w_s3=rng.uniform(1e-8, 3e-7, n), loss_constant_w=rng.uniform(100, 500, n),
                      map_index=np.full(n, -1))


@pytest.mark.parametrize("gears, inertia", [(1, (0.01, 0.06)), (3, (0.0, 0.0))])
def test_two_unit_split_never_worse_than_either_unit_alone(gears, inertia):
    # interval by interval the chosen split is the best of a set that holds "all front" and "all rear", so the
    # cycle energy is never above either; this holds exactly without gear shifts of a rotor with inertia (a
    # shift's rotor energy depends on the previous interval's choice, which the per-interval choice ignores)
    rng = np.random.default_rng(11)
    n = 24
    cyc = load_cycle("udds")
    front = random_units(n, rng, max_gears=gears, inertia=inertia)
    rear = random_units(n, rng, max_gears=gears, inertia=inertia)
    veh = EnergyVehicle(mass_kg=rng.uniform(1400, 2200, n), crr=rng.uniform(0.008, 0.012, n), q_n_s2_m2=0.4,
                        radius_m=rng.uniform(0.29, 0.34, n), wheel_inertia_total_kgm2=3.0)
    base = dict(inverter_efficiency=0.96, auxiliary_w=300.0, regen_max_w=50e3, regen_min_speed_mps=1.5)
    split = cycle_energy(front, rear, veh, EnergyParams(**base), cyc.time_s, cyc.speed_mps)
    only_f = cycle_energy(front, rear, veh, EnergyParams(**base, split_fractions=(1.0,), capability_split=False,
                                                    optimal_split=False),
                          cyc.time_s, cyc.speed_mps)
    only_r = cycle_energy(front, rear, veh, EnergyParams(**base, split_fractions=(0.0,), capability_split=False,
                                                    optimal_split=False),
                          cyc.time_s, cyc.speed_mps)
    assert np.all(split.feasible)
    best_alone = np.fmin(np.where(only_f.feasible, only_f.battery_wh, np.inf),
                         np.where(only_r.feasible, only_r.battery_wh, np.inf))
    assert np.all(split.battery_wh <= best_alone * (1 + 1e-12))
    assert np.any(split.battery_wh < best_alone * (1 - 1e-4))  # sharing the force pays somewhere


def test_capability_split_follows_what_neither_unit_can_alone():
    # each unit gives 2250 N at the wheel (150 N m x 9 / 0.3 / ... ) and the launch needs more than either but
    # less than both; the grid 0, 0.1, ..., 1 and the capability split keep it followable
    t = np.arange(12.0)
    v = np.concatenate([np.arange(0, 15.0, 2.5), np.full(6, 15.0)])[:12]
    u = unit(loss=POLY, torque=75.0, power=1e6)
    veh = vehicle(1500.0, 0.01, 0.35, 0.3)
    assert 1500 * 2.5 > 75 * 9 / 0.3 and 1500 * 2.5 + 1500 * G_N * 0.01 + 0.35 * 15 ** 2 < 2 * 75 * 9 / 0.3
    both = cycle_energy(u, u, veh, params(regen_max_w=np.inf), t, v)
    alone = cycle_energy(u, None, veh, params(regen_max_w=np.inf), t, v)
    assert both.feasible[0] and not alone.feasible[0]


def test_absent_unit_takes_nothing_and_groups_do_not_mix():
    rng = np.random.default_rng(5)
    cyc = load_cycle("hwfet")
    n = 9
    front = random_units(n, rng)
    rear = random_units(n, rng)
    pres_f = np.array([1, 1, 0, 1, 0, 1, 1, 0, 1], bool)
    pres_r = np.array([1, 0, 1, 1, 1, 0, 1, 1, 0], bool)
    front = EnergyUnit(**{**front.__dict__, "present": pres_f})
    rear = EnergyUnit(**{**rear.__dict__, "present": pres_r})
    veh = vehicle(1700.0, 0.01, 0.4, 0.31)
    k = params(inverter_efficiency=0.97, auxiliary_w=200.0, regen_max_w=40e3, regen_min_speed_mps=1.0)
    together = cycle_energy(front, rear, veh, k, cyc.time_s, cyc.speed_mps, detail=True)
    for i in range(n):
        def one(u, keep, i=i):
            return EnergyUnit(**{key: (val[i:i + 1] if isinstance(val, np.ndarray) else val)
                                 for key, val in u.__dict__.items()}) if keep else None
        alone = cycle_energy(one(front, pres_f[i]), one(rear, pres_r[i]), veh, k, cyc.time_s, cyc.speed_mps,
                             detail=True)
        assert together.battery_wh[i] == pytest.approx(alone.battery_wh[0], rel=1e-12)
        assert together.motor_loss_wh[i] == pytest.approx(alone.motor_loss_wh[0], rel=1e-12)
    # chunking does not change anything (one design per chunk)
    tiny = cycle_energy(front, rear, veh, EnergyParams(**{**k.__dict__, "chunk_elements": 1}), cyc.time_s,
                        cyc.speed_mps)
    np.testing.assert_allclose(tiny.battery_wh, together.battery_wh, rtol=1e-12)


# ------------------------------------------------------------------------------ bookkeeping


@pytest.mark.parametrize("case", ["single", "three_gears", "two_units"])
def test_energy_balance_closes(case):
    # battery = auxiliary + inverter + motor + gearbox + friction losses + traction - braking (rotor kinetic
    # energy is zero at the start and end of the cycle)
    cyc = load_cycle("wltc_class3b")
    rng = np.random.default_rng(7)
    n = 6
    f = random_units(n, rng)
    if case == "single":
        f = EnergyUnit(**{**f.__dict__, "ratios": np.column_stack([f.ratios[:, 0], np.full((n, 2), np.nan)])})
    if case == "three_gears":
        r = np.tile([12.0, 8.0, 5.5], (n, 1))
        f = EnergyUnit(**{**f.__dict__, "ratios": r, "gear_efficiency": np.full((n, 3), 0.96)})
    rear = random_units(n, rng) if case == "two_units" else None
    veh = vehicle(1600.0, 0.01, 0.38, 0.32, 2.5)
    k = params(inverter_efficiency=0.95, auxiliary_w=350.0, regen_max_w=45e3, regen_min_speed_mps=1.5)
    res = cycle_energy(f, rear, veh, k, cyc.time_s, cyc.speed_mps, detail=True)
    assert np.all(res.feasible)
    total = (res.auxiliary_wh + res.inverter_loss_wh + res.motor_loss_wh + res.gearbox_loss_wh
             + res.friction_brake_wh + res.traction_wh - res.braking_wh)
    np.testing.assert_allclose(res.battery_wh, total, rtol=1e-10)
    assert np.all(res.motor_loss_wh > 0) and np.all(res.gearbox_loss_wh > 0) and np.all(res.inverter_loss_wh > 0)
    assert np.all((res.regen_share > 0) & (res.regen_share < 1))
    fast = cycle_energy(f, rear, veh, k, cyc.time_s, cyc.speed_mps)
    np.testing.assert_allclose(fast.battery_wh, res.battery_wh, rtol=1e-12)


def test_trace_matches_the_result():
    cyc = load_cycle("udds")
    rng = np.random.default_rng(2)
    f, r = random_units(3, rng), random_units(3, rng)
    veh = vehicle(1600.0, 0.01, 0.38, 0.32, 2.5)
    k = params(inverter_efficiency=0.95, auxiliary_w=350.0, regen_max_w=45e3, regen_min_speed_mps=1.5)
    res = cycle_energy(f, r, veh, k, cyc.time_s, cyc.speed_mps, detail=True)
    tr = cycle_trace(f, r, veh, k, cyc.time_s, cyc.speed_mps)
    np.testing.assert_allclose(np.sum(tr.battery_w, axis=1) / 3600, res.battery_wh, rtol=1e-12)
    np.testing.assert_allclose(np.sum(tr.friction_brake_w, axis=1) / 3600, res.friction_brake_wh, rtol=1e-12)
    assert tr.gear.shape == (2, 3, len(cyc.time_s) - 1)
    moving = tr.speed_mps > 0
    assert np.all(tr.gear[:, :, moving] >= 1) and np.all(tr.gear[:, :, ~moving] == 0)
    assert np.all((tr.front_share >= 0) & (tr.front_share <= 1))
    # the operating points stay inside the envelope
    assert np.all(np.abs(tr.motor_torque_nm[0]) <= f.torque_nm[:, None] * (1 + 1e-9))


# ------------------------------------------------------------------------------ maps


def poly_map(loss, t_pk, w_max, ns=121, nt=121):
    w = np.linspace(0.0, w_max, ns)
    t = np.linspace(0.0, t_pk, nt)
    p = w[:, None] * t[None, :]
    eff = np.where(p > 0, p / (p + motor_loss_w(t[None, :], w[:, None], *loss)), 0.0)
    return EfficiencyGrid(w, t, eff, "poly")


def test_map_tabulated_from_the_loss_model_converges_to_it():
    # a map tabulated from the loss model and read with bilinear interpolation approaches the model as the grid
    # is refined (interpolation error ~ h^2), compared at the motoring points beyond the coarsest grid's first
    # torque and speed cells (there the efficiency rises steeply from 0; and a map has no losses at zero
    # torque, the model its spin losses)
    cyc = load_cycle("udds")
    veh = vehicle(1500.0, 0.01, 0.35, 0.3)
    k = params(inverter_efficiency=0.97, auxiliary_w=0.0, regen_max_w=0.0)
    poly = cycle_trace(unit(), None, veh, k, cyc.time_s, cyc.speed_mps)
    mask = (poly.motor_torque_nm[0, 0] > 300.0 / 30) & (poly.motor_speed_rad_s[0, 0] > W_MAX / 30)
    assert mask.sum() > 300
    errors = []
    for nodes in (31, 121, 481):
        grid = poly_map(POLY, 300.0, W_MAX, nodes, nodes)
        mapped = cycle_trace(unit(map_index=0, maps=(grid,), loss=(np.nan,) * 4), None, veh, k, cyc.time_s,
                             cyc.speed_mps)
        assert mapped.feasible.all() and not mapped.out_of_map.any()
        errors.append(np.max(np.abs(mapped.battery_w[0][mask] / poly.battery_w[0][mask] - 1.0)))
    assert errors[2] < 1e-3
    assert errors[0] > errors[1] > errors[2]


def test_points_outside_the_map_are_reported_not_extrapolated():
    cyc = load_cycle("wltc_class3b")
    veh = vehicle(1500.0, 0.01, 0.35, 0.3)
    k = params(inverter_efficiency=0.97, regen_max_w=np.inf)
    w_cover = 600.0  # rad/s: v = 600 x 0.3 / 9 = 20 m/s = 72 km/h
    grid = poly_map(POLY, 300.0, w_cover, 31, 31)
    u = stack(unit(map_index=0, maps=(grid,)), unit(map_index=-1, maps=(grid,)))
    res = cycle_energy(u, None, veh, k, cyc.time_s, cyc.speed_mps)
    first = next(t0 for t0, v0, v1 in zip(cyc.time_s, cyc.speed_mps, cyc.speed_mps[1:], strict=False)
                 if (v0 + v1) / 2 > 20.0)
    assert list(res.out_of_map) == [True, False]
    assert res.first_out_of_map_s[0] == first and res.out_of_map_steps[0] > 0
    assert math.isnan(res.wh_per_km[0]) and np.isfinite(res.wh_per_km[1])
    assert res.feasible[0]  # the envelope is met; only the map is short


# ------------------------------------------------------------------------------ inputs


def test_bad_inputs_raise():
    t, s = constant_cycle(50.0, 5)
    veh = vehicle()
    with pytest.raises(ValueError, match="needs a front or a rear drive unit"):
        cycle_energy(None, None, veh, params(), t, s)
    with pytest.raises(ValueError, match=r"designs \[0\] have no drive unit"):
        cycle_energy(unit(present=False), None, veh, params(), t, s)
    with pytest.raises(ValueError, match="neither loss coefficients nor an efficiency map"):
        cycle_energy(unit(loss=(np.nan,) * 4), None, veh, params(), t, s)
    with pytest.raises(ValueError, match="without a first gear"):
        cycle_energy(unit(ratios=()), None, veh, params(), t, s)
    with pytest.raises(ValueError, match="inverter_efficiency"):
        params(inverter_efficiency=0.0)


def test_stationary_split_is_the_loss_optimum():
    # two identical single-speed units without rotor inertia: by symmetry the loss-optimal split is 1/2
    # (the closed form gives s = (a w + 2 k a^2 - a w) / (4 k a^2) = 1/2)
    cyc = load_cycle("udds")
    veh = vehicle(1700.0, 0.01, 0.4, 0.31)
    k = params(inverter_efficiency=0.96, regen_max_w=np.inf)
    u = unit(torque=400.0, power=300e3)
    tr = cycle_trace(u, u, veh, EnergyParams(**{**k.__dict__, "split_fractions": (0.0, 1.0),
                                                "capability_split": False}), cyc.time_s, cyc.speed_mps)
    moving = tr.speed_mps > 0
    np.testing.assert_allclose(tr.front_share[0][moving & (tr.wheel_force_n[0] > 0)], 0.5, atol=1e-12)
    # different units: the coarse grid with the stationary split is as good as a 1001-point grid
    rng = np.random.default_rng(8)
    f, r = random_units(8, rng, max_gears=1), random_units(8, rng, max_gears=1)
    f = EnergyUnit(**{**f.__dict__, "torque_nm": np.full(8, 600.0), "power_w": np.full(8, 400e3)})
    r = EnergyUnit(**{**r.__dict__, "torque_nm": np.full(8, 600.0), "power_w": np.full(8, 400e3)})
    coarse = cycle_energy(f, r, veh, k, cyc.time_s, cyc.speed_mps)
    fine = cycle_energy(f, r, veh, EnergyParams(**{**k.__dict__, "split_fractions": tuple(np.linspace(0, 1, 1001)),
                                                   "capability_split": False, "optimal_split": False}),
                        cyc.time_s, cyc.speed_mps)
    grid_only = cycle_energy(f, r, veh, EnergyParams(**{**k.__dict__, "optimal_split": False}), cyc.time_s,
                             cyc.speed_mps)
    assert np.all(coarse.battery_wh < grid_only.battery_wh)
    # motoring, both units draw: the stationary split is the optimum, never beaten by the fine grid
    tc = cycle_trace(f, r, veh, k, cyc.time_s, cyc.speed_mps)
    tf = cycle_trace(f, r, veh, EnergyParams(**{**k.__dict__, "split_fractions": tuple(np.linspace(0, 1, 1001)),
                                                "capability_split": False, "optimal_split": False}),
                     cyc.time_s, cyc.speed_mps)
    motoring = (tc.wheel_force_n > 0) & np.all(tc.electrical_w > 0, axis=0)
    assert motoring.sum() > 1000
    assert np.all(tc.battery_w[motoring] <= tf.battery_w[motoring] + 1e-9 * np.abs(tf.battery_w[motoring]))
    # braking, where one unit may draw while the other returns (different inverter factors), it is close
    assert np.all(coarse.battery_wh <= fine.battery_wh * (1 + 1e-3))
