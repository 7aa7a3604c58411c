"""`Kernel.sweep`: the generated NAME_sweep (C) or sweep (numpy), with its arguments checked.

    kernel.sweep(q, u_face, dt_dx, axis, halo=None, out=None, h_old=None, h_new=None,
                 edges=None, time=0.0)

- q: C-ordered array of rank R (1 to 3) with the caller's ghost cells, shape
  shape[d] + 2*halo[d] per axis; or R + 1 with several tracers stacked along a
  leading axis (all advected by the same faces in one call). R is u_face's rank.
- u_face: interior shape with shape[axis] + 1 entries along `axis` (plus
  2*face_halo for a flux-corrected scheme, else they are extended periodically);
  entry f is the face between cells f - 1 and f.
- dt_dx: one number, or shape[axis] + 2 values: dt over the width of cells
  -1 .. shape[axis] along the axis (same for every line).
- halo: the caller's ghost cells per side, one number or one per axis (default:
  the kernel's halo on every axis); halo[axis] >= kernel.halo.
- h_old, h_new: layer thicknesses laid out like one tracer (thickness-weighted
  form; u_face then holds mass fluxes). With several stages, the mass and the
  thickness go through the same stage combinations (the generated header says how).
- edges: None (both ends periodic inside the step), or the (low, high) `Edge`s of the
  swept axis (runtime/boundaries.py): every intermediate stage's ghost cells are filled
  by their rules; an inflow end's values (`Edge.slab(time)`) broadcast to the slab
  halo_inflow takes (q's shape, halo[axis] deep along axis). q's own ghost cells are
  the caller's, as without edges.
Only interior cells of interior lines of `out` are written.
"""
from __future__ import annotations

import numpy as np

from fluxloom.compiler.emit.plan import exported_symbol

from .kernel import C_TYPES, Kernel, KernelError

MAX_RANK = 3


EDGE_KINDS = ("periodic", "outflow", "wall", "inflow")
"""The edge kinds in the order of the generated NAME_EDGE_* numbers."""


