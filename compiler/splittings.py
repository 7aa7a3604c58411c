"""Dimensional splittings: which axes one step sweeps, in which order, for what share of dt.

One table per splitting, the only place a sweep order is written. The runtime's
stepping helpers (runtime/splitting.py) run these sequences, and the analysis of
split schemes (compiler/analysis/splitting.py) derives the splitting error and
its order from them, so the two cannot drift apart.

A sweep is (axis, fraction): one 1-D step along `axis` with time step fraction * dt.
Axis 0 is x, 1 is y, 2 is z.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from typing import Callable

AXIS_NAMES = ("x", "y", "z")
MAX_DIMS = len(AXIS_NAMES)


@dataclass(frozen=True)
class Sweep:
    axis: int
    fraction: Fraction          # of the step's dt

    @property
    def name(self) -> str:
        return AXIS_NAMES[self.axis]


@dataclass(frozen=True)
class Splitting:
    name: str
    description: str
    period: int                 # steps after which the sequence repeats
    _steps: Callable[[int], tuple[tuple[Sweep, ...], ...]]   # dims -> one sequence per step

    def sequence(self, dims: int) -> tuple[tuple[Sweep, ...], ...]:
        """The sweeps of each step of one period, in the order they are applied."""
        check_dims(dims)
        return self._steps(dims)

    def sweeps(self, dims: int, step: int) -> tuple[Sweep, ...]:
        """The sweeps of step number `step` (0, 1, 2, ... from the start of a run)."""
        return self.sequence(dims)[step % self.period]

    def fraction_of(self, dims: int, axis: int) -> Fraction:
        """The share of dt each sweep along `axis` takes (one per axis in every table)."""
        found = {s.fraction for step in self.sequence(dims) for s in step if s.axis == axis}
        assert len(found) == 1, f"{self.name}: axis {axis} is swept with several fractions"
        return found.pop()


def check_dims(dims: int) -> None:
    if not 1 <= dims <= MAX_DIMS:
        raise ValueError(f"dims must be 1 to {MAX_DIMS}, not {dims}")


def _forward(dims: int) -> tuple[Sweep, ...]:
    return tuple(Sweep(a, Fraction(1)) for a in range(dims))


def _lie(dims: int):
    return (_forward(dims),)


def _alternating(dims: int):
    return (_forward(dims), tuple(reversed(_forward(dims))))


def _strang(dims: int):
    half = tuple(Sweep(a, Fraction(1, 2)) for a in range(dims - 1))
    return (half + (Sweep(dims - 1, Fraction(1)),) + tuple(reversed(half)),)


SPLITTINGS: dict[str, Splitting] = {s.name: s for s in (
    Splitting("lie", "Lie splitting: every step sweeps x, then y (then z)", 1, _lie),
    Splitting("alternating", "alternating Lie splitting: x then y on one step, y then x on "
              "the next (z first and last in 3-D)", 2, _alternating),
    Splitting("strang", "Strang splitting: half a step in x, a whole step in y, half a step "
              "in x (3-D: x/2, y/2, z, y/2, x/2)", 1, _strang),
)}

NAMES: tuple[str, ...] = tuple(SPLITTINGS)


def splitting(name: str) -> Splitting:
    return SPLITTINGS[name]
