"""Catalogue tables as SI numpy arrays, and assembly of designs from them.

A design is a front drive unit, a rear drive unit (each a motor and a reducer or gearbox, or empty)
and one tyre for all wheels. Inside the engine a set of designs is an integer array ``keys`` of
shape (n, 5), one row per design, columns `KEY_COLUMNS` = (front motor, front reducer, rear motor,
rear reducer, tyre): catalogue row positions, -1 for an empty slot. The catalogue frames are sorted
by part id, so the lexicographic order of the key rows is the tie-break order (part-id order of
the front unit, then of the rear unit, then of the tyre); a single-axle study's keys order exactly
as (motor, reducer, tyre).

`PartTables` is built once per study; `PartTables.design(keys)` turns keys into the
`selector.physics.drivetrain.Axles` and `selector.physics.performance.Body` the physics takes.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace

import numpy as np

from selector.inputs import Catalogs, Problem
from selector.physics.drivetrain import MAX_GEARS, Axles, Unit
from selector.physics.performance import Body
from selector.physics.road import aero_coefficient_n_s2_m2
from selector.units import kmh_to_mps, rpm_to_rad_s

KEY_COLUMNS = ("front_motor", "front_reducer", "rear_motor", "rear_reducer", "tyre")
"""Columns of a design key row; -1 marks an empty slot."""
FM, FR, RM, RR, TY = range(5)
AXLE_COLUMNS = {"front": (FM, FR), "rear": (RM, RR)}
"""(motor column, reducer column) of each axle's unit in a key row."""


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
    loss_copper: np.ndarray = None
    """Polynomial loss model k_c [W/(N m)^2], k_i [N m], k_w [W s^3], C0 [W] (NaN: none)."""
    loss_iron: np.ndarray = None
    loss_windage: np.ndarray = None
    loss_constant: np.ndarray = None
    map_index: np.ndarray = None
    """Index into ``maps`` of the motor's efficiency map, -1 for none (the map wins over the polynomial)."""
    maps: tuple = ()

    @property
    def has_loss_model(self) -> np.ndarray:
        """True for motors usable in an energy study (a loss model or an efficiency map)."""
        return (self.map_index >= 0) | np.isfinite(self.loss_copper)


@dataclass(frozen=True)
class ReducerArrays:
    """Reducer (single-speed) and gearbox (two- or three-speed) catalogue in SI.

    ``ratios``/``efficiencies``: (n, 3), first gear first, NaN beyond ``n_gears``; ``ratio`` and
    ``efficiency`` are the first gear's.
    """

    part: np.ndarray
    supplier: np.ndarray
    ratio: np.ndarray
    efficiency: np.ndarray
    ratios: np.ndarray
    efficiencies: np.ndarray
    n_gears: np.ndarray
    shift_time_s: np.ndarray
    max_torque_nm: np.ndarray
    max_speed_rad_s: np.ndarray
    mass_kg: np.ndarray
    cost: np.ndarray
    lead_time_weeks: np.ndarray

    @property
    def tallest_ratio(self) -> np.ndarray:
        """Ratio of the last (tallest) gear [-]."""
        return self.ratios[np.arange(len(self.part)), self.n_gears - 1]


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
    speed_symbol: np.ndarray


def _motor_losses(m):
    """Loss-model arrays of a motors frame: ((k_c, k_i, k_w, C0), map index per row, maps)."""
    n = len(m)
    cols = ("loss_copper_w_per_nm2", "loss_iron_nm", "loss_windage_w_s3", "loss_constant_w")
    losses = tuple(_f(m, c) if c in m else np.full(n, np.nan) for c in cols)
    map_index = np.full(n, -1, dtype=np.int64)
    maps = []
    if "efficiency_map_grid" in m:
        for row, grid in enumerate(m["efficiency_map_grid"]):
            if grid is not None and not (isinstance(grid, float) and np.isnan(grid)):
                map_index[row] = len(maps)
                maps.append(grid)
    return losses, map_index, tuple(maps)


