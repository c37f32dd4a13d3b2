"""Row checks of the catalogue CSVs: rules across the columns of one row and plausibility warnings.

Each check takes the typed values of one row whose cells are all valid and returns
``(errors, odd)``: messages of broken rules (the file is not loaded) and of unusual values
(loaded with a `selector.io.catalog.CatalogWarning`).
"""

from __future__ import annotations

from selector.io.catalog_cells import distinct_numbers, unit_suffix
from selector.io.schema import (
    CONSTANT_POWER_RATIO_LIMIT,
    CONSTANT_POWER_RATIO_USUAL,
    TYRE_DIAMETER_LIMITS_M,
    TYRE_DIAMETER_USUAL_M,
    columns,
)
from selector.physics.losses import peak_efficiency
from selector.physics.tyres import parse_tyre_size, unloaded_diameter_m
from selector.units import RPM_TO_RAD_S

__all__ = ["LOSS_COLUMNS", "check_row"]

LOSS_COLUMNS = ("loss_copper_w_per_nm2", "loss_iron_nm", "loss_windage_w_s3", "loss_constant_w")
"""Motor columns of the polynomial loss model (all four or none)."""
# Plausibility bounds for warnings (common practice, no published source).
MOTOR_MASS_WARN_KG = 500.0
PEAK_EFFICIENCY_WARN_PCT = (80.0, 99.0)
EFFICIENCY_WARN_PCT = 80.0
RR_WARN_N_PER_KN = (4.0, 20.0)
RATIO_WARN = (1.0, 30.0)
STEP_WARN = (1.05, 4.0)  # gear step ratio G_n / G_n+1 (common practice, no published source)

_REL_TOL = 1e-9  # equal values after rounding in a datasheet are not an error


def check_row(kind: str, v: dict, loc: str):
    """Cross-column rules and plausibility warnings for one row whose cells are all valid."""
    errors, odd = [], _check_usual(kind, v, loc)
    if kind == "motors":
        checks = (_check_motor_power, _check_motor_speeds, _check_motor_losses, _check_motor_mass)
    elif kind == "reducers":
        checks = (_check_reducer, _check_gears)
    elif kind == "tyres":
        checks = (_check_tyre,)
    else:
        checks = ()
    for check in checks:
        more_errors, more_odd = check(v, loc)
        errors += more_errors
        odd += more_odd
    return errors, odd


def _check_usual(kind: str, v: dict, loc: str) -> list[str]:
    """Values outside the usual range of their column (`selector.io.schema.Column.usual`)."""
    odd = []
    for c in columns(kind):
        x = v.get(c.name)
        if c.usual is not None and x is not None and not c.usual[0] <= x <= c.usual[1]:
            a, b, d = distinct_numbers(x, *c.usual)
            odd.append(f"{loc}: {c.name} = {a}; outside {b}..{d}{unit_suffix(c)}, unusual. Check the value and its "
                       "unit.")
    return odd


def _check_motor_power(v: dict, loc: str):
    """Peak power against peak torque and max speed; continuous ratings against peak ratings."""
    errors, odd = [], []
    corner_rad_s = v["peak_power_kw"] * 1000.0 / v["peak_torque_nm"]
    ratio = v["max_speed_rpm"] * RPM_TO_RAD_S / corner_rad_s
    if ratio > CONSTANT_POWER_RATIO_LIMIT:
        errors.append(f"{loc}: peak_power_kw = {v['peak_power_kw']:g} with peak_torque_nm = "
                      f"{v['peak_torque_nm']:g} gives full power only above {corner_rad_s / RPM_TO_RAD_S:.4g} rpm, "
                      f"1/{ratio:.0f} of max_speed_rpm = {v['max_speed_rpm']:g}; power = torque x speed, so these "
                      f"cannot belong to one motor (at most 1/{CONSTANT_POWER_RATIO_LIMIT:g}). Check the values "
                      "and their units (kW, N m, rpm).")
    elif ratio > CONSTANT_POWER_RATIO_USUAL:
        odd.append(f"{loc}: max_speed_rpm / corner speed = {ratio:.3g} (corner speed = peak_power_kw x 1000 / "
                   f"peak_torque_nm); above {CONSTANT_POWER_RATIO_USUAL:g}, unusual for a traction motor. "
                   "Check peak_power_kw, peak_torque_nm and max_speed_rpm.")
    for cont, peak, unit in (("cont_torque_nm", "peak_torque_nm", "N m"), ("cont_power_kw", "peak_power_kw", "kW")):
        if v[cont] > v[peak] * (1 + _REL_TOL):
            a, b = distinct_numbers(v[cont], v[peak])
            errors.append(f"{loc}: {cont} = {a} is above {peak} = {b}; must be <= {peak} "
                          f"[{unit}]. Check both values against the datasheet.")
    return errors, odd


