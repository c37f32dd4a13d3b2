"""Shared pieces of explain's analysis: the run context, design identities and verified records, what
limits a design (naming the axle), and how far its acceleration run gets.

Designs are `selector.design.Design` objects (value and a key row of five catalogue positions:
front motor, front reducer, rear motor, rear reducer, tyre; -1 for an empty slot), so one- and
two-unit studies go through the same code.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass

import numpy as np

from selector.api import Study, records
from selector.design import Design
from selector.engine.evaluate import evaluate, tie_tolerance
from selector.engine.parts import FM, RM, TY, PartTables
from selector.engine.search import SearchResult, search
from selector.inputs import Requirements
from selector.physics import accel_run, climb, speeds
from selector.physics import performance as perf
from selector.physics.drivetrain import combination_accels, speed_cap_mps, state_effective_mass_kg
from selector.requirements import BY_NAME
from selector.units import G_N, mps_to_kmh

REACH_LIMITS = ("gearing", "motor", "traction", "limiter")
"""What ends an acceleration run."""
BISECT_STEPS = 40
"""Bisection steps for a speed found by bisection (2^-40 of the bracket) [-]."""


def with_requirements(parts: PartTables, req: Requirements) -> PartTables:
    """The same part tables with other requirements (see `PartTables.with_requirements`)."""
    return parts.with_requirements(req)


def dropped(req: Requirements, name: str) -> Requirements:
    """Requirements without ``name``."""
    return dataclasses.replace(req, **{name: None})


def better(new: float, old: float) -> bool:
    """True when ``new`` beats ``old`` by more than the tie tolerance (1e-9 relative)."""
    return new < old - tie_tolerance(old)


def changes(opt: Design, other: Design) -> bool:
    """The optimum changed: a different design or an objective better by more than 1e-9 relative."""
    return other.key != opt.key or better(other.value, opt.value)


def motors_of(d: Design) -> tuple[int, int]:
    """(front motor, rear motor) positions (-1: empty) of a design."""
    return d.key[FM], d.key[RM]


# ----------------------------------------------------------------------------- identities and records

def design_ids(parts: PartTables, d: Design) -> dict:
    """Part ids of a design in the JSON contract's form: ``motor``, ``reducer`` (null for a two-unit
    design), ``tyre`` and ``units: [{axle, motor, reducer, gear_ratios}]`` (as in the design records)."""
    re = parts.reducers
    units = [{"axle": a, "motor": str(parts.motors.part[m]), "reducer": str(re.part[r]),
              "gear_ratios": [float(x) for x in re.ratios[r, :re.n_gears[r]]]}
             for a, m, r in d.units]
    one = units[0] if len(units) == 1 else {"motor": None, "reducer": None}
    return {"motor": one["motor"], "reducer": one["reducer"], "tyre": str(parts.tyres.part[d.tyre]), "units": units}


def verified_record(parts: PartTables, d: Design, objective: str, expect_feasible: bool = True) -> dict:
    """The record of one design, re-checked by the full physics (the independent re-check of
    `verify.py`), as `api.records` builds it for solve: one- or two-unit, with the shift run of a
    multi-speed design. ``expect_feasible=False`` (a closest design) records its misses instead of
    raising."""
    if expect_feasible:
        rec = records(parts, [d], objective)[0]
    else:
        from selector.api import shift_run
        from selector.engine.verify import verify_designs
        from selector.records import design_record

        metrics = verify_designs(parts, [d], objective, expect_feasible=False)
        rec = design_record(parts, d, metrics, 0, run=shift_run(parts, np.asarray([d.key]), metrics))
    rec.setdefault("units", design_ids(parts, d)["units"])
    return rec


@dataclass
class Context:
    """One explain run: the study, its objective, counters and the progress switch."""

    study: Study
    objective: str
    progress: bool = False
    searches: int = 0
    search_s: float = 0.0
    time_limit_s: float | None = None
    """Wall-clock limit of each re-solve [s] (None: none); a stopped re-solve confirms nothing."""

    @property
    def parts(self) -> PartTables:
        return self.study.parts

    def search(self, req: Requirements, objective: str | None = None, allowed: dict | None = None,
               count: int = 1) -> SearchResult:
        """Exact optimum under ``req`` (counted and timed); ``objective`` defaults to the study's,
        ``allowed`` to the study's procurement filter."""
        t0 = time.perf_counter()
        res = search(self.parts, objective=objective or self.objective, count=count, requirements=req,
                     allowed=self.study.allowed if allowed is None else allowed, time_limit_s=self.time_limit_s)
        self.searches += 1
        self.search_s += time.perf_counter() - t0
        return res

    def metric_of(self, d: Design, req: Requirements, metric: str) -> float:
        """One metric of one design evaluated under ``req`` (accel target from ``req``)."""
        return float(evaluate(with_requirements(self.parts, req), [d.key], accel=metric == "accel_time_s")[metric][0])

    def record(self, d: Design, req: Requirements) -> dict:
        """Verified record of ``d`` under ``req`` (raises if the design fails ``req``)."""
        return verified_record(with_requirements(self.parts, req), d, self.objective)

    def ids(self, d: Design) -> dict:
        return design_ids(self.parts, d)


