"""Air density from the International Standard Atmosphere (troposphere).

References
----------
ICAO Doc 7488/3, Manual of the ICAO Standard Atmosphere (1993); identical to ISO 2533:1975
up to 32 km.
"""

from __future__ import annotations

import numpy as np

from selector.units import G_N

ISA_T0_K = 288.15
"""Sea-level temperature [K] (ICAO Doc 7488)."""
ISA_P0_PA = 101325.0
"""Sea-level pressure [Pa] (ICAO Doc 7488)."""
ISA_LAPSE_K_PER_M = 0.0065
"""Tropospheric temperature lapse rate, temperature falls by this much per metre [K/m]."""
R_AIR_J_KG_K = 287.05287
"""Specific gas constant of dry air used by ICAO 1993 (R* / M0) [J/(kg K)]."""
ZERO_C_K = 273.15
"""0 degC in kelvin [K]."""

ISA_MIN_ALTITUDE_M = -2000.0
"""Lowest geopotential altitude of the ISA tables (ISO 2533) [m]."""
ISA_MAX_ALTITUDE_M = 11000.0
"""Top of the troposphere (tropopause), geopotential [m]."""

_EXPONENT = G_N / (R_AIR_J_KG_K * ISA_LAPSE_K_PER_M)  # 5.25588


def isa_temperature_k(altitude_m=0.0):
    """ISA temperature in the troposphere, T = T0 - 0.0065 H.

    Parameters
    ----------
    altitude_m : array_like
        Geopotential altitude H, -2000..11000. [m]

    Returns
    -------
    float or numpy.ndarray
        Temperature. [K]
    """
    h = _check_altitude(altitude_m)
    return _scalar(ISA_T0_K - ISA_LAPSE_K_PER_M * h)


def isa_pressure_pa(altitude_m=0.0):
    """ISA pressure in the troposphere, p = p0 (T/T0)^(g0 / (R 0.0065)).

    Parameters
    ----------
    altitude_m : array_like
        Geopotential altitude H, -2000..11000. [m]

    Returns
    -------
    float or numpy.ndarray
        Static pressure. [Pa]
    """
    h = _check_altitude(altitude_m)
    t = ISA_T0_K - ISA_LAPSE_K_PER_M * h
    return _scalar(ISA_P0_PA * (t / ISA_T0_K) ** _EXPONENT)


def isa_density_kg_m3(altitude_m=0.0, temperature_c=None):
    """Dry-air density from the ISA troposphere, optionally at a non-standard temperature.

    - ``temperature_c`` None: ISA density at the altitude, rho = p(H) / (R T(H)).
    - ``temperature_c`` given: ISA pressure at the altitude with the given air temperature,
      rho = p(H) / (R (temperature_c + 273.15)). With the default altitude this is sea-level
      pressure (101325 Pa) at that temperature.

    Parameters
    ----------
    altitude_m : array_like
        Geopotential altitude H, valid from -2000 to 11000 (ISO 2533 troposphere). [m]
    temperature_c : array_like or None
        Air temperature; None for the ISA temperature at the altitude. [degC]

    Returns
    -------
    float or numpy.ndarray
        Air density (a float for scalar inputs). [kg/m^3]

    Raises
    ------
    ValueError
        If an altitude lies outside the troposphere or a temperature is at or below 0 K.

    Notes
    -----
    Geometric altitude h converts to geopotential altitude as H = r0 h / (r0 + h) with
    r0 = 6 356 766 m; at 3000 m the densities differ by 1.4e-4 relative.
    """
    h = _check_altitude(altitude_m)
    t_isa = ISA_T0_K - ISA_LAPSE_K_PER_M * h
    p = ISA_P0_PA * (t_isa / ISA_T0_K) ** _EXPONENT
    if temperature_c is None:
        t = t_isa
    else:
        t = np.asarray(temperature_c, dtype=float) + ZERO_C_K
        if not np.all(np.isfinite(t)) or np.any(t <= 0.0):
            raise ValueError(f"temperature_c must be finite and above -273.15 degC, got {temperature_c!r}")
    return _scalar(p / (R_AIR_J_KG_K * t))


def _check_altitude(altitude_m):
    h = np.asarray(altitude_m, dtype=float)
    if not np.all(np.isfinite(h)) or np.any(h < ISA_MIN_ALTITUDE_M) or np.any(h > ISA_MAX_ALTITUDE_M):
        raise ValueError(
            f"altitude_m must be a geopotential altitude from {ISA_MIN_ALTITUDE_M:g} to "
            f"{ISA_MAX_ALTITUDE_M:g} m (ISA troposphere), got {altitude_m!r}"
        )
    return h


def _scalar(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x
