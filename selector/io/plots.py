"""Charts engineers read: the tractive-effort diagram, the cost/acceleration frontier, sweep curves.

Figures are drawn with matplotlib's object API on an Agg canvas (no screen, no pyplot, no global
backend switch) and written atomically: to a temporary file in the target folder, then
``os.replace``. The format follows the file name's suffix (``.png``, ``.svg``, ``.pdf``).
Every plotting function returns the `matplotlib.figure.Figure` it saved (tests read its data back).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from selector.io import export

PLOT_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}
"""File formats a plot can be written in (the file name's suffix)."""

SPEED_SAMPLES = 400
"""Road speeds sampled per curve [-]."""

ACCEL_RUN_SAMPLES = 120
"""Speeds at which the acceleration run's time is computed [-]."""

TRACTION_SHOWN = 2.5
"""The traction-limit curve stretches the force axis up to this multiple of the largest other curve [-]."""

ACCEL_RUN_END = 0.98
"""Without a reachable accel_to_kmh, the run is drawn up to this share of the maximum speed [-]
(the time to the maximum speed itself is infinite)."""


# ----------------------------------------------------------------------------- files

def check_output_path(path, option: str = "--plot", protected=()) -> Path:
    """The output path, or an InputError when its folder is missing, its suffix unknown or it is an input file."""
    return export.check_output_path(path, protected, option=option, formats=PLOT_FORMATS)


def save_figure(fig, path) -> None:
    """Save a figure atomically in the format of the file name's suffix, with the caution printed
    below it (every chart shows parts the tool recommends or compares)."""
    import textwrap

    from selector.records import CAUTION

    fig.text(0.01, -0.01, "\n".join(textwrap.wrap(CAUTION, 150)), ha="left", va="top", fontsize=6, color="0.3")
    fmt = export.output_format(path, "--plot", PLOT_FORMATS)
    export.atomic_write(path, lambda tmp: fig.savefig(tmp, format=fmt, dpi=120, bbox_inches="tight"),
                        option="--plot", formats=PLOT_FORMATS)


def _figure(nrows=1, ncols=1, size=(8.0, 5.0)):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=size, layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(nrows, ncols, squeeze=False)
    return fig, axes.ravel()


# ----------------------------------------------------------------------------- tractive effort

def tractive_effort_data(parts, i: int, j: int, k: int) -> dict:
    """Curves of the tractive-effort diagram and the acceleration run of one design (SI arrays).

    Returns speed_mps (grid up to just above the vehicle's maximum speed), peak_n, cont_n (wheel
    force of the peak and continuous envelopes), traction_n (traction-limited force on the level
    at the acceleration it gives, F = (mu W_d - kappa F_res) / (1 - kappa); inf when unlimited),
    road_level_n, road_grade_n (None without gradeability_pct), grade_pct, max_speed_mps,
    gearing_limit_mps, run_speed_mps and run_time_s (the acceleration run: time to reach each
    speed, computed by `physics.performance.accel_time_s`, so the last point is the reported
    accel_time_s), accel_target_mps. The curves come from `physics.tractive_effort.single_axle_curves_n`.
    """
    from selector.physics import performance as perf
    from selector.physics.tractive_effort import diagram_end_speed_mps, run_end_speed_mps, single_axle_curves_n

    drive, body = perf.broadcast(*parts.single_drive(np.array([i]), np.array([j]), np.array([k])))
    req = parts.problem.requirements
    v_max = float(perf.max_speed_mps(drive, body)[0])
    v_gear = float(perf.gearing_speed_limit_mps(drive)[0])
    v = np.linspace(0.0, diagram_end_speed_mps(v_max, v_gear, _kmh_or_none(req.top_speed_kmh)), SPEED_SAMPLES)
    curves = single_axle_curves_n(drive, body, v, req.gradeability_pct)
    target = _kmh_or_none(req.accel_to_kmh)
    run_end = run_end_speed_mps(target, v_max, ACCEL_RUN_END)
    run_v = np.linspace(0.0, max(run_end, 0.0), ACCEL_RUN_SAMPLES)
    if run_end > 0:
        n = run_v.size - 1
        d_n, b_n = parts.single_drive(np.full(n, i), np.full(n, j), np.full(n, k))
        run_t = np.concatenate([[0.0], perf.accel_time_s(d_n, b_n, run_v[1:])])
    else:
        run_v, run_t = np.zeros(1), np.zeros(1)
    ok = np.isfinite(run_t)
    return {"speed_mps": v, **curves, "grade_pct": req.gradeability_pct, "max_speed_mps": v_max,
            "gearing_limit_mps": v_gear, "run_speed_mps": run_v[ok], "run_time_s": run_t[ok],
            "accel_target_mps": target}


def _kmh_or_none(kmh):
    """A road speed [km/h] in m/s, None stays None."""
    from selector.units import kmh_to_mps

    return None if kmh is None else kmh_to_mps(kmh)


def tractive_effort_plot(study, motor: str | None = None, reducer: str | None = None, tyre: str | None = None,
                         path=None, *, front_motor: str | None = None, front_reducer: str | None = None,
                         rear_motor: str | None = None, rear_reducer: str | None = None):
    """Write the tractive-effort diagram and the acceleration run of one design.

    Left: wheel force [kN] against road speed [km/h] of the peak and continuous envelopes, the
    traction limit on the level, road load on the level and on the required grade, the top-speed
    requirement and the vehicle's maximum speed. Right: road speed against time in the
    acceleration run from rest on the level (to accel_to_kmh, or near the maximum speed).
    Two-unit designs show each axle's force, both friction limits and the sum of the delivered
    forces; multi-speed designs one envelope per gear with the run's shift points marked
    (`slot_tractive_effort_plot`).

    Parameters
    ----------
    study : `api.Study`
    motor, reducer, tyre : catalogue part ids (single axle)
    path : output file (.png, .svg or .pdf)
    front_motor, front_reducer, rear_motor, rear_reducer : part ids of the units by slots (with ``tyre``)

    Returns
    -------
    matplotlib.figure.Figure
    """
    from selector.api import design_from_ids
    from selector.units import mps_to_kmh

    if path is None:
        raise TypeError("tractive_effort_plot: path is required")
    check_output_path(path)
    parts = study.parts
    design = design_from_ids(parts, motor, reducer, tyre, front_motor, front_reducer, rear_motor, rear_reducer)
    units = design.units
    if len(units) > 1 or int(parts.reducers.n_gears[units[0][2]]) > 1:
        return slot_tractive_effort_plot(study, design, path)
    _, i, j = units[0]
    k = design.tyre
    ids = (str(parts.motors.part[i]), str(parts.reducers.part[j]), str(parts.tyres.part[k]))
    d = tractive_effort_data(parts, i, j, k)
    fig, (ax, ax2) = _figure(1, 2, size=(12.0, 5.0))
    kmh = mps_to_kmh(d["speed_mps"])
    ax.plot(kmh, d["peak_n"] / 1e3, color="C0", lw=2, label="peak envelope")
    ax.plot(kmh, d["cont_n"] / 1e3, color="C0", lw=1.5, ls="--", label="continuous envelope")
    ymax = max(float(np.max(d["peak_n"])) / 1e3, _road_ymax_kn(d))
    ymax = _draw_traction_limit(ax, kmh, d["traction_n"], ymax)
    _draw_road_and_speeds(ax, kmh, d, parts.problem.requirements)
    _finish_force_axes(ax, kmh, ymax, " + ".join(ids), legend_size=8)
    _draw_run(ax2, d, parts.problem.requirements)
    save_figure(fig, path)
    return fig


def _draw_traction_limit(ax, kmh, trac, ymax: float) -> float:
    """Draw the single-axle traction limit on the level; return the force axis' top [kN] (stretched by
    the curve up to `TRACTION_SHOWN` times the other curves; a curve wholly above is named in the legend)."""
    fin = np.isfinite(trac)
    if fin.any():
        t_max = float(np.max(trac[fin])) / 1e3
        above = float(np.min(trac[fin])) / 1e3 > TRACTION_SHOWN * ymax
        if not above:
            ymax = max(ymax, min(t_max, TRACTION_SHOWN * ymax))
        ax.plot(kmh[fin], trac[fin] / 1e3, color="C3", lw=1.2, ls="-.",
                label="traction limit, level" + (f" (above the chart, >= {np.min(trac[fin]) / 1e3:.1f} kN)"
                                                 if above else ""))
    else:
        ax.plot([], [], color="C3", lw=1.2, ls="-.", label="traction limit, level: none (rear drive, kappa >= 1)")
    return ymax


def _road_ymax_kn(d: dict) -> float:
    """The largest road load drawn (level, and grade when required) [kN]."""
    return max(float(np.max(a)) for a in (d["road_level_n"], d["road_grade_n"]) if a is not None) / 1e3


def _draw_road_and_speeds(ax, kmh, d: dict, req) -> None:
    """Road load on the level and on the required grade; the top-speed requirement and the maximum speed."""
    from selector.units import mps_to_kmh

    ax.plot(kmh, d["road_level_n"] / 1e3, color="0.3", lw=1.2, label="road load, level")
    if d["road_grade_n"] is not None:
        ax.plot(kmh, d["road_grade_n"] / 1e3, color="0.55", lw=1.2, ls=":",
                label=f"road load, {d['grade_pct']:g} % grade")
    top = req.top_speed_kmh
    if top is not None:
        ax.axvline(top, color="C2", lw=1.2, ls="--", label=f"top_speed_kmh required ({top:g} km/h)")
    if np.isfinite(d["max_speed_mps"]):
        ax.axvline(mps_to_kmh(d["max_speed_mps"]), color="C1", lw=1.0, ls=":",
                   label=f"maximum speed ({mps_to_kmh(d['max_speed_mps']):.1f} km/h)")


def _finish_force_axes(ax, kmh, ymax: float, name: str, legend_size: int) -> None:
    """Limits, labels, title, grid and legend of the force chart."""
    ax.set_ylim(0.0, ymax * 1.15 if ymax > 0 else 1.0)
    ax.set_xlim(0.0, float(kmh[-1]))
    ax.set_xlabel("road speed [km/h]")
    ax.set_ylabel("wheel force [kN]")
    ax.set_title(f"Tractive effort: {name}", fontsize=10)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=legend_size, loc="upper right")


