"""Range-minimum queries (`selector.engine.rmq.RangeMin`) against numpy's minimum over each slice."""

import numpy as np
import pytest

from selector.engine.rmq import RangeMin


@pytest.mark.parametrize("n", [1, 2, 3, 7, 64, 65, 1000])
def test_range_min_matches_slices(n):
    rng = np.random.default_rng(n)
    v = rng.normal(size=n)
    r = RangeMin(v)
    a = rng.integers(0, n + 1, 400)
    b = rng.integers(0, n + 1, 400)
    expected = np.array([v[x:y].min() if y > x else np.inf for x, y in zip(a, b, strict=True)])
    assert np.array_equal(r.query(a, b), expected)
    assert np.array_equal(r.query(a.reshape(20, 20), b.reshape(20, 20)), expected.reshape(20, 20))


def test_range_min_broadcasts_and_empty_ranges():
    r = RangeMin([3.0, 1.0, 2.0])
    assert r.query(np.array([[0], [1]]), np.array([3, 2, 0])).tolist() == [[1.0, 1.0, np.inf], [1.0, 1.0, np.inf]]
    assert r.query(np.array([2]), np.array([2])).tolist() == [np.inf]
