"""Energy studies: exact search against enumeration, and throughput of the cycle-energy model.

``--studies`` (default): the demo energy studies without a lead-time filter (about 3.7e5 combinations
each: the delivery van of problems/delivery_van_energy.toml without its [procurement] table, and the
parcel van of problems/parcel_van.toml with an [energy] table added), each solved by the engine
(`selector.engine.search.search`) and by exhaustive enumeration (`evaluate.enumerate_designs`) in
this one process, one after the other; printed: wall and CPU time of each, the ratio, and whether
both found the same optimum (value and parts). The demo data are invented and illustrative.

``--throughput``: seeded random designs (invented data): one or two drive units, single-speed or
three-speed gearboxes, polynomial loss model or efficiency maps. Each case is timed (best of
`--repeat`) on the whole set and reported as designs per second, with the peak traced memory.

Usage::

    python benchmarks/bench_energy.py [--studies] [--no-enumeration] [--throughput [--cycle wltc_class3b]
                                      [--designs 4000] [--chunk 131072]]
"""

from __future__ import annotations

import argparse
import tempfile
import time
import tracemalloc
import warnings
from pathlib import Path

import numpy as np

from selector.io.cycles import load_cycle
from selector.physics.energy import EnergyParams, EnergyUnit, EnergyVehicle, cycle_energy
from selector.physics.losses import EfficiencyGrid, motor_loss_w


def units(n, rng, gears, maps=False, present=True):
    """n random drive units with `gears` gears (invented data)."""
    r = np.full((n, 3), np.nan)
    e = np.full((n, 3), np.nan)
    r[:, :gears] = np.sort(rng.uniform(4.0, 14.0, (n, gears)), axis=1)[:, ::-1]
    e[:, :gears] = rng.uniform(0.94, 0.98, (n, gears))
    loss = (rng.uniform(0.02, 0.2, n), rng.uniform(0.2, 1.0, n), rng.uniform(1e-8, 3e-7, n), rng.uniform(100, 500, n))
    grids = ()
    index = np.full(n, -1)
    if maps:
        w = np.linspace(0.0, 1600.0, 17)
        t = np.linspace(0.0, 400.0, 13)
        p = w[:, None] * t[None, :]
        grids = tuple(EfficiencyGrid(w, t, np.where(p > 0, p / (p + motor_loss_w(t[None, :], w[:, None], kc, 0.5, 1e-7,
                                                                                      200.0)), 0.0), f"m{k}")
                      for k, kc in enumerate((0.03, 0.05, 0.08)))
        index = rng.integers(0, len(grids), n)
    return EnergyUnit(present=np.full(n, present), torque_nm=rng.uniform(250, 400, n),
                      power_w=rng.uniform(80e3, 200e3, n), decline_rad_s=np.full(n, 1600.0),
                      decline_exponent=np.ones(n), max_speed_rad_s=np.full(n, 1600.0),
                      rotor_inertia_kgm2=rng.uniform(0.01, 0.06, n), ratios=r, gear_efficiency=e,
                      loss_copper_w_per_nm2=loss[0], loss_iron_nm=loss[1], loss_windage_w_s3=loss[2],
                      loss_constant_w=loss[3], map_index=index, maps=grids)


ROOT = Path(__file__).resolve().parents[1]

PARCEL_ENERGY = """
[energy]
cycle = "wltc_class3b"
range_km = 200
specific_energy_wh_per_kg = 160
cost_per_kwh = 150
"""


def demo_studies(folder: Path) -> dict:
    """{name: problem file} of the demo energy studies without a lead-time filter, written to ``folder``."""
    cat = f'"{ROOT / "catalogs"}/'
    van = (ROOT / "problems" / "delivery_van_energy.toml").read_text().replace('"../catalogs/', cat)
    van = van[:van.index("[procurement]")]
    parcel = (ROOT / "problems" / "parcel_van.toml").read_text().replace('"../catalogs/', cat) + PARCEL_ENERGY
    out = {}
    for name, text in (("delivery_van_energy, no lead-time filter", van), ("parcel_van + [energy]", parcel)):
        path = folder / (name.split(",")[0].split(" ")[0] + ".toml")
        path.write_text(text)
        out[name] = path
    return out


def _timed(call):
    t0, c0 = time.perf_counter(), time.process_time()
    res = call()
    return res, time.perf_counter() - t0, time.process_time() - c0


