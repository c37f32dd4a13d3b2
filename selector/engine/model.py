"""The selection MILP in Pyomo, built from catalogue tables.

One-hot binaries pick a motor x_i, a reducer variant y_j and a tyre z_k. Requirements become
linear rows in log space (L = ln(G/r), E = ln(eta)), each a *relaxation* of the exact physics:
exact where the physics is linear or log-linear, linear under-estimators of the concave logs of
mass and road load, tangents (under-estimators) of the convex log-sum-exp of translational and
rotor inertia, and dropped terms only where they are demands. The engine (`engine.py`) verifies
every candidate by the exact physics, so the model never needs to be exact, only valid: it must
never cut off a design that meets every requirement.

Scaling: masses in tonnes, money in thousands, logs of SI values.

A drive unit (motor + reducer selection with its log-gearing copies) is a Pyomo Block, so that
a second axle or a multi-speed reducer can be composed later; today the model has one unit.

Every constraint family is one function registered in `FAMILIES` with its name, unit, the
problem key that sets it and its formula; `explain` and DEVELOPERS.md read that registry. The build
runs in steps (part choice, log gearing, mass and cost, each family, objective); with a ``deadline``
the time is checked before each family, so a search's time limit also bounds the build.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from typing import Callable

import numpy as np
import pyomo.environ as pyo

from selector.engine.parts import PartTables
from selector.requirements import REL_TOL
from selector.units import G_N, kmh_to_mps

SLACK_LOG = 1e-7
"""Slack added to every log-space row [-] (floating-point safety; keeps the model a relaxation)."""
SLACK_T = 1e-6
"""Slack added to every row in tonnes or thousands [-] (limits also get 2 REL_TOL relative)."""
LSE_TANGENTS = (-9.0, -7.0, -6.0, -5.0, -4.5, -4.0, -3.5, -3.0, -2.5, -2.0, -1.5, -1.0, 0.0, 1.0)
"""Points d = Y - X where the log-sum-exp ln(e^X + e^Y) is under-estimated by tangents [-]."""


@dataclass(frozen=True)
class AccelWindows:
    """Per motor: admissible window [lo, hi] of the first gear's L = ln(G_1/r) (lo > hi: the motor is
    ruled out) and a proved lower bound of its acceleration time [s] (the accel_time objective)."""

    lo: np.ndarray
    hi: np.ndarray
    t_min_s: np.ndarray


def log_gearing_range(parts: PartTables) -> tuple[float, float]:
    """Smallest and largest L = ln(G/r) of any gear over the catalogue [ln(1/m)]."""
    lg = np.log(parts.reducers.ratios)
    lr = np.log(parts.tyres.radius_m)
    return float(np.nanmin(lg) - lr.max()), float(np.nanmax(lg) - lr.min())


@dataclass(frozen=True)
class Family:
    """A registered constraint family."""

    name: str
    key: str | None
    """Problem-file key that switches the family on (None: always on)."""
    unit: str
    formula: str
    build: Callable


FAMILIES: dict[str, Family] = {}


def family(name: str, key: str | None, unit: str, formula: str):
    """Register a constraint-family builder under ``name``."""

    def deco(fn):
        FAMILIES[name] = Family(name, key, unit, formula, fn)
        return fn

    return deco


# ----------------------------------------------------------------------------- helpers

def _sum(coefs, var, idx=None):
    """Linear expression sum_i coefs[i] var[i] skipping zero coefficients."""
    idx = range(len(coefs)) if idx is None else idx
    return pyo.quicksum(float(coefs[i]) * var[i] for i in idx if coefs[i] != 0.0)


def _softplus(d):
    return np.log1p(np.exp(d)) if d < 30 else d


def _sigmoid(d):
    return 1.0 / (1.0 + np.exp(-d))


# ----------------------------------------------------------------------------- model

COEFFICIENT_LIMIT = 1e9
"""Largest magnitude of a model coefficient in model units (t, k-currency, logs); HiGHS treats
|values| >= 1e20 as infinite and warns on badly scaled rows far earlier [-]."""


def check_coefficients(parts: PartTables) -> None:
    """Every catalogue and vehicle value the model's rows read is finite, positive where a log is
    taken, and within `COEFFICIENT_LIMIT` in model units; otherwise an internal error is raised (the
    input validation should have rejected the value), never a silently dropped row."""
    from selector.errors import SelectorError

    mo, re, ty = parts.motors, parts.reducers, parts.tyres
    logs = {"motor torque": mo.torque_nm, "motor power": mo.power_w, "continuous torque": mo.cont_torque_nm,
            "continuous power": mo.cont_power_w, "decline speed": mo.decline_rad_s, "maximum speed":
            mo.max_speed_rad_s, "rotor inertia": mo.rotor_inertia_kgm2, "gear ratio": re.ratio, "tallest ratio":
            re.tallest_ratio, "efficiency": re.efficiency, "rolling radius": ty.radius_m}
    linear = {"motor mass [t]": mo.mass_kg / 1e3, "motor cost [k]": mo.cost / 1e3, "reducer mass [t]":
              re.mass_kg / 1e3, "reducer cost [k]": re.cost / 1e3, "tyre mass [t]": ty.mass_kg / 1e3,
              "tyre cost [k]": ty.cost / 1e3, "load capacity [t]": ty.load_capacity_kg / 1e3,
              "decline exponent": mo.decline_exponent, "rolling resistance": ty.crr}
    for name, a in logs.items():
        a = np.asarray(a, dtype=float)
        if a.size and not (np.all(np.isfinite(a)) and np.all(a > 0)
                           and np.all(np.abs(np.log(a)) < COEFFICIENT_LIMIT)):
            raise SelectorError(f"internal error: a {name} value is not a finite positive number the model can use; "
                                "the input checks should have refused it. Please report this with the input files.")
    for name, a in linear.items():
        a = np.asarray(a, dtype=float)
        if a.size and not (np.all(np.isfinite(a)) and np.all(np.abs(a) < COEFFICIENT_LIMIT)):
            raise SelectorError(f"internal error: a {name} value is out of the solver's range (|value| >= "
                                f"{COEFFICIENT_LIMIT:g} in model units); the input checks should have refused it. "
                                "Please report this with the input files.")


class SelectionModel:
    """Pyomo model of one study, with handles the engine needs.

    Attributes: ``m`` (the ConcreteModel), ``unit`` (the drive-unit block), ``parts``,
    ``infeasible_reason`` (str when a requirement can be ruled out before solving, e.g. a top
    speed above the speed limiter), ``families`` (names of the families built), ``expired`` (the
    ``deadline``, a `time.perf_counter` instant [s], passed between two family builds: the model is
    incomplete and must not be solved; the caller returns the "time_limit" status with its incumbent).
    """

    def __init__(self, parts: PartTables, objective: str, windows: AccelWindows | None = None,
                 accel_target_kmh: float | None = None, accel_limit_s: float | None = None,
                 allowed=None, deadline: float | None = None):
        self.parts = parts
        self.objective_name = objective
        self.req = parts.problem.requirements
        self.accel_target_kmh = accel_target_kmh
        self.accel_limit_s = accel_limit_s
        self.windows = windows
        self.infeasible_reason: str | None = None
        self.families: list[str] = []
        self.allowed = allowed
        self.deadline = deadline
        self.expired = False
        self._build()

    # -- structure ----------------------------------------------------------
    def _build(self):
        check_coefficients(self.parts)
        self.m = pyo.ConcreteModel(name="selector")
        self._build_choice()
        self._build_gearing()
        self._build_mass()
        for fam in FAMILIES.values():
            if self.deadline is not None and time.perf_counter() > self.deadline:
                self.expired = True
                return
            if fam.key is None or self._stated(fam.key):
                fam.build(self)
                self.families.append(fam.name)
        self._build_objective()

    def _build_choice(self):
        """One-hot binaries: a tyre z_k on the model, a motor x_i and a reducer y_j on the drive-unit block;
        parts outside ``allowed`` are fixed to 0."""
        n_m, n_r, n_t = self.parts.sizes
        m = self.m
        m.K = pyo.RangeSet(0, n_t - 1)
        m.z = pyo.Var(m.K, domain=pyo.Binary)
        m.one_tyre = pyo.Constraint(expr=pyo.quicksum(m.z[k] for k in m.K) == 1)
        u = pyo.Block()
        m.unit = u
        self.unit = u
        u.I = pyo.RangeSet(0, n_m - 1)
        u.J = pyo.RangeSet(0, n_r - 1)
        u.x = pyo.Var(u.I, domain=pyo.Binary)
        u.y = pyo.Var(u.J, domain=pyo.Binary)
        u.one_motor = pyo.Constraint(expr=pyo.quicksum(u.x[i] for i in u.I) == 1)
        u.one_reducer = pyo.Constraint(expr=pyo.quicksum(u.y[j] for j in u.J) == 1)
        if self.allowed is None:
            return
        for kind, var in (("motors", u.x), ("reducers", u.y), ("tyres", m.z)):
            keep = self.allowed.get(kind)
            if keep is not None:
                for idx in np.setdiff1d(np.arange(len(var)), np.asarray(keep, dtype=np.int64)):
                    var[int(idx)].fix(0)

    def _build_gearing(self):
        """Log gearing of the first gear L = ln G_1 - ln r and of the tallest gear Lt = ln G_last - ln r,
        log efficiency of the first gear E and the best gear Emax, per-motor copies Lm_i = x_i L and
        Ltm_i = x_i Lt (single-speed reducers: Lt = L, Emax = E)."""
        re, ty = self.parts.reducers, self.parts.tyres
        m, u = self.m, self.unit
        self.ln_g = np.log(re.ratio)
        self.ln_gt = np.log(re.tallest_ratio)
        self.ln_r = np.log(ty.radius_m)
        self.ln_eta = np.log(re.efficiency)
        self.ln_eta_max = np.log(np.nanmax(re.efficiencies, axis=1))
        u.L = pyo.Expression(expr=_sum(self.ln_g, u.y) - _sum(self.ln_r, m.z))
        u.Lt = pyo.Expression(expr=_sum(self.ln_gt, u.y) - _sum(self.ln_r, m.z))
        u.E = pyo.Expression(expr=_sum(self.ln_eta, u.y))
        u.Emax = pyo.Expression(expr=_sum(self.ln_eta_max, u.y))
        l_lo, l_hi = log_gearing_range(self.parts)
        self.l_range = (l_lo, l_hi)
        u.Lm = pyo.Var(u.I, bounds=(min(l_lo, 0.0), max(l_hi, 0.0)))
        u.Lm_sum = pyo.Constraint(expr=pyo.quicksum(u.Lm[i] for i in u.I) == u.L)
        u.Ltm = pyo.Var(u.I, bounds=(min(l_lo, 0.0), max(l_hi, 0.0)))
        u.Ltm_sum = pyo.Constraint(expr=pyo.quicksum(u.Ltm[i] for i in u.I) == u.Lt)
        u.Ltm_lo = pyo.Constraint(u.I, rule=lambda b, i: b.Ltm[i] >= l_lo * b.x[i])
        u.Ltm_hi = pyo.Constraint(u.I, rule=lambda b, i: b.Ltm[i] <= l_hi * b.x[i])
        u.Lm_lo_p = pyo.Param(u.I, mutable=True, initialize=l_lo)
        u.Lm_hi_p = pyo.Param(u.I, mutable=True, initialize=l_hi)
        u.Lm_lo = pyo.Constraint(u.I, rule=lambda b, i: b.Lm[i] >= b.Lm_lo_p[i] * b.x[i])
        u.Lm_hi = pyo.Constraint(u.I, rule=lambda b, i: b.Lm[i] <= b.Lm_hi_p[i] * b.x[i])

    def _build_mass(self):
        """Mass [t] with its per-motor and per-tyre ranges, its log and rolling-resistance under-estimators,
        the axle masses [t] and the cost [k]."""
        p, m, u = self.parts, self.m, self.unit
        mo, re, ty = p.motors, p.reducers, p.tyres
        v = p.problem.vehicle
        n = v.tyre_count
        self.mm_t = mo.mass_kg / 1000.0
        self.mr_t = re.mass_kg / 1000.0
        self.mt_t = ty.mass_kg / 1000.0
        m0 = v.mass_kg / 1000.0
        m.mass = pyo.Expression(expr=m0 + _sum(self.mm_t, u.x) + _sum(self.mr_t, u.y) + n * _sum(self.mt_t, m.z))
        self.mass_lo_motor = m0 + self.mm_t + self.mr_t.min() + n * self.mt_t.min()
        self.mass_hi_motor = m0 + self.mm_t + self.mr_t.max() + n * self.mt_t.max()
        self.mass_lo_tyre = m0 + self.mm_t.min() + self.mr_t.min() + n * self.mt_t
        self.mass_hi_tyre = m0 + self.mm_t.max() + self.mr_t.max() + n * self.mt_t
        # Mass enters the log rows through linear under-estimators (no disaggregated copies,
        # measured several times faster than per-motor/per-tyre copies at 1e8 combinations):
        # concave ln(m) lies above the line through (m_lo_i, ln m_lo_i) with the smallest slope
        # 1/m_hi; Crr m >= Crr_k m_lo_k + Crr_min (m - m_lo_k).
        slope = 1.0 / float(self.mass_hi_motor.max())
        m.lnm = pyo.Expression(expr=_sum(np.log(1000.0 * self.mass_lo_motor) - slope * self.mass_lo_motor, u.x)
                               + slope * m.mass)
        c_min = float(ty.crr.min())
        m.crr_mass = pyo.Expression(expr=_sum((ty.crr - c_min) * self.mass_lo_tyre, m.z) + c_min * m.mass)
        # axle masses [t]
        share0 = v.rear_axle_share
        drive_parts = _sum(self.mm_t, u.x) + _sum(self.mr_t, u.y)
        tyres_half = 0.5 * n * _sum(self.mt_t, m.z)
        rear_drive = p.rear_drive
        m.rear_mass = pyo.Expression(expr=share0 * m0 + tyres_half + (drive_parts if rear_drive else 0.0))
        m.front_mass = pyo.Expression(expr=(1 - share0) * m0 + tyres_half + (0.0 if rear_drive else drive_parts))
        m.cost = pyo.Expression(expr=(_sum(mo.cost, u.x) + _sum(re.cost, u.y) + n * _sum(ty.cost, m.z)) / 1000.0)

    def _build_objective(self):
        """The objective (cost [k], mass [t] or per-motor optimistic time [s]), its cutoff row (off) and
        the acceleration windows."""
        m, u = self.m, self.unit
        if self.objective_name == "cost":
            expr = m.cost
        elif self.objective_name == "mass":
            expr = m.mass
        else:
            u.t_coef = pyo.Param(u.I, mutable=True, initialize=0.0)
            expr = pyo.quicksum(u.t_coef[i] * u.x[i] for i in u.I)
        m.obj_expr = pyo.Expression(expr=expr)
        m.obj = pyo.Objective(expr=m.obj_expr, sense=pyo.minimize)
        m.cutoff_p = pyo.Param(mutable=True, initialize=0.0)
        m.cutoff = pyo.Constraint(expr=m.obj_expr <= m.cutoff_p)
        m.cutoff.deactivate()
        if self.windows is not None:
            self.set_windows(self.windows)

    def _stated(self, key: str) -> bool:
        if key == "accel":
            return self.accel_target_kmh is not None and (
                self.accel_limit_s is not None or self.objective_name == "accel_time")
        return getattr(self.req, key, None) is not None

    # -- engine handles --------------------------------------------------------
    def objective_scale(self) -> float:
        """Model objective units per reported unit (cost: 1/1000, mass: 1/1000, time: 1)."""
        return 1e-3 if self.objective_name in ("cost", "mass") else 1.0

    def reset(self, requirements, windows: AccelWindows | None):
        """Reuse the model for another search: every motor allowed again, the objective cutoff
        off, and the limits (budget, max_mass_kg) and acceleration windows of ``requirements``."""
        self.req = requirements
        self.accel_limit_s = requirements.accel_time_s
        self.windows = windows
        for i in self.unit.I:
            if not self.unit.x[i].fixed:
                self.unit.x[i].setub(1)
        self.m.cutoff.deactivate()
        if hasattr(self.m, "budget_p"):
            self.m.budget_p = requirements.budget / 1000.0
        if hasattr(self.m, "max_mass_p"):
            self.m.max_mass_p = requirements.max_mass_kg / 1000.0
        if windows is not None:
            self.set_windows(windows)

    def set_windows(self, windows: AccelWindows):
        """Apply per-motor L windows (and optimistic times for the accel_time objective)."""
        u = self.unit
        l_lo, l_hi = self.l_range
        for i in u.I:
            lo, hi = float(windows.lo[i]), float(windows.hi[i])
            if lo > hi:
                u.x[i].setub(0)
                u.Lm_lo_p[i] = l_lo
                u.Lm_hi_p[i] = l_hi
            else:
                u.Lm_lo_p[i] = max(lo, l_lo - 1.0)
                u.Lm_hi_p[i] = min(hi, l_hi + 1.0)
            if self.objective_name == "accel_time":
                t = float(windows.t_min_s[i])
                u.t_coef[i] = t if np.isfinite(t) else 1e6

    def set_cutoff(self, value_model_units: float):
        """Objective <= value (in model units), loosened slightly: the model stays a relaxation."""
        self.m.cutoff_p = float(value_model_units) * (1 + 1e-7) + 1e-7
        self.m.cutoff.activate()

    def exclude_motor(self, i: int):
        """Forbid motor i (its whole slice has been evaluated exactly)."""
        self.unit.x[i].setub(0)

    def chosen(self) -> tuple[int, int, int]:
        """(motor, reducer, tyre) positions of the loaded solution."""
        u, m = self.unit, self.m
        i = max(u.I, key=lambda a: pyo.value(u.x[a]))
        j = max(u.J, key=lambda a: pyo.value(u.y[a]))
        k = max(m.K, key=lambda a: pyo.value(m.z[a]))
        return int(i), int(j), int(k)

    def rule_out(self, reason: str):
        """Record a requirement that no part choice can meet; the study is infeasible."""
        if self.infeasible_reason is None:
            self.infeasible_reason = reason


# ----------------------------------------------------------------------------- families

def _envelope_rows(sm: SelectionModel, name: str, speed_mps: float, continuous: bool):
    """Rows: every envelope branch's wheel force at ``speed_mps`` covers the level road load there."""
    p, u, m = sm.parts, sm.unit, sm.m
    mo, ty = p.motors, p.tyres
    t_lim = mo.cont_torque_nm if continuous else mo.torque_nm
    p_lim = mo.cont_power_w if continuous else mo.power_w
    q_v2 = p.q_n_s2_m2 * speed_mps ** 2
    # D_k(M) = ln(g crr_k 1000 M + q v^2), concave in the mass M [t]
    f = lambda t: np.log(G_N * ty.crr * 1000.0 * t + q_v2)  # noqa: E731
    # D_k(M) >= D_k(M_lo_k) + s (M - M_lo_k), s the smallest slope over the mass range
    slope = float(np.min(G_N * ty.crr * 1000.0 / (G_N * ty.crr * 1000.0 * sm.mass_hi_tyre + q_v2)))
    demand = _sum(f(sm.mass_lo_tyre) - slope * sm.mass_lo_tyre, m.z) + slope * m.mass
    ln_v = np.log(speed_mps)
    k = mo.decline_exponent
    blk = pyo.Block()
    setattr(m, name, blk)
    # any gear's force is at most the best efficiency times the first gear's torque branch (largest
    # G/r), the power branch (gear-independent) or the tallest gear's decline branch (e^{-kL} falls with L)
    blk.torque = pyo.Constraint(expr=u.Emax + _sum(np.log(t_lim), u.x) + u.L >= demand - SLACK_LOG)
    blk.power = pyo.Constraint(expr=u.Emax + _sum(np.log(p_lim) - ln_v, u.x) >= demand - SLACK_LOG)
    const = np.log(p_lim) + k * np.log(mo.decline_rad_s) - (k + 1) * ln_v
    blk.decline = pyo.Constraint(expr=u.Emax + _sum(const, u.x) - _sum(k, u.Ltm) >= demand - SLACK_LOG)


