"""The catalogue schema as data: one table of columns per catalogue kind.

`catalog.py` checks every CSV against these tables; the documentation renders from them
(`schema_markdown`). Units are in the column names; values are SI except where the unit says
otherwise (kW, rpm, %, N/kN), which the physics converts at the edge.

Rules understood by the loader (`Column.rule`):

- ``"> 0"``, ``">= 0"``: numeric bounds;
- ``"(0, 100]"``: 0 < value <= 100;
- ``"non-empty"``: any non-blank text;
- ``"unique, non-empty"``: non-blank text, unique within the file (the part id);
- ``"ISO metric size"``: e.g. ``205/55R16`` (see `selector.physics.tyres.parse_tyre_size`);
- ``"ISO speed symbol"``: a key of `SPEED_SYMBOL_KMH`;
- ``"load index 60..130"``: a whole number that is a key of `LOAD_INDEX_KG`;
- ``"CSV file"``: text naming a file relative to the catalogue, loaded by the catalogue loader
  (``efficiency_map``: `selector.io.efficiency_map`).

Every number also has ``limits`` (outside = impossible, exit 2) and may have ``usual`` (outside =
a warning); `RANGES` holds them as one table (common practice, no published source: wide enough for
any road vehicle from a campus cart to a heavy truck, narrow enough to keep every model coefficient
within the solver's numeric range). Text cells must be printable (no control characters) and at
most `selector.io.files.MAX_CELL_CHARS` long; tyre sizes at most `MAX_SIZE_CHARS`.
"""

from __future__ import annotations

from dataclasses import dataclass

KINDS = ("motors", "reducers", "tyres")
"""Catalogue kinds, in the order they are loaded and reported."""


@dataclass(frozen=True)
class Column:
    """One catalogue column."""

    name: str
    """Column name in the CSV header (unit suffix included)."""
    type: str
    """``"float"``, ``"int"`` or ``"str"``."""
    unit: str
    """Unit shown in messages and docs; ``"-"`` for none."""
    required: bool
    """True: the column must be in the header and every cell filled."""
    default: object
    """Value (or rule) used for an empty cell when not required; None when required."""
    rule: str
    """Validity rule (see the module docstring)."""
    description: str
    """One line for the docs."""
    limits: tuple[float, float] | None = None
    """(lo, hi): a value outside is impossible for a road-vehicle part, or outside what the solver can
    take in (exit 2, "must be between lo and hi"); None = only the rule."""
    usual: tuple[float, float] | None = None
    """(lo, hi): a value outside is loaded with a `CatalogWarning` (unusual: check it); None = no warning
    beyond the catalogue's own plausibility checks."""


_PART = Column("part", "str", "-", True, None, "unique, non-empty",
               "Orderable part id, unique within the file (also the tie-break order).")
_SUPPLIER = Column("supplier", "str", "-", True, None, "non-empty", "Supplier name.")
_MASS = Column("mass_kg", "float", "kg", True, None, "> 0", "Mass of one part.")
_COST = Column("unit_cost", "float", "currency", True, None, ">= 0",
               "Price of one part in the catalogue currency.")
_LEAD = Column("lead_time_weeks", "float", "weeks", True, None, ">= 0",
               "Delivery lead time (0 = in stock).")

_MOTOR_LOSS_COLUMNS = (
    Column("loss_copper_w_per_nm2", "float", "W/(N m)^2", False, None, ">= 0",
           "Copper-loss coefficient k_c of the motor loss model P_loss = k_c T^2 + k_i w + k_w w^3 + C0 "
           "(T in N m, w in rad/s; Larminie and Lowry, Electric Vehicle Technology Explained, 2nd ed., 2012), "
           "for energy studies. Give all four loss_* columns or none (empty = no loss model)."),
    Column("loss_iron_nm", "float", "N m", False, None, ">= 0",
           "Iron-loss coefficient k_i of the loss model (W per rad/s = N m)."),
    Column("loss_windage_w_s3", "float", "W s^3", False, None, ">= 0",
           "Windage-loss coefficient k_w of the loss model (W per (rad/s)^3 = W s^3)."),
    Column("loss_constant_w", "float", "W", False, None, ">= 0", "Constant loss C0 of the loss model."),
    Column("efficiency_map", "str", "-", False, None, "CSV file",
           "Measured efficiency map: path of a CSV file, relative to this catalogue, with columns speed_rpm, "
           "torque_nm, efficiency_pct on a rectangular grid; read with bilinear interpolation, never "
           "extrapolated (points outside it are errors of the design). Takes precedence over the loss "
           "columns; empty = none."),
)
"""Optional motor columns for energy studies (loss model and efficiency map)."""

