"""Normalised error norms and observed orders of convergence.

On a uniform 1-D grid the area weights cancel, so (f the exact solution):
l1 = sum|phi - f| / sum|f|, l2 = sqrt(sum (phi - f)^2) / sqrt(sum f^2),
linf = max|phi - f| / max|f|.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

NORMS = ("l1", "l2", "linf")


@dataclass(frozen=True)
class Errors:
    l1: float
    l2: float
    linf: float

    def get(self, norm: str) -> float:
        return getattr(self, norm)


def errors(phi: np.ndarray, exact: np.ndarray) -> Errors:
    """Normalised l1, l2 and linf errors of phi against the exact solution."""
    phi = np.asarray(phi, dtype=float)
    exact = np.asarray(exact, dtype=float)
    diff = np.abs(phi - exact)
    scale = np.abs(exact)
    return Errors(float(diff.sum() / scale.sum()),
                  float(np.sqrt((diff ** 2).sum()) / np.sqrt((exact ** 2).sum())),
                  float(diff.max() / scale.max()))


def _usable(e: float) -> bool:
    return math.isfinite(e) and e > 0.0


def pair_orders(cells, errs) -> list[float]:
    """Observed order between each successive pair of grids (nan where undefined)."""
    orders = []
    for (n0, e0), (n1, e1) in zip(zip(cells, errs), zip(cells[1:], errs[1:])):
        if _usable(e0) and _usable(e1):
            orders.append(math.log(e0 / e1) / math.log(n1 / n0))
        else:
            orders.append(float("nan"))
    return orders


def fitted_order(cells, errs) -> float:
    """Least-squares slope of log(error) against log(1/N) over the usable points."""
    points = [(n, e) for n, e in zip(cells, errs) if _usable(e)]
    if len(points) < 2:
        return float("nan")
    n, e = np.array(points, dtype=float).T
    slope, _ = np.polyfit(-np.log(n), np.log(e), 1)
    return float(slope)
