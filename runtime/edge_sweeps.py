"""Sweeps with edges: a kernel stepped stage by stage, its halos filled by the boundary
helpers generated for the same back end before every stage.

`EdgeSweep(scheme, backend, precision)(axis, q, u_face, dt_dx, edges)` advances every
line of q (rank 1 to 3, C order, `halo` ghost cells on every axis, interior
[halo, halo + n) along each) along `axis` by one step, in place. u_face holds the
velocities normal to axis' faces: q's interior extents on the other axes and
n + 1 + 2*face_halo faces along axis (`extend_faces` makes them from n + 1). Unlike
`Kernel.step`, which refreshes a Runge-Kutta kernel's stage halos periodically, every
stage here sees the edges' ghost cells: walls, outflow and inflow hold inside a step.

It is the reference path for edges (one kernel call per line and stage, Python in
between); verify --boundary runs the generated sweep with edges behind the same
interface (runtime/boundary_sweep.py), and the tests hold the two to round-off.
"""
from __future__ import annotations

import numpy as np

from fluxloom.compiler.emit.plan import exported_symbol, plan_kernel

from .boundaries import HIGH, LOW, BoundaryError, Edges, check_edges, generated_fills
from .kernel import DTYPES, numpy_module


class EdgeSweep:
    path = "reference (1-D kernel per line and stage, generated fills)"

    def __init__(self, scheme, backend: str = "numpy", precision: str = "double"):
        plan = plan_kernel(scheme)
        self.name = scheme.name
        self.backend, self.precision = backend, precision
        self.dtype = DTYPES[precision]
        self.halo, self.face_halo, self.stages = plan.halo, plan.face_halo, plan.stages
        self.fills = generated_fills(scheme, backend, precision)
        if backend == "numpy":
            module = numpy_module(scheme, precision)
            self._stage, self._workspace = module.stage, module.workspace_size
        else:   # the compiled target's own NAME_stage (C, or the native Fortran module's)
            from .kernel import header_library
            ffi, lib = header_library(scheme, backend, precision)
            c_stage = getattr(lib, exported_symbol(scheme.name, "stage", precision))
            ctype = "double[]" if precision == "double" else "float[]"
            self._workspace = getattr(lib, exported_symbol(scheme.name, "workspace_size", precision))

            def stage(s, n, start, current, out, faces, dt_dx, work):
                c_stage(s, n, ffi.from_buffer(ctype, start), ffi.from_buffer(ctype, current),
                        ffi.from_buffer(ctype, out, require_writable=True),
                        ffi.from_buffer(ctype, faces), dt_dx,
                        ffi.from_buffer(ctype, work, require_writable=True))
            self._stage = stage
        self.calls = 0

    def padded(self, interior: np.ndarray) -> np.ndarray:
        """A C-order array with `halo` ghost cells on every axis around `interior`."""
        h = self.halo
        q = np.zeros(tuple(s + 2 * h for s in interior.shape), self.dtype)
        q[tuple(slice(h, h + s) for s in interior.shape)] = interior
        return q

    def interior(self, q: np.ndarray) -> np.ndarray:
        h = self.halo
        return q[tuple(slice(h, s - h) for s in q.shape)]

    def fill_lines(self, lines: np.ndarray, ends, time: float) -> None:
        for side, edge in zip((LOW, HIGH), ends):
            if edge.kind == "inflow":
                self.fills.inflow(lines, 1, self.halo, side, edge.slab(time))
            else:
                getattr(self.fills, edge.kind)(lines, 1, self.halo, side)

    def __call__(self, axis: int, q: np.ndarray, u_face: np.ndarray, dt_dx: float,
                 edges: Edges, time: float = 0.0) -> np.ndarray:
        check_edges(edges)
        h = self.halo
        n = q.shape[axis] - 2 * h
        across = tuple(slice(h, s - h) if b != axis else slice(None)
                       for b, s in enumerate(q.shape))
        block = np.moveaxis(q[across], axis, -1)
        shape = block.shape
        lines = np.ascontiguousarray(block).reshape(-1, n + 2 * h)
        faces = np.ascontiguousarray(np.moveaxis(u_face, axis, -1), self.dtype)
        faces = faces.reshape(-1, faces.shape[-1])
        if faces.shape != (len(lines), n + 1 + 2 * self.face_halo):
            raise BoundaryError(f"{self.name}: faces along axis {axis} have shape "
                                f"{u_face.shape}; q needs {n + 1 + 2 * self.face_halo} per line")
        ends = edges[axis]
        work = np.zeros((len(lines), max(int(self._workspace(n)), 1)), self.dtype)
        self.fill_lines(lines, ends, time)
        start = lines
        buffers = [np.empty_like(lines) for _ in range(min(self.stages - 1, 2))]
        out = np.empty_like(lines)
        current = start
        for s in range(self.stages):
            target = out if s == self.stages - 1 else buffers[s % 2]
            for i in range(len(lines)):
                self._stage(s, n, start[i], current[i], target[i], faces[i], dt_dx, work[i])
            self.calls += len(lines)
            if s < self.stages - 1:
                self.fill_lines(target, ends, time)
                current = target
        moved = np.moveaxis(q[across], axis, -1)
        moved[..., h:h + n] = out.reshape(shape)[..., h:h + n]
        return q


def extend_faces(fills, u_face: np.ndarray, axis: int, face_halo: int, edges: Edges) -> np.ndarray:
    """n + 1 faces along axis -> n + 1 + 2*face_halo: periodic on a periodic axis, else
    copied from the end face, then the walls' faces zeroed and mirrored (in that order)."""
    low, high = edges[axis]
    u = np.moveaxis(np.asarray(u_face), axis, -1)
    n = u.shape[-1] - 1
    if face_halo:
        if low.kind == "periodic":
            index = np.concatenate((np.arange(n - face_halo, n), np.arange(n + 1),
                                    np.arange(1, face_halo + 1)))
        else:
            index = np.concatenate((np.zeros(face_halo, int), np.arange(n + 1),
                                    np.full(face_halo, n)))
        u = u[..., index]
    u = np.ascontiguousarray(np.moveaxis(u, -1, axis))
    for side, edge in zip((LOW, HIGH), (low, high)):
        if edge.kind == "wall":
            fills.faces_wall(u, axis, face_halo, side)
    return u
