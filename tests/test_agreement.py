"""Every example, both back ends, both precisions: the kernels agree with each other,
with a slow face-by-face reference evaluation of the IR, and with their own mirror image.

Random data and random signed face velocities (with exact zeros) throughout. The
reference (runtime/reference.py) shares no code with either emitter: it evaluates the
IR with sympy.lambdify one face at a time and writes the time methods and Zalesak's
correction out from their published descriptions.
"""
from __future__ import annotations

import zlib

import numpy as np
import pytest
from conftest import EXAMPLES
from hypothesis import given, settings
from hypothesis import strategies as st

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.runtime.kernel import fill_periodic, load_kernel, run_periodic
from fluxloom.runtime.reference import reference_run

# Relative agreement between back ends (issue 4), as max |a - b| / max |b|, for one
# step; runs of several steps allow round-off to accumulate by up to 10 times this.
TOLERANCE = {"double": 1e-13, "float": 1e-5}
# Against the double-precision reference a float kernel carries its own round-off.
REFERENCE_TOLERANCE = {"double": 1e-12, "float": 2e-5}
PRECISIONS = ("double", "float")


def relative(a, b) -> float:
    return float(np.max(np.abs(a.astype(np.float64) - b)) / max(np.max(np.abs(b)), 1e-300))


def random_velocities(rng, count, dtype):
    u = rng.uniform(-1.0, 1.0, count)
    u[rng.random(count) < 0.2] = 0.0
    return u.astype(dtype)


DT_DX = 0.45
"""|c| <= 0.45 with |u| <= 1: inside every example's stable range (FTCS has none,
but a few steps on bounded data stay finite)."""


@pytest.fixture(params=PRECISIONS)
def precision(request):
    return request.param


def test_numpy_and_c_agree_on_one_step(example_path, precision):
    """One step from random halos (not periodic), random signed velocities with zeros."""
    scheme = load_scheme(example_path)
    numpy_kernel = load_kernel(scheme, "numpy", precision)
    c_kernel = load_kernel(scheme, "c", precision)
    assert (numpy_kernel.halo, numpy_kernel.face_halo, numpy_kernel.stages) == \
        (c_kernel.halo, c_kernel.face_halo, c_kernel.stages)
    rng = np.random.default_rng(zlib.crc32(scheme.name.encode()))
    for n in (5, 33, 130):
        q_in = rng.uniform(-1.0, 2.0, n + 2 * c_kernel.halo).astype(numpy_kernel.dtype)
        u = random_velocities(rng, n + 1 + 2 * c_kernel.face_halo, numpy_kernel.dtype)
        dt_dx = DT_DX
        a = numpy_kernel.step(q_in, u, dt_dx)
        b = c_kernel.step(q_in, u, dt_dx)
        h = c_kernel.halo
        assert relative(a[h:-h], b[h:-h].astype(np.float64)) <= TOLERANCE[precision], n


def test_numpy_and_c_agree_over_many_steps(example_path, precision):
    scheme = load_scheme(example_path)
    rng = np.random.default_rng(17)
    n = 64
    q0 = rng.random(n)
    u = random_velocities(rng, n + 1, np.float64)
    u[-1] = u[0]
    runs = [run_periodic(load_kernel(scheme, backend, precision), q0, u, DT_DX, 6)
            for backend in ("numpy", "c")]
    assert relative(runs[0], runs[1].astype(np.float64)) <= 10 * TOLERANCE[precision]


@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_kernels_agree_with_the_reference(example_path, precision, backend):
    scheme = load_scheme(example_path)
    rng = np.random.default_rng(23)
    n, steps = 24, 3
    q0 = rng.random(n)
    u = random_velocities(rng, n + 1, np.float64)
    u[-1] = u[0]
    expected = reference_run(scheme, q0, u, DT_DX, steps)
    got = run_periodic(load_kernel(scheme, backend, precision), q0, u, DT_DX, steps)
    assert relative(got, expected) <= REFERENCE_TOLERANCE[precision]


@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_mirrored_profile_with_negated_velocity_gives_the_mirrored_result(example_path, backend):
    """The upwind frame makes one expression serve both signs of u, so reflecting the
    domain and negating the velocity must reflect the result (common practice, no source)."""
    scheme = load_scheme(example_path)
    kernel = load_kernel(scheme, backend, "double")
    rng = np.random.default_rng(29)
    n = 50
    q0 = rng.random(n)
    u = random_velocities(rng, n + 1, np.float64)
    u[-1] = u[0]
    forward = run_periodic(kernel, q0, u, DT_DX, 4)
    # Cell j -> n - 1 - j; face i (left of cell i) -> face n - i, with velocity negated.
    mirrored = run_periodic(kernel, q0[::-1].copy(), -u[::-1].copy(), DT_DX, 4)
    assert relative(mirrored[::-1], forward) <= 1e-13


@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_one_step_of_the_mirror_with_random_halos(example_path, backend):
    scheme = load_scheme(example_path)
    kernel = load_kernel(scheme, backend, "double")
    rng = np.random.default_rng(31)
    n = 40
    q_in = rng.random(n + 2 * kernel.halo)
    u = random_velocities(rng, n + 1 + 2 * kernel.face_halo, np.float64)
    h = kernel.halo
    a = kernel.step(q_in, u, DT_DX)[h:-h]
    b = kernel.step(q_in[::-1].copy(), -u[::-1].copy(), DT_DX)[h:-h]
    assert relative(b[::-1], a) <= 1e-13


def test_reference_keeps_a_constant_state(example_path):
    """With constant u and constant q every face flux is the same, so nothing changes
    (common practice, no source): a sanity check of the reference's indexing."""
    scheme = load_scheme(example_path)
    q0 = np.full(12, 0.3)
    got = reference_run(scheme, q0, np.full(13, -0.6), 0.5, 2)
    np.testing.assert_allclose(got, q0, rtol=1e-14)


