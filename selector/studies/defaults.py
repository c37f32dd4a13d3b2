"""Default settings of the studies, importable without the engine (the command line shows them in --help)."""

STEP_PCT = 5.0
"""Default loosening step of explain's price of a requirement [%]."""
NEAR_MISS_PCT = 3.0
"""Default largest miss of explain's near-miss designs [%]."""

MAX_COUNT = 100_000
"""Most designs one search may be asked for (``count`` of solve and shortlist) [-]."""

EXPLAIN_CONFIRM_S = 60.0
"""Wall-clock limit of the re-solve that confirms a relaxation of a study above `EXPLAIN_MAX_DESIGNS` [s]: a
relaxation to a traction limit can be as hard to prove as the study itself; unconfirmed in time, it is
reported as not confirmed."""

EXPLAIN_MAX_DESIGNS = 5_000_000
"""Most designs explain enumerates for the closest design of an infeasible study [-]; above it (large
two-unit studies) explain reports the impossibilities and tries their relaxation, without a closest design."""
