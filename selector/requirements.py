"""Registry of requirements and part-rating checks: names, units, senses, and margins.

A requirement's name is the problem file's key. ``sense`` is "min" when the achieved value must be
at least the required one (top speed, gradeability, launch), "max" when it must not exceed it
(acceleration time, mass, budget). Part-rating checks compare a demand with a part's rating
(always "max": demand <= rating).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.inputs import Problem

REL_TOL = 1e-9
"""Relative tolerance of every pass/fail decision [-] (one place for the verifier and the search)."""


@dataclass(frozen=True)
class Requirement:
    """One requirement family (a problem-file key in [requirements])."""

    name: str
    """Problem-file key, e.g. "top_speed_kmh"."""
    metric: str
    """Key of the achieved value in the evaluated metrics."""
    unit: str
    sense: str
    """"min": achieved >= required; "max": achieved <= required."""
    description: str
    per_axle: bool = False
    """Part-rating checks only: checked once per drive unit (metrics keyed ``metric@axle`` in two-unit studies)."""


REQUIREMENTS: tuple[Requirement, ...] = (
    Requirement("top_speed_kmh", "sustained_top_speed_kmh", "km/h", "min",
                "sustained top speed on the level with the continuous envelope (capped by gearing and limiter)"),
    Requirement("gradeability_pct", "gradeability_pct", "%", "min",
                "steepest grade climbable from crawl with peak torque, traction-checked"),
    Requirement("launch_accel_mps2", "launch_accel_mps2", "m/s^2", "min",
                "acceleration from rest on the level, traction-checked with load transfer"),
    Requirement("accel_time_s", "accel_time_s", "s", "max",
                "time from rest to accel_to_kmh on the level, traction-limited"),
    Requirement("max_mass_kg", "mass_kg", "kg", "max", "vehicle mass with the selected parts"),
    Requirement("budget", "cost", "currency", "max",
                "motor + reducer + all tyres, catalogue prices (+ the battery in an energy study with a range)"),
    Requirement("range_km", "range_reach_km", "km", "min",
                "range on the energy study's cycle with the battery sized for it ([energy] range_km)"),
)

CHECKS: tuple[Requirement, ...] = (
    Requirement("reducer_torque_nm", "motor_peak_torque_nm", "N m", "max",
                "motor peak torque within the reducer's input torque rating (every gear)", per_axle=True),
    Requirement("reducer_speed_rpm", "motor_max_speed_rpm", "rpm", "max",
                "motor maximum speed within the reducer's input speed rating (every gear)", per_axle=True),
    Requirement("tyre_speed_kmh", "max_speed_kmh", "km/h", "max",
                "vehicle maximum speed within the tyre's speed symbol"),
    Requirement("tyre_load_kg", "tyre_load_kg", "kg", "max",
                "each tyre's share of the heavier static axle load within its load index, reduced above "
                "210 km/h for V, W and Y tyres (UN R30) at the vehicle's maximum speed"),
)
ENERGY_CHECKS: tuple[Requirement, ...] = (
    Requirement("cycle_followed_pct", "cycle_followed_pct", "%", "min",
                "share of the energy study's cycle the design can follow (force, speed and efficiency map)"),
)
"""Checks of energy studies only."""

CHECK_LIMIT_METRIC = {
    "reducer_torque_nm": "reducer_max_torque_nm",
    "reducer_speed_rpm": "reducer_max_speed_rpm",
    "tyre_speed_kmh": "tyre_speed_rating_kmh",
    "tyre_load_kg": "tyre_load_capacity_kg",
    "cycle_followed_pct": "cycle_required_pct",
}
"""For each check, the metric holding the part's rating (the 'required' side)."""

BY_NAME = {r.name: r for r in REQUIREMENTS + CHECKS + ENERGY_CHECKS}

NO_HEADROOM = frozenset({"cycle_followed_pct", "range_km"})
"""Rows whose margin says nothing about a design's headroom, left out of its smallest margin (project
convention): a design follows the whole cycle or is infeasible (100 % of 100 %), and the battery is
sized to give exactly ``range_km``."""


def check_rows(axles: tuple[str, ...], energy: bool = False):
    """(check, axle, limit metric key, demand metric key) of every part-rating check of a study.

    ``axles``: the axles that carry a unit. With one unit the per-axle checks use plain metric
    keys and ``axle`` None (the single-axle contract); with two, keys ``metric@axle``. ``energy``:
    the study has an [energy] table (adds the cycle check).
    """
    out = []
    for c in CHECKS + (ENERGY_CHECKS if energy else ()):
        if c.per_axle and len(axles) > 1:
            for a in axles:
                out.append((c, a, f"{CHECK_LIMIT_METRIC[c.name]}@{a}", f"{c.metric}@{a}"))
        else:
            out.append((c, None, CHECK_LIMIT_METRIC[c.name], c.metric))
    return out


def stated(problem: Problem) -> list[tuple[Requirement, float]]:
    """The requirements a problem states, with their required values, in registry order."""
    req = problem.requirements
    out = []
    for r in REQUIREMENTS:
        value = getattr(req, r.name)
        if value is not None:
            out.append((r, float(value)))
    return out


def margin_fraction(sense: str, required, achieved):
    """Margin as a fraction of the required value, positive when met [-].

    "min": (achieved - required)/required; "max": (required - achieved)/required.
    """
    required = np.asarray(required, dtype=float)
    achieved = np.asarray(achieved, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        if sense == "min":
            return (achieved - required) / np.abs(required)
        return (required - achieved) / np.abs(required)


def passes(sense: str, required, achieved):
    """True where the requirement is met within `REL_TOL` (NaN achieved fails)."""
    m = margin_fraction(sense, required, achieved)
    return np.nan_to_num(m, nan=-np.inf) >= -REL_TOL
