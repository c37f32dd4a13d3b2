"""The tables of a problem file turned into the inputs they describe (`selector.inputs`).

Each function takes the collector, the checked values of its table (keys that passed
`selector.io.problem_checks.check_value`) and the raw parsed file, records the rules across keys
that are broken, and returns the input object, or None when its values are incomplete.
"""

from __future__ import annotations

import os
from pathlib import Path

from selector.errors import InputError
from selector.inputs import DriveOptions, Energy, Environment, Requirements, Vehicle
from selector.io.cycles import BUILTIN_CYCLES, load_cycle
from selector.io.files import describe_os_error, shown
from selector.io.problem_checks import Collector, toml_repr
from selector.io.problem_keys import CG_HEIGHT_WHEELBASE_USUAL, DEFAULT_ROAD_FRICTION, TABLES
from selector.physics.atmosphere import isa_density_kg_m3

__all__ = ["catalog_paths", "drive", "energy", "environment", "objective", "requirements", "vehicle"]


def vehicle(col: Collector, v: dict, data: dict) -> Vehicle | None:
    """The [vehicle] table: drag given one way only, the centre of gravity below the wheelbase."""
    raw = data.get("vehicle") if isinstance(data.get("vehicle"), dict) else None
    if raw is None:
        return None
    area_given = "drag_area_m2" in raw
    cd, fa = "drag_coefficient" in raw, "frontal_area_m2" in raw
    drag = None
    if area_given and (cd or fa):
        col.add(f"{col.where('vehicle', 'drag_area_m2')} drag_area_m2: give either drag_area_m2 or "
                "drag_coefficient with frontal_area_m2, not both. Remove one of them.")
    elif area_given:
        drag = v.get("drag_area_m2")
    elif cd and fa:
        if "drag_coefficient" in v and "frontal_area_m2" in v:
            drag = v["drag_coefficient"] * v["frontal_area_m2"]
    elif cd or fa:
        have, need = ("drag_coefficient", "frontal_area_m2") if cd else ("frontal_area_m2", "drag_coefficient")
        col.add(f"{col.where('vehicle', have)} {have} is given without {need}. Add {need}, or give "
                "drag_area_m2 (Cd x frontal area) instead.")
    else:
        col.add(f"{col.where('vehicle')}: no aerodynamic drag given. Add drag_area_m2 [m^2] (Cd x frontal "
                "area), or drag_coefficient with frontal_area_m2 [m^2].")
    needed = ("mass_kg", "wheelbase_m", "cg_height_m", "rear_axle_share", "driven_axle", "tyre_count")
    if drag is None or any(k not in v for k in needed):
        return None
    h_over_l = v["cg_height_m"] / v["wheelbase_m"]
    if h_over_l >= 1.0:
        col.add(f"{col.where('vehicle', 'cg_height_m')} cg_height_m = {toml_repr(v['cg_height_m'])} is not below "
                f"wheelbase_m = {toml_repr(v['wheelbase_m'])}; a road vehicle's centre of gravity is well below "
                "its wheelbase (it would tip over under braking). Check both values [m].")
        return None
    if h_over_l > CG_HEIGHT_WHEELBASE_USUAL:
        col.notes.append(f"{col.where('vehicle', 'cg_height_m')} cg_height_m / wheelbase_m = {h_over_l:.3g}; above "
                         f"{CG_HEIGHT_WHEELBASE_USUAL:g}, unusual. Check both values [m].")
    extra = {k: v[k] for k in ("rolling_radius_factor", "wheel_inertia_kgm2") if k in v}
    return Vehicle(mass_kg=float(v["mass_kg"]), drag_area_m2=float(drag), wheelbase_m=float(v["wheelbase_m"]),
                   cg_height_m=float(v["cg_height_m"]), rear_axle_share=float(v["rear_axle_share"]),
                   driven_axle=v["driven_axle"], tyre_count=int(v["tyre_count"]),
                   **{k: float(x) for k, x in extra.items()})


def environment(col: Collector, v: dict, data: dict) -> Environment | None:
    """The [environment] table: air density given or from the ISA; friction defaulted with a note."""
    raw = data.get("environment") if isinstance(data.get("environment"), dict) else {}
    has_rho = "air_density_kg_m3" in raw
    isa_keys = [k for k in ("altitude_m", "temperature_c") if k in raw]
    if has_rho and isa_keys:
        col.add(f"{col.where('environment', 'air_density_kg_m3')} air_density_kg_m3: give either "
                f"air_density_kg_m3 or {' / '.join(isa_keys)} (ISA), not both. Remove one of them.")
        return None
    if "road_friction" not in raw:
        col.notes.append(f"{col.disp}: [environment] road_friction not given; assuming {DEFAULT_ROAD_FRICTION} "
                         "(dry asphalt). State it for wet, gravel or snow studies.")
    elif "road_friction" not in v:
        return None
    if has_rho:
        if "air_density_kg_m3" not in v:
            return None
        rho = float(v["air_density_kg_m3"])
    else:
        if any(k not in v for k in isa_keys):
            return None
        rho = isa_density_kg_m3(float(v.get("altitude_m", 0.0)),
                                None if "temperature_c" not in v else float(v["temperature_c"]))
    return Environment(air_density_kg_m3=rho, road_friction=float(v.get("road_friction", DEFAULT_ROAD_FRICTION)))


