"""Block decomposition of a Cartesian grid of cells: the arithmetic, no MPI.

A `Layout` splits each axis of a grid into consecutive blocks (their sizes may
differ); the blocks form a Cartesian grid of `dims` processes. Rank coordinates
follow MPI's Cartesian topology in row-major order (the last axis varies
fastest), as `MPI.Cartcomm` numbers them without reordering.

Every ghost cell of a block comes from the one block next to it, so a block
must be at least as wide as the halo along every axis (and as wide as the face
halo, for the face velocities): `check_widths` refuses narrower ones.
"""
from __future__ import annotations

import math
from dataclasses import dataclass



def decomposition_error(message: str) -> Exception:
    """A LoomError (imported here, so the ranks' program does not load the compiler)."""
    from fluxloom.compiler.diagnostics import LoomError

    return LoomError(message, file="decomposition")


def even_split(cells: int, parts: int) -> tuple[int, ...]:
    """`parts` blocks as equal as they can be: the first `cells % parts` one cell wider."""
    if parts < 1 or cells < parts:
        raise decomposition_error(f"cannot split {cells} cells into {parts} blocks")
    base, extra = divmod(cells, parts)
    return tuple(base + 1 if k < extra else base for k in range(parts))


def narrowest_split(cells: int, parts: int, width: int) -> tuple[int, ...]:
    """Every block but the last exactly `width` cells wide; the last takes the rest."""
    rest = cells - (parts - 1) * width
    if parts < 1 or width < 1 or rest < width:
        raise decomposition_error(f"cannot split {cells} cells into {parts} blocks of at least "
                                  f"{width}")
    return (width,) * (parts - 1) + (rest,)


@dataclass(frozen=True)
class Block:
    """One rank's block: where it starts in the grid and how many cells it has, per axis."""

    coords: tuple[int, ...]
    start: tuple[int, ...]
    size: tuple[int, ...]


@dataclass(frozen=True)
class Layout:
    splits: tuple[tuple[int, ...], ...]   # block sizes along each axis
    periodic: tuple[bool, ...]            # per axis: the last block's neighbour is the first

    def __post_init__(self):
        if len(self.splits) != len(self.periodic) or not self.splits:
            raise decomposition_error("a layout needs one split and one periodicity per axis")
        for axis, sizes in enumerate(self.splits):
            if not sizes or min(sizes) < 1:
                raise decomposition_error(f"axis {axis}: every block needs at least one "
                                          f"cell, given {list(sizes)}")

    @classmethod
    def even(cls, cells: tuple[int, ...], dims: tuple[int, ...],
             periodic: tuple[bool, ...] | None = None) -> "Layout":
        periodic = periodic if periodic is not None else (True,) * len(cells)
        return cls(tuple(even_split(n, p) for n, p in zip(cells, dims)), tuple(periodic))

    @property
    def ndim(self) -> int:
        return len(self.splits)

    @property
    def cells(self) -> tuple[int, ...]:
        return tuple(sum(sizes) for sizes in self.splits)

    @property
    def dims(self) -> tuple[int, ...]:
        return tuple(len(sizes) for sizes in self.splits)

    @property
    def ranks(self) -> int:
        return math.prod(self.dims)

    def coords(self, rank: int) -> tuple[int, ...]:
        """The block coordinates of a rank (row-major, last axis fastest)."""
        coords = []
        for extent in reversed(self.dims):
            rank, c = divmod(rank, extent)
            coords.append(c)
        return tuple(reversed(coords))

    def block(self, coords: tuple[int, ...]) -> Block:
        start = tuple(sum(sizes[:c]) for sizes, c in zip(self.splits, coords))
        size = tuple(sizes[c] for sizes, c in zip(self.splits, coords))
        return Block(tuple(coords), start, size)

    def owner(self, index: tuple[int, ...]) -> tuple[int, tuple[int, ...]]:
        """The rank holding a global cell, and the cell's index inside that rank's block."""
        coords, local = [], []
        for sizes, i in zip(self.splits, index):
            c, start = 0, 0
            while start + sizes[c] <= i:
                start += sizes[c]
                c += 1
            coords.append(c)
            local.append(i - start)
        rank = 0
        for extent, c in zip(self.dims, coords):
            rank = rank * extent + c
        return rank, tuple(local)

    def describe(self) -> str:
        """Block sizes per axis, e.g. '25+24+24+24' (axes joined by ' x ')."""
        return " x ".join("+".join(str(s) for s in sizes) for sizes in self.splits)

    def check_widths(self, halo: int, face_halo: int = 0) -> None:
        """Refuse blocks narrower than the halos their neighbours take from them."""
        need = max(halo, face_halo)
        for axis, sizes in enumerate(self.splits):
            if min(sizes) < need:
                raise decomposition_error(
                    f"axis {axis}: a block of {min(sizes)} cells is narrower than the halo "
                    f"({need} cells per side); each ghost cell must come from the next block, "
                    "so blocks need at least that many")
