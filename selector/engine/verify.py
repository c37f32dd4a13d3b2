"""Independent re-check of designs before they are shown.

`verify_designs` recomputes every metric of the given designs from the catalogue rows with the
full (non-staged) physics of `evaluate.evaluate`, never from the optimisation model, and raises
`VerificationError` if a design the search called feasible fails a requirement or check: that
would be a bug, never a user error.
"""

from __future__ import annotations

import numpy as np

from selector.engine.evaluate import OBJECTIVE_METRIC, check_results, evaluate
from selector.engine.parts import PartTables


class VerificationError(RuntimeError):
    """A reported design failed the independent physics re-check (internal error)."""


def verify_designs(parts: PartTables, designs, objective: str, expect_feasible: bool = True) -> dict:
    """Metrics of ``designs`` [(value, i, j, k), ...], checked against the search's claims.

    Returns the metrics dict (arrays aligned with ``designs``).
    """
    if not designs:
        return {}
    mi = np.array([d[1] for d in designs])
    rj = np.array([d[2] for d in designs])
    tk = np.array([d[3] for d in designs])
    metrics = evaluate(parts, mi, rj, tk)
    if expect_feasible:
        checks = check_results(parts, metrics)
        for name, ok in checks.items():
            bad = np.nonzero(~ok)[0]
            if bad.size:
                b = bad[0]
                raise VerificationError(
                    f"design {parts.motors.part[mi[b]]}/{parts.reducers.part[rj[b]]}/{parts.tyres.part[tk[b]]} "
                    f"fails {name} on re-check; please report this bug")
        vals = metrics[OBJECTIVE_METRIC[objective]]
        claimed = np.array([d[0] for d in designs])
        if not np.allclose(vals, claimed, rtol=1e-9, atol=0.0):
            raise VerificationError("objective values differ between search and re-check; please report this bug")
    return metrics
