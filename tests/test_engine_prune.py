"""The single-axle search's prunes on their own: each is a proved inequality, checked on random studies.

Oracle: exhaustive enumeration with the exact evaluator (`evaluate.evaluate`, `evaluate.enumerate_designs`)
on seeded random studies from `tests/generators.py` (invented data, written to files and loaded
with the public loaders).

- The per-design certified time bound (`SingleAxleSearch._design_time_bounds`: the design's own gear
  hull, mass, static driven-axle share, efficiency and rolling resistance) never exceeds the exact
  0-to-target time of that design.
- The closed-form time bound (`bounds.closed_form_time_s`) equals the integral of dv / a_up that
  scipy's solve_ivp computes, and with a motor's gear limit (`SingleAxleSearch.closed_form_time`) never
  exceeds the exact time of a feasible design with that motor.
- The per-cell time bounds (`SingleAxleSearch.refine`, from the (rating class, L cell) table) never
  exceed the exact time of a feasible single-speed design whose first-gear L lies in the cell.
- Equivalent motor rows (exact copies under other part ids, some dearer) are skipped by the
  sum-order probe and grouped by `bounds.equivalent_motors` without changing the ``count`` best
  designs (values and part-id tie order) that enumeration finds.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from generators import random_study

from selector.engine import bounds as B
from selector.engine import evaluate
from selector.engine import search as engine
from selector.engine.best_first import SingleAxleSearch
from selector.engine.parts import TY, PartTables


def _driven(parts, keys):
    col = 0 if parts.axles[-1] == "front" else 2
    return keys[:, col], keys[:, col + 1]


@pytest.mark.parametrize("seed", range(7100, 7108))
def test_design_time_bound_never_exceeds_exact_time(seed, tmp_path):
    st = random_study(seed, tmp_path, objective="accel_time", gearbox_share=0.4 if seed % 2 else 0.0)
    parts = st.parts
    n_m, n_r, n_t = parts.sizes
    mi, rj, tk = (a.ravel() for a in np.meshgrid(np.arange(n_m), np.arange(n_r), np.arange(n_t), indexing="ij"))
    keys = parts.single_keys(mi, rj, tk)
    metrics = evaluate.evaluate(parts, keys)
    t = np.asarray(metrics["accel_time_s"])
    rows = np.nonzero(np.isfinite(t))[0]
    assert rows.size, f"seed {seed}: no design reaches the target"
    s = SingleAxleSearch(parts, "accel_time", parts.problem.requirements, {}, 1, None, None, {})
    # pair positions of the designs' (reducer, tyre) in the search's pair table
    pair_of = {(int(j), int(k)): n for n, (j, k) in enumerate(zip(s.pairs.j, s.pairs.k, strict=True))}
    m_r, r_r = _driven(parts, keys[rows])
    ok = np.array([(int(j), int(k)) in pair_of for j, k in zip(r_r, keys[rows, TY], strict=True)])
    rows, m_r, r_r = rows[ok], m_r[ok], r_r[ok]
    pairs = np.array([pair_of[(int(j), int(k))] for j, k in zip(r_r, keys[rows, TY], strict=True)], dtype=np.int64)
    # the designs a block holds: reducer rated for the motor (the search's candidates never hold others)
    rated = s.use.compatible[m_r, r_r]
    rows, m_r, pairs = rows[rated], m_r[rated], pairs[rated]
    assert rows.size
    bound = s._design_time_bounds(m_r, pairs)
    over = bound > t[rows] * (1 + 1e-12)
    assert not over.any(), (seed, keys[rows][over][:3].tolist(), bound[over][:3], t[rows][over][:3])
    # tighter than (or equal to) the bound with the motor's usable extremes, and not vacuous
    loose = B.motor_time_bound_s(parts, s.use, m_r, s.pairs.l_tall[pairs], s.pairs.l_first[pairs], s.target)
    assert np.all(bound >= loose * (1 - 1e-12))
    assert np.median(bound / t[rows]) > 0.5


@pytest.mark.parametrize(("force_n", "a_cap", "power_w", "mass_kg", "v_mps"), [
    (6000.0, 20.0, 150e3, 1500.0, 27.78),  # force-limited start, then constant power
    (6000.0, 3.0, 150e3, 1500.0, 27.78),  # traction cap below F / m
    (60000.0, 50.0, 40e3, 1200.0, 20.0),  # power-limited almost from the start
    (3000.0, 9.0, 400e3, 1500.0, 15.0),  # the target is reached before the power limit binds
])
def test_closed_form_time_matches_ode(force_n, a_cap, power_w, mass_kg, v_mps):
    from scipy.integrate import solve_ivp

    def a_up(v):
        return min(force_n / mass_kg, a_cap, power_w / (mass_kg * v) if v > 0 else np.inf)

    # dt/dv = 1 / a_up(v), t(0) = 0, integrated to the target speed  # scipy solve_ivp
    sol = solve_ivp(lambda v, t: [1.0 / a_up(v)], (0.0, v_mps), [0.0], rtol=1e-10, atol=1e-12, max_step=v_mps / 2000)
    t = float(B.closed_form_time_s(force_n, a_cap, power_w, mass_kg, v_mps))
    assert t == pytest.approx(float(sol.y[0, -1]), rel=1e-6)
    assert np.isinf(B.closed_form_time_s(force_n, -1.0, power_w, mass_kg, v_mps))  # no traction: never reached


def _feasible_designs(seed, tmp_path):
    """(study parts, search, key rows, exact times) of the feasible designs of a random accel_time study
    whose motor the search keeps and whose reducer is rated for it (the designs a block can hold)."""
    st = random_study(seed, tmp_path, objective="accel_time", gearbox_share=0.4 if seed % 2 else 0.0)
    req = replace(st.parts.problem.requirements, accel_time_s=None)  # more feasible designs to check
    parts = st.parts.with_requirements(req)
    n_m, n_r, n_t = parts.sizes
    mi, rj, tk = (a.ravel() for a in np.meshgrid(np.arange(n_m), np.arange(n_r), np.arange(n_t), indexing="ij"))
    keys = parts.single_keys(mi, rj, tk)
    metrics = evaluate.evaluate(parts, keys)
    ok = evaluate.feasible(parts, metrics, "accel_time")
    s = SingleAxleSearch(parts, "accel_time", req, {}, 1, None, None, {})
    m_r, r_r = _driven(parts, keys)
    ok &= np.isin(m_r, s.motors) & s.use.compatible[m_r, r_r]
    return parts, s, keys[ok], np.asarray(metrics["accel_time_s"])[ok]


@pytest.mark.parametrize("seed", [7302, 7306, 7307, 7316, 7322, 7323])  # seeds with 10+ feasible designs
def test_closed_form_and_cell_bounds_never_exceed_exact_time(seed, tmp_path):
    parts, s, keys, t = _feasible_designs(seed, tmp_path)
    assert keys.shape[0] >= 10, f"seed {seed}: too few feasible designs to check"
    m_r, r_r = _driven(parts, keys)
    t_cf = s.closed_form_time(m_r)
    assert np.all(t_cf <= t * (1 + 1e-12)), (seed, keys[t_cf > t][:3].tolist())
    assert np.median(t_cf / t) > 0.3  # not vacuous
    # cell bounds: the design's motor position and the cell holding its first-gear L (single-speed pairs)
    single = parts.reducers.n_gears[r_r] == 1
    pos = np.searchsorted(s.motors, m_r[single])
    l1 = np.log(parts.reducers.ratios[r_r[single], 0]) - np.log(parts.tyres.radius_m[keys[single, TY]])
    edges = s.cell_edges()
    cell = np.clip(np.searchsorted(edges, l1, side="right") - 1, 0, edges.size - 2)
    t_cell, _ = s.refine(np.arange(s.motors.size))
    bound = t_cell[pos, cell]
    assert np.all(bound <= t[single] * (1 + 1e-12)), (seed, keys[single][bound > t[single]][:3].tolist())


def _with_copies(parts: PartTables, seed: int) -> PartTables:
    """The study's tables with exact copies of some motor rows (new part ids; half of them dearer)."""
    rng = np.random.default_rng(seed)
    mo = parts.motors
    n = mo.part.size
    src = rng.integers(0, n, 2 * n)
    cols = {f: np.asarray(getattr(mo, f))[src] for f in ("torque_nm", "power_w", "cont_torque_nm", "cont_power_w",
                                                          "decline_rad_s", "decline_exponent", "max_speed_rad_s",
                                                          "rotor_inertia_kgm2", "mass_kg", "cost", "lead_time_weeks",
                                                          "loss_copper", "loss_iron", "loss_windage",
                                                          "loss_constant", "map_index")}
    cols["cost"] = cols["cost"] * np.where(rng.random(src.size) < 0.5, 1.0, 1.1)
    cols["part"] = np.array([f"ZZ-COPY-{k:04d}" for k in range(src.size)])
    cols["supplier"] = mo.supplier[src]
    merged = {f: np.concatenate([np.asarray(getattr(mo, f)), cols[f]]) for f in cols}
    order = np.argsort(merged["part"], kind="stable")  # keep the tables in part-id order

    motors = replace(mo, **{f: merged[f][order] for f in merged})
    return replace(parts, motors=motors, cache={})


