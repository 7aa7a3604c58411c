"""Divergence-free flows on the unit square, as face velocities from a streamfunction.

u = d(psi)/dy, v = -d(psi)/dx. The velocity of a face is the difference of psi
between the face's two corners over its length, i.e. the exact mean normal
velocity over that face; then the discrete divergence of every cell,
(u(i+1/2) - u(i-1/2))/dx + (v(j+1/2) - v(j-1/2))/dy, is a sum of corner values that
cancel: zero up to round-off. A flow may change in time by a factor g(t) on the
whole field (the streamlines stay put).

Arrays follow runtime/sweeps.py: q[i, j] with axis 0 = x, faces along x have shape
(n + 1, n), faces along y (n, n + 1). The domain is periodic; face n along an axis
is face 0 again and is set equal to it.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np


@dataclass(frozen=True)
class Flow:
    name: str
    description: str
    streamfunction: Callable[[np.ndarray, np.ndarray], np.ndarray]   # psi(x, y), spatial part
    period: float                    # the time after which the exact solution is the initial field
    time_factor: Callable[[float], float] = lambda t: 1.0            # g(t)

    def corner_streamfunction(self, n: int) -> np.ndarray:
        """psi at the (n + 1)^2 cell corners, [i, j] at (i/n, j/n)."""
        x = np.arange(n + 1, dtype=float) / n
        return self.streamfunction(*np.meshgrid(x, x, indexing="ij"))

    def face_velocities(self, n: int) -> tuple[np.ndarray, np.ndarray]:
        """(u on x-faces, v on y-faces) of the spatial part (g = 1)."""
        psi = self.corner_streamfunction(n)
        u = np.diff(psi, axis=1) * n            # (n + 1, n): psi(top) - psi(bottom), over dy
        v = -np.diff(psi, axis=0) * n           # (n, n + 1): -(psi(right) - psi(left)), over dx
        u[n, :] = u[0, :]                       # periodic: the same face
        v[:, n] = v[:, 0]
        return u, v

    def max_speed(self, n: int) -> float:
        """The largest face velocity of the spatial part (|g| <= 1 for every flow here)."""
        return max(float(np.max(np.abs(f))) for f in self.face_velocities(n))


def divergence(u: np.ndarray, v: np.ndarray) -> np.ndarray:
    """The discrete divergence of every cell (unit square, n cells per side)."""
    n = u.shape[1]
    return (np.diff(u, axis=0) + np.diff(v, axis=1)) * n


# Solid-body rotation about the centre, one turn in unit time, counter-clockwise:
# u = -2 pi (y - 1/2), v = 2 pi (x - 1/2) (the rotating flow of Zalesak 1979).
ROTATION = Flow("rotation", "solid-body rotation about (1/2, 1/2), one turn in t = 1",
                lambda x, y: -math.pi * ((x - 0.5) ** 2 + (y - 0.5) ** 2), 1.0)

SWIRL_PERIOD = 1.5
# The swirling deformational flow of LeVeque 1996 (SIAM J. Numer. Anal. 33:627, sec. 9;
# citation from memory): psi = sin^2(pi x) sin^2(pi y) / pi, so u = sin^2(pi x) sin(2 pi y),
# v = -sin^2(pi y) sin(2 pi x), times cos(pi t / T): the flow slows, reverses and undoes
# itself, so at t = T the exact solution is the initial field.
SWIRL = Flow("swirl", "swirling deformational flow, reversed at t = T/2, T = 1.5",
             lambda x, y: np.sin(np.pi * x) ** 2 * np.sin(np.pi * y) ** 2 / np.pi,
             SWIRL_PERIOD, lambda t: math.cos(math.pi * t / SWIRL_PERIOD))

FLOWS = {f.name: f for f in (ROTATION, SWIRL)}