def drive(col: Collector, v: dict, data: dict, vehicle: Vehicle | None) -> DriveOptions:
    """The [drive] table: only meaningful with driven_axle = "both"."""
    if "drive" in data and vehicle is not None and vehicle.driven_axle != "both":
        col.add(f"{col.where('drive')}: [drive] applies only to two drive units; [vehicle] driven_axle is "
                f"\"{vehicle.driven_axle}\". Set driven_axle = \"both\" or remove the [drive] table.")
    return DriveOptions(**v)


def requirements(col: Collector, v: dict) -> Requirements:
    """The [requirements] table: accel_time_s needs accel_to_kmh."""
    if "accel_time_s" in v and "accel_to_kmh" not in v:
        col.add(f"{col.where('requirements', 'accel_time_s')} accel_time_s is given without accel_to_kmh. "
                "Add accel_to_kmh (the target speed of the acceleration run) [km/h].")
    return Requirements(**{k: float(x) for k, x in v.items()})


def objective(col: Collector, v: dict, data: dict) -> str:
    """The [objective] table: what the objective needs from the other tables."""
    minimize = v.get("minimize", "cost")
    raw_req = data.get("requirements") if isinstance(data.get("requirements"), dict) else {}
    if minimize == "accel_time" and "accel_to_kmh" not in raw_req:
        col.add(f"{col.where('objective', 'minimize')} minimize = \"accel_time\" needs [requirements] "
                "accel_to_kmh (the target speed of the acceleration run). Add it [km/h].")
    if minimize == "energy" and not isinstance(data.get("energy"), dict):
        col.add(f"{col.where('objective', 'minimize')} minimize = \"energy\" needs an [energy] table with the "
                "driving cycle (cycle = \"wltc_class3b\", for example). Add it.")
    return minimize


def energy(col: Collector, path: Path, v: dict, data: dict) -> Energy | None:
    """The [energy] table: the cycle loaded (relative to the problem file), the battery keys range_km needs."""
    raw = data.get("energy")
    if not isinstance(raw, dict):
        return None
    if "range_km" in raw:
        for key in ("specific_energy_wh_per_kg", "cost_per_kwh"):
            if key not in raw:
                unit = TABLES["energy"][key].unit
                col.add(f"{col.where('energy', 'range_km')} range_km is given without {key}; sizing the battery "
                        f"for a range needs it. Add {key} [{unit}].")
    elif "specific_energy_wh_per_kg" in raw or "cost_per_kwh" in raw:
        given = [k for k in ("specific_energy_wh_per_kg", "cost_per_kwh") if k in raw]
        col.notes.append(f"{col.where('energy', given[0])} {' and '.join(given)} given without range_km: no "
                         "battery is sized, so they are not used. Add range_km to size the battery.")
    if "cycle" not in v:
        return None
    given = v["cycle"]
    try:
        cycle = load_cycle(given, base_dir=path.parent)
    except InputError as exc:
        detail = str(exc).replace("\n", "\n    ")
        col.add(f"{col.where('energy', 'cycle')} cycle = {toml_repr(given)}: {detail}")
        return None
    if any(k not in v for k in raw if k in TABLES["energy"]):
        return None
    name = given.strip().lower() if given.strip().lower() in BUILTIN_CYCLES else os.path.normpath(cycle.path)
    values = {k: float(x) for k, x in v.items() if k != "cycle"}
    return Energy(cycle=name, cycle_data=cycle, **values)


def catalog_paths(col: Collector, path: Path, v: dict) -> dict[str, Path]:
    """The [catalogs] table: each path resolved relative to the problem file and checked to be a file."""
    out = {}
    base = path.parent
    for kind, given in v.items():
        if not given.strip():
            col.bad("catalogs", kind, given, "must not be empty", "", f"Give the path of {kind}.csv.")
            continue
        p = Path(os.path.normpath(base / given))
        try:
            p.stat()
        except (FileNotFoundError, NotADirectoryError):
            pass
        except (OSError, ValueError) as exc:
            col.add(f"{col.where('catalogs', kind)} {kind} = {toml_repr(shown(given))}: cannot be used "
                    f"({describe_os_error(exc) if isinstance(exc, OSError) else exc}). Fix the path.")
            continue
        if not p.exists():
            col.add(f"{col.where('catalogs', kind)} {kind} = {toml_repr(given)}: file not found (looked for {p}). "
                    "Fix the path; it is relative to the problem file.")
        elif p.is_dir():
            col.add(f"{col.where('catalogs', kind)} {kind} = {toml_repr(given)}: {p} is a folder, not a CSV file. "
                    "Give the path of the CSV file.")
        out[kind] = p
    return out
