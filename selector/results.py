"""Result objects of the Python API: thin wrappers over the JSON-ready result dicts.

Each result keeps the dict the library builds (the JSON contract documented in README.md) and
offers ``status``, ``designs``, ``to_dict()`` (that contract, exactly what ``--format json``
prints) and ``to_frame()`` (a pandas DataFrame, one row per design: a column per part slot, the
metrics with units in their names and one ``<requirement>_margin_pct`` column per requirement and
part-rating check). Item access (``result["objective"]``) reads the dict.

pandas is imported only by ``to_frame``.
"""

from __future__ import annotations

import copy
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["ExplainResult", "FrontierResult", "Result", "ShortlistResult", "SimulateResult", "SolveResult",
           "SweepResult", "design_row"]

SLOTS = ("motor", "reducer", "tyre")
"""Part slots of a single-unit design record (top-level keys holding part ids)."""
METRICS = ("cost", "mass_kg", "lead_time_weeks")
"""Top-level metrics of a design record, units in the names (cost in catalogue currency)."""


def _number_or_flag(v) -> bool:
    return isinstance(v, (bool, int, float)) or v is None


def design_row(rec: dict) -> dict:
    """One flat row of a design record: part slots, metrics and margins (units in the names).

    Parameters
    ----------
    rec : dict
        A design record of the JSON contract (``designs[]`` of solve, simulate's design, a
        frontier point).

    Returns
    -------
    dict
        Part slots (``motor``, ``reducer``, ``tyre``; with two drive units also
        ``<axle>_motor`` and ``<axle>_reducer``), then ``cost`` [currency], ``mass_kg`` [kg],
        ``lead_time_weeks`` [weeks], the performance figures (``max_speed_kmh`` [km/h], ...,
        ``accel_time_s`` [s]) and any other numeric figures of the record, then one
        ``<name>_margin_pct`` [%] per requirement and part-rating check.
    """
    row: dict[str, Any] = {}
    units = rec.get("units")
    if isinstance(units, list) and len(units) > 1:
        for u in units:
            axle = u.get("axle", f"unit{len(row)}")
            for slot in ("motor", "reducer"):
                if slot in u:
                    row[f"{axle}_{slot}"] = u[slot]
    for slot in SLOTS:
        v = rec.get(slot)
        if v is None and isinstance(units, list) and len(units) == 1:
            v = units[0].get(slot)
        if v is not None or slot not in row:
            row[slot] = v
    for key in METRICS:
        if key in rec:
            row[key] = rec[key]
    for group in ("performance", "energy"):
        sub = rec.get(group)
        if isinstance(sub, dict):
            for k, v in sub.items():
                if _number_or_flag(v) and k not in row:
                    row[k] = v
    skip = set(SLOTS) | {"units", "parts", "requirements", "checks", "performance", "energy", "design", "unmet"}
    for k, v in rec.items():
        if k not in skip and k not in row and _number_or_flag(v):
            row[k] = v
    for r in list(rec.get("requirements") or []) + list(rec.get("checks") or []):
        if "margin_pct" in r:
            row[f"{r['name']}_margin_pct"] = r["margin_pct"]
    return row


class Result:
    """A result of the Python API (base class): the JSON-ready dict and its views."""

    def __init__(self, data: dict):
        self._data = data

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.data.get('problem')!r}: status {self.status!r}, {len(self.designs)} " \
               f"design{'s' if len(self.designs) != 1 else ''}>"

    def __getitem__(self, key: str):
        return self._data[key]

    def __contains__(self, key: str) -> bool:
        return key in self._data

    @property
    def data(self) -> dict:
        """The result dict itself (not a copy; prefer `to_dict`)."""
        return self._data

    @property
    def status(self) -> str:
        """"optimal", "infeasible" or "time_limit" (see each result class)."""
        return self._data["status"]

    @property
    def designs(self) -> list[dict]:
        """The designs (JSON design records), best first."""
        return self._data.get("designs", [])

    @property
    def caution(self) -> str:
        """The safety caution every recommending output carries."""
        return self._data.get("caution", "")

    def to_dict(self) -> dict:
        """The JSON contract (README.md): exactly what ``selector COMMAND --format json`` prints (a copy)."""
        return copy.deepcopy(self._data)

    def to_json(self) -> str:
        """`to_dict` as JSON text (infinite values are null)."""
        from selector.records import dumps

        return dumps(self._data)

    def to_frame(self) -> pd.DataFrame:
        """One row per design: part slots, metrics and margins, units in the column names (see `design_row`)."""
        import pandas as pd

        rows = [{"rank": n, **design_row(rec)} for n, rec in enumerate(self.designs, 1)]
        return pd.DataFrame(rows)

    def add_output(self, key: str, path: str) -> None:
        """Record a file written from this result (e.g. ``plot``, ``output``); it appears in `to_dict`."""
        self._data[key] = str(path)


