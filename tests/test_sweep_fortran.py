"""The Fortran interface's sweep: Fortran order and natural indexing, against the numpy
back end's sweep of the same array held in C order (an independent implementation of the
same update). gfortran and gcc are required (.ci/install sets them up)."""
from __future__ import annotations

import shutil
import subprocess

import numpy as np

from fluxloom.compiler import load_scheme
from fluxloom.compiler.emit.c import c_sources
from fluxloom.compiler.emit.fortran import fortran_source
from fluxloom.runtime.kernel import load_kernel

from conftest import EXAMPLES

PROGRAM = """
program sweep_check
  use lw_vanleer_mod
  implicit none
  integer, parameter :: nx = 7, ny = 5, h = lw_vanleer_halo
  real(lw_vanleer_real) :: q(1 - h:nx + h, 1 - h:ny + h), out(1 - h:nx + h, 1 - h:ny + h)
  real(lw_vanleer_real) :: ux(0:nx, 1:ny), uy(1:nx, 0:ny), dx(0:nx + 1), work(1)
  integer :: i, j, status
  do j = 1 - h, ny + h
    do i = 1 - h, nx + h
      q(i, j) = sin(0.7_lw_vanleer_real * i) + cos(1.3_lw_vanleer_real * j) + 0.01_lw_vanleer_real * i * j
    end do
  end do
  do j = 1, ny
    do i = 0, nx
      ux(i, j) = cos(0.9_lw_vanleer_real * i - 0.4_lw_vanleer_real * j)
    end do
  end do
  do j = 0, ny
    do i = 1, nx
      uy(i, j) = sin(0.5_lw_vanleer_real * i + 0.8_lw_vanleer_real * j)
    end do
  end do
  do i = 0, nx + 1
    dx(i) = 0.2_lw_vanleer_real + 0.01_lw_vanleer_real * i
  end do
  out = 0
  status = lw_vanleer_sweep([nx, ny], [h, h], 1, 1, q, out, ux, dx, work)
  print '(i0)', status
  print '(es25.17)', out(1:nx, 1:ny)
  out = 0
  status = lw_vanleer_sweep([nx, ny], [h, h], 2, 1, q, out, uy, [0.3_lw_vanleer_real], work)
  print '(i0)', status
  print '(es25.17)', out(1:nx, 1:ny)
end program sweep_check
"""


def test_fortran_sweep_in_natural_indexing_matches_numpy(tmp_path):
    for tool in ("gcc", "gfortran"):
        assert shutil.which(tool), f"{tool} is needed for the Fortran interface test"
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    for name, text in {**c_sources(scheme), **fortran_source(scheme)}.items():
        (tmp_path / name).write_text(text)
    (tmp_path / "main.f90").write_text(PROGRAM)
    run = lambda *cmd: subprocess.run(cmd, cwd=tmp_path, check=True, capture_output=True,
                                      text=True)
    run("gcc", "-std=c99", "-O2", "-c", "lw_vanleer.c")
    run("gfortran", "-O2", "lw_vanleer_mod.f90", "main.f90", "lw_vanleer.o", "-o", "check")
    lines = run(str(tmp_path / "check")).stdout.split()
    nx, ny, h = 7, 5, 2
    i = np.arange(1 - h, nx + h + 1)[None, :]
    j = np.arange(1 - h, ny + h + 1)[:, None]
    q = np.sin(0.7 * i) + np.cos(1.3 * j) + 0.01 * i * j            # q[j, i]: C order
    ux = np.cos(0.9 * np.arange(0, nx + 1)[None, :] - 0.4 * np.arange(1, ny + 1)[:, None])
    uy = np.sin(0.5 * np.arange(1, nx + 1)[None, :] + 0.8 * np.arange(0, ny + 1)[:, None])
    dx = 0.2 + 0.01 * np.arange(0, nx + 2)
    kernel = load_kernel(scheme, "numpy")
    want_x = kernel.sweep(q, ux, dx, 1)[h:h + ny, h:h + nx]
    want_y = kernel.sweep(q, uy, 0.3, 0)[h:h + ny, h:h + nx]
    assert lines[0] == "0" and lines[1 + nx * ny] == "0"
    got_x = np.array(lines[1:1 + nx * ny], float).reshape(ny, nx)
    got_y = np.array(lines[2 + nx * ny:], float).reshape(ny, nx)
    np.testing.assert_allclose(got_x, want_x, rtol=1e-15, atol=1e-15)
    np.testing.assert_allclose(got_y, want_y, rtol=1e-15, atol=1e-15)