def _gearing_row(sm: SelectionModel, name: str, speed_mps: float):
    """Row: the tallest gear's gearing limit w_max r/G_last >= speed (no unit may over-speed)."""
    u = sm.unit
    setattr(sm.m, name, pyo.Constraint(
        expr=_sum(np.log(sm.parts.motors.max_speed_rad_s), u.x) - u.Lt >= np.log(speed_mps) - SLACK_LOG))


@family("top_speed", "top_speed_kmh", "km/h",
        "ln(w_max) - L >= ln V; for each continuous-envelope branch b: "
        "E + ln F_b(L) >= under-estimator of ln(m g Crr + q V^2)")
def _top_speed(sm: SelectionModel):
    _speed_target_rows(sm, "top_speed", "top_speed_kmh", sm.req.top_speed_kmh, continuous=True)


def _speed_target_rows(sm: SelectionModel, name: str, key: str, v_kmh: float, continuous: bool):
    """Gearing and envelope rows for reaching ``v_kmh``; rules the study out above the limiter."""
    lim = sm.req.speed_limiter_kmh
    if lim is not None and lim < v_kmh * (1 - 1e-9):
        sm.rule_out(f"{key} = {v_kmh:g} is above speed_limiter_kmh = {lim:g}: the speed is unreachable")
        return
    v = kmh_to_mps(v_kmh)
    _gearing_row(sm, f"{name}_gearing", v)
    _envelope_rows(sm, f"{name}_envelope", v, continuous=continuous)