# ----------------------------------------------------------------------------- what limits a design

COMBINATION_TEXT = {0: "motor torque", 1: "front-axle traction", 2: "rear-axle traction", 3: "traction of both axles"}
"""What limits launch or gradeability, by traction combination of `drivetrain.combination_accels`
(0 all motor-limited, 1 front traction-limited, 2 rear, 3 both)."""


def launch_limits(parts: PartTables, keys, mass_kg=None) -> list[str]:
    """What limits each design's launch acceleration: motor torque or which axle's traction."""
    axles, body = parts.design(np.atleast_2d(keys), mass_kg)
    z = np.zeros(axles.n, dtype=np.int64)
    m_eff = state_effective_mass_kg(axles, body.mass_kg, body.wheel_inertia_total_kgm2, z, z)
    f_f, f_r = climb.crawl_forces_n(axles)
    _, lab = combination_accels(f_f, f_r, axles.front.present, axles.rear.present, body.mass_kg * G_N * body.crr,
                                body.mass_kg, m_eff, body.rear_share, body.road_friction, body.cg_height_m,
                                body.wheelbase_m, labels=True)
    return [COMBINATION_TEXT[int(x)] for x in np.atleast_1d(lab)]


def grade_limits(parts: PartTables, keys, mass_kg=None) -> list[str]:
    """What limits each design's gradeability: motor torque or which axle's traction.

    The combination whose angle is the smallest, with the per-combination formulas of
    `physics.climb` (its `gradeability_pct` takes their minimum and does not say which one it is).
    """
    axles, body = parts.design(np.atleast_2d(keys), mass_kg)
    f_f, f_r = climb.crawl_forces_n(axles)
    fp, rp = axles.front.present, axles.rear.present
    m, c, mu, s = body.mass_kg, body.crr, body.road_friction, body.rear_share
    hl = body.cg_height_m / body.wheelbase_m
    inf = np.full(axles.n, np.inf)
    w = m * G_N
    both = fp & rp
    tans = np.stack([
        climb.motor_grade_tan(f_f + f_r, m, c),
        np.where(both, climb.mixed_grade_tan(f_r / w, c - mu * (1.0 - s), 1.0 + mu * hl),
                 np.where(fp & ~rp, climb.traction_grade_tan(mu, 1.0 - s, c, hl, -1), inf)),
        np.where(both, climb.mixed_grade_tan(f_f / w, c - mu * s, 1.0 - mu * hl),
                 np.where(rp & ~fp, climb.traction_grade_tan(mu, s, c, hl, 1), inf)),
        np.where(both, climb.traction_grade_tan(mu, 1.0, c, hl, 0), inf)], axis=1)
    return [COMBINATION_TEXT[int(x)] for x in np.argmin(tans, axis=1)]


LIMITERS = {"launch_accel_mps2": launch_limits, "gradeability_pct": grade_limits}
"""Requirements whose limiting axle explain names."""


def limited_by(parts: PartTables, d_key, name: str, mass_kg=None) -> str | None:
    """What limits requirement ``name`` for one design (None for requirements without such a label)."""
    fn = LIMITERS.get(name)
    return None if fn is None else fn(parts, np.asarray([d_key], dtype=np.int64), mass_kg)[0]


# ----------------------------------------------------------------------------- acceleration run reach

def accel_times(parts: PartTables, keys: np.ndarray, target_kmh, mass_kg=None) -> np.ndarray:
    """Acceleration time from rest to ``target_kmh`` (scalar or per design) [s] (inf when never reached);
    ``mass_kg``: the designs' full mass (with a battery) [kg]."""
    axles, body = parts.design(np.atleast_2d(keys), mass_kg)
    return accel_run.accel_time_s(axles, body, np.asarray(target_kmh, dtype=float) / 3.6)


