"""The Fortran interface's sweep: Fortran order and natural indexing, against the numpy
back end's sweep of the same array held in C order (an independent implementation of the
same update). gfortran and gcc are required (.ci/install sets them up)."""
from __future__ import annotations

import numpy as np
from conftest import EXAMPLES
from sweep_hosts import (EDGES_PROGRAM, PLAIN_PROGRAM, build_fortran_host, expected_edges,
                         expected_plain, printed_sweeps, run)

from fluxloom.compiler import load_scheme
from fluxloom.runtime.kernel import load_kernel


def test_fortran_sweep_in_natural_indexing_matches_numpy(tmp_path):
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    host = build_fortran_host(tmp_path, scheme, PLAIN_PROGRAM)
    got_x, got_y = printed_sweeps(run(tmp_path, str(host)), 7, 5)
    want_x, want_y = expected_plain(load_kernel(scheme, "numpy"))
    np.testing.assert_allclose(got_x, want_x, rtol=1e-15, atol=1e-15)
    np.testing.assert_allclose(got_y, want_y, rtol=1e-15, atol=1e-15)


def test_fortran_sweep_with_edges_matches_numpy(tmp_path):
    # optional edge arguments of the Fortran wrapper: the low and high ends in natural
    # indexing are the C ends; an inflow slab in Fortran order is the C one reversed
    scheme = load_scheme(EXAMPLES / "vanleer_rk3.loom")
    host = build_fortran_host(tmp_path, scheme, EDGES_PROGRAM)
    got_x, got_y = printed_sweeps(run(tmp_path, str(host)), 9, 6)
    want_x, want_y, periodic_x = expected_edges(load_kernel(scheme, "numpy"))
    np.testing.assert_allclose(got_x, want_x, rtol=1e-13, atol=1e-14)
    np.testing.assert_allclose(got_y, want_y, rtol=1e-13, atol=1e-14)
    assert np.max(np.abs(periodic_x - got_x)) > 1e-6   # the edges matter
