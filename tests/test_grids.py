"""Non-uniform grids for the width-aware kernels: the stretched and perturbed generators,
cell averages on non-uniform cells, and the convergence measurement, held against numpy
quadrature and a width-aware first-order upwind stepper written here."""
from __future__ import annotations

import numpy as np
import pytest

from fluxloom.runtime.grids import (Grid, grid_convergence, make_grid, perturbed, stretched,
                                    uniform, weighted_errors)
from fluxloom.runtime.norms import errors
from fluxloom.runtime.profiles import BELL, SINE


@pytest.mark.parametrize("a", [0.2, 0.4])
def test_stretched_grid_follows_its_map(a):
    grid = stretched(64, a)
    s = np.arange(65) / 64
    assert np.allclose(grid.faces, s + a * np.sin(2 * np.pi * s) / (2 * np.pi), atol=1e-15)
    assert np.all(grid.widths > 0) and abs(grid.widths.sum() - 1) < 1e-15
    # dx/ds = 1 + a cos(2 pi s): widths range over (1 - a)/N .. (1 + a)/N [derived]
    ratio = grid.widths.max() / grid.widths.min()
    assert abs(ratio - (1 + a) / (1 - a)) < 0.01


def test_stretched_grid_refuses_a_folding_map():
    with pytest.raises(ValueError, match="folds"):
        stretched(16, 1.0)


def test_perturbed_grid_is_within_ten_percent_and_repeatable():
    grid = perturbed(200)
    scaled = grid.widths * 200
    assert scaled.min() > 0.88 and scaled.max() < 1.12 and scaled.std() > 0.03
    assert abs(grid.widths.sum() - 1) < 1e-14
    assert np.array_equal(grid.faces, perturbed(200).faces)
    assert not np.array_equal(grid.faces, perturbed(200, seed=1).faces)


@pytest.mark.parametrize("kind", ["stretched", "perturbed"])
def test_cell_averages_on_non_uniform_cells_match_quadrature(kind):
    grid = make_grid(kind, 37)
    nodes, weights = np.polynomial.legendre.leggauss(8)
    x = grid.faces[:-1, None] + grid.widths[:, None] * (nodes[None, :] + 1) / 2
    for shift in (0.0, 0.3):
        quadrature = (np.sin(2 * np.pi * (x - shift)) * weights).sum(axis=1) / 2
        assert np.max(np.abs(grid.cell_averages(SINE, shift) - quadrature)) < 1e-13
    # the total is the integral whatever the widths (the bell's integral is 1/4) [derived]
    assert abs((grid.cell_averages(BELL) * grid.widths).sum() - 0.25) < 1e-14


def test_weighted_errors_reduce_to_the_uniform_norms():
    rng = np.random.default_rng(0)
    phi, exact = rng.random(20), rng.random(20) + 1
    a, b = weighted_errors(phi, exact, uniform(20).widths), errors(phi, exact)
    assert np.allclose([a.l1, a.l2, a.linf], [b.l1, b.l2, b.linf])


def _upwind_with_widths(q0: np.ndarray, grid: Grid, velocity: float, dt: float, steps: int):
    """First-order upwind on cells of the grid's widths (u > 0, periodic): written here as an
    independent width-aware stepper."""
    q = q0.copy()
    ratio = grid.dt_dx(dt) * velocity
    for _ in range(steps):
        q = q - ratio * (q - np.roll(q, 1))
    return q


@pytest.mark.parametrize("kind", ["uniform", "stretched", "perturbed"])
def test_grid_convergence_measures_first_order_upwind(kind):
    # first-order upwind converges at first order on smooth data, also on non-uniform grids
    # (common practice, no source)
    found = grid_convergence(_upwind_with_widths, SINE, kind, (100, 200, 400), 0.8)
    assert found.kind.startswith(kind)
    assert all(abs(o - 1) < 0.15 for o in found.orders["l1"])
    assert found.errors[-1].l1 < found.errors[0].l1 / 3
