"""Run under mpiexec by tests/test_embed_mpi.py: the tidal basin of
examples/embed/tidal_basin.c advanced by the Python decomposed driver, walls
(the sluice gates) at the two ends of a non-periodic axis, filled by `fill_edge`
as the C host fills them. Rank 0 prints the final profile as JSON.

    mpiexec -n P python mpi_basin_program.py SPEC BACKEND
"""
from __future__ import annotations

import json
import sys

import numpy as np
from mpi4py import MPI

from fluxloom.compiler import load_scheme
from fluxloom.runtime.decomposed.blocks import Layout
from fluxloom.runtime.decomposed.driver import DecomposedDomain
from fluxloom.runtime.decomposed.stages import load_stage_kernel
from test_embed import CELLS, scenario


def main(spec: str, backend: str) -> None:
    kernel = load_stage_kernel(load_scheme(spec), backend)
    h, f = kernel.halo, kernel.face_halo
    size = MPI.COMM_WORLD.Get_size()

    def mirror(axis, side, q):
        """The gates reflect: ghosts mirror the cells next to the gate."""
        if side < 0:
            q[:h] = q[2 * h - 1:h - 1:-1]
        else:
            q[-h:] = q[-h - 1:-2 * h - 1:-1]

    layout = Layout.even((CELLS,), (size,), periodic=(False,))
    domain = DecomposedDomain(kernel, layout, fill_edge=mirror)
    dx, dt, steps, spill, current = scenario(f)
    q = domain.local_cells(spill)
    start, n = domain.block.start[0], domain.block.size[0]
    for s in range(steps):
        u = current(s)[start:start + n + 1 + 2 * f]    # this block's faces, from the formula
        q = domain.step(q, np.ascontiguousarray(u), dt / dx)
    whole = domain.gather(q)
    if whole is not None:
        print(json.dumps({"profile": whole.tolist(), "exchanges": domain.exchanges}))


if __name__ == "__main__":
    main(sys.argv[1], sys.argv[2])