@family("gradeability", "gradeability_pct", "%",
        "E + ln T_pk + L >= under-estimator of ln m + ln g(Crr cos + sin); "
        "mu N_driven(theta) >= m g (Crr cos + sin) (exact, linear)")
def _gradeability(sm: SelectionModel):
    p, u, m = sm.parts, sm.unit, sm.m
    theta = np.arctan(sm.req.gradeability_pct / 100.0)
    c, s = np.cos(theta), np.sin(theta)
    ty = p.tyres
    m.grade_motor = pyo.Constraint(
        expr=u.E + _sum(np.log(p.motors.torque_nm), u.x) + u.L
        >= m.lnm + _sum(np.log(G_N * (ty.crr * c + s)), m.z) - SLACK_LOG)
    v = p.problem.vehicle
    mu = p.problem.environment.road_friction
    hl = v.cg_height_m / v.wheelbase_m
    if p.rear_drive:
        traction = mu * (m.rear_mass * c + m.mass * hl * s)
    else:
        traction = mu * (m.front_mass * c - m.mass * hl * s)
    m.grade_traction = pyo.Constraint(expr=traction - m.crr_mass * c - m.mass * s >= -SLACK_T)


@family("launch", "launch_accel_mps2", "m/s^2",
        "E + ln T_pk + L >= tangents of ln(m (a + g Crr) + J eta a (G/r)^2); "
        "mu N_driven(a) >= m a + m g Crr + J a min(eta G^2/r^2)")
