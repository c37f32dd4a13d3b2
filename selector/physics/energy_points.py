"""Operating points of the drive units on the intervals of a cycle (the motor side of the energy model).

For one unit in one gear over a chunk of designs and intervals: motor speed, envelope torque, rotor
torque, spin losses and the braking-torque limits (`gear_state`, independent of the vehicle mass);
then, for the unit's share of a wheel force, the motor torque, the electrical power of the loss
model or the efficiency map and the battery power through the inverter (`unit_battery_power`, the
fast path of polynomial-loss units, and `unit_power`, which also handles maps and gives the detail).
The model is described in `selector.physics.energy`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selector.physics.energy_inputs import EnergyParams, EnergyUnit
from selector.physics.losses import map_efficiency
from selector.physics.motor import envelope_torque_nm

TOL = 1e-9
"""Relative tolerance of the envelope and speed checks (as `selector.requirements.REL_TOL`) [-]."""


@dataclass
class Steps:
    """The moving intervals of the cycle (standstill intervals dropped), shapes (S,)."""

    dt: np.ndarray
    v: np.ndarray
    a: np.ndarray
    v_high: np.ndarray
    v_end: np.ndarray
    t0: np.ndarray
    regen_ok: np.ndarray
    contiguous: np.ndarray
    """(S - 1,): interval k + 1 starts where interval k ends (no standstill between them)."""


@dataclass
class GearState:
    """One unit in one gear (or with per-element gears) over a chunk: shapes (D, S) or (D, 1)."""

    ratio: np.ndarray
    eff: np.ndarray
    w: np.ndarray
    t_env: np.ndarray
    t_rot: np.ndarray
    usable: np.ndarray
    """Gear exists and the motor does not over-speed."""
    spin_loss: np.ndarray | None
    """k_i w + k_w w^3 + C0 (polynomial rows), else None."""
    k_c: np.ndarray | None
    r_over_g_eta: np.ndarray
    r_eta_over_g: np.ndarray
    t_env_tol: np.ndarray
    """Envelope torque with the pass tolerance."""
    neg_t_lim: np.ndarray
    """Minus the braking-torque limit of the envelope, 0 where regeneration is off."""
    t_lim_cap: np.ndarray | None
    """regen_max_w / w (0 where regeneration is off), scaled by the unit's share; None = no cap."""


@dataclass
class UnitRows:
    """Per-design data of one chunk for one unit, shapes (D, 1) unless stated."""

    idx: np.ndarray
    torque_nm: np.ndarray
    power_w: np.ndarray
    decline_rad_s: np.ndarray
    decline_exponent: np.ndarray
    max_speed_rad_s: np.ndarray
    rotor_inertia_kgm2: np.ndarray
    ratios: np.ndarray  # (D, g)
    gear_efficiency: np.ndarray  # (D, g)
    k: tuple  # (k_c, k_i, k_w, c0), each (D, 1)
    map_index: np.ndarray  # (D,)
    maps: tuple
    any_map: bool
    all_map: bool


def unit_rows(u: EnergyUnit, idx: np.ndarray, gears: int) -> UnitRows:
    """Per-design data of the designs ``idx`` of unit ``u`` with ``gears`` gears, as (D, 1) columns."""
    def col(a):
        return np.asarray(a, dtype=float)[idx][:, None]
    mi = np.asarray(u.map_index, dtype=np.int64)[idx]
    return UnitRows(idx=idx, torque_nm=col(u.torque_nm), power_w=col(u.power_w),
                    decline_rad_s=col(u.decline_rad_s), decline_exponent=col(u.decline_exponent),
                    max_speed_rad_s=col(u.max_speed_rad_s), rotor_inertia_kgm2=col(u.rotor_inertia_kgm2),
                    ratios=np.asarray(u.ratios, dtype=float)[idx, :gears],
                    gear_efficiency=np.asarray(u.gear_efficiency, dtype=float)[idx, :gears],
                    k=(col(u.loss_copper_w_per_nm2), col(u.loss_iron_nm), col(u.loss_windage_w_s3),
                       col(u.loss_constant_w)),
                    map_index=mi, maps=tuple(u.maps), any_map=bool(np.any(mi >= 0)),
                    all_map=bool(np.all(mi >= 0)))


