"""Decomposed runs: weak scaling measured on this machine, and the communication share
of a step projected for 3-D subdomains of 32^3 to 256^3 cells per process.

Weak scaling: every process holds the same number of cells (a 1-D periodic block,
or with --dims 2 a square block on MPI's balanced process grid stepped by Lie-split
sweeps, the generated C kernel at -O2, the driver of fluxloom.runtime.decomposed),
run on 1, 2 and 4 processes (4 oversubscribes a 2-core machine). Each process reports the
wall time of its steps and the part spent in halo exchanges; the slowest process
is shown. Efficiency is the 1-process step time over the P-process one.

Projection: per step of a 3-D domain advanced by three directional sweeps of the
1-D kernel, each with the kernel's exchange schedule (compiler/emit/exchange.py):
bytes sent per process for the halos against the bytes the kernel streams (each
stage reads its input and the face velocities and writes its output once), and
a time share under stated machine assumptions (--memory-gbs, --network-gbs,
--latency-us), communication not overlapped with computation.

Not a test: run it by hand, `python benchmarks/bench_decomposed.py` (needs
fluxloom[mpi]); `--project-only` prints the projection without running MPI.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SCHEMES = ("lw_vanleer", "kappa_rk3", "lw_fct", "centred4_ssp10")
SIDES = (32, 64, 128, 256)
REAL_BYTES = 8  # double


# ---- the MPI program: one weak-scaling run ---------------------------------------------

def rank_program_2d(spec: str, backend: str, cells: int, steps: int) -> None:
    """A side x side block per process (side^2 about `cells`), Lie-split sweeps."""
    import math

    import numpy as np
    from mpi4py import MPI

    from fluxloom.compiler import load_scheme
    from fluxloom.runtime.decomposed.blocks import Layout
    from fluxloom.runtime.decomposed.driver import DecomposedDomain
    from fluxloom.runtime.decomposed.stages import load_stage_kernel

    comm = MPI.COMM_WORLD
    dims = MPI.Compute_dims(comm.Get_size(), 2)
    side = math.isqrt(cells)
    kernel = load_stage_kernel(load_scheme(spec), backend)
    layout = Layout(tuple((side,) * d for d in dims), (True, True))
    domain = DecomposedDomain(kernel, layout, comm)
    exchange_time = _timed_exchanges(domain)
    h, f = kernel.halo, kernel.face_halo
    start = domain.block.start
    x = (start[0] + np.arange(side) + 0.5) / (side * dims[0])
    y = (start[1] + np.arange(side) + 0.5) / (side * dims[1])
    q = np.zeros((side + 2 * h,) * 2)
    q[h:h + side, h:h + side] = np.sin(2 * np.pi * x)[:, None] * np.cos(2 * np.pi * y)[None, :]
    faces = [np.full((side + 1 + 2 * f, side), 0.6), np.full((side, side + 1 + 2 * f), -0.4)]
    dt_dx = 0.5 / 0.6
    found = _timed_steps(comm, lambda v, k: domain.split_step(v, faces, dt_dx, "lie", k), q,
                         steps, exchange_time)
    if found is not None:
        print(json.dumps(found | {"cells": side * side, "grid": list(dims)}))


def _timed_exchanges(domain) -> list[float]:
    """Wrap the domain's exchanges with a timer; the returned list holds the seconds."""
    exchange_time = [0.0]
    for name in ("cells", "faces"):
        original = getattr(domain.exchange, name)

        def timed(*args, _original=original):
            start = time.perf_counter()
            _original(*args)
            exchange_time[0] += time.perf_counter() - start
        setattr(domain.exchange, name, timed)
    return exchange_time


def _timed_steps(comm, advance, q, steps: int, exchange_time: list[float]) -> dict | None:
    """Seconds per step of `advance(q, k)` (and of its exchanges) on the slowest process,
    after two warm-up steps (first touch, caches); on rank 0, else None."""
    for k in range(2):
        q = advance(q, k)
    comm.Barrier()
    exchange_time[0] = 0.0
    begin = time.perf_counter()
    for k in range(steps):
        q = advance(q, k)
    elapsed = time.perf_counter() - begin
    rows = comm.gather((elapsed, exchange_time[0]), root=0)
    if comm.Get_rank() != 0:
        return None
    slowest = max(rows)
    return {"seconds_per_step": slowest[0] / steps,
            "exchange_seconds_per_step": slowest[1] / steps}


def rank_program(spec: str, backend: str, cells: int, steps: int) -> None:
    import numpy as np
    from mpi4py import MPI

    from fluxloom.compiler import load_scheme
    from fluxloom.runtime.decomposed.blocks import Layout
    from fluxloom.runtime.decomposed.driver import DecomposedDomain
    from fluxloom.runtime.decomposed.stages import load_stage_kernel

    comm = MPI.COMM_WORLD
    size = comm.Get_size()
    kernel = load_stage_kernel(load_scheme(spec), backend)
    domain = DecomposedDomain(kernel, Layout(((cells,) * size,), (True,)), comm)
    exchange_time = _timed_exchanges(domain)
    x = (domain.block.start[0] + np.arange(cells) + 0.5) / (cells * size)
    q = domain.local_cells(np.zeros(cells * size))
    q[kernel.halo:kernel.halo + cells] = np.sin(2 * np.pi * x)
    faces = np.zeros(cells + 1 + 2 * kernel.face_halo)
    faces[kernel.face_halo:kernel.face_halo + cells + 1] = 0.5 + 0.4 * np.sin(
        2 * np.pi * (domain.block.start[0] + np.arange(cells + 1)) / (cells * size))
    dt_dx = 0.5 / 0.9
    found = _timed_steps(comm, lambda v, k: domain.step(v, faces, dt_dx), q, steps,
                         exchange_time)
    if found is not None:
        print(json.dumps(found))