def _draw_run(ax2, d: dict, req) -> None:
    """The acceleration run (road speed against time) with its shifts, the target speed and the required time."""
    from selector.units import mps_to_kmh

    t, vs = d["run_time_s"], mps_to_kmh(d["run_speed_mps"])
    ax2.plot(t, vs, color="C0", lw=2, label="acceleration run, level")
    for n, s in enumerate(d.get("shifts", ())):
        ax2.plot([s["time_s"]], [s["speed_kmh"]], ls="none", marker="o", ms=6, mfc="none",
                 mec=AXLE_COLORS[s["axle"]], label="shifts" if n == 0 else "_shift")
    target = d["accel_target_mps"]
    if target is not None:
        ax2.axhline(mps_to_kmh(target), color="0.5", lw=1.0, ls=":",
                    label=f"accel_to_kmh ({mps_to_kmh(target):g} km/h)")
    req_t = req.accel_time_s
    if req_t is not None:
        ax2.axvline(req_t, color="C2", lw=1.2, ls="--", label=f"accel_time_s required ({req_t:g} s)")
    if t.size > 1:
        ax2.annotate(f"{t[-1]:.2f} s", (t[-1], vs[-1]), textcoords="offset points", xytext=(4, -12), fontsize=8)
    ax2.set_xlabel("time [s]")
    ax2.set_ylabel("road speed [km/h]")
    ax2.set_xlim(left=0.0)
    ax2.set_ylim(bottom=0.0)
    ax2.set_title("Acceleration from rest", fontsize=10)
    ax2.grid(True, alpha=0.3)
    ax2.legend(fontsize=8, loc="lower right")


