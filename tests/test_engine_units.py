"""Unit tests of the engine's parts on their own: the MILP relaxation (model.py), the certified bounds
(bounds.py) and the time-limit status of the search, on random catalogues.

Oracle: exhaustive enumeration with the exact evaluator (`evaluate.evaluate` + `evaluate.feasible`)
on seeded random studies from `tests/generators.py` (invented data, written to CSV/TOML and loaded
with the public loaders), and HiGHS (through Pyomo) for the model's feasibility.

(a) Every design that enumeration finds feasible, with the binaries of the MILP fixed to it, satisfies
    every row of every constraint family (each family's rows evaluated at the design's point), and
    the model with those binaries fixed is feasible for HiGHS (all families together).
(b) The optimistic (certified) acceleration time of a motor over an L hull never exceeds the exact
    time of any design of that motor with its gears in that hull.
(c) With the time limit reached after the first block, the search reports `time_limit` with an
    incumbent, a bound below it (and below the true optimum) and the gap (best - bound) / best.
"""

from __future__ import annotations

import math

import numpy as np
import pyomo.environ as pyo
import pytest
from generators import random_study

from selector.engine import bounds as B
from selector.engine import evaluate
from selector.engine import search as engine
from selector.engine.best_first import SingleAxleSearch
from selector.engine.model import AccelWindows, SelectionModel
from selector.engine.parts import TY
from selector.engine.verify import verify_designs
from selector.units import kmh_to_mps

ROW_TOL = 1e-9
"""A row holds at a design point when it is violated by at most this (model units: t, k-currency, logs) [-]."""


def all_designs(parts):
    n_m, n_r, n_t = parts.sizes
    mi, rj, tk = np.meshgrid(np.arange(n_m), np.arange(n_r), np.arange(n_t), indexing="ij")
    return parts.single_keys(mi.ravel(), rj.ravel(), tk.ravel())


def driven(parts, keys):
    """(motor, reducer) columns of the driven axle."""
    from selector.engine.parts import AXLE_COLUMNS

    m_col, r_col = AXLE_COLUMNS[parts.axles[-1]]
    return keys[:, m_col], keys[:, r_col]


# ------------------------------------------------------------------------------------------ (a) the model

def fix_design(model: SelectionModel, i: int, j: int, k: int, l_first: float, l_tall: float):
    """Fix the binaries to design (i, j, k) and set the per-motor gearing copies to their values there."""
    u, m = model.unit, model.m
    for a in u.I:
        u.x[a].fix(1 if a == i else 0)
        u.Lm[a].set_value(l_first if a == i else 0.0, skip_validation=True)
        u.Ltm[a].set_value(l_tall if a == i else 0.0, skip_validation=True)
    for b in u.J:
        u.y[b].fix(1 if b == j else 0)
    for c in m.K:
        m.z[c].fix(1 if c == k else 0)


def violated_rows(model: SelectionModel) -> list[str]:
    """Names of the active rows violated at the current point (every family: the row's name says which)."""
    bad = []
    for con in model.m.component_data_objects(pyo.Constraint, active=True):
        body = pyo.value(con.body)
        lo = None if con.lower is None else pyo.value(con.lower)
        hi = None if con.upper is None else pyo.value(con.upper)
        if (lo is not None and body < lo - ROW_TOL) or (hi is not None and body > hi + ROW_TOL):
            bad.append(f"{con.name}: {lo} <= {body} <= {hi}")
    return bad


def model_for(parts, objective):
    """The MILP as the search builds it: every motor's first-gear L window and optimistic time."""
    req = parts.problem.requirements
    sa = SingleAxleSearch(parts, objective, req, {}, 10 ** 6, None, None, {})  # count: no equivalence pruning
    n = parts.sizes[0]
    lo, hi, tmin = np.full(n, np.inf), np.full(n, -np.inf), np.full(n, np.inf)
    pos = np.arange(sa.motors.size)
    h_lo, h_hi = sa.hull(pos)
    lo[sa.motors], hi[sa.motors] = h_lo - 1e-9, h_hi + 1e-9
    if sa.accel:
        ok = h_lo <= h_hi
        tmin[sa.motors[ok]] = sa.time_bound(pos[ok], h_lo[ok], h_hi[ok])
    model = SelectionModel(parts, objective, windows=AccelWindows(lo=lo, hi=hi, t_min_s=tmin),
                           accel_target_kmh=req.accel_to_kmh if sa.accel else None, accel_limit_s=req.accel_time_s)
    return model, sa


