"""Generated sweeps (NAME_sweep in C, sweep in numpy, Kernel.sweep): every line of a rank 1-3
array along one axis in one call, per-cell dt/dx, thickness weighting, several tracers.

Independent references: the reference line sweep (runtime/sweeps.LineSweep: the 1-D
kernel's step on each line copied out, the path the sweeps replace), an own numpy
stepper of the flux-form update written here from the spec's face formula, exact
telescoping sums (conservation), and the continuity equation (a constant tracer).
"""
from __future__ import annotations

import numpy as np
import pytest

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.emit.sweep import SWEEP_PIECE, SWEEP_RUN, SWEEP_SEGMENT
from fluxloom.runtime.array_sweep import fill_periodic_axis
from fluxloom.runtime.kernel import KernelError, load_kernel
from fluxloom.runtime.sweeps import KernelSweep, LineSweep

from conftest import EXAMPLE_FILES, EXAMPLES

SHAPES = ((11,), (7, 9), (4, 5, 6))

# Specs nobody has seen: a random linear stencil and a limiter outside every textbook.
RANDOM_LINEAR = """
scheme random_linear {
  time euler
  flux = u * (q[0] + 0.3125 * (1 - c) * (q[1] - q[0]) - 0.0625 * (q[0] - q[-1]))
}
"""
ODD_LIMITER = """
scheme odd_limiter {
  time euler
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter wobble(r) = max(0, min(1.5 * r, (1 + 3 * r) / (3 + abs(r)), 1.25))
  flux = u * (q[0] + (1 - c) / 2 * wobble(r) * (q[1] - q[0]))
}
"""


def _padded(kernel, q, axis):
    h = kernel.halo
    pad = np.pad(q, [(h, h)] * q.ndim)
    return fill_periodic_axis(pad, axis, h)


def _interior(kernel, a, shape):
    h = kernel.halo
    return a[(Ellipsis,) + tuple(slice(h, h + n) for n in shape)]


def _faces(rng, shape, axis):
    faces = list(shape)
    faces[axis] += 1
    return rng.standard_normal(faces)     # both signs: every upwind frame is taken


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_sweep_equals_the_reference_line_sweep_bit_for_bit_on_every_example(backend):
    rng = np.random.default_rng(11)
    for path in EXAMPLE_FILES:
        kernel = load_kernel(load_scheme(path), backend)
        reference = LineSweep(kernel)
        for shape in SHAPES:
            q = rng.random(shape)
            for axis in range(len(shape)):
                u = _faces(rng, shape, axis)
                got = kernel.sweep(_padded(kernel, q, axis), u, 0.3, axis)
                assert np.array_equal(_interior(kernel, got, shape),
                                      reference(axis, q, u, 0.3)), (path.stem, shape, axis)


def test_sweep_writes_interior_lines_only():
    kernel = load_kernel(load_scheme(EXAMPLES / "lw_vanleer.loom"), "c")
    q = np.random.default_rng(1).random((9, 12))
    out = np.full_like(q, -7.0)
    kernel.sweep(q, np.ones((7, 9)), 0.4, 1, halo=(1, 2), out=out)
    assert np.all(out[:1] == -7) and np.all(out[-1:] == -7)
    assert np.all(out[:, :2] == -7) and np.all(out[:, -2:] == -7)
    assert not np.any(out[1:-1, 2:-2] == -7)


def _own_flux_form(q, u, d, h_old=None, h_new=None, face=None):
    """An own stepper along axis 0 of lines with 2 ghost cells: c from the upwind cell,
    q - d (F+ - F-) or (h_old q - d (F+ - F-)) / h_new."""
    n = q.shape[0] - 4
    w = d if h_old is None else d / h_old[1:n + 3]
    c = np.abs(u) * np.where(u >= 0, w[:-1], w[1:])
    left = q[1:n + 2]
    fwd = np.stack([q[0:n + 1], left, q[2:n + 3]])      # q[-1], q[0], q[1] if u >= 0
    bwd = np.stack([q[3:n + 4], q[2:n + 3], left])     # mirrored if u < 0
    frame = np.where(u >= 0, fwd, bwd)
    flux = u * face(frame[0], frame[1], frame[2], c)
    rate = d[1:-1] * (flux[1:] - flux[:-1])
    if h_old is None:
        return q[2:n + 2] - rate
    return (h_old[2:n + 2] * q[2:n + 2] - rate) / h_new[2:n + 2]