EDGES_PROGRAM = """
program sweep_edges_check
  use iso_c_binding, only: c_size_t
  use vanleer_rk3_mod
  implicit none
  integer, parameter :: nx = 9, ny = 6, h = vanleer_rk3_halo
  real(vanleer_rk3_real) :: q(1 - h:nx + h, 1 - h:ny + h), out(1 - h:nx + h, 1 - h:ny + h)
  real(vanleer_rk3_real) :: ux(0:nx, 1:ny), uy(1:nx, 0:ny), dx(0:nx + 1)
  real(vanleer_rk3_real) :: sea(1:h, 1 - h:ny + h)
  real(vanleer_rk3_real), allocatable :: work(:)
  integer :: i, j, status, reals
  reals = 2 * int(vanleer_rk3_sweep_work(int(max(nx, ny), c_size_t)))
  allocate (work(reals))
  do j = 1 - h, ny + h
    do i = 1 - h, nx + h
      q(i, j) = sin(0.7_vanleer_rk3_real * i) + cos(1.3_vanleer_rk3_real * j)
    end do
    do i = 1, h
      sea(i, j) = 0.5_vanleer_rk3_real + 0.1_vanleer_rk3_real * i + 0.01_vanleer_rk3_real * j
    end do
  end do
  do j = 1, ny
    do i = 0, nx
      ux(i, j) = cos(0.9_vanleer_rk3_real * i - 0.4_vanleer_rk3_real * j)
    end do
  end do
  do j = 0, ny
    do i = 1, nx
      uy(i, j) = sin(0.5_vanleer_rk3_real * i + 0.8_vanleer_rk3_real * j)
    end do
  end do
  do i = 0, nx + 1
    dx(i) = 0.2_vanleer_rk3_real + 0.01_vanleer_rk3_real * i
  end do
  out = 0
  status = vanleer_rk3_sweep([nx, ny], [h, h], 1, 1, q, out, ux, dx, work, &
      low_edge=vanleer_rk3_edge_wall, high_edge=vanleer_rk3_edge_inflow, inflow_high=sea, &
      work_reals=reals)
  print '(i0)', status
  print '(es25.17)', out(1:nx, 1:ny)
  out = 0
  status = vanleer_rk3_sweep([nx, ny], [h, h], 2, 1, q, out, uy, [0.3_vanleer_rk3_real], work, &
      low_edge=vanleer_rk3_edge_outflow, high_edge=vanleer_rk3_edge_wall)
  print '(i0)', status
  print '(es25.17)', out(1:nx, 1:ny)
end program sweep_edges_check
"""


def test_fortran_sweep_with_edges_matches_numpy(tmp_path):
    # optional edge arguments of the Fortran wrapper: the low and high ends in natural
    # indexing are the C ends; an inflow slab in Fortran order is the C one reversed
    from fluxloom.runtime.boundaries import Edge

    scheme = load_scheme(EXAMPLES / "vanleer_rk3.loom")
    for name, text in {**c_sources(scheme), **fortran_source(scheme)}.items():
        (tmp_path / name).write_text(text)
    (tmp_path / "main.f90").write_text(EDGES_PROGRAM)
    run = lambda *cmd: subprocess.run(cmd, cwd=tmp_path, check=True, capture_output=True,
                                      text=True)
    run("gcc", "-std=c99", "-O2", "-c", "vanleer_rk3.c")
    run("gfortran", "-O2", "vanleer_rk3_mod.f90", "main.f90", "vanleer_rk3.o", "-o", "check")
    lines = run(str(tmp_path / "check")).stdout.split()
    nx, ny, h = 9, 6, load_kernel(scheme, "numpy").halo
    i = np.arange(1 - h, nx + h + 1)[None, :]
    j = np.arange(1 - h, ny + h + 1)[:, None]
    q = np.sin(0.7 * i) + np.cos(1.3 * j)
    sea = 0.5 + 0.1 * np.arange(1, h + 1)[None, :] + 0.01 * j                 # (y, ghost)
    ux = np.cos(0.9 * np.arange(0, nx + 1)[None, :] - 0.4 * np.arange(1, ny + 1)[:, None])
    uy = np.sin(0.5 * np.arange(1, nx + 1)[None, :] + 0.8 * np.arange(0, ny + 1)[:, None])
    dx = 0.2 + 0.01 * np.arange(0, nx + 2)
    kernel = load_kernel(scheme, "numpy")
    want_x = kernel.sweep(q, ux, dx, 1, edges=(Edge("wall"), Edge("inflow", sea)))
    want_y = kernel.sweep(q, uy, 0.3, 0, edges=(Edge("outflow"), Edge("wall")))
    assert lines[0] == "0" and lines[1 + nx * ny] == "0"
    got_x = np.array(lines[1:1 + nx * ny], float).reshape(ny, nx)
    got_y = np.array(lines[2 + nx * ny:], float).reshape(ny, nx)
    np.testing.assert_allclose(got_x, want_x[h:h + ny, h:h + nx], rtol=1e-13, atol=1e-14)
    np.testing.assert_allclose(got_y, want_y[h:h + ny, h:h + nx], rtol=1e-13, atol=1e-14)
    # the edges matter: the periodic sweep differs
    plain = kernel.sweep(q, ux, dx, 1)[h:h + ny, h:h + nx]
    assert np.max(np.abs(plain - got_x)) > 1e-6
