"""What the sweep templates (c_sweep.*.j2, numpy_sweep.py.j2, fortran_sweep.f90.j2) need.

A single-stage scheme without flux correction gets a sweep of its own (fluxes of
face rows across neighbouring lines, per-cell dt/dx, thickness weighting, several
tracers, OpenMP); multi-stage and flux-corrected schemes sweep line by line
through their step's stages (lines across OpenMP threads, each in its slice of the
caller's workspace), filling every intermediate stage's ghost cells by the ends'
edge kinds (NAME_sweep_edges) and carrying the thickness through the stages. The
face function and its loads are the step's own, so the values a sweep computes are
the step's values.
"""
from __future__ import annotations

SWEEP_CHUNK = 1024
"""Neighbouring lines a strided sweep handles together (8 KiB of a double row per
array): long runs of contiguous loads keep the hardware prefetchers streaming while
the sweep walks down the rows (256 ran about 2x slower at 1024 x 1024)."""
SWEEP_SEGMENT = 1024
"""Cells of a contiguous line whose face velocity parts (Courant numbers, frames) are
computed once and then used by every tracer in turn (a multiple of FLUX_BLOCK)."""
SWEEP_PIECE = 128
"""The constant width the rest of a chunk is swept in (vectorised at -O2)."""
SWEEP_GROUP = 8
"""Tracers whose fluxes one pass keeps (stack arrays of fixed size: a strided sweep
keeps 2 x SWEEP_GROUP x SWEEP_CHUNK reals of flux rows, 128 KiB in double)."""


def sweep_direct(plan) -> bool:
    """True when the scheme sweeps with its own loops (widths, thickness, threads)."""
    return plan.stages == 1 and not plan.fct


def c_sweep_context(plan, fluxes, openmp: bool = False) -> dict:
    """openmp: the C file requires OpenMP (`build --openmp`); without it the sweep is
    still threaded wherever the file is compiled with OpenMP."""
    flux = fluxes[0]
    return {"sweep": {
        "openmp": openmp,
        "direct": sweep_direct(plan),
        "chunk": SWEEP_CHUNK,
        "piece": SWEEP_PIECE,
        "segment": SWEEP_SEGMENT,
        "group": SWEEP_GROUP,
        "flux": flux,
        "uses_c": flux.uses_c,
        "c_argument": "c[k] != 0 ? c[k] : 1" if flux.guard_c else "c[k]",
    }}
