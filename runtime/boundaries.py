"""Halo fills at the edges of a domain, in the runtime: the same rules as the helpers
generated in every target (compiler/emit/boundaries.py), for numpy arrays of rank 1 to 3.

- `fill(kind, q, axis, halo, side, values=None)` fills the ghost cells at one end of one
  axis in place (every line along axis, the other axes' ghost cells included);
  `wall_faces(u_face, axis, face_halo, side)` zeroes the boundary face's velocity and
  mirrors the faces beyond it (the other half of a wall).
- `Edge` and `Edges` say what each end of each axis is; `line_fill(edges)` is a
  `BoundaryFill` for `runtime.sweeps.LineSweep`.
- `generated_fills(scheme, backend, precision)` gives the helpers generated for a back end
  (the numpy module's functions, or the C library's through cffi) behind the same
  interface, so the harness runs what a host calls.

Testing a boundary bug: `FLUXLOOM_BOUNDARY_FAULT=wall-mirror` makes every wall fill in
this module and in `generated_fills` take the cell one further inside (the mirror shifted
by one cell), `wall-unfilled` leaves the wall's ghost cells at 0 (a halo never filled),
`wall-leak` leaves the wall's face velocity as it was (flux crosses the wall); verify
--boundary wall must then disagree wherever the scheme reads what the bug changed.
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Callable

import numpy as np

from fluxloom.compiler import LoomError
from fluxloom.compiler.emit.plan import exported_symbol

KINDS = ("periodic", "outflow", "wall", "inflow")
LOW, HIGH = 0, 1
MAX_RANK = 3
FAULT_VARIABLE = "FLUXLOOM_BOUNDARY_FAULT"
FAULTS = ("wall-mirror", "wall-unfilled", "wall-leak")


class BoundaryError(LoomError):
    def __init__(self, message: str):
        super().__init__(message, file="fluxloom boundary")


def injected_fault() -> str | None:
    """The boundary bug asked for in the environment (tests of verify), or None."""
    value = os.environ.get(FAULT_VARIABLE, "").strip()
    if not value:
        return None
    if value not in FAULTS:
        raise BoundaryError(f"{FAULT_VARIABLE}={value!r}: use one of {', '.join(FAULTS)}")
    return value


def _interior_source(kind: str, side: int, d: np.ndarray, n: int, fault: str | None):
    """The interior cell (0 .. n - 1) the ghost cell d cells outside `side` copies."""
    if kind == "periodic":
        m = (d - 1) % n
        return n - 1 - m if side == LOW else m
    if kind == "outflow":
        return np.full_like(d, 0 if side == LOW else n - 1)
    depth = d if fault == "wall-mirror" else d - 1          # the bug: one cell too far in
    period = depth % (2 * n)
    mirrored = np.minimum(period, 2 * n - 1 - period)
    return mirrored if side == LOW else n - 1 - mirrored


def _check(q: np.ndarray, axis: int, halo: int, side: int) -> int:
    if not isinstance(q, np.ndarray) or not 1 <= q.ndim <= MAX_RANK:
        raise BoundaryError(f"halo fills take numpy arrays of rank 1 to {MAX_RANK}")
    if not 0 <= axis < q.ndim:
        raise BoundaryError(f"axis {axis} is not an axis of an array of rank {q.ndim}")
    if side not in (LOW, HIGH):
        raise BoundaryError(f"side must be {LOW} (low) or {HIGH} (high), not {side}")
    n = q.shape[axis] - 2 * halo
    if halo < 0 or n < 1:
        raise BoundaryError(f"{q.shape[axis]} cells along axis {axis} hold no interior cell "
                            f"with {halo} ghost cells per side")
    return n


def fill(kind: str, q: np.ndarray, axis: int, halo: int, side: int, values=None) -> None:
    """Fill q's `halo` ghost cells on `side` of `axis` in place by rule `kind`."""
    if kind not in KINDS:
        raise BoundaryError(f"unknown boundary '{kind}'; use one of {', '.join(KINDS)}")
    n = _check(q, axis, halo, side)
    if halo == 0:
        return
    view = np.moveaxis(q, axis, 0)
    d = np.arange(1, halo + 1)
    ghosts = halo - d if side == LOW else halo + n - 1 + d
    if kind == "inflow":
        if values is None:
            raise BoundaryError("an inflow fill needs the prescribed values")
        first = 0 if side == LOW else halo + n
        block = view[first:first + halo]
        block[...] = np.moveaxis(np.broadcast_to(np.asarray(values, q.dtype),
                                                 np.moveaxis(block, 0, axis).shape), axis, 0)
        return
    fault = injected_fault()
    if kind == "wall" and fault == "wall-unfilled":
        view[ghosts] = 0
        return
    view[ghosts] = view[halo + _interior_source(kind, side, d, n, fault)]


