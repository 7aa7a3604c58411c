"""Idiomatic hand-written numpy versions of three schemes, for `fluxloom bench`.

Written the way a modeller would write them without fluxloom: whole-array
expressions, np.where to pick the upwind cells for either velocity sign, one
flux array, then the update. Same contract as a generated step: q arrays with
`halo` ghost cells per side, u_face[i] the face between cells halo + i - 1 and
halo + i, only the interior of q_out written.
"""
from __future__ import annotations

import numpy as np


def upwind_step(n, q_in, q_out, u_face, dt_dx, halo=1):
    left = q_in[halo - 1:halo + n]
    right = q_in[halo:halo + n + 1]
    flux = np.where(u_face >= 0, u_face * left, u_face * right)
    q_out[halo:halo + n] = q_in[halo:halo + n] - dt_dx * (flux[1:] - flux[:-1])


def lax_wendroff_step(n, q_in, q_out, u_face, dt_dx, halo=1):
    left = q_in[halo - 1:halo + n]
    right = q_in[halo:halo + n + 1]
    forward = u_face >= 0
    upwind = np.where(forward, left, right)
    downwind = np.where(forward, right, left)
    c = np.abs(u_face) * dt_dx
    flux = u_face * (upwind + 0.5 * (1 - c) * (downwind - upwind))
    q_out[halo:halo + n] = q_in[halo:halo + n] - dt_dx * (flux[1:] - flux[:-1])


def lw_vanleer_step(n, q_in, q_out, u_face, dt_dx, halo=2):
    far_left = q_in[halo - 2:halo + n - 1]
    left = q_in[halo - 1:halo + n]
    right = q_in[halo:halo + n + 1]
    far_right = q_in[halo + 1:halo + n + 2]
    forward = u_face >= 0
    upwind = np.where(forward, left, right)
    downwind = np.where(forward, right, left)
    behind = np.where(forward, far_left, far_right)
    jump = downwind - upwind
    r = np.divide(upwind - behind, jump, out=np.zeros_like(jump), where=jump != 0)
    limiter = (r + np.abs(r)) / (1 + np.abs(r))
    c = np.abs(u_face) * dt_dx
    flux = u_face * (upwind + 0.5 * (1 - c) * limiter * jump)
    q_out[halo:halo + n] = q_in[halo:halo + n] - dt_dx * (flux[1:] - flux[:-1])
