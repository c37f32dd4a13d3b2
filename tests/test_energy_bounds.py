"""Energy study speed-ups stay exact: the prepared model, the proved infeasibility at larger masses, and the
certified consumption and battery lower bounds (selector.physics.energy, selector.engine.energy)."""

from __future__ import annotations

import numpy as np
import pytest
from test_energy import random_units, stack

from selector.engine.energy import NO_BOUND, EnergySetup, battery_lower_bound, consumption_lower_bound
from selector.io.cycles import load_cycle
from selector.physics.battery import size_battery
from selector.physics.energy import CycleEnergyModel, EnergyParams, EnergyVehicle, cycle_energy
from selector.physics.losses import EfficiencyGrid, motor_loss_w

Q = 0.45  # 0.5 rho CdA [N s^2/m^2] (illustrative)
WHEELS = 3.0  # wheel and tyre inertia of all wheels [kg m^2] (illustrative)


def _params(regen_max_w=60e3):
    return EnergyParams(inverter_efficiency=0.96, auxiliary_w=300.0, regen_max_w=regen_max_w,
                        regen_min_speed_mps=5 / 3.6)


def _vehicle(n, rng, mass=None):
    return EnergyVehicle(mass_kg=rng.uniform(1400, 2600, n) if mass is None else mass,
                         crr=rng.uniform(0.007, 0.012, n), q_n_s2_m2=Q, radius_m=rng.uniform(0.29, 0.36, n),
                         wheel_inertia_total_kgm2=WHEELS)


def _mapped(unit, rng):
    """The same units with efficiency maps tabulated from their loss model on a grid (a map wins)."""
    import dataclasses

    w = np.linspace(0.0, 1700.0, 18)
    t = np.linspace(0.0, 420.0, 15)
    p = w[:, None] * t[None, :]
    grid = EfficiencyGrid(w, t, np.where(p > 0, p / (p + motor_loss_w(t[None, :], w[:, None], 0.06, 0.5, 1e-7,
                                                                          200.0)), 0.0), "tabulated")
    return dataclasses.replace(unit, map_index=np.zeros(len(unit), dtype=np.int64), maps=(grid,))


@pytest.mark.parametrize("two", [False, True], ids=["one unit", "two units"])
def test_prepared_model_equals_cycle_energy_bit_for_bit(two):
    rng = np.random.default_rng(3)
    n = 40
    cyc = load_cycle("udds")
    front = random_units(n, rng)
    rear = random_units(n, rng) if two else None
    veh = _vehicle(n, rng)
    model = CycleEnergyModel(front, rear, veh, _params(), cyc.time_s, cyc.speed_mps)
    for pick in (np.arange(n), rng.choice(n, 7, replace=False), np.array([5])):
        mass = rng.uniform(1500, 3500, pick.size)
        got = model.energy(mass, pick, detail=True)
        sub = stack(*[_row(front, i) for i in pick])
        sub_r = None if rear is None else stack(*[_row(rear, i) for i in pick])
        want = cycle_energy(sub, sub_r, EnergyVehicle(mass_kg=mass, crr=veh.crr[pick], q_n_s2_m2=Q,
                                                      radius_m=veh.radius_m[pick], wheel_inertia_total_kgm2=WHEELS),
                            _params(), cyc.time_s, cyc.speed_mps, detail=True)
        for name in ("wh_per_km", "regen_share", "drive_wh", "regen_wh", "infeasible_steps", "motor_loss_wh",
                     "inverter_loss_wh", "gearbox_loss_wh", "friction_brake_wh"):
            assert np.array_equal(getattr(got, name), getattr(want, name), equal_nan=True), name


def _row(u, i):
    import dataclasses

    return dataclasses.replace(u, **{k: np.asarray(getattr(u, k))[[i]] for k in u.__dataclass_fields__
                                     if k != "maps"})


def test_infeasible_when_heavier_is_infeasible_at_every_larger_mass():
    # weak motors on a demanding cycle: many designs miss intervals; the flag claims they miss them at any
    # larger mass too (the wheel force grows with mass there); check it at many larger masses
    rng = np.random.default_rng(8)
    n = 120
    cyc = load_cycle("us06")
    unit = random_units(n, rng)
    unit = stack(_mapped(random_units(n, rng), rng), unit)  # (stack keeps the first one's maps)
    veh = _vehicle(2 * n, rng)
    base = cycle_energy(unit, None, veh, _params(), cyc.time_s, cyc.speed_mps)
    flagged = np.flatnonzero(base.infeasible_when_heavier)
    assert flagged.size > 10 and np.all(~base.feasible[flagged])
    model = CycleEnergyModel(unit, None, veh, _params(), cyc.time_s, cyc.speed_mps)
    for extra in (1e-9, 0.5, 50.0, 400.0, 3000.0):
        heavier = model.energy(np.asarray(veh.mass_kg)[flagged] + extra, flagged)
        assert not heavier.feasible.any(), extra