@pytest.mark.parametrize("seed", range(7200, 7212))
def test_equivalent_copies_change_no_result(seed, tmp_path):
    st = random_study(seed, tmp_path, sizes=(6, 5, 5), objective=("cost", "mass")[seed % 2])
    parts = _with_copies(st.parts, seed)
    for count in (1, 3):
        enum = evaluate.enumerate_designs(parts, st.objective, count=count)
        res = engine.search(parts, st.objective, count=count)
        got = [(d.value, tuple(d.key)) for d in res.designs]
        want = [(d.value, tuple(d.key)) for d in enum]
        assert len(got) == len(want), (seed, count, got, want)
        for (gv, gk), (wv, wk) in zip(got, want, strict=True):
            assert gv == pytest.approx(wv, rel=1e-9) and gk == wk, (seed, count, got, want)
    grouped = B.equivalent_motors(parts, np.arange(parts.sizes[0]), 1, True)
    assert grouped.size < parts.sizes[0]  # the copies are grouped (NaN loss columns compare equal)



@pytest.mark.parametrize("seed", (7101, 7103, 7105))
def test_least_gear_time_bound_equals_the_least_fine_bound(seed, tmp_path):
    # the coarse-first shortcut of `refine` returns exactly min(cap, least fine bound) per motor
    st = random_study(seed, tmp_path, objective="accel_time", gearbox_share=0.4)
    s = SingleAxleSearch(st.parts, "accel_time", st.parts.problem.requirements, {}, 1, None, None, {})
    g = s.pairs.gear_l[s.pairs.multi_pairs]
    assert g.shape[0] > 0
    rng = np.random.default_rng(seed)
    n_m = s.motors.size
    row = np.repeat(np.arange(n_m), g.shape[0])
    gears = np.tile(g, (n_m, 1))
    fine = s.gear_time_bound(row, gears)
    least = np.full(n_m, np.inf)
    np.minimum.at(least, row, fine)
    assert np.isfinite(least).any()
    for cap in (np.full(n_m, np.inf), least * rng.uniform(0.9, 1.1, n_m)):
        got = s.least_gear_time_bound(row, row, gears, cap)
        np.testing.assert_array_equal(got, np.minimum(cap, least))
