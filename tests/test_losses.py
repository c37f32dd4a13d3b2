"""Motor loss model, efficiency and efficiency-map interpolation (selector.physics.losses)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.interpolate import RegularGridInterpolator
from scipy.optimize import minimize_scalar

from selector.physics.losses import (
    EfficiencyGrid,
    bilinear_interpolate,
    efficiency_from_loss,
    electrical_power_from_efficiency_w,
    electrical_power_from_loss_w,
    map_efficiency,
    motor_loss_w,
    peak_efficiency,
)

# chosen coefficients (illustrative): k_c [W/(N m)^2], k_i [N m], k_w [W s^3], C0 [W]
KC, KI, KW, C0 = 0.05, 0.5, 2e-7, 300.0


def test_polynomial_loss_and_efficiency_by_hand():
    # Larminie and Lowry (2012) ch. 7: P_loss = k_c T^2 + k_i w + k_w w^3 + C0. At T = 150 N m, w = 500 rad/s,
    # by hand: copper 0.05 x 150^2 = 1125 W; iron 0.5 x 500 = 250 W; windage 2e-7 x 500^3 = 25 W; constant 300 W
    assert motor_loss_w(150.0, 0.0, KC, 0, 0, 0) == pytest.approx(1125.0)
    assert motor_loss_w(0.0, 500.0, 0, KI, 0, 0) == pytest.approx(250.0)
    assert motor_loss_w(0.0, 500.0, 0, 0, KW, 0) == pytest.approx(25.0)
    loss = motor_loss_w(150.0, 500.0, KC, KI, KW, C0)
    assert loss == pytest.approx(1700.0, rel=1e-12)
    # motoring: P = 150 x 500 = 75000 W; eta = 75000 / 76700 = 0.9778357 (by hand)
    assert efficiency_from_loss(75000.0, loss) == pytest.approx(75000.0 / 76700.0, rel=1e-12)
    assert efficiency_from_loss(75000.0, loss) == pytest.approx(0.9778357, abs=1e-7)
    assert electrical_power_from_loss_w(75000.0, loss) == pytest.approx(76700.0)
    # generating at -150 N m: the same loss (T^2); eta = (75000 - 1700) / 75000 = 0.9773333 (by hand)
    loss_g = motor_loss_w(-150.0, 500.0, KC, KI, KW, C0)
    assert loss_g == pytest.approx(1700.0)
    assert efficiency_from_loss(-75000.0, loss_g) == pytest.approx(0.9773333, abs=1e-7)
    assert electrical_power_from_loss_w(-75000.0, loss_g) == pytest.approx(-73300.0)
    # no shaft power: efficiency undefined
    assert math.isnan(float(efficiency_from_loss(0.0, 300.0)))


def test_generating_below_the_losses_is_negative_efficiency():
    # |P| = 1000 W < loss 1700 W: (1000 - 1700) / 1000 = -0.7 (the motor draws power while braking)
    assert efficiency_from_loss(-1000.0, 1700.0) == pytest.approx(-0.7)


def test_electrical_power_from_map_efficiency():
    # motoring P / eta, generating P eta (by hand)
    np.testing.assert_allclose(electrical_power_from_efficiency_w([1000.0, -1000.0, 0.0], 0.9),
                               [1000.0 / 0.9, -900.0, 0.0])


def test_peak_efficiency_against_closed_form_optimum():
    # At a fixed speed eta = T w / (T w + k_c T^2 + L0(w)) is largest at k_c T^2 = L0 (d/dT = 0, by hand), so
    # eta*(w) = w / (w + 2 sqrt(k_c L0(w))); maximise over w with scipy (the envelope does not bind here:
    # T* = sqrt(L0 / k_c) stays below the 300 N m / 250 kW envelope).
    t_pk, p_pk, w_max = 300.0, 250e3, 1200.0

    def neg_eta(w):
        l0 = KI * w + KW * w ** 3 + C0
        assert math.sqrt(l0 / KC) <= min(t_pk, p_pk / w)
        return -w / (w + 2.0 * math.sqrt(KC * l0))

    best = minimize_scalar(neg_eta, bounds=(50.0, w_max), method="bounded", options={"xatol": 1e-6})
    got = peak_efficiency(KC, KI, KW, C0, t_pk, p_pk, w_max, 1.0, w_max, n_speed=400, n_torque=400)
    assert got == pytest.approx(-best.fun, abs=2e-4)  # grid resolution
    assert got <= -best.fun + 1e-12


# ------------------------------------------------------------------------------ maps


def test_bilinear_by_hand_on_one_cell():
    # cell (0, 0)-(1000, 100) with values 80, 90 (x = 0) and 84, 96 (x = 1000); at (250, 50):
    # along y at x=0: 85; at x=1000: 90; along x: 85 + 0.25 x 5 = 86.25 (by hand)
    v, out = bilinear_interpolate([0.0, 1000.0], [0.0, 100.0], [[80.0, 90.0], [84.0, 96.0]], 250.0, 50.0)
    assert float(v) == pytest.approx(86.25, rel=1e-14) and not bool(out)
    # on the nodes and on the last edge the node values are returned
    v, _ = bilinear_interpolate([0.0, 1000.0], [0.0, 100.0], [[80.0, 90.0], [84.0, 96.0]],
                                [0.0, 1000.0, 1000.0], [0.0, 100.0, 0.0])
    np.testing.assert_allclose(v, [80.0, 96.0, 84.0])


def test_bilinear_matches_scipy_and_flags_outside_points():
    rng = np.random.default_rng(3)
    xs = np.array([0.0, 150.0, 400.0, 700.0, 1200.0])
    ys = np.array([-50.0, 0.0, 30.0, 120.0])
    z = rng.uniform(0.5, 1.0, (len(xs), len(ys)))
    ref = RegularGridInterpolator((xs, ys), z, method="linear", bounds_error=False, fill_value=np.nan)
    x = rng.uniform(-100.0, 1300.0, 4000)
    y = rng.uniform(-80.0, 150.0, 4000)
    v, out = bilinear_interpolate(xs, ys, z, x, y)
    expected_out = (x < 0) | (x > 1200) | (y < -50) | (y > 120)
    np.testing.assert_array_equal(out, expected_out)
    assert np.all(np.isnan(v[out]))
    np.testing.assert_allclose(v[~out], ref(np.column_stack([x, y]))[~out], rtol=1e-12, atol=1e-14)


def test_map_efficiency_mirrors_generating_torque_only_for_one_sided_maps():
    one_sided = EfficiencyGrid(np.array([0.0, 100.0]), np.array([0.0, 50.0]), np.array([[0.0, 0.0], [0.0, 0.9]]))
    assert one_sided.mirrored
    e_m, o_m = map_efficiency(one_sided, 100.0, 50.0)
    e_g, o_g = map_efficiency(one_sided, 100.0, -50.0)
    assert float(e_m) == float(e_g) == pytest.approx(0.9) and not o_m and not o_g
    two_sided = EfficiencyGrid(np.array([0.0, 100.0]), np.array([-50.0, 50.0]), np.array([[0.0, 0.0], [0.8, 0.9]]))
    assert not two_sided.mirrored
    assert float(map_efficiency(two_sided, 100.0, -50.0)[0]) == pytest.approx(0.8)
    # beyond the grid: flagged, never extrapolated
    e, out = map_efficiency(one_sided, 101.0, 10.0)
    assert bool(out) and math.isnan(float(e))