SCHEMA: dict[str, tuple[Column, ...]] = {
    "motors": (
        _PART,
        _SUPPLIER,
        Column("peak_torque_nm", "float", "N m", True, None, "> 0", "Peak (short-time) shaft torque."),
        Column("peak_power_kw", "float", "kW", True, None, "> 0", "Peak (short-time) shaft power."),
        Column("max_speed_rpm", "float", "rpm", True, None, "> 0", "Maximum shaft speed."),
        Column("cont_torque_nm", "float", "N m", True, None, "> 0",
               "Continuous shaft torque; must be <= peak_torque_nm."),
        Column("cont_power_kw", "float", "kW", True, None, "> 0",
               "Continuous shaft power; must be <= peak_power_kw."),
        Column("decline_speed_rpm", "float", "rpm", False, "max_speed_rpm", "> 0",
               "Speed above which power falls as (decline/speed)^exponent; empty = max_speed_rpm "
               "(constant power up to max speed). Corner speed <= decline speed <= max speed."),
        Column("decline_exponent", "float", "-", False, 1.0, "> 0",
               "Exponent k of the power decline above decline_speed_rpm; empty = 1."),
        _MASS,
        Column("rotor_inertia_kgm2", "float", "kg m^2", True, None, "> 0", "Rotor polar moment of inertia."),
        _COST,
        _LEAD,
        *_MOTOR_LOSS_COLUMNS,
    ),
    "reducers": (
        _PART,
        _SUPPLIER,
        Column("ratio", "float", "-", True, None, "> 0",
               "Reduction ratio G = motor speed / wheel speed; the first gear of a multi-speed gearbox."),
        Column("efficiency_pct", "float", "%", True, None, "(0, 100]", "Mechanical efficiency eta (first gear)."),
        Column("max_input_torque_nm", "float", "N m", True, None, "> 0", "Rated input torque."),
        Column("max_input_speed_rpm", "float", "rpm", True, None, "> 0", "Rated input speed."),
        _MASS,
        _COST,
        _LEAD,
        Column("ratio_2", "float", "-", False, None, "> 0",
               "Second gear ratio of a two- or three-speed gearbox, strictly below ratio; empty = single speed."),
        Column("ratio_3", "float", "-", False, None, "> 0",
               "Third gear ratio, strictly below ratio_2 (needs ratio_2); empty = at most two speeds."),
        Column("efficiency_2_pct", "float", "%", False, "efficiency_pct", "(0, 100]",
               "Efficiency in second gear; empty = efficiency_pct."),
        Column("efficiency_3_pct", "float", "%", False, "efficiency_pct", "(0, 100]",
               "Efficiency in third gear; empty = efficiency_pct."),
        Column("shift_time_s", "float", "s", False, None, ">= 0",
               "Torque interruption per upshift; required when ratio_2 is given (0 = seamless)."),
    ),
    "tyres": (
        _PART,
        _SUPPLIER,
        Column("size", "str", "-", True, None, "ISO metric size",
               "ISO metric size designation, e.g. 205/55R16, 205/55 R16, 225/50ZR16, 235/65R16C."),
        Column("load_index", "int", "-", True, None, "load index 60..130",
               "Load index (ISO 4000-1 / UN ECE R30), whole number 60..130."),
        Column("speed_symbol", "str", "-", True, None, "ISO speed symbol",
               "Speed symbol (ISO 4000-1 / UN ECE R30), e.g. H = 210 km/h."),
        Column("rr_coefficient_n_per_kn", "float", "N/kN", True, None, "> 0",
               "Rolling-resistance coefficient (EU label RRC); Crr = value / 1000."),
        _MASS,
        _COST,
        _LEAD,
    ),
}
"""Canonical columns per catalogue kind, in file order."""

DERIVED_COLUMNS: dict[str, tuple[Column, ...]] = {
    "motors": (
        Column("efficiency_map_grid", "object", "-", False, None, "derived",
               "The efficiency map named by efficiency_map, loaded and validated "
               "(`selector.physics.losses.EfficiencyGrid`; speeds in rad/s); empty when none."),
    ),
    "reducers": (),
    "tyres": (
        Column("diameter_m", "float", "m", False, None, "derived",
               "Unloaded diameter D = rim code x 25.4 mm + 2 x width x aspect / 100."),
        Column("speed_rating_kmh", "float", "km/h", False, None, "derived", "Reference speed of speed_symbol."),
        Column("load_capacity_kg", "float", "kg", False, None, "derived", "Maximum load per tyre of load_index."),
    ),
}
"""Columns the loader adds (a file must not contain them)."""

MAX_SIZE_CHARS = 40
"""Longest tyre size designation accepted [characters] (``315/80 R22.5 C`` has 14)."""

