"""Catalogue tables as SI numpy arrays, and assembly of designs (motor, reducer, tyre) from them.

`PartTables` is built once per study; `PartTables.design(mi, rj, tk)` turns index arrays into the
`Drive` and `Body` the physics functions take. Indices are row positions in the catalogue frames,
which are sorted by part id, so index order is the tie-break order.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from selector.inputs import Catalogs, Problem
from selector.physics.performance import Body, Drive
from selector.physics.road import aero_coefficient_n_s2_m2
from selector.units import kmh_to_mps, rpm_to_rad_s


def _f(frame, col):
    return frame[col].to_numpy(dtype=float)


@dataclass(frozen=True)
class MotorArrays:
    """Motor catalogue in SI."""

    part: np.ndarray
    supplier: np.ndarray
    torque_nm: np.ndarray
    power_w: np.ndarray
    cont_torque_nm: np.ndarray
    cont_power_w: np.ndarray
    decline_rad_s: np.ndarray
    decline_exponent: np.ndarray
    max_speed_rad_s: np.ndarray
    rotor_inertia_kgm2: np.ndarray
    mass_kg: np.ndarray
    cost: np.ndarray
    lead_time_weeks: np.ndarray


@dataclass(frozen=True)
class ReducerArrays:
    """Reducer catalogue in SI."""

    part: np.ndarray
    supplier: np.ndarray
    ratio: np.ndarray
    efficiency: np.ndarray
    max_torque_nm: np.ndarray
    max_speed_rad_s: np.ndarray
    mass_kg: np.ndarray
    cost: np.ndarray
    lead_time_weeks: np.ndarray


@dataclass(frozen=True)
class TyreArrays:
    """Tyre catalogue in SI (radius is the rolling radius k D/2)."""

    part: np.ndarray
    supplier: np.ndarray
    radius_m: np.ndarray
    crr: np.ndarray
    mass_kg: np.ndarray
    cost: np.ndarray
    lead_time_weeks: np.ndarray
    speed_rating_kmh: np.ndarray
    load_capacity_kg: np.ndarray


@dataclass(frozen=True)
class PartTables:
    """Everything the physics needs about a study, as arrays and scalars."""

    problem: Problem
    motors: MotorArrays
    reducers: ReducerArrays
    tyres: TyreArrays
    q_n_s2_m2: float
    speed_limit_mps: float
    cache: dict = field(default_factory=dict, compare=False, repr=False)
    """Derived data memoised by the optimiser (acceleration windows, usable parts); shared by the
    copies `with_requirements` makes, whose catalogues and vehicle are the same."""

    @classmethod
    def build(cls, problem: Problem, catalogs: Catalogs) -> "PartTables":
        """Convert validated catalogues to SI arrays for one problem."""
        m, r, t = catalogs.motors, catalogs.reducers, catalogs.tyres
        motors = MotorArrays(
            part=m["part"].astype(str).to_numpy(), supplier=m["supplier"].astype(str).to_numpy(),
            torque_nm=_f(m, "peak_torque_nm"), power_w=_f(m, "peak_power_kw") * 1e3,
            cont_torque_nm=_f(m, "cont_torque_nm"), cont_power_w=_f(m, "cont_power_kw") * 1e3,
            decline_rad_s=rpm_to_rad_s(_f(m, "decline_speed_rpm")), decline_exponent=_f(m, "decline_exponent"),
            max_speed_rad_s=rpm_to_rad_s(_f(m, "max_speed_rpm")), rotor_inertia_kgm2=_f(m, "rotor_inertia_kgm2"),
            mass_kg=_f(m, "mass_kg"), cost=_f(m, "unit_cost"), lead_time_weeks=_f(m, "lead_time_weeks"))
        reducers = ReducerArrays(
            part=r["part"].astype(str).to_numpy(), supplier=r["supplier"].astype(str).to_numpy(),
            ratio=_f(r, "ratio"), efficiency=_f(r, "efficiency_pct") / 100.0,
            max_torque_nm=_f(r, "max_input_torque_nm"), max_speed_rad_s=rpm_to_rad_s(_f(r, "max_input_speed_rpm")),
            mass_kg=_f(r, "mass_kg"), cost=_f(r, "unit_cost"), lead_time_weeks=_f(r, "lead_time_weeks"))
        k = problem.vehicle.rolling_radius_factor
        tyres = TyreArrays(
            part=t["part"].astype(str).to_numpy(), supplier=t["supplier"].astype(str).to_numpy(),
            radius_m=k * _f(t, "diameter_m") / 2.0, crr=_f(t, "rr_coefficient_n_per_kn") / 1000.0,
            mass_kg=_f(t, "mass_kg"), cost=_f(t, "unit_cost"), lead_time_weeks=_f(t, "lead_time_weeks"),
            speed_rating_kmh=_f(t, "speed_rating_kmh"), load_capacity_kg=_f(t, "load_capacity_kg"))
        lim = problem.requirements.speed_limiter_kmh
        return cls(problem=problem, motors=motors, reducers=reducers, tyres=tyres,
                   q_n_s2_m2=float(aero_coefficient_n_s2_m2(problem.environment.air_density_kg_m3,
                                                           problem.vehicle.drag_area_m2)),
                   speed_limit_mps=float(kmh_to_mps(lim)) if lim is not None else float("inf"))

    def with_requirements(self, req) -> "PartTables":
        """The same tables under other requirements (speed limit recomputed, `cache` shared)."""
        if req is self.problem.requirements:
            return self
        lim = req.speed_limiter_kmh
        return replace(self, problem=replace(self.problem, requirements=req),
                       speed_limit_mps=float("inf") if lim is None else float(kmh_to_mps(lim)))

    @property
    def sizes(self) -> tuple[int, int, int]:
        """Number of motors, reducers and tyres."""
        return len(self.motors.part), len(self.reducers.part), len(self.tyres.part)

    @property
    def rear_drive(self) -> bool:
        """True when the rear axle is driven."""
        return self.problem.vehicle.driven_axle == "rear"

    # ------------------------------------------------------------------ design assembly
    def mass_kg(self, mi, rj, tk):
        """Vehicle mass with the parts [kg]."""
        v = self.problem.vehicle
        return v.mass_kg + self.motors.mass_kg[mi] + self.reducers.mass_kg[rj] + v.tyre_count * self.tyres.mass_kg[tk]

    def cost(self, mi, rj, tk):
        """Motor + reducer + all tyres [currency]."""
        n = self.problem.vehicle.tyre_count
        return self.motors.cost[mi] + self.reducers.cost[rj] + n * self.tyres.cost[tk]

    def axle_masses_kg(self, mi, rj, tk):
        """Static (rear, front) axle masses [kg]: motor and reducer on the driven axle, tyres split evenly."""
        v = self.problem.vehicle
        drive_parts = self.motors.mass_kg[mi] + self.reducers.mass_kg[rj]
        half_tyres = 0.5 * v.tyre_count * self.tyres.mass_kg[tk]
        rear = v.rear_axle_share * v.mass_kg + half_tyres + (drive_parts if self.rear_drive else 0.0)
        front = (1.0 - v.rear_axle_share) * v.mass_kg + half_tyres + (0.0 if self.rear_drive else drive_parts)
        return rear, front

    def design(self, mi, rj, tk) -> tuple[Drive, Body]:
        """Drive and Body arrays of the designs (mi[n], rj[n], tk[n])."""
        mo, re, ty = self.motors, self.reducers, self.tyres
        v, env = self.problem.vehicle, self.problem.environment
        mass = self.mass_kg(mi, rj, tk)
        rear, _ = self.axle_masses_kg(mi, rj, tk)
        drive = Drive(torque_nm=mo.torque_nm[mi], power_w=mo.power_w[mi], cont_torque_nm=mo.cont_torque_nm[mi],
                      cont_power_w=mo.cont_power_w[mi], decline_rad_s=mo.decline_rad_s[mi],
                      decline_exponent=mo.decline_exponent[mi], max_speed_rad_s=mo.max_speed_rad_s[mi],
                      rotor_inertia_kgm2=mo.rotor_inertia_kgm2[mi], ratio=re.ratio[rj], efficiency=re.efficiency[rj],
                      radius_m=ty.radius_m[tk])
        body = Body(mass_kg=mass, rear_share=rear / mass, crr=ty.crr[tk], q_n_s2_m2=self.q_n_s2_m2,
                    road_friction=env.road_friction, cg_height_m=v.cg_height_m, wheelbase_m=v.wheelbase_m,
                    rear_drive=self.rear_drive, wheel_inertia_total_kgm2=v.tyre_count * v.wheel_inertia_kgm2,
                    speed_limit_mps=self.speed_limit_mps)
        return drive, body