def _reducer_arrays(r) -> ReducerArrays:
    n = len(r)
    ratios = np.full((n, MAX_GEARS), np.nan)
    effs = np.full((n, MAX_GEARS), np.nan)
    ratios[:, 0] = _f(r, "ratio")
    effs[:, 0] = _f(r, "efficiency_pct") / 100.0
    for g, (rc, ec) in enumerate((("ratio_2", "efficiency_2_pct"), ("ratio_3", "efficiency_3_pct")), start=1):
        if rc in r:
            ratios[:, g] = _f(r, rc)
            effs[:, g] = np.where(np.isnan(ratios[:, g]), np.nan, _f(r, ec) / 100.0)
    n_gears = np.sum(np.isfinite(ratios), axis=1).astype(np.int64)
    shift = _f(r, "shift_time_s") if "shift_time_s" in r else np.zeros(n)
    return ReducerArrays(
        part=r["part"].astype(str).to_numpy(), supplier=r["supplier"].astype(str).to_numpy(),
        ratio=ratios[:, 0].copy(), efficiency=effs[:, 0].copy(), ratios=ratios, efficiencies=effs, n_gears=n_gears,
        shift_time_s=np.where(n_gears > 1, np.nan_to_num(shift), 0.0),
        max_torque_nm=_f(r, "max_input_torque_nm"), max_speed_rad_s=rpm_to_rad_s(_f(r, "max_input_speed_rpm")),
        mass_kg=_f(r, "mass_kg"), cost=_f(r, "unit_cost"), lead_time_weeks=_f(r, "lead_time_weeks"))


def _axle_motors(problem: Problem, motors: MotorArrays) -> dict:
    """Motor positions allowed per axle from [drive] front_motors / rear_motors (part ids or supplier
    names, suppliers matched ignoring case); an entry naming no motor is an InputError."""
    import difflib

    from selector.errors import InputError

    out = {}
    ids = [str(x) for x in motors.part]
    for axle, names in (("front", problem.drive.front_motors), ("rear", problem.drive.rear_motors)):
        if names is None:
            continue
        keep = np.zeros(len(ids), dtype=bool)
        for name in names:
            hit = (motors.part == name) | np.array([s.strip().casefold() == name.strip().casefold()
                                                    for s in motors.supplier], dtype=bool)
            if not hit.any():
                close = difflib.get_close_matches(name, ids + sorted({str(s) for s in motors.supplier}), n=2)
                did = f" Did you mean {', '.join(repr(c) for c in close)}?" if close else ""
                where = f"{problem.path}: " if problem.path else ""
                raise InputError(f"{where}[drive] {axle}_motors: {name!r} is neither a motor part id nor a supplier "
                                 f"of the motor catalogue.{did} Fix the list.")
            keep |= hit
        if not len(names):
            where = f"{problem.path}: " if problem.path else ""
            raise InputError(f"{where}[drive] {axle}_motors = []: an empty list allows no motor on the {axle} axle, "
                             "so no design exists. Name the motors (part ids or suppliers) allowed there, or remove "
                             "the key to allow every motor.")
        out[axle] = np.nonzero(keep)[0]
    if problem.drive.same_unit and len(out) == 2 and not np.intersect1d(out["front"], out["rear"]).size:
        where = f"{problem.path}: " if problem.path else ""
        raise InputError(f"{where}[drive] same_unit = true fits the same motor on both axles, but front_motors and "
                         "rear_motors have no motor in common, so no design exists. Allow a common motor on both "
                         "axles, or set same_unit = false.")
    return out


