"""Divergence-free flows on the unit cube, as face velocities.

A flow with a vector potential A (u = curl A) gets the exact mean normal velocity
of every face from Stokes' theorem: the flux through a face is the circulation of
A round its four edges, each edge integral computed once (Gauss-Legendre) and
shared by the faces that meet there. The discrete divergence of a cell is then a
sum of edge integrals that cancel in pairs: zero up to round-off, whatever the
quadrature's own error. A uniform flow is given by its constant velocity.

Arrays follow runtime/sweeps.py: q[i, j, k] with axis 0 = x, 1 = y, 2 = z; faces
along x have shape (n + 1, n, n), along y (n, n + 1, n), along z (n, n, n + 1).
The domain is periodic; face n along an axis is face 0 again and is set equal to it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

EDGE_POINTS = 6          # Gauss-Legendre points per edge (exact to degree 11)


@dataclass(frozen=True)
class PotentialFlow:
    name: str
    description: str
    potential: Callable[[np.ndarray, np.ndarray, np.ndarray], tuple]   # (A_x, A_y, A_z)
    period: float            # the time after which the exact solution is the initial field
    time_factor: Callable[[float], float] = lambda t: 1.0             # g(t)
    dims: int = 3

    def _edges(self, n: int, along: int) -> np.ndarray:
        """The integral of A's `along` component over every edge parallel to that axis:
        n cells along it, n + 1 corners along the other two."""
        nodes, weights = np.polynomial.legendre.leggauss(EDGE_POINTS)
        corners = np.arange(n + 1, dtype=float) / n
        points = ((np.arange(n)[:, None] + (nodes[None, :] + 1) / 2) / n).ravel()
        axes = [corners] * 3
        axes[along] = points
        grid = np.meshgrid(*axes, indexing="ij")
        values = self.potential(*grid)[along]
        shape = [n + 1] * 3
        shape[along] = n
        shape.insert(along + 1, EDGE_POINTS)
        return np.tensordot(values.reshape(shape), weights / (2 * n), axes=([along + 1], [0]))

    def face_velocities(self, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(u, v, w) on the x-, y- and z-faces (g = 1): circulation over face area."""
        ex, ey, ez = (self._edges(n, axis) for axis in range(3))
        area = n * n
        # each face's boundary traversed counter-clockwise seen from its normal's tip
        u = (ey[:, :, :-1] + ez[:, 1:, :] - ey[:, :, 1:] - ez[:, :-1, :]) * area
        v = (ez[:-1, :, :] + ex[:, :, 1:] - ez[1:, :, :] - ex[:, :, :-1]) * area
        w = (ex[:, :-1, :] + ey[1:, :, :] - ex[:, 1:, :] - ey[:-1, :, :]) * area
        u[n] = u[0]
        v[:, n] = v[:, 0]
        w[:, :, n] = w[:, :, 0]
        return u, v, w

    def max_speed(self, n: int) -> float:
        return max(float(np.max(np.abs(f))) for f in self.face_velocities(n))


@dataclass(frozen=True)
class UniformFlow:
    name: str
    description: str
    velocity: tuple[float, float, float]
    period: float
    time_factor: Callable[[float], float] = lambda t: 1.0
    dims: int = 3

    def face_velocities(self, n: int) -> tuple[np.ndarray, ...]:
        shapes = [(n + 1, n, n), (n, n + 1, n), (n, n, n + 1)]
        return tuple(np.full(s, float(c)) for s, c in zip(shapes, self.velocity))

    def max_speed(self, n: int) -> float:
        return max(abs(float(c)) for c in self.velocity)


def divergence_3d(u: np.ndarray, v: np.ndarray, w: np.ndarray) -> np.ndarray:
    """The discrete divergence of every cell (unit cube, n cells per side)."""
    n = u.shape[1]
    return (np.diff(u, axis=0) + np.diff(v, axis=1) + np.diff(w, axis=2)) * n


def _deformation_potential(x, y, z):
    # u = curl A with A = (0, -psi_2, psi_1), psi_1 = sin^2(pi x) sin^2(pi y) sin(2 pi z) / pi
    # and psi_2 = sin^2(pi x) sin^2(pi z) sin(2 pi y) / pi: the sum of two swirls, one in
    # each of the planes (x, y) and (x, z).
    sx2 = np.sin(np.pi * x) ** 2
    psi_1 = sx2 * np.sin(np.pi * y) ** 2 * np.sin(2 * np.pi * z) / np.pi
    psi_2 = sx2 * np.sin(np.pi * z) ** 2 * np.sin(2 * np.pi * y) / np.pi
    return np.zeros_like(x), -psi_2, psi_1


DEFORMATION_PERIOD = 0.5
# The 3-D deformational flow of LeVeque 1996 (SIAM J. Numer. Anal. 33:627; citation and
# formula from memory [mem]): u = 2 sin^2(pi x) sin(2 pi y) sin(2 pi z),
# v = -sin(2 pi x) sin^2(pi y) sin(2 pi z), w = -sin(2 pi x) sin(2 pi y) sin^2(pi z), times
# cos(pi t / T): the flow slows, reverses and undoes itself, so at t = T the exact
# solution is the initial field. T = 0.5 is this harness's choice (a milder
# deformation than the original's, resolved on the small grids a 3-D test affords).
DEFORMATION = PotentialFlow(
    "deformation", "3-D deformational flow, reversed at t = T/2, T = 0.5",
    _deformation_potential, DEFORMATION_PERIOD,
    lambda t: math.cos(math.pi * t / DEFORMATION_PERIOD))

# A uniform diagonal flow: one crossing of the periodic cube in unit time (constant
# coefficients: the sweeps commute).
DIAGONAL = UniformFlow("diagonal", "uniform velocity (1, 1, 1), one crossing in t = 1",
                       (1.0, 1.0, 1.0), 1.0)
