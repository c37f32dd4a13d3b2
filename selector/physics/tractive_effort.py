"""Force curves of the tractive-effort diagram: per gear, per axle, friction limits and their sum.

Pure functions over arrays (SI). They compose the drivetrain physics (`selector.physics.drivetrain`)
that the evaluator uses, so a curve drawn from them is the force the evaluation works with:

- a unit's wheel force in each of its gears, eta_g T(v G_g / r) G_g / r, up to the gear's gearing
  limit (`gear_force_curves_n`);
- the gear each unit is in at a road speed during the acceleration run, from the run's shifts
  (`run_gears`);
- each axle's friction limit mu N_axle at the acceleration the vehicle reaches (best torque
  split, load transfer m a h/L), each axle's delivered force min(F_axle, mu N_axle) and their sum
  (`axle_forces_n`), which equals m_eff a + F_res;
- the single-axle traction-limited force on the level, (mu W_d - kappa F_res) / (1 - kappa)
  (`traction_limited_force_n`);
- the curves of one design as `selector.io.plots` draws them (`single_axle_curves_n`,
  `design_axle_curves_n`) and the speed range of the diagram and of the drawn acceleration run.
"""

from __future__ import annotations

import numpy as np

from selector.physics import performance as perf
from selector.physics.drivetrain import (
    Axles,
    best_gear_force_n,
    combination_accels,
    gear_limit_mps,
    state_effective_mass_kg,
    take_axles,
    take_fields,
    unit_force_n,
)
from selector.physics.road import road_load_n
from selector.physics.vehicle import traction_force_limit_n
from selector.units import G_N


def gear_force_curves_n(unit, radius_m, v, continuous: bool = False) -> np.ndarray:
    """Wheel force of each gear of each design's unit at road speeds ``v`` [N].

    Parameters
    ----------
    unit : `drivetrain.Unit` of n designs
    radius_m : rolling radius per design [m]
    v : road speeds (s,) [m/s]
    continuous : the continuous envelope instead of the peak one

    Returns
    -------
    Array (n, G, s): NaN for gears the unit does not have, above the gear's gearing limit w_max r / G,
    and where the unit is absent.
    """
    v = np.asarray(v, dtype=float)
    n, gears = unit.n, unit.ratio.shape[1]
    out = np.full((n, gears, v.size), np.nan)
    vv = np.broadcast_to(v, (n, v.size))
    for g in range(gears):
        has = unit.present & (unit.n_gears > g)
        if not has.any():
            continue
        gi = np.where(has, g, 0)
        f = unit_force_n(unit, radius_m, gi, vv, continuous)
        lim = gear_limit_mps(unit, radius_m, gi)
        out[:, g, :] = np.where(has[:, None] & (vv <= lim[:, None]), f, np.nan)
    return out


def run_gears(shift_axle, shift_from_gear, shift_speed_mps, axle: int, v) -> np.ndarray:
    """Gear index (0 = first) of one unit at road speeds ``v`` during the acceleration run [-].

    The unit is in first gear from rest and in gear g + 1 from the speed of its shift out of gear g.
    ``shift_*``: one design's shifts (K,) as in `accel_run.RunResult` (axle 0 front, 1 rear, -1 none).
    """
    v = np.asarray(v, dtype=float)
    gear = np.zeros(v.shape, dtype=np.int64)
    for a, g, s in zip(shift_axle, shift_from_gear, shift_speed_mps, strict=True):
        if int(a) == axle:
            gear = np.where(v >= s, np.maximum(gear, int(g) + 1), gear)
    return gear


def axle_forces_n(axles: Axles, body, v, g_front, g_rear) -> dict:
    """Axle forces on the level at road speeds ``v``, each unit in the given gear [N].

    ``axles`` and ``body`` hold one row per speed sample (replicate a design to draw its curves);
    ``g_front``, ``g_rear`` are gear indices per sample.

    Returns a dict of arrays (one value per sample): front_n, rear_n (motor-limited wheel forces, 0
    where the axle has no unit), accel_mps2 (best torque split, `drivetrain.combination_accels`),
    road_load_n (m g Crr + 0.5 rho CdA v^2), front_limit_n, rear_limit_n (mu N_axle at that
    acceleration, N_r = W_r + m a h/L, N_f = W_f - m a h/L; NaN where the axle has no unit),
    front_delivered_n, rear_delivered_n (min(force, limit)) and total_n (their sum, = m_eff a + F_res).
    """
    v = np.asarray(v, dtype=float)
    b = body
    f_f = unit_force_n(axles.front, axles.radius_m, g_front, v)
    f_r = unit_force_n(axles.rear, axles.radius_m, g_rear, v)
    m_eff = state_effective_mass_kg(axles, b.mass_kg, b.wheel_inertia_total_kgm2, g_front, g_rear)
    f_res = b.mass_kg * G_N * b.crr + b.q_n_s2_m2 * v * v
    a = combination_accels(f_f, f_r, axles.front.present, axles.rear.present, f_res, b.mass_kg, m_eff,
                           b.rear_share, b.road_friction, b.cg_height_m, b.wheelbase_m)
    out = {"front_n": f_f, "rear_n": f_r, "accel_mps2": a, "road_load_n": f_res, "effective_mass_kg": m_eff}
    total = np.zeros(v.shape)
    for name, force, unit, rear in (("front", f_f, axles.front, False), ("rear", f_r, axles.rear, True)):
        lim = traction_force_limit_n(b.road_friction, b.mass_kg, b.rear_share, b.cg_height_m, b.wheelbase_m, rear,
                                     accel_mps2=a)
        lim = np.maximum(lim, 0.0)
        delivered = np.where(unit.present, np.minimum(force, lim), 0.0)
        out[f"{name}_limit_n"] = np.where(unit.present, lim, np.nan)
        out[f"{name}_delivered_n"] = delivered
        total = total + delivered
    out["total_n"] = total
    return out


