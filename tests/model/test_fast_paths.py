"""The fast paths of the model give the results of the plain ones.

* ``input_impedance`` on one frequency row shared by every fingering (fingerings whose holes
  agree from the foot up share the impedance computed so far) equals the same impedance
  computed fingering by fingering on their own rows;
* ``playing_frequencies`` (a coarse grid, then four rounds of shrinking parabolas) finds every
  mode within 0.01 c of a golden-section search run to 40 iterations (J. Kiefer 1953: each
  shrinks the bracket by 0.618, to 4e-9 of its width) on the same minima.

Truth by construction: the same impedance evaluated two ways; the same minimum found by two
search methods.
"""

from __future__ import annotations

import numpy as np
import pytest

from bench.model.acoustics import air_at
from bench.model.geometry import builtin_geometry
from bench.model.instrument import (
    ModelOptions,
    input_impedance,
    playing_frequencies,
    refine_minima,
    states_of,
)

OPTIONS = [ModelOptions(), ModelOptions(hole_diameter_scale=(1.0, 0.97, 1.03, 1.0, 0.95, 1.0, 1.02, 1.0))]


@pytest.mark.parametrize("name", ["wren-alto", "wren-soprano"])
def test_shared_rows_give_the_impedance_of_each_fingering_alone(name):
    g = builtin_geometry(name)
    states = states_of([f.holes for f in g.fingerings])
    grid = np.geomspace(150.0, 4000.0, 97)
    air = air_at(25.0, 60.0)
    for options in OPTIONS:
        shared = input_impedance(g, states, grid, air, options)
        alone = input_impedance(g, states, np.tile(grid, (len(states), 1)), air, options)
        assert shared.shape == alone.shape == (len(states), len(grid))
        np.testing.assert_allclose(shared, alone, rtol=1e-12)
        one = input_impedance(g, states[5:6], grid, air, options)  # a single fingering
        np.testing.assert_allclose(one[0], alone[5], rtol=1e-12)


@pytest.mark.parametrize("name", ["wren-alto", "wren-soprano"])
@pytest.mark.parametrize("temp_c", [15.0, 25.0])
def test_every_mode_of_the_compass_within_a_hundredth_of_a_cent_of_a_fine_search(name, temp_c):
    g = builtin_geometry(name)
    patterns = [f.holes for f in g.fingerings]
    air = air_at(temp_c, 60.0)
    for options in OPTIONS:
        fast = playing_frequencies(g, patterns, air, 3, options).freq_hz
        assert np.all(np.isfinite(fast))
        fine = refine_minima(g, states_of(patterns), fast * 0.996, fast * 1.004, air, options, iterations=40)
        assert np.max(np.abs(1200 * np.log2(fast / fine))) < 0.01
