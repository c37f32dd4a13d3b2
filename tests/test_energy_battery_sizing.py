"""Regression: a design never meets the range without a battery, and never gets a free one.

On the UDDS a light van study had designs whose heavier batteries stop them following the cycle
(consumption infinite): the battery sizing's geometric scan stepped over the window of batteries
that cover the range and reported "no battery", while the range scan found one; the design then met
the range with a NaN battery that the cost objective counted as free and weightless. Each design's
battery must be finite whenever its range requirement is met, and the mass spiral must close:
u sigma m_b = R c(m_b) to the sizing tolerance (closed form of the range equation: the battery's
usable energy covers the range at the consumption it causes).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from selector.api import open_study, simulate, solve

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def udds_study(tmp_path_factory):
    text = (ROOT / "problems" / "delivery_van_energy.toml").read_text(encoding="utf-8")
    text = re.sub(r'cycle = "[a-z0-9_]+"', 'cycle = "udds"', text)
    text = text.replace('"../catalogs/', f'"{(ROOT / "catalogs").as_posix()}/')
    path = tmp_path_factory.mktemp("udds") / "van.toml"
    path.write_text(text, encoding="utf-8")
    return open_study(path)


def _spiral_closes(e: dict, range_km: float, sigma: float, u: float) -> None:
    usable_wh = e["battery_kwh"] * 1000.0 * u
    # records keep 10 significant digits
    assert e["battery_mass_kg"] == pytest.approx(e["battery_kwh"] * 1000.0 / sigma, rel=1e-9)
    assert usable_wh >= range_km * e["wh_per_km"] * (1 - 1e-6)
    assert usable_wh <= range_km * e["wh_per_km"] * (1 + 1e-6)


def test_optimum_carries_its_battery(udds_study):
    energy = udds_study.parts.problem.energy
    res = solve(udds_study)
    assert res["status"] == "optimal"
    for d in res["designs"]:
        e = d["energy"]
        assert all(e[k] is not None and np.isfinite(e[k]) and e[k] > 0
                   for k in ("wh_per_km", "battery_kwh", "battery_mass_kg", "battery_cost"))
        _spiral_closes(e, energy.range_km, energy.specific_energy_wh_per_kg, energy.usable_fraction)


def test_design_of_the_reported_case_is_sized_or_misses_the_range(udds_study):
    # the design the faulty sizing reported as the optimum with no battery
    rec = simulate(udds_study, "QM-M063", "FG-S20-121", "TR-T1406")
    energy = udds_study.parts.problem.energy
    e = rec["energy"]
    range_row = next(r for r in rec["requirements"] if r["name"] == "range_km")
    if e["battery_kwh"] is None:
        assert not range_row["met"] and not rec["feasible"]
    else:
        _spiral_closes(e, energy.range_km, energy.specific_energy_wh_per_kg, energy.usable_fraction)