def _random_linear_face(qm, q0, q1, c):
    return q0 + 0.3125 * (1 - c) * (q1 - q0) - 0.0625 * (q0 - qm)


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_per_cell_widths_and_thickness_against_an_own_stepper(backend):
    kernel = load_kernel(scheme_from_text(RANDOM_LINEAR), backend)
    rng = np.random.default_rng(5)
    n, lines = 40, 3
    q = rng.random((lines, n + 4))
    u = rng.standard_normal((lines, n + 1))
    d = rng.uniform(0.05, 0.4, n + 2)
    h_old, h_new = rng.uniform(1, 2, (2, lines, n + 4))
    for kw in ({}, {"h_old": h_old, "h_new": h_new}):
        got = kernel.sweep(q, u, d, 1, halo=(0, 2), **kw)[:, 2:n + 2]
        want = np.stack([_own_flux_form(q[i], u[i], d, *(a[i] for a in kw.values()),
                                        face=_random_linear_face) for i in range(lines)])
        np.testing.assert_allclose(got, want, rtol=1e-13, atol=1e-14)


@pytest.mark.parametrize("stem", ["lw_vanleer", "quickest", "lw_clip"])
def test_c_and_numpy_sweeps_agree_with_widths_thickness_and_tracers(stem):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    c_kernel, np_kernel = load_kernel(scheme, "c"), load_kernel(scheme, "numpy")
    rng = np.random.default_rng(3)
    h = c_kernel.halo
    for shape in ((300,), (6, 300), (3, 4, 270)):
        for axis in range(len(shape)):
            q = rng.random((3,) + tuple(s + 2 * h for s in shape))
            u = _faces(rng, shape, axis)
            d = rng.uniform(0.1, 0.4, shape[axis] + 2)
            thick = rng.uniform(1, 2, (2,) + q.shape[1:])
            for kw in ({}, {"h_old": thick[0], "h_new": thick[1]}):
                a = c_kernel.sweep(q, u, d, axis, **kw)
                b = np_kernel.sweep(q, u, d, axis, **kw)
                np.testing.assert_allclose(a, b, rtol=1e-14, atol=1e-15)


@pytest.mark.parametrize("backend", ["c", "numpy"])
@pytest.mark.parametrize("stem", ["lw_vanleer", "vanleer_rk3", "lw_fct"])
def test_k_tracers_in_one_call_equal_k_calls_bit_for_bit(backend, stem):
    kernel = load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), backend)
    rng = np.random.default_rng(8)
    h, shape, tracers = kernel.halo, (20, 300), 19   # more tracers than one group holds
    q = rng.random((tracers,) + tuple(s + 2 * h for s in shape))
    for axis in (0, 1):
        u = _faces(rng, shape, axis)
        d = rng.uniform(0.1, 0.4, shape[axis] + 2) if kernel.sweep_widths else 0.3
        together = kernel.sweep(q, u, d, axis)
        apart = np.stack([kernel.sweep(np.ascontiguousarray(q[t]), u, d, axis)
                          for t in range(tracers)])
        assert np.array_equal(together, apart)


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_thickness_form_conserves_mass_and_keeps_a_constant_constant(backend):
    # Continuity h_new = h_old - dt/dx (U+ - U-) with the tracer's own mass fluxes U: the
    # flux-form update then conserves sum h dx q (the fluxes telescope) and a constant
    # tracer stays constant (a consistent face flux of a constant C is U C) -- common
    # practice, no source.
    kernel = load_kernel(scheme_from_text(ODD_LIMITER), backend)
    rng = np.random.default_rng(21)
    n = 64
    widths = rng.uniform(0.5, 1.5, n)
    dt = 0.2
    d = dt / np.concatenate((widths[-1:], widths, widths[:1]))    # periodic, cells -1 .. n
    mass_flux = rng.standard_normal((5, n + 1)) * 0.5
    mass_flux[:, -1] = mass_flux[:, 0]
    h_old = rng.uniform(1.0, 2.0, (5, n + 4))
    h_new = h_old.copy()
    h_new[:, 2:n + 2] = h_old[:, 2:n + 2] - d[1:-1] * (mass_flux[:, 1:] - mass_flux[:, :-1])
    assert h_new.min() > 0
    for array in (h_old, h_new):
        fill_periodic_axis(array, 1, 2)
    q = rng.random((5, n + 4))
    fill_periodic_axis(q, 1, 2)
    out = kernel.sweep(q, mass_flux, d, 1, halo=(0, 2), h_old=h_old, h_new=h_new)
    before = (h_old[:, 2:n + 2] * widths * q[:, 2:n + 2]).sum(axis=1)
    after = (h_new[:, 2:n + 2] * widths * out[:, 2:n + 2]).sum(axis=1)
    np.testing.assert_allclose(after, before, rtol=1e-13)
    constant = np.full_like(q, 0.7)
    kept = kernel.sweep(constant, mass_flux, d, 1, halo=(0, 2), h_old=h_old, h_new=h_new)
    np.testing.assert_allclose(kept[:, 2:n + 2], 0.7, rtol=1e-13)


