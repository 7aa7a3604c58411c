"""What a kernel costs: seconds per cell-update from repeated timings, with their spread.

Every kernel is timed in the same process on its own pair of arrays, filled once
with the same data and reused for every repeat; the kernels take turns within
each round, so a slow moment of a shared machine falls on all of them alike.
A cell-update is one whole step (every stage) on one cell. The median is the
cost; the range (min to max) is shown beside it, and `noise_warnings` says where
the range is wider than the difference it is asked to decide.
"""
from __future__ import annotations

import math
import statistics
import time
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from .kernel import fill_periodic, periodic_faces
from .profiles import MIXED


@dataclass(frozen=True)
class TimingSettings:
    cells: int = 100_000          # cells of the timed domain
    repeats: int = 7              # timed samples per kernel
    sample_seconds: float = 0.03  # each sample runs at least this long (calibrated steps)
    steps: int | None = None      # steps per sample; None: calibrated from one warm step


@dataclass(frozen=True)
class Cost:
    """Seconds per cell-update: the median of the samples and their range."""

    median: float
    min: float
    max: float
    samples: tuple[float, ...]

    @classmethod
    def from_samples(cls, seconds: Sequence[float], cell_updates: int) -> "Cost":
        """`seconds` of each sample, each doing `cell_updates` cell-updates."""
        if not seconds or cell_updates <= 0:
            raise ValueError("a cost needs at least one sample of positive work")
        per_update = tuple(s / cell_updates for s in seconds)
        return cls(statistics.median(per_update), min(per_update), max(per_update), per_update)

    @property
    def spread(self) -> float:
        return self.max - self.min

    def scaled(self, work: float) -> "Cost":
        """The cost of `work` cell-updates (the same samples, scaled)."""
        return Cost(self.median * work, self.min * work, self.max * work,
                    tuple(s * work for s in self.samples))

    @property
    def speed(self) -> float:
        """Million cell-updates per second at the median."""
        return 1e-6 / self.median if self.median > 0 else math.inf

    def to_json(self) -> dict:
        return {"median": self.median, "min": self.min, "max": self.max,
                "repeats": len(self.samples)}


def within_noise(a: Cost, b: Cost) -> bool:
    """The two medians differ by less than the wider of the two ranges."""
    return abs(a.median - b.median) < max(a.spread, b.spread)


def noise_warnings(named: Sequence[tuple[str, Cost]], what: str = "cost per cell-update") -> list[str]:
    """One sentence for every pair of neighbours (by median) whose order is within noise."""
    ordered = sorted(named, key=lambda item: item[1].median)
    warnings = []
    for (label_a, a), (label_b, b) in zip(ordered, ordered[1:]):
        if within_noise(a, b):
            gap = abs(b.median - a.median)
            warnings.append(
                f"noise: the {what} of {label_a} and {label_b} differ by {_percent(gap, a)}, "
                f"less than the spread of their timings ({_percent(max(a.spread, b.spread), a)} "
                f"of the median); their order by cost is not decided by these timings")
    return warnings


def _percent(value: float, reference: Cost) -> str:
    return f"{100 * value / reference.median:.0f} %" if reference.median > 0 else "?"


# ---- timing ------------------------------------------------------------------------

class _TimedDomain:
    """One kernel's ping-pong arrays on a periodic domain, filled once and reused."""

    def __init__(self, kernel, cells: int, courant: float):
        self.kernel, self.cells, self.courant = kernel, cells, courant
        halo = kernel.halo
        self.data = MIXED.cell_averages(cells)      # the same data for every kernel
        self.arrays = [np.zeros(cells + 2 * halo, dtype=kernel.dtype) for _ in range(2)]
        self.reset()
        self.u_face = periodic_faces(np.ones(cells + 1, dtype=kernel.dtype),
                                     getattr(kernel, "face_halo", 0))

    def reset(self) -> None:
        """The initial data again (untimed), so an unstable scheme never times overflow."""
        halo = self.kernel.halo
        for a in self.arrays:
            a[halo:halo + self.cells] = self.data
        self.turn = 0

    def step(self) -> None:
        source, target = self.arrays[self.turn], self.arrays[self.turn ^ 1]
        fill_periodic(source, self.kernel.halo)
        self.kernel.step(source, self.u_face, self.courant, out=target)
        self.turn ^= 1

    def run(self, steps: int) -> None:
        for _ in range(steps):
            self.step()


def time_kernels(kernels: Sequence, courant: float, settings: TimingSettings = TimingSettings(),
                 timer: Callable[[], float] = time.perf_counter) -> list[Cost]:
    """Cost per cell-update of each kernel: `settings.repeats` samples each, in rounds
    where the kernels take turns. `timer` is injectable (tests script its readings)."""
    courant = min(courant, 1.0)     # the data stay finite for any stable or unstable scheme
    domains = [_TimedDomain(k, settings.cells, courant) for k in kernels]
    steps = []
    for domain in domains:
        domain.step()                               # warm up (caches, first-call costs)
        if settings.steps is not None:
            steps.append(settings.steps)
            continue
        start = timer()
        domain.step()
        once = max(timer() - start, 1e-9)
        steps.append(max(1, math.ceil(settings.sample_seconds / once)))
    samples: list[list[float]] = [[] for _ in domains]
    with np.errstate(all="ignore"):   # an unstable scheme's data may overflow; cost is cost
        for _ in range(settings.repeats):
            for i, domain in enumerate(domains):
                domain.reset()
                start = timer()
                domain.run(steps[i])
                samples[i].append(timer() - start)
    return [Cost.from_samples(s, settings.cells * n) for s, n in zip(samples, steps)]
