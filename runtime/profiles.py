"""Initial profiles on the periodic unit interval [0, 1), as exact cell averages.

Each profile is given by an antiderivative on [0, 1], so the average over any
cell (and over any shifted cell, for the exact solution after transport) is a
difference of two values: no quadrature error, discontinuities included.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

Antiderivative = Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True)
class Profile:
    name: str
    description: str
    antiderivative: Antiderivative  # F(x) = integral of f from 0 to x, for x in [0, 1]
    low: float                       # min and max of f
    high: float
    jump_derivative: int | None      # lowest derivative with a jump (0: the profile itself); None: smooth

    def _periodic_antiderivative(self, x: np.ndarray) -> np.ndarray:
        whole = np.floor(x)
        period_total = float(self.antiderivative(np.array([1.0]))[0])
        return self.antiderivative(x - whole) + whole * period_total

    def expected_order(self, order: int) -> float:
        """The l1 order a scheme of `order` can show on this profile.

        A jump in the k-th derivative caps it at p (k + 1) / (p + 1): k = 0 (a
        discontinuity) is the rate p / (p + 1) of Banks, Aslam and Rider 2008, J. Comput.
        Phys. 227:6985 (citation from memory); the same count of smeared cells gives the
        general k (derived here, and what the harness measures on the bell, k = 2)."""
        if self.jump_derivative is None:
            return float(order)
        return min(float(order), order * (self.jump_derivative + 1) / (order + 1))

    def cell_averages(self, n: int, shift: float = 0.0) -> np.ndarray:
        """Averages over the n cells of [0, 1) of the profile carried `shift` to the right."""
        edges = np.arange(n + 1, dtype=float) / n - shift
        values = self._periodic_antiderivative(edges)
        # true averages lie in [low, high]; clipping removes only round-off (1 + 1e-15)
        return np.clip(np.diff(values) * n, self.low, self.high)

    def average_over(self, edges: np.ndarray, shift: float = 0.0) -> np.ndarray:
        """Averages over the cells [edges[k], edges[k + 1]] of the profile carried `shift` to
        the right (cells of any widths: non-uniform grids)."""
        edges = np.asarray(edges, dtype=float)
        values = self._periodic_antiderivative(edges - shift)
        return np.clip(np.diff(values) / np.diff(edges), self.low, self.high)

    def scaled(self, low: float, high: float) -> "Profile":
        """The same shape mapped affinely onto [low, high] (for schemes clamped to a range)."""
        span = self.high - self.low
        a = (high - low) / span
        b = low - a * self.low
        inner = self.antiderivative
        return Profile(self.name, f"{self.description}, mapped onto [{low:g}, {high:g}]",
                       lambda x: a * inner(x) + b * x, low, high, self.jump_derivative)


def cell_centres(n: int) -> np.ndarray:
    return (np.arange(n) + 0.5) / n


def face_positions(n: int) -> np.ndarray:
    """The n + 1 faces of the periodic grid, left face of the first cell first."""
    return np.arange(n + 1, dtype=float) / n


# ---- the pieces, each an antiderivative on [0, 1] ---------------------------

def _sine(x):
    return (1.0 - np.cos(2.0 * np.pi * x)) / (2.0 * np.pi)


def _cosine_bell(centre: float, width: float) -> Antiderivative:
    """cos^2(pi (x - centre) / width) for |x - centre| <= width / 2, else 0."""
    def antiderivative(x):
        t = np.clip(x, centre - width / 2, centre + width / 2) - centre
        return t / 2 + width / (4 * np.pi) * np.sin(2 * np.pi * t / width) + width / 4
    return antiderivative


def _triangle(centre: float, half_width: float) -> Antiderivative:
    """max(0, 1 - |x - centre| / half_width): a peak with kinks."""
    def antiderivative(x):
        s = np.clip((x - centre) / half_width, -1.0, 1.0)
        return half_width * (s - s * np.abs(s) / 2 + 0.5)
    return antiderivative


def _box(left: float, right: float) -> Antiderivative:
    """1 on [left, right], else 0."""
    def antiderivative(x):
        return np.clip(x, left, right) - left
    return antiderivative


def _sum(*parts: Antiderivative) -> Antiderivative:
    def antiderivative(x):
        return sum(part(x) for part in parts)
    return antiderivative


SINE = Profile("sine", "sin(2 pi x)", _sine, -1.0, 1.0, None)
BELL = Profile("bell", "cosine-squared bell, width 1/2, centred at 1/2",
               _cosine_bell(0.5, 0.5), 0.0, 1.0, 2)  # f'' jumps at the edges
SQUARE = Profile("square", "square wave: 1 on [0.3, 0.7], 0 elsewhere",
                 _box(0.3, 0.7), 0.0, 1.0, 0)
MIXED = Profile("mixed", "smooth hump, triangle and square side by side",
                _sum(_cosine_bell(0.2, 0.3), _triangle(0.5, 0.12), _box(0.68, 0.92)),
                0.0, 1.0, 0)

PROFILES = {p.name: p for p in (SINE, BELL, SQUARE, MIXED)}
SMOOTH = (SINE, BELL)
DISCONTINUOUS = (SQUARE, MIXED)