def test_sweep_refuses_what_it_cannot_do():
    rk = load_kernel(load_scheme(EXAMPLES / "vanleer_rk3.loom"), "c")
    fct = load_kernel(load_scheme(EXAMPLES / "lw_fct.loom"), "c")
    euler = load_kernel(load_scheme(EXAMPLES / "lw_vanleer.loom"), "c")
    q = np.zeros((8, 12))
    u = np.ones((8, 9))
    rk_q = np.zeros((8, 8 + 2 * rk.halo))
    fct_q = np.zeros((8, 8 + 2 * fct.halo))
    with pytest.raises(KernelError, match="flux correction"):
        fct.sweep(fct_q, np.ones((8, 13)), 0.1, 1, halo=(0, fct.halo), h_old=np.ones_like(fct_q),
                  h_new=np.ones_like(fct_q))
    with pytest.raises(KernelError, match="both h_old and h_new"):
        rk.sweep(rk_q, u, 0.1, 1, halo=(0, rk.halo), h_old=np.ones_like(rk_q))
    with pytest.raises(KernelError, match="flux correction"):
        fct.sweep(np.zeros((8, 8 + 2 * fct.halo)), u, np.full(10, 0.1), 1,
                  halo=(0, fct.halo))
    with pytest.raises(KernelError, match="ghost cells"):
        euler.sweep(q, u, 0.1, 1, halo=(0, 0))
    with pytest.raises(KernelError, match="n \\+ 1 faces"):
        euler.sweep(q, np.ones((8, 7)), 0.1, 1, halo=(0, 2))
    with pytest.raises(KernelError, match="interior cells"):
        euler.sweep(q, np.ones((7, 9)), 0.1, 1, halo=(0, 2))
    with pytest.raises(KernelError, match="both h_old and h_new"):
        euler.sweep(q, u, 0.1, 1, halo=(0, 2), h_old=np.ones_like(q))
    with pytest.raises(KernelError, match="n \\+ 2"):
        euler.sweep(q, u, np.full(5, 0.1), 1, halo=(0, 2))
    with pytest.raises(KernelError, match="overlap"):
        euler.sweep(q, u, 0.1, 1, halo=(0, 2), out=q)


def test_kernel_sweep_is_one_call_per_sweep():
    kernel = load_kernel(load_scheme(EXAMPLES / "upwind.loom"), "c")
    sweep = KernelSweep(kernel)
    q = np.random.default_rng(2).random((16, 16))
    faces = np.ones((16, 17))
    assert np.array_equal(sweep(1, q, faces, 0.5), LineSweep(kernel)(1, q, faces, 0.5))
    assert sweep.calls == 1


def test_long_lines_across_segments_and_blocks():
    # lines longer than one segment of shared velocity parts and not a multiple of the
    # block: the C sweep against the reference line sweep bit for bit, against numpy
    # with widths, thickness and tracers to round-off
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    c_kernel, np_kernel = load_kernel(scheme, "c"), load_kernel(scheme, "numpy")
    rng = np.random.default_rng(17)
    cells = SWEEP_SEGMENT + 2 * 128 + 37
    shape = (2, cells)
    q = rng.random(shape)
    u = _faces(rng, shape, 1)
    got = c_kernel.sweep(_padded(c_kernel, q, 1), u, 0.35, 1)
    assert np.array_equal(_interior(c_kernel, got, shape), LineSweep(c_kernel)(1, q, u, 0.35))
    tracers = rng.random((3, 3, cells + 4))
    d = rng.uniform(0.1, 0.4, cells + 2)
    thick = rng.uniform(1, 2, (2, 3, cells + 4))
    u = rng.standard_normal((3, cells + 1))
    for kw in ({}, {"h_old": thick[0], "h_new": thick[1]}):
        a = c_kernel.sweep(tracers, u, d, 1, halo=(0, 2), **kw)
        b = np_kernel.sweep(tracers, u, d, 1, halo=(0, 2), **kw)
        np.testing.assert_allclose(a, b, rtol=1e-14, atol=1e-15)
        apart = np.stack([c_kernel.sweep(np.ascontiguousarray(t), u, d, 1, halo=(0, 2), **kw)
                          for t in tracers])
        assert np.array_equal(a, apart)


