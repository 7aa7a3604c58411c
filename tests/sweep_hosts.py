"""Host programs the sweep and boundary tests share: Fortran hosts built against the
Fortran interface (with the C kernel) or against the native Fortran module, the two
sweep hosts written for the interface and what numpy's sweep says they print, and
Python hosts run in a subprocess with a given OpenMP thread count.

gcc and gfortran are required (the project's set-up installs them: .ci/install); a
missing one is a failure, not a skip.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np

from fluxloom.compiler.emit import c_files
from fluxloom.compiler.emit.targets import target

STRICT_FORTRAN = ("-std=f2008", "-Wall", "-Wextra", "-Werror")


def tool(name: str) -> str:
    found = shutil.which(name)
    assert found, f"{name} is required (the project's set-up installs it: .ci/install)"
    return found


def run(folder: Path, *command: str) -> str:
    """stdout of a command run in `folder` (its stderr in the failure's message)."""
    done = subprocess.run(command, cwd=folder, capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr
    return done.stdout


def native_program(program: str, name: str) -> str:
    """A host written for the interface module NAME_mod with its `use` line alone changed
    to the native module NAME_kernel."""
    assert f"use {name}_mod\n" in program
    return program.replace(f"use {name}_mod\n", f"use {name}_kernel\n")


def build_fortran_host(folder: Path, scheme, program: str, native: bool = False,
                       precision: str = "double", flags=("-O2",)) -> Path:
    """The host `program` compiled with the scheme's Fortran kernel: the interface module
    and the C kernel (gcc, then gfortran), or the native module alone (gfortran)."""
    name = scheme.name
    if native:
        files = target("fortran").files(scheme, precision)
        program = native_program(program, name)
    else:
        files = c_files(scheme, precision)
    for file, text in files.items():
        (folder / file).write_text(text)
    (folder / "host.f90").write_text(program)
    objects = []
    if not native:
        run(folder, tool("gcc"), "-std=c99", "-O2", "-c", f"{name}.c")
        objects.append(f"{name}.o")
    module = f"{name}_kernel.f90" if native else f"{name}_mod.f90"
    run(folder, tool("gfortran"), *flags, module, "host.f90", *objects, "-o", "host")
    return folder / "host"


def python_host(script: str, args, threads: int) -> list[str]:
    """The words `python -c script *args` prints with OMP_NUM_THREADS=threads."""
    env = dict(os.environ, OMP_NUM_THREADS=str(threads))
    done = subprocess.run([sys.executable, "-c", script, *map(str, args)], env=env,
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    return done.stdout.split()


# ---- two sweeps of a 2-D array by a host written for the interface ------------------

PLAIN_PROGRAM = """
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
"""lw_vanleer's sweep along x (per-cell dt/dx) and along y (one dt/dx), periodic ends."""

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
"""vanleer_rk3's sweeps with edges (wall and inflow along x, per-cell dt/dx, work for
two threads; outflow and wall along y): every stage's ghost cells by the edges."""


def _grid(nx: int, ny: int, h: int):
    """The hosts' arrays in C order (q[j, i]), natural indices i = 1 - h .. nx + h."""
    i = np.arange(1 - h, nx + h + 1)[None, :]
    j = np.arange(1 - h, ny + h + 1)[:, None]
    ux = np.cos(0.9 * np.arange(0, nx + 1)[None, :] - 0.4 * np.arange(1, ny + 1)[:, None])
    uy = np.sin(0.5 * np.arange(1, nx + 1)[None, :] + 0.8 * np.arange(0, ny + 1)[:, None])
    dx = 0.2 + 0.01 * np.arange(0, nx + 2)
    return i, j, ux, uy, dx


def expected_plain(kernel) -> tuple[np.ndarray, np.ndarray]:
    """What PLAIN_PROGRAM prints, by `kernel`'s sweep (numpy's: an implementation that
    shares no code with the compiled ones): the interiors swept along x and along y."""
    nx, ny, h = 7, 5, kernel.halo
    i, j, ux, uy, dx = _grid(nx, ny, h)
    q = np.sin(0.7 * i) + np.cos(1.3 * j) + 0.01 * i * j
    inside = (slice(h, h + ny), slice(h, h + nx))
    return kernel.sweep(q, ux, dx, 1)[inside], kernel.sweep(q, uy, 0.3, 0)[inside]


def expected_edges(kernel) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """What EDGES_PROGRAM prints, by `kernel`'s sweep with the same edges; third, the
    sweep along x with periodic ends instead (to show that the edges matter)."""
    from fluxloom.runtime.boundaries import Edge

    nx, ny, h = 9, 6, kernel.halo
    i, j, ux, uy, dx = _grid(nx, ny, h)
    q = np.sin(0.7 * i) + np.cos(1.3 * j)
    sea = 0.5 + 0.1 * np.arange(1, h + 1)[None, :] + 0.01 * j                  # (y, ghost)
    inside = (slice(h, h + ny), slice(h, h + nx))
    along_x = kernel.sweep(q, ux, dx, 1, edges=(Edge("wall"), Edge("inflow", sea)))
    along_y = kernel.sweep(q, uy, 0.3, 0, edges=(Edge("outflow"), Edge("wall")))
    periodic_x = kernel.sweep(q, ux, dx, 1)
    return along_x[inside], along_y[inside], periodic_x[inside]


def printed_sweeps(output: str, nx: int, ny: int) -> tuple[np.ndarray, np.ndarray]:
    """The two (status, field) blocks a sweep host prints, as C-order fields; both
    statuses must be 0."""
    words = output.split()
    assert words[0] == "0" and words[1 + nx * ny] == "0", words[:1] + words[1 + nx * ny:][:1]
    along_x = np.array(words[1:1 + nx * ny], float).reshape(ny, nx)
    along_y = np.array(words[2 + nx * ny:], float).reshape(ny, nx)
    return along_x, along_y
