"""Independent re-check of the energy figures of reported designs (energy studies only).

`selector.physics.energy` evaluates many designs at once: grouped by unit layout and gear count,
chunked, with a fast path for the polynomial loss model. This module recomputes the same backward
model for one design at a time, over the cycle's intervals, written from the conventions in
DEVELOPERS.md ("Energy model") and sharing with the engine only the catalogue tables, the motor
envelope definition (`physics.motor.envelope_torque_nm`) and the cycle samples:

- per moving interval (mean speed, constant acceleration): the wheel force, each unit's motor
  torque through each gear (efficiency in the direction of the power flow) plus the rotor term,
  the braking-torque limits (envelope, loss optimum -w / (2 k_c), the share of the regeneration cap,
  the minimum speed), the loss model or the map (its own bilinear interpolation), the inverter;
- the least battery power over the gears of each unit and, for two units, over the candidate splits
  (the grid, the capability split, the loss model's stationary split);
- the rotor's kinetic energy at each change of gear; the auxiliary load over the whole cycle;
- with a range: the sized battery must cover it, u E >= R c(m + m_b), m_b = E / sigma, and be the
  smallest that does: the fixed point u E = R c of the mass spiral, or, where the consumption jumps
  with mass (a gear choice that changes), a battery ENERGY_REL_TOL smaller must fall short; its
  cost E x price.

`energy_disagreements` returns messages; `engine.verify.verify_designs` turns them into a
`VerificationError`.
"""

from __future__ import annotations

import numpy as np

from selector.engine.parts import AXLE_COLUMNS, TY, PartTables
from selector.physics.energy_inputs import CHOICE_TIE_ABS_W, CHOICE_TIE_REL
from selector.physics.motor import envelope_torque_nm
from selector.units import G_N

ENERGY_REL_TOL = 1e-6
"""Relative tolerance of the energy per km and of the battery's fixed point (the gear and split ties
of the two computations may differ in the last digits of the shift energy) [-]."""
SPLIT_GRID = (0.0, 0.25, 0.5, 0.75, 1.0)
"""Front shares of the wheel force tried for two units (DEVELOPERS.md, energy model) [-]."""
_ENV_TOL = 1e-9  # pass tolerance of the envelope and speed checks (requirements.REL_TOL)


