"""Throughput of the cycle-energy model (selector.physics.energy): designs per second over a cycle.

Seeded random designs (invented data): one or two drive units, single-speed or three-speed gearboxes,
polynomial loss model or efficiency maps. Each case is timed (best of `--repeat`) on the whole set
and reported as designs per second, with the peak traced memory of one run.

Usage::

    python benchmarks/bench_energy.py [--cycle wltc_class3b] [--designs 4000] [--chunk 131072]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

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


def main(argv=None) -> int:
    """Run the benchmark; return a process exit code."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cycle", default="wltc_class3b")
    ap.add_argument("--designs", type=int, default=4000)
    ap.add_argument("--chunk", type=int, default=EnergyParams.__dataclass_fields__["chunk_elements"].default)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
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