def measure(spec: Path, backend: str, cells: int, steps: int, ranks: int, dims: int = 1) -> dict:
    from fluxloom.runtime.decomposed.launch import require_mpi

    mpiexec = require_mpi(ranks)
    program = "--rank-program" if dims == 1 else "--rank-program-2d"
    done = subprocess.run([mpiexec, "-n", str(ranks), sys.executable, __file__, program,
                           str(spec), backend, str(cells), str(steps)],
                          capture_output=True, text=True, stdin=subprocess.DEVNULL, check=False)
    if done.returncode != 0:
        raise SystemExit(f"mpiexec failed:\n{done.stderr[-2000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


# ---- the projection ----------------------------------------------------------------------

def projection(schedule, side: int, memory_gbs: float, network_gbs: float,
               latency_us: float) -> dict:
    """One process's step on a side^3 block: three sweeps, each with the schedule's exchanges."""
    sweeps = 3
    face = side * side
    exchanged = sweeps * 2 * face * REAL_BYTES * (schedule.q_exchanges * schedule.halo
                                                  + schedule.face_exchanges * schedule.face_halo)
    streamed = sweeps * schedule.stages * 3 * side ** 3 * REAL_BYTES
    messages = sweeps * 2 * schedule.per_step
    t_comm = messages * latency_us * 1e-6 + exchanged / (network_gbs * 1e9)
    t_kernel = streamed / (memory_gbs * 1e9)
    return {"side": side, "exchanged": exchanged, "streamed": streamed,
            "bytes_ratio": exchanged / streamed, "time_share": t_comm / (t_comm + t_kernel)}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rank-program", nargs=4, metavar=("SPEC", "BACKEND", "CELLS", "STEPS"),
                        help=argparse.SUPPRESS)
    parser.add_argument("--rank-program-2d", nargs=4, help=argparse.SUPPRESS)
    parser.add_argument("--dims", type=int, choices=(1, 2), default=1,
                        help="1-D blocks, or 2-D square blocks with Lie-split sweeps")
    parser.add_argument("--cells", type=int, default=1_000_000, help="cells per process")
    parser.add_argument("--steps", type=int, default=20)
    parser.add_argument("--ranks", type=int, nargs="+", default=[1, 2, 4])
    parser.add_argument("--backend", choices=("c", "numpy"), default="c")
    parser.add_argument("--memory-gbs", type=float, default=5.0,
                        help="memory bandwidth per process, GB/s (projection)")
    parser.add_argument("--network-gbs", type=float, default=0.5,
                        help="network bandwidth per process, GB/s (projection)")
    parser.add_argument("--latency-us", type=float, default=2.0,
                        help="latency per message, microseconds (projection)")
    parser.add_argument("--project-only", action="store_true")
    args = parser.parse_args()
    if args.rank_program:
        spec, backend, cells, steps = args.rank_program
        rank_program(spec, backend, int(cells), int(steps))
        return 0
    if args.rank_program_2d:
        spec, backend, cells, steps = args.rank_program_2d
        rank_program_2d(spec, backend, int(cells), int(steps))
        return 0

    from fluxloom.compiler import load_scheme
    from fluxloom.compiler.emit.exchange import exchange_schedule

    if not args.project_only:
        print(f"Weak scaling ({args.dims}-D): {args.cells} cells per process, "
              f"{args.backend} kernel, "
              f"{args.steps} steps; load average {os.getloadavg()[0]:.2f} on "
              f"{os.cpu_count()} cores")
        print(f"{'scheme':<16} {'P':>2} {'ms/step':>9} {'exchange ms':>12} {'share':>6} "
              f"{'Mcells/s/P':>11} {'efficiency':>10}")
        for name in SCHEMES:
            base = None
            for ranks in args.ranks:
                m = measure(ROOT / "examples" / f"{name}.loom", args.backend, args.cells,
                            args.steps, ranks, args.dims)
                t, te = m["seconds_per_step"], m["exchange_seconds_per_step"]
                base = t if base is None else base
                cells = m.get("cells", args.cells)
                print(f"{name:<16} {ranks:>2} {1e3 * t:>9.2f} {1e3 * te:>12.3f} {te / t:>6.1%} "
                      f"{cells / t / 1e6:>11.0f} {base / t:>10.2f}")

    print(f"\nProjection for 3-D blocks of side^3 cells per process (three sweeps per step), "
          f"memory {args.memory_gbs:g} GB/s, network {args.network_gbs:g} GB/s per process, "
          f"latency {args.latency_us:g} us per message, no overlap:")
    print(f"{'scheme':<16} {'halo':>4} {'exch/step':>9} {'side':>5} {'sent MB':>9} "
          f"{'streamed MB':>12} {'bytes ratio':>11} {'time share':>10}")
    for name in SCHEMES:
        schedule = exchange_schedule(load_scheme(ROOT / "examples" / f"{name}.loom"))
        for side in SIDES:
            p = projection(schedule, side, args.memory_gbs, args.network_gbs, args.latency_us)
            print(f"{name:<16} {schedule.halo:>4} {3 * schedule.per_step:>9} {side:>5} "
                  f"{p['exchanged'] / 1e6:>9.3f} {p['streamed'] / 1e6:>12.1f} "
                  f"{p['bytes_ratio']:>11.2%} {p['time_share']:>10.1%}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
