"""The design's distinct-values helper against numpy.unique (an independent implementation)."""

from __future__ import annotations

import numpy as np
import pytest

from planner.design._arrays import distinct, distinct_inverse


@pytest.mark.parametrize("size", [0, 1, 2, 17, 1000])
def test_distinct_values_and_inverse_are_numpys(size):
    rng = np.random.default_rng(size)
    values = rng.integers(-5, 40, size=size).astype(np.int64)
    expected, expected_inverse = np.unique(values, return_inverse=True)
    found, inverse = distinct_inverse(values)
    np.testing.assert_array_equal(found, expected)
    np.testing.assert_array_equal(inverse, expected_inverse.reshape(-1))
    np.testing.assert_array_equal(found[inverse], values)
    np.testing.assert_array_equal(distinct(values), expected)
