"""Independent re-check of designs before they are shown.

`verify_designs` recomputes every metric of the given designs from the catalogue rows with the
full (non-staged) physics of `evaluate.evaluate`, never from the optimisation model, and raises
`VerificationError` if a design the search called feasible fails a requirement or check: that
would be a bug, never a user error.
"""

from __future__ import annotations

import numpy as np

from selector.engine.evaluate import OBJECTIVE_METRIC, check_results, evaluate
from selector.engine.parts import AXLE_COLUMNS, TY, PartTables


class VerificationError(RuntimeError):
    """A reported design failed the independent physics re-check (internal error)."""


def verify_designs(parts: PartTables, designs, objective: str, expect_feasible: bool = True) -> dict:
    """Metrics of ``designs`` (`selector.design.Design`, or single-axle (value, i, j, k)), checked
    against the search's claims.

    Returns the metrics dict (arrays aligned with ``designs``).
    """
    if not designs:
        return {}
    keys = design_keys(parts, designs)
    metrics = evaluate(parts, keys)
    if expect_feasible:
        checks = check_results(parts, metrics)
        for name, ok in checks.items():
            bad = np.nonzero(~ok)[0]
            if bad.size:
                b = bad[0]
                raise VerificationError(f"design {_name(parts, keys[b])} fails {name} on re-check; "
                                        "please report this bug")
        vals = metrics[OBJECTIVE_METRIC[objective]]
        claimed = np.array([d.value if hasattr(d, "value") else d[0] for d in designs])
        if not np.allclose(vals, claimed, rtol=1e-9, atol=0.0):
            raise VerificationError("objective values differ between search and re-check; please report this bug")
    return metrics


def design_keys(parts: PartTables, designs) -> np.ndarray:
    """Key rows (n, 5) of designs given as `Design` objects or single-axle (value, i, j, k) sequences."""
    rows = []
    for d in designs:
        key = getattr(d, "key", None)
        rows.append(key if key is not None else parts.single_keys(d[1], d[2], d[3])[0])
    return np.asarray(rows, dtype=np.int64).reshape(-1, 5)


def _name(parts: PartTables, key) -> str:
    names = [f"{parts.motors.part[key[m]]}/{parts.reducers.part[key[r]]}" for m, r in AXLE_COLUMNS.values()
             if key[m] >= 0]
    return "/".join(names + [str(parts.tyres.part[key[TY]])])
