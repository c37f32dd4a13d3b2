"""`evaluate.screen` with ``keep_best`` under the accel_time objective keeps the N fastest designs.

The oracle is the same screen without ``keep_best`` (every feasible design integrated exactly) on
random one- and two-unit studies with gearboxes (`selector.synthetic`, invented data): the N best
designs by (time, part ids) must be the same designs with the same times.
"""

from __future__ import annotations

import numpy as np

from selector.engine.evaluate import order_best, screen
from selector.synthetic import _all_keys, random_study


def test_keep_best_keeps_the_fastest(tmp_path):
    compared = 0
    for seed in range(24):
        study = random_study(9300 + seed, tmp_path / str(seed), sizes=((3, 5), (3, 5), (2, 4)),
                             layout=("single", "both", "same")[seed % 3],
                             gearbox_share=0.4 if seed % 2 else 0.0, objective="accel_time")
        keys = _all_keys(study.parts)
        ok_all, t_all = screen(study.parts, keys, objective="accel_time")
        for n in (1, 3):
            ok, t = screen(study.parts, keys, objective="accel_time", keep_best=n)
            assert not (ok & ~ok_all).any()  # pruning only removes designs
            want = order_best(t_all[ok_all], keys[ok_all], n)
            got = order_best(t[ok], keys[ok], n)
            assert np.array_equal(keys[ok_all][want], keys[ok][got])
            assert np.array_equal(t_all[ok_all][want], t[ok][got])
            compared += int(ok_all.sum() > n)
    assert compared >= 10  # studies with more feasible designs than kept, else the test loses its teeth
