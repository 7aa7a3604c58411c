"""`verify --ranks N`: the scheme decomposed over N processes against the single-domain run.

The promise is bit-identity: every block computes each of its cells from the same
neighbours with the same operations as the whole-domain kernel does, so the
decomposed answer must equal the single-domain one bit for bit. The runs cover
the harness's profiles (sine, bell, square, mixed) under a constant and a
sign-changing velocity, on a domain that does not divide evenly among the ranks
and on blocks as narrow as the halo allows. The single-domain run is the kernel's
whole step (`NAME_step`, halos filled periodically); the decomposed one calls
`NAME_stage` with the exchanges of the schedule in between.
"""
from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass

import numpy as np

from fluxloom.compiler import LoomError
from fluxloom.compiler.emit.exchange import ExchangeSchedule, exchange_schedule
from fluxloom.compiler.ir import Scheme

from ..findings import AGREE, DISAGREE, Finding, in_clip_range
from ..harness import constant_velocity, varying_velocity
from ..kernel import fill_periodic, load_kernel, periodic_faces
from ..profiles import BELL, MIXED, SINE, SQUARE
from .blocks import Layout, narrowest_split
from .launch import require_mpi, run_cases
from .stages import kernel_sources

PROFILES = (SINE, BELL, SQUARE, MIXED)
STEPS = 40
BASE_CELLS = 61
DIMS = (1,)
"""Dimensions a decomposed run supports until the kernels sweep multi-dimensional arrays."""


FAULT_VARIABLE = "FLUXLOOM_DECOMPOSED_FAULT"
"""Names a deliberate decomposition bug (driver.FAULTS) for tests that show verify
catching it; the finding says when one was injected."""


def check_dims(dims: int) -> None:
    if dims not in DIMS:
        raise LoomError(f"--dims {dims}: only --dims 1 is available (the kernels do not yet "
                        "sweep multi-dimensional arrays)", file="--dims")


def check_options(ranks: int | None, dims: int) -> None:
    """Refuse bad --ranks / --dims before any work (LoomError)."""
    check_dims(dims)
    if ranks is not None:
        require_mpi(ranks)


def with_decomposed(verification, decomposed: "DecomposedVerification"):
    """The verification with the decomposed run's finding added to its findings."""
    return dataclasses.replace(verification,
                               findings=tuple(verification.findings) + (decomposed.finding(),))


def domain_cells(ranks: int, width: int) -> int:
    """Cells of the test domain: room for the narrowest layout and, with more than one
    rank, a number the ranks do not divide."""
    cells = max(BASE_CELLS, 2 * ranks * width + 1)
    while ranks > 1 and cells % ranks == 0:
        cells += 1
    return cells


def layouts(ranks: int, halo: int, face_halo: int) -> dict[str, Layout]:
    width = max(halo, face_halo)
    cells = domain_cells(ranks, width)
    found = {"uneven": Layout.even((cells,), (ranks,)),
             "narrowest": Layout((narrowest_split(cells, ranks, width),), (True,))}
    if ranks == 1:
        del found["narrowest"]  # one block: both layouts are the same
    return found


def single_domain(kernel, q0: np.ndarray, u_face: np.ndarray, dt_dx: float,
                  steps: int) -> np.ndarray:
    """The whole-domain run: the kernel's step, halos filled periodically."""
    h, n = kernel.halo, q0.size
    current = np.zeros(n + 2 * h, kernel.dtype)
    current[h:h + n] = q0
    spare = np.zeros_like(current)
    faces = periodic_faces(u_face.astype(kernel.dtype), kernel.face_halo)
    with np.errstate(all="ignore"):
        for _ in range(steps):
            fill_periodic(current, h)
            kernel.step(current, faces, dt_dx, out=spare)
            current, spare = spare, current
    return current[h:h + n].copy()


def bits(a: np.ndarray) -> np.ndarray:
    return a.view(np.uint32 if a.dtype == np.float32 else np.uint64)