def test_periodic_step_uses_the_halos_it_is_given(precision):
    """A kernel reads exactly HALO ghost cells: filling them periodically by hand or
    with fill_periodic gives the same step (the C and numpy kernels alike)."""
    scheme = load_scheme(EXAMPLES / "lw_fct.loom")
    for backend in ("numpy", "c"):
        kernel = load_kernel(scheme, backend, precision)
        n, h = 30, kernel.halo
        interior = np.random.default_rng(3).random(n).astype(kernel.dtype)
        by_hand = np.pad(interior, h, mode="wrap")
        filled = fill_periodic(np.concatenate([np.zeros(h), interior, np.zeros(h)]).astype(kernel.dtype), h)
        u = np.full(n + 1, 0.5, kernel.dtype)
        np.testing.assert_array_equal(kernel.step(by_hand, u, 0.4), kernel.step(filled, u, 0.4))


@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_tiny_periodic_domains(example_path, backend):
    """Fewer cells than ghost cells: the periodic halo wraps around more than once."""
    scheme = load_scheme(example_path)
    kernel = load_kernel(scheme, backend, "double")
    rng = np.random.default_rng(37)
    for n in (1, 2, 3):
        q0 = rng.random(n)
        u = random_velocities(rng, n + 1, np.float64)
        u[-1] = u[0]
        expected = reference_run(scheme, q0, u, DT_DX, 2)
        assert relative(run_periodic(kernel, q0, u, DT_DX, 2), expected) <= 1e-12, n


UNUSUAL_SPECS = {
    # powers, sign, sqrt, a three-way min inside a limiter, a param, c in a denominator
    "mixed_functions": """scheme mixed_functions {
  param w = 0.25
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter lim(r) = max(0, min(2 * r, (1 + r) / 2, 2, r^2))
  flux = u * (q[0] + w * sign(q[1] - q[0]) * sqrt(abs(q[1] - q[0])) * lim(r) * (1 - c)^2 / (1 + c^3))
}""",
    # a wide stencil (q[-2] .. q[2]), Runge-Kutta, a clip with a negative bound
    "wide_rk2_clip": """scheme wide_rk2_clip {
  time ssp_rk2
  let s = min(q[1] - q[0], q[0] - q[-1], q[-1] - q[-2])
  flux = u * (q[0] + s / (2 + abs(s)) + q[2] / 10)
  clip -1, 2
}""",
    # FCT whose low-order flux divides by c (Lax-Friedrichs)
    "fct_from_lax_friedrichs": """scheme fct_from_lax_friedrichs {
  low_flux = u * ((q[0] + q[1]) / 2 - (q[1] - q[0]) / (2 * c))
  flux = u * (q[0] + max(0, min(1, ratio(q[0] - q[-1], q[1] - q[0]))) * (1 - c) / 2 * (q[1] - q[0]))
  correct fct
}""",
}


@pytest.mark.parametrize("spec", sorted(UNUSUAL_SPECS))
def test_constructs_beyond_the_examples_agree(spec, precision):
    scheme = scheme_from_text(UNUSUAL_SPECS[spec], f"{spec}.loom")
    rng = np.random.default_rng(41)
    n = 30
    q0 = rng.random(n)
    u = random_velocities(rng, n + 1, np.float64)
    u[-1] = u[0]
    expected = reference_run(scheme, q0, u, DT_DX, 3)
    runs = {backend: run_periodic(load_kernel(scheme, backend, precision), q0, u, DT_DX, 3)
            for backend in ("numpy", "c")}
    for got in runs.values():
        assert relative(got, expected) <= REFERENCE_TOLERANCE[precision]
    assert relative(runs["numpy"], runs["c"].astype(np.float64)) <= 10 * TOLERANCE[precision]


_finite = st.floats(-1e3, 1e3, allow_nan=False, allow_subnormal=False)


@settings(max_examples=30, deadline=None)
@given(name=st.sampled_from(["lw_vanleer", "lw_fct", "kappa_rk3", "lax_friedrichs", "lw_superbee"]),
       data=st.data())
def test_kernels_match_the_reference_on_arbitrary_data(name, data):
    """Any sizes, values (plateaus included, where ratio's denominator is 0) and
    signed velocities, zeros included: both kernels compute what the reference does."""
    scheme = load_scheme(EXAMPLES / f"{name}.loom")
    n = data.draw(st.integers(1, 12), label="n")
    q0 = np.array(data.draw(st.lists(st.sampled_from([0.0, 1.0, -2.5]) | _finite,
                                     min_size=n, max_size=n), label="q"))
    # |u| >= 1e-3 or exactly 0: a Lax-Friedrichs flux holds 1/c, which overflows for a
    # subnormal Courant number in every implementation of u * g, the reference's too.
    speed = st.floats(1e-3, 1.0)
    velocity = st.sampled_from([0.0, 1.0, -1.0]) | speed | speed.map(lambda v: -v)
    u = np.array(data.draw(st.lists(velocity, min_size=n + 1, max_size=n + 1), label="u"))
    u[-1] = u[0]
    dt_dx = data.draw(st.floats(0.05, 0.9), label="dt_dx")
    expected = reference_run(scheme, q0, u, dt_dx, 2)
    scale = max(np.max(np.abs(expected)), np.max(np.abs(q0)), 1e-300)
    for backend in ("numpy", "c"):
        got = run_periodic(load_kernel(scheme, backend), q0, u, dt_dx, 2)
        assert np.max(np.abs(got - expected)) <= 1e-12 * scale, backend
