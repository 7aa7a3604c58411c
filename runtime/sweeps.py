"""Sweeps over multi-dimensional arrays, built from a 1-D kernel: the reference path.

`LineSweep(kernel)(axis, q, u_face, dt_dx)` advances every line of an array of
rank 1 to 3 along `axis` by one step of the 1-D kernel: it copies each line into
a scratch line with `kernel.halo` ghost cells per side, lets a boundary fill
callable fill the ghosts, and calls `kernel.step` once per line. It is slow (one
kernel call per line, Python in between) and exists to be replaced: generated
`NAME_sweep` kernels advance a whole array in one call (`KernelSweep` below, what
`verify --dims 2` runs), and this path stays as the reference they must match.

Arrays are in C order, `q[i, j]` with axis 0 = x and axis 1 = y (axis 2 = z).
Face velocities along `axis` have the shape of q with one more entry along axis:
`u_face[..., i, ...]` is the face before cell i (`i = 0 .. n`). On a periodic
axis face n is face 0 again.

Limits of this path: a Runge-Kutta kernel's `step` refreshes its stage halos
periodically itself, so with a fill other than `periodic_fill` only `time euler`
kernels see the caller's ghosts at every stage; a flux-corrected kernel gets its
extra face velocities by periodic extension (as `Kernel.step` does).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from .kernel import Kernel, KernelError

BoundaryFill = Callable[[int, np.ndarray, int], None]
"""fill(axis, lines, halo): fill the `halo` ghost cells at both ends of every line in
place; `lines` has shape (count, n + 2*halo), the swept axis last, interior at
[halo, halo + n)."""

MAX_RANK = 3


def periodic_fill(axis: int, lines: np.ndarray, halo: int) -> None:
    """Ghost cells from the other end of the same line (a periodic axis)."""
    n = lines.shape[-1] - 2 * halo
    if halo == 0 or n <= 0:
        return
    lines[:, :halo] = lines[:, halo + np.arange(-halo, 0) % n]
    lines[:, halo + n:] = lines[:, halo + np.arange(halo) % n]


class LineSweep:
    """A 1-D kernel swept over every line of an array (one kernel call per line)."""

    reference_path = True   # replaced by generated NAME_sweep kernels; kept as their reference

    def __init__(self, kernel: Kernel, fill: BoundaryFill = periodic_fill):
        self.kernel = kernel
        self.fill = fill
        self.calls = 0      # kernel calls made (one per line per sweep)

    def __repr__(self) -> str:
        return f"<LineSweep {self.kernel!r}>"

    def __call__(self, axis: int, q: np.ndarray, u_face: np.ndarray, dt_dx: float) -> np.ndarray:
        """A new array: q with every line along `axis` advanced by one kernel step."""
        kernel = self.kernel
        q = self._array("q", q)
        if not 1 <= q.ndim <= MAX_RANK:
            raise KernelError(f"{kernel.name}: a sweep takes arrays of rank 1 to {MAX_RANK}, "
                              f"not shape {q.shape}")
        if not 0 <= axis < q.ndim:
            raise KernelError(f"{kernel.name}: axis {axis} is not an axis of an array of rank "
                              f"{q.ndim}")
        halo, n = kernel.halo, q.shape[axis]
        moved = np.moveaxis(q, axis, -1)
        across = moved.shape[:-1]
        count = math.prod(across)
        faces = self._faces(np.moveaxis(self._array("u_face", u_face), axis, -1), across, n)
        padded = np.empty((count, n + 2 * halo), kernel.dtype)
        padded[:, halo:halo + n] = moved.reshape(count, n)
        self.fill(axis, padded, halo)
        out = np.empty_like(padded)
        for line in range(count):
            kernel.step(padded[line], faces[line], dt_dx, out=out[line])
        self.calls += count
        result = out[:, halo:halo + n].reshape(across + (n,))
        return np.ascontiguousarray(np.moveaxis(result, -1, axis))

    def _array(self, what: str, value) -> np.ndarray:
        if not isinstance(value, np.ndarray):
            raise KernelError(f"{self.kernel.name}: {what} must be a numpy array of "
                              f"{self.kernel.dtype}, not {type(value).__name__}")
        if value.dtype != self.kernel.dtype:
            raise KernelError(f"{self.kernel.name}: {what} has dtype {value.dtype}; this "
                              f"{self.kernel.precision} kernel takes {self.kernel.dtype}")
        return value

    def _faces(self, faces: np.ndarray, across: tuple, n: int) -> np.ndarray:
        extra = 2 * self.kernel.face_halo
        sizes = (n + 1,) if not extra else (n + 1, n + 1 + extra)
        if faces.shape[:-1] != across or faces.shape[-1] not in sizes:
            expected = " or ".join(str(across + (s,)) for s in sizes)
            raise KernelError(f"{self.kernel.name}: face velocities along the swept axis have "
                              f"shape {faces.shape} (swept axis last); expected {expected}")
        return np.ascontiguousarray(faces.reshape(math.prod(across), faces.shape[-1]))


class KernelSweep:
    """The generated sweep (`Kernel.sweep`, NAME_sweep in C) with LineSweep's interface:
    `(axis, q, u_face, dt_dx) -> q_new` on arrays without ghost cells, the ghosts along the
    swept axis filled periodically. One call per sweep, every line at once."""

    reference_path = False

    def __init__(self, kernel: Kernel):
        self.kernel = kernel
        self.calls = 0      # sweep calls made

    def __repr__(self) -> str:
        return f"<KernelSweep {self.kernel!r}>"

    def __call__(self, axis: int, q: np.ndarray, u_face: np.ndarray, dt_dx: float) -> np.ndarray:
        kernel = self.kernel
        if not isinstance(q, np.ndarray) or not 1 <= q.ndim <= MAX_RANK:
            raise KernelError(f"{kernel.name}: a sweep takes arrays of rank 1 to {MAX_RANK}")
        if not 0 <= axis < q.ndim:
            raise KernelError(f"{kernel.name}: axis {axis} is not an axis of an array of rank "
                              f"{q.ndim}")
        halo = [0] * q.ndim
        halo[axis] = kernel.halo
        padded = np.pad(q, [(h, h) for h in halo])
        if padded.dtype != kernel.dtype:
            raise KernelError(f"{kernel.name}: q has dtype {q.dtype}; this {kernel.precision} "
                              f"kernel takes {kernel.dtype}")
        moved = np.moveaxis(padded, axis, -1)
        _fill_ghosts(moved, kernel.halo)
        out = kernel.sweep(padded, np.ascontiguousarray(u_face), dt_dx, axis, tuple(halo))
        self.calls += 1
        index = [slice(None)] * q.ndim
        index[axis] = slice(kernel.halo, kernel.halo + q.shape[axis])
        return np.ascontiguousarray(out[tuple(index)])


def _fill_ghosts(moved: np.ndarray, halo: int) -> None:
    """Periodic ghosts at both ends of the last axis of a view, in place."""
    n = moved.shape[-1] - 2 * halo
    if halo and n > 0:
        moved[..., :halo] = moved[..., halo + np.arange(-halo, 0) % n]
        moved[..., halo + n:] = moved[..., halo + np.arange(halo) % n]


@dataclass(frozen=True)
class BoundSweep:
    """A sweep with its velocities and dt/dx bound: `(axis, q, fraction) -> q_new`, the
    interface the splitting helpers call (runtime/splitting.py)."""

    line_sweep: Callable[[int, np.ndarray, np.ndarray, float], np.ndarray]
    faces: Sequence[np.ndarray]     # per axis
    dt_dx: Sequence[float]          # per axis: the whole step's dt over that axis' cell width

    def __call__(self, axis: int, q: np.ndarray, fraction: float) -> np.ndarray:
        return self.line_sweep(axis, q, self.faces[axis], fraction * self.dt_dx[axis])