def _reach_closed_form(parts: PartTables, keys: np.ndarray, mass_kg):
    """Reach speed of single-unit single-speed designs: the first of the run's end speeds (see `reach_speed_kmh`)."""
    col = 2 if parts.rear_drive else 0
    drive, _ = perf.broadcast(*parts.single_drive(keys[:, col], keys[:, col + 1], keys[:, TY]))
    body = parts.body(keys, mass_kg)
    drive, body = perf.broadcast(drive, body)
    m_eff = perf.effective_mass(drive, body)
    grip_n = body.road_friction * perf.driven_weight_n(body) - perf.level_road_load(body, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        v_trac = np.sqrt(np.maximum(grip_n, 0.0) / body.q_n_s2_m2)
    v_trac = np.where((1.0 - perf.kappa(drive, body, m_eff)) * m_eff > 0, v_trac, np.inf)
    ends = np.stack([perf.gearing_speed_limit_mps(drive), perf.envelope_road_crossing_mps(drive, body),
                     v_trac, np.broadcast_to(body.speed_limit_mps, v_trac.shape)], axis=1)
    return mps_to_kmh(ends.min(axis=1)), [REACH_LIMITS[n] for n in np.argmin(ends, axis=1)]


def _reach_bisect(parts: PartTables, keys: np.ndarray, mass_kg):
    """Reach speed of any designs by bisection on the run's own verdict (a target is reached when the
    time is finite), below the peak-envelope maximum speed; limit: what caps that speed when the run
    gets there, else traction."""
    axles, body = parts.design(keys, mass_kg)
    hi = speeds.max_speed_mps(axles, body)
    lo = np.zeros_like(hi)
    top = np.isfinite(accel_run.accel_time_s(axles, body, hi))
    h = hi.copy()
    for _ in range(BISECT_STEPS):
        mid = 0.5 * (lo + h)
        ok = np.isfinite(accel_run.accel_time_s(axles, body, mid))
        lo = np.where(top, lo, np.where(ok, mid, lo))
        h = np.where(top, h, np.where(ok, h, mid))
    v = np.where(top, hi, lo)
    cap = speed_cap_mps(axles)
    why = np.where(~top, "traction", np.where(hi >= body.speed_limit_mps * (1 - 1e-12), "limiter",
                                              np.where(hi >= cap * (1 - 1e-12), "gearing", "motor")))
    return mps_to_kmh(v), [str(x) for x in why]


def reach_speed_kmh(parts: PartTables, keys, mass_kg=None) -> tuple[np.ndarray, list[str]]:
    """Highest speed each design's acceleration run approaches [km/h], and what limits it.

    Single-unit single-speed designs: the run's net acceleration min(a_motor, a_traction) falls with
    speed, so the run ends at the first of: the gearing limit w_max r / G; the speed where the peak
    envelope's wheel force meets the level road load ("motor"); the speed where the driven axle's
    static grip meets it, mu W_driven = m g Crr + q v^2 ("traction": no load transfer at zero
    acceleration; unlimited for a rear drive whose (1 - kappa) <= 0 transmits any force); the speed
    limiter. Other designs (two units, gearboxes): bisection on the run itself (`_reach_bisect`).
    Every target below this speed is reached in finite time, no target above it is.

    Parameters
    ----------
    parts : part tables with the study's vehicle and environment
    keys : (n, 5) key rows [-]
    mass_kg : full vehicle mass per design (with a battery) [kg]; default the parts' mass

    Returns
    -------
    (speeds [km/h], limits: one of `REACH_LIMITS` per design)
    """
    keys = np.atleast_2d(np.asarray(keys, dtype=np.int64))
    present = keys[:, [0, 2]] >= 0
    multi = (present & (parts.reducers.n_gears[np.maximum(keys[:, [1, 3]], 0)] > 1)).any()
    if parts.two_units or multi:
        return _reach_bisect(parts, keys, mass_kg)
    return _reach_closed_form(parts, keys, mass_kg)


def sense_of(name: str) -> str:
    """Sense of a relaxable key: accel_to_kmh is a target speed, loosened by lowering it ("min")."""
    return "min" if name == "accel_to_kmh" else BY_NAME[name].sense


__all__ = ["Context", "design_ids", "verified_record", "reach_speed_kmh", "limited_by"]
