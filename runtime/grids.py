"""Non-uniform 1-D grids on the periodic unit interval, and their exact solutions.

Ready for kernels that take per-cell widths: a smoothly stretched grid,
x = s + a sin(2 pi s) / (2 pi) at uniformly spaced s (a = 0.2 and 0.4; widths vary
smoothly by the factor (1 + a) / (1 - a)), and a grid whose widths are perturbed at
random by up to 10 % (widths 1/n times 1 + 0.1 r, r uniform in [-1, 1], rescaled to
fill [0, 1]). The exact solution of transport at a constant velocity is the
profile carried along, averaged over each (non-uniform) cell exactly through the
profile's antiderivative; errors weigh each cell by its width.

`grid_convergence` runs a width-aware stepper (`advance(q0, grid, velocity, dt,
steps) -> q`) once round the domain on a sequence of grids and reports errors and
observed orders: the measurement the width-aware kernels plug into.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .norms import NORMS, Errors, pair_orders
from .profiles import Profile

KINDS = ("uniform", "stretched", "perturbed")
STRETCHINGS = (0.2, 0.4)
PERTURBATION = 0.1
DEFAULT_SEED = 20240613


@dataclass(frozen=True)
class Grid:
    kind: str
    faces: np.ndarray          # n + 1 positions, faces[0] = 0, faces[n] = 1, increasing

    @property
    def n(self) -> int:
        return len(self.faces) - 1

    @property
    def widths(self) -> np.ndarray:
        return np.diff(self.faces)

    @property
    def centres(self) -> np.ndarray:
        return (self.faces[:-1] + self.faces[1:]) / 2

    def cell_averages(self, profile: Profile, shift: float = 0.0) -> np.ndarray:
        """The profile carried `shift` to the right, averaged over every cell."""
        return profile.average_over(self.faces, shift)

    def exact(self, profile: Profile, velocity: float, time: float) -> np.ndarray:
        """Cell averages of the exact solution of q_t + u q_x = 0 at `time`."""
        return self.cell_averages(profile, math.fmod(velocity * time, 1.0))

    def dt_dx(self, dt: float) -> np.ndarray:
        """dt over each cell's width: what a width-aware kernel takes per cell."""
        return dt / self.widths


def uniform(n: int) -> Grid:
    return Grid("uniform", np.arange(n + 1, dtype=float) / n)


def stretched(n: int, a: float = STRETCHINGS[0]) -> Grid:
    """x = s + a sin(2 pi s) / (2 pi): smooth and periodic, increasing for |a| < 1."""
    if not abs(a) < 1:
        raise ValueError(f"a stretching of {a} folds the grid; take |a| < 1")
    s = np.arange(n + 1, dtype=float) / n
    faces = s + a * np.sin(2 * np.pi * s) / (2 * np.pi)
    faces[0], faces[-1] = 0.0, 1.0
    return Grid(f"stretched (a = {a:g})", faces)


def perturbed(n: int, fraction: float = PERTURBATION, seed: int = DEFAULT_SEED) -> Grid:
    """Widths 1/n times 1 + fraction * r, r uniform in [-1, 1], rescaled to sum to 1."""
    r = np.random.default_rng(seed + n).uniform(-1.0, 1.0, n)
    widths = (1.0 + fraction * r) / n
    faces = np.concatenate(([0.0], np.cumsum(widths / widths.sum())))
    faces[-1] = 1.0
    return Grid(f"perturbed ({fraction:.0%})", faces)


def make_grid(kind: str, n: int, stretching: float = STRETCHINGS[0],
              seed: int = DEFAULT_SEED) -> Grid:
    if kind == "uniform":
        return uniform(n)
    if kind == "stretched":
        return stretched(n, stretching)
    if kind == "perturbed":
        return perturbed(n, seed=seed)
    raise ValueError(f"unknown grid '{kind}'; choose one of {', '.join(KINDS)}")


def weighted_errors(phi: np.ndarray, exact: np.ndarray, widths: np.ndarray) -> Errors:
    """Normalised l1, l2, linf errors with each cell weighed by its width (Williamson et al.
    1992, J. Comput. Phys. 102:211, citation from memory; on a uniform grid the weights
    cancel and these are runtime/norms.errors)."""
    diff = np.abs(np.asarray(phi, float) - np.asarray(exact, float))
    scale = np.abs(np.asarray(exact, float))
    return Errors(float((diff * widths).sum() / (scale * widths).sum()),
                  float(np.sqrt((diff ** 2 * widths).sum() / (scale ** 2 * widths).sum())),
                  float(diff.max() / scale.max()))


Advance = Callable[[np.ndarray, Grid, float, float, int], np.ndarray]
"""advance(q0, grid, velocity, dt, steps) -> q: a width-aware stepper on a periodic grid."""


@dataclass(frozen=True)
class GridConvergence:
    kind: str
    profile: str
    cells: tuple[int, ...]
    errors: tuple[Errors, ...]
    orders: dict            # per norm, one per successive pair of grids


def grid_convergence(advance: Advance, profile: Profile, kind: str, cells, courant: float,
                     velocity: float = 1.0, stretching: float = STRETCHINGS[0],
                     seed: int = DEFAULT_SEED) -> GridConvergence:
    """Carry `profile` once round the domain on each grid; the largest Courant number of
    any cell, |u| dt / width, is at most `courant`."""
    found = []
    for n in cells:
        grid = make_grid(kind, n, stretching, seed)
        period = 1.0 / abs(velocity)
        steps = max(1, math.ceil(period * abs(velocity) / (courant * grid.widths.min()) - 1e-9))
        dt = period / steps
        q = advance(grid.cell_averages(profile), grid, velocity, dt, steps)
        found.append(weighted_errors(q, grid.exact(profile, velocity, steps * dt), grid.widths))
    return GridConvergence(make_grid(kind, cells[0], stretching, seed).kind, profile.name,
                           tuple(cells), tuple(found),
                           {norm: pair_orders(list(cells), [e.get(norm) for e in found])
                            for norm in NORMS})