def _launch(sm: SelectionModel):
    p, u, m = sm.parts, sm.unit, sm.m
    a = sm.req.launch_accel_mps2
    mo, re, ty = p.motors, p.reducers, p.tyres
    supply = u.E + _sum(np.log(mo.torque_nm), u.x) + u.L
    x_expr = m.lnm + _sum(np.log(a + G_N * ty.crr), m.z)
    y_expr = np.log(a) + _sum(np.log(mo.rotor_inertia_kgm2), u.x) + u.E + 2 * u.L
    blk = pyo.Block()
    m.launch_motor = blk
    blk.rows = pyo.ConstraintList()
    for d in LSE_TANGENTS:
        sg = _sigmoid(d)
        blk.rows.add(supply >= (1 - sg) * x_expr + sg * y_expr + _softplus(d) - sg * d - SLACK_LOG)
    v = p.problem.vehicle
    mu = p.problem.environment.road_friction
    hl = v.cg_height_m / v.wheelbase_m
    e2_min = float(re.efficiency.min() * re.ratio.min() ** 2 / ty.radius_m.max() ** 2)
    inertia_t = (_sum(mo.rotor_inertia_kgm2 * e2_min / 1000.0, u.x)
                 + v.tyre_count * v.wheel_inertia_kgm2 / ty.radius_m.max() ** 2 / 1000.0)
    if p.rear_drive:
        traction = mu * (G_N * m.rear_mass + a * hl * m.mass)
    else:
        traction = mu * (G_N * m.front_mass - a * hl * m.mass)
    m.launch_traction = pyo.Constraint(
        expr=traction - a * m.mass - G_N * m.crr_mass - a * inertia_t >= -SLACK_T)


