"""Run under mpiexec by tests/test_decomposed_mpi.py: a 2-D or 3-D decomposed domain
advanced by Lie-split sweeps (axis 0, then 1, ...), where the per-axis advance hook
applies a generated 1-D kernel's stage to every line of the block along the axis.
The same sweeps on the whole periodic domain, with the kernel's whole step on each
line, are the reference. Rank 0 prints one JSON line.

    mpiexec -n P python mpi_sweep_program.py SPEC BACKEND SPLITS_JSON STEPS
"""
from __future__ import annotations

import itertools
import json
import sys

import numpy as np
from mpi4py import MPI

from fluxloom.compiler import load_scheme
from fluxloom.runtime.decomposed.blocks import Layout
from fluxloom.runtime.decomposed.driver import DecomposedDomain
from fluxloom.runtime.decomposed.stages import load_stage_kernel
from fluxloom.runtime.kernel import fill_periodic, load_kernel, periodic_faces


def face_velocity(cells, axis):
    """A smooth periodic face velocity on axis' faces that changes sign (a field of our own)."""
    grids = []
    for a, n in enumerate(cells):
        count = n + 1 if a == axis else n
        offset = 0.0 if a == axis else 0.5
        grids.append((np.arange(count) + offset) / n)
    mesh = np.meshgrid(*grids, indexing="ij")
    u = 0.4 + np.sin(2 * np.pi * mesh[axis])
    for a, x in enumerate(mesh):
        if a != axis:
            u = u * np.cos(2 * np.pi * x + a)
    return u


def lines(shape, axis):
    """Index tuples of every line along axis (None marks the axis)."""
    others = [range(n) if a != axis else [None] for a, n in enumerate(shape)]
    return itertools.product(*others)


def pick(line, shift):
    return tuple(slice(None) if i is None else i + shift for i in line)


def whole_domain(kernel, q, u_faces, dt_dx, steps):
    """Lie-split sweeps on the whole periodic domain: the kernel's step on each line."""
    h = kernel.halo
    for _ in range(steps):
        for axis, u in enumerate(u_faces):
            new = q.copy()
            for line in lines(q.shape, axis):
                padded = np.zeros(q.shape[axis] + 2 * h, kernel.dtype)
                padded[h:-h] = q[pick(line, 0)]
                fill_periodic(padded, h)
                faces = periodic_faces(np.ascontiguousarray(u[pick(line, 0)]), kernel.face_halo)
                new[pick(line, 0)] = kernel.step(padded, faces, dt_dx)[h:-h]
            q = new
    return q


def main(spec, backend, splits, steps):
    scheme = load_scheme(spec)
    stage_kernel = load_stage_kernel(scheme, backend)
    layout = Layout(tuple(tuple(s) for s in splits), (True,) * len(splits))
    cells = layout.cells
    h = stage_kernel.halo
    works = {}

    def advance(axis, stage, q_start, q_stage, q_out, u_face, dt_dx):
        for line in lines(domain.block.size, axis):
            cells_line, faces_line = pick(line, h), pick(line, 0)
            out = np.ascontiguousarray(q_out[cells_line])
            work = works.setdefault((axis, line), stage_kernel.workspace(domain.block.size[axis]))
            stage_kernel.stage(stage, domain.block.size[axis],
                               np.ascontiguousarray(q_start[cells_line]),
                               np.ascontiguousarray(q_stage[cells_line]), out,
                               np.ascontiguousarray(u_face[faces_line]), dt_dx, work)
            q_out[cells_line] = out

    domain = DecomposedDomain(stage_kernel, layout, MPI.COMM_WORLD, advance=advance)
    rng = np.random.default_rng(11)
    q0 = rng.random(cells)
    u_global = [face_velocity(cells, a) for a in range(len(cells))]
    dt_dx = 0.4 / max(float(np.abs(u).max()) for u in u_global)
    q = domain.local_cells(q0)
    u_local = [domain.local_faces(u, axis) for axis, u in enumerate(u_global)]
    for _ in range(steps):
        for axis in range(len(cells)):
            q = domain.sweep(axis, q, u_local[axis], dt_dx)
    final = domain.gather(q)
    if domain.rank == 0:
        expected = whole_domain(load_kernel(scheme, backend), q0, u_global, dt_dx, steps)
        print(json.dumps({"identical": bool(np.array_equal(final, expected)),
                          "max_difference": float(np.max(np.abs(final - expected))),
                          "exchanges": domain.exchanges, "cells": list(cells)}))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2], json.loads(sys.argv[3]), int(sys.argv[4]))
