"""The captures' running median against its definition: numpy's median of each value with its
``half`` neighbours either side, fewer at the ends (the window cut at the array's edges)."""

import numpy as np
import pytest

from bench.workflow.captures import _running_median


@pytest.mark.parametrize("half", [0, 1, 2, 3])
def test_running_median_equals_the_median_of_each_cut_window(half: int) -> None:
    rng = np.random.default_rng(7)
    for n in range(0, 3 * (2 * half + 1)):
        values = np.round(rng.normal(size=n), 2)  # ties as in rounded cents
        expected = np.array([np.median(values[max(0, i - half) : i + half + 1]) for i in range(n)])
        np.testing.assert_array_equal(_running_median(values, half), expected)
