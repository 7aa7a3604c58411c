"""`verify --ranks N`: the scheme decomposed over N processes against the single-domain run.

The promise is bit-identity: every block computes each of its cells from the same
neighbours with the same operations as the whole-domain kernel does, so the
decomposed answer must equal the single-domain one bit for bit. The runs cover
the harness's profiles (sine, bell, square, mixed) under a constant and a
sign-changing velocity, on a domain that does not divide evenly among the ranks
and on blocks as narrow as the halo allows. The single-domain run is the kernel's
whole step (`NAME_step`, halos filled periodically); the decomposed one calls
`NAME_stage` with the exchanges of the schedule in between.

In 2-D and 3-D (`--dims`) the domain is split on MPI's balanced process grid
(MPI.Compute_dims), every axis a prime number of cells (no grid divides it evenly),
and stepped by the splitting's sweeps (`--split`); the single-domain run is the
same splitting over the generated sweep on the whole periodic domain (`KernelSweep`,
NAME_sweep), the decomposed one the per-axis advance of axes.py between exchanges.
A third layout bounds x by walls (the uneven blocks, x not periodic): the outer
blocks fill their wall ghosts with the runtime's fill after every exchange, the
reference is the edge path (`EdgeSweep` with the generated wall helpers).
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
DIMS = (1, 2, 3)
BASE_CELLS_ND = {2: (23, 19), 3: (13, 11, 7)}
"""Cells per axis of the 2-D and 3-D test domains (primes, different per axis, so a
transposed block or exchange shows), raised to a prime that fits the narrowest blocks."""
DEFAULT_SPLIT = "strang"


FAULT_VARIABLE = "FLUXLOOM_DECOMPOSED_FAULT"
"""Names a deliberate decomposition bug (driver.FAULTS) for tests that show verify
catching it; the finding says when one was injected."""


def check_dims(dims: int) -> None:
    if dims not in DIMS:
        raise LoomError(f"--dims {dims}: decomposed runs take --dims 1, 2 or 3", file="--dims")


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


def is_prime(n: int) -> bool:
    return n > 1 and all(n % d for d in range(2, int(n ** 0.5) + 1))


def domain_cells_nd(dims: int, ranks: int, width: int) -> tuple[int, ...]:
    """Cells per axis of a 2-D or 3-D test domain: primes larger than the number of
    ranks (so no process grid divides an axis it splits), with room for blocks of
    `width` on every rank along any axis."""
    cells = []
    for base in BASE_CELLS_ND[dims]:
        n = max(base, ranks * width + 1)
        while not is_prime(n) or n in cells:
            n += 1
        cells.append(n)
    return tuple(cells)


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
    cell: int | tuple[int, ...]        # a tuple on 2-D and 3-D domains
    value: float
    expected: float
    size: float          # |value - expected|; inf when either is not finite
    rank: int
    block: tuple         # (lo, hi) in 1-D; one (lo, hi) per axis otherwise
    from_edge: int       # cells to the nearest edge of the block (0: an edge cell)

    def text(self) -> str:
        if isinstance(self.cell, tuple):
            where = " x ".join(f"[{lo}, {hi})" for lo, hi in self.block)
        else:
            where = "[{}, {})".format(*self.block)
        return (f"cell {self.cell} in {self.case}: {self.value!r} against {self.expected!r}, "
                f"in rank {self.rank}'s block {where}, "
                + ("at its edge" if self.from_edge == 0 else
                   f"{self.from_edge} cell{'s' if self.from_edge > 1 else ''} from its nearer edge"))

    def to_json(self) -> dict:
        nd = isinstance(self.cell, tuple)
        return {"case": self.case, "cell": list(self.cell) if nd else self.cell,
                "value": _finite(self.value), "expected": _finite(self.expected),
                "difference": _finite(self.size), "rank": self.rank,
                "block": [list(b) for b in self.block] if nd else list(self.block),
                "from_edge": self.from_edge}


def _exchanges(count: float) -> str:
    return f"{count:g} exchange{'' if count == 1 else 's'}"


def _finite(x: float):
    return float(x) if np.isfinite(x) else None


def largest_difference(case: str, layout: Layout, got: np.ndarray,
                       expected: np.ndarray) -> Difference | None:
    """The largest difference (1-D: cell and block as numbers; N-D: as tuples, and the
    distance to the nearest edge of the block along any axis)."""
    differ = bits(got) != bits(expected)
    if not differ.any():
        return None
    with np.errstate(all="ignore"):
        size = np.abs(got.astype(float) - expected.astype(float))
    size = np.where(np.isfinite(size), size, np.inf)
    size = np.where(differ, size, -1.0)
    index = tuple(int(i) for i in np.unravel_index(int(np.argmax(size)), size.shape))
    rank, local = layout.owner(index)
    block = layout.block(layout.coords(rank))
    ranges = tuple((lo, lo + n) for lo, n in zip(block.start, block.size))
    from_edge = min(min(i, n - 1 - i) for i, n in zip(local, block.size))
    if got.ndim == 1:
        return Difference(case, index[0], float(got[index]), float(expected[index]),
                          float(size[index]), rank, ranges[0], from_edge)
    return Difference(case, index, float(got[index]), float(expected[index]), float(size[index]),
                      rank, ranges, from_edge)


@dataclass(frozen=True)
class DecomposedVerification:
    scheme: str
    backend: str
    precision: str
    ranks: int
    dims: int                         # dimensions of the domain
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
    method: str | None = None         # the splitting (2-D and 3-D)
    sweeps_per_step: float = 1.0      # sweeps of one step (the splitting's, on average)

    @property
    def grid(self) -> tuple[int, ...]:
        """The process grid (blocks per axis)."""
        return next(iter(self.layouts.values())).dims

    @property
    def expected_exchanges(self) -> float:
        """The schedule's exchanges per sweep times the sweeps of a step."""
        return self.schedule.per_step * self.sweeps_per_step

    @property
    def identical(self) -> bool:
        return not self.differing

    @property
    def max_difference(self) -> float:
        return 0.0 if self.largest is None else self.largest.size

    @property
    def agree(self) -> bool:
        return (self.identical and self.exchanges_steady
                and self.exchanges_per_step == self.expected_exchanges)

    def finding(self) -> Finding:
        shapes = "; ".join(f"{name} {layout.describe()}" for name, layout in self.layouts.items())
        grid = " x ".join(str(d) for d in self.grid)
        split = "" if self.method is None else f", {self.method} splitting"
        walls = "; walls (x) and periodic" if "walls" in self.layouts else "; periodic"
        context = (f"{self.ranks} ranks, {self.dims}-D on a {grid} process grid{split}, blocks "
                   f"{shapes} cells{walls}; sine, bell, square, mixed; constant and varying "
                   f"velocity; {self.steps} steps at c = {self.courant:g}")
        if self.fault:
            context += f"; fault injected for testing: {self.fault}"
        s = self.schedule
        per = ("" if self.method is None else
               f" ({_exchanges(s.per_step)} per sweep, {self.sweeps_per_step:g} sweeps)")
        predicted = (f"bit-identical to the single-domain run, with "
                     f"{_exchanges(self.expected_exchanges)} per step{per} (halo {s.halo}, "
                     f"face halo {s.face_halo})")
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
            "dims": list(self.grid),
            "domain_dims": self.dims,
            "identical": self.identical,
            "max_difference": _finite(self.max_difference),
            "exchanges_per_step": self.exchanges_per_step,
            "expected_exchanges_per_step": self.expected_exchanges,
            "split": self.method,
            "sweeps_per_step": self.sweeps_per_step,
            "schedule": self.schedule.to_json(),
            "backend": self.backend,
            "precision": self.precision,
            "steps": self.steps,
            "layouts": {name: [list(s) for s in layout.splits]
                        for name, layout in self.layouts.items()},
            "periodic": {name: list(layout.periodic) for name, layout in self.layouts.items()},
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
                      fault: str | None = None, steps: int = STEPS, profiles=PROFILES,
                      method: str | None = None) -> DecomposedVerification:
    """Run scheme decomposed on `ranks` processes and compare with the single-domain run."""
    return verify_many([scheme], backend, precision, ranks, dims, courant, velocity, fault,
                       steps, profiles, method)[0]