@dataclass(frozen=True)
class PartTables:
    """Everything the physics needs about a study, as arrays and scalars."""

    problem: Problem
    motors: MotorArrays
    reducers: ReducerArrays
    tyres: TyreArrays
    q_n_s2_m2: float
    speed_limit_mps: float
    axle_motors: dict = field(default_factory=dict)
    """{"front"|"rear": positions of the motors allowed on that axle} from [drive] front_motors /
    rear_motors (absent key: every motor)."""
    cache: dict = field(default_factory=dict, compare=False, repr=False)
    """Derived data memoised by the optimiser (bounds, usable parts); shared by the copies
    `with_requirements` makes, whose catalogues and vehicle are the same."""

    @classmethod
    def build(cls, problem: Problem, catalogs: Catalogs) -> "PartTables":
        """Convert validated catalogues to SI arrays for one problem."""
        m, r, t = catalogs.motors, catalogs.reducers, catalogs.tyres
        losses, map_index, maps = _motor_losses(m)
        motors = MotorArrays(
            part=m["part"].astype(str).to_numpy(), supplier=m["supplier"].astype(str).to_numpy(),
            torque_nm=_f(m, "peak_torque_nm"), power_w=_f(m, "peak_power_kw") * 1e3,
            cont_torque_nm=_f(m, "cont_torque_nm"), cont_power_w=_f(m, "cont_power_kw") * 1e3,
            decline_rad_s=rpm_to_rad_s(_f(m, "decline_speed_rpm")), decline_exponent=_f(m, "decline_exponent"),
            max_speed_rad_s=rpm_to_rad_s(_f(m, "max_speed_rpm")), rotor_inertia_kgm2=_f(m, "rotor_inertia_kgm2"),
            mass_kg=_f(m, "mass_kg"), cost=_f(m, "unit_cost"), lead_time_weeks=_f(m, "lead_time_weeks"),
            loss_copper=losses[0], loss_iron=losses[1], loss_windage=losses[2], loss_constant=losses[3],
            map_index=map_index, maps=maps)
        k = problem.vehicle.rolling_radius_factor
        tyres = TyreArrays(
            part=t["part"].astype(str).to_numpy(), supplier=t["supplier"].astype(str).to_numpy(),
            radius_m=k * _f(t, "diameter_m") / 2.0, crr=_f(t, "rr_coefficient_n_per_kn") / 1000.0,
            mass_kg=_f(t, "mass_kg"), cost=_f(t, "unit_cost"), lead_time_weeks=_f(t, "lead_time_weeks"),
            speed_rating_kmh=_f(t, "speed_rating_kmh"), load_capacity_kg=_f(t, "load_capacity_kg"),
            speed_symbol=t["speed_symbol"].astype(str).str.upper().to_numpy())
        lim = problem.requirements.speed_limiter_kmh
        return cls(problem=problem, motors=motors, reducers=_reducer_arrays(r), tyres=tyres,
                   q_n_s2_m2=float(aero_coefficient_n_s2_m2(problem.environment.air_density_kg_m3,
                                                           problem.vehicle.drag_area_m2)),
                   speed_limit_mps=float(kmh_to_mps(lim)) if lim is not None else float("inf"),
                   axle_motors=_axle_motors(problem, motors))

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
    def axles(self) -> tuple[str, ...]:
        """Axles that carry a drive unit: ("rear",), ("front",) or ("front", "rear")."""
        return self.problem.axles

    @property
    def two_units(self) -> bool:
        """True for a study with a drive unit on each axle."""
        return len(self.axles) == 2

    @property
    def rear_drive(self) -> bool:
        """True when the rear axle carries the (single) drive unit."""
        return self.axles == ("rear",)

    @property
    def combinations(self) -> int:
        """Number of designs in the catalogues (all part choices, before any rule) [-]."""
        n_m, n_r, n_t = self.sizes
        units = n_m * n_r
        if not self.two_units:
            return units * n_t
        if self.problem.drive.same_unit:
            return units * n_t
        return units * units * n_t

    def usable_motors(self, allowed: dict) -> dict:
        """Motor positions each driven axle can use: the procurement filter's (``allowed["motors"]``),
        within the axle's [drive] filter and, in an energy study, with loss data; with ``same_unit``
        the motors both axles can use."""
        motors = np.asarray(allowed["motors"], dtype=np.int64)
        if self.problem.energy is not None:
            motors = motors[self.motors.has_loss_model[motors]]
        out = {a: motors if a not in self.axle_motors else np.intersect1d(motors, self.axle_motors[a])
               for a in self.axles}
        if self.two_units and self.problem.drive.same_unit:
            both = np.intersect1d(out["front"], out["rear"])
            out = {"front": both, "rear": both}
        return out

    def combinations_in_play(self, allowed: dict) -> int:
        """Number of designs the study can choose from [-]: `combinations` after the procurement filter
        (``allowed`` positions per catalogue), the [drive] motor filters per axle and, in an energy
        study, without the motors that have no loss data (`usable_motors`)."""
        per_axle = list(self.usable_motors(allowed).values())
        n_r, n_t = len(allowed["reducers"]), len(allowed["tyres"])
        if self.two_units and self.problem.drive.same_unit:
            return len(per_axle[0]) * n_r * n_t
        out = n_t
        for m in per_axle:
            out *= len(m) * n_r
        return int(out)

    def subset(self, motors=None, reducers=None, tyres=None) -> "PartTables":
        """The tables restricted to some rows (positions, in part-id order); the [drive] motor filters
        are mapped to the new positions. Used to build small models over the parts still in play."""
        def take(arrays, rows):
            if rows is None:
                return arrays
            rows = np.asarray(rows, dtype=np.int64)
            return type(arrays)(*[getattr(arrays, f.name) if f.name == "maps"
                                  else np.asarray(getattr(arrays, f.name))[rows] for f in fields(arrays)])

        axle = {}
        if motors is not None:
            motors = np.asarray(motors, dtype=np.int64)
            for a, pos in self.axle_motors.items():
                axle[a] = np.nonzero(np.isin(motors, pos))[0]
        else:
            axle = dict(self.axle_motors)
        return replace(self, motors=take(self.motors, motors), reducers=take(self.reducers, reducers),
                       tyres=take(self.tyres, tyres), axle_motors=axle, cache={})

    # ------------------------------------------------------------------ keys
    def single_keys(self, mi, rj, tk) -> np.ndarray:
        """Key rows of single-axle designs (motor, reducer, tyre) on this study's driven axle."""
        mi, rj, tk = np.broadcast_arrays(np.atleast_1d(mi), np.atleast_1d(rj), np.atleast_1d(tk))
        keys = np.full((mi.shape[0], 5), -1, dtype=np.int64)
        m_col, r_col = AXLE_COLUMNS[self.axles[-1]]
        keys[:, m_col], keys[:, r_col], keys[:, TY] = mi, rj, tk
        return keys

    # ------------------------------------------------------------------ design assembly
    def _unit_sum(self, keys, motor_values, reducer_values, start=0.0):
        """start + each present unit's motor value + its reducer value, added left to right (front, rear)."""
        keys = np.asarray(keys)
        total = np.broadcast_to(np.asarray(start, dtype=float), (keys.shape[0],))
        for m_col, r_col in AXLE_COLUMNS.values():
            on = keys[:, m_col] >= 0
            if on.any():
                total = total + np.where(on, motor_values[np.maximum(keys[:, m_col], 0)], 0.0)
                total = total + np.where(on, reducer_values[np.maximum(keys[:, r_col], 0)], 0.0)
        return total

    def mass_kg(self, keys) -> np.ndarray:
        """Vehicle mass with the parts [kg]: mass_kg + motors + reducers + tyre_count x tyre."""
        v = self.problem.vehicle
        keys = np.asarray(keys)
        return self._unit_sum(keys, self.motors.mass_kg, self.reducers.mass_kg, v.mass_kg) \
            + v.tyre_count * self.tyres.mass_kg[keys[:, TY]]

    def cost(self, keys) -> np.ndarray:
        """Motors + reducers + all tyres [currency]."""
        keys = np.asarray(keys)
        n = self.problem.vehicle.tyre_count
        return self._unit_sum(keys, self.motors.cost, self.reducers.cost) + n * self.tyres.cost[keys[:, TY]]

    def lead_time_weeks(self, keys) -> np.ndarray:
        """Longest lead time of the design's parts [weeks]."""
        keys = np.asarray(keys)
        lt = self.tyres.lead_time_weeks[keys[:, TY]]
        for m_col, r_col in AXLE_COLUMNS.values():
            on = keys[:, m_col] >= 0
            unit = np.maximum(self.motors.lead_time_weeks[np.maximum(keys[:, m_col], 0)],
                              self.reducers.lead_time_weeks[np.maximum(keys[:, r_col], 0)])
            lt = np.where(on, np.maximum(lt, unit), lt)
        return lt

    def axle_masses_kg(self, keys, extra_kg=None):
        """Static (rear, front) axle masses [kg]: each unit on its axle, tyres split evenly; ``extra_kg``
        (e.g. a battery) with the vehicle's own static share."""
        if extra_kg is not None:
            rear, front = self.axle_masses_kg(keys)
            s = self.problem.vehicle.rear_axle_share
            extra = np.nan_to_num(np.asarray(extra_kg, dtype=float))
            return rear + s * extra, front + (1.0 - s) * extra
        v = self.problem.vehicle
        keys = np.asarray(keys)
        half_tyres = 0.5 * v.tyre_count * self.tyres.mass_kg[keys[:, TY]]

        def unit_mass(axle):
            m_col, r_col = AXLE_COLUMNS[axle]
            on = keys[:, m_col] >= 0
            return np.where(on, self.motors.mass_kg[np.maximum(keys[:, m_col], 0)]
                            + self.reducers.mass_kg[np.maximum(keys[:, r_col], 0)], 0.0)

        rear = v.rear_axle_share * v.mass_kg + half_tyres + unit_mass("rear")
        front = (1.0 - v.rear_axle_share) * v.mass_kg + half_tyres + unit_mass("front")
        return rear, front

    def unit(self, motors, reducers) -> Unit:
        """Drive units of motors[n] with reducers[n] (a motor index < 0 makes the unit absent)."""
        mo, re = self.motors, self.reducers
        motors = np.asarray(motors, dtype=np.int64)
        on = motors >= 0
        mi = np.maximum(motors, 0)
        rj = np.maximum(np.asarray(reducers, dtype=np.int64), 0)
        g = int(np.max(np.where(on, re.n_gears[rj], 1), initial=1))
        one = np.ones(mi.shape)
        ratio = np.where(on[:, None], re.ratios[rj, :g], np.where(np.arange(g)[None, :] == 0, 1.0, np.nan))
        eff = np.where(on[:, None], re.efficiencies[rj, :g], np.where(np.arange(g)[None, :] == 0, 1.0, np.nan))

        def pick(a):
            return np.where(on, a[mi], one)

        return Unit(present=on, torque_nm=pick(mo.torque_nm), power_w=pick(mo.power_w),
                    cont_torque_nm=pick(mo.cont_torque_nm), cont_power_w=pick(mo.cont_power_w),
                    decline_rad_s=pick(mo.decline_rad_s), decline_exponent=pick(mo.decline_exponent),
                    max_speed_rad_s=pick(mo.max_speed_rad_s),
                    rotor_inertia_kgm2=np.where(on, mo.rotor_inertia_kgm2[mi], 0.0), ratio=ratio, efficiency=eff,
                    shift_time_s=np.where(on, re.shift_time_s[rj], 0.0))

    def body(self, keys, mass_kg=None) -> Body:
        """Vehicle-level data of the designs (arrays (n,)); ``mass_kg`` overrides the parts' mass [kg]."""
        v, env = self.problem.vehicle, self.problem.environment
        keys = np.asarray(keys)
        n = keys.shape[0]
        mass = self.mass_kg(keys) if mass_kg is None else np.asarray(mass_kg, dtype=float)
        rear, _ = self.axle_masses_kg(keys)
        if mass_kg is not None:  # extra mass (e.g. a battery) sits with the vehicle's own static share
            rear = rear + v.rear_axle_share * (mass - self.mass_kg(keys))
        full = lambda x: np.full(n, float(x))  # noqa: E731
        return Body(mass_kg=mass, rear_share=rear / mass, crr=self.tyres.crr[keys[:, TY]],
                    q_n_s2_m2=full(self.q_n_s2_m2),
                    road_friction=full(env.road_friction), cg_height_m=full(v.cg_height_m),
                    wheelbase_m=full(v.wheelbase_m), rear_drive=np.full(n, self.rear_drive),
                    wheel_inertia_total_kgm2=full(v.tyre_count * v.wheel_inertia_kgm2),
                    speed_limit_mps=full(self.speed_limit_mps))

    def single_drive(self, mi, rj, tk):
        """`selector.physics.performance` (Drive, Body) of single-axle designs, first gear (plots, tests)."""
        from selector.physics.performance import Drive

        keys = self.single_keys(mi, rj, tk)
        mo, re = self.motors, self.reducers
        mi, rj = keys[:, AXLE_COLUMNS[self.axles[-1]][0]], keys[:, AXLE_COLUMNS[self.axles[-1]][1]]
        drive = Drive(torque_nm=mo.torque_nm[mi], power_w=mo.power_w[mi], cont_torque_nm=mo.cont_torque_nm[mi],
                      cont_power_w=mo.cont_power_w[mi], decline_rad_s=mo.decline_rad_s[mi],
                      decline_exponent=mo.decline_exponent[mi], max_speed_rad_s=mo.max_speed_rad_s[mi],
                      rotor_inertia_kgm2=mo.rotor_inertia_kgm2[mi], ratio=re.ratio[rj], efficiency=re.efficiency[rj],
                      radius_m=self.tyres.radius_m[keys[:, TY]])
        return drive, self.body(keys)

    def design(self, keys, mass_kg=None) -> tuple[Axles, Body]:
        """Axles and Body of the designs ``keys`` (n, 5)."""
        keys = np.asarray(keys, dtype=np.int64)
        axles = Axles(front=self.unit(keys[:, FM], keys[:, FR]), rear=self.unit(keys[:, RM], keys[:, RR]),
                      radius_m=self.tyres.radius_m[keys[:, TY]])
        return axles, self.body(keys, mass_kg)
