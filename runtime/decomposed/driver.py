"""One rank's block of a decomposed domain, advanced stage by stage with the
exchanges of the kernel's schedule (compiler/emit/exchange.py).

A sweep along one axis is the kernel's step along that axis: the face
velocities' halo is refreshed once (flux correction only), then for every stage
the halo of the stage's input is refreshed (from the neighbours, and by the
caller's `fill_edge` beyond a non-periodic edge) and the per-axis advance hook
runs the stage on the block. In 1-D the hook is the kernel's own `stage`; on 2-D
and 3-D blocks it is `axes.AxisSweeps` (the generated sweep for one-stage
schemes, the stage on every line otherwise), and a split step (`split_step`) is
the splitting table's sequence of sweeps, each with its own exchanges.

Arrays of cells hold `kernel.halo` ghost cells on each side of every axis. The
driver owns the stage buffers and the workspace; `sweep` returns the new state
in a driver-owned array and keeps the one passed in for its next output.
"""
from __future__ import annotations

from typing import Callable

import numpy as np
from mpi4py import MPI

from .axes import AxisSweeps
from .blocks import Layout, decomposition_error
from .exchange import HaloExchange
from .stages import StageKernel

SKIP_STAGE_EXCHANGE = "skip-stage-exchange"
NARROW_HALO = "narrow-halo"
FAULTS = (SKIP_STAGE_EXCHANGE, NARROW_HALO)
"""Deliberate decomposition bugs, for showing that verification catches them:
no exchange between the stages of a step, or one ghost cell per side too few."""

AxisAdvance = Callable[[int, int, np.ndarray, np.ndarray, np.ndarray, np.ndarray, float], None]
"""advance(axis, stage, q_start, q_stage, q_out, u_face, dt_dx): one stage along axis."""

EdgeFill = Callable[[int, int, np.ndarray], None]
"""fill(axis, side, q): the ghost cells of q beyond a domain edge (side -1 before the
block, +1 after it) along axis; called after every exchange of q on a non-periodic
axis, for each side of the block that has no neighbour (a wall, an inflow)."""


