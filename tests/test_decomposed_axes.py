"""The per-axis advance of 2-D and 3-D blocks (runtime/decomposed/axes.py) without MPI.

One block that is the whole periodic domain, its ghost cells along the swept axis
filled periodically by numpy before every stage (what the driver's exchange does
with one rank), stepped stage by stage through `AxisSweeps`, must give the
generated whole-domain sweep (`KernelSweep`, NAME_sweep) bit for bit: for
one-stage schemes the hook calls that very sweep on the block, for multi-stage
ones it runs NAME_stage on every line, a different code path. A correct
per-stage advance changes no operation on any cell, so any difference is a bug
(common practice, no source). Random data, random signs of the velocity, every
axis of rank-2 and rank-3 arrays; and a spec nobody has seen (a random linear
stencil under RK4, whose running sum lives in per-line registers).
"""
from __future__ import annotations

import numpy as np
import pytest
from conftest import EXAMPLES

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.runtime.array_sweep import fill_periodic_axis
from fluxloom.runtime.decomposed.axes import AxisSweeps
from fluxloom.runtime.decomposed.stages import load_stage_kernel
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.sweeps import KernelSweep


def random_linear_rk4(rng) -> str:
    a, b, c = (int(v) for v in rng.integers(-4, 5, size=3))
    return (f"scheme random_rk4_{abs(a)}{abs(b)}{abs(c)} {{\n"
            f"  time rk4\n"
            f"  flux = u * (q[0] + ({a}/16)*(q[1] - q[0]) + ({b}/16)*(q[0] - q[-1]) "
            f"+ ({c}/32)*(q[1] - 2*q[0] + q[-1]))\n}}\n")


def advance_block(stage_kernel, axis, q, u_face, dt_dx):
    """q (interior only) advanced along axis by the hook, stage by stage."""
    h = stage_kernel.halo
    hook = AxisSweeps(stage_kernel)
    padded = np.pad(q, h)
    buffers = [np.zeros_like(padded) for _ in range(2)]
    source = padded
    faces = u_face
    if stage_kernel.face_halo:
        f = stage_kernel.face_halo
        moved = np.moveaxis(u_face, axis, -1)
        n = moved.shape[-1] - 1
        extended = np.concatenate((moved[..., np.arange(-f, 0) % n], moved,
                                   moved[..., np.arange(1, f + 1) % n]), axis=-1)
        faces = np.ascontiguousarray(np.moveaxis(extended, -1, axis))
    for stage in range(stage_kernel.stages):
        fill_periodic_axis(source, axis, h)
        target = buffers[stage % 2]
        hook(axis, stage, padded, source, target, faces, dt_dx)
        source = target
    return source[tuple(slice(h, h + n) for n in q.shape)]


CASES = [("kappa_rk3", "numpy"), ("kappa_rk3", "c"), ("lw_fct", "numpy"), ("lw_fct", "c"),
         ("centred_rk4", "c"), ("lw_vanleer", "numpy"), ("vanleer_clip", "c")]


@pytest.mark.parametrize("name, backend", CASES)
@pytest.mark.parametrize("shape", [(11, 7), (5, 6, 7)])
def test_the_hook_is_the_whole_domain_sweep(name, backend, shape):
    scheme = load_scheme(EXAMPLES / f"{name}.loom")
    compare_with_sweep(scheme, backend, shape, np.random.default_rng(sum(shape)))


@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_an_unseen_rk4_stencil(backend):
    rng = np.random.default_rng(5)
    scheme = scheme_from_text(random_linear_rk4(rng), "random.loom")
    compare_with_sweep(scheme, backend, (9, 8), rng)


def compare_with_sweep(scheme, backend, shape, rng):
    stage_kernel = load_stage_kernel(scheme, backend)
    sweep = KernelSweep(load_kernel(scheme, backend))
    q = rng.random(shape)
    for axis in range(len(shape)):
        faces_shape = list(shape)
        faces_shape[axis] += 1
        u = rng.uniform(-1.0, 1.0, faces_shape)
        moved = np.moveaxis(u, axis, 0)
        moved[-1] = moved[0]             # periodic: face n is face 0
        got = advance_block(stage_kernel, axis, q, u, 0.4)
        expected = sweep(axis, q, u, 0.4)
        assert np.array_equal(got, expected), (scheme.name, backend, axis)


def test_a_stale_ghost_between_stages_shows():
    """The same comparison must fail when the ghosts are not refreshed between stages
    (the decomposition bug the schedule guards against), so the test above can fail."""
    scheme = load_scheme(EXAMPLES / "kappa_rk3.loom")
    stage_kernel = load_stage_kernel(scheme, "c")
    rng = np.random.default_rng(2)
    q, u = rng.random((9, 8)), rng.uniform(0.2, 1.0, (9, 9))
    u[:, -1] = u[:, 0]
    h = stage_kernel.halo
    hook = AxisSweeps(stage_kernel)
    padded = np.pad(q, h)
    fill_periodic_axis(padded, 1, h)
    source, buffers = padded, [np.zeros_like(padded) for _ in range(2)]
    for stage in range(stage_kernel.stages):   # no fill after stage 0
        hook(1, stage, padded, source, buffers[stage % 2], u, 0.4)
        source = buffers[stage % 2]
    got = source[h:-h, h:-h]
    expected = KernelSweep(load_kernel(scheme, "c"))(1, q, u, 0.4)
    assert not np.array_equal(got, expected)