@dataclass(frozen=True)
class Difference:
    """Where a decomposed run differs most from the single-domain run."""

    case: str
    cell: int
    value: float
    expected: float
    size: float          # |value - expected|; inf when either is not finite
    rank: int
    block: tuple[int, int]
    from_edge: int       # cells to the nearer edge of the block (0: the edge cell)

    def text(self) -> str:
        lo, hi = self.block
        return (f"cell {self.cell} in {self.case}: {self.value!r} against {self.expected!r}, "
                f"in rank {self.rank}'s block [{lo}, {hi}), "
                + ("at its edge" if self.from_edge == 0 else
                   f"{self.from_edge} cell{'s' if self.from_edge > 1 else ''} from its nearer edge"))

    def to_json(self) -> dict:
        return {"case": self.case, "cell": self.cell, "value": _finite(self.value),
                "expected": _finite(self.expected), "difference": _finite(self.size),
                "rank": self.rank, "block": list(self.block), "from_edge": self.from_edge}


def _exchanges(count: float) -> str:
    return f"{count:g} exchange{'' if count == 1 else 's'}"


def _finite(x: float):
    return float(x) if np.isfinite(x) else None


def largest_difference(case: str, layout: Layout, got: np.ndarray,
                       expected: np.ndarray) -> Difference | None:
    differ = bits(got) != bits(expected)
    if not differ.any():
        return None
    with np.errstate(all="ignore"):
        size = np.abs(got.astype(float) - expected.astype(float))
    size = np.where(np.isfinite(size), size, np.inf)
    size = np.where(differ, size, -1.0)
    cell = int(np.argmax(size))
    rank, (local,) = layout.owner((cell,))
    block = layout.block(layout.coords(rank))
    lo, n = block.start[0], block.size[0]
    return Difference(case, cell, float(got[cell]), float(expected[cell]), float(size[cell]),
                      rank, (lo, lo + n), min(local, n - 1 - local))


@dataclass(frozen=True)
class DecomposedVerification:
    scheme: str
    backend: str
    precision: str
    ranks: int
    dims: int
    courant: float
    steps: int
    layouts: dict            # name -> Layout
    runs: int
    differing: tuple[str, ...]        # the runs that were not bit-identical
    largest: Difference | None
    exchanges_per_step: float         # measured: exchanges the driver made per step (largest)
    exchanges_steady: bool            # every run made the same number per step
    schedule: ExchangeSchedule        # what the kernel's schedule says
    fault: str | None

    @property
    def identical(self) -> bool:
        return not self.differing

    @property
    def max_difference(self) -> float:
        return 0.0 if self.largest is None else self.largest.size

    @property
    def agree(self) -> bool:
        return (self.identical and self.exchanges_steady
                and self.exchanges_per_step == self.schedule.per_step)

    def finding(self) -> Finding:
        shapes = "; ".join(f"{name} {layout.describe()}" for name, layout in self.layouts.items())
        context = (f"{self.ranks} ranks, dims {self.dims}, blocks {shapes} cells; sine, bell, "
                   f"square, mixed; constant and varying velocity; {self.steps} steps at "
                   f"c = {self.courant:g}")
        if self.fault:
            context += f"; fault injected for testing: {self.fault}"
        s = self.schedule
        predicted = (f"bit-identical to the single-domain run, with {_exchanges(s.per_step)} "
                     f"per step (halo {s.halo}, face halo {s.face_halo})")
        if self.identical:
            measured = f"bit-identical in all {self.runs} runs"
        else:
            measured = (f"{len(self.differing)} of {self.runs} runs differ; largest difference "
                        f"{self.max_difference:.3g} at {self.largest.text()}")
        measured += f"; {_exchanges(self.exchanges_per_step)} per step"
        return Finding("decomposed", context, predicted, measured,
                       AGREE if self.agree else DISAGREE,
                       {"identical": self.identical, "max_difference": _finite(self.max_difference),
                        "ranks": self.ranks})

    def to_json(self) -> dict:
        """The `decomposed` object of `verify --json`."""
        return {
            "ranks": self.ranks,
            "dims": self.dims,
            "identical": self.identical,
            "max_difference": _finite(self.max_difference),
            "exchanges_per_step": self.exchanges_per_step,
            "schedule": self.schedule.to_json(),
            "backend": self.backend,
            "precision": self.precision,
            "steps": self.steps,
            "layouts": {name: [list(s) for s in layout.splits]
                        for name, layout in self.layouts.items()},
            "runs": self.runs,
            "differing_runs": list(self.differing),
            "where": None if self.largest is None else self.largest.to_json(),
            "fault": self.fault,
        }


