"""Halo exchange between neighbouring blocks on an MPI Cartesian communicator.

One exchange refreshes the ghost cells (or ghost faces) of one array along one
axis: every rank posts non-blocking receives from its two neighbours on that
axis, non-blocking sends of its own edge slabs to them, and waits for all four.
The slabs span the block's interior along the other axes (a sweep along one
axis reads ghost cells along that axis only, so corners are never needed).
A missing neighbour (a wall, once boundaries exist) is MPI.PROC_NULL: nothing is
sent or received on that side and the caller fills those ghosts itself.

Cell arrays hold `halo` ghost cells on each side of every axis; a face array of
axis a holds the block's n_a + 1 faces plus `face_halo` ghost faces on each side
along a, and the block's interior along the other axes.
"""
from __future__ import annotations

import time

import numpy as np
from mpi4py import MPI

from .blocks import Block


SPINS = 100
"""Polls of a pending exchange before waiting starts to sleep between polls."""


def wait(requests) -> None:
    """Wait for the requests: poll a while, then poll with short sleeps. MPI's own wait
    spins on the processor, which starves the very neighbour it waits for when ranks
    outnumber cores (decomposed runs on one machine)."""
    for _ in range(SPINS):
        if MPI.Request.Testall(requests):
            return
    while not MPI.Request.Testall(requests):
        time.sleep(1e-5)


class HaloExchange:
    """The exchanges of one block; `count` says how many have been made."""

    def __init__(self, cart: MPI.Cartcomm, block: Block):
        self.cart = cart
        self.block = block
        # Shift(axis, 1) gives (source, dest): the neighbour before and the one after
        self.neighbours = tuple(cart.Shift(axis, 1) for axis in range(len(block.size)))
        self.count = 0

    def edges(self, axis: int) -> tuple[int, ...]:
        """The sides of the block along axis with no neighbour (-1 before, +1 after)."""
        before, after = self.neighbours[axis]
        return tuple(side for side, rank in ((-1, before), (1, after)) if rank == MPI.PROC_NULL)

    def cells(self, q: np.ndarray, halo: int, axis: int, width: int | None = None) -> None:
        """Refresh `width` (default: all `halo`) ghost cells per side of q along axis."""
        w = halo if width is None else width
        n = self.block.size[axis]

        def region(lo: int, hi: int) -> tuple[slice, ...]:
            index = [slice(halo, halo + size) for size in self.block.size]
            index[axis] = slice(lo, hi)
            return tuple(index)

        self._swap(q, axis,
                   send_before=region(halo, halo + w), send_after=region(halo + n - w, halo + n),
                   receive_before=region(halo - w, halo), receive_after=region(halo + n, halo + n + w))

    def faces(self, u_face: np.ndarray, face_halo: int, axis: int) -> None:
        """Refresh the `face_halo` ghost faces per side of a face array along axis.

        Face i of the block sits at index face_halo + i; face n is shared with the
        next block (its face 0), so the ghosts beyond it are that block's faces
        1 .. face_halo, and those before face 0 the previous block's last ones but one.
        """
        f, n = face_halo, self.block.size[axis]

        def region(lo: int, hi: int) -> tuple[slice, ...]:
            index = [slice(None)] * u_face.ndim
            index[axis] = slice(lo, hi)
            return tuple(index)

        self._swap(u_face, axis,
                   send_before=region(f + 1, 2 * f + 1), send_after=region(n, n + f),
                   receive_before=region(0, f), receive_after=region(n + f + 1, n + 2 * f + 1))

    def _swap(self, array: np.ndarray, axis: int, send_before, send_after, receive_before,
              receive_after) -> None:
        self.count += 1
        before, after = self.neighbours[axis]
        towards_after, towards_before = 2 * axis, 2 * axis + 1  # message tags by direction
        from_before = np.empty_like(array[receive_before])
        from_after = np.empty_like(array[receive_after])
        if from_before.size == 0:
            return
        # the outgoing slabs stay referenced here until every request has completed
        to_before = np.ascontiguousarray(array[send_before])
        to_after = np.ascontiguousarray(array[send_after])
        requests = [
            self.cart.Irecv(from_before, source=before, tag=towards_after),
            self.cart.Irecv(from_after, source=after, tag=towards_before),
            self.cart.Isend(to_before, dest=before, tag=towards_before),
            self.cart.Isend(to_after, dest=after, tag=towards_after),
        ]
        wait(requests)
        if before != MPI.PROC_NULL:
            array[receive_before] = from_before
        if after != MPI.PROC_NULL:
            array[receive_after] = from_after
