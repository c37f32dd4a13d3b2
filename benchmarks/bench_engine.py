"""Engine versus the hand-written baseline search and plain enumeration, measured side by side.

One run prints these tables (invented data throughout: `selector.synthetic`, the demo catalogues):

1. ``sizes``: synthetic single-axle studies of about 1e4 .. 1e8 combinations, each objective (cost,
   mass, accel_time): engine time, baseline time (`baseline.py`), plain enumeration time
   (`evaluate.enumerate_designs`; above ``--enum-max`` extrapolated from the largest measured
   size's time per combination, marked ``~``), the ratios engine/baseline and enumeration/engine,
   the peak traced memory of one engine run (tracemalloc, numpy buffers included) and the process's
   peak RSS, the engine's block and MILP counts, and whether all optima agree (value and parts).
   Engine and baseline runs alternate (E B E B ...), and each time is the median of at least
   ``--repeats`` runs; searches of milliseconds repeat until `MIN_TOTAL_S` of measured time (at most
   `MAX_RUNS` runs), so that a median is not the noise of three runs (the column ``runs``).
2. ``seeds``: the sizes table's studies up to 1e6 drawn with seeds 1..``--seeds``: the median, best
   and worst engine/baseline ratio over the seeds and how many seeds have the engine behind (a
   single seed's study can favour either search).
3. ``frontier``: the exact cost-vs-time frontier at 1e6 (engine: `studies.frontier.trace`) against
   an epsilon-constraint frontier built on the baseline search (min cost under a time cap, then min
   time under that cost, cap just below it, repeat), same points required.
4. ``many``: many parts: 10,000 near-variant motor rows x 100 reducers x 50 tyres, and 100,000
   motor rows (`synthetic.variant_study`); engine and baseline.
5. ``two``: two-unit synthetic studies of about 1e9 and 1e11 combinations (engine only; enumeration
   extrapolated from a timed sample of front options).
6. ``demo``: the demo problems (problems/*.toml), their all-wheel-drive variants (about 1e9
   combinations) and an energy variant of the parcel van (demo size, about 3e5 combinations) against
   enumeration.
7. ``startup``: median wall time of ``python -c "import selector.cli"`` and of ``selector solve`` on
   a demo problem (fresh processes).

Each case runs in a fresh subprocess (its own peak RSS). The load average is printed with each
table: the development machine is shared, so read the ratios (measured interleaved) rather than
absolute times.

    python benchmarks/bench_engine.py                    # everything (about half an hour)
    python benchmarks/bench_engine.py --quick            # sizes up to 1e6, 1 repeat, no 1e11, no 100k rows
    python benchmarks/bench_engine.py --only sizes,many  # a subset of the tables
    python benchmarks/bench_engine.py --only sizes --max 1e7 --objective accel_time

Not a test: speed targets are read from this output, never asserted in tests.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
SIZES = {  # approx combinations: (motors, reducers, tyres)
    "1e4": (22, 20, 23),
    "1e5": (46, 44, 50),
    "1e6": (100, 100, 100),
    "1e7": (215, 100, 465),
    "1e8": (1000, 100, 1000),
}
OBJECTIVES = ("cost", "mass", "accel_time")
TABLES = ("sizes", "seeds", "frontier", "many", "two", "demo", "startup")
MIN_TOTAL_S = 1.0
"""Measured time (engine + baseline) below which interleaved runs continue past ``--repeats`` [s]."""
MAX_RUNS = 41
"""... up to this many runs of each [-]."""
SEEDS_MAX = 1e6
"""Largest size of the ``seeds`` table (above, one study per size and objective takes seconds) [-]."""
TWO_UNIT = {"1e9": (100, 30, 111), "1e11": (300, 100, 111)}
"""Two-unit sizes: (motors, reducers, tyres); combinations (motors x reducers)^2 x tyres (1.0e9 and
1.0e11), with a tyre catalogue of the demo's size (a thousand tyre sizes would multiply the per
(option, tyre) tables by ten)."""


# ------------------------------------------------------------------------------------------ children

def _load():
    return os.getloadavg()[0]


def _same(a, b) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return tuple(a.key) == tuple(b.key) and abs(a.value - b.value) <= 1e-9 * max(abs(a.value), 1e-300)


def _traced(fn):
    """(result, peak traced memory [MiB]) of one call."""
    import tracemalloc

    tracemalloc.start()
    try:
        out = fn()
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    return out, peak / 2 ** 20


def _rss_mib() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _engine_vs_baseline(parts, objective, repeats, enum, baseline=True):
    """Interleaved engine and baseline runs, then one enumeration; medians and agreement."""
    sys.path.insert(0, HERE)
    from baseline import baseline_search

    from selector.engine.evaluate import enumerate_designs
    from selector.engine.search import search

    t_e, t_b = [], []
    res = base = None
    runs = 0
    # at least `repeats` interleaved runs; short searches (milliseconds) repeat until MIN_TOTAL_S of
    # measured time or MAX_RUNS, so that the median is not the noise of three runs
    while runs < repeats or (runs < MAX_RUNS and sum(t_e) + sum(t_b) < MIN_TOTAL_S):
        runs += 1
        t0 = time.perf_counter()
        res = search(parts, objective)
        t_e.append(time.perf_counter() - t0)
        if baseline:
            t0 = time.perf_counter()
            base = baseline_search(parts, objective)
            t_b.append(time.perf_counter() - t0)
    _, mem = _traced(lambda: search(parts, objective))
    eng_best = res.designs[0] if res.designs else None
    out = {"engine_s": statistics.median(t_e), "engine_all": t_e, "runs": runs, "status": res.status,
           "blocks": res.stats.get("blocks", 0), "milp": res.stats.get("milp", 0),
           "probe": res.stats.get("probe", 0), "mem_mib": mem,
           "value": None if eng_best is None else eng_best.value,
           "key": None if eng_best is None else list(eng_best.key)}
    same = True
    if baseline:
        out["baseline_s"] = statistics.median(t_b)
        same &= _same(eng_best, base)
    if enum:
        t0 = time.perf_counter()
        ref = enumerate_designs(parts, objective, count=1)
        out["enum_s"] = time.perf_counter() - t0
        same &= _same(eng_best, ref[0] if ref else None)
    out["same"] = bool(same)
    return out


def child_size(spec):
    sys.path.insert(0, HERE)
    from synthetic import synthetic_study

    from selector.engine.parts import PartTables

    problem, catalogs = synthetic_study(*spec["sizes"], seed=spec["seed"], objective=spec["objective"])
    parts = PartTables.build(problem, catalogs)
    out = _engine_vs_baseline(parts, spec["objective"], spec["repeats"], spec["enum"])
    out["combinations"] = parts.combinations
    return out


def child_many(spec):
    sys.path.insert(0, HERE)
    from synthetic import variant_study

    from selector.engine.parts import PartTables

    t0 = time.perf_counter()
    problem, catalogs = variant_study(spec["rows"], spec["reducers"], spec["tyres"], seed=spec["seed"],
                                      objective=spec["objective"])
    parts = PartTables.build(problem, catalogs)
    build = time.perf_counter() - t0
    out = _engine_vs_baseline(parts, spec["objective"], spec["repeats"], False, baseline=spec["baseline"])
    out.update(combinations=parts.combinations, tables_s=build)
    return out


def child_two(spec):
    import dataclasses

    import numpy as np

    sys.path.insert(0, HERE)
    from synthetic import synthetic_study

    from selector.engine.evaluate import screen, slice_keys, unit_options
    from selector.engine.parts import PartTables
    from selector.engine.search import search

    n_m, n_r, n_t = spec["sizes"]
    problem, catalogs = synthetic_study(n_m, n_r, n_t, seed=spec["seed"], objective=spec["objective"])
    problem = dataclasses.replace(problem, vehicle=dataclasses.replace(problem.vehicle, driven_axle="both"),
                                  requirements=dataclasses.replace(problem.requirements, budget=20000,
                                                                   max_mass_kg=2500))
    parts = PartTables.build(problem, catalogs)
    t0 = time.perf_counter()
    res = search(parts, spec["objective"], time_limit_s=spec["time_limit_s"])
    eng = time.perf_counter() - t0
    # memory from a second, traced run on freshly built part tables (no table the first run built
    # is reused; tracing slows the search, so it is not the timed one)
    _, mem = _traced(lambda: search(PartTables.build(problem, catalogs), spec["objective"],
                                    time_limit_s=spec["time_limit_s"]))
    search_rss = _rss_mib()  # before the enumeration sample, which holds designs of its own
    # enumeration rate: every rear option and tyre for a few front options, in chunks of rear options
    rear = unit_options(parts, "rear")
    t0 = time.perf_counter()
    done = 0
    rng = np.random.default_rng(0)
    for i in rng.choice(n_m, 2, replace=False):
        for j in range(min(n_r, 2)):
            for c in range(0, rear.shape[0], 2000):
                keys = slice_keys(parts, int(i), [j], None, axle="front", other=rear[c:c + 2000])
                screen(parts, keys, objective=spec["objective"])
                done += keys.shape[0]
    rate = (time.perf_counter() - t0) / done
    return {"combinations": parts.combinations, "engine_s": eng, "status": res.status, "mem_mib": mem,
            "blocks": res.stats.get("blocks", 0), "milp": res.stats.get("milp", 0), "gap": res.gap,
            "enum_est_s": rate * parts.combinations, "enum_sample": done, "search_rss_mib": search_rss}


ENERGY_TABLE = ('\n[energy]\ncycle = "wltc_class3b"\nrange_km = 200\nspecific_energy_wh_per_kg = 160\n'
                'cost_per_kwh = 150\n')
"""The [energy] table added to a demo problem for the energy case (illustrative values)."""


def _demo_parts(name, variant):
    import dataclasses
    import tempfile

    from selector.engine.parts import PartTables
    from selector.io.problem import load_study

    path = os.path.join(ROOT, "problems", name)
    if variant == "energy":  # the demo problem with an [energy] table, read the way a user's file is
        text = open(path, encoding="utf-8").read().replace('"../catalogs/', f'"{ROOT}/catalogs/')
        with tempfile.TemporaryDirectory() as tmp:
            tmp_path = os.path.join(tmp, name)
            with open(tmp_path, "w", encoding="utf-8") as fh:
                fh.write(text.replace("[objective]", ENERGY_TABLE + "\n[objective]"))
            problem, catalogs = load_study(tmp_path)
    else:
        problem, catalogs = load_study(path)
    if variant == "awd":
        problem = dataclasses.replace(problem, vehicle=dataclasses.replace(problem.vehicle, driven_axle="both"))
    return PartTables.build(problem, catalogs)


def _warm_up():
    """One untimed engine and baseline search on a tiny study: imports and first-call costs out of the timings."""
    sys.path.insert(0, HERE)
    from baseline import baseline_search
    from synthetic import synthetic_study

    from selector.engine.parts import PartTables
    from selector.engine.search import search

    for objective in OBJECTIVES:
        parts = PartTables.build(*synthetic_study(8, 8, 8, seed=0, objective=objective))
        search(parts, objective)
        baseline_search(parts, objective)


def child_demo(spec):
    from selector.engine.evaluate import enumerate_designs
    from selector.engine.search import search

    parts = _demo_parts(spec["problem"], spec["variant"])
    objective = parts.problem.objective
    if spec["variant"] in ("single", "energy"):
        out = {}
        if spec["variant"] == "single":
            out = _engine_vs_baseline(parts, objective, spec["repeats"], True)
        else:
            t_e = []
            for _ in range(spec["repeats"]):
                t0 = time.perf_counter()
                res = search(parts, objective)
                t_e.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            ref = enumerate_designs(parts, objective, count=1)
            out = {"engine_s": statistics.median(t_e), "enum_s": time.perf_counter() - t0, "status": res.status,
                   "blocks": res.stats.get("blocks", 0), "milp": 0,
                   "same": _same(res.designs[0] if res.designs else None, ref[0] if ref else None)}
            _, out["mem_mib"] = _traced(lambda: search(parts, objective))
    else:
        t0 = time.perf_counter()
        res, mem = _traced(lambda: search(parts, objective, time_limit_s=spec["time_limit_s"]))
        out = {"engine_s": time.perf_counter() - t0, "status": res.status, "mem_mib": mem,
               "blocks": res.stats.get("blocks", 0), "milp": res.stats.get("milp", 0)}
    out["combinations"] = parts.combinations
    out["objective"] = objective
    return out


def child_frontier(spec):
    import dataclasses
    import math

    sys.path.insert(0, HERE)
    from baseline import baseline_search
    from synthetic import synthetic_study

    from selector.api import Study
    from selector.engine.parts import PartTables
    from selector.studies.frontier import ANY_FINITE_TIME_S, LIMIT_SLACK, STRICTLY_FASTER, trace

    problem, catalogs = synthetic_study(*SIZES["1e6"], seed=spec["seed"], objective="cost")
    parts = PartTables.build(problem, catalogs)
    study = Study(parts, {})
    base_req = dataclasses.replace(problem.requirements, accel_time_s=None)

    def with_req(**kw):
        return parts.with_requirements(dataclasses.replace(base_req, **kw))

    def by_baseline():
        pts, t_cap, own = [], ANY_FINITE_TIME_S, problem.requirements.budget
        while True:
            cheap = baseline_search(with_req(accel_time_s=t_cap), "cost")
            if cheap is None:
                return pts
            limit = cheap.value * (1 + LIMIT_SLACK)
            if own is not None:
                limit = min(limit, own)
            fast = baseline_search(with_req(budget=limit), "accel_time")
            pts.append((cheap.value, fast.value))
            t_cap = fast.value * (1 - STRICTLY_FASTER)

    t_e, t_b = [], []
    for _ in range(spec["repeats"]):
        t0 = time.perf_counter()
        pts, _ = trace(study, "cost")
        t_e.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        ref = by_baseline()
        t_b.append(time.perf_counter() - t0)
    same = len(ref) == len(pts) and all(math.isclose(a, c, rel_tol=2e-9) and math.isclose(b, d, rel_tol=2e-9)
                                        for (a, b, *_), (c, d) in zip(pts, ref, strict=True))
    return {"engine_s": statistics.median(t_e), "baseline_s": statistics.median(t_b), "points": len(pts),
            "same": bool(same), "combinations": parts.combinations}


CHILDREN = {"size": child_size, "many": child_many, "two": child_two, "demo": child_demo, "frontier": child_frontier}


def _run(kind: str, spec: dict, timeout: float | None = None) -> dict:
    cmd = [sys.executable, os.path.abspath(__file__), "--child", kind, "--spec", json.dumps(spec)]
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    try:
        proc = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=timeout)
    except subprocess.TimeoutExpired:
        return {"error": f"no result within {timeout:.0f} s"}
    if proc.returncode != 0:
        return {"error": (proc.stderr.strip().splitlines() or ["failed"])[-1][:100]}
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    return out


# ------------------------------------------------------------------------------------------ tables

def _f(x, fmt="8.2f", none="-"):
    return f"{none:>{int(fmt.split('.')[0])}}" if x is None else format(x, fmt)


def table_sizes(args):
    print(f"\n## sizes (synthetic single-axle studies, seed {args.seed}; medians of at least {args.repeats} "
          f"runs (runs: how many; short searches repeat for {MIN_TOTAL_S:.0f} s, at most {MAX_RUNS}), engine and "
          f"baseline interleaved; load {_load():.1f})")
    head = (f"{'size':>5} {'objective':>10} {'engine s':>8} {'base s':>8} {'enum s':>9} {'eng/base':>8} "
            f"{'enum/eng':>8} {'eng MiB':>7} {'RSS MiB':>7} {'blocks':>6} {'milp':>4} {'runs':>4} same")
    print(head)
    print("-" * len(head))
    rate = {}
    for label, sizes in SIZES.items():
        if float(label) > args.max:
            break
        for objective in args.objectives:
            enum = float(label) <= args.enum_max
            r = _run("size", {"sizes": sizes, "objective": objective, "seed": args.seed, "repeats": args.repeats,
                              "enum": enum})
            if "error" in r:
                print(f"{label:>5} {objective:>10} error: {r['error']}")
                continue
            if enum:
                rate[objective] = r["enum_s"] / r["combinations"]
                enum_s = f"{r['enum_s']:9.2f}"
                enum_t = r["enum_s"]
            elif objective in rate:
                enum_t = rate[objective] * r["combinations"]
                enum_s = f"{'~' + format(enum_t, '.0f'):>9}"
            else:
                enum_t, enum_s = None, f"{'-':>9}"
            ratio = None if enum_t is None else enum_t / r["engine_s"]
            print(f"{label:>5} {objective:>10} {r['engine_s']:8.3f} {r['baseline_s']:8.3f} {enum_s} "
                  f"{r['engine_s'] / r['baseline_s']:8.2f} {_f(ratio, '8.1f')} {r['mem_mib']:7.0f} "
                  f"{r['rss_mib']:7.0f} {r['blocks']:6d} {r['milp']:4d} {r['runs']:4d} "
                  f"{'yes' if r['same'] else 'NO'}", flush=True)
    print("(~ = extrapolated from the largest enumerated size's time per combination; eng MiB = peak traced "
          "memory of one engine search; RSS = peak of the whole measuring process; blocks = motors "
          "evaluated exactly, 0 when the sum-order probe proved the optimum)")


def table_seeds(args):
    print(f"\n## seeds (the sizes table's studies up to {min(args.max, SEEDS_MAX):.0e} drawn with seeds "
          f"1..{args.seeds}: engine/baseline per seed, each a median as in the sizes table; load {_load():.1f})")
    head = f"{'size':>5} {'objective':>10} {'median':>7} {'best':>6} {'worst':>6} {'seeds > 1':>9} all same"
    print(head)
    print("-" * len(head))
    for label, sizes in SIZES.items():
        if float(label) > min(args.max, SEEDS_MAX):
            break
        for objective in args.objectives:
            ratios, same = [], True
            for seed in range(1, args.seeds + 1):
                r = _run("size", {"sizes": sizes, "objective": objective, "seed": seed, "repeats": args.repeats,
                                  "enum": False})
                if "error" in r:
                    print(f"{label:>5} {objective:>10} seed {seed} error: {r['error']}")
                    continue
                ratios.append(r["engine_s"] / r["baseline_s"])
                same &= r["same"]
            if ratios:
                print(f"{label:>5} {objective:>10} {statistics.median(ratios):7.2f} {min(ratios):6.2f} "
                      f"{max(ratios):6.2f} {sum(x > 1 for x in ratios):9d} {'yes' if same else 'NO'}", flush=True)


def table_frontier(args):
    print(f"\n## frontier at 1e6 (cost vs accel_time; load {_load():.1f})")
    r = _run("frontier", {"seed": args.seed, "repeats": 1})
    if "error" in r:
        print(f"error: {r['error']}")
        return
    print(f"engine (exact sweep) {r['engine_s']:.2f} s; epsilon-constraint on the baseline search "
          f"{r['baseline_s']:.2f} s; ratio {r['engine_s'] / r['baseline_s']:.2f}; {r['points']} points; "
          f"same frontier: {'yes' if r['same'] else 'NO'}")


def table_many(args):
    print(f"\n## many parts (near-variant motor rows with duplicates and dominated copies; load {_load():.1f})")
    head = (f"{'rows x reducers x tyres':>26} {'objective':>10} {'combos':>9} {'engine s':>8} {'base s':>8} "
            f"{'eng/base':>8} {'eng MiB':>7} {'RSS MiB':>7} {'blocks':>6} {'milp':>4} {'runs':>4} same")
    print(head)
    print("-" * len(head))
    cases = [(10_000, 100, 50)] + ([] if args.quick else [(100_000, 100, 50)])
    for rows, n_r, n_t in cases:
        for objective in args.objectives:
            # the baseline's accel_time search over 100,000 rows takes many minutes: engine only there
            spec = {"rows": rows, "reducers": n_r, "tyres": n_t, "objective": objective, "seed": args.seed,
                    "repeats": 1, "baseline": rows < 100_000 or objective != "accel_time"}
            r = _run("many", spec, timeout=1800)
            name = f"{rows:,} x {n_r} x {n_t}"
            if "error" in r:
                print(f"{name:>26} {objective:>10} error: {r['error']}")
                continue
            eb = r.get("baseline_s")
            print(f"{name:>26} {objective:>10} {r['combinations']:9.1e} {r['engine_s']:8.2f} {_f(eb)} "
                  f"{_f(None if eb is None else r['engine_s'] / eb)} {r['mem_mib']:7.0f} {r['rss_mib']:7.0f} "
                  f"{r['blocks']:6d} {r['milp']:4d} {r['runs']:4d} {'yes' if r['same'] else 'NO'}", flush=True)


def table_two(args):
    print(f"\n## two-unit synthetic studies (engine only; time limit {args.two_limit:.0f} s; load {_load():.1f})")
    head = (f"{'size':>5} {'objective':>10} {'combos':>9} {'engine s':>8} {'status':>10} {'enum est s':>11} "
            f"{'enum/eng':>8} {'eng MiB':>7} {'RSS MiB':>7} {'blocks':>7}")
    print(head)
    print("-" * len(head))
    for label, sizes in TWO_UNIT.items():
        if args.quick and label == "1e11":
            continue
        for objective in args.objectives:
            r = _run("two", {"sizes": sizes, "objective": objective, "seed": args.seed,
                             "time_limit_s": args.two_limit}, timeout=args.two_limit * 3 + 300)
            if "error" in r:
                print(f"{label:>5} {objective:>10} error: {r['error']}")
                continue
            print(f"{label:>5} {objective:>10} {r['combinations']:9.1e} {r['engine_s']:8.2f} {r['status']:>10} "
                  f"{'~' + format(r['enum_est_s'], '.0f'):>11} {r['enum_est_s'] / r['engine_s']:8.0f} "
                  f"{r['mem_mib']:7.0f} {r['search_rss_mib']:7.0f} {r['blocks']:7d}", flush=True)
    print("(engine s: an untraced search; eng MiB: peak traced memory of a second, traced search with part "
          "tables built anew inside it; enum est = "
          "time per combination of exhaustive screening over a sample of front options, times the "
          "combinations; RSS = peak of the measuring process after both searches, before that sample)")


def table_demo(args):
    print(f"\n## demo problems (problems/*.toml; load {_load():.1f})")
    head = (f"{'problem':>20} {'variant':>7} {'objective':>10} {'combos':>9} {'engine s':>8} {'base s':>8} "
            f"{'enum s':>8} {'eng/base':>8} {'enum/eng':>8} {'eng MiB':>7} {'status':>10} same")
    print(head)
    print("-" * len(head))
    names = sorted(f for f in os.listdir(os.path.join(ROOT, "problems")) if f.endswith(".toml"))
    cases = [(n, "single") for n in names] + [("parcel_van.toml", "energy")] + \
        [(n, "awd") for n in names[: (1 if args.quick else len(names))]]
    for name, variant in cases:
        r = _run("demo", {"problem": name, "variant": variant, "repeats": args.repeats,
                          "time_limit_s": args.two_limit}, timeout=args.two_limit * 2 + 600)
        if "error" in r:
            print(f"{name[:-5]:>20} {variant:>7} error: {r['error']}")
            continue
        eb = r.get("baseline_s")
        en = r.get("enum_s")
        print(f"{name[:-5]:>20} {variant:>7} {r['objective']:>10} {r['combinations']:9.1e} {r['engine_s']:8.3f} "
              f"{_f(eb, '8.3f')} {_f(en, '8.2f')} {_f(None if eb is None else r['engine_s'] / eb, '8.2f')} "
              f"{_f(None if en is None else en / r['engine_s'], '8.1f')} {r['mem_mib']:7.0f} {r['status']:>10} "
              f"{'yes' if r.get('same', True) else 'NO'}{'' if 'same' in r else ' (not compared)'}", flush=True)
    print("(awd = the same study with driven_axle = \"both\"; energy = parcel van with an [energy] table: WLTC "
          "class 3b, 200 km range, 160 Wh/kg, 150 per kWh)")


def table_startup(args):
    print(f"\n## start-up (medians of {max(args.repeats, 5)} fresh processes; load {_load():.1f})")
    script = os.path.join(os.path.dirname(sys.executable), "selector")
    cmd = [script] if os.path.exists(script) else [sys.executable, "-m", "selector"]
    problem = os.path.join(ROOT, "problems", "parcel_van.toml")
    cases = {"python -c pass": [sys.executable, "-c", "pass"],
             "import selector.cli": [sys.executable, "-c", "import selector.cli"],
             "selector --help": cmd + ["--help"],
             "selector solve parcel_van": cmd + ["solve", problem]}
    for name, argv in cases.items():
        ts = []
        for _ in range(max(args.repeats, 5)):
            t0 = time.perf_counter()
            subprocess.run(argv, capture_output=True, check=False)
            ts.append(time.perf_counter() - t0)
        print(f"{name:>28}: {statistics.median(ts):6.3f} s")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", default=",".join(TABLES), help=f"comma-separated subset of {', '.join(TABLES)}")
    ap.add_argument("--quick", action="store_true", help="sizes up to 1e6, 1 repeat, skip 1e11 and 100k rows")
    ap.add_argument("--max", type=float, default=1e8, help="largest synthetic size (1e4 .. 1e8)")
    ap.add_argument("--enum-max", type=float, default=1e7, help="enumerate up to this size, extrapolate above")
    ap.add_argument("--objective", action="append", choices=OBJECTIVES, help="objective(s) (default: all three)")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--two-limit", type=float, default=120.0, help="time limit of two-unit searches [s]")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--seeds", type=int, default=8, help="seeds of the seeds table (1..N)")
    ap.add_argument("--child")
    ap.add_argument("--spec")
    args = ap.parse_args(argv)
    if args.child:
        _warm_up()
        out = CHILDREN[args.child](json.loads(args.spec))
        out["rss_mib"] = _rss_mib()
        print(json.dumps(out))
        return 0
    if args.quick:
        args.max = min(args.max, 1e6)
        args.repeats = 1
    args.objectives = tuple(args.objective or OBJECTIVES)
    only = [t.strip() for t in args.only.split(",") if t.strip()]
    bad = [t for t in only if t not in TABLES]
    if bad:
        ap.error(f"--only: unknown table(s) {', '.join(bad)}; choose from {', '.join(TABLES)}")
    import platform

    print(f"# bench_engine: {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; "
          f"{platform.processor() or platform.machine()}, {os.cpu_count()} cores; Python {platform.python_version()}; "
          f"load average {os.getloadavg()}")
    for t in only:
        globals()[f"table_{t}"](args)
    print(f"\n# done; load average {os.getloadavg()}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
