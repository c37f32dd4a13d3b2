"""The benchmarks' view of the shared synthetic-study generator (`selector.synthetic`, invented data)."""

from selector.synthetic import (  # noqa: F401
    synthetic_catalogs,
    synthetic_problem,
    synthetic_study,
    variant_motors,
    variant_study,
)
