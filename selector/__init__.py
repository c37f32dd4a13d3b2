"""selector: choose a traction motor, a reduction ratio and a tyre from catalogues, exactly.

The Python API (see README.md, "Python API")::

    import selector
    study = selector.open_study("problems/parcel_van.toml")
    best = selector.solve(study)
    best.to_frame()        # pandas DataFrame, one row per design
    best.to_dict()         # the JSON contract of `selector solve --format json`

Names are imported on first use (PEP 562), so ``import selector`` stays fast and loads neither
numpy, pandas nor the solver.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

__version__ = "0.1.0"

_EXPORTS = {
    "Study": "selector.api",
    "open_study": "selector.api",
    "solve": "selector.public",
    "simulate": "selector.public",
    "explain": "selector.public",
    "frontier": "selector.public",
    "sweep": "selector.public",
    "shortlist": "selector.public",
    "Procurement": "selector.inputs",
    "Result": "selector.results",
    "SolveResult": "selector.results",
    "SimulateResult": "selector.results",
    "ExplainResult": "selector.results",
    "FrontierResult": "selector.results",
    "SweepResult": "selector.results",
    "ShortlistResult": "selector.results",
    "SelectorError": "selector.errors",
    "InputError": "selector.errors",
    "CAUTION": "selector.records",
}
"""Public name -> module defining it."""

__all__ = [  # noqa: RUF022 - grouped as _EXPORTS (a test checks the two agree)
    "__version__", "Study", "open_study", "solve", "simulate", "explain", "frontier", "sweep", "shortlist",
    "Procurement", "Result", "SolveResult", "SimulateResult", "ExplainResult", "FrontierResult", "SweepResult",
    "ShortlistResult", "SelectorError", "InputError", "CAUTION",
]

if TYPE_CHECKING:
    from selector.api import Study, open_study
    from selector.errors import InputError, SelectorError
    from selector.inputs import Procurement
    from selector.public import explain, frontier, shortlist, simulate, solve, sweep
    from selector.records import CAUTION
    from selector.results import (
        ExplainResult,
        FrontierResult,
        Result,
        ShortlistResult,
        SimulateResult,
        SolveResult,
        SweepResult,
    )


def __getattr__(name: str):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'selector' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_EXPORTS))