def _bilinear(grid, w: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Efficiency of a map at (|w|, t) by bilinear interpolation; (eta, outside) per point."""
    ws, ts, eff = np.asarray(grid.speed_rad_s), np.asarray(grid.torque_nm), np.asarray(grid.efficiency)
    w = np.abs(w)
    if ts[0] >= 0.0:
        t = np.abs(t)
    outside = (w < ws[0]) | (w > ws[-1]) | (t < ts[0]) | (t > ts[-1]) | ~np.isfinite(t)
    wi, ti = np.where(outside, ws[0], w), np.where(outside, ts[0], t)
    i = np.clip(np.searchsorted(ws, wi, side="right") - 1, 0, len(ws) - 2)
    j = np.clip(np.searchsorted(ts, ti, side="right") - 1, 0, len(ts) - 2)
    x = (wi - ws[i]) / (ws[i + 1] - ws[i])
    y = (ti - ts[j]) / (ts[j + 1] - ts[j])
    eta = ((1 - x) * (1 - y) * eff[i, j] + x * (1 - y) * eff[i + 1, j]
           + (1 - x) * y * eff[i, j + 1] + x * y * eff[i + 1, j + 1])
    eta = np.where(outside, np.nan, eta)
    return eta, outside


class _Unit:
    """One drive unit of one design over the moving intervals of the cycle (arrays over intervals)."""

    def __init__(self, parts: PartTables, motor: int, reducer: int, cyc: dict, radius: float):
        mo, re = parts.motors, parts.reducers
        self.inertia = float(mo.rotor_inertia_kgm2[motor])
        self.grid = mo.maps[int(mo.map_index[motor])] if mo.map_index[motor] >= 0 else None
        self.k = tuple(float(getattr(mo, n)[motor]) for n in ("loss_copper", "loss_iron", "loss_windage",
                                                                "loss_constant"))
        self.gears = []
        for g in range(int(re.n_gears[reducer])):
            ratio, eff = float(re.ratios[reducer, g]), float(re.efficiencies[reducer, g])
            w = cyc["v"] * ratio / radius
            t_env = envelope_torque_nm(w, mo.torque_nm[motor], mo.power_w[motor], mo.decline_rad_s[motor],
                                       mo.decline_exponent[motor], mo.max_speed_rad_s[motor])
            usable = cyc["v_high"] * ratio / radius <= mo.max_speed_rad_s[motor] * (1.0 + _ENV_TOL)
            self.gears.append(dict(ratio=ratio, eff=eff, w=w, t_env=np.asarray(t_env, dtype=float), usable=usable,
                                   t_rot=self.inertia * cyc["a"] * ratio / radius,
                                   motoring_arm=radius / (ratio * eff), braking_arm=radius * eff / ratio))

    def battery_w(self, gear: dict, force_n: np.ndarray, share, cyc: dict, env: dict):
        """Battery power [W] of this unit carrying ``share`` of the wheel force in ``gear`` (inf where it
        cannot), and the points outside its map that are within the envelope."""
        f_unit = force_n * share
        t_m = np.where(f_unit >= 0.0, f_unit * gear["motoring_arm"], f_unit * gear["braking_arm"]) + gear["t_rot"]
        w = gear["w"]
        can = gear["usable"] & (t_m <= gear["t_env"] * (1.0 + _ENV_TOL))
        brake_limit = -gear["t_env"]
        k_c, k_i, k_w, c0 = self.k
        if self.grid is None:
            with np.errstate(divide="ignore", invalid="ignore"):
                brake_limit = np.fmax(brake_limit, -w / (2.0 * k_c))
        brake_limit = np.where(cyc["regen_ok"], brake_limit, 0.0)
        if np.isfinite(env["regen_max_w"]):
            with np.errstate(divide="ignore", invalid="ignore"):
                cap_torque = np.where(cyc["regen_ok"] & (w > 0), env["regen_max_w"] / w, 0.0)
            brake_limit = np.maximum(brake_limit, -share * cap_torque)
        torque = np.maximum(t_m, brake_limit)
        shaft_w = torque * w
        outside = np.zeros(w.shape, dtype=bool)
        if self.grid is None:
            electric_w = shaft_w + k_c * torque ** 2 + k_i * w + k_w * w ** 3 + c0
        else:
            eta, off = _bilinear(self.grid, w, torque)
            bad = (off & (shaft_w != 0)) | ((shaft_w > 0) & ~off & ~(eta > 0))
            with np.errstate(divide="ignore", invalid="ignore"):
                electric_w = np.where(shaft_w > 0, shaft_w / eta, np.where(shaft_w < 0, shaft_w * eta, 0.0))
            electric_w = np.where(bad, np.inf, electric_w)
            outside = bad & can
        eta_inv = env["inverter"]
        battery = np.where(electric_w >= 0.0, electric_w / eta_inv, electric_w * eta_inv)
        return np.where(can & ~outside, battery, np.inf), outside

    def best_gear(self, force_n, share, cyc, env):
        """Least battery power over the gears (ties to the documented tolerance: the lowest gear), the gear
        index and the map misses."""
        powers = []
        outside = np.zeros(cyc["v"].shape, dtype=bool)
        for gear in self.gears:
            p, off = self.battery_w(gear, force_n, share, cyc, env)
            outside |= off
            powers.append(p)
        gear_of = _first_within_tie(np.stack(powers))
        return np.choose(gear_of, powers), gear_of, outside

    def strongest_force_n(self):
        """Largest wheel force of the unit in any usable gear at each interval [N]."""
        out = np.zeros(self.gears[0]["w"].shape)
        for gear in self.gears:
            with np.errstate(invalid="ignore"):
                out = np.maximum(out, np.where(gear["usable"], (gear["t_env"] - gear["t_rot"]) / gear["motoring_arm"],
                                               0.0))
        return out

    def torque_terms(self, force_n, gear_of):
        """(torque for the whole wheel force through the gear, rotor torque, speed) per interval in ``gear_of``."""
        pick = [np.choose(gear_of, [g[key] for g in self.gears]) for key in ("motoring_arm", "braking_arm", "t_rot",
                                                                               "w")]
        whole = np.where(force_n >= 0.0, force_n * pick[0], force_n * pick[1])
        return whole, pick[2], pick[3]


def _first_within_tie(powers: np.ndarray) -> np.ndarray:
    """Per interval (axis 1), the first candidate (axis 0) whose power is within the tie tolerance of the
    least (DEVELOPERS.md, energy model: CHOICE_TIE_REL of its magnitude plus CHOICE_TIE_ABS_W)."""
    least = np.min(powers, axis=0)
    with np.errstate(invalid="ignore"):
        ok = powers - least <= CHOICE_TIE_REL * np.abs(least) + CHOICE_TIE_ABS_W
    first = np.zeros(least.shape, dtype=int)
    for k in range(powers.shape[0] - 1, -1, -1):  # the first that qualifies wins
        first = np.where(ok[k], k, first)
    return first


def _cycle(parts: PartTables) -> tuple[dict, dict]:
    """The cycle's moving intervals and the energy settings (SI)."""
    e = parts.problem.energy
    t = np.asarray(e.cycle_data.time_s, dtype=float)
    v = np.asarray(e.cycle_data.speed_mps, dtype=float)
    dt = t[1:] - t[:-1]
    v_mean = 0.5 * (v[1:] + v[:-1])
    moving = v_mean > 0.0
    t0 = t[:-1][moving]
    cyc = dict(dt=dt[moving], v=v_mean[moving], a=((v[1:] - v[:-1]) / dt)[moving],
               v_high=np.maximum(v[1:], v[:-1])[moving], v_end=v[1:][moving], t0=t0,
               regen_ok=v_mean[moving] >= e.regen_min_speed_kmh / 3.6,
               distance_km=float(np.sum(v_mean * dt)) / 1000.0, duration_s=float(t[-1] - t[0]))
    cyc["contiguous"] = np.abs(t0[1:] - (t0[:-1] + cyc["dt"][:-1])) <= 1e-9
    env = dict(inverter=e.inverter_efficiency_pct / 100.0, auxiliary_w=e.auxiliary_w,
               regen_max_w=np.inf if e.regen_max_kw is None else e.regen_max_kw * 1e3)
    return cyc, env


def _stationary_share(units: dict, force_n, gears: dict) -> np.ndarray:
    """Front share where the two loss-model units' electrical power is stationary, clipped to [0, 1].

    The closed form (DEVELOPERS.md, energy model) is written here again on purpose, from the
    re-check's own per-interval terms, so that the re-check does not call the evaluator's code."""
    terms = {}
    for pos, u in units.items():
        a, b, w = u.torque_terms(force_n, gears[pos])
        terms[pos] = (a, b, w, u.k[0])
    af, bf, wf, kf = terms["front"]
    ar, br, wr, kr = terms["rear"]
    num = ar * wr + 2.0 * kr * ar * (ar + br) - af * wf - 2.0 * kf * af * bf
    den = 2.0 * (kf * af * af + kr * ar * ar)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = np.where(den > 0, num / den, 0.5)
    return np.clip(np.nan_to_num(s, nan=0.5), 0.0, 1.0)


def interval_power_w(parts: PartTables, key, mass_kg: float) -> tuple[np.ndarray, np.ndarray, dict, dict]:
    """Battery power of the drive units of one design at each moving interval of the cycle [W] (inf where
    the design cannot follow it; shift energy included), the intervals with a point outside a map, and
    the cycle and energy settings."""
    cyc, env = _cycle(parts)
    radius = float(parts.tyres.radius_m[key[TY]])
    crr = float(parts.tyres.crr[key[TY]])
    wheel_j = parts.problem.vehicle.tyre_count * parts.problem.vehicle.wheel_inertia_kgm2
    force = ((mass_kg + wheel_j / radius ** 2) * cyc["a"] + mass_kg * G_N * crr
             + parts.q_n_s2_m2 * cyc["v"] ** 2)
    units = {axle: _Unit(parts, int(key[m]), int(key[r]), cyc, radius)
             for axle, (m, r) in AXLE_COLUMNS.items() if key[m] >= 0}
    off_map = np.zeros(cyc["v"].shape, dtype=bool)
    if len(units) == 1:
        (pos, u), = units.items()
        power, gear_of, off_map = u.best_gear(force, 1.0, cyc, env)
        chosen = {pos: gear_of}
    else:
        cap = {pos: u.strongest_force_n() for pos, u in units.items()}
        total_cap = cap["front"] + cap["rear"]
        with np.errstate(invalid="ignore", divide="ignore"):
            shares = list(SPLIT_GRID) + [np.where(total_cap > 0, cap["front"] / total_cap, 0.5)]
        options = []

        def add(s):
            pf, gf, of = units["front"].best_gear(force, s, cyc, env)
            pr, gr, orr = units["rear"].best_gear(force, 1.0 - s, cyc, env)
            options.append((pf + pr, {"front": gf, "rear": gr}))
            return of | orr

        for s in shares:
            off_map |= add(s)
        if all(u.grid is None for u in units.values()):
            half = int(np.argmin([abs(s - 0.5) for s in SPLIT_GRID]))
            off_map |= add(_stationary_share(units, force, options[half][1]))
        totals = np.stack([p for p, _ in options])
        pick = _first_within_tie(totals)
        power = np.take_along_axis(totals, pick[None], axis=0)[0]
        chosen = {pos: np.choose(pick, [g[pos] for _, g in options]) for pos in units}
    # rotor kinetic energy at each change of gear, between contiguous intervals both followed
    shift_w = np.zeros(power.shape)
    for pos, u in units.items():
        if len(u.gears) < 2 or power.size < 2:
            continue
        ratio = np.array([u.gears[g]["ratio"] for g in chosen[pos]])
        both = np.isfinite(power[1:]) & np.isfinite(power[:-1]) & cyc["contiguous"]
        jump = np.where(both, 0.5 * u.inertia * (cyc["v_end"][:-1] / radius) ** 2 * (ratio[1:] ** 2 - ratio[:-1] ** 2),
                        0.0)
        shift_w[1:] += np.where(jump > 0, jump / env["inverter"], jump * env["inverter"]) / cyc["dt"][1:]
    return power + shift_w, off_map, cyc, env


def design_energy(parts: PartTables, key, mass_kg: float) -> dict:
    """Energy of one design over the study's cycle at vehicle mass ``mass_kg`` [kg].

    Returns ``wh_per_km`` (NaN where the cycle cannot be followed or a point is outside a map),
    ``regen_share`` [-], ``followed`` (bool) and ``out_of_map`` (bool).
    """
    power, off_map, cyc, env = interval_power_w(parts, key, mass_kg)
    followed = bool(np.all(np.isfinite(power) | off_map))
    outside = bool(off_map.any())
    drawn = float(np.sum(np.maximum(power, 0.0) * cyc["dt"])) / 3600.0
    returned = float(np.sum(np.maximum(-power, 0.0) * cyc["dt"])) / 3600.0
    wh = drawn - returned + env["auxiliary_w"] * cyc["duration_s"] / 3600.0
    ok = followed and not outside
    return dict(wh_per_km=wh / cyc["distance_km"] if ok else float("nan"),
                regen_share=returned / drawn if drawn > 0 else 0.0, followed=followed, out_of_map=outside)


def energy_disagreements(parts: PartTables, keys, metrics: dict) -> list[tuple[int, str]]:
    """(design index, message) for every energy figure of ``metrics`` the recomputation does not confirm."""
    if parts.problem.energy is None:
        return []
    problems = []
    e = parts.problem.energy
    range_km = parts.problem.requirements.range_km
    parts_mass = parts.mass_kg(keys)
    for b, key in enumerate(np.asarray(keys)):
        claimed = float(metrics["energy_wh_per_km"][b])
        battery_kg = float(np.nan_to_num(metrics["battery_mass_kg"][b]))
        if not np.isfinite(claimed):
            continue  # no energy figure is reported for this design
        mine = design_energy(parts, key, float(parts_mass[b]) + battery_kg)
        if not abs(mine["wh_per_km"] - claimed) <= ENERGY_REL_TOL * abs(claimed):
            problems.append((b, f"energy {claimed!r} Wh/km from the evaluator but {mine['wh_per_km']!r} Wh/km on "
                                "the independent recomputation"))
            continue
        share = float(metrics["regen_share"][b])
        if not abs(mine["regen_share"] - share) <= ENERGY_REL_TOL * max(1.0, abs(share)):
            problems.append((b, f"regen_share {share!r} from the evaluator but {mine['regen_share']!r} recomputed"))
        if range_km is None:
            continue
        kwh = float(metrics["battery_kwh"][b])
        usable_wh = e.usable_fraction * kwh * 1e3
        need_wh = range_km * mine["wh_per_km"]
        if not usable_wh >= need_wh * (1.0 - ENERGY_REL_TOL):
            problems.append((b, f"battery {kwh!r} kWh gives {usable_wh!r} Wh usable but {range_km} km at "
                                f"{mine['wh_per_km']!r} Wh/km needs {need_wh!r} Wh"))
        elif usable_wh > need_wh * (1.0 + ENERGY_REL_TOL):
            # a surplus only at a jump of the consumption (a gear choice that changes with mass): the battery
            # ENERGY_REL_TOL smaller must then fall short, else it is not the smallest that covers the range
            smaller_kg = battery_kg * (1.0 - ENERGY_REL_TOL)
            small = design_energy(parts, key, float(parts_mass[b]) + smaller_kg)
            if np.isfinite(small["wh_per_km"]) and \
                    e.usable_fraction * smaller_kg * e.specific_energy_wh_per_kg >= range_km * small["wh_per_km"]:
                problems.append((b, f"battery {kwh!r} kWh gives {usable_wh!r} Wh usable, more than the {need_wh!r} Wh "
                                    f"{range_km} km need, and a battery {ENERGY_REL_TOL:g} smaller covers the range "
                                    "too: it is not the smallest"))
        if not abs(battery_kg - kwh * 1e3 / e.specific_energy_wh_per_kg) <= 1e-9 * max(battery_kg, 1.0):
            problems.append((b, f"battery mass {battery_kg!r} kg is not {kwh!r} kWh / "
                                f"{e.specific_energy_wh_per_kg} Wh/kg"))
        cost = float(metrics["battery_cost"][b])
        if not abs(cost - kwh * e.cost_per_kwh) <= 1e-9 * max(abs(cost), 1.0):
            problems.append((b, f"battery cost {cost!r} is not {kwh!r} kWh x {e.cost_per_kwh} per kWh"))
    return problems
