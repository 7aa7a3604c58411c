"""The per-axis advance of a multi-dimensional block: one stage of the kernel on every
line of the block along one axis (the hook `DecomposedDomain` calls between exchanges).

The generated sweep (`Kernel.sweep`, NAME_sweep) runs a whole step on every line, so
it can stand for a stage only when the step has one stage: then it is called once on
the block, the ghost cells along the axis just exchanged. A multi-stage step needs
fresh ghost cells before every stage, which the sweep cannot take from a neighbour
in between (it refreshes its intermediate stages itself, periodically along the
line), so those kernels go stage by stage through NAME_stage, every line at once:
the numpy stage slices along its first axis only and takes all lines in one call;
the C stage is called once per line: in place along the contiguous (last) axis,
on rows of a contiguous copy along the others. Either way each
cell is computed by the same operations as in the whole-domain sweep, so the
decomposed run is the single-domain one bit for bit.

A sweep along one axis reads ghost cells along that axis only, on interior lines
only: corner ghosts are never read, so no exchange fills them.
"""
from __future__ import annotations

import numpy as np

from .stages import StageKernel


class AxisSweeps:
    """advance(axis, stage, q_start, q_stage, q_out, u_face, dt_dx) for blocks of rank 1-3.

    Arrays of cells hold `kernel.halo` ghost cells on each side of every axis; u_face of
    an axis holds the block's faces along it (n + 1 + 2*face_halo) and its interior
    cells along the others. State kept between the stages of one sweep (the lines of
    the step's input, the face velocities, RK4's registers) lives here."""

    def __init__(self, kernel: StageKernel):
        self.kernel = kernel
        self._sweep: dict = {}     # per axis: what stage 0 prepared for the later stages
        self._work: dict = {}      # per (axis, shape): workspaces, one per line

    def __call__(self, axis: int, stage: int, q_start, q_stage, q_out, u_face, dt_dx) -> None:
        kernel = self.kernel
        if kernel.stages == 1:
            kernel.sweeper.sweep(q_stage, u_face, dt_dx, axis, halo=kernel.halo, out=q_out)
        elif kernel.line_axis == 0:
            self._numpy_stage(axis, stage, q_start, q_stage, q_out, u_face, dt_dx)
        else:
            self._row_stage(axis, stage, q_start, q_stage, q_out, u_face, dt_dx)

    def _lines(self, q: np.ndarray, axis: int, whole_axis: bool = True) -> tuple:
        """Index of the block's interior lines along axis (with their ghost cells)."""
        h = self.kernel.halo
        index = [slice(h, s - h) for s in q.shape]
        if whole_axis:
            index[axis] = slice(None)
        return tuple(index)

    def _rows(self, q: np.ndarray) -> np.ndarray:
        """Rows (along the last axis) of q that are interior lines, in C order."""
        key = ("rows", q.shape)
        if key not in self._work:
            h = self.kernel.halo
            index = np.arange(int(np.prod(q.shape[:-1]))).reshape(q.shape[:-1])
            self._work[key] = index[tuple(slice(h, s - h) for s in q.shape[:-1])].ravel()
        return self._work[key]

    def _workspace(self, axis: int, shape: tuple) -> np.ndarray:
        key = (axis, shape)
        if key not in self._work:
            self._work[key] = np.zeros(shape, self.kernel.dtype)
        return self._work[key]

    def _numpy_stage(self, axis, stage, q_start, q_stage, q_out, u_face, dt_dx) -> None:
        kernel = self.kernel
        lines = self._lines(q_stage, axis)
        n = q_stage.shape[axis] - 2 * kernel.halo
        current = np.moveaxis(q_stage[lines], axis, 0)
        start = np.moveaxis(q_start[lines], axis, 0)
        target = np.moveaxis(q_out[lines], axis, 0)   # a view: the stage writes q_out's interior
        faces = np.moveaxis(u_face, axis, 0)
        size = max(int(kernel.workspace_size(n)), 1)
        work = self._workspace(axis, (size,) + current.shape[1:])
        kernel.stage_lines(stage, n, start, current, target, faces, dt_dx, work)

    def _row_stage(self, axis, stage, q_start, q_stage, q_out, u_face, dt_dx) -> None:
        kernel = self.kernel
        h = kernel.halo
        lines = self._lines(q_stage, axis)
        n = q_stage.shape[axis] - 2 * h
        if axis == q_stage.ndim - 1:   # lines along the contiguous axis: rows in place
            rows = self._rows(q_stage)
            faces = u_face.reshape(len(rows), u_face.shape[-1])
            size = max(int(kernel.workspace_size(n)), 1)
            work = self._workspace(axis, (len(rows), size))
            kernel.stage_lines(stage, n, q_start, q_stage, q_out, faces, dt_dx, work, rows)
            return

        def rows(a: np.ndarray, length: int) -> np.ndarray:
            return np.ascontiguousarray(np.moveaxis(a, axis, -1)).reshape(-1, length)

        current = rows(q_stage[lines], n + 2 * h)
        if stage == 0:   # the step's input and its faces serve every later stage of the sweep
            self._sweep[axis] = (current, rows(u_face, u_face.shape[axis]))
        start, faces = self._sweep[axis]
        out = np.empty_like(current)
        size = max(int(kernel.workspace_size(n)), 1)
        work = self._workspace(axis, (len(current), size))
        kernel.stage_lines(stage, n, start, current, out, faces, dt_dx, work)
        target = np.moveaxis(q_out[self._lines(q_out, axis, whole_axis=False)], axis, -1)
        target[...] = out[:, h:h + n].reshape(target.shape)
        if stage == kernel.stages - 1:
            del self._sweep[axis]
