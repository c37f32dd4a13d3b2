"""Validated inputs of one study: the problem statement and the catalogue tables.

These dataclasses are what the loaders (`problem.py`, `catalog.py`) produce and what every
other module consumes. All values are SI or carry their unit in the field name.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pandas as pd


@dataclass(frozen=True)
class Vehicle:
    """Vehicle data that does not depend on the selected parts."""

    mass_kg: float
    """Laden mass without the selected motor, reducer and tyres [kg]."""
    drag_area_m2: float
    """Drag coefficient times frontal area, Cd*A [m^2]."""
    wheelbase_m: float
    """Wheelbase L [m]."""
    cg_height_m: float
    """Height of the centre of gravity h [m]."""
    rear_axle_share: float
    """Static share of mass_kg carried by the rear axle [-], in (0, 1)."""
    driven_axle: str
    """"rear", "front" or "both" (one drive unit per axle)."""
    tyre_count: int
    """Number of tyres (even), split evenly between the two axles [-]."""
    rolling_radius_factor: float = 0.97
    """Dynamic rolling radius / free radius k [-] (assumption, overridable)."""
    wheel_inertia_kgm2: float = 0.0
    """Polar moment of inertia of one wheel and tyre [kg m^2] (0 = neglected)."""


@dataclass(frozen=True)
class Environment:
    """Air and road."""

    air_density_kg_m3: float
    """Air density rho [kg/m^3] (given, or from ISA altitude/temperature)."""
    road_friction: float
    """Peak tyre-road friction coefficient mu [-]."""


@dataclass(frozen=True)
class Requirements:
    """Performance targets and limits; None means not required."""

    top_speed_kmh: float | None = None
    gradeability_pct: float | None = None
    launch_accel_mps2: float | None = None
    accel_to_kmh: float | None = None
    accel_time_s: float | None = None
    max_mass_kg: float | None = None
    budget: float | None = None
    speed_limiter_kmh: float | None = None
    range_km: float | None = None
    """Range on the energy study's cycle ([energy] range_km; the battery is sized for it) [km]."""


@dataclass(frozen=True)
class Procurement:
    """Purchasing filters and shortlist options (problem file table [procurement])."""

    distinct: str | None = None
    """"motor", "reducer", "tyre" or None."""
    avoid_suppliers: tuple[str, ...] = ()
    max_lead_time_weeks: float | None = None

    def __post_init__(self):
        import math

        from selector.errors import argument_error

        names = self.avoid_suppliers
        if isinstance(names, str) or not isinstance(names, (tuple, list)) \
                or not all(isinstance(x, str) for x in names):
            raise argument_error("Procurement", "avoid_suppliers", names,
                                 'a list of supplier names, e.g. ["Acme"] (a single name in a list)')
        object.__setattr__(self, "avoid_suppliers", tuple(names))
        if self.distinct is not None and self.distinct not in ("motor", "reducer", "tyre"):
            raise argument_error("Procurement", "distinct", self.distinct, '"motor", "reducer", "tyre" or None')
        w = self.max_lead_time_weeks
        if w is not None and (isinstance(w, bool) or not isinstance(w, (int, float)) or not math.isfinite(w)
                              or w < 0):
            raise argument_error("Procurement", "max_lead_time_weeks", w, "a number >= 0 [weeks] or None")


@dataclass(frozen=True)
class DriveOptions:
    """Options of a two-unit layout (problem file table [drive], with driven_axle = "both")."""

    same_unit: bool = False
    """True: the same motor and reducer part on both axles (one purchase line, quantity 2)."""
    front_motors: tuple[str, ...] | None = None
    """Motor part ids or supplier names allowed on the front axle (None: all)."""
    rear_motors: tuple[str, ...] | None = None
    """Motor part ids or supplier names allowed on the rear axle (None: all)."""


@dataclass(frozen=True)
class Energy:
    """Energy study settings (problem file table [energy]); a problem without the table has none.

    Defaults are common practice (no published source) and are documented in `selector.io.problem`.
    """

    cycle: str
    """Built-in cycle name (e.g. "wltc_class3b") or the path of a cycle CSV (relative to the working
    directory, resolved from the problem file's folder)."""
    range_km: float | None = None
    """Range the battery must cover on the cycle [km]; None = energy per km only, no battery sizing."""
    specific_energy_wh_per_kg: float | None = None
    """Pack-level specific energy [Wh/kg] (required with range_km)."""
    cost_per_kwh: float | None = None
    """Battery price [currency/kWh] (required with range_km)."""
    usable_fraction: float = 0.9
    """Usable share of the battery's nominal energy [-]."""
    inverter_efficiency_pct: float = 97.0
    """Inverter efficiency, both directions [%]."""
    auxiliary_w: float = 300.0
    """Auxiliary load drawn at all times [W]."""
    regen_max_kw: float | None = None
    """Cap on the regenerated shaft power of all motors [kW]; None = motor envelope only; 0 = no
    regeneration."""
    regen_min_speed_kmh: float = 5.0
    """No regeneration below this speed [km/h]."""
    cycle_data: object = field(default=None, compare=False, repr=False)
    """The loaded cycle (`selector.io.cycles.Cycle`), validated by the problem loader."""


@dataclass(frozen=True)
class Problem:
    """One study as stated in a problem file (TOML)."""

    name: str
    path: Path | None
    catalog_paths: dict[str, Path]
    """Keys "motors", "reducers", "tyres"; absolute or relative to the working directory."""
    vehicle: Vehicle
    environment: Environment
    requirements: Requirements
    objective: str = "cost"
    """"cost", "mass" or "accel_time"."""
    procurement: Procurement = field(default_factory=Procurement)
    energy: Energy | None = None
    """Energy study settings ([energy] table); None when the problem has no energy study."""
    drive: DriveOptions = field(default_factory=DriveOptions)

    @property
    def axles(self) -> tuple[str, ...]:
        """The axles that carry a drive unit: ("rear",), ("front",) or ("front", "rear")."""
        a = self.vehicle.driven_axle
        return ("front", "rear") if a == "both" else (a,)


@dataclass(frozen=True)
class Catalogs:
    """The three validated part tables.

    Each DataFrame has the canonical columns of `schema.py` (units in the names), any extra
    columns from the file, and is sorted by `part` (string order) with a fresh RangeIndex, so
    row position order equals part-id order (the tie-break order).
    Motors: empty decline_speed_rpm filled with max_speed_rpm, empty decline_exponent with 1.
    Tyres get derived columns: diameter_m (unloaded, ISO formula with 25.4 mm per rim code),
    speed_rating_kmh (from the speed symbol) and load_capacity_kg (from the load index).
    """

    motors: pd.DataFrame
    reducers: pd.DataFrame
    tyres: pd.DataFrame
    paths: dict[str, Path] = field(default_factory=dict)
