"""Catalogue loading and validation (selector.catalog, selector.schema)."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from selector.errors import InputError
from selector.inputs import Catalogs
from selector.io.catalog import CatalogWarning, load_catalog, load_catalogs
from selector.io.schema import SCHEMA, columns, schema_markdown

DATA = Path(__file__).parent / "data"
VALID = DATA / "valid"
INVALID = sorted((DATA / "invalid" / "catalogs").glob("*.csv"))

MOTORS_HEADER = ("part,supplier,peak_torque_nm,peak_power_kw,max_speed_rpm,cont_torque_nm,cont_power_kw,"
                 "decline_speed_rpm,decline_exponent,mass_kg,rotor_inertia_kgm2,unit_cost,lead_time_weeks")
MOTORS_ENERGY_COLUMNS = "loss_copper_w_per_nm2,loss_iron_nm,loss_windage_w_s3,loss_constant_w,efficiency_map"
REDUCERS_REQUIRED = ("part,supplier,ratio,efficiency_pct,max_input_torque_nm,max_input_speed_rpm,mass_kg,"
                     "unit_cost,lead_time_weeks")
REDUCERS_HEADER = REDUCERS_REQUIRED + ",ratio_2,ratio_3,efficiency_2_pct,efficiency_3_pct,shift_time_s"
TYRES_HEADER = "part,supplier,size,load_index,speed_symbol,rr_coefficient_n_per_kn,mass_kg,unit_cost,lead_time_weeks"


def kind_of(path: Path) -> str:
    return path.name.split("_", 1)[0]


def expected_lines(path: Path) -> list[str]:
    text = path.with_name(path.name.rsplit(".", 1)[0] + ".expected.txt").read_text(encoding="utf-8")
    return [line for line in text.splitlines() if line.strip()]


def write(tmp_path: Path, name: str, text: str, **kw) -> Path:
    p = tmp_path / name
    p.write_text(text, **kw)
    return p


# ------------------------------------------------------------------------------ schema


def test_schema_columns_match_the_documented_formats():
    # exact column lists of the catalogue formats documented in README.md
    assert [c.name for c in SCHEMA["motors"]] == MOTORS_HEADER.split(",") + MOTORS_ENERGY_COLUMNS.split(",")
    assert [c.name for c in SCHEMA["reducers"]] == REDUCERS_HEADER.split(",")
    assert [c.name for c in SCHEMA["tyres"]] == TYRES_HEADER.split(",")
    optional = {c.name: c.default for c in SCHEMA["motors"] if not c.required}
    assert optional == {"decline_speed_rpm": "max_speed_rpm", "decline_exponent": 1.0,
                        **{name: None for name in MOTORS_ENERGY_COLUMNS.split(",")}}
    for kind in SCHEMA:
        for c in columns(kind):
            assert c.type in ("float", "int", "str") and c.unit and c.rule and c.description


def test_schema_markdown_lists_every_column():
    md = schema_markdown()
    for kind, cols in SCHEMA.items():
        assert f"### {kind}.csv" in md
        for c in cols:
            assert f"| `{c.name}` |" in md
    one = schema_markdown("tyres")
    assert one.startswith("| column | type | unit | required | default | rule | limits (error) | usual (else "
                          "warning) |")
    assert "`diameter_m`" in one and "`peak_torque_nm`" not in one
    with pytest.raises(ValueError, match="unknown catalogue kind"):
        columns("wheels")


def test_readme_catalogue_tables_are_the_schema():
    """The README's catalogue tables are the schema rendered (project convention: docs from data)."""
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    for kind in SCHEMA:
        assert schema_markdown(kind) in readme, f"README table of {kind}.csv differs from schema_markdown({kind!r})"


# ------------------------------------------------------------------------------ valid files


