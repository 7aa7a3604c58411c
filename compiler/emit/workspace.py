"""The caller's workspace as data: named regions, each a size affine in n.

Every target prints its `workspace_size(n)` and the offsets of the regions inside
the work array from one `WorkspaceLayout` (compiler/emit/plan.py builds it), so the
size a host allocates and the pointers a kernel takes from it cannot drift apart.

A size is `Affine`: cells * n + halos * HALO + blocks * FLUX_BLOCK + constant, with
HALO the kernel's ghost cells per side and FLUX_BLOCK the C kernel's faces per block
(only the C kernel's flux scratch uses it). `print_affine` writes one in any target's
syntax from the names the target gives the three symbols.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Affine:
    """cells * n + halos * HALO + blocks * FLUX_BLOCK + constant (all integers)."""

    cells: int = 0
    halos: int = 0
    blocks: int = 0
    constant: int = 0

    def __add__(self, other: "Affine") -> "Affine":
        return Affine(self.cells + other.cells, self.halos + other.halos,
                      self.blocks + other.blocks, self.constant + other.constant)

    def times(self, factor: int) -> "Affine":
        return Affine(factor * self.cells, factor * self.halos, factor * self.blocks,
                      factor * self.constant)

    def at(self, n: int, halo: int, block: int = 0) -> int:
        """The value for n cells (halo and block the kernel's)."""
        return self.cells * n + self.halos * halo + self.blocks * block + self.constant

    @property
    def zero(self) -> bool:
        return self == Affine()


ZERO = Affine()


@dataclass(frozen=True)
class Region:
    """`count` arrays of `size` reals each, one after the other, named `name`."""

    name: str
    size: Affine
    count: int = 1
    about: str = ""

    @property
    def total(self) -> Affine:
        return self.size.times(self.count)


@dataclass(frozen=True)
class WorkspaceLayout:
    """The regions of the work array in order; a region starts where the one before ends."""

    regions: tuple[Region, ...]

    @property
    def size(self) -> Affine:
        total = ZERO
        for region in self.regions:
            total = total + region.total
        return total

    def offset(self, name: str) -> Affine:
        """Where region `name` starts in the work array."""
        start = ZERO
        for region in self.regions:
            if region.name == name:
                return start
            start = start + region.total
        raise KeyError(name)

    def region(self, name: str) -> Region:
        for region in self.regions:
            if region.name == name:
                return region
        raise KeyError(name)

    def has(self, name: str) -> bool:
        return any(region.name == name for region in self.regions)


def print_affine(value: Affine, n: str = "n", halo: str = "HALO", block: str = "BLOCK") -> str:
    """value as `2 * n + 2 * HALO + BLOCK + 1` with the target's names of the symbols."""
    parts = []
    for coefficient, name in ((value.cells, n), (value.halos, halo), (value.blocks, block)):
        if coefficient:
            parts.append(name if coefficient == 1 else f"{coefficient} * {name}")
    if value.constant or not parts:
        parts.append(str(abs(value.constant)) if parts else str(value.constant))
        if value.constant < 0 and len(parts) > 1:
            return " + ".join(parts[:-1]) + f" - {parts[-1]}"
    return " + ".join(parts)