def wall_faces(u_face: np.ndarray, axis: int, face_halo: int, side: int) -> None:
    """The boundary face's normal velocity set to 0 and the face_halo faces beyond it to
    minus their mirror images (u_face: n + 1 + 2*face_halo faces along axis)."""
    _check(u_face, axis, face_halo, side)
    view = np.moveaxis(u_face, axis, 0)
    if len(view) < 2 * face_halo + 2:
        raise BoundaryError(f"{len(view)} faces along axis {axis} hold no boundary face")
    b = face_halo if side == LOW else len(view) - 1 - face_halo
    if injected_fault() != "wall-leak":
        view[b] = 0
    for k in range(1, face_halo + 1):
        if side == LOW:
            view[b - k] = -view[b + k]
        else:
            view[b + k] = -view[b - k]


@dataclass(frozen=True)
class Edge:
    """One end of one axis: `kind` in KINDS; inflow `values` (an array broadcastable to
    the ghost slab, or a callable of the time that returns one)."""
    kind: str
    values: object = None

    def __post_init__(self):
        if self.kind not in KINDS:
            raise BoundaryError(f"unknown boundary '{self.kind}'; use one of {', '.join(KINDS)}")

    def slab(self, time: float = 0.0):
        return self.values(time) if callable(self.values) else self.values


Edges = tuple  # per axis: (low Edge, high Edge)


def periodic_edges(rank: int) -> Edges:
    return tuple((Edge("periodic"), Edge("periodic")) for _ in range(rank))


def check_edges(edges: Edges) -> None:
    for axis, (low, high) in enumerate(edges):
        if (low.kind == "periodic") != (high.kind == "periodic"):
            raise BoundaryError(f"axis {axis}: a periodic end needs a periodic partner "
                                f"(given {low.kind} and {high.kind})")


def fill_axis(fills, q: np.ndarray, axis: int, halo: int, edges: Edges,
              time: float = 0.0) -> None:
    """Both ends of `axis` of q by `edges`, through `fills` (this module or generated)."""
    for side, edge in zip((LOW, HIGH), edges[axis]):
        if edge.kind == "inflow":
            fills.inflow(q, axis, halo, side, edge.slab(time))
        else:
            getattr(fills, edge.kind)(q, axis, halo, side)


class RuntimeFills:
    """This module's fills behind the interface `generated_fills` returns."""

    backend = "runtime"

    def periodic(self, q, axis, halo, side):
        fill("periodic", q, axis, halo, side)

    def outflow(self, q, axis, halo, side):
        fill("outflow", q, axis, halo, side)

    def wall(self, q, axis, halo, side):
        fill("wall", q, axis, halo, side)

    def inflow(self, q, axis, halo, side, values):
        fill("inflow", q, axis, halo, side, values)

    def faces_wall(self, u_face, axis, face_halo, side):
        wall_faces(u_face, axis, face_halo, side)


def line_fill(edges_of_axis: Callable[[int], tuple[Edge, Edge]]):
    """A `LineSweep` boundary fill: lines (count, n + 2*halo), the swept axis last, filled
    by the edges of the swept axis (`edges_of_axis(axis)` -> (low, high))."""
    fills = RuntimeFills()

    def fill_lines(axis: int, lines: np.ndarray, halo: int) -> None:
        for side, edge in zip((LOW, HIGH), edges_of_axis(axis)):
            if edge.kind == "inflow":
                fills.inflow(lines, 1, halo, side, edge.slab())
            else:
                getattr(fills, edge.kind)(lines, 1, halo, side)
    return fill_lines


# ---- the generated helpers of a back end -----------------------------------------------

class _Faulty:
    """A back end's fills with the injected boundary bug (FLUXLOOM_BOUNDARY_FAULT)."""

    def __init__(self, inner, fault: str):
        self.inner, self.fault, self.backend = inner, fault, inner.backend

    def __getattr__(self, name):
        return getattr(self.inner, name)

    def wall(self, q, axis, halo, side):
        if self.fault in ("wall-mirror", "wall-unfilled"):
            fill("wall", q, axis, halo, side)      # the runtime's, which carries the bug
        else:
            self.inner.wall(q, axis, halo, side)

    def faces_wall(self, u_face, axis, face_halo, side):
        if self.fault == "wall-leak":
            wall_faces(u_face, axis, face_halo, side)
        else:
            self.inner.faces_wall(u_face, axis, face_halo, side)


