"""Kernel.step refuses misuse with a clear KernelError (exit 2 on the command line), on
both back ends, and writes nothing when it refuses. The generated kernels themselves do
not check their data: NaN in gives NaN out, as README and the C header say.
"""
from __future__ import annotations

import numpy as np
import pytest
from conftest import EXAMPLES

from fluxloom.compiler import load_scheme
from fluxloom.compiler.emit import c_files
from fluxloom.runtime.kernel import KernelError, fill_periodic, load_kernel, numpy_module

N = 12


@pytest.fixture(scope="module", params=["numpy", "c"])
def kernel(request):
    return load_kernel(load_scheme(EXAMPLES / "lw_vanleer.loom"), request.param)


def arrays(kernel):
    q = np.sin(np.arange(N + 2 * kernel.halo, dtype=float))
    fill_periodic(q, kernel.halo)
    return q, np.full(N + 1, 0.5)


def refused(kernel, match, q, u, dt_dx, out=None):
    before = None if out is None else out.copy()
    with pytest.raises(KernelError, match=match) as caught:
        kernel.step(q, u, dt_dx, out=out)
    if out is not None and out.flags.writeable:
        assert np.array_equal(out, before, equal_nan=True), "a refused step wrote out"
    assert caught.value.render().startswith(f"fluxloom kernel: error: {kernel.name}: ")


def test_out_overlapping_the_velocities_is_refused(kernel):
    q, _ = arrays(kernel)
    shared = np.zeros(N + 2 * kernel.halo + N + 1)
    out, u = shared[:N + 2 * kernel.halo], shared[N + 2 * kernel.halo - 2:][:N + 1]
    u[:] = 0.5
    refused(kernel, "out must not overlap u_face", q, u, 0.8, out)


@pytest.mark.parametrize("dt_dx, match", [
    (-0.5, "cannot be negative"), (-np.inf, "finite"), (np.inf, "finite"), (np.nan, "finite"),
    ("fast", "real number"), (None, "real number"),
])
def test_bad_dt_dx_is_refused(kernel, dt_dx, match):
    q, u = arrays(kernel)
    refused(kernel, match, q, u, dt_dx, np.zeros_like(q))


def test_zero_dt_dx_is_a_step_that_changes_nothing(kernel):
    q, u = arrays(kernel)
    assert np.array_equal(kernel.step(q, u, 0.0)[kernel.halo:-kernel.halo],
                          q[kernel.halo:-kernel.halo])


def test_read_only_out_is_refused_not_a_raw_error(kernel):
    q, u = arrays(kernel)
    out = np.zeros_like(q)
    out.flags.writeable = False
    refused(kernel, "out is read-only", q, u, 0.8, out)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_velocities_are_refused(kernel, bad):
    q, u = arrays(kernel)
    u[7] = bad
    with pytest.raises(KernelError, match=r"u_face\[7\] is .*; face velocities must be finite"):
        kernel.step(q, u, 0.8, out=np.zeros_like(q))


def test_huge_finite_velocities_are_a_finding_not_an_error(kernel):
    q, u = arrays(kernel)
    with np.errstate(all="ignore"):  # numpy says the Courant number overflowed, as it should
        out = kernel.step(q, np.full(N + 1, 1e300), 1e300)
    assert out.shape == q.shape


def test_nan_in_the_data_gives_nan_out_in_the_generated_kernels(kernel):
    # The generated step itself checks nothing (README "Kernels and misuse"): a NaN cell
    # spreads to the cells whose update reads it, and to no others.
    q, u = arrays(kernel)
    q[kernel.halo + 5] = np.nan
    out = kernel.step(q, u, 0.8)
    interior = np.isnan(out[kernel.halo:kernel.halo + N])
    # lw_vanleer with u > 0 reads cells j-2 .. j+1 for cell j: cells 4..7 see cell 5
    # (upwind frame offsets -1..1 at each of the cell's two faces; common practice).
    assert list(np.flatnonzero(interior)) == [4, 5, 6, 7]


def test_the_c_header_says_nothing_is_checked():
    header = c_files(load_scheme(EXAMPLES / "upwind.loom"), "double")["upwind.h"]
    assert "NaN or infinity in q or\n * u_face gives NaN out" in header


def test_the_numpy_module_itself_does_not_check():
    module = numpy_module(load_scheme(EXAMPLES / "upwind.loom"))
    q = np.array([0.0, 1.0, np.nan, 3.0, 0.0])
    out = np.zeros_like(q)
    module.step(3, q, out, np.array([1.0, np.nan, 1.0, 1.0]), 0.5)
    assert np.isnan(out[1:4]).any()
