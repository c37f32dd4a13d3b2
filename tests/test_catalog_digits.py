"""Catalogue comparison messages print enough digits to show how the two numbers compare.

A rule such as "corner speed <= decline_speed_rpm" rejects values that differ by more than 1e-9
relative; rounded to a fixed number of digits, both sides can print alike or in the wrong order
("corner speed = 3493 rpm ... is above decline_speed_rpm = 3493.1"). Each case below writes a
one-row catalogue (invented, illustrative data) whose values differ just beyond that tolerance,
and reads the numbers back from the message: they must be ordered as the rule says. Through the
API (`load_catalog`) and the CLI (`selector check`, exit code 2).
"""

from __future__ import annotations

import math
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from selector.cli import run
from selector.errors import InputError
from selector.io.catalog import CatalogWarning, distinct_numbers, load_catalog

VALID = Path(__file__).parent / "data" / "valid"
MOTORS_HEADER = ("part,supplier,peak_torque_nm,peak_power_kw,max_speed_rpm,cont_torque_nm,cont_power_kw,"
                 "decline_speed_rpm,decline_exponent,mass_kg,rotor_inertia_kgm2,unit_cost,lead_time_weeks")
RPM = 2 * math.pi / 60  # rad/s per rpm, ISO 80000-3 (omega = 2 pi n)


def motor_line(**kw) -> str:
    row = {"part": "M-1", "supplier": "Volta Drives (illustrative)", "peak_torque_nm": 200, "peak_power_kw": 60,
           "max_speed_rpm": 12000, "cont_torque_nm": 100, "cont_power_kw": 30, "decline_speed_rpm": "",
           "decline_exponent": "", "mass_kg": 40, "rotor_inertia_kgm2": 0.02, "unit_cost": 1500, "lead_time_weeks": 4}
    row.update(kw)
    return ",".join(str(row[c]) for c in MOTORS_HEADER.split(","))


def write_motors(tmp_path: Path, **kw) -> Path:
    p = tmp_path / "motors.csv"
    p.write_text("# Illustrative data for selector's tests (invalid on purpose).\n" + MOTORS_HEADER + "\n"
                 + motor_line(**kw) + "\n", encoding="utf-8")
    return p


def message(path: Path) -> str:
    with pytest.raises(InputError) as info:
        load_catalog("motors", path)
    return str(info.value)


def numbers(pattern: str, text: str) -> tuple[float, ...]:
    m = re.search(pattern, text)
    assert m, f"{pattern!r} not in:\n{text}"
    return tuple(float(g) for g in m.groups())


NUM = r"([0-9.e+-]+)"

# corner speed = peak_power / peak_torque: 3493.1 (1 + 1e-6) rpm, 1e-6 above decline_speed_rpm = 3493.1
CORNER_RPM = 3493.1 * (1 + 1e-6)
CASES = {
    "corner_above_decline": (
        {"peak_power_kw": repr(CORNER_RPM * RPM * 200 / 1000), "decline_speed_rpm": 3493.1},
        rf"corner speed = {NUM} rpm .* is above decline_speed_rpm = {NUM};"),
    "corner_above_max": (
        {"peak_power_kw": repr(12000 * (1 + 1e-7) * RPM * 200 / 1000)},
        rf"corner speed = {NUM} rpm .* is above max_speed_rpm \(decline_speed_rpm is empty, so it equals "
        rf"max_speed_rpm\) = {NUM};"),
    "cont_torque_above_peak": ({"cont_torque_nm": "200.00001"},
                               rf"cont_torque_nm = {NUM} is above peak_torque_nm = {NUM};"),
    "cont_power_above_peak": ({"cont_power_kw": "60.000001"},
                              rf"cont_power_kw = {NUM} is above peak_power_kw = {NUM};"),
    "decline_above_max": ({"decline_speed_rpm": "12000.0001"},
                          rf"decline_speed_rpm = {NUM} is above max_speed_rpm = {NUM};"),
}


@pytest.mark.parametrize("case", CASES, ids=list(CASES))
def test_error_message_numbers_are_ordered_as_the_rule_says(tmp_path, case, capsys):
    fields, pattern = CASES[case]
    path = write_motors(tmp_path, **fields)
    msg = message(path)
    above, limit = numbers(pattern, msg)
    assert above > limit  # the printed numbers show the violation
    # the CLI prints the same message (exit code 2)
    problem = tmp_path / "study.toml"
    problem.write_text("# Illustrative problem pointing at a bad catalogue (test data).\n[catalogs]\n"
                       f'motors = "{path.as_posix()}"\nreducers = "{(VALID / "reducers.csv").as_posix()}"\n'
                       f'tyres = "{(VALID / "tyres.csv").as_posix()}"\n'
                       + "[vehicle]" + (VALID / "problem.toml").read_text(encoding="utf-8").split("[vehicle]", 1)[1],
                       encoding="utf-8")
    assert run(["check", str(problem)]) == 2
    err = capsys.readouterr().err
    assert numbers(pattern, err) == (above, limit)


def test_corner_speed_issue_example(tmp_path):
    # corner = 3493.1 (1 + 1e-6) = 3493.1034931 rpm; whole rpm ("3493") would print below 3493.1
    msg = message(write_motors(tmp_path, **CASES["corner_above_decline"][0]))
    assert "corner speed = 3493.103 rpm" in msg and "decline_speed_rpm = 3493.1;" in msg


def test_clear_differences_keep_the_usual_digits(tmp_path):
    # whole rpm for the computed corner speed, :g for the datasheet values, when that already shows it:
    # corner = 120 kW / 225 N m = 533.33 rad/s = 5092.96 rpm (as in the invalid-catalogue corpus)
    msg = message(write_motors(tmp_path, peak_torque_nm=225, peak_power_kw=120, decline_speed_rpm=4000))
    assert "corner speed = 5093 rpm" in msg and "decline_speed_rpm = 4000;" in msg


def test_warning_numbers_are_ordered(tmp_path):
    # motor mass just above the 500 kg plausibility bound (common practice, no published source)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        load_catalog("motors", write_motors(tmp_path, mass_kg="500.00001"))
    text = "\n".join(str(w.message) for w in caught if issubclass(w.category, CatalogWarning))
    value, limit = numbers(rf"mass_kg = {NUM}; above {NUM} kg", text)
    assert value > limit


def test_distinct_numbers_preserves_order():
    rng = np.random.default_rng(7)
    for _ in range(2000):
        a = float(10 ** rng.uniform(-2, 5))
        b = a * (1 + float(rng.choice([-1, 1])) * 10 ** rng.uniform(-12, -1))
        sa, sb = distinct_numbers(a, b)
        assert (float(sa) > float(sb)) == (a > b) and (float(sa) < float(sb)) == (a < b)
    assert distinct_numbers(4.0, 4.0, 20.0) == ["4", "4", "20"]  # equal values stay equal
    assert distinct_numbers(45, 40) == ["45", "40"]  # as ":g" when that already shows the order


@pytest.mark.parametrize("cell", ["2_00", "\uff12\uff10\uff10", "0x10"])
def test_numbers_are_plain_ascii_decimals(tmp_path, cell):
    # float() alone reads "2_00" as 200 and full-width digits as digits: in a catalogue those are typos
    msg = message(write_motors(tmp_path, peak_torque_nm=cell))
    assert f'peak_torque_nm = "{cell}"; must be a number' in msg