class DecomposedDomain:
    """This rank's block of `layout`, the kernel that advances it and its exchanges."""

    def __init__(self, kernel: StageKernel, layout: Layout, comm: MPI.Comm | None = None,
                 advance: AxisAdvance | None = None, fault: str | None = None,
                 fill_edge: EdgeFill | None = None):
        comm = MPI.COMM_WORLD if comm is None else comm
        if comm.Get_size() != layout.ranks:
            raise decomposition_error(f"the layout {layout.describe()} has {layout.ranks} blocks "
                                      f"but the communicator has {comm.Get_size()} processes")
        if fault is not None and fault not in FAULTS:
            raise decomposition_error(f"unknown fault '{fault}'; choose one of "
                                      f"{', '.join(FAULTS)}")
        if layout.ndim > 3:
            raise decomposition_error(f"a layout of {layout.ndim} axes; sweeps take 1 to 3")
        if fill_edge is None and not all(layout.periodic):
            raise decomposition_error("a non-periodic axis needs fill_edge, which fills the "
                                      "ghost cells beyond the domain's edges")
        layout.check_widths(kernel.halo, kernel.face_halo)
        self.kernel = kernel
        self.fill_edge = fill_edge
        self.layout = layout
        self.fault = fault
        self.cart = comm.Create_cart(list(layout.dims), periods=list(layout.periodic),
                                     reorder=False)
        self.rank = self.cart.Get_rank()
        self.block = layout.block(tuple(self.cart.Get_coords(self.rank)))
        self.exchange = HaloExchange(self.cart, self.block)
        halo = kernel.halo
        self.shape = tuple(n + 2 * halo for n in self.block.size)
        self._buffers = [np.zeros(self.shape, kernel.dtype)
                         for _ in range(min(kernel.stages - 1, 2))]
        self._spare = np.zeros(self.shape, kernel.dtype)
        self._work = kernel.workspace(self.block.size[0]) if layout.ndim == 1 else None
        if advance is None:
            advance = self._line_stage if layout.ndim == 1 else AxisSweeps(kernel)
        self.advance = advance

    def free(self) -> None:
        self.cart.Free()

    @property
    def exchanges(self) -> int:
        """Exchanges made so far (each: one array, one axis, both neighbours)."""
        return self.exchange.count

    # ---- the step --------------------------------------------------------------------

    def _line_stage(self, axis, stage, q_start, q_stage, q_out, u_face, dt_dx) -> None:
        self.kernel.stage(stage, self.block.size[0], q_start, q_stage, q_out, u_face, dt_dx,
                          self._work)

    def sweep(self, axis: int, q: np.ndarray, u_face: np.ndarray, dt_dx: float) -> np.ndarray:
        """One step of the kernel along axis; returns the new state (q is reused later)."""
        kernel = self.kernel
        halo, stages = kernel.halo, kernel.stages
        width = halo - 1 if self.fault == NARROW_HALO else halo
        if kernel.face_halo:
            self.exchange.faces(u_face, kernel.face_halo, axis)
        out = self._spare
        for stage in range(stages):
            source = q if stage == 0 else self._buffers[(stage - 1) % 2]
            target = out if stage == stages - 1 else self._buffers[stage % 2]
            if stage == 0 or self.fault != SKIP_STAGE_EXCHANGE:
                self.exchange.cells(source, halo, axis, width)
                for side in self.exchange.edges(axis):
                    self.fill_edge(axis, side, source)
            self.advance(axis, stage, q, source, target, u_face, dt_dx)
        self._spare = q
        return out

    def step(self, q: np.ndarray, u_face: np.ndarray, dt_dx: float) -> np.ndarray:
        """One step of a 1-D domain (a multi-dimensional step is a sequence of sweeps)."""
        if self.layout.ndim != 1:
            raise decomposition_error("step is for 1-D domains; advance a multi-dimensional one "
                                      "by sweeps")
        return self.sweep(0, q, u_face, dt_dx)

    def split_step(self, q: np.ndarray, u_faces, dt_dx: float, method: str = "strang",
                   step: int = 0) -> np.ndarray:
        """One split step of a 2-D or 3-D block: the sweeps of `method`'s table
        (compiler/splittings.py) in order, each `sweep` with its share of dt. u_faces:
        the block's face velocities of every axis (`local_faces(u, axis)`)."""
        from fluxloom.runtime.splitting import split_step

        def sweep(axis: int, state: np.ndarray, fraction: float) -> np.ndarray:
            return self.sweep(axis, state, u_faces[axis], dt_dx * fraction)

        return split_step(sweep, q, method, step)

    # ---- data in and out -----------------------------------------------------------------

    def _interior(self) -> tuple[slice, ...]:
        h = self.kernel.halo
        return tuple(slice(h, h + n) for n in self.block.size)

    def _global_block(self) -> tuple[slice, ...]:
        return tuple(slice(s, s + n) for s, n in zip(self.block.start, self.block.size))

    def local_cells(self, global_q: np.ndarray) -> np.ndarray:
        """This block's cells of a global array (every rank holds it), halos zero."""
        q = np.zeros(self.shape, self.kernel.dtype)
        q[self._interior()] = global_q[self._global_block()]
        return q

    def local_faces(self, global_faces: np.ndarray, axis: int = 0) -> np.ndarray:
        """This block's faces along axis of a global face array (cells[axis] + 1 faces along
        axis, cells along the others), with zero ghost faces for the exchange to fill."""
        f, n = self.kernel.face_halo, self.block.size[axis]
        shape = list(self.block.size)
        shape[axis] = n + 1 + 2 * f
        u = np.zeros(shape, self.kernel.dtype)
        source = list(self._global_block())
        source[axis] = slice(self.block.start[axis], self.block.start[axis] + n + 1)
        target = [slice(None)] * len(shape)
        target[axis] = slice(f, f + n + 1)
        u[tuple(target)] = global_faces[tuple(source)]
        return u

    def gather(self, q: np.ndarray, root: int = 0) -> np.ndarray | None:
        """The global interior on rank `root` (None on the others)."""
        pieces = self.cart.gather((self._global_block(), q[self._interior()].copy()), root=root)
        if self.rank != root:
            return None
        whole = np.empty(self.layout.cells, self.kernel.dtype)
        for where, values in pieces:
            whole[where] = values
        return whole
