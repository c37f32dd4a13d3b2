"""Motor envelope, reducer kinematics and wheel force against hand-derived and worked values.

Sources: the product's envelope definition T(w) = min(T_pk, P_pk/w, P_pk (w_d/w)^k / w) and the
kinematics w = v G/r, F_w = eta T G/r, with values derived by hand below; a gearing table and the
7125.0 N wheel force computed from those kinematic identities (unit factors from pint, ISO 80000-3
omega = 2 pi n). pint converts rpm and mph independently of selector.units.

Tolerances: table values to half a unit in the last printed digit (`printed`); hand-derived values
of exact arithmetic to rel 1e-12 (floating-point rounding only).
"""

from __future__ import annotations

import numpy as np
import pint
import pytest
from conftest import assert_table, printed
from scipy.optimize import brentq

from selector.physics.motor import envelope_torque_nm, wheel_force_n
from selector.physics.performance import Drive, gearing_speed_limit_mps, wheel_force
from selector.units import mps_to_kmh, rad_s_to_rpm

UREG = pint.UnitRegistry()
Q_ = UREG.Quantity
EXACT = 1e-12  # exact arithmetic, floating-point rounding only


def rpm(n):
    """rev/min -> rad/s through pint (outside oracle, pint 0.25.3)."""
    return float(Q_(n, "rpm").to("rad/s").magnitude)


def make_drive(**kw) -> Drive:
    """An illustrative drive (parcel-van-sized motor); keyword overrides, SI units."""
    d = dict(torque_nm=300.0, power_w=100e3, cont_torque_nm=150.0, cont_power_w=50e3, decline_rad_s=1000.0,
             decline_exponent=1.0, max_speed_rad_s=1500.0, rotor_inertia_kgm2=0.05, ratio=8.0,
             efficiency=0.95, radius_m=0.32)
    d.update(kw)
    return Drive(**{k: np.atleast_1d(np.asarray(v, dtype=float)) for k, v in d.items()})


# ------------------------------------------------------------------------------ envelope
# Envelope T = 300 N m, P = 100 kW (corner 333.33 rad/s), w_d = 1000 rad/s, w_max = 1500 rad/s.
# Expected torques derived by hand from the definition T(w) = min(T_pk, P_pk/w, P_pk (w_d/w)^k / w).
ENV = dict(torque_nm=300.0, power_w=100e3, decline_rad_s=1000.0, max_speed_rad_s=1500.0)


ENVELOPE_ROWS = [
    (0.0, 1.0, 300.0),               # standstill: torque branch (P/w -> inf)
    (200.0, 1.0, 300.0),             # below corner 1e5/300 = 333.3 rad/s
    (1e5 / 300.0, 1.0, 300.0),       # at the corner P/T both branches give 300
    (500.0, 1.0, 200.0),             # constant power: 1e5/500
    (1000.0, 1.0, 100.0),            # at the decline speed: 1e5/1000
    (1250.0, 1.0, 64.0),             # 1e5 (1000/1250)^1 / 1250
    (1250.0, 0.5, 1e5 * 0.8 ** 0.5 / 1250.0),  # = 71.5542..., k = 0.5
    (1250.0, 1.5, 1e5 * 0.8 ** 1.5 / 1250.0),  # = 57.2433..., k = 1.5
    (1500.0, 1.0, 1e5 * (1000.0 / 1500.0) / 1500.0),  # at w_max still available: 44.444...
    (1500.1, 1.0, 0.0),              # above w_max: nothing
]


def test_envelope_torque():
    # envelope definition, hand-derived values (see comment per row)
    assert_table(ENVELOPE_ROWS, lambda r: float(envelope_torque_nm(r[0], decline_exponent=r[1], **ENV)),
                 lambda r: pytest.approx(r[2], rel=EXACT, abs=1e-12), "envelope torque [N m]")


def test_envelope_power_is_flat_between_corner_and_decline():
    # envelope definition: constant power P between corner speed P/T and w_d (T w = 1e5 W by hand)
    w = np.linspace(1e5 / 300.0, 1000.0, 9)
    np.testing.assert_allclose(w * envelope_torque_nm(w, decline_exponent=1.0, **ENV), 100e3, rtol=EXACT)


@pytest.mark.parametrize("k", [0.5, 1.0, 1.5])
def test_envelope_power_declines_as_power_law(k):
    # envelope definition: above w_d the power is P (w_d/w)^k (hand-derived from the definition)
    w = np.array([1000.0, 1100.0, 1300.0, 1500.0])
    np.testing.assert_allclose(w * envelope_torque_nm(w, decline_exponent=k, **ENV),
                               100e3 * (1000.0 / w) ** k, rtol=EXACT)


def test_envelope_is_continuous_at_breakpoints():
    # the envelope is the min of continuous branches, so it has no jump at the corner or decline speed
    # (it jumps only at w_max). Left/right values 1e-9 rad/s apart agree to ~1e-9 relative.
    for w0 in (1e5 / 300.0, 1000.0):
        lo, hi = envelope_torque_nm(np.array([w0 - 1e-9, w0 + 1e-9]), decline_exponent=1.0, **ENV)
        assert lo == pytest.approx(hi, rel=1e-9)


def test_envelope_broadcasts_over_designs():
    # vectorised: one speed per design, one torque rating per design (same hand values as above)
    t = envelope_torque_nm(np.array([200.0, 500.0]), np.array([300.0, 250.0]), 100e3, 1000.0, 1.0, 1500.0)
    np.testing.assert_allclose(t, [300.0, 200.0], rtol=EXACT)


# ------------------------------------------------------------------------------ wheel force