def _case(kernel: int, layout: Layout, steps: int, dt_dx: float, fault: str | None) -> dict:
    return {"kernel": kernel, "splits": [list(s) for s in layout.splits],
            "periodic": list(layout.periodic), "steps": steps, "dt_dx": dt_dx, "fault": fault}


def verify_decomposed(scheme: Scheme, backend: str = "numpy", precision: str = "double",
                      ranks: int = 2, dims: int = 1, courant: float = 0.5, velocity: str = "+1",
                      fault: str | None = None, steps: int = STEPS,
                      profiles=PROFILES) -> DecomposedVerification:
    """Run scheme decomposed on `ranks` processes and compare with the single-domain run."""
    return verify_many([scheme], backend, precision, ranks, dims, courant, velocity, fault,
                       steps, profiles)[0]


def verify_many(schemes, backend: str = "numpy", precision: str = "double", ranks: int = 2,
                dims: int = 1, courant: float = 0.5, velocity: str = "+1",
                fault: str | None = None, steps: int = STEPS,
                profiles=PROFILES) -> list[DecomposedVerification]:
    """verify_decomposed for several schemes in one mpiexec launch."""
    check_options(ranks, dims)
    if fault is None:
        fault = os.environ.get(FAULT_VARIABLE) or None
    sign = -1.0 if velocity == "-1" else 1.0
    cases, arrays, expected, plans, sources = [], {}, [], [], []
    for scheme in schemes:
        kernel = load_kernel(scheme, backend, precision)
        sources.append(kernel_sources(scheme, backend, precision))
        schedule = exchange_schedule(scheme)
        found = layouts(ranks, kernel.halo, kernel.face_halo)
        for layout in found.values():
            layout.check_widths(kernel.halo, kernel.face_halo)
        cells = next(iter(found.values())).cells[0]
        fields = {"constant": constant_velocity(cells, sign), "varying": varying_velocity(cells)}
        labels = []
        clip = None if scheme.clip is None else tuple(float(v) for v in scheme.clip)
        for profile in profiles:
            q0 = in_clip_range(profile, clip).cell_averages(cells).astype(kernel.dtype)
            for vname, u_face in fields.items():
                dt_dx = courant / float(np.max(np.abs(u_face)))
                reference = single_domain(kernel, q0, u_face, dt_dx, steps)
                for lname, layout in found.items():
                    i = len(cases)
                    cases.append(_case(len(sources) - 1, layout, steps, dt_dx, fault))
                    arrays[f"q{i}"], arrays[f"u{i}"] = q0, u_face
                    expected.append((layout, reference))
                    labels.append(f"{profile.name}, {vname} velocity, {lname} blocks")
        plans.append((scheme, found, labels, schedule))
    finals, exchanges = run_cases(sources, cases, arrays, ranks)
    results, first = [], 0
    for scheme, found, labels, schedule in plans:
        differing, largest = [], None
        for k, label in enumerate(labels):
            layout, reference = expected[first + k]
            diff = largest_difference(label, layout, finals[first + k], reference)
            if diff is not None:
                differing.append(label)
                if largest is None or not diff.size <= largest.size:
                    largest = diff
        measured = exchanges[first:first + len(labels)]
        results.append(DecomposedVerification(
            scheme.name, backend, precision, ranks, dims, courant, steps, found, len(labels),
            tuple(differing), largest, max(measured), len(set(measured)) == 1, schedule, fault))
        first += len(labels)
    return results