class SolveResult(Result):
    """The optimal design(s) of a study (`selector.solve`).

    ``status``: "optimal" (proved), "infeasible" (no design meets every requirement; ``diagnosis``
    says why) or "time_limit" (best designs found, with a proved ``bound``).
    """

    @property
    def objective(self) -> dict:
        """{minimize, unit, metric, value}: what is minimised and the optimum's value."""
        return self._data["objective"]

    @property
    def diagnosis(self) -> dict | None:
        """Why an infeasible study has no design (as in explain), or None."""
        return self._data.get("diagnosis")


class ShortlistResult(SolveResult):
    """The N best designs with their bills of materials (`selector.shortlist`)."""

    @property
    def bom(self) -> list[dict]:
        """One bill of materials per design, aligned with `designs`."""
        return self._data["bom"]

    def to_frame(self) -> pd.DataFrame:
        """As `Result.to_frame`, plus ``cost_per_vehicle``, ``vehicles`` and ``extended_cost`` [currency]."""
        df = super().to_frame()
        for key in ("cost_per_vehicle", "vehicles", "extended_cost"):
            df[key] = [b[key] for b in self.bom]
        return df


class SimulateResult(Result):
    """One design evaluated (`selector.simulate`).

    ``status``: "feasible" when it meets every requirement and part rating (the definition solve
    uses), else "infeasible" (``unmet`` says why).
    """

    @property
    def status(self) -> str:
        return "feasible" if self.feasible else "infeasible"

    @property
    def feasible(self) -> bool:
        """True when the design meets every requirement and part rating."""
        return bool(self._data["feasible"])

    @property
    def unmet(self) -> list[dict]:
        """[{name, why}] for each requirement or rating not met."""
        return self._data["unmet"]

    @property
    def designs(self) -> list[dict]:
        return [self._data["design"]]


class ExplainResult(Result):
    """What binds, what each requirement costs, near misses and, for an infeasible study, why
    (`selector.explain`). ``status``: "optimal" or "infeasible"; ``designs``: the optimum, or none."""

    @property
    def designs(self) -> list[dict]:
        d = self._data.get("design")
        return [] if d is None else [d]

    @property
    def closest(self) -> dict | None:
        """The closest design of an infeasible study (least normalised shortfall), or None."""
        return self._data.get("closest")

    def requirements_frame(self) -> pd.DataFrame:
        """One row per stated requirement: required, achieved, margin, binding, active, and the
        objective saved when it is dropped or loosened (in the objective's unit)."""
        import pandas as pd

        rows = []
        for r in self._data["requirements"]:
            row = {k: r.get(k) for k in ("name", "unit", "sense", "required", "achieved", "margin", "margin_pct",
                                         "met", "binding", "active") if k in r}
            for how, p in (r.get("price") or {}).items():
                row[f"saved_when_{how}"] = p.get("saved")
                row[f"saved_when_{how}_pct"] = p.get("saved_pct")
            rows.append(row)
        return pd.DataFrame(rows)


class FrontierResult(Result):
    """The exact cost (or mass, or energy per km) versus acceleration-time frontier (`selector.frontier`).

    ``status``: "optimal" (the frontier is exact and has points), "infeasible" (no design meets
    the other requirements and reaches accel_to_kmh) or "time_limit" (the time limit stopped the
    tracing: the points are the exact frontier's first ones). ``designs``: the points, by the axis value.
    """

    @property
    def status(self) -> str:
        return self._data["status"]

    @property
    def designs(self) -> list[dict]:
        return self._data["points"]

    def to_frame(self) -> pd.DataFrame:
        """As `Result.to_frame` (``accel_time_s`` [s] is the time axis), plus ``meets_accel_time_s`` and ``chosen``."""
        df = super().to_frame()
        for key in ("meets_accel_time_s", "chosen"):
            df[key] = [p[key] for p in self.designs]
        return df


class SweepResult(Result):
    """Exact re-solves over a grid of problem values (`selector.sweep`).

    ``status``: the rows' status when they all share it ("optimal", "infeasible" or "time_limit"),
    else "mixed" (the rows keep their own status). ``designs``: the rows (one per grid point, grid order).
    """

    @property
    def status(self) -> str:
        st = {r["status"] for r in self._data["rows"]}
        return st.pop() if len(st) == 1 else "mixed"

    @property
    def designs(self) -> list[dict]:
        return self._data["rows"]

    def to_frame(self) -> pd.DataFrame:
        """One row per grid point: the swept keys (units in the names), status, objective, the parts,
        ``cost`` [currency], ``mass_kg`` [kg], ``accel_time_s`` [s], in energy studies
        ``energy_wh_per_km`` [Wh/km], ``battery_kwh`` [kWh], ``battery_mass_kg`` [kg] and ``battery_cost``
        [currency], and ``reason`` (infeasible points)."""
        import pandas as pd

        cols = list(self._data["columns"])
        if any("reason" in r for r in self._data["rows"]):
            cols.append("reason")
        return pd.DataFrame([{c: r.get(c) for c in cols} for r in self._data["rows"]], columns=cols)