class _NumpyFills:
    backend = "numpy"

    def __init__(self, module):
        self.m = module

    def periodic(self, q, axis, halo, side):
        self.m.halo_periodic(q, axis, halo, side)

    def outflow(self, q, axis, halo, side):
        self.m.halo_outflow(q, axis, halo, side)

    def wall(self, q, axis, halo, side):
        self.m.halo_wall(q, axis, halo, side)

    def inflow(self, q, axis, halo, side, values):
        self.m.halo_inflow(q, axis, halo, side, np.asarray(values, q.dtype))

    def faces_wall(self, u_face, axis, face_halo, side):
        if face_halo != self.m.FACE_HALO:
            raise BoundaryError(f"the generated faces helper takes FACE_HALO = "
                                f"{self.m.FACE_HALO} faces beyond each end, not {face_halo}")
        self.m.faces_wall(u_face, axis, side)


class _CFills:
    """The C helpers through cffi; q's halo along `axis` is the given one, the other axes
    are passed as interior cells without ghosts (every line is filled either way)."""

    def __init__(self, ffi, lib, name: str, precision: str, face_halo: int,
                 backend: str = "c"):
        self.ffi, self.lib, self.name, self.face_halo = ffi, lib, name, face_halo
        self.backend = backend
        self.precision = precision
        self.ctype = "double[]" if precision == "double" else "float[]"
        self.dtype = np.dtype(np.float64 if precision == "double" else np.float32)

    def _array(self, a: np.ndarray):
        if a.dtype != self.dtype or not a.flags.c_contiguous:
            raise BoundaryError(f"the C fills take C-contiguous arrays of {self.dtype}")
        return self.ffi.from_buffer(self.ctype, a, require_writable=True)

    def _layout(self, q, axis, halo):
        shape = list(q.shape)
        widths = [0] * q.ndim
        if 0 <= axis < q.ndim:
            shape[axis] -= 2 * halo
            widths[axis] = halo
        return self.ffi.new("size_t[]", shape), self.ffi.new("size_t[]", widths)

    def _copy(self, rule, q, axis, halo, side):
        shape, widths = self._layout(q, axis, halo)
        getattr(self.lib, exported_symbol(self.name, f"halo_{rule}", self.precision))(q.ndim, shape, widths, axis, side,
                                                       self._array(q))

    def periodic(self, q, axis, halo, side):
        self._copy("periodic", q, axis, halo, side)

    def outflow(self, q, axis, halo, side):
        self._copy("outflow", q, axis, halo, side)

    def wall(self, q, axis, halo, side):
        self._copy("wall", q, axis, halo, side)

    def inflow(self, q, axis, halo, side, values):
        slab_shape = list(q.shape)
        slab_shape[axis] = halo
        slab = np.ascontiguousarray(np.broadcast_to(np.asarray(values, self.dtype), slab_shape))
        shape, widths = self._layout(q, axis, halo)
        getattr(self.lib, exported_symbol(self.name, "halo_inflow", self.precision))(
            q.ndim, shape, widths, axis, side, self._array(q),
            self.ffi.from_buffer(self.ctype, slab))

    def faces_wall(self, u_face, axis, face_halo, side):
        if face_halo != self.face_halo:
            raise BoundaryError(f"the generated faces helper takes FACE_HALO = "
                                f"{self.face_halo} faces beyond each end, not {face_halo}")
        shape = list(u_face.shape)
        shape[axis] -= 1 + 2 * face_halo
        getattr(self.lib, exported_symbol(self.name, "faces_wall", self.precision))(
            u_face.ndim, self.ffi.new("size_t[]", shape), axis, side, self._array(u_face))


def generated_fills(scheme, backend: str, precision: str = "double"):
    """The halo fills generated with the scheme's kernel for `backend` ('numpy', 'c' or
    'fortran'), with the injected bug of FLUXLOOM_BOUNDARY_FAULT, if any."""
    if backend == "numpy":
        from .kernel import numpy_module
        fills = _NumpyFills(numpy_module(scheme, precision))
    elif backend in ("c", "fortran"):
        # the C kernel's helpers, or the native Fortran module's under the same symbols
        from fluxloom.compiler.emit.plan import plan_kernel

        from .kernel import header_library
        ffi, lib = header_library(scheme, backend, precision)
        fills = _CFills(ffi, lib, scheme.name, precision, plan_kernel(scheme).face_halo,
                        backend)
    else:
        raise BoundaryError(f"unknown back end '{backend}'")
    fault = injected_fault()
    return fills if fault is None else _Faulty(fills, fault)
