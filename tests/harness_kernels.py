"""Hand-written numpy kernels for the harness tests, independent of the code generators.

They follow the kernel contract of DEVELOPERS.md (q with halos, one velocity per
face, `step(q, u_face, dt_dx, out)` writing the interior only), so the harness can
be held against schemes whose behaviour is known from the literature, whatever
state the generated kernels are in.
"""
from __future__ import annotations

import numpy as np


class HandKernel:
    """A single-step (forward Euler) scheme given by its face value in the upwind frame.

    face(q_m1, q_0, q_1, c) -> g, and the flux is u * g, with q_k the cell at offset k
    from the upwind cell (for u >= 0 cell j + k, for u < 0 cell j + 1 - k)."""

    backend = "hand"
    precision = "double"
    dtype = np.dtype(float)
    stages = 1

    def __init__(self, name, face, halo=2, clip=None):
        self.name, self.face, self.halo, self.clip = name, face, halo, clip

    def workspace_size(self, n):
        return 0

    def step(self, q, u_face, dt_dx, out=None):
        h, n = self.halo, q.size - 2 * self.halo
        out = np.empty_like(q) if out is None else out
        left = np.arange(h - 1, h + n)          # cell left of face i (array index)
        c = np.abs(u_face) * dt_dx
        pos = u_face >= 0
        up = np.where(pos, left, left + 1)       # the upwind cell of each face
        down = np.where(pos, left + 1, left)
        back = np.where(pos, left - 1, left + 2)
        g = self.face(q[back], q[up], q[down], c)
        flux = np.where(u_face == 0, 0.0, u_face * g)
        out[h:h + n] = q[h:h + n] - dt_dx * (flux[1:] - flux[:-1])
        if self.clip is not None:
            np.clip(out[h:h + n], *self.clip, out=out[h:h + n])
        return out


def _limited(psi):
    def face(qm1, q0, q1, c):
        jump = q1 - q0
        safe = np.where(jump == 0, 1.0, jump)
        r = np.where(jump == 0, 0.0, (q0 - qm1) / safe)
        return q0 + (1 - c) / 2 * psi(r) * jump
    return face


def _minmod(r):
    return np.maximum(0, np.minimum(1, r))


def _superbee(r):
    return np.maximum.reduce([np.zeros_like(r), np.minimum(2 * r, 1), np.minimum(r, 2)])


def _vanleer(r):
    return (r + np.abs(r)) / (1 + np.abs(r))


def _overreach(r):
    return np.maximum.reduce([np.zeros_like(r), np.minimum(3 * r, 1), np.minimum(r, 3)])


def _lax_friedrichs(qm1, q0, q1, c):
    # (q0 + q1)/2 - (q1 - q0)/(2c), written so that c = 0 gives no NaN (flux is 0 there).
    return (q0 + q1) / 2 - (q1 - q0) / (2 * np.where(c == 0, 1.0, c))


FACES = {
    "upwind": lambda qm1, q0, q1, c: q0,
    "lax_wendroff": lambda qm1, q0, q1, c: q0 + (1 - c) / 2 * (q1 - q0),
    "beam_warming": lambda qm1, q0, q1, c: q0 + (1 - c) / 2 * (q0 - qm1),
    "fromm": lambda qm1, q0, q1, c: q0 + (1 - c) / 4 * (q1 - qm1),
    "ftcs": lambda qm1, q0, q1, c: (q0 + q1) / 2,
    "lax_friedrichs": _lax_friedrichs,
    "lw_minmod": _limited(_minmod),
    "lw_superbee": _limited(_superbee),
    "lw_vanleer": _limited(_vanleer),
    "lw_overreach": _limited(_overreach),
}


def hand_kernel(name: str, clip=None) -> HandKernel:
    base = name.removesuffix("_clip")
    return HandKernel(name, FACES[base], clip=clip)