def cell_fields(profile, cells: tuple[int, ...], clip, dtype) -> np.ndarray:
    """A 1-D profile's cell averages, or in N-D the mean of the profile along each axis
    (a convex combination: it stays in a clip range)."""
    shaped = in_clip_range(profile, clip)
    if len(cells) == 1:
        return shaped.cell_averages(cells[0]).astype(dtype)
    total = np.zeros(cells)
    for axis, n in enumerate(cells):
        shape = [1] * len(cells)
        shape[axis] = n
        total = total + shaped.cell_averages(n).reshape(shape)
    field = total / len(cells)
    if clip is not None:
        field = np.clip(field, *clip)
    return field.astype(dtype)


def face_fields(cells: tuple[int, ...], sign: float, dtype) -> dict[str, list[np.ndarray]]:
    """Face velocities of every axis of an N-D domain (n + 1 faces along the axis, face n
    the same as face 0): constant, of the sign `sign`, and a field of our own that
    changes sign along and across the lines."""
    constant, varying = [], []
    for axis in range(len(cells)):
        shape = [n + 1 if a == axis else n for a, n in enumerate(cells)]
        constant.append(np.full(shape, sign * (1.0 - 0.25 * axis), dtype))
        grids = [(np.arange(m) + (0.0 if a == axis else 0.5)) / cells[a]
                 for a, m in enumerate(shape)]
        mesh = np.meshgrid(*grids, indexing="ij")
        u = 0.4 + np.sin(2 * np.pi * mesh[axis])
        for a, x in enumerate(mesh):
            if a != axis:
                u = u * np.cos(2 * np.pi * x + a)
        moved = np.moveaxis(u, axis, 0)
        moved[-1] = moved[0]
        varying.append(u.astype(dtype))
    return {"constant": constant, "varying": varying}