def run_sweep(kernel: Kernel, q, u_face, dt_dx, axis, halo, out, h_old, h_new, edges=None,
              time=0.0):
    name = kernel.name
    q = _array(kernel, "q", q)
    u_face = _array(kernel, "u_face", u_face)
    rank = u_face.ndim
    if not 1 <= rank <= MAX_RANK:
        raise KernelError(f"{name}: a sweep takes arrays of rank 1 to {MAX_RANK}; u_face has "
                          f"shape {u_face.shape}")
    lead = q.ndim - rank
    if lead not in (0, 1):
        raise KernelError(f"{name}: q has shape {q.shape}; with u_face of rank {rank} it "
                          f"must have rank {rank} (one tracer) or {rank + 1} (tracers first)")
    if isinstance(axis, bool) or not isinstance(axis, (int, np.integer)) or not 0 <= axis < rank:
        raise KernelError(f"{name}: axis {axis!r} is not an axis of an array of rank {rank}")
    axis = int(axis)
    halo = _halo(kernel, halo, rank, axis)
    interior = list(u_face.shape)
    n = q.shape[lead + axis] - 2 * halo[axis]
    faces = interior[axis]
    if kernel.face_halo and n >= 1 and faces == n + 1:
        u_face = np.ascontiguousarray(np.moveaxis(
            _extend(np.moveaxis(u_face, axis, -1), kernel.face_halo), -1, axis))
    elif n < 1 or faces != n + 1 + 2 * kernel.face_halo:
        extra = f" + 2*{kernel.face_halo}" if kernel.face_halo else ""
        raise KernelError(f"{name}: u_face has {faces} entries along axis {axis} and q "
                          f"{n} interior cells there; it needs n + 1{extra} faces, n >= 1")
    interior[axis] = n
    extents = tuple(s + 2 * h for s, h in zip(interior, halo))
    if q.shape[lead:] != extents:
        raise KernelError(f"{name}: q has shape {q.shape}; u_face says {tuple(interior)} "
                          f"interior cells, so with halos {halo} each tracer needs {extents}")
    if h_old is None and h_new is not None or h_new is None and h_old is not None:
        raise KernelError(f"{name}: pass both h_old and h_new (layer thicknesses), or neither")
    per_cell = np.ndim(dt_dx) > 0
    if per_cell and not kernel.sweep_widths:
        raise KernelError(f"{name}: per-cell dt/dx needs a scheme without flux correction; "
                          "this one sweeps through its step (one dt/dx)")
    if h_old is not None and not kernel.sweep_thickness:
        raise KernelError(f"{name}: thickness weighting needs a scheme without flux "
                          "correction")
    ends = _ends(kernel, edges, q, lead, axis, halo[axis], time)
    if per_cell:
        dt_dx = _array(kernel, "dt_dx", np.asarray(dt_dx) if not isinstance(dt_dx, np.ndarray)
                       else dt_dx)
        if dt_dx.shape != (n + 2,):
            raise KernelError(f"{name}: per-cell dt_dx has shape {dt_dx.shape}; it needs "
                              f"n + 2 = {n + 2} values (cells -1 .. n along axis {axis})")
        if not (np.all(np.isfinite(dt_dx)) and np.all(dt_dx >= 0)):
            raise KernelError(f"{name}: dt_dx must be finite and not negative in every cell")
    else:
        dt_dx = kernel._check_dt_dx(dt_dx)
    if h_old is not None:
        h_old = _array(kernel, "h_old", h_old)
        h_new = _array(kernel, "h_new", h_new)
        for what, h in (("h_old", h_old), ("h_new", h_new)):
            if h.shape != extents:
                raise KernelError(f"{name}: {what} has shape {h.shape}; thicknesses are laid "
                                  f"out like one tracer: {extents}")
    if len(u_face) and not np.all(np.isfinite(u_face)):
        raise KernelError(f"{name}: face velocities must be finite")
    if out is None:
        out = q.copy()
    else:
        out = _array(kernel, "out", out)
        if out.shape != q.shape:
            raise KernelError(f"{name}: out has shape {out.shape}, q {q.shape}; they must match")
        if not out.flags.writeable:
            raise KernelError(f"{name}: out is read-only")
        for what, other in (("q", q), ("u_face", u_face), ("h_old", h_old), ("h_new", h_new)):
            if other is not None and np.shares_memory(out, other):
                raise KernelError(f"{name}: out must not overlap {what}")
    if ends is None:
        kernel._run_sweep(q, out, u_face, dt_dx, axis, halo, h_old, h_new)
    else:
        kernel._run_sweep(q, out, u_face, dt_dx, axis, halo, h_old, h_new, *ends)
    return out


def _ends(kernel: Kernel, edges, q, lead: int, axis: int, width: int, time: float):
    """(low kind, high kind, low slab, high slab) for the generated sweep, or None for
    periodic ends; an inflow slab is q's shape with `width` cells along axis, C-contiguous."""
    if edges is None:
        return None
    from .boundaries import Edge, check_edges
    try:
        low, high = edges
    except (TypeError, ValueError):
        raise KernelError(f"{kernel.name}: edges must be (low, high) Edges, not "
                          f"{edges!r}") from None
    if not (isinstance(low, Edge) and isinstance(high, Edge)):
        raise KernelError(f"{kernel.name}: edges must be (low, high) Edges, not {edges!r}")
    check_edges(((low, high),))
    if low.kind == "periodic":
        return None
    shape = list(q.shape)
    shape[lead + axis] = width
    slabs = []
    for edge in (low, high):
        if edge.kind != "inflow":
            slabs.append(None)
            continue
        values = edge.slab(time)
        if values is None:
            raise KernelError(f"{kernel.name}: an inflow end needs its values")
        try:
            slab = np.broadcast_to(np.asarray(values, kernel.dtype), shape)
        except ValueError:
            raise KernelError(f"{kernel.name}: inflow values of shape {np.shape(values)} do "
                              f"not broadcast to the slab {tuple(shape)}") from None
        if not np.all(np.isfinite(slab)):
            raise KernelError(f"{kernel.name}: inflow values must be finite")
        slabs.append(np.ascontiguousarray(slab))
    return EDGE_KINDS.index(low.kind), EDGE_KINDS.index(high.kind), slabs[0], slabs[1]