def slot_tractive_effort_data(parts, design) -> dict:
    """Curves of the tractive-effort diagram of a two-unit or multi-speed design (SI arrays).

    Returns speed_mps (grid), units [{axle, gears: (G, s) peak wheel force per gear (NaN above a
    gear's gearing limit), cont_best_n (continuous envelope, best gear), run_gear (gear index at each
    speed in the acceleration run), force_n (wheel force in that gear), limit_n (friction limit at
    the vehicle's acceleration)}], total_n (sum of the delivered axle forces), accel_mps2,
    road_level_n, road_grade_n, grade_pct, max_speed_mps, shifts (the design record's shifts),
    run_speed_mps and run_time_s (the acceleration run, time to reach each speed), accel_target_mps.
    Every force comes from `selector.physics.tractive_effort`; the run from
    `selector.physics.accel_run` with the design's mass (battery included in an energy study).
    """
    from selector.engine.evaluate import evaluate
    from selector.physics.accel_run import accel_run
    from selector.physics.drivetrain import speed_cap_mps, take_axles, take_fields
    from selector.physics.road import road_load_n
    from selector.physics.tractive_effort import design_axle_curves_n, diagram_end_speed_mps, run_end_speed_mps
    from selector.records import shift_rows
    from selector.units import kmh_to_mps

    p = parts.problem
    key = np.asarray([design.key], dtype=np.int64)
    m = evaluate(parts, key, accel=False)
    axles, body = parts.design(key, mass_kg=m["mass_kg"] if p.energy is not None else None)
    v_max = float(kmh_to_mps(m["max_speed_kmh"][0]))
    v_end = diagram_end_speed_mps(v_max, float(speed_cap_mps(axles)[0]), _kmh_or_none(p.requirements.top_speed_kmh))
    v = np.linspace(0.0, v_end, SPEED_SAMPLES)
    target = _kmh_or_none(p.requirements.accel_to_kmh)
    run_end = run_end_speed_mps(target, v_max, ACCEL_RUN_END)
    # the run to the end speed gives the shifts; runs to every grid speed give the time curve
    rep = np.zeros(ACCEL_RUN_SAMPLES - 1, dtype=np.int64)
    run_v = np.linspace(0.0, max(run_end, 0.0), ACCEL_RUN_SAMPLES)
    full = accel_run(axles, body, max(run_end, 0.0))
    if run_end > 0:
        run_t = np.concatenate([[0.0], accel_run(take_axles(axles, rep), take_fields(body, rep), run_v[1:]).time_s])
    else:
        run_v, run_t = np.zeros(1), np.zeros(1)
    ok = np.isfinite(run_t)
    units, forces = design_axle_curves_n(axles, body, v, full.shift_axle[0], full.shift_from_gear[0],
                                         full.shift_speed_mps[0])
    grade = p.requirements.gradeability_pct
    f_grade = None if grade is None else road_load_n(body.mass_kg[0], body.crr[0], body.q_n_s2_m2[0], v, grade)
    return {"speed_mps": v, "units": units, "total_n": forces["total_n"], "accel_mps2": forces["accel_mps2"],
            "road_level_n": forces["road_load_n"], "road_grade_n": f_grade, "grade_pct": grade,
            "max_speed_mps": v_max, "shifts": shift_rows(full, 0), "run_speed_mps": run_v[ok],
            "run_time_s": run_t[ok], "accel_target_mps": target}


