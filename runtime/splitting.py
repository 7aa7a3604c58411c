"""Dimensional splitting: advance a 2-D or 3-D field one axis at a time.

A sweep is any callable `sweep(axis, q, fraction) -> q_new` that advances every
line of q along `axis` by `fraction * dt` (the caller binds dt, velocities and
boundaries). The helpers here only order the sweeps, from the tables in
`fluxloom.compiler.splittings` that the analysis of split schemes reads too:

- Lie: x then y (then z) on every step;
- alternating Lie: x then y on one step, y then x on the next (its order shows
  over a pair of steps, so run an even number of steps);
- Strang: x for dt/2, y for dt, x for dt/2 (3-D: x/2, y/2, z, y/2, x/2). The half
  sweeps are run as two sweeps, as the stability analysis assumes.

`runtime.sweeps.LineSweep` is a sweep built from a 1-D kernel (the reference
path); generated `NAME_sweep` kernels plug into the same interface.
"""
from __future__ import annotations

from typing import Callable

import numpy as np

from fluxloom.compiler import LoomError
from fluxloom.compiler.splittings import NAMES, splitting

Sweep = Callable[[int, np.ndarray, float], np.ndarray]
"""sweep(axis, q, fraction): q advanced along axis by fraction * dt (a new array or q itself)."""

__all__ = ["NAMES", "Sweep", "advance", "alternating_step", "lie_step", "split_step",
           "strang_step"]


def _method(name: str):
    if name not in NAMES:
        raise LoomError(f"unknown splitting '{name}'; choose one of {', '.join(NAMES)}",
                        file="splitting")
    return splitting(name)


def split_step(sweep: Sweep, q: np.ndarray, method: str = "strang", step: int = 0,
               on_sweep: Callable[[int, float, np.ndarray], None] | None = None) -> np.ndarray:
    """One split step of q (rank 2 or 3) with `method`; `step` counts steps from the start
    of the run (alternating Lie reverses the order on odd steps). `on_sweep(axis, fraction,
    q)` sees the field after every sweep."""
    table = _method(method)
    for s in table.sweeps(np.ndim(q), step):
        q = sweep(s.axis, q, float(s.fraction))
        if on_sweep is not None:
            on_sweep(s.axis, float(s.fraction), q)
    return q


def lie_step(sweep: Sweep, q: np.ndarray) -> np.ndarray:
    """x, then y (then z), each for the whole step."""
    return split_step(sweep, q, "lie")


def alternating_step(sweep: Sweep, q: np.ndarray, step: int) -> np.ndarray:
    """x then y on even steps, y then x on odd ones."""
    return split_step(sweep, q, "alternating", step)


def strang_step(sweep: Sweep, q: np.ndarray) -> np.ndarray:
    """x for half the step, y for the whole step, x for the other half."""
    return split_step(sweep, q, "strang")


def advance(sweep: Sweep, q: np.ndarray, method: str, steps: int, first_step: int = 0,
            before_step: Callable[[int], None] | None = None) -> np.ndarray:
    """`steps` split steps; `before_step(k)` runs before step k (e.g. to set the velocity
    of a flow that changes in time)."""
    for k in range(first_step, first_step + int(steps)):
        if before_step is not None:
            before_step(k)
        q = split_step(sweep, q, method, k)
    return q