def single_domain_split(kernel, q0: np.ndarray, u_faces, dt_dx: float, steps: int,
                        method: str) -> np.ndarray:
    """The whole-domain split run: the generated sweep on every axis, periodic ghosts."""
    from ..splitting import advance
    from ..sweeps import KernelSweep

    sweep = KernelSweep(kernel)
    with np.errstate(all="ignore"):
        return advance(lambda axis, q, fraction: sweep(axis, q, u_faces[axis], dt_dx * fraction),
                       q0, method, steps)


def wall_axes(layout_name: str, dims: int) -> list[bool]:
    """Periodicity per axis: the "walls" layout bounds x (axis 0) by walls."""
    return [not (layout_name == "walls" and axis == 0) for axis in range(dims)]


def single_domain_walls(scheme, backend: str, precision: str, q0: np.ndarray, u_faces,
                        dt_dx: float, steps: int, method: str) -> np.ndarray:
    """The whole-domain split run with walls at both ends of x and the other axes
    periodic: the reference path for edges (`EdgeSweep`, the stage on every line with
    the generated wall helpers before every stage; the walls' faces zeroed and
    mirrored by `extend_faces`)."""
    from ..boundaries import Edge, generated_fills
    from ..edge_sweeps import EdgeSweep, extend_faces
    from ..splitting import advance

    dims = q0.ndim
    edges = tuple((Edge("wall"), Edge("wall")) if axis == 0 else
                  (Edge("periodic"), Edge("periodic")) for axis in range(dims))
    sweep = EdgeSweep(scheme, backend, precision)
    fills = generated_fills(scheme, backend, precision)
    # a copy: without a face halo extend_faces may hand back (and wall) the array it got
    faces = [extend_faces(fills, u.copy(), axis, sweep.face_halo, edges)
             for axis, u in enumerate(u_faces)]
    with np.errstate(all="ignore"):
        q = advance(lambda axis, state, fraction: sweep(axis, state, faces[axis],
                                                         dt_dx * fraction, edges),
                    sweep.padded(q0), method, steps)
    return sweep.interior(q).copy()


def sweeps_per_step(method: str, dims: int, steps: int) -> float:
    from fluxloom.compiler.splittings import splitting

    table = splitting(method)
    return sum(len(table.sweeps(dims, k)) for k in range(steps)) / steps if steps else 0.0


