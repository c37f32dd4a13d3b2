"""Battery sized for a range with the mass spiral (selector.physics.battery)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from selector.io.cycles import load_cycle
from selector.physics.battery import (
    battery_cost,
    battery_energy_linear_wh,
    battery_mass_kg,
    max_range_linear_km,
    size_battery,
)
from selector.physics.energy import EnergyParams, EnergyUnit, EnergyVehicle, cycle_energy


def test_closed_form_by_hand():
    # Closed form, derived here: the usable energy u E must cover R c with c = c0 + c1 m and m = E / sigma:
    # u E = R (c0 + c1 E / sigma)  =>  E (u - R c1 / sigma) = R c0  =>  E = R c0 / (u - R c1 / sigma).
    # R = 300 km, c0 = 150 Wh/km, c1 = 0.05 Wh/(km kg), sigma = 160 Wh/kg, u = 0.9:
    # u - R c1 / sigma = 0.9 - 0.09375 = 0.80625; E = 45000 / 0.80625 = 55813.953 Wh
    e = battery_energy_linear_wh(300.0, 150.0, 0.05, 160.0, 0.9)
    assert e == pytest.approx(55813.953, abs=1e-3)
    m = battery_mass_kg(e, 160.0)
    assert m == pytest.approx(348.837, abs=1e-3)
    assert 0.9 * e == pytest.approx(300.0 * (150.0 + 0.05 * m), rel=1e-12)  # it covers the range exactly
    assert battery_cost(e, 120.0) == pytest.approx(55.813953 * 120.0, rel=1e-7)  # kWh x price


def test_no_battery_beyond_the_asymptotic_range():
    # R_max = u sigma / c1 = 0.9 x 160 / 0.05 = 2880 km (closed form): at and beyond it no battery reaches the
    # range; just below it the battery grows without bound
    assert max_range_linear_km(0.05, 160.0, 0.9) == pytest.approx(2880.0)
    e = battery_energy_linear_wh(np.array([2879.0, 2880.0, 3000.0]), 150.0, 0.05, 160.0, 0.9)
    assert np.isfinite(e[0]) and e[0] > 1e7 and np.isnan(e[1]) and np.isnan(e[2])
    assert max_range_linear_km(0.0, 160.0, 0.9) == math.inf


def test_general_solver_agrees_with_the_closed_form():
    rng = np.random.default_rng(4)
    n = 60
    c0 = rng.uniform(90, 350, n)
    c1 = rng.uniform(0.01, 0.12, n)
    sigma = rng.uniform(110, 220, n)
    u = rng.uniform(0.8, 0.95, n)
    r_max = u * sigma / c1
    rng_km = r_max * rng.uniform(0.05, 1.3, n)  # some beyond the limit
    closed = battery_energy_linear_wh(rng_km, c0, c1, sigma, u)
    res = size_battery(lambda m, i: c0[i] + c1[i] * m, rng_km, sigma, u, n, max_battery_kg=1e6)
    beyond = rng_km >= r_max
    assert beyond.any() and (~beyond).any()
    np.testing.assert_array_equal(res.found, ~beyond & (closed / sigma <= 1e6))
    ok = res.found
    np.testing.assert_allclose(res.energy_wh[ok], closed[ok], rtol=1e-8)
    assert np.all(res.energy_wh[ok] >= closed[ok] * (1 - 1e-12))  # on the covering side
    assert np.all(np.isnan(res.energy_wh[~ok]))
    np.testing.assert_allclose(res.consumption_wh_per_km[ok], c0[ok] + c1[ok] * res.mass_kg[ok], rtol=1e-12)
    assert res.evaluations < 40


def test_general_solver_on_convex_consumption_finds_the_smallest_battery():
    # c = c0 + c1 m + c2 m^2: u sigma m = R c is R c2 m^2 + (R c1 - u sigma) m + R c0 = 0, whose smaller root is
    # the smallest battery (closed form, derived here); scipy's brentq on [0, vertex] checks it too
    c0, c1, c2, sigma, u, rng_km = 150.0, 0.04, 2e-5, 160.0, 0.9, 500.0
    b = rng_km * c1 - u * sigma
    m_small = (-b - math.sqrt(b * b - 4 * rng_km * c2 * rng_km * c0)) / (2 * rng_km * c2)
    vertex = -b / (2 * rng_km * c2)
    m_brent = brentq(lambda m: u * sigma * m - rng_km * (c0 + c1 * m + c2 * m * m), 0.0, vertex, xtol=1e-12)
    assert m_small == pytest.approx(m_brent, rel=1e-10)
    res = size_battery(lambda m, i: c0 + c1 * m + c2 * m * m, rng_km, sigma, u, 1, max_battery_kg=5000.0)
    assert res.found[0]
    assert res.mass_kg[0] == pytest.approx(m_small, rel=1e-8)


def test_root_below_the_drivable_limit_is_not_stepped_over():
    # linear consumption (closed form above) up to a drivable limit m_fail, infinite beyond (too heavy to follow
    # the cycle); roots just below m_fail, where the scan's 1.6x steps jump from below the root past m_fail
    c0, c1, sigma, u = 150.0, 0.05, 160.0, 0.9
    rng = np.random.default_rng(11)
    n = 40
    rng_km = rng.uniform(80, 400, n)
    closed = battery_energy_linear_wh(rng_km, c0, c1, sigma, u) / sigma  # the smallest battery [kg]
    m_fail = closed * rng.uniform(1.0001, 1.3, n)
    m_fail[:5] = closed[:5] * rng.uniform(0.7, 0.9999, 5)  # these cannot drive with the battery they need

    def consumption(m, i):
        return np.where(m < m_fail[i], c0 + c1 * m, np.inf)

    res = size_battery(consumption, rng_km, sigma, u, n, max_battery_kg=6000.0)
    np.testing.assert_array_equal(res.found, np.arange(n) >= 5)
    np.testing.assert_allclose(res.mass_kg[5:], closed[5:], rtol=1e-8)
    # where none is found: the largest drivable battery tried (the secant through two drivable points shows
    # the root lies beyond the drivable limit)
    assert np.all(res.short_kg[:5] < m_fail[:5]) and np.all(res.short_kg[:5] > 0)
    assert res.evaluations < 40
    assert np.all(np.isnan(res.short_kg[5:]))


def test_search_limit_and_zero_consumption():
    res = size_battery(lambda m, i: np.full(len(i), 150.0) + 0.05 * m, 300.0, 160.0, 0.9, 1, max_battery_kg=100.0)
    assert not res.found[0] and np.isnan(res.mass_kg[0])  # needs 349 kg, limit 100 kg
    res = size_battery(lambda m, i: np.zeros(len(i)), 300.0, 160.0, 0.9, 1, max_battery_kg=100.0)
    assert res.found[0] and res.energy_wh[0] == 0.0
    res = size_battery(lambda m, i: np.full(len(i), np.nan), 300.0, 160.0, 0.9, 1, max_battery_kg=100.0)
    assert not res.found[0]


def test_mass_spiral_with_the_cycle_model():
    # lossless drive with full regeneration: battery energy = sum (m g Crr + q v^2) v dt, exactly linear in the
    # mass, so the solver on the energy model must give the closed form with c0, c1 read off two evaluations
    cyc = load_cycle("wltc_class3b")
    n = 1

    def unit():
        return EnergyUnit(present=np.ones(n, bool), torque_nm=np.full(n, 2000.0), power_w=np.full(n, 1e6),
                          decline_rad_s=np.full(n, 2000.0), decline_exponent=np.ones(n),
                          max_speed_rad_s=np.full(n, 2000.0), rotor_inertia_kgm2=np.zeros(n),
                          ratios=np.array([[9.0, np.nan, np.nan]]), gear_efficiency=np.array([[1.0, np.nan, np.nan]]),
                          loss_copper_w_per_nm2=np.zeros(n), loss_iron_nm=np.zeros(n), loss_windage_w_s3=np.zeros(n),
                          loss_constant_w=np.zeros(n), map_index=np.full(n, -1))

    params = EnergyParams(inverter_efficiency=1.0, auxiliary_w=0.0)
    base_mass = 1400.0

    def consumption(m, idx):
        veh = EnergyVehicle(mass_kg=base_mass + m, crr=0.01, q_n_s2_m2=0.35, radius_m=0.3)
        return cycle_energy(unit(), None, veh, params, cyc.time_s, cyc.speed_mps).wh_per_km

    c0 = consumption(np.zeros(1), np.arange(1))[0]
    c1 = consumption(np.full(1, 100.0), np.arange(1))[0] / 100.0 - c0 / 100.0
    closed = battery_energy_linear_wh(400.0, c0, c1, 150.0, 0.9)
    res = size_battery(consumption, 400.0, 150.0, 0.9, 1, max_battery_kg=3000.0)
    assert res.energy_wh[0] == pytest.approx(closed, rel=1e-8)