def gear_state(r: UnitRows, ratio, eff, radius, steps: Steps, params: EnergyParams) -> GearState:
    """Motor speed, envelope, rotor torque and braking limits of one unit in a gear (ratio/eff (D,1) or (D,S)).

    Independent of the vehicle mass, so shared by every evaluation of the same designs at other masses.
    ``radius`` is the rolling radius of each design (D, 1) [m].
    """
    inv_r = 1.0 / radius
    g_over_r = ratio * inv_r
    w = steps.v * g_over_r
    exists = np.isfinite(ratio)
    with np.errstate(invalid="ignore"):
        usable = exists & (steps.v_high * g_over_r <= r.max_speed_rad_s * (1.0 + TOL))
    w_safe = np.where(exists, w, 0.0)
    t_env = envelope_torque_nm(w_safe, r.torque_nm, r.power_w, r.decline_rad_s, r.decline_exponent,
                               r.max_speed_rad_s)
    t_rot = r.rotor_inertia_kgm2 * steps.a * np.where(exists, g_over_r, 0.0)
    spin = k_c = None
    if not r.all_map:
        k_c, k_i, k_w, c0 = r.k
        spin = k_i * w_safe + k_w * w_safe * w_safe * w_safe + c0
    with np.errstate(invalid="ignore", divide="ignore"):
        r_over_g_eta = radius / (ratio * eff)
        r_eta_over_g = radius * eff / ratio
    neg_t_lim = -t_env
    if k_c is not None:
        # loss model: braking harder than T = -w / (2 k_c) recovers less (copper loss grows faster than the
        # recovered power), so the controller stops there and the friction brakes take the rest (rows with
        # the polynomial model only: a map wins over loss coefficients)
        with np.errstate(divide="ignore", invalid="ignore"):
            k_poly = k_c if not r.any_map else np.where((r.map_index < 0)[:, None], k_c, np.nan)
            neg_t_lim = np.fmax(neg_t_lim, -w_safe / (2.0 * k_poly))
    neg_t_lim = np.where(steps.regen_ok, neg_t_lim, 0.0)
    t_lim_cap = None
    if np.isfinite(params.regen_max_w):
        with np.errstate(divide="ignore", invalid="ignore"):
            t_lim_cap = np.where(steps.regen_ok & (w_safe > 0), params.regen_max_w / w_safe, 0.0)
    return GearState(ratio=ratio, eff=eff, w=w_safe, t_env=t_env, t_rot=t_rot, usable=usable, spin_loss=spin,
                     k_c=k_c, r_over_g_eta=r_over_g_eta, r_eta_over_g=r_eta_over_g, t_env_tol=t_env * (1.0 + TOL),
                     neg_t_lim=neg_t_lim, t_lim_cap=t_lim_cap)


def gearbox_torque(g: GearState, force):
    """Motor torque through the gearbox for the whole wheel force, without the rotor term (D, S) [N m].

    T = F r / (G eta) when F >= 0 (motoring), F r eta / G when F < 0 (braking).
    """
    return force * np.where(force >= 0.0, g.r_over_g_eta, g.r_eta_over_g)


def unit_battery_power(g: GearState, t1, f: float, eta_inv: float):
    """Battery power of a polynomial-loss unit taking the share f of the wheel force (fast path) [W].

    Same result as `unit_power` (which it must match): motor torque f T1 + T_rot (``t1`` from
    `gearbox_torque`); braking torque limited by the envelope, the loss optimum -w / (2 k_c), the unit's
    share of the regeneration cap and the minimum speed; inf where the gear is unusable.
    """
    t_m = t1.copy() if np.ndim(f) == 0 and f == 1.0 else t1 * f
    t_m += g.t_rot
    if g.t_lim_cap is None:
        t_act = np.maximum(t_m, g.neg_t_lim)
    else:
        t_act = np.maximum(t_m, np.maximum(g.neg_t_lim, -f * g.t_lim_cap))
    pe = g.k_c * t_act
    pe += g.w
    pe *= t_act
    pe += g.spin_loss
    pb = pe / eta_inv
    np.multiply(pe, eta_inv, out=pb, where=pe < 0.0)
    feasible = t_m <= g.t_env_tol
    feasible &= g.usable
    np.copyto(pb, np.inf, where=~feasible)
    return pb


