"""Benchmark-size synthetic catalogues built in memory (invented data; no files, no calibration pass).

`synthetic_study(n_motors, n_reducers, n_tyres, seed)` -> (Problem, Catalogs) of a light van study,
and `variant_study` / `variant_motors` for catalogues of many near-variant motor rows (windings,
voltages, mountings) with exact duplicates, as real supplier catalogues have. Part of the shared
generator `selector.synthetic` (which re-exports these names).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from selector.inputs import Catalogs, Environment, Problem, Requirements, Vehicle
from selector.physics.tyres import load_capacity_kg, speed_rating_kmh, unloaded_diameter_m

__all__ = ["SYMBOLS", "synthetic_catalogs", "synthetic_problem", "synthetic_study", "variant_motors", "variant_study"]

SYMBOLS = np.array(["Q", "R", "S", "T", "H", "V", "W", "Y"])


def synthetic_catalogs(n_motors: int, n_reducers: int, n_tyres: int, seed: int = 0) -> Catalogs:
    """Random but rule-abiding motor, reducer and tyre tables (sorted by part id)."""
    rng = np.random.default_rng(seed)
    p_kw = np.exp(rng.uniform(np.log(40), np.log(250), n_motors))
    t_nm = p_kw * rng.uniform(1.6, 3.2, n_motors)
    corner_rpm = p_kw * 1000 / t_nm * 60 / (2 * np.pi)
    max_rpm = np.maximum(corner_rpm * rng.uniform(2.0, 4.0, n_motors), rng.uniform(8000, 16000, n_motors))
    decline = np.where(rng.random(n_motors) < 0.3, rng.uniform(corner_rpm, max_rpm), np.nan)
    motors = pd.DataFrame({
        "part": [f"SM-{i:05d}" for i in range(n_motors)],
        "supplier": [f"Synthetic Motors {i % 7}" for i in range(n_motors)],
        "peak_torque_nm": t_nm.round(1), "peak_power_kw": p_kw.round(2), "max_speed_rpm": max_rpm.round(0),
        "cont_torque_nm": (t_nm * rng.uniform(0.45, 0.7, n_motors)).round(1),
        "cont_power_kw": (p_kw * rng.uniform(0.45, 0.7, n_motors)).round(2),
        "decline_speed_rpm": np.where(np.isnan(decline), max_rpm.round(0), np.ceil(decline)),
        "decline_exponent": np.where(np.isnan(decline), 1.0, rng.uniform(0.5, 1.5, n_motors).round(2)),
        "mass_kg": (p_kw * rng.uniform(0.4, 1.2, n_motors) + 10).round(1),
        "rotor_inertia_kgm2": (t_nm * rng.uniform(1e-4, 3e-4, n_motors)).round(5),
        "unit_cost": (p_kw * rng.uniform(25, 60, n_motors) + 300).round(0),
        "lead_time_weeks": rng.integers(2, 30, n_motors).astype(float),
    })
    reducers = pd.DataFrame({
        "part": [f"SR-{j:05d}" for j in range(n_reducers)],
        "supplier": [f"Synthetic Gears {j % 4}" for j in range(n_reducers)],
        "ratio": rng.uniform(4.0, 14.0, n_reducers).round(3),
        "efficiency_pct": rng.uniform(94.0, 98.0, n_reducers).round(1),
        "max_input_torque_nm": rng.choice([250, 400, 600, 800, 1000], n_reducers).astype(float),
        "max_input_speed_rpm": rng.choice([10000, 14000, 18000, 20000], n_reducers).astype(float),
        "mass_kg": rng.uniform(8, 50, n_reducers).round(1),
        "unit_cost": rng.uniform(400, 3000, n_reducers).round(0),
        "lead_time_weeks": rng.integers(2, 20, n_reducers).astype(float),
    })
    width = rng.choice(np.arange(165, 306, 10), n_tyres)
    aspect = rng.choice(np.arange(35, 81, 5), n_tyres)
    rim = rng.integers(14, 21, n_tyres)
    li = rng.integers(80, 121, n_tyres)
    sym = rng.choice(SYMBOLS, n_tyres)
    tyres = pd.DataFrame({
        "part": [f"ST-{k:05d}" for k in range(n_tyres)],
        "supplier": [f"Synthetic Tyres {k % 5}" for k in range(n_tyres)],
        "size": [f"{w}/{a}R{r}" for w, a, r in zip(width, aspect, rim, strict=True)],
        "load_index": li, "speed_symbol": sym,
        "rr_coefficient_n_per_kn": rng.uniform(6.0, 12.0, n_tyres).round(1),
        "mass_kg": rng.uniform(7, 16, n_tyres).round(1),
        "unit_cost": rng.uniform(60, 300, n_tyres).round(0),
        "lead_time_weeks": rng.integers(1, 12, n_tyres).astype(float),
    })
    tyres["diameter_m"] = unloaded_diameter_m(width.astype(float), aspect.astype(float), rim.astype(float))
    tyres["speed_rating_kmh"] = speed_rating_kmh(sym)
    tyres["load_capacity_kg"] = load_capacity_kg(li)
    return Catalogs(motors=motors, reducers=reducers, tyres=tyres)


def synthetic_problem(objective: str = "cost") -> Problem:
    """A light commercial van study (illustrative) with all requirement families stated."""
    return Problem(
        name="Synthetic van benchmark (illustrative data)", path=None, catalog_paths={},
        vehicle=Vehicle(mass_kg=1900.0, drag_area_m2=1.1, wheelbase_m=3.0, cg_height_m=0.65,
                        rear_axle_share=0.5, driven_axle="rear", tyre_count=4),
        environment=Environment(air_density_kg_m3=1.2, road_friction=0.85),
        requirements=Requirements(top_speed_kmh=130, gradeability_pct=25, launch_accel_mps2=2.5,
                                  accel_to_kmh=100, accel_time_s=11.0, max_mass_kg=2300, budget=12000),
        objective=objective)


def synthetic_study(n_motors: int, n_reducers: int, n_tyres: int, seed: int = 0, objective: str = "cost"):
    """(Problem, Catalogs) of the given sizes."""
    return synthetic_problem(objective), synthetic_catalogs(n_motors, n_reducers, n_tyres, seed)


def variant_motors(motors: pd.DataFrame, n_rows: int, seed: int = 0) -> pd.DataFrame:
    """``n_rows`` motor rows made as near-variants of the rows of ``motors`` (invented data).

    Each row copies a random base row and then, at random: stays an exact copy (a duplicate under
    its own part id, 25 %), costs 0-15 % more and weighs 0-5 % more (a dominated copy, 35 %), or is
    another winding (peak and continuous torque times f, every speed divided by f, f in 0.95..1.05,
    the same powers; price within +-5 %; 40 %). Part ids are drawn at random so that file order and
    part-id order differ from the base order.
    """
    rng = np.random.default_rng([seed, 23])
    base = motors.reset_index(drop=True)
    src = rng.integers(0, len(base), n_rows)
    out = base.iloc[src].reset_index(drop=True).copy()
    kind = rng.random(n_rows)
    dom = (kind >= 0.25) & (kind < 0.6)
    wind = kind >= 0.6
    out.loc[dom, "unit_cost"] = (out.loc[dom, "unit_cost"] * rng.uniform(1.0, 1.15, dom.sum())).round(0)
    out.loc[dom, "mass_kg"] = (out.loc[dom, "mass_kg"] * rng.uniform(1.0, 1.05, dom.sum())).round(1)
    f = rng.uniform(0.95, 1.05, wind.sum())
    for col in ("peak_torque_nm", "cont_torque_nm"):
        out.loc[wind, col] = (out.loc[wind, col] * f).round(1)
    out.loc[wind, "max_speed_rpm"] = (out.loc[wind, "max_speed_rpm"] / f).round(0)
    corner = out["peak_power_kw"] * 1000 / out["peak_torque_nm"] * 60 / (2 * np.pi)
    fw = np.ones(n_rows)
    fw[wind] = f
    decline = np.minimum(np.maximum(np.ceil(out["decline_speed_rpm"] / fw), np.ceil(corner)), out["max_speed_rpm"])
    out["decline_speed_rpm"] = np.where(wind, decline, out["decline_speed_rpm"])
    out.loc[wind, "unit_cost"] = (out.loc[wind, "unit_cost"] * rng.uniform(0.95, 1.05, wind.sum())).round(0)
    ids = rng.choice(np.arange(10 * n_rows), n_rows, replace=False)
    out["part"] = [f"SV-{int(x):07d}" for x in ids]
    return out.sort_values("part", kind="stable").reset_index(drop=True)


def variant_study(n_rows: int, n_reducers: int, n_tyres: int, families: int | None = None, seed: int = 0,
                  objective: str = "cost"):
    """(Problem, Catalogs): ``n_rows`` motor rows, near-variants of ``families`` base motors (default
    n_rows / 10), with the synthetic reducers and tyres (invented data)."""
    families = families or max(1, n_rows // 10)
    cat = synthetic_catalogs(families, n_reducers, n_tyres, seed)
    motors = variant_motors(cat.motors, n_rows, seed)
    return synthetic_problem(objective), Catalogs(motors=motors, reducers=cat.reducers, tyres=cat.tyres)
