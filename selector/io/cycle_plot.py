"""The cycle's operating points of a design over its motors' envelopes (and efficiency maps).

`simulate --plot FILE` of an energy study also writes this chart to ``<stem>-cycle<suffix>`` beside
FILE: per drive unit, the motor torque against motor speed at every moving interval of the study's
driving cycle (one colour per gear), over the peak envelope (motoring and braking), the continuous
envelope and, for a motor with an efficiency map, the map's efficiency contours. The operating points
come from the energy model (`selector.engine.energy.design_trace`, i.e.
`selector.physics.energy.cycle_trace`); this module only draws them. Written through the same output
guard as every plot (`selector.io.plots.check_output_path`: inputs are never overwritten).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from selector.io.plots import _figure, check_output_path, save_figure

ENVELOPE_SAMPLES = 300
"""Motor speeds sampled per envelope curve [-]."""

AXLE_INDEX = {"front": 0, "rear": 1}
"""Position of each axle's unit in the trace arrays (`selector.physics.energy.EnergyTrace`)."""


def cycle_plot_path(path) -> Path:
    """The file the operating-point chart of ``path`` goes to: ``<stem>-cycle<suffix>`` in the same folder."""
    p = Path(path)
    return p.with_name(f"{p.stem}-cycle{p.suffix}")


def cycle_points_data(study, design) -> dict:
    """Operating points and envelopes of each drive unit of ``design`` over the study's cycle.

    Parameters
    ----------
    study : `selector.api.Study` with an [energy] table
    design : `selector.design.Design`

    Returns
    -------
    dict
        ``cycle`` (name) and ``units``: one dict per present unit with ``axle``, ``motor`` (part id),
        ``speed_rpm`` and ``torque_nm`` of the points [rev/min], [N m], ``gear`` (1-based), the
        envelope ``env_speed_rpm`` with ``peak_nm`` and ``cont_nm`` [N m], and ``map`` (None, or
        ``speed_rpm``, ``torque_nm``, ``efficiency_pct`` of its grid).
    """
    from selector.engine.energy import design_trace
    from selector.engine.evaluate import evaluate
    from selector.physics.motor import envelope_torque_nm
    from selector.units import rad_s_to_rpm

    parts = study.parts
    key = np.asarray(design.key, dtype=np.int64)
    mass = float(evaluate(parts, key[None, :], accel=False)["mass_kg"][0])  # with the sized battery
    trace = design_trace(parts, key, mass)
    moving = trace.speed_mps > 0
    mo = parts.motors
    units = []
    for axle, m, _ in design.units:
        u = AXLE_INDEX[axle]
        ok = moving & (trace.gear[u, 0] > 0) & np.isfinite(trace.motor_torque_nm[u, 0])
        w = np.linspace(0.0, mo.max_speed_rad_s[m], ENVELOPE_SAMPLES)
        env = [envelope_torque_nm(w, t, p, mo.decline_rad_s[m], mo.decline_exponent[m], mo.max_speed_rad_s[m])
               for t, p in ((mo.torque_nm[m], mo.power_w[m]), (mo.cont_torque_nm[m], mo.cont_power_w[m]))]
        grid = None
        if mo.map_index[m] >= 0:
            g = mo.maps[mo.map_index[m]]
            grid = {"speed_rpm": rad_s_to_rpm(g.speed_rad_s), "torque_nm": np.asarray(g.torque_nm),
                    "efficiency_pct": 100.0 * np.asarray(g.efficiency), "mirrored": g.mirrored}
        units.append({"axle": axle, "motor": str(mo.part[m]),
                      "speed_rpm": rad_s_to_rpm(trace.motor_speed_rad_s[u, 0][ok]),
                      "torque_nm": trace.motor_torque_nm[u, 0][ok], "gear": trace.gear[u, 0][ok],
                      "env_speed_rpm": rad_s_to_rpm(w), "peak_nm": env[0], "cont_nm": env[1], "map": grid})
    return {"cycle": parts.problem.energy.cycle_data.name, "units": units}


def cycle_points_plot(study, design, path):
    """Write the operating-point chart of ``design`` (see the module docstring) to ``path``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    check_output_path(path)
    data = cycle_points_data(study, design)
    fig, axes = _figure(1, len(data["units"]), size=(6.5 * len(data["units"]), 5.0))
    for ax, q in zip(axes, data["units"], strict=True):
        _draw_unit(ax, q, data["cycle"])
    save_figure(fig, path)
    return fig


def _draw_unit(ax, q: dict, cycle: str) -> None:
    """One unit's panel: map contours, envelopes, the cycle's points by gear."""
    if q["map"] is not None:
        g = q["map"]
        cs = ax.contour(g["speed_rpm"], g["torque_nm"], g["efficiency_pct"].T, levels=8, colors="0.6",
                        linewidths=0.7)
        ax.clabel(cs, fontsize=7, fmt="%.0f %%")
        if g["mirrored"]:  # the map is read at |T| when generating
            ax.contour(g["speed_rpm"], -g["torque_nm"], g["efficiency_pct"].T, levels=cs.levels, colors="0.8",
                       linewidths=0.5)
    ax.plot(q["env_speed_rpm"], q["peak_nm"], color="k", label="peak envelope")
    ax.plot(q["env_speed_rpm"], -q["peak_nm"], color="k", linestyle=":", label="peak envelope, braking")
    ax.plot(q["env_speed_rpm"], q["cont_nm"], color="k", linestyle="--", label="continuous envelope")
    for gear in np.unique(q["gear"]):
        sel = q["gear"] == gear
        ax.scatter(q["speed_rpm"][sel], q["torque_nm"][sel], s=6, alpha=0.6, label=f"cycle points, gear {gear}")
    ax.axhline(0.0, color="0.5", linewidth=0.5)
    ax.set_xlabel("motor speed [rpm]")
    ax.set_ylabel("motor torque [N m]")
    ax.set_title(f"{q['axle']} unit, motor {q['motor']}: {cycle}")
    ax.legend(fontsize=7, loc="upper right")


def write_cycle_plot(study, plot_path, result, **ids):
    """With an [energy] table: write the operating-point chart beside ``plot_path`` (`cycle_plot_path`)
    for the design named by ``ids`` (as `selector.api.simulate`) and record it in ``result`` as
    ``cycle_plot``. Returns the path written, or None without an [energy] table."""
    if study.parts.problem.energy is None:
        return None
    from selector.api import design_from_ids

    path = cycle_plot_path(plot_path)
    check_output_path(path)
    design = design_from_ids(study.parts, **ids)
    if not all(study.parts.motors.has_loss_model[m] for _, m, _ in design.units):
        return None  # a motor without a loss model has no operating points (simulate reports it)
    cycle_points_plot(study, design, path)
    result.add_output("cycle_plot", str(path))
    return path