def test_motors_loaded_typed_sorted_with_defaults():
    df = load_catalog("motors", VALID / "motors.csv")
    assert list(df["part"]) == ["M-090", "M-150", "M-250"]  # string order
    assert list(df.index) == [0, 1, 2]
    # line numbers as an editor shows them: 2 comment lines, header on line 3
    assert list(df["source_row"]) == [6, 4, 5]
    assert df["peak_torque_nm"].dtype == np.float64
    m150 = df.set_index("part").loc["M-150"]
    assert m150["decline_speed_rpm"] == 12000.0  # empty -> max_speed_rpm
    assert m150["decline_exponent"] == 1.0  # empty -> 1
    m250 = df.set_index("part").loc["M-250"]
    assert m250["decline_speed_rpm"] == 9000.0 and m250["decline_exponent"] == 1.5
    # extra column carried through; a '#' inside a later cell is data
    assert m250["datasheet"] == "#see note"
    assert m150["datasheet"] == "ds-m150.pdf"
    assert list(df.columns[:13]) == MOTORS_HEADER.split(",")
    assert all(isinstance(p, str) for p in df["part"]) and all(isinstance(s, str) for s in df["supplier"])


def test_reducers_blank_line_keeps_line_numbers():
    df = load_catalog("reducers", VALID / "reducers.csv")
    assert list(df["part"]) == ["R-10.5", "R-6.2", "R-8.0"]  # string order, not numeric
    assert dict(zip(df["part"], df["source_row"], strict=True)) == {"R-8.0": 3, "R-10.5": 4, "R-6.2": 6}
    assert df.loc[df["part"] == "R-10.5", "efficiency_pct"].item() == 96.5


def test_tyres_derived_columns():
    df = load_catalog("tyres", VALID / "tyres.csv").set_index("part")
    # D = 25.4 d + 2 S Ra/100 (ISO 4000-1 / UN ECE R30 formula, computed: 205/55 R16 -> 631.90 mm,
    # 235/65 R16C -> 711.90 mm, 195/65 R15 -> 634.50 mm)
    assert df.loc["T-20555R16", "diameter_m"] == pytest.approx(0.63190, abs=1e-9)
    assert df.loc["T-23565R16C", "diameter_m"] == pytest.approx(0.71190, abs=1e-9)
    assert df.loc["T-19565R15", "diameter_m"] == pytest.approx(0.63450, abs=1e-9)
    # ISO 4000-1 speed symbols: V 240, R 170, H 210 (lower-case accepted and normalised)
    assert df.loc["T-20555R16", "speed_rating_kmh"] == 240.0
    assert df.loc["T-23565R16C", "speed_rating_kmh"] == 170.0
    assert df.loc["T-19565R15", "speed_rating_kmh"] == 210.0
    assert df.loc["T-19565R15", "speed_symbol"] == "H"
    # ISO 4000-1 load indices: 91 -> 615 kg, 115 -> 1215 kg
    assert df.loc["T-20555R16", "load_capacity_kg"] == 615.0
    assert df.loc["T-23565R16C", "load_capacity_kg"] == 1215.0
    assert df["load_index"].dtype == np.int64
    assert df.loc["T-23565R16C", "size"] == "235/65 R16C"


def test_load_catalogs_returns_study_catalogs():
    paths = {k: VALID / f"{k}.csv" for k in ("motors", "reducers", "tyres")}
    cats = load_catalogs(paths)
    assert isinstance(cats, Catalogs)
    assert len(cats.motors) == 3 and len(cats.reducers) == 3 and len(cats.tyres) == 3
    assert cats.paths == paths


def test_bom_crlf_quoted_newline_and_short_rows(tmp_path):
    text = ("# illustrative\r\n" + REDUCERS_REQUIRED + ",notes\r\n"
            'R-1,Geartech,8,97,300,14000,14,620,5,"two\r\nlines"\r\n'
            "R-2,Geartech,9,97,300,14000,14,620,5\r\n")  # short row: notes cell missing
    p = write(tmp_path, "reducers.csv", text, encoding="utf-8-sig", newline="")
    df = load_catalog("reducers", p)
    assert list(df["source_row"]) == [3, 5]
    assert df.loc[0, "notes"] == "two\nlines"
    assert df.loc[1, "notes"] == ""