def traction_limited_force_n(road_friction, driven_weight_n, kappa, road_load_n):
    """Force a single driven axle transmits at its friction limit on the level [N].

    F = (mu W_d - kappa F_res) / (1 - kappa): the force mu N_driven at the acceleration
    a = (F - F_res) / m_eff that force gives, with kappa = +-mu (m / m_eff) h / L (rear +, front -);
    inf where 1 - kappa <= 0 (no friction limit can be reached).
    """
    kappa = np.asarray(kappa, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(1.0 - kappa > 0, (road_friction * driven_weight_n - kappa * road_load_n) / (1.0 - kappa),
                        np.inf)


def diagram_end_speed_mps(max_speed_mps: float, limit_mps: float, top_speed_mps: float | None = None) -> float:
    """Road speed where the tractive-effort diagram ends [m/s].

    1.25 x the vehicle's maximum speed (the limit itself when the maximum speed is not finite or not
    positive), at most ``limit_mps`` (the gearing limit), at least 1.1 x the required top speed
    ``top_speed_mps`` when there is one; 100 m/s when that leaves no finite end.
    """
    v_end = min(limit_mps, max_speed_mps * 1.25 if np.isfinite(max_speed_mps) and max_speed_mps > 0 else limit_mps)
    if top_speed_mps is not None:
        v_end = max(v_end, top_speed_mps * 1.1)
    if not np.isfinite(v_end):
        v_end = 100.0
    return v_end


def run_end_speed_mps(target_mps: float | None, max_speed_mps: float, share: float) -> float:
    """Road speed where the drawn acceleration run ends [m/s]: the target speed when it is reachable,
    else ``share`` of the maximum speed (the time to the maximum speed itself is infinite)."""
    return target_mps if target_mps is not None and target_mps <= max_speed_mps else share * max_speed_mps


def single_axle_curves_n(drive, body, v, grade_pct: float | None) -> dict:
    """Force curves of a single-axle design at road speeds ``v`` [N] (`selector.physics.performance` views).

    Returns peak_n, cont_n (wheel force of the peak and continuous envelopes), traction_n
    (`traction_limited_force_n` on the level; inf when unlimited), road_level_n and road_grade_n (road load
    on the grade ``grade_pct`` [%]; None without one).
    """
    f_level = perf.level_road_load(body, v)
    m_eff = perf.effective_mass(drive, body)
    kap = perf.kappa(drive, body, m_eff)
    trac = traction_limited_force_n(body.road_friction, perf.driven_weight_n(body), kap, f_level)
    f_grade = None if grade_pct is None else road_load_n(body.mass_kg, body.crr, body.q_n_s2_m2, v, grade_pct)
    return {"peak_n": perf.wheel_force(drive, v), "cont_n": perf.wheel_force(drive, v, continuous=True),
            "traction_n": trac, "road_level_n": f_level, "road_grade_n": f_grade}


def design_axle_curves_n(axles: Axles, body, v, shift_axle, shift_from_gear, shift_speed_mps):
    """Curves of each axle of one design at road speeds ``v`` during its acceleration run [N].

    ``axles``, ``body``: one design; ``shift_*``: its run's shifts (`run_gears`). Returns (units, forces):
    units = [{axle, gears (G, s) peak force per gear (`gear_force_curves_n`), cont_best_n (continuous
    envelope, best gear), run_gear, force_n (force in the run's gear), limit_n (friction limit at the
    vehicle's acceleration)}] for the axles with a unit; forces = `axle_forces_n` at the run's gears.
    """
    g_f = run_gears(shift_axle, shift_from_gear, shift_speed_mps, 0, v)
    g_r = run_gears(shift_axle, shift_from_gear, shift_speed_mps, 1, v)
    many = np.zeros(v.size, dtype=np.int64)
    forces = axle_forces_n(take_axles(axles, many), take_fields(body, many), v, g_f, g_r)
    units = []
    for axle, unit, gears in (("front", axles.front, g_f), ("rear", axles.rear, g_r)):
        if not bool(unit.present[0]):
            continue
        units.append({"axle": axle, "gears": gear_force_curves_n(unit, axles.radius_m, v)[0],
                      "cont_best_n": best_gear_force_n(unit, axles.radius_m, v[None, :], continuous=True)[0],
                      "run_gear": gears, "force_n": forces[f"{axle}_n"], "limit_n": forces[f"{axle}_limit_n"]})
    return units, forces