@pytest.mark.parametrize("seed", range(5000, 5016))
def test_model_admits_every_feasible_design(seed, tmp_path):
    st = random_study(seed, tmp_path, gearbox_share=0.3 if seed % 2 else 0.0)
    parts, objective = st.parts, st.objective
    keys = all_designs(parts)
    metrics = evaluate.evaluate(parts, keys)
    ok = evaluate.feasible(parts, metrics, objective)
    if not ok.any():
        return  # nothing to admit; the generator gives feasible studies in most seeds (checked below)
    model, sa = model_for(parts, objective)
    assert model.infeasible_reason is None, model.infeasible_reason
    mi, rj = driven(parts, keys)
    tk = keys[:, TY]
    re, ty = parts.reducers, parts.tyres
    feasible_rows = np.nonzero(ok)[0]
    best = feasible_rows[np.argmin(np.asarray(metrics[evaluate.OBJECTIVE_METRIC[objective]])[feasible_rows])]
    for n in feasible_rows:
        i, j, k = int(mi[n]), int(rj[n]), int(tk[n])
        assert i in set(sa.motors.tolist()), f"seed {seed}: motor {i} of feasible design {(i, j, k)} pruned"
        l_first = math.log(re.ratio[j]) - math.log(ty.radius_m[k])
        l_tall = math.log(re.tallest_ratio[j]) - math.log(ty.radius_m[k])
        fix_design(model, i, j, k, l_first, l_tall)
        if n == best:  # the objective cutoff at the optimum keeps the optimum
            value = float(metrics[evaluate.OBJECTIVE_METRIC[objective]][n])
            model.set_cutoff(value * model.objective_scale())
        bad = violated_rows(model)
        model.m.cutoff.deactivate()
        assert not bad, f"seed {seed} ({objective}): feasible design {(i, j, k)} violates {bad}"
    # all families together: HiGHS finds the model feasible with the binaries fixed (best design and a few others)
    from pyomo.contrib.solver.common.results import TerminationCondition as TC

    from selector.engine.search import solver

    opt = solver()
    for n in [best] + list(feasible_rows[:: max(1, feasible_rows.size // 3)][:3]):
        i, j, k = int(mi[n]), int(rj[n]), int(tk[n])
        fix_design(model, i, j, k, 0.0, 0.0)
        res = opt.solve(model.m, load_solutions=False, raise_exception_on_nonoptimal_result=False)
        assert res.termination_condition == TC.convergenceCriteriaSatisfied, (seed, (i, j, k),
                                                                              res.termination_condition)


def test_model_test_sees_feasible_studies(tmp_path):
    # the model test above must not pass vacuously: most of its seeds have feasible designs
    n_feasible = 0
    for seed in range(5000, 5016):
        st = random_study(seed, tmp_path / str(seed), gearbox_share=0.3 if seed % 2 else 0.0)
        keys = all_designs(st.parts)
        n_feasible += bool(evaluate.feasible(st.parts, evaluate.evaluate(st.parts, keys), st.objective).any())
    assert n_feasible >= 8, n_feasible


def test_violated_rows_detects_an_excluded_design(tmp_path):
    # the row check can fail: a design outside its motor's L window violates the window rows
    st = random_study(5001, tmp_path, objective="cost")
    parts = st.parts
    model, sa = model_for(parts, "cost")
    i = int(sa.motors[0])
    model.set_windows(AccelWindows(lo=np.full(parts.sizes[0], 5.0), hi=np.full(parts.sizes[0], 5.5),
                                   t_min_s=np.zeros(parts.sizes[0])))
    fix_design(model, i, 0, 0, 1.0, 1.0)  # L = 1 is outside [5, 5.5]
    assert any("Lm_lo" in b for b in violated_rows(model))



def test_model_build_stops_at_its_deadline(tmp_path):
    # the build checks the deadline before each family: a passed deadline leaves the model incomplete
    # (flagged, no objective); a distant one builds the same families as no deadline
    import time

    st = random_study(5001, tmp_path, objective="cost")
    full = SelectionModel(st.parts, "cost")
    late = SelectionModel(st.parts, "cost", deadline=time.perf_counter() - 1.0)
    assert late.expired and late.families == [] and not hasattr(late.m, "obj")
    later = SelectionModel(st.parts, "cost", deadline=time.perf_counter() + 3600.0)
    assert not later.expired and later.families == full.families and "tyre_load" in full.families


# ------------------------------------------------------------------------------------------ (b) time bounds

@pytest.mark.parametrize("seed", range(5100, 5112))
def test_optimistic_time_never_exceeds_exact_time(seed, tmp_path):
    st = random_study(seed, tmp_path, objective="accel_time", gearbox_share=0.4 if seed % 2 else 0.0)
    parts = st.parts
    target = kmh_to_mps(parts.problem.requirements.accel_to_kmh)
    keys = all_designs(parts)
    metrics = evaluate.evaluate(parts, keys)
    res = evaluate.check_results(parts, metrics)
    mech = res["reducer_torque_nm"] & res["reducer_speed_rpm"] & res["tyre_load_kg"]  # designs that can be feasible
    t = np.asarray(metrics["accel_time_s"])
    mi, rj = driven(parts, keys)
    tk = keys[:, TY]
    re, ty = parts.reducers, parts.tyres
    l_first = np.log(re.ratio[rj]) - np.log(ty.radius_m[tk])
    l_tall = np.log(re.tallest_ratio[rj]) - np.log(ty.radius_m[tk])
    use = B.usable(parts)
    rows = np.nonzero(mech & np.isfinite(t))[0]
    assert rows.size, f"seed {seed}: no design reaches the target"
    # per design: its own L hull; the motor's usable extremes
    own = B.motor_time_bound_s(parts, use, mi[rows], l_tall[rows], l_first[rows], target)
    # per design with the design's own mass, best efficiency and rolling resistance (the tightest form)
    eta_best = np.nanmax(re.efficiencies[rj[rows]], axis=1)
    tight = B.motor_time_bound_s(parts, use, mi[rows], l_tall[rows], l_first[rows], target,
                                 mass_min_kg=np.asarray(metrics["mass_kg"])[rows], eta_max=eta_best,
                                 crr_min=ty.crr[tk[rows]])
    # per motor over the hull of all its designs' gears (what the search uses before refining)
    hull_lo = {i: l_tall[rows][mi[rows] == i].min() for i in np.unique(mi[rows])}
    hull_hi = {i: l_first[rows][mi[rows] == i].max() for i in np.unique(mi[rows])}
    motor = B.motor_time_bound_s(parts, use, mi[rows], np.array([hull_lo[i] for i in mi[rows]]),
                                 np.array([hull_hi[i] for i in mi[rows]]), target)
    exact = t[rows]
    for name, bound in (("own hull", own), ("own hull, own mass", tight), ("motor hull", motor)):
        over = bound > exact * (1 + 1e-12)
        assert not over.any(), (f"seed {seed}: {name} bound above the exact time for designs "
                                f"{keys[rows][over][:3].tolist()}: {bound[over][:3]} > {exact[over][:3]}")
    assert np.all(tight >= own * (1 - 1e-12))  # the tighter inputs give a tighter bound
    # single-speed designs: the proved bracket holds the exact time
    from selector.physics import accel_run

    single = re.n_gears[rj[rows]] == 1
    axles, body = parts.design(keys[rows][single])
    lo, hi = accel_run.time_bracket(axles, body, target)
    assert np.all(lo <= exact[single] * (1 + 1e-12)) and np.all(exact[single] <= hi * (1 + 1e-12))


def test_optimistic_time_is_tight_enough_to_matter(tmp_path):
    # the bound test above is not vacuous: the tightest bound is within 40 % of the exact time on average
    st = random_study(5100, tmp_path, objective="accel_time")
    parts = st.parts
    target = kmh_to_mps(parts.problem.requirements.accel_to_kmh)
    keys = all_designs(parts)
    metrics = evaluate.evaluate(parts, keys)
    t = np.asarray(metrics["accel_time_s"])
    rows = np.nonzero(np.isfinite(t))[0]
    mi, rj = driven(parts, keys)
    tk = keys[:, TY]
    lf = np.log(parts.reducers.ratio[rj[rows]]) - np.log(parts.tyres.radius_m[tk[rows]])
    b = B.motor_time_bound_s(parts, B.usable(parts), mi[rows], lf, lf, target,
                             mass_min_kg=np.asarray(metrics["mass_kg"])[rows],
                             eta_max=parts.reducers.efficiency[rj[rows]], crr_min=parts.tyres.crr[tk[rows]])
    ratio = b[np.isfinite(b)] / t[rows][np.isfinite(b)]
    assert ratio.size and np.median(ratio) > 0.6, np.median(ratio)


# ------------------------------------------------------------------------------------------ (c) time limit

def test_time_limit_returns_incumbent_bound_and_gap(tmp_path, monkeypatch):
    # deterministic: the deadline expires right after the first block is evaluated (no timing involved)
    original = SingleAxleSearch.evaluate_motor

    def one_block(self, pos, cell_lb=None):
        original(self, pos, cell_lb)
        self.deadline = -math.inf

    monkeypatch.setattr(SingleAxleSearch, "evaluate_motor", one_block)
    seen = 0
    for seed in range(5200, 5230):
        st = random_study(seed, tmp_path / str(seed), sizes=(8, 6, 6), requirement_share=0.2)
        parts = st.parts
        enum = evaluate.enumerate_designs(parts, st.objective, count=1)
        res = engine.search(parts, time_limit_s=3600.0)
        if res.status != engine.STATUS_TIME_LIMIT or not res.designs:
            continue
        seen += 1
        best = res.designs[0].value
        assert res.bound is not None and res.bound <= best * (1 + 1e-12), (seed, res.bound, best)
        assert enum, seed  # an incumbent exists, so the study is feasible
        assert res.bound <= enum[0][0] * (1 + 1e-9), (seed, res.bound, enum[0][0])  # a proved lower bound
        assert res.gap == pytest.approx(abs(best - res.bound) / best, rel=1e-12)
        assert res.gap >= 0.0
        verify_designs(parts, res.designs, res.objective)  # the incumbent is a feasible, re-checked design
    assert seen >= 3, f"only {seen} studies stopped at the time limit with an incumbent"