def unit_power(r: UnitRows, g: GearState, force, share, params: EnergyParams, detail: bool):
    """Battery power of one unit carrying the wheel force force_u in gear state g.

    Returns a dict: ``pb`` (battery power, inf where unusable), ``oom`` (envelope-feasible points
    outside the map) and, with detail, the motor torque, electrical and shaft power and the
    gearbox loss and the wheel force the unit delivers.
    """
    t_m = gearbox_torque(g, force) * share + g.t_rot  # the arithmetic of `unit_battery_power`
    motoring = t_m >= 0.0
    feasible = g.usable & (t_m <= g.t_env_tol)
    # generating: limits of the envelope, the regeneration cap and the minimum speed
    neg_lim = g.neg_t_lim if g.t_lim_cap is None else np.maximum(g.neg_t_lim, -share * g.t_lim_cap)
    t_act = np.where(motoring, t_m, np.maximum(t_m, neg_lim))
    p_shaft = t_act * g.w
    pe = np.empty_like(p_shaft)
    oom = None
    if not r.all_map:
        pe = (g.k_c * t_act + g.w) * t_act + g.spin_loss  # the arithmetic of `unit_battery_power`
    if r.any_map:
        oom = _map_power(r, g, t_act, p_shaft, feasible, pe)
    eta_inv = params.inverter_efficiency
    pb = np.where(pe >= 0.0, pe / eta_inv, pe * eta_inv)
    pb = np.where(feasible, pb, np.inf)
    if oom is not None:
        pb = np.where(oom, np.inf, pb)
    out = {"pb": pb, "oom": oom}
    if detail:
        t_through = t_act - g.t_rot  # torque the motor sends into the gearbox
        w_mot = g.w
        gear_loss = np.where(t_through >= 0.0, t_through * w_mot * (1.0 - g.eff),
                             -t_through * w_mot * (1.0 / g.eff - 1.0))
        with np.errstate(invalid="ignore", divide="ignore"):
            wheel_force = np.where(t_through >= 0.0, t_through / g.r_over_g_eta, t_through / g.r_eta_over_g)
        out.update(t=t_act, pe=pe, p_shaft=p_shaft, gear_loss=np.where(feasible, gear_loss, 0.0),
                   wheel_force=np.where(feasible, wheel_force, 0.0))
    return out


def _map_power(r: UnitRows, g: GearState, t_act, p_shaft, feasible, pe):
    """Electrical power of the map-based rows (written into ``pe``, inf outside the map); returns the
    envelope-feasible points outside the map (D, S) bool. Never extrapolated: a point outside the map
    with non-zero shaft power, or a motoring point where the map reads 0 %, is out of the map."""
    oom = np.zeros(p_shaft.shape, dtype=bool)
    for m in np.unique(r.map_index[r.map_index >= 0]):
        sel = np.flatnonzero(r.map_index == m)
        eta, outside = map_efficiency(r.maps[m], g.w[sel], t_act[sel])
        p_s = p_shaft[sel]
        zero_eta = (p_s > 0) & ~outside & ~(eta > 0)
        bad = (outside & (p_s != 0)) | zero_eta
        with np.errstate(divide="ignore", invalid="ignore"):
            pe_s = np.where(p_s > 0, p_s / eta, np.where(p_s < 0, p_s * eta, 0.0))
        pe[sel] = np.where(bad, np.inf, pe_s)
        oom[sel] = bad & feasible[sel]
    return oom


def capability_split(states, shape):
    """Front share F_f,max / (F_f,max + F_r,max) of each interval (D, S), each unit in its strongest gear."""
    fmax = {}
    for pos, gears in states.items():
        best = np.zeros(shape)
        for g in gears:
            with np.errstate(invalid="ignore"):
                f = np.where(g.usable, (g.t_env - g.t_rot) / g.r_over_g_eta, 0.0)
            best = np.maximum(best, f)
        fmax[pos] = best
    tot = fmax["front"] + fmax["rear"]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(tot > 0, fmax["front"] / tot, 0.5)


def stationary_split(states, t1s, gears):
    """Front share where the loss-model battery power of the two units is stationary, clipped to [0, 1].

    With the motor torques T_f = s a_f + b_f and T_r = (1 - s) a_r + b_r (a: torque for the whole wheel
    force through the gear, b: rotor term) and P_el = T (w + k_c T) + spin losses, dP/ds = 0 gives

        s = (a_r w_r + 2 k_r a_r (a_r + b_r) - a_f w_f - 2 k_f a_f b_f) / (2 (k_f a_f^2 + k_r a_r^2)),

    the optimum when both units run in the same direction within their limits (the inverter factor is
    then common). Each unit uses the gear given per interval in `gears`.
    """
    terms = {}
    for pos, gear in gears.items():
        gs = states[pos]
        a, b, w, k = t1s[pos][0], gs[0].t_rot, gs[0].w, gs[0].k_c
        if len(gs) > 1:
            a, b, w, k = (np.array(np.broadcast_to(x, gear.shape)) for x in (a, b, w, k))
            for gi in range(1, len(gs)):
                m = gear == gi
                for arr, src in ((a, t1s[pos][gi]), (b, gs[gi].t_rot), (w, gs[gi].w),
                                 (k, np.broadcast_to(gs[gi].k_c, gear.shape))):
                    arr[m] = np.broadcast_to(src, gear.shape)[m]
        terms[pos] = (a, b, w, k)
    af, bf, wf, kf = terms["front"]
    ar, br, wr, kr = terms["rear"]
    num = ar * wr + 2.0 * kr * ar * (ar + br) - af * wf - 2.0 * kf * af * bf
    den = 2.0 * (kf * af * af + kr * ar * ar)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = np.where(den > 0, num / den, 0.5)
    return np.clip(np.nan_to_num(s, nan=0.5), 0.0, 1.0)