def test_header_and_cells_are_stripped(tmp_path):
    p = write(tmp_path, "r.csv", " part , supplier ,ratio,efficiency_pct,max_input_torque_nm,max_input_speed_rpm,"
              "mass_kg,unit_cost,lead_time_weeks\n R-1 , Geartech , 8 ,97,300,14000,14,620,5\n")
    df = load_catalog("reducers", p)
    assert df.loc[0, "part"] == "R-1" and df.loc[0, "supplier"] == "Geartech" and df.loc[0, "ratio"] == 8.0


def test_equal_corner_and_decline_speed_is_accepted(tmp_path):
    # corner speed = 100 kW / 200 N m = 500 rad/s = 4774.6 rpm; equal to decline within datasheet rounding
    corner = 100e3 / 200 * 60 / (2 * np.pi)
    p = write(tmp_path, "m.csv", MOTORS_HEADER + f"\nM-1,Volta,200,100,12000,100,50,{corner!r},,40,0.02,1000,4\n")
    assert load_catalog("motors", p)["decline_speed_rpm"].item() == pytest.approx(corner)


# ------------------------------------------------------------------------------ invalid corpus


@pytest.mark.parametrize("path", INVALID, ids=[p.stem for p in INVALID])
def test_invalid_catalog_corpus(path):
    with pytest.raises(InputError) as info:
        load_catalog(kind_of(path), path)
    msg = str(info.value)
    first = msg.splitlines()[0]
    assert first.startswith(str(path))
    for line in expected_lines(path):
        assert line in msg, f"expected line not in message:\n{line}\n--- message ---\n{msg}"
    assert "Traceback" not in msg


def test_corpus_is_large_enough():
    assert len(INVALID) >= 15
    assert all(kind_of(p) in SCHEMA for p in INVALID)


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match=r"nope\.csv: file not found\. Check the path"):
        load_catalog("motors", tmp_path / "nope.csv")


def test_folder_instead_of_file(tmp_path):
    with pytest.raises(InputError, match="is a folder, not a CSV file"):
        load_catalog("motors", tmp_path)


def test_not_utf8(tmp_path):
    p = tmp_path / "m.csv"
    p.write_bytes((MOTORS_HEADER + "\nM-1,Volta \xe9,100,40,12000,60,25,,,30,0.01,1200,6\n").encode("latin-1"))
    with pytest.raises(InputError, match=r"m\.csv: is not UTF-8 text .* Save the file as CSV UTF-8"):
        load_catalog("motors", p)


def test_load_catalogs_reports_every_bad_file(tmp_path):
    bad_m = write(tmp_path, "m.csv", MOTORS_HEADER + "\nM-1,Volta,100,40,12000,60,25,,,-30,0.01,1200,6\n")
    bad_t = write(tmp_path, "t.csv", TYRES_HEADER + "\nT-1,Roundway,205/55R16,91,X,7.2,8.9,95,2\n")
    with pytest.raises(InputError) as info:
        load_catalogs({"motors": bad_m, "reducers": VALID / "reducers.csv", "tyres": bad_t})
    msg = str(info.value)
    assert msg.splitlines()[0] == "2 catalogue files have errors (listed below)."
    assert 'm.csv line 2 (part "M-1"): mass_kg = -30; must be > 0 [kg]' in msg
    assert 't.csv line 2 (part "T-1"): speed_symbol = "X"' in msg


def test_load_catalogs_needs_all_three_kinds():
    with pytest.raises(InputError, match="no path for tyres"):
        load_catalogs({"motors": VALID / "motors.csv", "reducers": VALID / "reducers.csv"})


# ------------------------------------------------------------------------------ warnings