@family("accel", "accel", "s",
        "ln(w_max) - L >= ln V_a; peak envelope covers road load at V_a; "
        "lo_i x_i <= Lm_i <= hi_i x_i (optimistic time window)")
def _accel(sm: SelectionModel):
    _speed_target_rows(sm, "accel", "accel_to_kmh", sm.accel_target_kmh, continuous=False)


@family("max_mass", "max_mass_kg", "kg", "m <= max_mass (exact)")
def _max_mass(sm: SelectionModel):
    sm.m.max_mass_p = pyo.Param(mutable=True, initialize=sm.req.max_mass_kg / 1000.0)
    sm.m.max_mass = pyo.Constraint(expr=sm.m.mass <= sm.m.max_mass_p * (1 + 2 * REL_TOL) + SLACK_T)


@family("budget", "budget", "currency", "motor + reducer + n tyre cost <= budget (exact)")
def _budget(sm: SelectionModel):
    sm.m.budget_p = pyo.Param(mutable=True, initialize=sm.req.budget / 1000.0)
    sm.m.budget = pyo.Constraint(expr=sm.m.cost <= sm.m.budget_p * (1 + 2 * REL_TOL) + SLACK_T)


@family("tyre_load", None, "kg", "(n/2) load_capacity_k >= each static axle mass (exact)")
def _tyre_load(sm: SelectionModel):
    p, m = sm.parts, sm.m
    half = 0.5 * p.problem.vehicle.tyre_count
    cap = _sum(p.tyres.load_capacity_kg * half / 1000.0, m.z)
    m.tyre_load_rear = pyo.Constraint(expr=cap >= m.rear_mass - SLACK_T)
    m.tyre_load_front = pyo.Constraint(expr=cap >= m.front_mass - SLACK_T)


def _staircase(sm: SelectionModel, name: str, need: np.ndarray, rating: np.ndarray):
    """Clique rows: for each distinct rating tau, motors needing more than tau + reducers rated <= tau <= 1."""
    u = sm.unit
    blk = pyo.Block()
    setattr(sm.m, name, blk)
    blk.rows = pyo.ConstraintList()
    tol = 2 * REL_TOL
    for tau in np.unique(rating):
        motors = np.nonzero(need > tau * (1 + tol))[0]
        if motors.size == 0:
            continue
        reducers = np.nonzero(rating <= tau)[0]
        blk.rows.add(pyo.quicksum(u.x[int(i)] for i in motors) + pyo.quicksum(u.y[int(j)] for j in reducers) <= 1)


@family("reducer_rating", None, "N m, rpm",
        "for each rating tau: sum(x_i: need_i > tau) + sum(y_j: rating_j <= tau) <= 1 (torque and speed, exact)")
def _reducer_rating(sm: SelectionModel):
    p = sm.parts
    _staircase(sm, "reducer_torque", p.motors.torque_nm, p.reducers.max_torque_nm)
    _staircase(sm, "reducer_speed", p.motors.max_speed_rad_s, p.reducers.max_speed_rad_s)