def _check_motor_speeds(v: dict, loc: str):
    """decline_speed_rpm <= max_speed_rpm, and the corner speed below both."""
    errors = []
    n_max = v["max_speed_rpm"]
    n_dec = v["decline_speed_rpm"]
    corner = v["peak_power_kw"] * 1000.0 / v["peak_torque_nm"] / RPM_TO_RAD_S
    if n_dec is not None and n_dec > n_max * (1 + _REL_TOL):
        a, b = distinct_numbers(n_dec, n_max)
        errors.append(f"{loc}: decline_speed_rpm = {a} is above max_speed_rpm = {b}; must be "
                      "<= max_speed_rpm [rpm]. Fix one of the two values (leave decline_speed_rpm empty "
                      "for constant power up to max speed).")
    else:
        limit, what = (n_dec, "decline_speed_rpm") if n_dec is not None else (
            n_max, "max_speed_rpm (decline_speed_rpm is empty, so it equals max_speed_rpm)")
        if corner > limit * (1 + _REL_TOL):
            # the computed corner speed in whole rpm unless more digits are needed to tell it from the limit
            a, b = distinct_numbers(corner, limit, digits=(len(f"{corner:.0f}"), 6))
            errors.append(f"{loc}: corner speed = {a} rpm (peak_power_kw x 1000 / peak_torque_nm "
                          f"with peak_power_kw = {v['peak_power_kw']:g}, peak_torque_nm = "
                          f"{v['peak_torque_nm']:g}) is above {what} = {b}; must be <= "
                          f"{what.split(' ')[0]} [rpm]. Check the three values against the datasheet.")
    return errors, []


def _check_motor_losses(v: dict, loc: str):
    """The four loss-model columns: all or none; the peak efficiency they give."""
    errors, odd = [], []
    n_max = v["max_speed_rpm"]
    loss_given = [c for c in LOSS_COLUMNS if v[c] is not None]
    if loss_given and len(loss_given) < len(LOSS_COLUMNS):
        missing = [c for c in LOSS_COLUMNS if v[c] is None]
        errors.append(f"{loc}: loss-model columns {', '.join(missing)} are empty but "
                      f"{', '.join(loss_given)} {'is' if len(loss_given) == 1 else 'are'} given; give all "
                      f"four ({', '.join(LOSS_COLUMNS)}) or none. Write 0 for a loss the datasheet "
                      "leaves out.")
    elif loss_given:
        peak = 100.0 * peak_efficiency(
            v["loss_copper_w_per_nm2"], v["loss_iron_nm"], v["loss_windage_w_s3"], v["loss_constant_w"],
            v["peak_torque_nm"], v["peak_power_kw"] * 1000.0,
            (v["decline_speed_rpm"] or n_max) * RPM_TO_RAD_S, v["decline_exponent"] or 1.0,
            n_max * RPM_TO_RAD_S, n_speed=60, n_torque=60)
        lo, hi = PEAK_EFFICIENCY_WARN_PCT
        if not lo <= peak <= hi:
            odd.append(f"{loc}: the loss model gives a peak efficiency of {peak:.1f} % under the torque "
                       f"envelope; outside {lo:g}..{hi:g} %, unusual for a traction motor. Check the loss "
                       "coefficients and their units (T in N m, w in rad/s, losses in W).")
    return errors, odd


def _check_motor_mass(v: dict, loc: str):
    if v["mass_kg"] > MOTOR_MASS_WARN_KG:
        a, b = distinct_numbers(v["mass_kg"], MOTOR_MASS_WARN_KG)
        return [], [f"{loc}: mass_kg = {a}; above {b} kg, unusual for a traction motor. Check the value and its "
                    "unit (kg)."]
    return [], []