RANGES: dict[str, dict[str, tuple]] = {
    # kind: {column: (limits, usual)}; common practice, no published source (see the module docstring)
    "motors": {
        "peak_torque_nm": ((0.0, 1e5), (1.0, 1e4)),
        "peak_power_kw": ((0.0, 1e4), (0.1, 2000.0)),
        "max_speed_rpm": ((0.0, 2e5), (500.0, 40000.0)),
        "cont_torque_nm": ((0.0, 1e5), None),
        "cont_power_kw": ((0.0, 1e4), None),
        "decline_speed_rpm": ((0.0, 2e5), None),
        "decline_exponent": ((0.0, 10.0), (0.2, 4.0)),
        "mass_kg": ((0.0, 1e4), None),
        "rotor_inertia_kgm2": ((0.0, 100.0), None),
        "unit_cost": ((0.0, 1e9), None),
        "lead_time_weeks": ((0.0, 520.0), (0.0, 104.0)),
        "loss_copper_w_per_nm2": ((0.0, 1e3), None),
        "loss_iron_nm": ((0.0, 1e4), None),
        "loss_windage_w_s3": ((0.0, 1e3), None),
        "loss_constant_w": ((0.0, 1e6), None),
    },
    "reducers": {
        "ratio": ((0.0, 500.0), None),
        "max_input_torque_nm": ((0.0, 1e6), None),
        "max_input_speed_rpm": ((0.0, 2e5), None),
        "mass_kg": ((0.0, 1e4), None),
        "unit_cost": ((0.0, 1e9), None),
        "lead_time_weeks": ((0.0, 520.0), (0.0, 104.0)),
        "ratio_2": ((0.0, 500.0), None),
        "ratio_3": ((0.0, 500.0), None),
        "shift_time_s": ((0.0, 10.0), (0.0, 2.0)),
    },
    "tyres": {
        "rr_coefficient_n_per_kn": ((0.0, 100.0), None),
        "mass_kg": ((0.0, 1000.0), (0.0, 200.0)),
        "unit_cost": ((0.0, 1e9), None),
        "lead_time_weeks": ((0.0, 520.0), (0.0, 104.0)),
    },
}
"""Limits (outside: an error) and usual ranges (outside: a warning) per numeric column, in the
column's unit. Tyre diameters (derived from the size) are checked in the catalogue loader against
`TYRE_DIAMETER_LIMITS_M` and `TYRE_DIAMETER_USUAL_M`."""

TYRE_DIAMETER_LIMITS_M = (0.2, 2.5)
"""Unloaded tyre diameters outside this range are refused [m] (common practice, no published source)."""
TYRE_DIAMETER_USUAL_M = (0.4, 1.3)
"""Unloaded tyre diameters outside this range are warned about [m] (passenger car to light truck)."""
CONSTANT_POWER_RATIO_USUAL = 20.0
"""max_speed_rpm / corner speed above this is warned about [-] (traction motors: about 2..6; hand-made
test motors reach 13)."""
CONSTANT_POWER_RATIO_LIMIT = 100.0
"""max_speed_rpm / corner speed above this is refused [-]: peak power and peak torque cannot belong
to one motor (e.g. 2000 N m with 5 kW)."""


def _with_ranges(schema: dict) -> dict:
    from dataclasses import replace

    out = {}
    for kind, cols in schema.items():
        table = RANGES.get(kind, {})
        out[kind] = tuple(replace(c, limits=table[c.name][0], usual=table[c.name][1]) if c.name in table else c
                          for c in cols)
    return out


SCHEMA = _with_ranges(SCHEMA)

SOURCE_ROW = "source_row"
"""Column the loader adds to every table: the line number of the row in its file."""


def columns(kind: str) -> tuple[Column, ...]:
    """Canonical columns of one catalogue kind.

    Parameters
    ----------
    kind : str
        ``"motors"``, ``"reducers"`` or ``"tyres"``.

    Returns
    -------
    tuple of Column
    """
    try:
        return SCHEMA[kind]
    except KeyError:
        raise ValueError(f"unknown catalogue kind {kind!r}; expected one of {', '.join(KINDS)}") from None


def _span(bounds: tuple[float, float] | None) -> str:
    """``lo .. hi`` of a limits or usual range (closed interval, column unit); empty when None."""
    return "" if bounds is None else f"{bounds[0]:g} .. {bounds[1]:g}"


def schema_markdown(kind: str | None = None) -> str:
    """Render the schema as markdown tables (for README / DEVELOPERS.md).

    Parameters
    ----------
    kind : str or None
        One catalogue kind, or None for all three (each under a ``### kind.csv`` heading).

    Returns
    -------
    str
        Markdown text.
    """
    kinds = KINDS if kind is None else (kind,)
    parts = []
    for k in kinds:
        lines = []
        if kind is None:
            lines += [f"### {k}.csv", ""]
        lines += ["| column | type | unit | required | default | rule | limits (error) | usual (else warning) "
                  "| description |",
                  "|---|---|---|---|---|---|---|---|---|"]
        for c in columns(k) + DERIVED_COLUMNS[k]:
            required = "derived" if c.rule == "derived" else ("yes" if c.required else "no")
            if c.default is None:
                default = ""
            else:
                default = f"= {c.default}" if isinstance(c.default, str) else f"{c.default:g}"
            lines.append(f"| `{c.name}` | {c.type} | {c.unit} | {required} | {default} | {c.rule} | "
                         f"{_span(c.limits)} | {_span(c.usual)} | {c.description} |")
        parts.append("\n".join(lines))
    return "\n\n".join(parts) + "\n"
