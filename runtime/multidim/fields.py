"""Initial fields on the unit square (or cube), as cell averages.

The 2-D cases end where they started (a full turn, or a flow that undoes itself),
so the exact final cell averages are the initial ones: the averages only have to
be computed once per grid, by Gauss-Legendre quadrature in every cell for smooth
fields and by the mean of many sample points for fields with jumps. Either way
the error measured is the scheme's alone.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

SMOOTH_POINTS = 4        # Gauss-Legendre points per cell and axis (exact to degree 7)
SAMPLES = 8              # sample points per cell and axis for fields with jumps


@dataclass(frozen=True)
class Field:
    name: str
    description: str
    value: Callable[..., np.ndarray]    # f(x, y) or f(x, y, z)
    low: float
    high: float
    smooth: bool
    dims: int = 2
    jump_derivative: int | None = None   # the lowest derivative that jumps (None: none)

    def cell_averages(self, n: int) -> np.ndarray:
        """The n^dims cell averages, [i, j] over [i/n, (i+1)/n] x [j/n, (j+1)/n] (and
        [k/n, (k+1)/n] along z)."""
        if self.smooth:
            nodes, weights = np.polynomial.legendre.leggauss(SMOOTH_POINTS)
            offsets, weights = (nodes + 1) / 2, weights / 2
        else:
            offsets = (np.arange(SAMPLES) + 0.5) / SAMPLES
            weights = np.full(SAMPLES, 1.0 / SAMPLES)
        points = ((np.arange(n)[:, None] + offsets[None, :]) / n).ravel()   # cell-major
        m = len(offsets)
        values = self.value(*np.meshgrid(*[points] * self.dims, indexing="ij"))
        values = values.reshape((n, m) * self.dims)
        cells, nodes = "ijk"[:self.dims], "abc"[:self.dims]
        pattern = "".join(c + a for c, a in zip(cells, nodes))
        averaged = np.einsum(f"{pattern},{','.join(nodes)}->{cells}", values,
                             *[weights] * self.dims)
        return np.clip(averaged, self.low, self.high)   # removes round-off only

    def scaled(self, low: float, high: float) -> "Field":
        """The same shape mapped affinely onto [low, high] (schemes clamped to a range)."""
        a = (high - low) / (self.high - self.low) if self.high > self.low else 0.0
        b = low - a * self.low if self.high > self.low else (low + high) / 2
        inner = self.value
        return Field(self.name, f"{self.description}, mapped onto [{low:g}, {high:g}]",
                     lambda *xs: a * inner(*xs) + b, low, high, self.smooth, self.dims,
                     self.jump_derivative)


def _slotted_cylinder(x, y):
    """1 inside a disc of radius 0.15 about (0.5, 0.75) cut by a slot 0.05 wide from its
    bottom edge up to y = 0.85; 0 elsewhere."""
    disc = (x - 0.5) ** 2 + (y - 0.75) ** 2 <= 0.15 ** 2
    slot = (np.abs(x - 0.5) <= 0.025) & (y <= 0.85)
    return np.where(disc & ~slot, 1.0, 0.0)


def _hump(x, y):
    """(1 + cos(pi r / R)) / 2 within r <= R = 0.25 of (0.5, 0.7), else 0: smooth but for
    a jump in the second derivative at r = R."""
    r = np.sqrt((x - 0.5) ** 2 + (y - 0.7) ** 2) / 0.25
    return np.where(r <= 1.0, 0.5 * (1.0 + np.cos(np.pi * np.minimum(r, 1.0))), 0.0)


# Zalesak 1979 (J. Comput. Phys. 31:335) turned a slotted cylinder once about the centre
# of a 100 x 100 grid; this is that shape scaled to the unit square (radius 15, slot 5 and
# length 25 cells there; citation and sizes from memory).
SLOTTED_CYLINDER = Field("slotted_cylinder", "slotted cylinder (Zalesak 1979), radius 0.15 "
                         "about (0.5, 0.75), slot 0.05 wide and 0.25 long",
                         _slotted_cylinder, 0.0, 1.0, smooth=False)
HUMP = Field("hump", "cosine hump of radius 0.25 about (0.5, 0.7)", _hump, 0.0, 1.0,
             smooth=True, jump_derivative=2)
CONSTANT = Field("constant", "constant field q = 1", lambda x, y: np.ones_like(x), 1.0, 1.0,
                 smooth=True)
# 3-D: a smooth periodic wave (no derivative jumps) and a constant
WAVE_3D = Field("wave_3d", "q = (1 + sin(2 pi x) sin(2 pi y) sin(2 pi z)) / 2",
                lambda x, y, z: 0.5 + 0.5 * np.sin(2 * np.pi * x) * np.sin(2 * np.pi * y)
                * np.sin(2 * np.pi * z), 0.0, 1.0, smooth=True, dims=3)
CONSTANT_3D = Field("constant_3d", "constant field q = 1", lambda x, y, z: np.ones_like(x),
                    1.0, 1.0, smooth=True, dims=3)
