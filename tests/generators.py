"""The tests' view of the shared synthetic-study generator (`selector.synthetic`, invented data).

Kept so that tests import ``from generators import ...`` as before; the generator itself lives in
the package, where the benchmarks and tools use the same code.
"""

from selector.synthetic import *  # noqa: F401,F403
from selector.synthetic import (  # noqa: F401  (names the tests use, listed for readers)
    HAND_ENVIRONMENT,
    HAND_VEHICLE,
    Study,
    _all_keys,
    _all_triples,
    motor_row,
    part_ids,
    random_study,
    reducer_row,
    tyre_row,
    write_and_load,
)
