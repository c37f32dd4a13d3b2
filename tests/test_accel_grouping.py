"""The acceleration run's quadrature gives the same times however its work is grouped.

`accel_run` evaluates the Gauss-Legendre nodes of several pieces, and refines the brackets of
several pieces and designs, in one vectorised call (`PIECE_ELEMENTS`, `CROSS_ROWS`). Each design's
time must not depend on that grouping: the per-element arithmetic and the order of every sum are
the same (project convention: bitwise equal). Random one- and two-unit studies with gearboxes
(`selector.synthetic`, invented data).
"""

from __future__ import annotations

import numpy as np

from selector.physics import accel_run, accel_state
from selector.synthetic import _all_keys, random_study
from selector.units import kmh_to_mps


def _times(tmp_path, monkeypatch, piece_elements=None, cross_rows=None):
    if piece_elements is not None:
        monkeypatch.setattr(accel_run, "PIECE_ELEMENTS", piece_elements)
    if cross_rows is not None:
        monkeypatch.setattr(accel_state, "CROSS_ROWS", cross_rows)
    out = []
    for seed in range(9):
        study = random_study(9100 + seed, tmp_path / str(seed), sizes=((3, 4), (3, 4), (2, 3)),
                             layout=("single", "both", "same")[seed % 3],
                             gearbox_share=0.4 if seed % 2 else 0.0, objective="accel_time")
        axles, body = study.parts.design(_all_keys(study.parts))
        target = kmh_to_mps(study.parts.problem.requirements.accel_to_kmh or 100.0)
        out.append(accel_run.accel_time_s(axles, body, target))
    return np.concatenate(out)


def test_grouping_does_not_change_times(tmp_path, monkeypatch):
    whole = _times(tmp_path / "whole", monkeypatch)
    split = _times(tmp_path / "split", monkeypatch, piece_elements=64, cross_rows=5)
    assert np.isfinite(whole).sum() > 100  # reached designs exist, else the test loses its teeth
    assert np.array_equal(whole, split)