AXLE_COLORS = {"front": "C0", "rear": "C4"}
"""Line colour of each axle's curves."""


def slot_tractive_effort_plot(study, design, path):
    """Write the tractive-effort diagram of a two-unit or multi-speed design (`selector.design.Design`).

    Left: each axle's peak envelope per gear (thin), its force in the gear of the acceleration run
    and its friction limit mu N_axle at the vehicle's acceleration (dash-dot), the sum of the
    delivered axle forces (black), road loads, shift points (markers) and the speed lines. Right:
    the acceleration run with its shifts.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from selector.records import design_name, unit_rows
    from selector.units import mps_to_kmh

    check_output_path(path)
    parts = study.parts
    d = slot_tractive_effort_data(parts, design)
    kmh = mps_to_kmh(d["speed_mps"])
    fig, (ax, ax2) = _figure(1, 2, size=(12.0, 5.0))
    two = len(d["units"]) > 1
    ymax = max([0.0] + [_draw_unit(ax, kmh, u, two) for u in d["units"]])
    if two:
        ax.plot(kmh, d["total_n"] / 1e3, color="k", lw=2.0, label="sum of axle forces (delivered)")
        ymax = max(ymax, float(np.max(d["total_n"])) / 1e3)
    for n, s in enumerate(d["shifts"]):
        u = next(x for x in d["units"] if x["axle"] == s["axle"])
        v_s = s["speed_kmh"]
        f_s = float(np.interp(v_s, kmh, np.nan_to_num(u["gears"][s["to_gear"] - 1]))) / 1e3
        ax.plot([v_s], [f_s], ls="none", marker="o", ms=7, mfc="none", mec=AXLE_COLORS[s["axle"]],
                label="shift points (acceleration run)" if n == 0 else "_shift")
        ax.annotate(f"{s['from_gear']}->{s['to_gear']}", (v_s, f_s), textcoords="offset points", xytext=(4, 4),
                    fontsize=7)
    ymax = max(ymax, _road_ymax_kn(d))
    _draw_road_and_speeds(ax, kmh, d, parts.problem.requirements)
    rec = {"motor": None, "units": unit_rows(parts, design), "tyre": str(parts.tyres.part[design.tyre])}
    if not two:
        rec["motor"], rec["reducer"] = rec["units"][0]["motor"], rec["units"][0]["reducer"]
    _finish_force_axes(ax, kmh, ymax, design_name(rec), legend_size=7)
    _draw_run(ax2, d, parts.problem.requirements)
    save_figure(fig, path)
    return fig


def _draw_unit(ax, kmh, u: dict, two: bool) -> float:
    """One unit's peak envelope per gear, its continuous envelope and (two units) its friction limit;
    return the largest peak force drawn [kN]."""
    color = AXLE_COLORS[u["axle"]]
    name = u["axle"] if two else "unit"
    ymax = 0.0
    n_real = int(np.sum(np.any(np.isfinite(u["gears"]), axis=1)))
    for g in range(u["gears"].shape[0]):
        if not np.any(np.isfinite(u["gears"][g])):
            continue
        label = f"{name} peak envelope, gear {g + 1}" if n_real > 1 else f"{name} peak envelope"
        ax.plot(kmh, u["gears"][g] / 1e3, color=color, lw=1.0 + 0.5 * (n_real == 1), alpha=0.8, label=label)
        ymax = max(ymax, float(np.nanmax(u["gears"][g])) / 1e3)
    ax.plot(kmh, u["cont_best_n"] / 1e3, color=color, lw=1.0, ls="--", label=f"{name} continuous envelope")
    if two:
        ax.plot(kmh, u["limit_n"] / 1e3, color=color, lw=1.2, ls="-.", label=f"{u['axle']} friction limit, level")
    return ymax


# ----------------------------------------------------------------------------- frontier

MAX_LABELS = 25
"""Frontier points labelled with their part ids when there are at most this many [-]."""


def _unit_lines(q: dict) -> list[str]:
    """Motor and reducer ids of a frontier point, one line each (per axle for a two-unit design)."""
    if q.get("motor") is not None or not q.get("units"):
        return [q["motor"], q["reducer"]]
    return [f"{u['axle'][0].upper()}: {u['motor']} {u['reducer']}" for u in q["units"]]


def _motor_text(q: dict) -> str:
    if q.get("motor") is not None or not q.get("units"):
        return q["motor"]
    return "/".join(u["motor"] for u in q["units"])


def frontier_plot(result: dict, path):
    """Write the frontier chart of a `frontier.frontier` result.

    A step line through the frontier points (line label "frontier", data = (axis value, time) of
    the points in the JSON order), the points labelled with their part ids when readable (at most
    `MAX_LABELS` points; otherwise the motor id where the motor changes), the
    problem's chosen design (star) and the accel_time_s requirement (horizontal line).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from selector.records import design_name

    check_output_path(path)
    fig, (ax,) = _figure(size=(9.0, 6.0))
    key = result["axis_key"]
    pts = result["points"]
    x = np.array([q[key] for q in pts], dtype=float)
    y = np.array([q["accel_time_s"] for q in pts], dtype=float)
    if pts:
        ax.step(x, y, where="post", color="C0", lw=1.0, alpha=0.6, label="_frontier steps")
        ax.plot(x, y, ls="none", marker="o", ms=5, color="C0", label="frontier")
        full = len(pts) <= MAX_LABELS  # all three ids on every point; else the motor where it changes
        for n, q in enumerate(pts):
            motors = _motor_text(q)
            if full:
                text = "\n".join([*_unit_lines(q), q["tyre"]])
            elif n == 0 or motors != _motor_text(pts[n - 1]):
                text = motors
            else:
                continue
            ax.annotate(text, (x[n], y[n]), textcoords="offset points", xytext=(5, 4), fontsize=6, color="0.25")
    ch = result.get("chosen")
    if ch is not None and ch.get("accel_time_s") is not None:
        ax.plot([ch[key]], [ch["accel_time_s"]], ls="none", marker="*", ms=16, color="C1", mec="k",
                label=f"chosen ({ch['objective']} optimum): {design_name(ch)}")
    req = result.get("requirement")
    if req is not None:
        ax.axhline(req, color="C3", lw=1.2, ls="--", label=f"accel_time_s required ({req:g} s)")
    lim = result.get("limit", {}) or {}
    if lim.get("required") is not None:
        ax.axvline(lim["required"], color="0.4", lw=1.0, ls=":", label=f"{lim['name']} ({lim['required']:g})")
    ax.set_xlabel(f"{result['axis_label']} [{result['axis_unit']}]")
    ax.set_ylabel(f"0-{result['accel_to_kmh']:g} km/h time [s]")
    ax.set_title(f"{result['problem']}\n{len(pts)} non-dominated designs", fontsize=10)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, loc="upper right")
    save_figure(fig, path)
    return fig


