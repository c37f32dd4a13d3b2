"""Unit constants and conversions of `selector.units` against pint and the exact SI definitions.

Sources: the exact unit definitions of the SI Brochure (9th ed.), NIST SP 811 App. B and the 1959
international yard and pound agreement, as implemented by pint 0.25.3 (PyPI). pint is used here as an
outside oracle: every expected value below is computed by pint from its own definitions file, not by
selector.

Tolerance: the definitions are exact, so conversions agree to a few ulp; ``rel=1e-12`` (usual for
exact unit definitions) leaves room only for floating-point rounding.
"""

from __future__ import annotations

import math

import numpy as np
import pint
import pytest
from conftest import assert_table

from selector import units

UREG = pint.UnitRegistry()
Q_ = UREG.Quantity
EXACT = 1e-12  # exact definitions: only floating-point rounding may differ


def _pint_factor(src: str, dst: str) -> float:
    """How many ``dst`` in one ``src``, according to pint."""
    return float(Q_(1.0, src).to(dst).magnitude)


def pint_approx(value: float, src: str, dst: str):
    """``value`` [src] in ``dst`` according to pint, as a pytest.approx to floating-point rounding."""
    return pytest.approx(float(Q_(value, src).to(dst).magnitude), rel=EXACT, abs=1e-300)


# ------------------------------------------------------------------------------- constants


def test_standard_gravity_matches_pint():
    # pint `standard_gravity`; 3rd CGPM 1901 / NIST SP 811, g_n = 9.80665 m/s^2 exact
    assert units.G_N == pytest.approx(_pint_factor("standard_gravity", "m/s**2"), rel=EXACT)


def test_standard_gravity_exact_value():
    # 40 CFR 1066.210 "ag = 9.80665 m/s^2" (regulation text); 3rd CGPM 1901
    assert units.G_N == 9.80665


def test_inch_matches_pint():
    # pint `inch` -> 25.4 mm; 1959 international yard and pound agreement
    assert units.INCH_M == pytest.approx(_pint_factor("inch", "m"), rel=EXACT)


def test_inch_exact_value():
    # 1959 international yard and pound agreement: 1 in = 25.4 mm exactly (NIST SP 811 App. B)
    assert units.INCH_M == pytest.approx(0.0254, rel=EXACT)


def test_kmh_per_mps_matches_pint():
    # pint `kph`/`km/h`; SI Brochure: hour = 3600 s, so 1 m/s = 3.6 km/h (exact)
    assert units.KMH_PER_MPS == pytest.approx(_pint_factor("m/s", "km/h"), rel=EXACT)


def test_rpm_to_rad_s_constant_matches_pint():
    # pint `rpm` -> rad/s = 0.10471975511965977 (pint 0.25.3 definitions)
    assert units.RPM_TO_RAD_S == pytest.approx(_pint_factor("rpm", "rad/s"), rel=EXACT)


def test_rpm_to_rad_s_constant_is_two_pi_over_sixty():
    # ISO 80000-3 omega = 2 pi n (the clause number is from memory)
    assert units.RPM_TO_RAD_S == pytest.approx(0.10471975511965977, rel=EXACT)


# ------------------------------------------------------------------------------- conversions

SPEEDS_KMH = [0.0, 1.0, 50.0, 96.56064, 100.0, 180.9557, 253.874]


def test_kmh_to_mps_matches_pint():
    # pint km/h -> m/s (SI Brochure: hour = 3600 s)
    values = SPEEDS_KMH
    assert_table(values, units.kmh_to_mps, lambda x: pint_approx(x, "km/h", "m/s"), "km/h -> m/s")


def test_mps_to_kmh_matches_pint():
    # pint m/s -> km/h (SI Brochure: hour = 3600 s)
    values = [0.0, 1.0, 27.77777777777778, 50.2655, 70.52061]
    assert_table(values, units.mps_to_kmh, lambda x: pint_approx(x, "m/s", "km/h"), "m/s -> km/h")


def test_100_kmh_in_mps():
    # 100 km/h = 27.777... m/s, SI Brochure hour = 3600 s (exact)
    assert units.kmh_to_mps(100.0) == pytest.approx(100.0 / 3.6, rel=EXACT)


def test_60_mph_in_kmh_through_pint_and_selector():
    # 60 mph = 96.56064 km/h exact (NIST SP 811 App. B: 1 mph = 0.44704 m/s; via pint); mph itself is not
    # used by selector, so pint turns mph into m/s and selector turns m/s into km/h.
    v_mps = float(Q_(60.0, "mph").to("m/s").magnitude)
    assert units.mps_to_kmh(v_mps) == pytest.approx(96.56064, rel=EXACT)


def test_rpm_to_rad_s_matches_pint():
    # pint rpm -> rad/s (ISO 80000-3 omega = 2 pi n)
    values = [0.0, 1.0, 1000.0, 3183.0988618379067, 12000.0, 16000.0]
    assert_table(values, units.rpm_to_rad_s, lambda x: pint_approx(x, "rpm", "rad/s"), "rpm -> rad/s")


def test_1000_rpm_in_rad_s():
    # 1000 rpm = 104.71975511965977 rad/s (ISO 80000-3 omega = 2 pi n; pint agrees)
    assert units.rpm_to_rad_s(1000.0) == pytest.approx(104.71975511965977, rel=EXACT)


def test_rad_s_to_rpm_matches_pint():
    # pint rad/s -> rpm (ISO 80000-3 omega = 2 pi n)
    values = [0.0, 1.0, 104.71975511965977, 1256.6370614359173]
    assert_table(values, units.rad_s_to_rpm, lambda x: pint_approx(x, "rad/s", "rpm"), "rad/s -> rpm")


def test_conversions_are_vectorised_and_round_trip():
    # round trip of the exact definitions above; arrays in, arrays out (numpy ufunc arithmetic)
    v = np.array([0.0, 10.0, 100.0, 250.0])
    n = np.array([0.0, 1000.0, 12000.0, 20000.0])
    np.testing.assert_allclose(units.mps_to_kmh(units.kmh_to_mps(v)), v, rtol=EXACT, atol=0.0)
    np.testing.assert_allclose(units.rad_s_to_rpm(units.rpm_to_rad_s(n)), n, rtol=EXACT, atol=0.0)


def test_pi_is_not_truncated():
    # a truncated pi (3.1416, 3.14159) would show here at ~1e-6 .. 1e-5 relative (math.pi, 2 pi rad per rev)
    assert units.rpm_to_rad_s(60.0) == pytest.approx(2.0 * math.pi, rel=EXACT)
