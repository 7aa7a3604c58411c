"""The program `verify --ranks` runs under mpiexec:

    mpiexec -n N python -m fluxloom.runtime.decomposed.worker JOB_DIR

JOB_DIR holds job.json (the kernels as generated source, and the cases: which
kernel, layout, steps, dt/dx; a 2-D or 3-D case names its global cells, the kind
of blocks and the splitting instead of a layout) and inputs.npz (each case's
global initial state `q<i>` and face velocities: `u<i>` in 1-D, `u<i>_<axis>` per
axis otherwise). A multi-dimensional case takes its process grid from
MPI.Compute_dims. Every rank takes its block, steps it with the driver, and rank
0 writes results.npz (the gathered final states) and results.json (exchanges per
step and the block sizes of each case).
Any failure prints its traceback and aborts every rank, so mpiexec exits non-zero.
"""
from __future__ import annotations

import json
import sys
import traceback
from pathlib import Path

import numpy as np
from mpi4py import MPI

from ..boundaries import HIGH, LOW, fill, wall_faces
from .blocks import Layout, narrowest_split
from .driver import DecomposedDomain
from .stages import stage_kernel


def run_job(job_dir: Path, comm: MPI.Comm) -> None:
    job = json.loads((job_dir / "job.json").read_text())
    inputs = np.load(job_dir / "inputs.npz")
    kernels = [stage_kernel(sources) for sources in job["kernels"]]
    results, per_step = {}, []
    splits = []
    for i, case in enumerate(job["cases"]):
        kernel = kernels[case["kernel"]]
        layout = case_layout(case, comm.Get_size())
        domain = DecomposedDomain(kernel, layout, comm, fault=case.get("fault"),
                                  fill_edge=None if all(layout.periodic) else wall_fill(kernel))
        q = domain.local_cells(inputs[f"q{i}"].astype(kernel.dtype))
        steps, dt_dx = int(case["steps"]), float(case["dt_dx"])
        with np.errstate(all="ignore"):  # an unstable scheme's growth is data here
            if layout.ndim == 1:
                u_face = domain.local_faces(inputs[f"u{i}"].astype(kernel.dtype))
                for _ in range(steps):
                    q = domain.step(q, u_face, dt_dx)
            else:
                u_faces = [domain.local_faces(inputs[f"u{i}_{axis}"].astype(kernel.dtype), axis)
                           for axis in range(layout.ndim)]
                for axis, faces in enumerate(u_faces):
                    for side in domain.exchange.edges(axis):   # walls: set once, never exchanged
                        wall_faces(faces, axis, kernel.face_halo, LOW if side < 0 else HIGH)
                for k in range(steps):
                    q = domain.split_step(q, u_faces, dt_dx, case["method"], k)
        final = domain.gather(q)
        per_step.append(domain.exchanges / steps if steps else 0.0)
        splits.append([list(sizes) for sizes in layout.splits])
        domain.free()
        if final is not None:
            results[f"q{i}"] = final
    if comm.Get_rank() == 0:
        np.savez(job_dir / "results.npz", **results)
        (job_dir / "results.json").write_text(json.dumps({"exchanges_per_step": per_step,
                                                          "splits": splits}))


def wall_fill(kernel):
    """fill_edge for walls: the runtime's own fill (runtime/boundaries.py), not the
    generated helpers the single-domain reference uses."""
    def fill_edge(axis: int, side: int, q: np.ndarray) -> None:
        fill("wall", q, axis, kernel.halo, LOW if side < 0 else HIGH)
    return fill_edge


def case_layout(case: dict, ranks: int) -> Layout:
    """The case's layout: given, or from its cells on MPI's balanced process grid."""
    periodic = tuple(case["periodic"])
    if "splits" in case:
        return Layout(tuple(tuple(s) for s in case["splits"]), periodic)
    cells = tuple(case["cells"])
    dims = tuple(MPI.Compute_dims(ranks, len(cells)))
    if case["blocks"] == "narrowest":
        return Layout(tuple(narrowest_split(n, p, case["width"]) for n, p in zip(cells, dims)),
                      periodic)
    return Layout.even(cells, dims, periodic)


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    comm = MPI.COMM_WORLD
    try:
        run_job(Path(argv[0]), comm)
    except BaseException:  # one rank failing must not leave the others waiting
        print(f"rank {comm.Get_rank()}: {traceback.format_exc()}", file=sys.stderr, flush=True)
        comm.Abort(3)
    return 0


if __name__ == "__main__":
    sys.exit(main())
