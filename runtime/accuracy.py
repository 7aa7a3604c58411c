"""Accuracy against cost: errors on a ladder of grids, the work each run takes, and the
grid (and cost) a scheme needs for a target error.

A scheme's convergence line is its error against N on log-log axes, one point per
grid measured (one revolution of the smooth bell). The grid it needs for a target
error E is read off that line between the two grids whose errors bracket E
(straight in log N and log error); nothing is extrapolated beyond the finest grid.
The work of one revolution on N cells is N times its steps (cell-updates); its cost
is that work times the measured cost per cell-update (runtime/costs.py).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

from . import harness
from .costs import Cost, within_noise

NORMS = ("l1", "linf")


@dataclass(frozen=True)
class GridError:
    """One run of the convergence ladder."""

    n: int
    steps: int
    l1: float | None          # None when the run diverged or the kernel faulted
    l2: float | None
    linf: float | None
    diverged_at: int | None
    fault_at: int | None

    @property
    def work(self) -> int:
        """Cell-updates of the run (one revolution)."""
        return self.n * self.steps

    def get(self, norm: str) -> float | None:
        return getattr(self, norm)

    @property
    def stopped_text(self) -> str | None:
        if self.fault_at is not None:
            return f"kernel fault at step {self.fault_at}"
        if self.diverged_at is not None:
            return f"diverged at step {self.diverged_at}"
        return None

    def to_json(self, cost: Cost | None = None) -> dict:
        doc = {"n": self.n, "steps": self.steps, "l1": self.l1, "l2": self.l2,
               "linf": self.linf, "work": self.work, "diverged_at": self.diverged_at,
               "fault_at": self.fault_at}
        if cost is not None:
            doc["seconds"] = cost.scaled(self.work).median
        return doc


def grid_errors(conv: harness.Convergence) -> tuple[GridError, ...]:
    """The convergence ladder as measured by the harness (the same runs verify judges)."""
    out = []
    for row in conv.rows:
        e = row.errors
        out.append(GridError(row.n, row.steps, e.l1 if e else None, e.l2 if e else None,
                             e.linf if e else None, row.diverged_at, row.fault_at))
    return tuple(out)


# ---- the grid a target error needs -----------------------------------------------------

@dataclass(frozen=True)
class Reach:
    """What a scheme needs for a target error, read off its convergence line."""

    target: float
    norm: str
    n_line: float | None      # N on the line where the error equals the target
    n: int | None             # the grid it needs: n_line rounded up (the coarsest grid if
                              # that grid already meets the target)
    steps: int | None
    cost: Cost | None         # of one revolution on n cells
    note: str                 # how it was found, or why it was not

    @property
    def reached(self) -> bool:
        return self.n is not None

    def to_json(self) -> dict:
        return {"target": self.target, "norm": self.norm, "reached": self.reached,
                "n": self.n, "n_line": self.n_line, "steps": self.steps,
                "cost": self.cost.to_json() if self.cost else None, "note": self.note}


def line_cells(points: Sequence[tuple[int, float | None]], target: float) -> tuple[float | None, str]:
    """N where the convergence line through `points` (N ascending, error or None) reaches
    `target`: interpolated in log-log between the first pair of successive grids that
    brackets it. (None, why) when the grids measured do not reach it."""
    usable = []
    for n, e in points:                     # the line ends at the first missing point
        if e is None or not math.isfinite(e) or e <= 0:
            break
        usable.append((n, e))
    if not usable:
        return None, "no grid gave an error (every run diverged)"
    n0, e0 = usable[0]
    if e0 <= target:
        return float(n0), f"met on the coarsest grid, N = {n0}"
    for (na, ea), (nb, eb) in zip(usable, usable[1:]):
        if ea >= target >= eb and ea > eb:
            t = math.log(ea / target) / math.log(ea / eb)
            return math.exp(math.log(na) + t * math.log(nb / na)), \
                f"interpolated between N = {na} and N = {nb}"
    finest_n, finest_e = usable[-1]
    return None, f"not reached on the grids measured (N = {finest_n} gives {finest_e:.3g})"


def reach(errors: Sequence[GridError], cost: Cost | None, target: float, norm: str,
          courant: float) -> Reach:
    """The grid and the cost of one revolution at `target` error in `norm`."""
    n_line, note = line_cells([(g.n, g.get(norm)) for g in errors], target)
    if n_line is None:
        return Reach(target, norm, None, None, None, None, note)
    n = max(errors[0].n, math.ceil(n_line - 1e-9))
    steps = harness.revolution_steps(n, courant)
    return Reach(target, norm, n_line, n, steps, cost.scaled(n * steps) if cost else None, note)


@dataclass(frozen=True)
class Cheapest:
    index: int                # into the rows compared
    reach: Reach
    runner_up: int | None
    noise: str | None         # set when the runner-up is within the timings' spread


def cheapest(reaches: Sequence[Reach], labels: Sequence[str]) -> Cheapest | None:
    """The scheme whose run at the target costs least (median), and whether that is noise."""
    ranked = sorted((i for i, r in enumerate(reaches) if r.reached and r.cost is not None),
                    key=lambda i: reaches[i].cost.median)
    if not ranked:
        return None
    best = ranked[0]
    second = ranked[1] if len(ranked) > 1 else None
    noise = None
    if second is not None and within_noise(reaches[best].cost, reaches[second].cost):
        noise = (f"noise: at this error {labels[best]} and {labels[second]} cost within the "
                 f"spread of their timings; either may be the cheaper")
    return Cheapest(best, reaches[best], second, noise)