def test_wheel_force_worked_value():
    # computed from F = T G eta / r: T = 300 N m, G = 8.0, eta = 0.95, r = 0.32 m -> 7125.0 N
    f = wheel_force_n(0.0, 8.0 / 0.32, 0.95, 300.0, 100e3, 1000.0, 1.0, 1500.0)
    assert float(f) == printed("7125.0")


def test_wheel_force_through_drive():
    # same worked value through the Drive dataclass (F = T G eta / r = 7125.0 N)
    assert float(wheel_force(make_drive(), 1.0)[0]) == printed("7125.0")


def test_wheel_force_in_power_region():
    # kinematics: at road speed v the shaft turns at w = v G/r; in the power region
    # F_w = eta P / v (the reducer only trades torque for speed). v = 20 m/s -> w = 500 rad/s,
    # F = 0.95 * 1e5 / 20 = 4750 N (hand-derived)
    assert float(wheel_force(make_drive(), 20.0)[0]) == pytest.approx(4750.0, rel=EXACT)


def test_wheel_force_zero_above_gearing_limit():
    # envelope definition: T = 0 above w_max; w_max r / G = 1500 * 0.32 / 8 = 60 m/s (hand-derived)
    f = wheel_force(make_drive(), np.array([59.999, 60.001]))
    assert f[0] > 0.0
    assert f[1] == 0.0


def test_continuous_envelope_shares_decline_and_max_speed():
    # product convention: the continuous envelope uses cont torque/power with the motor's w_d,
    # k and w_max. v = 40 m/s -> w = 1000 rad/s = w_d: F = eta P_cont / v = 0.95 * 5e4 / 40 = 1187.5 N;
    # v = 50 m/s -> w = 1250: F = 0.95 * 5e4 (1000/1250) / 1250 * 25 = 760 N; v = 4 m/s -> w = 100 < 5e4/150:
    # F = 0.95 * 150 * 25 = 3562.5 N (hand-derived)
    f = wheel_force(make_drive(), np.array([4.0, 40.0, 50.0, 60.001]), continuous=True)
    np.testing.assert_allclose(f, [3562.5, 1187.5, 760.0, 0.0], rtol=EXACT)


# ------------------------------------------------------------------------------ gearing kinematics

# (n rpm, G, r m, wheel rpm, omega_wheel rad/s, v m/s, v km/h, v mph) -- computed from v = (n 2 pi/60 / G) r
GEARING_ROWS = [
    (12000, 8.0, 0.32, "1500.00", "157.0796", "50.2655", "180.9557", "112.4407"),
    (10000, 9.0, 0.30, "1111.11", "116.3553", "34.9066", "125.6637", "78.0838"),
    (16000, 10.0, 0.33, "1600.00", "167.5516", "55.2920", "199.0513", "123.6848"),
    (6000, 4.0, 0.30, "1500.00", "157.0796", "47.1239", "169.6460", "105.4131"),
    (1000, 1.0, 0.30, "1000.00", "104.7198", "31.4159", "113.0973", "70.2754"),
]


def _gearing_v(n, g, r):
    return float(gearing_speed_limit_mps(make_drive(max_speed_rad_s=rpm(n), ratio=g, radius_m=r))[0])


@pytest.mark.parametrize("n, g, r, wheel_rpm, w_wheel, v, kmh, mph", GEARING_ROWS)
def test_gearing_road_speed_mps(n, g, r, wheel_rpm, w_wheel, v, kmh, mph):
    # gearing table above, v = (n 2 pi/60 / G) r
    assert _gearing_v(n, g, r) == printed(v)


@pytest.mark.parametrize("n, g, r, wheel_rpm, w_wheel, v, kmh, mph", GEARING_ROWS)
def test_gearing_road_speed_kmh(n, g, r, wheel_rpm, w_wheel, v, kmh, mph):
    # gearing table above, km/h column (1 m/s = 3.6 km/h)
    assert mps_to_kmh(_gearing_v(n, g, r)) == printed(kmh)


@pytest.mark.parametrize("n, g, r, wheel_rpm, w_wheel, v, kmh, mph", GEARING_ROWS)
def test_gearing_road_speed_mph(n, g, r, wheel_rpm, w_wheel, v, kmh, mph):
    # gearing table above, mph column (m/s -> mph by pint: 1 mph = 0.44704 m/s exact)
    assert float(Q_(_gearing_v(n, g, r), "m/s").to("mph").magnitude) == printed(mph)


@pytest.mark.parametrize("n, g, r, wheel_rpm, w_wheel, v, kmh, mph", GEARING_ROWS)
def test_gearing_wheel_speed(n, g, r, wheel_rpm, w_wheel, v, kmh, mph):
    # gearing table above: omega_wheel = v / r (rad/s) and wheel rpm = n / G
    w = _gearing_v(n, g, r) / r
    assert w == printed(w_wheel)
    assert rad_s_to_rpm(w) == printed(wheel_rpm)


def test_ratio_for_180_kmh_at_12000_rpm():
    # computed from G = (n 2 pi/60) r / v: the ratio giving 180 km/h at 12000 rpm with r = 0.32 m is 8.04248;
    # scipy.optimize.brentq inverts gearing_speed_limit_mps (xtol 1e-12, far below the printed 5e-6)
    g = brentq(lambda g: _gearing_v(12000, g, 0.32) - 180.0 / 3.6, 7.0, 9.0, xtol=1e-12)
    assert g == printed("8.04248")


def test_gearing_limit_is_vectorised():
    # two designs at once: rows 1 and 2 of the gearing table
    d = make_drive(max_speed_rad_s=[rpm(12000), rpm(10000)], ratio=[8.0, 9.0], radius_m=[0.32, 0.30])
    np.testing.assert_allclose(gearing_speed_limit_mps(d), [50.2655, 34.9066], atol=5e-5)
