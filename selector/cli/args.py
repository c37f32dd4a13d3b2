"""Argument types and common arguments shared by every command of the CLI."""

from __future__ import annotations

import argparse
import math
import re


def positive_int(text):
    """A whole number >= 1 (argparse type)."""
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"{text!r} must be >= 1")
    return v


def number(minimum: float = 0.0, strict: bool = True):
    """An argparse type for a finite number > ``minimum`` (or >= when not ``strict``)."""

    def parse(text):
        try:
            v = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
        if not math.isfinite(v) or not (v > minimum if strict else v >= minimum):
            raise argparse.ArgumentTypeError(f"{text!r} must be {'>' if strict else '>='} {minimum:g}")
        return v

    return parse


positive_float = number(0.0, strict=True)


def add_common(p) -> None:
    """The problem file and --format, taken by every command."""
    p.add_argument("problem", help="problem file (TOML), e.g. problems/parcel_van.toml")
    p.add_argument("--format", choices=("table", "json"), default="table", help="output format (default: table)")
    p.add_argument("--verbose", action="store_true", help="show tracebacks of internal errors")


PARAMETER_FLAGS = {
    "count": "--count", "vehicles": "--vehicles", "distinct": "--distinct", "vary": "--vary",
    "workers": "--workers", "scheduler": "--scheduler", "axis": "--axis", "time_limit_s": "--time-limit",
    "step_pct": "--step", "near_miss_pct": "--near-miss", "motor": "--motor", "reducer": "--reducer",
    "tyre": "--tyre", "avoid_suppliers": "--avoid-supplier", "max_lead_time_weeks": "--max-lead-time-weeks",
    "front_motor": "--front-motor", "front_reducer": "--front-reducer", "rear_motor": "--rear-motor",
    "rear_reducer": "--rear-reducer",
}
"""Library parameter names (as the library's error messages start) -> the command line's flags."""

_NAMES = "|".join(sorted(PARAMETER_FLAGS, key=len, reverse=True))
_PARAMETER = re.compile(r"^(" + _NAMES + r")(?=[ :])")
_LEADING_LIST = re.compile(r"^((?:" + _NAMES + r")(?:, (?:" + _NAMES + r"))+)(?=:)")
_KEYWORD = re.compile(r"(?<![\w-])(" + _NAMES + r")=")


def flag_names(message: str) -> str:
    """A library message naming parameters as the CLI's flags: a leading name or list of names
    (``count 0: ...``, ``rear_motor, rear_reducer: missing``) and keyword forms anywhere
    (``front_motor=``) become ``--count``, ``--rear-motor, --rear-reducer``, ``--front-motor``."""
    message = _KEYWORD.sub(lambda m: PARAMETER_FLAGS[m.group(1)], message)
    message = _LEADING_LIST.sub(lambda m: ", ".join(PARAMETER_FLAGS[n] for n in m.group(1).split(", ")), message)
    message = _PARAMETER.sub(lambda m: PARAMETER_FLAGS[m.group(1)], message)
    return message.replace("Rerun without time_limit_s", "Rerun without --time-limit")