# ----------------------------------------------------------------------------- sweeps

def sweep_plot(result: dict, path):
    """Write the objective against the first swept parameter, one line per value of the others.

    Lines are labelled by the other parameters' values (line data = the objective of each
    feasible point in grid order); a marker and the new part ids where the chosen parts change
    along a line; infeasible points are left out of the lines.

    Returns
    -------
    matplotlib.figure.Figure
    """
    check_output_path(path)
    fig, (ax,) = _figure(size=(9.0, 6.0))
    keys = [q["key"] for q in result["parameters"]]
    first, others = keys[0], keys[1:]
    groups: dict[tuple, list[dict]] = {}
    for row in result["rows"]:
        groups.setdefault(tuple(row[k] for k in others), []).append(row)
    obj = result["objective"]
    for n, (combo, rows) in enumerate(groups.items()):
        rows = sorted(rows, key=lambda r: r[first])
        label = ", ".join(f"{v:g}" for v in combo) or obj["minimize"]
        ok = [r for r in rows if r["status"] == "optimal"]
        color = f"C{n % 10}"
        ax.plot([r[first] for r in ok], [r["objective"] for r in ok], marker=".", color=color, label=label)
        prev = None
        for r in ok:
            ids = tuple(r.get(c) for c in ("motor", "reducer", "front_motor", "front_reducer", "rear_motor",
                                             "rear_reducer", "tyre") if r.get(c) is not None)
            if prev is not None and ids != prev:
                changed = [new for new, old in zip(ids, prev, strict=False) if new != old]
                ax.plot([r[first]], [r["objective"]], ls="none", marker="D", ms=7, mfc="none", mec=color,
                        label="_change")
                ax.annotate("\n".join(changed), (r[first], r["objective"]), textcoords="offset points",
                            xytext=(4, 6), fontsize=6, color=color)
            prev = ids
    infeasible = sum(r["status"] == "infeasible" for r in result["rows"])
    stopped = sum(r["status"] == "time_limit" for r in result["rows"])
    ax.set_xlabel(f"{first} [{result['parameters'][0]['unit']}]")
    ax.set_ylabel(f"optimal {obj['minimize']} [{obj['unit']}]")
    note = "".join(f"; {n} {what} point{'s' if n != 1 else ''} not drawn"
                   for n, what in ((infeasible, "infeasible"), (stopped, "time-limited")) if n)
    ax.set_title(f"{result['problem']}\nsweep of {len(result['rows'])} points{note}; diamonds: chosen parts change",
                 fontsize=10)
    ax.grid(True, alpha=0.3)
    if len(groups) > 1 or others:
        units = {q["key"]: q["unit"] for q in result["parameters"]}
        ax.legend(fontsize=8, title=", ".join(f"{k} [{units[k]}]" for k in others) if others else None)
    save_figure(fig, path)
    return fig
