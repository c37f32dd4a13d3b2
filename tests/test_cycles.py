"""Driving cycles shipped as package data (selector.io.cycles) and cycle arithmetic (selector.physics.cycles)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from selector.errors import InputError
from selector.io.cycles import BUILTIN_CYCLES, Cycle, builtin_cycle_path, load_cycle
from selector.physics.cycles import (
    CITY_WEIGHT,
    HIGHWAY_WEIGHT,
    combined_consumption,
    combined_fuel_economy,
    cycle_distance_m,
    cycle_steps,
)

MI_KM = 1.609344  # international mile (exact, 1959 agreement)

# Published key figures: (duration [s], distance [km] and its last printed digit, maximum [km/h] and tolerance)
PUBLISHED = {
    # US EPA, 40 CFR Part 86 App. I: 1369 s, 7.45 mi, maximum 56.7 mph
    "udds": (1369, 7.45 * MI_KM, 0.005 * MI_KM, 56.7 * MI_KM, 0.05 * MI_KM),
    # US EPA, 40 CFR Part 600 App. I: 765 s, 10.26 mi, maximum 59.9 mph
    "hwfet": (765, 10.26 * MI_KM, 0.005 * MI_KM, 59.9 * MI_KM, 0.05 * MI_KM),
    # US EPA, 40 CFR Part 86 App. I: 8.01 mi, maximum 80.3 mph; the schedule spans 0-600 s
    "us06": (600, 8.01 * MI_KM, 0.005 * MI_KM, 80.3 * MI_KM, 0.05 * MI_KM),
    # US EPA: FTP-75 = UDDS + its first 505 s (no soak), 1874 s, 11.04 mi; so its maximum is the UDDS 56.7 mph
    "ftp75": (1874, 11.04 * MI_KM, 0.005 * MI_KM, 56.7 * MI_KM, 0.05 * MI_KM),
    # UN GTR No. 15 (WLTP) Annex 1, class 3b: 1800 s, 23.266 km, maximum 131.3 km/h
    "wltc_class3b": (1800, 23.266, 0.0005, 131.3, 0.05),
    # UN Regulation No. 83 Annex 4a: 1180 s, 4 x 1.013 km (ECE-15) + 6.955 km (EUDC), maximum 120 km/h
    "nedc": (1180, 4 * 1.013 + 6.955, 0.01, 120.0, 0.05),
}


def write(tmp_path: Path, text: str, name: str = "my_cycle.csv") -> Path:
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


# ------------------------------------------------------------------------------ shipped cycles


@pytest.mark.parametrize("name", BUILTIN_CYCLES)
def test_shipped_cycle_reproduces_published_figures(name):
    duration, dist_km, dist_tol, vmax_kmh, vmax_tol = PUBLISHED[name]
    c = load_cycle(name)
    assert isinstance(c, Cycle) and c.name == name
    assert c.duration_s == duration
    np.testing.assert_array_equal(c.time_s, np.arange(duration + 1))  # 1 Hz from 0
    assert c.distance_m / 1000.0 == pytest.approx(dist_km, abs=dist_tol)
    assert c.max_speed_kmh == pytest.approx(vmax_kmh, abs=vmax_tol)
    assert np.all(c.speed_mps >= 0)


def test_average_speeds():
    # US EPA: UDDS average 19.59 mph; HWFET average 48.3 mph; UN GTR No. 15: WLTC 3b average 46.5 km/h
    udds, hwfet, wltc = (load_cycle(n) for n in ("udds", "hwfet", "wltc_class3b"))
    assert udds.distance_m / udds.duration_s * 3.6 / MI_KM == pytest.approx(19.59, abs=0.005)
    assert hwfet.distance_m / hwfet.duration_s * 3.6 / MI_KM == pytest.approx(48.3, abs=0.05)
    assert wltc.distance_m / wltc.duration_s * 3.6 == pytest.approx(46.5, abs=0.05)


def test_wltc_phase_sums():
    # UN GTR No. 15 Annex 1, class 3b: sums of the km/h samples per phase (Low, Medium, High, Extra High)
    v = load_cycle("wltc_class3b").speed_kmh
    phases = [(0, 589, 11140.3), (590, 1022, 17121.2), (1023, 1477, 25782.2), (1478, 1800, 29714.9)]
    for first, last, published in phases:
        assert np.sum(v[first:last + 1]) == pytest.approx(published, abs=0.05)


def test_ftp75_starts_with_the_udds():
    # US EPA: FTP-75 is the UDDS followed by its first 505 s
    ftp, udds = load_cycle("ftp75"), load_cycle("udds")
    np.testing.assert_allclose(ftp.speed_mps[:1370], udds.speed_mps, atol=1e-12)
    np.testing.assert_allclose(ftp.speed_mps[1369:1369 + 506], udds.speed_mps[:506], atol=1e-12)


@pytest.mark.parametrize("name", BUILTIN_CYCLES)
def test_provenance_lines_are_kept(name):
    c = load_cycle(name)
    assert any(line.startswith("Source:") for line in c.source)
    assert any("Published key figures" in line for line in c.source)
    assert c.path == builtin_cycle_path(name) and c.path.exists()
    assert c.path.read_text(encoding="utf-8").startswith("# ")  # the file keeps its '#' lines


def test_arrays_are_read_only():
    c = load_cycle("udds")
    with pytest.raises(ValueError):
        c.speed_mps[0] = 1.0


def test_name_is_case_insensitive_and_unknown_names_suggest():
    assert load_cycle("WLTC_Class3b").name == "wltc_class3b"
    with pytest.raises(InputError, match=r'cycle "wltc": unknown built-in cycle\. Did you mean "wltc_class3b"\?'):
        load_cycle("wltc")
    with pytest.raises(InputError, match="Built-in cycles: wltc_class3b, udds, hwfet, us06, ftp75, nedc"):
        load_cycle("zzz")
    with pytest.raises(InputError, match="the name is empty"):
        load_cycle("  ")


# ------------------------------------------------------------------------------ user files


def test_user_file_by_path_and_base_dir(tmp_path):
    p = write(tmp_path, "# my own test loop (illustrative)\ntime_s,speed_kmh\n0,0\n1,180\n2,360\n3,0\n")
    c = load_cycle(p)
    assert c.name == "my_cycle" and c.source == ("my own test loop (illustrative)",)
    np.testing.assert_allclose(c.speed_mps, [0, 50, 100, 0])
    # trapezoid: 25 + 75 + 50 = 150 m (computed by hand)
    assert c.distance_m == pytest.approx(150.0, rel=1e-12)
    assert load_cycle("my_cycle.csv", base_dir=tmp_path).distance_m == pytest.approx(150.0, rel=1e-12)
    assert load_cycle(str(p)).duration_s == 3.0


@pytest.mark.parametrize("text, expected", [
    ("time,speed\n0,0\n1,1\n", "line 1: header is 'time,speed'; must be exactly time_s,speed_kmh"),
    ("time_s;speed_kmh\n0;0\n", "separated by semicolons or tabs"),
    ("time_s,speed_kmh\n1,0\n2,5\n", "line 2: time_s = 1; the first time must be 0 [s]"),
    ("time_s,speed_kmh\n0,0\n1,5\n3,5\n", "line 4: time_s = 3; must be 2 [s] (one row per second"),
    ("time_s,speed_kmh\n0,0\n1,5\n0.5,5\n", "line 4: time_s = 0.5; must be 2 [s]"),
    ("time_s,speed_kmh\n0,0\n1,-2\n", "line 3: speed_kmh = -2; must be >= 0 [km/h]"),
    ("time_s,speed_kmh\n0,0\n1,nan\n", "line 3: speed_kmh = nan; must be a finite number [km/h]"),
    ("time_s,speed_kmh\n0,0\n1,5 km/h\n", "line 3: speed_kmh = '5 km/h'; must be a number [km/h]"),
    ("time_s,speed_kmh\n0,0\n1,5,3\n", "line 3: 3 cells; each row must be time_s,speed_kmh"),
    ("time_s,speed_kmh\n0,0\n", "1 data row; a cycle needs at least two rows"),
    ("# only comments\n", "no header row"),
    ("time_s,speed_kmh\n0,0\n1,1e300\n", "line 3: speed_kmh = 1e300; must be at most 500 [km/h]"),
    ("time_s,speed_kmh\n0,0\n\n1,5\n2,0\n", "line 3: blank line among the data rows"),
    ("time_s,speed_kmh\n0,0\n1,0\n2,0\n", "the cycle covers 0 m; at least 100 m"),
    ("time_s,speed_kmh\n0,0\n1,1e-12\n2,0\n", "the cycle covers 2.78e-13 m; at least 100 m"),
    ("time_s,speed_kmh\n" + "".join(f"{t},10\n" for t in range(36_002)), "36,002 data rows; at most 36,001"),
    # project convention: a cycle starts and ends at rest (else its energy counts kinetic energy)
    ("time_s,speed_kmh\n" + "".join(f"{t},{120 - t}\n" for t in range(121)),
     "line 2 (the first row) has speed_kmh = 120; a cycle must start and end at rest"),
    ("time_s,speed_kmh\n" + "".join(f"{t},{t}\n" for t in range(60)), "line 61 (the last row) has speed_kmh = 59"),
    # plain ASCII decimal numbers only (float() alone would read 5_0 as 50)
    ("time_s,speed_kmh\n0,0\n1,5_0\n2,0\n", "line 3: speed_kmh = '5_0'; must be a number [km/h]"),
    ("time_s,speed_kmh\n0,0\n1,\uff15\n2,0\n", "line 3: speed_kmh = '\uff15'; must be a number [km/h]"),
])
def test_user_file_errors(tmp_path, text, expected):
    p = write(tmp_path, text)
    with pytest.raises(InputError) as info:
        load_cycle(p)
    msg = str(info.value)
    assert expected in msg
    assert msg.startswith(str(p))


def test_blank_lines_at_the_end_are_allowed(tmp_path):
    assert load_cycle(write(tmp_path, "time_s,speed_kmh\n0,0\n1,360\n2,360\n3,0\n\n\n")).duration_s == 3.0


def test_all_errors_listed_at_once(tmp_path):
    p = write(tmp_path, "time_s,speed_kmh\n0,0\n1,-1\n2,x\n")
    msg = str(pytest.raises(InputError, load_cycle, p).value)
    assert "2 errors in the cycle file; it was not loaded." in msg
    assert "line 3: speed_kmh = -1" in msg and "line 4: speed_kmh = 'x'" in msg


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="cycle file not found"):
        load_cycle(tmp_path / "absent.csv")
    with pytest.raises(InputError, match='named without a suffix: cycle = "udds"'):
        load_cycle("udds.csv", base_dir=tmp_path)


# ------------------------------------------------------------------------------ arithmetic


def test_cycle_steps_trapezoid_and_kinetic_energy():
    t = np.arange(5.0)
    v = np.array([0.0, 2.0, 5.0, 5.0, 1.0])
    dt, vm, a, vh = cycle_steps(t, v)
    np.testing.assert_allclose(vm, [1.0, 3.5, 5.0, 3.0])
    np.testing.assert_allclose(a, [2.0, 3.0, 0.0, -4.0])
    np.testing.assert_allclose(vh, [2.0, 5.0, 5.0, 5.0])
    # sum of mean speed x dt is the trapezoid distance; a v dt is the change of v^2/2 (closed form)
    assert np.sum(vm * dt) == pytest.approx(cycle_distance_m(t, v)) == pytest.approx(12.5)
    np.testing.assert_allclose(a * vm * dt, 0.5 * np.diff(v ** 2))


def test_us_label_weighting():
    # 40 CFR 600: combined = 1 / (0.55 / city + 0.45 / highway); 30 and 40 mpg -> 33.8028 mpg (by hand:
    # 0.55/30 = 0.0183333, 0.45/40 = 0.01125, sum 0.0295833, inverse 33.80282)
    assert (CITY_WEIGHT, HIGHWAY_WEIGHT) == (0.55, 0.45)
    assert combined_fuel_economy(30.0, 40.0) == pytest.approx(33.80282, abs=5e-6)
    # consumption form: the same weighting on Wh/km is the arithmetic mean 0.55 c + 0.45 h
    assert combined_consumption(150.0, 130.0) == pytest.approx(141.0, rel=1e-12)
    assert combined_consumption(150.0, 130.0) == pytest.approx(1.0 / combined_fuel_economy(1 / 150.0, 1 / 130.0))
