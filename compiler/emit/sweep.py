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

SWEEP_SEGMENT = 4096
"""Cells of a contiguous line whose face velocity parts (Courant numbers, frames) are
computed once and then used by every tracer in turn (a multiple of FLUX_BLOCK)."""
SWEEP_PIECE = 128
"""Neighbouring lines a strided sweep takes together at each face row (a constant
width, so the loops across them vectorise at -O2). A row is taken piece after piece
along its whole width, so every array streams row after row as it lies in memory;
the flux of a face waits in the output cell it will finish, so no flux rows are kept.""" 
SWEEP_RUN = 4096
"""Neighbouring lines of a strided sweep whose Courant numbers (one face row of them)
are computed once and kept for every tracer in turn (a multiple of SWEEP_PIECE): each
tracer then streams a whole run of its row, not a piece of every tracer in turn."""


def sweep_direct(plan) -> bool:
    """True when the scheme sweeps with its own loops (widths, thickness, threads)."""
    return plan.stages == 1 and not plan.fct

SWEEP_LINES = 16
"""Neighbouring lines a multi-stage or flux-corrected sweep along a strided axis copies
into its workspace together: each row's cells are read and written SWEEP_LINES at a
time (two cache lines of doubles) instead of one real per cache line; the workspace
holds that many lines. kappa_rk3's y sweep of a 4096^2 array took 0.25 s with 8, 0.18 s
with 16 and 0.19 s with 32 (0.08 s along x)."""


def sweep_stack_reals(flux_block: int) -> int:
    """Reals a direct sweep keeps on the stack, the larger of its two paths: the
    contiguous axis (a segment's Courant numbers and three block-sized arrays) and
    a strided one (a run's Courant numbers, a piece of fluxes and two spare rows)."""
    return max(SWEEP_SEGMENT + 1 + 3 * (flux_block + 1), SWEEP_RUN + 3 * SWEEP_PIECE)


def c_sweep_context(plan, fluxes, openmp: bool = False, flux_block: int = 128) -> dict:
    """openmp: the C file requires OpenMP (`build --openmp`); without it the sweep is
    still threaded wherever the file is compiled with OpenMP."""
    flux = fluxes[0]
    return {"sweep": {
        "openmp": openmp,
        "direct": sweep_direct(plan),
        "piece": SWEEP_PIECE,
        "run": SWEEP_RUN,
        "lines": SWEEP_LINES,
        "stack_reals": sweep_stack_reals(flux_block),
        "segment": SWEEP_SEGMENT,
        "flux": flux,
        "uses_c": flux.uses_c,
        "c_argument": "c[k] != 0 ? c[k] : 1" if flux.guard_c else "c[k]",
    }}