def _array(kernel: Kernel, what: str, value) -> np.ndarray:
    if not isinstance(value, np.ndarray):
        raise KernelError(f"{kernel.name}: {what} must be a numpy array of {kernel.dtype}, "
                          f"not {type(value).__name__}")
    if value.dtype != kernel.dtype:
        raise KernelError(f"{kernel.name}: {what} has dtype {value.dtype}; this "
                          f"{kernel.precision} kernel takes {kernel.dtype}")
    if not value.flags.c_contiguous:
        raise KernelError(f"{kernel.name}: {what} must be C-contiguous (np.ascontiguousarray)")
    return value


def _halo(kernel: Kernel, halo, rank: int, axis: int) -> tuple[int, ...]:
    if halo is None:
        halo = (kernel.halo,) * rank
    elif isinstance(halo, (int, np.integer)) and not isinstance(halo, bool):
        halo = (int(halo),) * rank
    try:
        halo = tuple(int(h) for h in halo)
    except (TypeError, ValueError):
        raise KernelError(f"{kernel.name}: halo must be a number or one per axis, "
                          f"not {halo!r}") from None
    if len(halo) != rank or any(h < 0 for h in halo):
        raise KernelError(f"{kernel.name}: halo {halo} needs {rank} widths of at least 0")
    if halo[axis] < kernel.halo:
        raise KernelError(f"{kernel.name}: the swept axis {axis} has {halo[axis]} ghost cells "
                          f"per side; the scheme reads {kernel.halo}")
    return halo


def _extend(faces: np.ndarray, face_halo: int) -> np.ndarray:
    """n + 1 faces per line (last axis) extended periodically by face_halo per side."""
    n = faces.shape[-1] - 1
    left = faces[..., np.arange(-face_halo, 0) % n]
    right = faces[..., np.arange(1, face_halo + 1) % n]
    return np.concatenate((left, faces, right), axis=-1)


def c_sweep_runner(ffi, lib, name: str, precision: str):
    """The sweep NAME_sweep_edges of a library with the C header's functions (the C kernel,
    the native Fortran module) as Kernel._run_sweep(q, out, u_face, dt_dx, axis, halo,
    h_old, h_new[, low_edge, high_edge, inflow_low, inflow_high])."""
    c_sweep = getattr(lib, exported_symbol(name, "sweep_edges", precision))
    c_work = getattr(lib, exported_symbol(name, "sweep_workspace_size", precision))
    threads = getattr(lib, exported_symbol(name, "sweep_threads", precision))
    ctype = C_TYPES[precision]
    dtype = np.float32 if precision == "float" else np.float64
    null = ffi.NULL

    def run(q, out, u_face, dt_dx, axis, halo, h_old, h_new, low_edge=0, high_edge=0,
            inflow_low=None, inflow_high=None):
        rank = u_face.ndim
        tracers = q.shape[0] if q.ndim > rank else 1
        n = q.shape[q.ndim - rank + axis] - 2 * halo[axis]
        shape = [s - 2 * h for s, h in zip(q.shape[q.ndim - rank:], halo)]
        per_cell = np.ndim(dt_dx) > 0
        d = np.ascontiguousarray(dt_dx if per_cell else [dt_dx], dtype=dtype)
        size = int(c_work(n)) * max(int(threads()), 1)    # a line's workspace per thread
        work = np.empty(max(size, 1), dtype)

        def ptr(a, writable=False):
            return null if a is None else ffi.from_buffer(ctype, a, require_writable=writable)

        arguments = (rank, ffi.new("size_t[]", shape), ffi.new("size_t[]", list(halo)),
                     axis, tracers, ptr(q), ptr(out, True), ptr(u_face), ptr(d),
                     int(per_cell), ptr(h_old), ptr(h_new))
        status = c_sweep(*arguments, low_edge, high_edge, ptr(inflow_low), ptr(inflow_high),
                         ptr(work, True), size)
        if status != 0:
            raise KernelError(f"{name}: {name}_sweep refused its arguments (status {status})")

    return run


def fill_periodic_axis(q: np.ndarray, axis: int, halo: int) -> np.ndarray:
    """The `halo` ghost cells at both ends of `axis` of q filled periodically, in place."""
    n = q.shape[axis] - 2 * halo
    if halo and n > 0:
        moved = np.moveaxis(q, axis, -1)
        moved[..., :halo] = moved[..., halo + np.arange(-halo, 0) % n]
        moved[..., halo + n:] = moved[..., halo + np.arange(halo) % n]
    return q