def _setup(cycle_t, cycle_v, params):
    return EnergySetup(time_s=np.asarray(cycle_t, float), speed_mps=np.asarray(cycle_v, float), params=params,
                       range_km=250.0, specific_energy_wh_per_kg=160.0, cost_per_kwh=140.0, usable_fraction=0.9,
                       q_n_s2_m2=Q)


def _design_bound(st, unit, veh, mass):
    """consumption_lower_bound at the designs' own parameters (one unit), as the engine calls it."""
    ratios = np.asarray(unit.ratios)
    r = np.asarray(veh.radius_m)
    poly = np.asarray(unit.map_index) < 0
    l_a = np.log(np.nanmin(ratios, axis=1) / r)
    l_b = np.log(np.nanmax(ratios, axis=1) / r)

    def k(x):
        return np.where(poly, np.asarray(x), 0.0)
    brake = np.asarray(unit.rotor_inertia_kgm2) * np.exp(2 * l_b) + WHEELS / r ** 2
    return consumption_lower_bound(st, mass, veh.crr, l_a, np.nanmax(unit.gear_efficiency, axis=1),
                                   k(unit.loss_iron_nm), k(unit.loss_windage_w_s3), k(unit.loss_constant_w), brake,
                                   k(unit.loss_copper_w_per_nm2), l_b)


@pytest.mark.parametrize("cycle, start, regen", [("wltc_class3b", 0, 60e3), ("udds", 0, np.inf),
                                                 ("us06", 130, 40e3)],
                         ids=["wltc", "udds, no cap", "us06 from 130 s (moving start)"])
def test_consumption_bound_never_exceeds_the_model(cycle, start, regen):
    # large rotors and gearboxes: the rotor's braking energy and the shift energy are where the bound is tight
    rng = np.random.default_rng(21)
    n = 80
    cyc = load_cycle(cycle)
    t, v = cyc.time_s[start:] - cyc.time_s[start], cyc.speed_mps[start:]
    unit = stack(_mapped(random_units(n, rng, inertia=(0.05, 0.3)), rng), random_units(n, rng, inertia=(0.05, 0.3)))
    veh = _vehicle(2 * n, rng)
    params = _params(regen)
    exact = cycle_energy(unit, None, veh, params, t, v)
    ok = exact.feasible & ~exact.out_of_map
    assert ok.sum() > n // 4  # enough designs follow the cycle for the check to mean something
    bound, slope = _design_bound(_setup(t, v, params), unit, veh, np.asarray(veh.mass_kg))
    proved = bound > NO_BOUND
    assert proved[ok].mean() > 0.9 and np.all(slope[proved] >= 0)
    assert np.all(bound[ok] <= exact.wh_per_km[ok] * (1 + 1e-12))
    assert np.median(bound[ok] / exact.wh_per_km[ok]) > 0.5  # not a trivial bound (no published source)


def test_battery_bound_never_exceeds_the_sized_battery():
    rng = np.random.default_rng(4)
    n = 24
    cyc = load_cycle("wltc_class3b")
    unit = random_units(n, rng)
    veh = _vehicle(n, rng)
    params = _params()
    st = _setup(cyc.time_s, cyc.speed_mps, params)
    parts_mass = np.asarray(veh.mass_kg)
    model = CycleEnergyModel(unit, None, veh, params, cyc.time_s, cyc.speed_mps)

    def consumption(m_b, idx):
        r = model.energy(parts_mass[idx] + m_b, idx)
        return np.where(r.feasible, r.wh_per_km, np.inf)

    sized = size_battery(consumption, st.range_km, st.specific_energy_wh_per_kg, st.usable_fraction, n, 6000.0)
    assert sized.found.sum() > n // 2
    mb, cons = battery_lower_bound(st, lambda m: _design_bound(st, unit, veh, m), parts_mass, 6000.0)
    f = sized.found
    assert np.all(mb[f] <= sized.mass_kg[f] * (1 + 1e-12))
    assert np.all(cons[f] <= sized.consumption_wh_per_km[f] * (1 + 1e-12))
    assert np.all(np.isfinite(mb[f]))  # never "dead" where a battery exists