def test_wide_rows_across_runs_and_pieces():
    # a strided sweep over rows wider than one run of shared Courant numbers and not a
    # multiple of the piece: bit for bit against the reference line sweep (one line at
    # a time), and tracers and thickness against numpy and against separate calls
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    c_kernel, np_kernel = load_kernel(scheme, "c"), load_kernel(scheme, "numpy")
    rng = np.random.default_rng(23)
    width = SWEEP_RUN + SWEEP_PIECE + 11
    shape = (9, width)
    q = rng.random(shape)
    u = _faces(rng, shape, 0)
    got = c_kernel.sweep(_padded(c_kernel, q, 0), u, 0.35, 0)
    assert np.array_equal(_interior(c_kernel, got, shape), LineSweep(c_kernel)(0, q, u, 0.35))
    tracers = rng.random((2, 13, width))
    d = rng.uniform(0.1, 0.4, 11)
    thick = rng.uniform(1, 2, (2, 13, width))
    for kw in ({}, {"h_old": thick[0], "h_new": thick[1]}):
        a = c_kernel.sweep(tracers, u, d, 0, halo=(2, 0), **kw)
        b = np_kernel.sweep(tracers, u, d, 0, halo=(2, 0), **kw)
        np.testing.assert_allclose(a, b, rtol=1e-14, atol=1e-15)
        apart = np.stack([c_kernel.sweep(np.ascontiguousarray(t), u, d, 0, halo=(2, 0), **kw)
                          for t in tracers])
        assert np.array_equal(a, apart)


RANDOM_LINEAR_RK3 = """
scheme random_linear_rk3 {
  time ssp_rk3
  flux = u * (q[0] + 0.4375 * (q[1] - q[0]) - 0.1875 * (q[0] - q[-1]))
}
"""


def _own_ssp_rk3(q, u, d):
    """Shu and Osher's SSP-RK3 (Shu and Osher 1988, J. Comput. Phys. 77:439, eq. 2.18;
    [mem]) of dq/dt = -(F(j+1/2) - F(j-1/2)) / dx_j on a periodic line, an own stepper."""
    def rate(v):
        padded = np.concatenate((v[-2:], v, v[:2]))
        left, right = padded[1:-2], padded[2:-1]
        behind, ahead = padded[0:-3], padded[3:]
        up = np.where(u >= 0, left, right)
        down = np.where(u >= 0, right, left)
        back = np.where(u >= 0, behind, ahead)
        flux = u * (up + 0.4375 * (down - up) - 0.1875 * (up - back))
        return -d[1:-1] * (flux[1:] - flux[:-1])
    q1 = q + rate(q)
    q2 = 0.75 * q + 0.25 * (q1 + rate(q1))
    return q / 3 + 2 / 3 * (q2 + rate(q2))


@pytest.mark.parametrize("backend", ["c", "numpy"])
def test_multi_stage_sweep_with_per_cell_widths_against_an_own_rk3(backend):
    kernel = load_kernel(scheme_from_text(RANDOM_LINEAR_RK3), backend)
    rng = np.random.default_rng(31)
    n = 50
    q = rng.random(n)
    u = rng.standard_normal(n + 1)
    u[-1] = u[0]
    widths = rng.uniform(0.5, 1.5, n)
    d = 0.2 / np.concatenate((widths[-1:], widths, widths[:1]))
    padded = np.zeros((2, n + 4))
    padded[:, 2:n + 2] = q
    fill_periodic_axis(padded, 1, 2)
    got = kernel.sweep(padded, np.stack((u, u)), d, 1, halo=(0, 2))[:, 2:n + 2]
    np.testing.assert_allclose(got[0], _own_ssp_rk3(q, u, d), rtol=1e-13, atol=1e-14)
    assert np.array_equal(got[0], got[1])


@pytest.mark.parametrize("stem", ["vanleer_rk3", "kappa_ws3", "centred4_ssp10",
                                  "clamped_centred_rk4", "weno5_rk3"])
def test_multi_stage_per_cell_widths_c_numpy_and_the_uniform_path(stem):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    c_kernel, np_kernel = load_kernel(scheme, "c"), load_kernel(scheme, "numpy")
    rng = np.random.default_rng(6)
    h, shape = c_kernel.halo, (5, 40)
    q = rng.random((2,) + tuple(s + 2 * h for s in shape))
    for axis in (0, 1):
        u = _faces(rng, shape, axis) * 0.5
        d = rng.uniform(0.2, 0.6, shape[axis] + 2)
        a = c_kernel.sweep(q, u, d, axis)
        np.testing.assert_allclose(a, np_kernel.sweep(q, u, d, axis), rtol=1e-13, atol=1e-14)
        same = np.full(shape[axis] + 2, 0.4)
        for kernel in (c_kernel, np_kernel):    # equal widths: the uniform path's bits
            assert np.array_equal(kernel.sweep(q, u, same, axis), kernel.sweep(q, u, 0.4, axis))