def _check_reducer(v: dict, loc: str):
    """Unusual efficiency of any gear (a fraction instead of percent) and first-gear ratio."""
    odd = []
    for col in ("efficiency_pct", "efficiency_2_pct", "efficiency_3_pct"):
        eff = v.get(col)
        if eff is None or not eff == eff or not eff < EFFICIENCY_WARN_PCT:  # (empty cells are NaN or absent)
            continue
        hint = (f" It looks like a fraction; {col} is in percent (96 means 96 %)." if eff <= 1
                else " Check the value.")
        a, b = distinct_numbers(eff, EFFICIENCY_WARN_PCT)
        odd.append(f"{loc}: {col} = {a}; below {b} %, unusual for a reducer.{hint}")
    lo, hi = RATIO_WARN
    if not lo <= v["ratio"] <= hi:
        a, b, c = distinct_numbers(v["ratio"], lo, hi)
        odd.append(f"{loc}: ratio = {a}; outside {b}..{c}, unusual for a single-speed "
                   "traction reducer. Check the value (ratio = motor speed / wheel speed).")
    return [], odd


def _check_tyre(v: dict, loc: str):
    """Unloaded diameter of the size (limits and usual range); rolling resistance in N/kN."""
    errors, odd = [], []
    w, a_pct, rim, _ = parse_tyre_size(v["size"])
    dia = float(unloaded_diameter_m(w, a_pct, rim))
    lo, hi = TYRE_DIAMETER_LIMITS_M
    if not lo <= dia <= hi:
        errors.append(f"{loc}: size = \"{v['size']}\" gives an unloaded diameter of {dia:.3g} m; must be "
                      f"between {lo:g} and {hi:g} m for a road-vehicle tyre. Check the size.")
    elif not TYRE_DIAMETER_USUAL_M[0] <= dia <= TYRE_DIAMETER_USUAL_M[1]:
        odd.append(f"{loc}: size = \"{v['size']}\" gives an unloaded diameter of {dia:.3g} m; outside "
                   f"{TYRE_DIAMETER_USUAL_M[0]:g}..{TYRE_DIAMETER_USUAL_M[1]:g} m, unusual. Check the size.")
    rr = v["rr_coefficient_n_per_kn"]
    lo, hi = RR_WARN_N_PER_KN
    if not lo <= rr <= hi:
        hint = (" It looks like a dimensionless Crr; the column is in N/kN (Crr x 1000, e.g. 8.5)."
                if rr < 0.1 else " Check the value (EU tyre label classes span about 6.5..12 N/kN).")
        a, b, c = distinct_numbers(rr, lo, hi)
        odd.append(f"{loc}: rr_coefficient_n_per_kn = {a}; outside {b}..{c} N/kN.{hint}")
    return errors, odd


def _check_gears(v: dict, loc: str):
    """Rules of the multi-speed gearbox columns: decreasing ratios, a third gear only after a second,
    a shift time with every second gear; step ratios outside 1.05..4 are unusual."""
    errors, odd = [], []
    r1, r2, r3 = v["ratio"], v.get("ratio_2"), v.get("ratio_3")
    if r3 is not None and r2 is None:
        errors.append(f"{loc}: ratio_3 = {r3:g} is given without ratio_2; a third gear needs a second. "
                      "Fill in ratio_2 or move the value to ratio_2.")
    for name, hi_name, lo_v, hi_v in (("ratio_2", "ratio", r2, r1), ("ratio_3", "ratio_2", r3, r2)):
        if lo_v is not None and hi_v is not None and not lo_v < hi_v:
            errors.append(f"{loc}: {name} = {lo_v:g} is not below {hi_name} = {hi_v:g}; each further gear must be "
                          "strictly taller (a smaller ratio). List the gears from first (largest ratio) to last.")
    for n, r in ((2, r2), (3, r3)):
        if r is None and v.get(f"efficiency_{n}_pct") is not None:
            errors.append(f"{loc}: efficiency_{n}_pct is given without ratio_{n}. Remove it or add ratio_{n}.")
    if r2 is not None and v.get("shift_time_s") is None:
        errors.append(f"{loc}: shift_time_s is empty but the gearbox has a second gear (ratio_2 = {r2:g}); the "
                      "torque interruption per upshift is required [s]. Fill it in (0 for a seamless shift).")
    if r2 is None and v.get("shift_time_s") not in (None, 0, 0.0):
        odd.append(f"{loc}: shift_time_s = {v['shift_time_s']:g} on a single-speed reducer (no ratio_2); it is "
                   "ignored. Remove it, or add the gearbox's further ratios.")
    for a, b in ((r1, r2), (r2, r3)):
        if a is not None and b is not None and b > 0 and a > b:
            step = a / b
            if not STEP_WARN[0] <= step <= STEP_WARN[1]:
                odd.append(f"{loc}: gear step {a:g} / {b:g} = {step:.3g}; outside {STEP_WARN[0]:g}..{STEP_WARN[1]:g}, "
                           "unusual for a traction gearbox. Check the ratios.")
    return errors, odd