def verify_many(schemes, backend: str = "numpy", precision: str = "double", ranks: int = 2,
                dims: int = 1, courant: float = 0.5, velocity: str = "+1",
                fault: str | None = None, steps: int = STEPS,
                profiles=PROFILES, method: str | None = None) -> list[DecomposedVerification]:
    """verify_decomposed for several schemes in one mpiexec launch."""
    check_options(ranks, dims)
    if fault is None:
        fault = os.environ.get(FAULT_VARIABLE) or None
    if dims > 1 and method is None:
        method = DEFAULT_SPLIT
    sign = -1.0 if velocity == "-1" else 1.0
    cases, arrays, expected, plans, sources = [], {}, [], [], []
    for scheme in schemes:
        kernel = load_kernel(scheme, backend, precision)
        sources.append(kernel_sources(scheme, backend, precision))
        schedule = exchange_schedule(scheme)
        width = max(kernel.halo, kernel.face_halo)
        if dims == 1:
            found = layouts(ranks, kernel.halo, kernel.face_halo)
            for layout in found.values():
                layout.check_widths(kernel.halo, kernel.face_halo)
            cells = next(iter(found.values())).cells
            fields = {"constant": [constant_velocity(cells[0], sign)],
                      "varying": [varying_velocity(cells[0])]}
        else:
            cells = domain_cells_nd(dims, ranks, width)
            # the ranks' process grid decides the blocks; "walls": uneven blocks, x bounded
            found = {"uneven": None, "narrowest": None, "walls": None}
            fields = face_fields(cells, sign, kernel.dtype)
        labels = []
        clip = None if scheme.clip is None else tuple(float(v) for v in scheme.clip)
        for profile in profiles:
            q0 = cell_fields(profile, cells, clip, kernel.dtype)
            for vname, u_faces in fields.items():
                dt_dx = courant / max(float(np.max(np.abs(u))) for u in u_faces)
                if dims == 1:
                    reference = single_domain(kernel, q0, u_faces[0], dt_dx, steps)
                else:
                    periodic = single_domain_split(kernel, q0, u_faces, dt_dx, steps, method)
                    walled = single_domain_walls(scheme, backend, precision, q0, u_faces, dt_dx,
                                                 steps, method)
                for lname, layout in found.items():
                    if dims > 1:
                        reference = walled if lname == "walls" else periodic
                    i = len(cases)
                    if dims == 1:
                        cases.append(_case(len(sources) - 1, layout, steps, dt_dx, fault))
                        arrays[f"u{i}"] = u_faces[0]
                    else:
                        cases.append({"kernel": len(sources) - 1, "cells": list(cells),
                                      "blocks": "uneven" if lname == "walls" else lname,
                                      "width": width, "periodic": wall_axes(lname, dims),
                                      "steps": steps,
                                      "dt_dx": dt_dx, "fault": fault, "method": method})
                        for axis, u in enumerate(u_faces):
                            arrays[f"u{i}_{axis}"] = u
                    arrays[f"q{i}"] = q0
                    expected.append((lname, reference))
                    blocks = ("uneven blocks, walls at both ends of x" if lname == "walls"
                              else f"{lname} blocks")
                    labels.append(f"{profile.name}, {vname} velocity, {blocks}")
        plans.append((scheme, found, labels, schedule))
    finals, exchanges, splits = run_cases(sources, cases, arrays, ranks)
    results, first = [], 0
    per_sweep_count = 1.0 if dims == 1 else sweeps_per_step(method, dims, steps)
    for scheme, found, labels, schedule in plans:
        differing, largest, used = [], None, {}
        for k, label in enumerate(labels):
            lname, reference = expected[first + k]
            layout = Layout(tuple(tuple(s) for s in splits[first + k]),
                            tuple(wall_axes(lname, dims)))
            used[lname] = layout
            diff = largest_difference(label, layout, finals[first + k], reference)
            if diff is not None:
                differing.append(label)
                if largest is None or not diff.size <= largest.size:
                    largest = diff
        measured = exchanges[first:first + len(labels)]
        results.append(DecomposedVerification(
            scheme.name, backend, precision, ranks, dims, courant, steps, used, len(labels),
            tuple(differing), largest, max(measured), len(set(measured)) == 1, schedule, fault,
            method, per_sweep_count))
        first += len(labels)
    return results