def test_heavy_motor_warns(tmp_path):
    p = write(tmp_path, "m.csv", MOTORS_HEADER + "\nM-1,Volta,100,40,12000,60,25,,,620,0.01,1200,6\n")
    with pytest.warns(CatalogWarning, match=r'm\.csv line 2 \(part "M-1"\): mass_kg = 620; above 500 kg'):
        df = load_catalog("motors", p)
    assert df["mass_kg"].item() == 620.0


def test_low_efficiency_and_odd_ratio_warn(tmp_path):
    p = write(tmp_path, "r.csv", REDUCERS_HEADER + "\nR-1,Geartech,8,0.96,300,14000,14,620,5\n"
              "R-2,Geartech,0.8,97,300,14000,14,620,5\nR-3,Geartech,35,75,300,14000,14,620,5\n")
    with pytest.warns(CatalogWarning) as rec:
        load_catalog("reducers", p)
    assert len(rec) == 1  # one warning per file, one line per finding
    msg = str(rec[0].message)
    assert "4 unusual values in the reducers catalogue" in msg
    assert 'line 2 (part "R-1"): efficiency_pct = 0.96; below 80 %' in msg and "looks like a fraction" in msg
    assert 'line 3 (part "R-2"): ratio = 0.8; outside 1..30' in msg
    assert 'line 4 (part "R-3"): ratio = 35; outside 1..30' in msg
    assert 'line 4 (part "R-3"): efficiency_pct = 75; below 80 %' in msg


def test_rolling_resistance_outside_range_warns(tmp_path):
    p = write(tmp_path, "t.csv", TYRES_HEADER + "\nT-1,Roundway,205/55R16,91,V,0.009,8.9,95,2\n"
              "T-2,Roundway,205/55R16,91,V,25,8.9,95,2\nT-3,Roundway,205/55R16,91,V,4,8.9,95,2\n")
    with pytest.warns(CatalogWarning) as rec:
        load_catalog("tyres", p)
    msg = str(rec[0].message)
    assert 'line 2 (part "T-1"): rr_coefficient_n_per_kn = 0.009; outside 4..20 N/kN' in msg
    assert "dimensionless Crr" in msg
    assert 'line 3 (part "T-2"): rr_coefficient_n_per_kn = 25; outside 4..20 N/kN' in msg
    assert "T-3" not in msg  # 4 N/kN is inside the (inclusive) range


def test_misspelt_optional_column_warns(tmp_path):
    header = MOTORS_HEADER.replace("decline_speed_rpm", "decline_speed_rmp")
    p = write(tmp_path, "m.csv", header + "\nM-1,Volta,100,40,12000,60,25,9000,,30,0.01,1200,6\n")
    with pytest.warns(CatalogWarning, match='column "decline_speed_rmp" looks like the optional column '
                                            '"decline_speed_rpm"'):
        df = load_catalog("motors", p)
    assert df["decline_speed_rpm"].item() == 12000.0 and df["decline_speed_rmp"].item() == "9000"


def test_valid_files_do_not_warn():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for kind in ("motors", "reducers", "tyres"):
            assert isinstance(load_catalog(kind, VALID / f"{kind}.csv"), pd.DataFrame)


def test_low_efficiency_of_a_further_gear_warns(tmp_path):
    # found by fuzzing: efficiency_2_pct = 2.5 passed silently while efficiency_pct = 10 warned
    p = write(tmp_path, "r.csv", "part,supplier,ratio,efficiency_pct,max_input_torque_nm,max_input_speed_rpm,mass_kg,"
              "unit_cost,lead_time_weeks,ratio_2,efficiency_2_pct,shift_time_s\n"
              "R-1,Geartech,8,97,300,14000,14,620,5,5,2.5,0.3\n")
    with pytest.warns(CatalogWarning, match=r'line 2 \(part "R-1"\): efficiency_2_pct = 2.5; below 80 %'):
        load_catalog("reducers", p)
