"""Halo fill helpers (boundaries) for every target: what the templates receive.

The helpers fill the ghost cells at one end (side) of one axis of an array of
rank 1 to 3 whose extents the caller gives, ghost cells included:

- periodic: from the other end of the same line;
- outflow: zero gradient, every ghost cell takes the nearest interior value;
- wall: a mirrored halo, ghost d cells outside is interior cell d - 1 inside
  (repeatedly mirrored where the line is shorter than the halo), and a faces
  helper sets the normal velocity of the boundary face to zero (with the faces
  beyond it, for flux correction, mirrored and negated), so no flux crosses;
- inflow: prescribed values, a slab of the array's shape with the filled axis
  `halo` deep.

The rules are written once here as data (`KINDS`) and printed per target by the
templates boundaries_*.j2; the C and numpy helpers take C order, the Fortran
ones natural (column-major) indexing.
"""
from __future__ import annotations

from dataclasses import dataclass

MAX_RANK = 3
SIDES = (("low", 0), ("high", 1))
COPY_KINDS = ("periodic", "outflow", "wall")
"""Fills whose ghost cells copy interior cells of the same line (inflow copies given values)."""
KINDS = COPY_KINDS + ("inflow",)

DESCRIPTIONS = {
    "periodic": ("periodic: each ghost cell takes the interior cell one period away",
                 "  (from the other end of the same line)"),
    "outflow": ("outflow: zero gradient, each ghost cell takes the nearest interior cell",),
    "wall": ("wall: a mirrored halo, the ghost cell d cells outside takes the interior",
             "  cell d - 1 cells inside (mirrored again where the line is shorter than",
             "  the halo); with faces_wall, which zeroes the boundary face's velocity,",
             "  no flux crosses the wall"),
    "inflow": ("inflow: the ghost cells take prescribed values",),
}
"""Each rule in comment lines of at most 76 characters (every target prints them)."""


@dataclass(frozen=True)
class FortranSection:
    """One axis of a rank: the array sections a Fortran fill assigns."""
    rank: int
    axis: int           # 1-based, natural indexing
    ghost: str          # q(...) with the ghost index g
    source: str         # q(...) with the source index s
    values: str         # values(...) with the ghost's depth k
    face: str           # u_face(...) with index b (and b - k, b + k through the placeholders)
    face_low: str
    face_high: str
    face_mirror_low: str
    face_mirror_high: str


def _section(array: str, rank: int, axis: int, index: str) -> str:
    return f"{array}(" + ", ".join(index if a == axis else ":" for a in range(1, rank + 1)) + ")"


def fortran_sections() -> tuple[FortranSection, ...]:
    out = []
    for rank in range(1, MAX_RANK + 1):
        for axis in range(1, rank + 1):
            out.append(FortranSection(
                rank, axis, _section("q", rank, axis, "g"), _section("q", rank, axis, "s"),
                _section("values", rank, axis, "k"), _section("u_face", rank, axis, "b"),
                _section("u_face", rank, axis, "b - k"), _section("u_face", rank, axis, "b + k"),
                _section("u_face", rank, axis, "b + k"), _section("u_face", rank, axis, "b - k")))
    return tuple(out)


@dataclass(frozen=True)
class FortranRank:
    rank: int
    shape: str          # assumed shape, e.g. "(:, :)"
    sections: tuple[FortranSection, ...]


@dataclass(frozen=True)
class Boundaries:
    """What every boundaries template receives."""
    kinds: tuple[str, ...]
    copy_kinds: tuple[str, ...]
    descriptions: tuple[str, ...]    # comment lines, every rule
    max_rank: int
    ranks: tuple[FortranRank, ...]


def boundaries() -> Boundaries:
    sections = fortran_sections()
    ranks = tuple(FortranRank(r, "(" + ", ".join(":" for _ in range(r)) + ")",
                              tuple(s for s in sections if s.rank == r))
                  for r in range(1, MAX_RANK + 1))
    return Boundaries(KINDS, COPY_KINDS, tuple(line for k in KINDS for line in DESCRIPTIONS[k]),
                      MAX_RANK, ranks)


FORTRAN_SUFFIXES = tuple(f"_halo_{kind}" for kind in KINDS) + ("_faces_wall", "_side_low",
                                                               "_side_high")
"""Names the Fortran module adds after the scheme's name (each shorter than
compiler/check.py's LONGEST_FORTRAN_SUFFIX, so every scheme name the front end
accepts fits)."""
