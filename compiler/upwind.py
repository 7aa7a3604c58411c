"""The upwind frame, written once.

For the face between cells j and j + 1, `q(k)` of a face expression is cell
j + k when u >= 0 and cell j + 1 - k when u < 0. Every emitter (the cells each
load reads), the IR (how far a stencil reaches) and the analysis (a face on a
grid) read the rule from here. The run-time reference stepper
(runtime/reference.py) writes it out on its own on purpose: the tests use it as
an independent check of the kernels.
"""
from __future__ import annotations


def upwind_cell(k: int, forward: bool) -> int:
    """The cell q(k) reads, counted from the face's left cell j: k for u >= 0, 1 - k else."""
    return k if forward else 1 - k


def both_cells(k: int) -> tuple[int, int]:
    """(cell for u >= 0, cell for u < 0) of q(k), from the face's left cell."""
    return upwind_cell(k, True), upwind_cell(k, False)


def stencil_reach(offsets) -> int:
    """Cells each side of j that the two faces of cell j read, over both signs of u.

    Face j + 1/2 reads cell j + k or j + 1 - k; face j - 1/2 the same one cell to
    the left, so offset k reaches max(|k|, |k - 1|) cells from j (at least 1).
    """
    cells = {c + left for k in offsets for c in both_cells(k) for left in (0, -1)}
    return max((abs(c) for c in cells), default=1)