def run_studies(enumerate_too: bool = True) -> None:
    """Engine against enumeration on the demo energy studies (see the module docstring)."""
    from selector.api import open_study
    from selector.engine.evaluate import enumerate_designs
    from selector.engine.search import search

    warnings.simplefilter("ignore")
    print("| study | combinations | engine s (CPU s) | status | enumeration s (CPU s) | enumeration/engine "
          "| same optimum |")
    print("|---|---|---|---|---|---|---|")
    with tempfile.TemporaryDirectory() as tmp:
        for name, path in demo_studies(Path(tmp)).items():
            study = open_study(path)
            parts = study.parts
            res, wall, cpu = _timed(lambda parts=parts, study=study: search(parts, allowed=study.allowed))
            best = res.designs[0] if res.designs else None
            enum = "not run"
            ratio = same = "-"
            if enumerate_too:
                al = study.allowed
                designs, e_wall, e_cpu = _timed(lambda parts=parts, al=al: enumerate_designs(
                    parts, parts.problem.objective, motors=al.get("motors"), reducers=al.get("reducers"),
                    tyres=al.get("tyres")))
                e_best = designs[0] if designs else None
                same = (best is None and e_best is None) or (
                    best is not None and e_best is not None and tuple(best.key) == tuple(e_best.key)
                    and abs(best.value - e_best.value) <= 1e-9 * abs(best.value))
                enum = f"{e_wall:.1f} ({e_cpu:.1f})"
                ratio = f"{e_wall / wall:.1f} ({e_cpu / cpu:.1f})"
            print(f"| {name} | {parts.combinations:.2e} | {wall:.2f} ({cpu:.2f}) | {res.status} | {enum} | {ratio} | "
                  f"{same} |", flush=True)


def main(argv=None) -> int:
    """Run the benchmark; return a process exit code."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--studies", action="store_true", help="engine against enumeration on the demo studies")
    ap.add_argument("--no-enumeration", action="store_true", help="with --studies: the engine only")
    ap.add_argument("--throughput", action="store_true", help="designs per second of the cycle-energy model")
    ap.add_argument("--cycle", default="wltc_class3b")
    ap.add_argument("--designs", type=int, default=4000)
    ap.add_argument("--chunk", type=int, default=EnergyParams.__dataclass_fields__["chunk_elements"].default)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    if args.studies or not args.throughput:
        run_studies(not args.no_enumeration)
    if not args.throughput:
        return 0
    cyc = load_cycle(args.cycle)
    n = args.designs
    rng = np.random.default_rng(1)
    veh = EnergyVehicle(mass_kg=rng.uniform(1400, 2600, n), crr=rng.uniform(0.007, 0.012, n), q_n_s2_m2=0.45,
                        radius_m=rng.uniform(0.29, 0.36, n), wheel_inertia_total_kgm2=3.0)
    params = EnergyParams(inverter_efficiency=0.97, auxiliary_w=300.0, regen_max_w=60e3,
                          regen_min_speed_mps=5 / 3.6, chunk_elements=args.chunk)
    cases = [
        ("one unit, single-speed, loss model", units(n, rng, 1), None, False),
        ("one unit, single-speed, loss model, detail", units(n, rng, 1), None, True),
        ("one unit, single-speed, efficiency maps", units(n, rng, 1, maps=True), None, False),
        ("one unit, three-speed, loss model", units(n, rng, 3), None, False),
        ("two units, single-speed each, loss model", units(n, rng, 1), units(n, rng, 1), False),
        ("two units, three-speed front, loss model", units(n, rng, 3), units(n, rng, 1), False),
    ]
    print(f"cycle {cyc.name}: {len(cyc.time_s) - 1} intervals; {n} designs; chunk_elements {args.chunk}")
    print(f"{'case':<46} {'designs/s':>10} {'s':>7} {'peak MiB':>9}")
    for label, front, rear, detail in cases:
        best = np.inf
        for _ in range(args.repeat):
            t0 = time.perf_counter()
            res = cycle_energy(front, rear, veh, params, cyc.time_s, cyc.speed_mps, detail=detail)
            best = min(best, time.perf_counter() - t0)
        tracemalloc.start()
        cycle_energy(front, rear, veh, params, cyc.time_s, cyc.speed_mps, detail=detail)
        peak = tracemalloc.get_traced_memory()[1] / 2**20
        tracemalloc.stop()
        assert np.isfinite(res.wh_per_km).any()
        print(f"{label:<46} {n / best:>10.0f} {best:>7.3f} {peak:>9.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
